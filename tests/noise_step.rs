//! The `noise` step end to end: exact SNR checked from the written stems by numpy, the
//! clipping guard, silent speech, held-out noise, layers and bad input.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use retake::dsp::mix::excerpt;
use retake::noise::is_held_out;
use serde_json::Value;

fn retake(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_retake"))
        .args(args)
        .output()
        .expect("run retake")
}

fn demo() -> PathBuf {
    common::root().join("demo_audio")
}

fn read_jsonl(path: &Path) -> Vec<Value> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// Run `recipe` (text) over `manifest` into `dir/out`; returns (exit code, stderr, takes).
fn run(dir: &Path, recipe: &str, manifest: &Path) -> (Option<i32>, String, Vec<Value>) {
    let r = dir.join("recipe.toml");
    std::fs::write(&r, recipe).unwrap();
    let out = dir.join("out");
    let o = retake(&[
        "run",
        r.to_str().unwrap(),
        "-i",
        manifest.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&o.stderr).to_string();
    let takes = if out.join("manifest.jsonl").exists() {
        read_jsonl(&out.join("manifest.jsonl"))
    } else {
        vec![]
    };
    (o.status.code(), stderr, takes)
}

fn noise_record(take: &Value) -> &Value {
    take["origin"]["steps"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["step"] == "noise")
        .unwrap()
}

/// Independent SNR from the stems: numpy (PyPI) reads the float stems with soundfile
/// (PyPI) and computes 10·log10(P_speech / P_noise) over the given sample ranges.
const NUMPY_SNR: &str = r#"
import json, sys
import numpy as np, soundfile as sf
jobs = json.load(open(sys.argv[1]))
out = []
for j in jobs:
    s, _ = sf.read(j["clean"], dtype="float64")
    n, _ = sf.read(j["noise"], dtype="float64")
    # libsndfile reads 16-bit PCM as v / 32768; retake writes round(x * 32767).
    m, _ = sf.read(j["mix"], dtype="float64")
    m = m * 32768 / 32767
    idx = np.concatenate([np.arange(a, b) for a, b in j["ranges"]])
    snr = 10 * np.log10(np.mean(s[idx] ** 2) / np.mean(n[idx] ** 2))
    out.append([snr, float(np.max(np.abs(m - (s + n))))])
print(json.dumps(out))
"#;

#[test]
fn snr_from_the_stems_matches_the_draw_within_0_05_db() {
    let tmp = tempfile::tempdir().unwrap();
    let mut jobs = Vec::new();
    let mut expected = Vec::new();
    for (i, snr) in [-5.0, 0.0, 10.0, 30.0].into_iter().enumerate() {
        for over in ["lines", "clip"] {
            let dir = tmp.path().join(format!("r{i}-{over}"));
            std::fs::create_dir_all(&dir).unwrap();
            let recipe = format!(
                "seed = {i}\ntakes = 1\n[[step]]\ndo = \"speed\"\nfactor = 0.9\n[[step]]\ndo = \"noise\"\nbank = \"{}\"\nsnr_db = {snr}\nsnr_over = \"{over}\"\nstems = true\n",
                demo().join("noise").display()
            );
            let (code, err, takes) = run(&dir, &recipe, &demo().join("manifest.jsonl"));
            assert_eq!(code, Some(0), "{err}");
            for take in &takes {
                let rec = noise_record(take);
                let measured = rec["measured"]["snr_db"].as_f64().unwrap();
                assert!(
                    (measured - snr).abs() < 0.05,
                    "recorded {measured} for draw {snr}"
                );
                let rate = 16_000.0;
                let n = (take["duration"].as_f64().unwrap() * rate).round() as usize;
                let timed = take["lines"].as_array().filter(|_| over == "lines");
                let mut ranges: Vec<(usize, usize)> = match timed {
                    // The step measures over the lines in the take's timeline; the noise step
                    // is last, so those are the rewritten lines in the manifest.
                    Some(lines) => lines
                        .iter()
                        .map(|l| {
                            let at =
                                |k: &str| ((l[k].as_f64().unwrap() * rate).round() as usize).min(n);
                            (at("start"), at("end"))
                        })
                        .collect(),
                    None => vec![(0, n)],
                };
                ranges.sort_unstable();
                let out = dir.join("out");
                jobs.push(serde_json::json!({
                    "clean": out.join(rec["stems"]["clean"].as_str().unwrap()),
                    "noise": out.join(rec["stems"]["noise"].as_str().unwrap()),
                    "mix": out.join(take["audio"].as_str().unwrap()),
                    "ranges": ranges,
                }));
                expected.push((snr, measured, take["id"].as_str().unwrap().to_string()));
            }
        }
    }
    let jobs_path = tmp.path().join("jobs.json");
    std::fs::write(&jobs_path, serde_json::to_string(&jobs).unwrap()).unwrap();
    let got: Vec<(f64, f64)> = serde_json::from_str(&common::run_python(
        NUMPY_SNR,
        &[jobs_path.to_str().unwrap()],
    ))
    .unwrap();
    assert_eq!(got.len(), 80);
    for ((numpy_snr, mix_err), (drawn, measured, id)) in got.into_iter().zip(expected) {
        assert!(
            (numpy_snr - drawn).abs() < 0.05,
            "{id}: numpy {numpy_snr:.4} dB vs drawn {drawn}"
        );
        assert!(
            (numpy_snr - measured).abs() < 0.01,
            "{id}: numpy {numpy_snr:.4} vs recorded {measured:.4}"
        );
        // The written 16-bit mixture is the sum of the stems within rounding to 16 bits.
        assert!(
            mix_err <= 0.5 / 32767.0 + 1e-7,
            "{id}: mix differs from clean + noise by {mix_err}"
        );
    }
}

#[test]
fn loop_seams_have_no_step() {
    // The criterion of the issue: at a seam the largest sample-to-sample difference is no
    // larger than elsewhere in the noise. Checked on every demo noise recording, looped
    // four times from several offsets.
    for category in ["compressor", "fans", "beeper"] {
        let dir = demo().join("noise").join(category);
        let file = std::fs::read_dir(&dir)
            .unwrap()
            .next()
            .unwrap()
            .unwrap()
            .path();
        let noise = retake::audio::decode(&file, retake::audio::ChannelPolicy::Mix)
            .unwrap()
            .samples;
        let max_step = |x: &[f32]| {
            x.windows(2)
                .map(|w| (w[1] - w[0]).abs())
                .fold(0.0f32, f32::max)
        };
        let elsewhere = max_step(&noise);
        let fade = 800; // 50 ms at 16 kHz, the default
        let period = noise.len() - fade;
        for offset in [0, noise.len() / 3, period - 1] {
            let y = excerpt(&noise, offset, 4 * noise.len(), fade);
            let at_seams = (1..4)
                .map(|k| k * period - offset % period)
                .map(|s| max_step(&y[s.saturating_sub(fade + 2)..(s + 2).min(y.len())]))
                .fold(0.0f32, f32::max);
            assert!(
                at_seams <= elsewhere,
                "{category} offset {offset}: seam step {at_seams} > {elsewhere}"
            );
        }
    }
}

#[test]
fn a_hard_loop_of_a_tone_clicks_and_the_crossfaded_one_does_not() {
    // Control for the seam check above: a 100 Hz tone whose length is not a whole number of
    // periods jumps by about 0.49 at a hard seam, 25 times its largest step elsewhere
    // (0.5 · 2π · 100 / 16000 ≈ 0.0196). Through a 50 ms crossfade the largest step stays
    // within 10 % of elsewhere: the blend's amplitude is held constant and its phase moves
    // by less than π over 800 samples, which adds at most π/800 rad per sample to the
    // tone's 0.039 (our derivation, from the crossfade's definition).
    let tone: Vec<f32> = (0..16_037)
        .map(|i| (0.5 * (2.0 * std::f64::consts::PI * 100.0 * i as f64 / 16_000.0).sin()) as f32)
        .collect();
    let max_step = |x: &[f32]| {
        x.windows(2)
            .map(|w| (w[1] - w[0]).abs())
            .fold(0.0f32, f32::max)
    };
    let elsewhere = max_step(&tone);
    let hard = excerpt(&tone, 0, 32_000, 0);
    assert!(
        max_step(&hard) > 10.0 * elsewhere,
        "{} vs {elsewhere}",
        max_step(&hard)
    );
    let soft = excerpt(&tone, 0, 32_000, 800);
    assert!(
        max_step(&soft) <= 1.1 * elsewhere,
        "{} vs {elsewhere}",
        max_step(&soft)
    );
}
