//! A clip whose predicted memory passes `--max-clip-memory` is a reject that says so and
//! points at `retake slice`; the clips under it are made. The prediction is the memory
//! model of `retake::memory` (its factors measured, see benches/memory.rs).

mod common;

use common::{demo, read_jsonl, retake};

#[test]
fn clips_over_the_memory_limit_are_rejects_pointing_at_slice() {
    let tmp = tempfile::tempdir().unwrap();
    let recipe = tmp.path().join("gain.toml");
    // Gain only: 16 kHz x 4 B x (2 held + 1) = 192 kB per second of clip, so 1 MiB holds
    // 5.46 s: the demo's 3.0 to 5.3 s clips fit, its 5.8 to 9.6 s clips do not.
    std::fs::write(&recipe, "takes = 1\n[[step]]\ndo = \"gain\"\ndb = 1.0\n").unwrap();
    let out = tmp.path().join("out");
    let o = retake(&[
        "run",
        recipe.to_str().unwrap(),
        "-i",
        demo().join("manifest.jsonl").to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--max-clip-memory",
        "1",
    ]);
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let rejects = read_jsonl(&out.join("rejects.jsonl"));
    let made = read_jsonl(&out.join("manifest.jsonl"));
    assert_eq!(rejects.len() + made.len(), 10);
    for t in &made {
        let d = t["duration"].as_f64().unwrap();
        assert!(d <= 5.46, "{} ({d} s) should have been refused", t["id"]);
    }
    for r in &rejects {
        let reason = r["reason"].as_str().unwrap();
        assert_eq!(r["field"], "audio");
        assert!(reason.contains("retake slice"), "{reason}");
        assert!(reason.contains("over the limit of 1 MiB"), "{reason}");
        assert!(reason.contains("192 kB per second"), "{reason}");
    }
    assert!(!rejects.is_empty() && !made.is_empty(), "{rejects:?}");
    // Nothing of a refused clip was decoded or written.
    for r in &rejects {
        let id = r["id"].as_str().unwrap();
        assert!(!out.join(format!("takes/{id}.t0.wav")).exists());
    }
}
