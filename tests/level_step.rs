//! The `level` step: loudness targets checked by pyloudnorm (PyPI) on the written takes,
//! peak targets, the ceiling, silent takes and bad keys.

mod common;

use common::run_recipe;

const RATE: u32 = 16_000;

/// Speech-like: noise bursts of 150-400 ms with pauses, at a low level.
fn speechlike(secs: f64, amp: f32) -> Vec<f32> {
    let mut s = 11u64;
    let mut rnd = move || {
        s = s
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (s >> 40) as f32 / (1u64 << 24) as f32
    };
    let n = (secs * f64::from(RATE)) as usize;
    let mut x = vec![0.0f32; n];
    let mut i = 1600;
    while i < n {
        let len = (2400.0 + 4000.0 * rnd()) as usize;
        let end = (i + len).min(n);
        for (k, v) in x[i..end].iter_mut().enumerate() {
            let env = (std::f32::consts::PI * k as f32 / len as f32).sin();
            *v = amp * env * (rnd() - 0.5);
        }
        i += len + (1600.0 + 4000.0 * rnd()) as usize;
    }
    x
}

/// pyloudnorm (PyPI) integrated loudness of each file given.
const PYLN: &str = r#"
import sys, json
import soundfile as sf, pyloudnorm as pyln
out = []
for p in sys.argv[1:]:
    x, rate = sf.read(p)
    out.append(pyln.Meter(rate).integrated_loudness(x))
print(json.dumps(out))
"#;

#[test]
fn loudness_and_peak_targets_are_met() {
    let tmp = tempfile::tempdir().unwrap();
    common::write_wav_float(&tmp.path().join("s.wav"), RATE, &speechlike(8.0, 0.2));
    let m = tmp.path().join("in.jsonl");
    std::fs::write(
        &m,
        r#"{"id":"s","audio":"s.wav","text":"pallet two ready"}"#.to_string() + "\n",
    )
    .unwrap();
    let recipe = "takes = 4\nformat = \"float32\"\n[[step]]\ndo = \"level\"\nlufs = { low = -35.0, high = -20.0 }\n";
    let (code, err, takes) = run_recipe(tmp.path(), recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    let files: Vec<String> = takes
        .iter()
        .map(|t| {
            tmp.path()
                .join("out")
                .join(t["audio"].as_str().unwrap())
                .display()
                .to_string()
        })
        .collect();
    let args: Vec<&str> = files.iter().map(String::as_str).collect();
    let reference: Vec<f64> = serde_json::from_str(&common::run_python(PYLN, &args)).unwrap();
    for (take, py) in takes.iter().zip(reference) {
        let rec = &take["origin"]["steps"][0];
        let (want, got) = (
            rec["drawn"]["lufs"].as_f64().unwrap(),
            rec["measured"]["lufs"].as_f64().unwrap(),
        );
        // Our BS.1770-4 meter on the written samples hits the target (a gain moves
        // integrated loudness by exactly its dB when the gating keeps the same blocks).
        assert!((got - want).abs() < 0.01, "{want} vs measured {got}");
        // pyloudnorm agrees within 0.1 LU (the issue's bound for speech-like signals).
        assert!((py - want).abs() < 0.1, "target {want}, pyloudnorm {py}");
    }
    let recipe = "takes = 3\n[[step]]\ndo = \"level\"\npeak_dbfs = [-12.0, -3.0]\n";
    let (code, err, takes) = run_recipe(tmp.path(), recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    for take in &takes {
        let rec = &take["origin"]["steps"][0];
        let (want, got) = (
            rec["drawn"]["peak_dbfs"].as_f64().unwrap(),
            rec["measured"]["peak_dbfs"].as_f64().unwrap(),
        );
        assert!((got - want).abs() < 0.001, "{want} vs {got}");
    }
}

#[test]
fn ceiling_wins_and_silence_is_skipped() {
    let tmp = tempfile::tempdir().unwrap();
    common::write_wav_float(&tmp.path().join("s.wav"), RATE, &speechlike(6.0, 0.2));
    common::write_wav_float(
        &tmp.path().join("z.wav"),
        RATE,
        &vec![0.0; 3 * RATE as usize],
    );
    let m = tmp.path().join("in.jsonl");
    std::fs::write(
        &m,
        [
            r#"{"id":"s","audio":"s.wav","text":"a"}"#,
            r#"{"id":"z","audio":"z.wav","text":"b"}"#,
        ]
        .join("\n")
            + "\n",
    )
    .unwrap();
    // -3 LUFS is far louder than a -1 dBFS ceiling allows for this bursty signal.
    let (code, err, takes) = run_recipe(
        tmp.path(),
        "takes = 1\n[[step]]\ndo = \"level\"\nlufs = -3.0\n",
        &m,
    );
    assert_eq!(code, Some(0), "{err}");
    let s = &takes.iter().find(|t| t["origin"]["source"] == "s").unwrap()["origin"]["steps"][0];
    assert!(
        (s["measured"]["peak_dbfs"].as_f64().unwrap() + 1.0).abs() < 0.001,
        "{s}"
    );
    assert!(s["measured"]["lufs"].as_f64().unwrap() < -3.5, "{s}");
    let z = &takes.iter().find(|t| t["origin"]["source"] == "z").unwrap()["origin"]["steps"][0];
    assert_eq!(z["ran"], false);
    assert!(z["note"].as_str().unwrap().contains("silent"), "{z}");
    for (step, says) in [
        ("do = \"level\"", "missing"),
        ("do = \"level\"\nlufs = 3", "[-70, 0]"),
        (
            "do = \"level\"\npeak_dbfs = -6\nceiling_db = 2",
            "above full scale",
        ),
        ("do = \"level\"\nlufs = -23\npeak_dbfs = -6", "not both"),
    ] {
        let (code, err, _) = run_recipe(tmp.path(), &format!("takes = 1\n[[step]]\n{step}\n"), &m);
        assert_eq!(code, Some(2), "{step}: {err}");
        assert!(
            err.contains("step 1 (level):") && err.contains(says),
            "{step}: {err}"
        );
    }
}
