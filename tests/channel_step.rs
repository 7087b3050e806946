//! The `channel` step: band-limit attenuation measured against the filter's formula, timing
//! kept through filters and the 8 kHz G.711 round trip, clipping and bit depth, bad keys.

mod common;

use std::path::Path;

use retake::dsp::filter::{band_pass, response_db};
use retake::recipe;

const RATE: u32 = 16_000;

/// Output/input power ratio in dB at given frequencies, from scipy.signal.welch (PyPI)
/// spectra with 4096-point segments, averaged over ±20 Hz.
const RATIO: &str = r#"
import json, sys
import numpy as np
from scipy import signal
x = np.fromfile(sys.argv[1], "<f8"); y = np.fromfile(sys.argv[2], "<f8")
f, px = signal.welch(x, fs=16000, nperseg=4096)
_, py = signal.welch(y, fs=16000, nperseg=4096)
out = []
for fc in json.loads(sys.argv[3]):
    k = np.abs(f - fc) <= 20
    out.append(10 * np.log10(py[k].mean() / px[k].mean()))
print(json.dumps(out))
"#;

#[test]
fn narrow_band_attenuation_matches_the_filter() {
    let x: Vec<f32> = common::noise(20 * RATE as usize, 3)
        .iter()
        .map(|v| v * 0.25)
        .collect();
    let out = common::apply_step("do = \"channel\"\nband = \"narrow\"", RATE, &x, &[], 1);
    let tmp = tempfile::tempdir().unwrap();
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
    let freqs = [100.0, 200.0, 1000.0, 3000.0, 4000.0, 5000.0];
    let measured: Vec<f64> = serde_json::from_str(&common::run_python(
        RATIO,
        &[
            a.to_str().unwrap(),
            b.to_str().unwrap(),
            &serde_json::to_string(&freqs).unwrap(),
        ],
    ))
    .unwrap();
    // The step filters forward and backward: twice the one-pass dB of a 4th-order
    // Butterworth band 300-3400 Hz (|H|² = 1/(1 + (tan(πf/fs)/tan(πfc/fs))^(2N)) per side,
    // textbook with the bilinear transform's prewarping).
    let filter = band_pass(300.0, 3400.0, 4, RATE).unwrap();
    for (f, got) in freqs.iter().zip(&measured) {
        // Averaged in power over the same Welch bins as the measurement (4096 points).
        let bins: Vec<f64> = (0..2049)
            .map(|k| f64::from(k) * 16000.0 / 4096.0)
            .filter(|b| (b - f).abs() <= 20.0)
            .collect();
        let mean_power = bins
            .iter()
            .map(|&b| 10f64.powf(2.0 * response_db(filter.sections(), b, RATE) / 10.0))
            .sum::<f64>()
            / bins.len() as f64;
        let want = 10.0 * mean_power.log10();
        if want > -60.0 {
            assert!(
                (got - want).abs() < 1.0,
                "{f} Hz: {got:.2} dB, filter says {want:.2}"
            );
        } else {
            // Deep in the stop band: at least 60 dB down (Welch leakage floors the measure).
            assert!(*got < -60.0, "{f} Hz: only {got:.1} dB down");
        }
    }
    // The stated figures for the narrow-band channel: 100 Hz at least 60 dB down, 4 kHz
    // between 16 and 20 dB down, 1 kHz within 0.5 dB.
    assert!(
        measured[0] < -60.0 && (-20.0..-16.0).contains(&measured[4]) && measured[2].abs() < 0.5,
        "{measured:?}"
    );
}

#[test]
fn clicks_keep_their_place_through_filters_and_g711() {
    let n = 2 * RATE as usize;
    let mut x = vec![0.0f32; n];
    let clicks = [3001usize, 9007, 17003, 25009];
    for &c in &clicks {
        // A click with energy in the band: a 1.5 kHz burst under a 2 ms Hann window.
        for k in 0..32 {
            let w = 0.5 - 0.5 * (std::f64::consts::TAU * k as f64 / 32.0).cos();
            x[c - 16 + k] +=
                (0.8 * w * (std::f64::consts::TAU * 1500.0 * (k as f64 - 16.0) / 16000.0).cos())
                    as f32;
        }
    }
    for step in [
        "do = \"channel\"\nband = \"narrow\"\ncodec = \"mulaw\"",
        "do = \"channel\"\nband = \"wide\"\ncodec = \"alaw\"\ntilt_db_per_octave = -3",
    ] {
        let out = common::apply_step(step, RATE, &x, &[], 1);
        assert_eq!(out.audio.samples.len(), n);
        assert_eq!(out.map, retake::timemap::TimeMap::identity(2.0));
        for &c in &clicks {
            // The envelope peak of each burst stays within 0.25 ms (4 samples).
            let env = |i: usize| {
                out.audio.samples[i - 8..i + 8]
                    .iter()
                    .map(|s| s * s)
                    .sum::<f32>()
            };
            let best = (c - 40..c + 40)
                .max_by(|&a, &b| env(a).total_cmp(&env(b)))
                .unwrap();
            assert!(
                best.abs_diff(c) <= 4,
                "{step}: click at {c} peaks at {best}"
            );
        }
    }
}

#[test]
fn clipping_and_bits() {
    let x: Vec<f32> = (0..16000)
        .map(|i| (0.9 * (i as f64 * 0.05).sin()) as f32)
        .collect();
    let out = common::apply_step(
        "do = \"channel\"\nclip = \"hard\"\nclip_dbfs = -6",
        RATE,
        &x,
        &[],
        1,
    );
    let peak = out.audio.samples.iter().fold(0.0f32, |m, s| m.max(s.abs()));
    assert!(
        (f64::from(peak) - 10f64.powf(-6.0 / 20.0)).abs() < 1e-6,
        "{peak}"
    );
    assert!(out.measured["clipped_fraction"].as_f64().unwrap() > 0.3);
    let out = common::apply_step("do = \"channel\"\nbits = 8", RATE, &x, &[], 1);
    for s in &out.audio.samples {
        let steps = f64::from(*s) * 128.0;
        assert!(
            (steps - steps.round()).abs() < 1e-6,
            "{s} is not on the 8-bit grid"
        );
    }
    let out = common::apply_step(
        "do = \"channel\"\nclip = \"soft\"\nclip_dbfs = -3",
        RATE,
        &x,
        &[],
        1,
    );
    let level = 10f64.powf(-3.0 / 20.0) as f32;
    assert!(out.audio.samples.iter().all(|s| s.abs() < level));
}

#[test]
fn bad_channels_are_recipe_errors() {
    for (step, key, says) in [
        (
            "do = \"channel\"\nband_hz = [3400, 300]",
            "band_hz:",
            "below its high edge",
        ),
        (
            "do = \"channel\"\nband_hz = [300, 9000]",
            "band_hz:",
            "Nyquist",
        ),
        (
            "do = \"channel\"\nclip = \"hard\"\nclip_dbfs = 3",
            "clip_dbfs:",
            "above full scale",
        ),
        ("do = \"channel\"\nbits = 17", "bits:", "[2, 16]"),
        (
            "do = \"channel\"\ntilt_db_per_octave = 20",
            "tilt_db_per_octave:",
            "[-12, 12]",
        ),
        (
            "do = \"channel\"\ncodec = \"gsm\"",
            "codec:",
            "is not one of",
        ),
    ] {
        let e = recipe::parse(
            Path::new("r.toml"),
            &format!("takes = 1\n[[step]]\n{step}\n"),
        )
        .unwrap_err();
        assert!(
            e.line.is_some() && e.message.contains(key) && e.message.contains(says),
            "{step}: {e}"
        );
    }
}
