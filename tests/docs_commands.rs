//! The shell examples in docs/transcripts.md run as written: every ```sh block, in order,
//! from a scratch folder that sees the repository's demo_audio, with `retake` on the PATH.
//! Each command must succeed (exit status 0).

mod common;

use std::process::Command;

use common::root;

#[test]
fn transcript_examples_run_on_the_demo() {
    let doc = root().join("docs/transcripts.md");
    let text = std::fs::read_to_string(&doc).unwrap();
    let blocks = common::fenced_blocks(&text, "sh");
    assert!(blocks.len() >= 3, "examples in {}", doc.display());
    let tmp = tempfile::tempdir().unwrap();
    std::os::unix::fs::symlink(root().join("demo_audio"), tmp.path().join("demo_audio")).unwrap();
    let bin = std::path::Path::new(env!("CARGO_BIN_EXE_retake"))
        .parent()
        .unwrap()
        .to_path_buf();
    let path = format!(
        "{}:{}",
        bin.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    for (line, body) in blocks {
        for command in body.lines().filter(|l| !l.trim().is_empty()) {
            let o = Command::new("bash")
                .args(["-euo", "pipefail", "-c", command])
                .current_dir(tmp.path())
                .env("PATH", &path)
                .output()
                .unwrap();
            assert!(
                o.status.success(),
                "docs/transcripts.md block at line {line}: `{command}` exited {:?}\n{}{}",
                o.status.code(),
                String::from_utf8_lossy(&o.stdout),
                String::from_utf8_lossy(&o.stderr)
            );
        }
    }
}
