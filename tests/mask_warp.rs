//! The `mask` and `warp` steps: band and span attenuation measured against scipy, `obscured`
//! against the drawn spans, caps, the SpecAugment presets, warp timing and pitch, bad keys.

mod common;

use std::path::Path;

use common::{read_jsonl, run_recipe};
use retake::recipe;

const RATE: u32 = 16_000;

/// Welch power spectra of input and output by scipy.signal.welch (PyPI), 1024-point Hann
/// segments; prints the band levels in dB for [lo, hi) bands given as JSON.
const WELCH: &str = r#"
import json, sys
import numpy as np
from scipy import signal
x = np.fromfile(sys.argv[1], "<f8"); y = np.fromfile(sys.argv[2], "<f8")
bands = json.loads(sys.argv[3])
f, px = signal.welch(x, fs=16000, nperseg=1024)
_, py = signal.welch(y, fs=16000, nperseg=1024)
out = []
for lo, hi in bands:
    k = (f >= lo) & (f < hi)
    out.append([10 * np.log10(px[k].mean()), 10 * np.log10(py[k].mean())])
print(json.dumps(out))
"#;

#[test]
fn frequency_mask_removes_its_band_and_leaves_the_rest() {
    let x = common::noise(3 * RATE as usize, 5)
        .iter()
        .map(|v| v * 0.25)
        .collect::<Vec<f32>>();
    let tmp = tempfile::tempdir().unwrap();
    for seed in [1u64, 2, 3] {
        let out = common::apply_step(
            "do = \"mask\"\nfreq_masks = 1\nfreq_width_hz = 1500",
            RATE,
            &x,
            &[],
            seed,
        );
        let band = out.drawn["freq_bands_hz"][0].as_array().unwrap();
        let (lo, hi) = (band[0].as_f64().unwrap(), band[1].as_f64().unwrap());
        assert!((hi - lo - 1500.0).abs() < 1e-6);
        let (a, b) = (tmp.path().join("x.f64"), tmp.path().join("y.f64"));
        common::write_f64(&a, &x.iter().map(|&v| f64::from(v)).collect::<Vec<_>>());
        common::write_f64(
            &b,
            &out.audio
                .samples
                .iter()
                .map(|&v| f64::from(v))
                .collect::<Vec<_>>(),
        );
        // Inside the band, away from its edges by 100 Hz (Welch bins are 15.6 Hz, the mask
        // ramp about one 31 Hz STFT bin), and outside it in 250 Hz bands at least 150 Hz away.
        let mut bands = vec![[lo + 100.0, hi - 100.0]];
        let mut f = 50.0;
        while f + 250.0 < 7950.0 {
            if f + 250.0 < lo - 150.0 || f > hi + 150.0 {
                bands.push([f, f + 250.0]);
            }
            f += 250.0;
        }
        let levels: Vec<(f64, f64)> = serde_json::from_str(&common::run_python(
            WELCH,
            &[
                a.to_str().unwrap(),
                b.to_str().unwrap(),
                &serde_json::to_string(&bands).unwrap(),
            ],
        ))
        .unwrap();
        let (inside_in, inside_out) = levels[0];
        assert!(
            inside_in - inside_out >= 40.0,
            "band {lo:.0}-{hi:.0} Hz only {:.1} dB down",
            inside_in - inside_out
        );
        for (band, (l_in, l_out)) in bands[1..].iter().zip(&levels[1..]) {
            assert!(
                (l_in - l_out).abs() <= 0.5,
                "{band:?} changed by {:.2} dB",
                l_out - l_in
            );
        }
    }
}

#[test]
fn time_mask_silences_its_span_and_obscured_is_the_overlap() {
    // A 4 s clip of noise with eight "words".
    let tmp = tempfile::tempdir().unwrap();
    let x = common::noise(4 * RATE as usize, 9)
        .iter()
        .map(|v| v * 0.25)
        .collect::<Vec<f32>>();
    common::write_wav_float(&tmp.path().join("n.wav"), RATE, &x);
    let words: Vec<(f64, f64)> = (0..8)
        .map(|i| (0.2 + 0.45 * f64::from(i), 0.5 + 0.45 * f64::from(i)))
        .collect();
    let ws: Vec<serde_json::Value> = words
        .iter()
        .enumerate()
        .map(|(i, (a, b))| serde_json::json!({"start": a, "end": b, "text": format!("w{i}")}))
        .collect();
    let m = tmp.path().join("in.jsonl");
    let rec = serde_json::json!({"id": "n", "audio": "n.wav", "lines": [{"start": 0.2, "end": words[7].1, "text": "w", "words": ws}]});
    std::fs::write(&m, rec.to_string() + "\n").unwrap();
    let recipe = "takes = 6\nformat = \"float32\"\n[[step]]\ndo = \"mask\"\ntime_masks = 2\ntime_width_s = { low = 0.3, high = 0.6 }\n";
    let (code, err, takes) = run_recipe(tmp.path(), recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    let win = 400.0 / f64::from(RATE);
    for take in &takes {
        let spans: Vec<(f64, f64)> = take["origin"]["steps"][0]["drawn"]["time_spans_s"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| (s[0].as_f64().unwrap(), s[1].as_f64().unwrap()))
            .collect();
        let y = retake::audio::decode(
            &tmp.path().join("out").join(take["audio"].as_str().unwrap()),
            retake::audio::ChannelPolicy::Mix,
        )
        .unwrap()
        .samples;
        let rms = |v: &[f32]| {
            (v.iter().map(|&s| f64::from(s).powi(2)).sum::<f64>() / v.len() as f64).sqrt()
        };
        for &(a, b) in &spans {
            // Away from the edges by a window, the span is silent (zero fill): 60 dB below
            // the input there.
            let (i, j) = (
                ((a + win) * f64::from(RATE)) as usize,
                ((b - win) * f64::from(RATE)) as usize,
            );
            if j > i {
                let ratio = 20.0 * (rms(&y[i..j]) / rms(&x[i..j])).log10();
                assert!(ratio < -60.0, "span {a:.3}-{b:.3}: only {ratio:.1} dB down");
            }
        }
        for (w, (a, b)) in take["lines"][0]["words"]
            .as_array()
            .unwrap()
            .iter()
            .zip(&words)
        {
            // obscured = the word's overlap with the union of the spans, measured here.
            let mut cover = 0.0;
            let steps = 100_000;
            for k in 0..steps {
                let t = a + (b - a) * (k as f64 + 0.5) / steps as f64;
                cover += f64::from(u8::from(spans.iter().any(|&(s, e)| s <= t && t < e)));
            }
            let want = cover / steps as f64;
            let got = w["obscured"].as_f64().unwrap();
            assert!(
                (got - want).abs() < 1e-4,
                "word {a}-{b}: obscured {got} vs overlap {want}"
            );
        }
    }
}

#[test]
fn caps_keep_words_audible() {
    let x = common::noise(4 * RATE as usize, 3)
        .iter()
        .map(|v| v * 0.25)
        .collect::<Vec<f32>>();
    let words: Vec<(f64, f64)> = (0..8)
        .map(|i| (0.2 + 0.45 * f64::from(i), 0.5 + 0.45 * f64::from(i)))
        .collect();
    for seed in 0..20 {
        let out = common::apply_step(
            "do = \"mask\"\ntime_masks = 2\ntime_width_s = 0.25\nmax_obscured = 0.3",
            RATE,
            &x,
            &words,
            seed,
        );
        for &(a, b) in &words {
            // The union of the spans over the word, by fine sampling.
            let steps: u32 = 10_000;
            let cover = (0..steps)
                .filter(|k| {
                    let t = a + (b - a) * (*k as f64 + 0.5) / f64::from(steps);
                    out.hidden.iter().any(|&(s, e)| s <= t && t < e)
                })
                .count() as f64
                * (b - a)
                / f64::from(steps);
            // Sampling resolves the cover to (b - a) / steps.
            assert!(
                cover / (b - a) <= 0.3 + 2e-4,
                "seed {seed}: word {a}-{b} {:.2} hidden",
                cover / (b - a)
            );
        }
        let out = common::apply_step(
            "do = \"mask\"\ntime_masks = 1\ntime_width_s = 0.1\nonly_gaps = true",
            RATE,
            &x,
            &words,
            seed,
        );
        for &(s, e) in &out.hidden {
            assert!(
                words.iter().all(|&(a, b)| e <= a || s >= b),
                "seed {seed}: {s}-{e} touches a word"
            );
        }
        // The widest gap (before the first word, after the last) is 0.2 s: a 0.21 s mask
        // can never fit, so it is dropped and the decision recorded.
        let out = common::apply_step(
            "do = \"mask\"\ntime_masks = 1\ntime_width_s = 0.21\nonly_gaps = true",
            RATE,
            &x[..(1.6 * f64::from(RATE)) as usize],
            &words[..3],
            seed,
        );
        assert!(out.hidden.is_empty());
        assert_eq!(out.measured["dropped"], 1);
        assert_eq!(out.measured["redraws"], 20);
    }
}

#[test]
fn no_masks_reconstructs_the_take() {
    let x = common::noise(RATE as usize + 123, 4)
        .iter()
        .map(|v| v * 0.25)
        .collect::<Vec<f32>>();
    let out = common::apply_step("do = \"mask\"", RATE, &x, &[], 1);
    let err = x
        .iter()
        .zip(&out.audio.samples)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0f32, f32::max);
    assert!(err < 1e-5, "{err}");
    let short = common::apply_step(
        "do = \"mask\"\ntime_masks = 1\ntime_width_s = 0.01",
        RATE,
        &x[..300],
        &[],
        1,
    );
    assert!(
        short
            .skipped
            .as_deref()
            .unwrap()
            .contains("shorter than one STFT window")
    );
    assert_eq!(short.audio.samples, x[..300]);
}

#[test]
fn presets_convert_the_published_policies() {
    // Park et al., Interspeech 2019 (arXiv 1904.08779), Table 1 "Augmentation parameters
    // for policies" (the paper's text was not readable here; the rows agree with two
    // independent recollections and with public transcriptions of the table):
    //   policy  W   F   mF  T    p    mT
    //   LB      80  27  1   100  1.0  1
    //   LD      80  27  2   100  1.0  2
    //   SM      40  15  2   70   0.2  2
    //   SS      40  27  2   70   0.2  2
    // F counts channels of 80 log-mel bands, W and T frames of 10 ms. HTK mel of 8 kHz is
    // 2840.02 (2595 log10(1 + 8000/700)), and F channels span F/81 of it (80 triangles,
    // 81 equal mel steps), e.g. 27 channels = 946.7 mel.
    let table = [
        ("LB", 80.0, 27.0, 1.0, 100.0, 1.0, 1.0),
        ("LD", 80.0, 27.0, 2.0, 100.0, 1.0, 2.0),
        ("SM", 40.0, 15.0, 2.0, 70.0, 0.2, 2.0),
        ("SS", 40.0, 27.0, 2.0, 70.0, 0.2, 2.0),
    ];
    for (name, w, f, mf, t, p, mt) in table {
        let (shift, fc, fw, tc, tw, cap) = retake::steps::mask::preset(name, RATE).unwrap();
        assert!((shift - w * 0.01).abs() < 1e-12, "{name}: W {shift}");
        assert!((fw - f / 81.0 * 2840.02).abs() < 0.1, "{name}: F {fw}");
        assert!((tw - t * 0.01).abs() < 1e-12, "{name}: T {tw}");
        assert_eq!((fc, tc, cap), (mf, mt, p), "{name}");
    }
    let (_, _, fw, _, _, _) = retake::steps::mask::preset("LB", RATE).unwrap();
    assert!((fw - 946.67).abs() < 0.1, "{fw}");
    let p = common::one_step("do = \"mask\"\npreset = \"LD\"");
    assert_eq!(p.steps.len(), 1);
}

/// Tone bursts of 300 Hz, 40 ms long, every 250 ms from 0.1 s, over `secs`.
fn bursts(secs: f64) -> (Vec<f32>, Vec<f64>) {
    let n = (secs * f64::from(RATE)) as usize;
    let onsets: Vec<f64> = (0..)
        .map(|i| 0.1 + 0.25 * f64::from(i))
        .take_while(|t| t + 0.05 < secs)
        .collect();
    let x = (0..n)
        .map(|i| {
            let t = i as f64 / f64::from(RATE);
            let on = onsets.iter().any(|&o| t >= o && t < o + 0.04);
            if on {
                (0.5 * (std::f64::consts::TAU * 300.0 * t).sin()) as f32
            } else {
                0.0
            }
        })
        .collect();
    (x, onsets)
}

#[test]
fn warp_moves_bursts_with_their_timings_and_keeps_pitch() {
    let (x, onsets) = bursts(4.0);
    for (seed, shift) in [(1u64, 0.15), (2, -0.2), (3, 0.3)] {
        let out = common::apply_step(
            &format!("do = \"warp\"\nanchor = 0.5\nshift_s = {shift}"),
            RATE,
            &x,
            &[],
            seed,
        );
        assert!(out.skipped.is_none());
        let y = &out.audio.samples;
        // The take keeps its length within a frame (WSOLA rounding).
        assert!(
            (y.len() as f64 - x.len() as f64).abs() <= 400.0,
            "{} vs {}",
            y.len(),
            x.len()
        );
        let anchor = 2.0;
        for &o in &onsets {
            let mapped = out.map.apply(o);
            // Physics of the warp: before the anchor times scale by (a + s) / a.
            let ideal = if o < anchor {
                o * (anchor + shift) / anchor
            } else {
                anchor + shift + (o - anchor) * (4.0 - anchor - shift) / (4.0 - anchor)
            };
            assert!(
                (mapped - ideal).abs() < 0.03,
                "burst {o}: map {mapped} vs {ideal}"
            );
            // Measured onset: first sample within ±20 ms reaching half the burst amplitude.
            let c = (mapped * f64::from(RATE)) as isize;
            let w = (0.02 * f64::from(RATE)) as isize;
            let first = (c - w..c + w)
                .find(|&i| i >= 0 && (i as usize) < y.len() && y[i as usize].abs() >= 0.25)
                .unwrap();
            // 300 Hz sine reaches 0.25 of 0.5 amplitude (sin = 0.5) after 1/12 period = 0.28 ms.
            let onset = first as f64 / f64::from(RATE) - 1.0 / 3600.0;
            assert!(
                (onset - mapped).abs() <= 0.002,
                "burst {o}: onset {onset:.4} vs rewritten {mapped:.4} (shift {shift})"
            );
        }
        // Pitch: zero crossings inside the first burst after the anchor.
        let o = onsets.iter().copied().find(|&o| o > 2.3).unwrap();
        let (a, b) = (
            (out.map.apply(o) + 0.005) * f64::from(RATE),
            (out.map.apply(o) + 0.035) * f64::from(RATE),
        );
        let seg = &y[a as usize..b as usize];
        let ups: Vec<f64> = seg
            .windows(2)
            .enumerate()
            .filter(|(_, w)| w[0] < 0.0 && w[1] >= 0.0)
            .map(|(i, w)| i as f64 + f64::from(w[0] / (w[0] - w[1])))
            .collect();
        let f = f64::from(RATE) * (ups.len() - 1) as f64 / (ups[ups.len() - 1] - ups[0]);
        assert!((f - 300.0).abs() < 3.0, "pitch {f} Hz");
    }
}

#[test]
fn bad_keys_are_recipe_errors() {
    let cases = [
        (
            "do = \"mask\"\nwindow = 400\nhop = 500",
            "hop:",
            "larger than the window",
        ),
        (
            "do = \"mask\"\nfreq_masks = 1\nfreq_width_hz = 9000",
            "freq_width_hz:",
            "spectrum is",
        ),
        (
            "do = \"mask\"\nfreq_masks = 3\nfreq_width_hz = 3000",
            "freq_masks:",
            "cannot fit",
        ),
        (
            "do = \"mask\"\npreset = \"XL\"",
            "preset:",
            "unknown preset",
        ),
        ("do = \"mask\"\nfill = \"pink\"", "fill:", "is not one of"),
        ("do = \"warp\"\nanchor = 1.2", "anchor:", "cannot fit"),
        (
            "do = \"warp\"\nanchor = { low = 0.0, high = 0.5 }",
            "anchor:",
            "strictly inside",
        ),
    ];
    for (step, key, says) in cases {
        let e = recipe::parse(
            Path::new("r.toml"),
            &format!("takes = 1\n[[step]]\n{step}\n"),
        )
        .unwrap_err();
        let msg = e.to_string();
        assert!(msg.contains(key) && msg.contains(says), "{step}: {msg}");
        assert!(e.line.is_some(), "{msg}");
    }
    // The manifest's file helpers are used in the CLI tests; keep one read here so a
    // broken JSONL reader shows up in this file too.
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(tmp.path().join("a.jsonl"), "{\"a\":1}\n").unwrap();
    assert_eq!(read_jsonl(&tmp.path().join("a.jsonl")).len(), 1);
}
