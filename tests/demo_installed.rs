//! `retake demo` from an installed binary: a copy of the binary, run from an unrelated
//! folder with the checkout made unreachable (an empty tmpfs mounted over it in a private
//! mount namespace, by util-linux `unshare`), must still run the whole demo.

mod common;

use std::path::Path;
use std::process::Command;

use common::{demo, read_jsonl, root};

/// Every file under `dir`, as (path relative to `dir`, bytes), sorted.
fn files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let rel = p.strip_prefix(dir).unwrap().display().to_string();
                out.push((rel, std::fs::read(&p).unwrap()));
            }
        }
    }
    out.sort();
    out
}

/// Run `bin demo --out out -j 2` in `work` with the checkout hidden. None when this machine
/// cannot make a mount namespace.
fn demo_without_checkout(bin: &Path, work: &Path) -> Option<std::process::Output> {
    let o = Command::new("unshare")
        .args(["--mount", "--map-root-user", "sh", "-c"])
        .arg(r#"mount -t tmpfs none "$1" && [ -z "$(ls -A "$1")" ] && cd "$2" && exec "$3" demo --out out -j 2"#)
        .args(["sh".as_ref(), root().as_os_str(), work.as_os_str(), bin.as_os_str()])
        // Whatever the build said about the checkout, it is not there now.
        .env("CARGO_MANIFEST_DIR", "/nonexistent")
        .output()
        .ok()?;
    let err = String::from_utf8_lossy(&o.stderr);
    if !o.status.success() && (err.contains("unshare failed") || err.contains("mount:")) {
        eprintln!("no mount namespace here: {err}");
        return None;
    }
    Some(o)
}

#[test]
fn an_installed_binary_runs_the_demo_with_no_checkout_reachable() {
    let tmp = tempfile::tempdir().unwrap();
    assert!(
        !tmp.path().starts_with(root()),
        "the temporary folder must lie outside the checkout"
    );
    let bin = tmp.path().join("bin/retake");
    std::fs::create_dir_all(bin.parent().unwrap()).unwrap();
    std::fs::copy(env!("CARGO_BIN_EXE_retake"), &bin).unwrap();
    let work = tmp.path().join("elsewhere");
    std::fs::create_dir_all(&work).unwrap();
    let Some(o) = demo_without_checkout(&bin, &work) else {
        assert!(
            !std::env::var("CI").is_ok_and(|v| v == "true"),
            "CI=true: this test needs `unshare --mount --map-root-user` (util-linux) to hide the \
             checkout"
        );
        eprintln!("SKIPPED: cannot hide the checkout on this machine (no mount namespace)");
        return;
    };
    assert!(
        o.status.success(),
        "demo failed without the checkout:\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let out = work.join("out");
    let takes = read_jsonl(&out.join("manifest.jsonl"));
    assert_eq!(takes.len(), 40);
    for t in &takes {
        assert!(
            out.join(t["audio"].as_str().unwrap()).is_file(),
            "{}",
            t["id"]
        );
    }
    // The demo set written out is the checkout's, file for file (the generator script and
    // anything else not needed to run stay behind).
    let shipped = files(&out.join("demo_audio"));
    let wanted: Vec<_> = files(&demo())
        .into_iter()
        .filter(|(p, _)| p != "make_demo.py")
        .collect();
    assert_eq!(
        shipped.iter().map(|f| &f.0).collect::<Vec<_>>(),
        wanted.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    assert!(
        shipped == wanted,
        "a shipped demo file differs from the checkout's"
    );
    // A second run finds the same files and keeps every clip: nothing is rewritten.
    let before = std::fs::metadata(out.join("demo_audio/clips/dock-001.wav"))
        .unwrap()
        .modified()
        .unwrap();
    let manifest = std::fs::read(out.join("manifest.jsonl")).unwrap();
    let again = demo_without_checkout(&bin, &work).expect("namespace worked once");
    assert!(again.status.success());
    let after = std::fs::metadata(out.join("demo_audio/clips/dock-001.wav"))
        .unwrap()
        .modified()
        .unwrap();
    assert_eq!(before, after);
    assert_eq!(std::fs::read(out.join("manifest.jsonl")).unwrap(), manifest);
}

/// `retake demo --report` writes the report page of the demo run, with the recipe's seed and
/// the run's wall time filled in (a plain `retake report` afterwards could not know them).
#[test]
fn demo_with_report_writes_the_page_with_the_run_figures() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("d");
    let o = common::retake(&["demo", "--out", out.to_str().unwrap(), "--report"]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let page = std::fs::read_to_string(out.join("report/index.html")).unwrap();
    // The demo recipe's seed (demo_audio/recipe.toml), and a measured wall time.
    assert!(
        page.contains("2026"),
        "the page does not show the recipe seed"
    );
    assert!(
        !page.contains("not recorded"),
        "the page lacks the run's wall time"
    );
    assert_eq!(read_jsonl(&out.join("manifest.jsonl")).len(), 40);
}
