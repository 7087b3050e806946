//! `retake bank`: load a noise bank and print what is in it, one row per file.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::noise::describe::{BankReport, describe};
use retake::noise::load_bank;

pub fn bank(dir: &Path, rate: u32, held_out: f64) -> ExitCode {
    match load_bank(dir, rate, held_out) {
        Err(e) => {
            eprintln!("retake: {e}");
            Exit::Failed.into()
        }
        Ok(b) => {
            print!("{}", render(&describe(&b), dir, held_out));
            Exit::Done.into()
        }
    }
}

/// The whole printout: heading, table, warnings, total.
fn render(r: &BankReport, dir: &Path, held_out: f64) -> String {
    let header = [
        "file",
        "category",
        "part",
        "secs",
        "dBFS",
        "centroid Hz",
        "spread dB",
    ];
    // Text columns are left-aligned, figures right-aligned.
    let numeric = [false, false, false, true, true, true, true];
    let rows: Vec<[String; 7]> = r
        .files
        .iter()
        .map(|f| {
            [
                f.rel_path.clone(),
                f.category.clone(),
                if f.held_out { "held-out" } else { "train" }.to_string(),
                format!("{:.2}", f.duration_s),
                format!("{:.1}", f.level_dbfs),
                f.centroid_hz.map_or("-".to_string(), |c| format!("{c:.0}")),
                format!("{:.1}", f.level_spread_db),
            ]
        })
        .collect();
    let mut width = header.map(str::len);
    for row in &rows {
        for (w, cell) in width.iter_mut().zip(row) {
            *w = (*w).max(cell.chars().count());
        }
    }
    let line = |cells: &[String]| {
        let mut s = String::new();
        for (i, cell) in cells.iter().enumerate() {
            if i > 0 {
                s.push_str("  ");
            }
            let pad = " ".repeat(width[i] - cell.chars().count());
            if numeric[i] {
                s.push_str(&pad);
                s.push_str(cell);
            } else {
                s.push_str(cell);
                if i + 1 < cells.len() {
                    s.push_str(&pad);
                }
            }
        }
        s.push('\n');
        s
    };

    let mut out = format!(
        "noise bank {} at {} Hz, held-out fraction {held_out}\n\n",
        dir.display(),
        r.rate
    );
    out.push_str(&line(&header.map(String::from)));
    out.push_str(&line(&width.map(|w| "-".repeat(w))));
    for row in &rows {
        out.push_str(&line(row));
    }
    out.push('\n');
    for w in &r.warnings {
        out.push_str(&format!("warning: {w}\n"));
    }
    if !r.warnings.is_empty() {
        out.push('\n');
    }
    let plural =
        |n: usize, one: &str, many: &str| format!("{n} {}", if n == 1 { one } else { many });
    out.push_str(&format!(
        "total: {} in {}, {:.1} s (train {} / {:.1} s, held-out {} / {:.1} s), {} skipped, {}\n",
        plural(r.files.len(), "file", "files"),
        plural(r.categories, "category", "categories"),
        r.train.seconds + r.held_out.seconds,
        r.train.files,
        r.train.seconds,
        r.held_out.files,
        r.held_out.seconds,
        r.skipped.len(),
        plural(r.warnings.len(), "warning", "warnings"),
    ));
    out
}
