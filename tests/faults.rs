//! Crashes and faults, with the real binary: kill -9 at random moments then a resume, a
//! file-size limit that makes writes fail like a full disk, and two runs at one folder.
//! Every case must end byte-identical to a clean run of the same command.
//!
//! The work is the demo recipe on five demo clips with two threads (a few seconds), so the
//! whole file stays well under two minutes on two cores.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::OnceLock;
use std::time::{Duration, Instant};

use common::{demo, files_under, read_jsonl};

/// Clips of the demo used here.
const CLIPS: usize = 5;

/// A manifest of the first [`CLIPS`] demo clips in `dir` (audio paths made absolute).
fn manifest(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(demo().join("manifest.jsonl")).unwrap();
    let lines: Vec<String> = text
        .lines()
        .take(CLIPS)
        .map(|l| {
            let mut v: serde_json::Value = serde_json::from_str(l).unwrap();
            let audio = demo().join(v["audio"].as_str().unwrap());
            v["audio"] = audio.display().to_string().into();
            v.to_string()
        })
        .collect();
    let path = dir.join("in.jsonl");
    std::fs::write(&path, lines.join("\n") + "\n").unwrap();
    path
}

fn command(manifest: &Path, out: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_retake"));
    c.arg("run")
        .arg(demo().join("recipe.toml"))
        .arg("-i")
        .arg(manifest)
        .arg("-o")
        .arg(out)
        .args(["-j", "2"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    c
}

fn finish(child: Child) -> (Option<i32>, String) {
    let o = child.wait_with_output().unwrap();
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stderr).to_string(),
    )
}

/// Files under a folder as (relative path, bytes).
type Tree = Vec<(String, Vec<u8>)>;

/// A clean run's files and how long it took, made once for every test here.
fn clean() -> &'static (Tree, Duration) {
    static CLEAN: OnceLock<(Tree, Duration)> = OnceLock::new();
    CLEAN.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let out = tmp.path().join("clean");
        let t = Instant::now();
        let (code, err) = finish(command(&manifest(tmp.path()), &out).spawn().unwrap());
        assert_eq!(code, Some(0), "{err}");
        (files_under(&out), t.elapsed())
    })
}

fn assert_same_as_clean(out: &Path, what: &str) {
    let (want, _) = clean();
    let got = files_under(out);
    let names = |v: &[(String, Vec<u8>)]| v.iter().map(|f| f.0.clone()).collect::<Vec<_>>();
    assert_eq!(names(&got), names(want), "{what}: other files");
    for (g, w) in got.iter().zip(want) {
        assert!(g.1 == w.1, "{what}: {} differs from a clean run", g.0);
    }
}

/// A fixed sequence of numbers in [0, 1) (a 64-bit LCG, Knuth's MMIX constants), so a
/// failing trial can be run again.
fn uniform(state: &mut u64) -> f64 {
    *state = state
        .wrapping_mul(6_364_136_223_846_793_005)
        .wrapping_add(1_442_695_040_888_963_407);
    (*state >> 11) as f64 / (1u64 << 53) as f64
}

#[test]
fn ten_random_kills_then_a_resume_match_a_clean_run() {
    let (_, took) = clean();
    let tmp = tempfile::tempdir().unwrap();
    let manifest = manifest(tmp.path());
    let mut state = 2026;
    for trial in 0..10 {
        let out = tmp.path().join(format!("trial{trial}"));
        // Odd trials are killed twice: a resume can itself be interrupted.
        for _ in 0..1 + trial % 2 {
            let at = took.mul_f64(0.05 + 0.9 * uniform(&mut state));
            let mut child = command(&manifest, &out).spawn().unwrap();
            std::thread::sleep(at);
            child.kill().unwrap(); // SIGKILL
            let _ = child.wait();
        }
        let (code, err) = finish(command(&manifest, &out).spawn().unwrap());
        assert_eq!(code, Some(0), "trial {trial}: {err}");
        assert_same_as_clean(&out, &format!("trial {trial}"));
    }
}

#[test]
fn a_file_size_limit_stops_the_run_with_exit_1_and_a_resume_after_matches() {
    let (want, _) = clean();
    // A limit between the smallest and the largest take: some clips finish, then a write
    // fails with EFBIG, as a full disk fails with ENOSPC. The limit is set by the shell
    // (`ulimit -f`, in 1024-byte blocks in bash); SIGXFSZ is ignored, so the write returns
    // the error instead of killing the process. No privileges needed.
    let mut sizes: Vec<usize> = want
        .iter()
        .filter(|f| f.0.ends_with(".wav"))
        .map(|f| f.1.len())
        .collect();
    sizes.sort_unstable();
    let limit_kib = sizes[sizes.len() / 2] / 1024;
    let tmp = tempfile::tempdir().unwrap();
    let manifest = manifest(tmp.path());
    let out = tmp.path().join("out");
    let mut inner = command(&manifest, &out);
    let args: Vec<String> = std::iter::once(inner.get_program())
        .chain(inner.get_args())
        .map(|a| format!("'{}'", a.to_string_lossy()))
        .collect();
    let script = format!(
        "ulimit -f {limit_kib}; trap '' XFSZ; exec {}",
        args.join(" ")
    );
    let o = Command::new("bash")
        .arg("-c")
        .arg(&script)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains("cannot write") && err.contains("File too large"),
        "{err}"
    );
    // No manifest lists anything while the run is unfinished, and no temporary file is left.
    assert!(!out.join("manifest.jsonl").exists());
    let temps: Vec<String> = files_under(&out)
        .into_iter()
        .map(|f| f.0)
        .filter(|n| n.ends_with(".part"))
        .collect();
    assert!(temps.is_empty(), "{temps:?}");
    // Space again: the same command finishes the job.
    let (code, err) = finish(inner.spawn().unwrap());
    assert_eq!(code, Some(0), "{err}");
    assert_same_as_clean(&out, "after the size limit");
}

#[test]
fn a_second_run_at_once_is_refused_and_the_first_finishes_identical() {
    clean();
    let tmp = tempfile::tempdir().unwrap();
    let manifest = manifest(tmp.path());
    let out = tmp.path().join("out");
    let mut first = command(&manifest, &out).spawn().unwrap();
    // Wait until the first holds the lock (its pid is in the lock file).
    let lock = out.join(".retake.lock");
    let t = Instant::now();
    while std::fs::read_to_string(&lock).map_or(true, |s| s.trim().is_empty()) {
        assert!(
            t.elapsed() < Duration::from_secs(10),
            "the first run never locked"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
    let t = Instant::now();
    let (code, err) = finish(command(&manifest, &out).spawn().unwrap());
    let refused_in = t.elapsed();
    assert!(
        first.try_wait().unwrap().is_none(),
        "the first run ended too soon to test"
    );
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains(&format!("process id {}", first.id())), "{err}");
    assert!(refused_in < Duration::from_secs(3), "{refused_in:?}");
    let o = first.wait_with_output().unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert_same_as_clean(&out, "the first of two runs");
}

#[test]
fn slicing_killed_anywhere_leaves_no_unlisted_slices_once_a_slicing_run_finishes() {
    let tmp = tempfile::tempdir().unwrap();
    let s = common::session::build(tmp.path(), 120.0);
    let out = tmp.path().join("out");
    let slice = |longest: &str| {
        let mut c = Command::new(env!("CARGO_BIN_EXE_retake"));
        c.arg("slice")
            .arg(&s.manifest)
            .arg("-o")
            .arg(&out)
            .args(["--longest", longest, "-j", "2"])
            .stdout(Stdio::null())
            .stderr(Stdio::piped());
        c
    };
    let listed = || -> Vec<String> {
        let mut v: Vec<String> = read_jsonl(&out.join("manifest.jsonl"))
            .iter()
            .map(|c| c["audio"].as_str().unwrap().to_string())
            .collect();
        v.sort();
        v
    };
    let on_disk = || -> Vec<String> {
        let mut v: Vec<String> = files_under(&out.join("slices"))
            .into_iter()
            .map(|f| format!("slices/{}", f.0))
            .collect();
        v.sort();
        v
    };
    let mut state = 7;
    for trial in 0..4 {
        // A finished slicing run with one limit, then another limit killed at some moment (the
        // last trial: just after its new manifest appears, before the old slices go).
        let first = if trial % 2 == 0 { "9" } else { "5" };
        let (code, err) = finish(slice(first).spawn().unwrap());
        assert!(matches!(code, Some(0 | 3)), "{err}");
        let before = std::fs::read(out.join("manifest.jsonl")).unwrap();
        let mut child = slice("7").spawn().unwrap();
        if trial == 3 {
            let t = Instant::now();
            while std::fs::read(out.join("manifest.jsonl")).is_ok_and(|m| m == before)
                || !out.join("manifest.jsonl").exists()
            {
                if t.elapsed() > Duration::from_secs(10) {
                    break;
                }
            }
        } else {
            std::thread::sleep(Duration::from_secs_f64(0.3 * uniform(&mut state)));
        }
        child.kill().unwrap();
        let _ = child.wait();
        let (code, err) = finish(slice("7").spawn().unwrap());
        assert!(matches!(code, Some(0 | 3)), "{err}");
        assert_eq!(
            on_disk(),
            listed(),
            "trial {trial}: slices not in the manifest"
        );
    }
}
