//! The shell examples in docs/transcripts.md run as written: every ```sh block, in order,
//! from a scratch folder that sees the repository's demo_audio, with `retake` on the PATH.
//! Each command must succeed (exit status 0).

mod common;

use common::root;

#[test]
fn transcript_examples_run_on_the_demo() {
    let text = std::fs::read_to_string(root().join("docs/transcripts.md")).unwrap();
    assert!(
        common::fenced_blocks(&text, "sh").len() >= 3,
        "examples in docs/transcripts.md"
    );
    let tmp = tempfile::tempdir().unwrap();
    std::os::unix::fs::symlink(root().join("demo_audio"), tmp.path().join("demo_audio")).unwrap();
    common::run_doc_commands("transcripts.md", tmp.path());
}
