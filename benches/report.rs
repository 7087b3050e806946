//! Time, size and peak memory of `retake::report::write_report` for the demo run, and for
//! synthetic manifests of 10,000 and 100,000 takes (the demo's 40 take records repeated
//! under new ids, all pointing at the demo's real take files, so the gallery decodes real
//! audio). Run with `cargo bench --bench report`.
//!
//! Each size is reported by a child process of this binary, so its peak resident memory
//! (`VmHWM` from /proc/self/status, Linux) is its own. Baseline for the time: reading the
//! same manifest once with serde_json and nothing else, the least any report must do.

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::time::Instant;

use retake::recipe;
use retake::report::{DEFAULT_SAMPLE, ReportSpec, write_report};
use retake::run::{self, RunSpec};
use serde_json::Value;

const SIZES: &[usize] = &[10_000, 100_000];

fn peak_rss_kb() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse().ok())
        })
        .unwrap_or(0)
}

fn dir_bytes(dir: &Path) -> u64 {
    std::fs::read_dir(dir)
        .map(|rd| {
            rd.flatten()
                .map(|e| {
                    let p = e.path();
                    if p.is_dir() {
                        dir_bytes(&p)
                    } else {
                        e.metadata().map_or(0, |m| m.len())
                    }
                })
                .sum()
        })
        .unwrap_or(0)
}

/// In the child: one report of `out`, printed as `seconds bytes peak_kb baseline_seconds`.
fn one(out: &Path) {
    let started = Instant::now();
    let f = std::fs::File::open(out.join("manifest.jsonl")).unwrap();
    let mut n = 0usize;
    for line in BufReader::new(f).lines() {
        let v: Value = serde_json::from_str(&line.unwrap()).unwrap();
        n += usize::from(v.is_object());
    }
    let baseline = started.elapsed().as_secs_f64();
    let recipe = out.join("recipe.toml");
    let started = Instant::now();
    let s = write_report(&ReportSpec {
        out,
        facts: None,
        recipe: Some(&recipe),
        input: None,
        sample: DEFAULT_SAMPLE,
        seed: None,
        show: &[],
    })
    .unwrap();
    let secs = started.elapsed().as_secs_f64();
    assert_eq!(s.takes as usize, n);
    println!(
        "{secs} {} {} {baseline}",
        dir_bytes(&out.join("report")),
        peak_rss_kb()
    );
}

/// The demo run into `dir/demo`.
fn demo_run(dir: &Path) -> PathBuf {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo_audio");
    let recipe_path = demo.join("recipe.toml");
    let plan = recipe::load(&recipe_path).unwrap();
    let out = dir.join("demo");
    run::run(
        &RunSpec {
            plan: &plan,
            recipe: Some(&recipe_path),
            input: &demo.join("manifest.jsonl"),
            out: &out,
            threads: None,
            shard: None,
            clip_memory_limit: retake::memory::DEFAULT_LIMIT_BYTES,
        },
        &|_| {},
    )
    .unwrap();
    std::fs::copy(&recipe_path, out.join("recipe.toml")).unwrap();
    out
}

/// `n` take records: the demo's repeated under ids `<id>~<copy>` (sources renamed alike, so
/// clips scale too), audio paths absolute to the demo's take files.
fn synthetic(demo: &Path, n: usize, out: &Path) {
    std::fs::create_dir_all(out).unwrap();
    let takes: Vec<Value> = std::fs::read_to_string(demo.join("manifest.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let mut w = std::io::BufWriter::new(std::fs::File::create(out.join("manifest.jsonl")).unwrap());
    for i in 0..n {
        let mut t = takes[i % takes.len()].clone();
        let copy = i / takes.len();
        let id = format!("{}~{copy}", t["id"].as_str().unwrap());
        let source = format!("{}~{copy}", t["origin"]["source"].as_str().unwrap());
        let audio = demo.join(t["audio"].as_str().unwrap());
        t["id"] = Value::from(id);
        t["origin"]["source"] = Value::from(source);
        t["audio"] = Value::from(audio.display().to_string());
        serde_json::to_writer(&mut w, &t).unwrap();
        w.write_all(b"\n").unwrap();
    }
    w.flush().unwrap();
    std::fs::File::create(out.join("rejects.jsonl")).unwrap();
    std::fs::copy(demo.join("recipe.toml"), out.join("recipe.toml")).unwrap();
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--one") {
        one(Path::new(&args[i + 1]));
        return;
    }
    let tmp = std::env::temp_dir().join(format!("retake-report-bench-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&tmp);
    std::fs::create_dir_all(&tmp).unwrap();
    let demo = demo_run(&tmp);
    let mut cases = vec![("demo (40 takes)".to_string(), demo.clone())];
    for &n in SIZES {
        let out = tmp.join(format!("synthetic-{n}"));
        synthetic(&demo, n, &out);
        cases.push((format!("{n} takes"), out));
    }
    println!(
        "{:<18} {:>10} {:>12} {:>12} {:>11} {:>12}",
        "manifest", "manifest MB", "report s", "takes/s", "report MB", "peak RSS MB"
    );
    for (name, out) in &cases {
        let o = std::process::Command::new(std::env::current_exe().unwrap())
            .args(["--one", out.to_str().unwrap()])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let text = String::from_utf8(o.stdout).unwrap();
        let f: Vec<f64> = text
            .split_whitespace()
            .map(|x| x.parse().unwrap())
            .collect();
        let takes = std::fs::read_to_string(out.join("manifest.jsonl"))
            .unwrap()
            .lines()
            .count();
        let manifest_mb = std::fs::metadata(out.join("manifest.jsonl")).unwrap().len() as f64 / 1e6;
        println!(
            "{name:<18} {manifest_mb:>10.1} {:>12.2} {:>12.0} {:>11.2} {:>12.1}   (reading the manifest alone: {:.2} s)",
            f[0],
            takes as f64 / f[0],
            f[1] / 1e6,
            f[2] / 1024.0,
            f[3]
        );
    }
    let _ = std::fs::remove_dir_all(&tmp);
}
