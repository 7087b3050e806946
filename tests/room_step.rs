//! The `room` step end to end: click onsets against rewritten timings, alignment and tail
//! policies, direct-to-reverberant ratio, and bad rooms.

mod common;

use std::path::{Path, PathBuf};

use common::{run_recipe as run, write_wav_float};
use serde_json::Value;

const RATE: u32 = 16_000;

fn read_wav(path: &Path) -> Vec<f32> {
    let mut r = hound::WavReader::open(path).unwrap();
    match r.spec().sample_format {
        hound::SampleFormat::Float => r.samples::<f32>().map(Result::unwrap).collect(),
        hound::SampleFormat::Int => r
            .samples::<i16>()
            .map(|s| f32::from(s.unwrap()) / 32768.0)
            .collect(),
    }
}

/// Clicks standing in for words: a 1 ms raised-cosine click every 0.35 s from 0.2 s over a
/// 3 s clip. Each click is a one-word line from its start to 10 ms later.
fn click_clip(dir: &Path) -> (PathBuf, Vec<f64>) {
    let n = 3 * RATE as usize;
    let mut x = vec![0.0f32; n];
    let times: Vec<f64> = (0..8).map(|i| 0.2 + 0.35 * f64::from(i)).collect();
    for &t in &times {
        let at = (t * f64::from(RATE)).round() as usize;
        for k in 0..16 {
            x[at + k] +=
                (0.5 * (1.0 - (2.0 * std::f64::consts::PI * k as f64 / 16.0).cos()) * 0.5) as f32;
        }
    }
    write_wav_float(&dir.join("clicks.wav"), RATE, &x);
    let lines: Vec<Value> = times
        .iter()
        .enumerate()
        .map(|(i, t)| {
            serde_json::json!({"start": t, "end": t + 0.01, "text": format!("c{i}"),
                "words": [{"start": t, "end": t + 0.01, "text": format!("c{i}")}]})
        })
        .collect();
    let m = dir.join("in.jsonl");
    std::fs::write(
        &m,
        serde_json::json!({"id": "clicks", "audio": "clicks.wav", "lines": lines}).to_string()
            + "\n",
    )
    .unwrap();
    (m, times)
}

/// Every click's onset (the first sample within ±20 ms reaching half the largest magnitude
/// there: the direct sound, since the response is normalised to a direct peak of 1) against
/// its rewritten timing.
fn check_onsets(dir: &Path, takes: &[Value], clicks: &[f64]) {
    for take in takes {
        let y = read_wav(&dir.join("out").join(take["audio"].as_str().unwrap()));
        let d = take["duration"].as_f64().unwrap();
        assert!((y.len() as f64 / f64::from(RATE) - d).abs() < 1e-9);
        let lines = take["lines"].as_array().unwrap();
        assert_eq!(lines.len(), clicks.len());
        for line in lines {
            let start = line["words"][0]["start"].as_f64().unwrap();
            assert!(start <= d && line["end"].as_f64().unwrap() <= d);
            // The click's own onset: the raised cosine reaches half its peak 4 samples
            // (0.25 ms) after it starts; within 1 ms of the rewritten timing (the bound).
            let onset = common::onset_near(&y, RATE, start, 0.5) - 4.0 / f64::from(RATE);
            assert!(
                (onset - start).abs() <= 0.001,
                "{}: click at {start:.4} s has onset {onset:.4} s",
                take["id"]
            );
        }
    }
}

#[test]
fn click_onsets_follow_rewritten_timings_in_simulated_rooms() {
    let tmp = tempfile::tempdir().unwrap();
    let (m, clicks) = click_clip(tmp.path());
    for (align, tail) in [
        ("trim", "cut"),
        ("shift", "cut"),
        ("trim", "keep"),
        ("shift", "keep"),
    ] {
        let recipe = format!(
            "takes = 3\nseed = 4\n[[step]]\ndo = \"speed\"\nfactor = [0.9, 1.1]\n[[step]]\ndo = \"room\"\nwidth_m = {{ low = 3.0, high = 8.0 }}\nlength_m = {{ low = 3.0, high = 10.0 }}\nheight_m = 3.0\nrt60_s = {{ low = 0.3, high = 0.8 }}\nalign = \"{align}\"\ntail = \"{tail}\"\nmax_ir_s = 1.0\n"
        );
        let (code, err, takes) = run(tmp.path(), &recipe, &m);
        assert_eq!(code, Some(0), "{align}/{tail}: {err}");
        assert_eq!(takes.len(), 3);
        for take in &takes {
            let rec = &take["origin"]["steps"][1];
            let delay = rec["measured"]["direct_delay_s"].as_f64().unwrap();
            assert!(delay > 0.0, "{rec}");
            let f = take["origin"]["steps"][0]["drawn"]["factor"]
                .as_f64()
                .unwrap();
            let d = take["duration"].as_f64().unwrap();
            let base = (3.0 * f64::from(RATE) / f).round() / f64::from(RATE);
            match (align, tail) {
                ("trim", "cut") => assert!((d - base).abs() < 1e-9, "{d} vs {base}"),
                ("shift", "cut") => assert!(
                    (d - base - delay).abs() <= 1.0 / f64::from(RATE),
                    "{d} vs {base} + {delay}"
                ),
                // keep: the reverberant tail follows the clip, at most the response's length.
                _ => assert!(
                    d > base + 0.05 && d <= base + 1.0 + delay,
                    "{align}/{tail}: {d} vs {base}"
                ),
            }
            assert!(rec["measured"]["rt60_s"].as_f64().is_some(), "{rec}");
        }
        check_onsets(tmp.path(), &takes, &clicks);
    }
}

/// A measured-style response: silence for `delay` s, a unit direct peak, then exponentially
/// decaying noise reaching -60 dB after `t60` s (textbook exponential decay).
fn synthetic_ir(delay: f64, t60: f64, len: f64) -> Vec<f32> {
    let n = (len * f64::from(RATE)) as usize;
    let d = (delay * f64::from(RATE)) as usize;
    let mut state = 7u64;
    let mut h = vec![0.0f32; n];
    h[d] = 1.0;
    for (i, s) in h.iter_mut().enumerate().skip(d + 40) {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let u = ((state >> 40) as f64 / (1u64 << 24) as f64) - 0.5;
        let t = (i - d) as f64 / f64::from(RATE);
        *s = (0.3 * u * (-6.9078 * t / t60).exp()) as f32;
    }
    h
}

#[test]
fn measured_responses_are_aligned_and_hit_the_drawn_drr() {
    let tmp = tempfile::tempdir().unwrap();
    let (m, clicks) = click_clip(tmp.path());
    let irs = tmp.path().join("irs");
    std::fs::create_dir_all(&irs).unwrap();
    write_wav_float(&irs.join("bay.wav"), RATE, &synthetic_ir(0.030, 0.5, 0.8));
    write_wav_float(
        &irs.join("corridor.wav"),
        RATE,
        &synthetic_ir(0.012, 0.9, 1.2),
    );
    let recipe =
        "takes = 6\n[[step]]\ndo = \"room\"\nirs = \"irs\"\ndrr_db = { low = 0.0, high = 10.0 }\n";
    let (code, err, takes) = run(tmp.path(), recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    for take in &takes {
        let rec = &take["origin"]["steps"][0];
        let file = rec["drawn"]["file"].as_str().unwrap();
        let delay = rec["measured"]["direct_delay_s"].as_f64().unwrap();
        let want = if file == "bay.wav" { 0.030 } else { 0.012 };
        assert!((delay - want).abs() < 1e-9, "{file}: {delay}");
        let (drawn, got) = (
            rec["drawn"]["drr_db"].as_f64().unwrap(),
            rec["measured"]["drr_db"].as_f64().unwrap(),
        );
        assert!((drawn - got).abs() < 0.1, "drr {drawn} vs {got}");
        // RT60 by Schroeder integration of the response used (ISO 3382-1 fit): the synthetic
        // decay is 60 dB in t60 seconds by construction.
        let t60 = rec["measured"]["rt60_s"].as_f64().unwrap();
        let want_t60 = if file == "bay.wav" { 0.5 } else { 0.9 };
        assert!(
            (t60 - want_t60).abs() < 0.1 * want_t60,
            "{file}: rt60 {t60}"
        );
    }
    check_onsets(tmp.path(), &takes, &clicks);
}

#[test]
fn bad_rooms_and_responses_are_recipe_errors() {
    let tmp = tempfile::tempdir().unwrap();
    let (m, _) = click_clip(tmp.path());
    let mk = |name: &str, h: &[f32]| {
        let d = tmp.path().join(name);
        std::fs::create_dir_all(&d).unwrap();
        write_wav_float(&d.join("r.wav"), RATE, h);
    };
    mk("zeros", &[0.0; 800]);
    mk("empty", &[]);
    mk("long", &synthetic_ir(0.01, 0.5, 3.0));
    let sim = "do = \"room\"\nwidth_m = 5\nlength_m = 4\nheight_m = 3\n";
    let cases = [
        (
            "do = \"room\"\nirs = \"zeros\"".to_string(),
            "irs:",
            "all zeros",
        ),
        (
            "do = \"room\"\nirs = \"empty\"".to_string(),
            "irs:",
            "r.wav",
        ),
        (
            "do = \"room\"\nirs = \"long\"".to_string(),
            "irs:",
            "longer than max_ir_s",
        ),
        (
            "do = \"room\"\nirs = \"nowhere\"".to_string(),
            "irs:",
            "no such folder",
        ),
        (format!("{sim}absorption = 1.5"), "absorption:", "(0, 1]"),
        (format!("{sim}absorption = 0"), "absorption:", "(0, 1]"),
        (sim.to_string(), "absorption:", "missing"),
        (
            format!("{sim}rt60_s = 0.1\nrt60_formula = \"sabine\""),
            "rt60_s:",
            "",
        ),
        (
            format!("{sim}absorption = 0.3\nwall_gap_m = 2.0"),
            "wall_gap_m:",
            "leaves no room",
        ),
        (
            format!("{sim}absorption = 0.3\nirs = \"zeros\""),
            "irs:",
            "not both",
        ),
        (
            "do = \"room\"\nwidth_m = -5\nlength_m = 4\nheight_m = 3\nabsorption = 0.3".to_string(),
            "width_m:",
            "",
        ),
    ];
    for (step, key, says) in cases {
        let recipe = format!("takes = 1\n[[step]]\n{step}\n");
        let (code, err, _) = run(tmp.path(), &recipe, &m);
        assert_eq!(code, Some(2), "{step}: {err}");
        assert!(
            err.contains(&format!("step 1 (room): {key}")),
            "{step}: {err}"
        );
        assert!(err.contains(says), "{step}: want `{says}`: {err}");
    }
}
