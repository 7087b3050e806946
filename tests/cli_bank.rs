//! `retake bank` end to end: the demo bank's table, a bank with a silent file, bad
//! arguments and a missing folder.

mod common;

use std::path::Path;
use std::process::{Command, Output};

fn retake(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_retake"))
        .args(args)
        .output()
        .expect("run retake")
}

fn stdout(o: &Output) -> String {
    String::from_utf8(o.stdout.clone()).unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8(o.stderr.clone()).unwrap()
}

/// The table rows (after the dashed rule, up to the first blank line), split on whitespace.
fn table_rows(out: &str) -> Vec<Vec<String>> {
    out.lines()
        .skip_while(|l| !l.starts_with("---"))
        .skip(1)
        .take_while(|l| !l.is_empty())
        .map(|l| l.split_whitespace().map(String::from).collect())
        .collect()
}

fn write_wav(path: &Path, samples: &[f32]) {
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: 16_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for &s in samples {
        w.write_sample((s * 32768.0).round() as i16).unwrap();
    }
    w.finalize().unwrap();
}

#[test]
fn demo_bank_table() {
    let dir = common::root().join("demo_audio/noise");
    let o = retake(&["bank", dir.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    let head = out.lines().find(|l| l.starts_with("file")).unwrap();
    let head: Vec<&str> = head.split_whitespace().collect();
    assert_eq!(
        head,
        [
            "file", "category", "part", "secs", "dBFS", "centroid", "Hz", "spread", "dB"
        ]
    );
    let rows = table_rows(&out);
    let files: Vec<(&str, &str, &str)> = rows
        .iter()
        .map(|r| (r[0].as_str(), r[1].as_str(), r[2].as_str()))
        .collect();
    assert_eq!(
        files,
        [
            ("beeper/forklift-reversing-dock.wav", "beeper", "train"),
            ("compressor/compressor-plantroom.wav", "compressor", "train"),
            ("fans/evaporator-fans-chamber2.wav", "fans", "train"),
        ]
    );
    let num = |r: &[String], i: usize| r[i].parse::<f64>().unwrap();
    // demo_audio/README.md: 10 s per file; about -17, -22 and -24 dBFS RMS; the beeper is
    // a 1.03 kHz tone, the compressor a 50 Hz hum with harmonics.
    for r in &rows {
        assert_eq!(num(r, 3), 10.0, "{r:?}");
    }
    let levels: Vec<f64> = rows.iter().map(|r| num(r, 4)).collect();
    for (got, want) in levels.iter().zip([-17.0, -22.0, -24.0]) {
        assert!((got - want).abs() < 0.5, "{levels:?}");
    }
    let centroid: Vec<f64> = rows.iter().map(|r| num(r, 5)).collect();
    assert!((900.0..1200.0).contains(&centroid[0]), "{centroid:?}");
    assert!(centroid[1] < 500.0, "{centroid:?}");
    // The beeper switches on and off: by far the largest spread of frame levels.
    let spread: Vec<f64> = rows.iter().map(|r| num(r, 6)).collect();
    assert!(spread[0] > 5.0, "{spread:?}");
    assert!(spread[0] > 3.0 * spread[1].max(spread[2]), "{spread:?}");
    assert!(!out.contains("warning: "), "{out}");
    let total = out.lines().last().unwrap();
    assert!(
        total.starts_with("total: 3 files in 3 categories, 30.0 s"),
        "{total}"
    );

    // Everything held out.
    let o = retake(&["bank", dir.to_str().unwrap(), "--held-out", "1"]);
    assert!(o.status.success());
    assert!(table_rows(&stdout(&o)).iter().all(|r| r[2] == "held-out"));
}

#[test]
fn silent_file_is_a_warning_not_a_failure() {
    let dir = tempfile::tempdir().unwrap();
    let r = dir.path();
    write_wav(&r.join("hum/a.wav"), &common::sine(50.0, 2.0, 16_000, 0.1));
    write_wav(&r.join("hum/b.wav"), &common::sine(100.0, 2.0, 16_000, 0.1));
    write_wav(&r.join("dead/mic-off.wav"), &vec![0.0; 32_000]);
    std::fs::write(r.join("notes.txt"), "site visit 3 March").unwrap();

    let o = retake(&["bank", r.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = stdout(&o);
    let rows = table_rows(&out);
    assert_eq!(rows.len(), 3, "{out}");
    // Digital silence: minus infinity dBFS and no centroid.
    assert_eq!(rows[0][0], "dead/mic-off.wav");
    assert_eq!((rows[0][4].as_str(), rows[0][5].as_str()), ("-inf", "-"));
    let warnings: Vec<&str> = out.lines().filter(|l| l.starts_with("warning: ")).collect();
    assert_eq!(warnings.len(), 2, "{out}");
    assert!(
        warnings[0].starts_with("warning: dead/mic-off.wav: mostly silent (100 %"),
        "{}",
        warnings[0]
    );
    assert!(
        warnings[1].starts_with("warning: notes.txt: skipped: "),
        "{}",
        warnings[1]
    );
    assert!(
        out.lines()
            .last()
            .unwrap()
            .ends_with("1 skipped, 2 warnings"),
        "{out}"
    );
}

#[test]
fn missing_folder_fails_with_its_path() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("site-noise");
    let o = retake(&["bank", missing.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(
        stderr(&o).trim(),
        format!("retake: {}: no such folder", missing.display())
    );
    assert!(stdout(&o).is_empty());
}

#[test]
fn bank_with_nothing_usable_fails() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("a.txt"), "not audio").unwrap();
    let o = retake(&["bank", dir.path().to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.contains(dir.path().to_str().unwrap()), "{err}");
    assert!(
        err.contains("none of the 1 files can be used (first: a.txt: "),
        "{err}"
    );
}

#[test]
fn bad_arguments_are_refused_by_the_parser() {
    let demo = common::root().join("demo_audio/noise");
    for (arg, option) in [
        ("--held-out=1.5", "--held-out"),
        ("--held-out=-0.1", "--held-out"),
        ("--rate=0", "--rate"),
    ] {
        let o = retake(&["bank", demo.to_str().unwrap(), arg]);
        assert_eq!(o.status.code(), Some(2), "{arg}");
        assert!(stderr(&o).contains(option), "{arg}: {}", stderr(&o));
    }
}

#[test]
fn readme_shows_the_real_output() {
    // The ```text block after the `retake bank demo_audio/noise` command in README.md is
    // what the command prints, run from the repository root.
    let readme = std::fs::read_to_string(common::root().join("README.md")).unwrap();
    let after = &readme[readme
        .find("retake bank demo_audio/noise")
        .expect("README shows `retake bank`")..];
    let start = after.find("```text\n").unwrap() + "```text\n".len();
    let shown = &after[start..start + after[start..].find("```").unwrap()];
    let o = Command::new(env!("CARGO_BIN_EXE_retake"))
        .args(["bank", "demo_audio/noise"])
        .current_dir(common::root())
        .output()
        .unwrap();
    assert!(o.status.success());
    assert_eq!(stdout(&o), shown);
}
