//! The `noise` step end to end: exact SNR checked from the written stems by numpy, the
//! clipping guard, silent speech, held-out noise, layers and bad input.

mod common;

use std::path::{Path, PathBuf};

use common::{demo, read_jsonl, run_recipe as run};
use retake::dsp::mix::excerpt;
use retake::noise::is_held_out;
use serde_json::Value;

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
    # libsndfile reads 16-bit PCM as v / 32768, the scale retake writes with.
    m, _ = sf.read(j["mix"], dtype="float64")
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
            mix_err <= 0.5 / 32768.0 + 1e-7,
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

/// A clip of `amp`-level 300 Hz bursts for words at 0.2–0.5 s and 0.8–1.1 s of a 1.5 s
/// file, with its one-line manifest.
fn burst_clip(dir: &Path, amp: f64) -> PathBuf {
    let x: Vec<f32> = (0..24_000)
        .map(|i| {
            let t = i as f64 / 16000.0;
            let on = (0.2..0.5).contains(&t) || (0.8..1.1).contains(&t);
            if on {
                (amp * (2.0 * std::f64::consts::PI * 300.0 * t).sin()) as f32
            } else {
                0.0
            }
        })
        .collect();
    common::write_wav_pcm16(&dir.join("c.wav"), 16000, &x);
    let m = dir.join("in.jsonl");
    std::fs::write(
        &m,
        r#"{"id":"c","audio":"c.wav","lines":[{"start":0.2,"end":1.1,"text":"bay two","words":[{"start":0.2,"end":0.5,"text":"bay"},{"start":0.8,"end":1.1,"text":"two"}]}]}"#
            .to_string()
            + "\n",
    )
    .unwrap();
    m
}

fn bank_recipe(bank: &Path, extra: &str) -> String {
    format!(
        "takes = 4\n[[step]]\ndo = \"noise\"\nbank = \"{}\"\n{extra}\n",
        bank.display()
    )
}

#[test]
fn loud_mix_is_scaled_down_with_the_snr_kept() {
    let tmp = tempfile::tempdir().unwrap();
    let m = burst_clip(tmp.path(), 0.95);
    let (code, err, takes) = run(
        tmp.path(),
        &bank_recipe(&demo().join("noise"), "snr_db = -5\nsnr_over = \"words\""),
        &m,
    );
    assert_eq!(code, Some(0), "{err}");
    for take in &takes {
        let rec = &noise_record(take)["measured"];
        assert!(rec["scaled_db"].as_f64().unwrap() < -1.0, "{rec}");
        assert!(
            (rec["snr_db"].as_f64().unwrap() + 5.0).abs() < 0.05,
            "{rec}"
        );
        let mut r =
            hound::WavReader::open(tmp.path().join("out").join(take["audio"].as_str().unwrap()))
                .unwrap();
        let peak = r
            .samples::<i16>()
            .map(|s| s.unwrap().unsigned_abs())
            .max()
            .unwrap();
        // Scaled to full scale exactly: a peak of -1.0 is code -32768; +1.0 is clamped to
        // 32767 (16-bit PCM's positive full scale, 1 - 2^-15).
        assert!((32_767..=32_768).contains(&peak), "{peak}");
    }
}

#[test]
fn silent_speech_is_skipped_or_rejected_as_the_recipe_says() {
    let tmp = tempfile::tempdir().unwrap();
    let m = burst_clip(tmp.path(), 0.0);
    let (code, err, takes) = run(
        tmp.path(),
        &bank_recipe(&demo().join("noise"), "snr_db = 10"),
        &m,
    );
    assert_eq!(code, Some(0), "{err}");
    for take in &takes {
        let rec = noise_record(take);
        assert_eq!(rec["ran"], false);
        assert!(rec["note"].as_str().unwrap().contains("silent"), "{rec}");
    }
    let (code, _, takes) = run(
        tmp.path(),
        &bank_recipe(
            &demo().join("noise"),
            "snr_db = 10\nsilent_speech = \"reject\"",
        ),
        &m,
    );
    assert_eq!(code, Some(3));
    assert!(takes.is_empty());
    let rejects = read_jsonl(&tmp.path().join("out/rejects.jsonl"));
    assert!(
        rejects[0]["reason"].as_str().unwrap().contains("silent"),
        "{}",
        rejects[0]
    );
}

#[test]
fn held_out_files_never_reach_training_takes() {
    let tmp = tempfile::tempdir().unwrap();
    let bank = tmp.path().join("bank");
    for cat in ["hum", "fan"] {
        std::fs::create_dir_all(bank.join(cat)).unwrap();
        for i in 0..10 {
            let x: Vec<f32> = (0..8000)
                .map(|k| 0.1 * ((k * (i + 3)) as f32 * 0.01).sin())
                .collect();
            common::write_wav_pcm16(&bank.join(cat).join(format!("n{i}.wav")), 16000, &x);
        }
    }
    let m = burst_clip(tmp.path(), 0.3);
    for part in ["train", "held_out"] {
        let extra = format!(
            "snr_db = 10\nheld_out = 0.3\npart = \"{part}\"\nweights = {{ hum = 3, fan = 1 }}"
        );
        let recipe = bank_recipe(&bank, &extra).replace("takes = 4", "takes = 60");
        let (code, err, takes) = run(tmp.path(), &recipe, &m);
        assert_eq!(code, Some(0), "{err}");
        let mut hum = 0;
        for take in &takes {
            let file = noise_record(take)["drawn"]["file"]
                .as_str()
                .unwrap()
                .to_string();
            // The split is a stable hash of the path inside the bank (retake::noise::is_held_out).
            assert_eq!(
                is_held_out(&file, 0.3),
                part == "held_out",
                "{file} in {part} takes"
            );
            hum += usize::from(file.starts_with("hum/"));
        }
        // Weights 3:1: about 45 of 60 takes use the hum (binomial sd 3.4).
        assert!((33..=57).contains(&hum), "{hum} hum takes of 60");
    }
}

#[test]
fn two_layers_each_hit_their_own_snr() {
    let tmp = tempfile::tempdir().unwrap();
    let m = burst_clip(tmp.path(), 0.3);
    let noise = demo().join("noise");
    let recipe = format!(
        "takes = 3\n[[step]]\ndo = \"noise\"\nbank = \"{0}\"\nweights = {{ compressor = 1 }}\nsnr_db = 25\n[[step]]\ndo = \"noise\"\nbank = \"{0}\"\nweights = {{ beeper = 1 }}\nsnr_db = {{ low = 5, high = 15 }}\nsnr_over = \"active\"\n",
        noise.display()
    );
    let (code, err, takes) = run(tmp.path(), &recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    for take in &takes {
        let steps = take["origin"]["steps"].as_array().unwrap();
        assert_eq!(steps[0]["drawn"]["category"], "compressor");
        assert_eq!(steps[1]["drawn"]["category"], "beeper");
        for s in steps {
            let (d, got) = (
                s["drawn"]["snr_db"].as_f64().unwrap(),
                s["measured"]["snr_db"].as_f64().unwrap(),
            );
            assert!((d - got).abs() < 0.05, "{s}");
        }
        assert_eq!(steps[1]["measured"]["snr_over"], "active");
    }
}

#[test]
fn bad_banks_and_keys_are_recipe_errors_naming_the_key() {
    let tmp = tempfile::tempdir().unwrap();
    let m = burst_clip(tmp.path(), 0.3);
    let empty = tmp.path().join("empty");
    std::fs::create_dir_all(&empty).unwrap();
    let junk = tmp.path().join("junk");
    std::fs::create_dir_all(&junk).unwrap();
    std::fs::write(junk.join("a.wav"), b"not audio").unwrap();
    std::fs::write(junk.join("b.flac"), b"").unwrap();
    let noise = demo().join("noise");
    let cases: Vec<(String, &str, &str)> = vec![
        (
            bank_recipe(&tmp.path().join("nowhere"), "snr_db = 5"),
            "bank:",
            "no such folder",
        ),
        (bank_recipe(&empty, "snr_db = 5"), "bank:", "holds no files"),
        (
            bank_recipe(&junk, "snr_db = 5"),
            "bank:",
            "none of the 2 files can be used",
        ),
        (
            bank_recipe(&noise, "snr_db = \"loud\""),
            "snr_db:",
            "expected a number",
        ),
        (
            bank_recipe(&noise, "snr_db = 5\nweights = { fans = 0 }"),
            "weights:",
            "must be above 0",
        ),
        (
            bank_recipe(&noise, "snr_db = 5\nweights = { fans = -2 }"),
            "weights:",
            "must be above 0",
        ),
        (
            bank_recipe(&noise, "snr_db = 5\nweights = { forklift = 1 }"),
            "weights:",
            "no category `forklift`",
        ),
        (
            bank_recipe(&noise, "snr_db = 5\npart = \"held_out\""),
            "part:",
            "has no file",
        ),
        (
            bank_recipe(&noise, "snr_db = 5\nsnr_over = \"peak\""),
            "snr_over:",
            "is not one of",
        ),
        (
            bank_recipe(&noise, "snr_db = { low = 20, high = 5 }"),
            "snr_db:",
            "low 20 is above high 5",
        ),
    ];
    for (recipe, key, says) in cases {
        let (code, err, _) = run(tmp.path(), &recipe, &m);
        assert_eq!(code, Some(2), "{recipe}: {err}");
        assert!(
            err.contains("recipe.toml line ") && err.contains(&format!("step 1 (noise): {key}")),
            "{err}"
        );
        assert!(err.contains(says), "want `{says}`: {err}");
    }
    // A zero-length file among good ones: a warning, and the run goes on without it.
    let mixed = tmp.path().join("mixed");
    std::fs::create_dir_all(&mixed).unwrap();
    std::fs::copy(
        noise.join("fans/evaporator-fans-chamber2.wav"),
        mixed.join("fan.wav"),
    )
    .unwrap();
    common::write_wav_pcm16(&mixed.join("zero.wav"), 16000, &[]);
    let (code, err, takes) = run(tmp.path(), &bank_recipe(&mixed, "snr_db = 5"), &m);
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("warning") && err.contains("zero.wav"), "{err}");
    assert!(
        takes
            .iter()
            .all(|t| noise_record(t)["drawn"]["file"] == "fan.wav")
    );
}
