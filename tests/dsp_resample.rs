//! Resampling, speed perturbation and gain against the outside world: scipy's polyphase
//! resampler, the sampling theorem, the physics of playing a recording faster, and the
//! timings the steps' time maps promise.

mod common;

use std::f64::consts::PI;
use std::path::Path;

use retake::audio::Audio;
use retake::dsp::level::{amplitude_db, peak};
use retake::dsp::resample::{output_len, resample, speed};
use retake::recipe::{self, Plan};
use retake::seed::TakeRng;
use retake::steps::{StepOutput, TakeContext};

fn plan(step: &str) -> Plan {
    recipe::parse(
        Path::new("test.toml"),
        &format!("takes = 2\n\n[[step]]\n{step}\n"),
    )
    .unwrap_or_else(|e| panic!("{e}"))
}

fn run(step: &str, audio: Audio, seed: u64) -> StepOutput {
    plan(step).steps[0]
        .step
        .apply(audio, &TakeContext::default(), &mut TakeRng::new(seed))
        .unwrap_or_else(|e| panic!("{e}"))
}

/// Error-to-signal ratio in dB of `got` against `want` over `[lo, hi)`.
fn error_to_signal_db(got: &[f64], want: &[f64], lo: usize, hi: usize) -> f64 {
    let (mut err, mut sig) = (0.0, 0.0);
    for i in lo..hi {
        err += (got[i] - want[i]).powi(2);
        sig += want[i].powi(2);
    }
    10.0 * (err / sig).log10()
}

/// Speech-band test signals at `rate`, made by the reference Python: a sum of tones from
/// 100 to 3500 Hz, and noise low-passed to 4 kHz (10th-order Butterworth, applied forwards
/// and backwards: below -100 dB above 8 kHz, so no resampler's anti-aliasing is tested
/// here, only its passband and its timing).
const MAKE_AND_RESAMPLE: &str = r#"
import sys
import numpy as np
from scipy import signal
rate, up, down, kind, x_path, y_path = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4], sys.argv[5], sys.argv[6]
n = 3 * rate
t = np.arange(n) / rate
if kind == "tones":
    freqs = [100, 240, 530, 870, 1250, 1700, 2300, 2900, 3500]
    rng = np.random.default_rng(5)
    x = sum(np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi)) for f in freqs) / len(freqs)
else:
    rng = np.random.default_rng(7)
    sos = signal.butter(10, 3800, fs=rate, output="sos")
    x = signal.sosfiltfilt(sos, rng.standard_normal(n))
    x = 0.3 * x / np.max(np.abs(x))
x = x.astype(np.float32).astype(np.float64)
x.astype("<f8").tofile(x_path)
signal.resample_poly(x, up, down).astype("<f8").tofile(y_path)
"#;

#[test]
fn agrees_with_scipy_resample_poly_on_speech_band_signals() {
    // Reference: scipy.signal.resample_poly (PyPI, scipy 1.17.1), a zero-phase polyphase
    // resampler (its own delay removed), so both outputs put sample i at time i / 16000.
    // Tolerance: error-to-signal below -55 dB away from the first and last 0.1 s. Both are
    // band-limited reconstructions of the same signal, so in the speech band they differ
    // only by their filters' passband ripple (scipy's default Kaiser window, beta 5, is the
    // larger; measured about -62 dB here). A timing error would show at once: an offset of
    // 0.002 sample costs -51 dB on a 3.5 kHz tone (20 log10(2 pi * 3500 * 0.002 / 16000)).
    let dir = tempfile::tempdir().unwrap();
    for (from, up, down) in [(44_100u32, 160u32, 441u32), (48_000, 1, 3)] {
        for kind in ["tones", "noise"] {
            let xp = dir.path().join(format!("x-{from}-{kind}.f64"));
            let yp = dir.path().join(format!("y-{from}-{kind}.f64"));
            common::run_python(
                MAKE_AND_RESAMPLE,
                &[
                    &from.to_string(),
                    &up.to_string(),
                    &down.to_string(),
                    kind,
                    xp.to_str().unwrap(),
                    yp.to_str().unwrap(),
                ],
            );
            let x: Vec<f32> = common::read_f64(&xp).iter().map(|&v| v as f32).collect();
            let want = common::read_f64(&yp);
            let got: Vec<f64> = resample(&x, from, 16_000)
                .iter()
                .map(|&v| f64::from(v))
                .collect();
            assert_eq!(got.len(), output_len(x.len(), from, 16_000));
            assert_eq!(got.len(), 48_000);
            let edge = 1_600;
            let ets = error_to_signal_db(&got, &want, edge, got.len() - edge);
            assert!(ets < -55.0, "{from} -> 16000, {kind}: {ets:.1} dB");
        }
    }
}

/// RMS over the middle half.
fn middle_rms(x: &[f32]) -> f64 {
    let (lo, hi) = (x.len() / 4, 3 * x.len() / 4);
    (x[lo..hi].iter().map(|&v| f64::from(v).powi(2)).sum::<f64>() / (hi - lo) as f64).sqrt()
}

#[test]
fn tones_above_the_new_nyquist_are_removed_and_below_it_kept() {
    // Sampling theorem: at 16 kHz nothing above 8 kHz can be represented; a 9 kHz tone
    // would fold to 7 kHz. The anti-aliasing filter must take it down by at least 60 dB
    // (common practice for speech front ends; no single source). A 6 kHz tone must pass
    // within 0.1 dB, so a filter that removes everything cannot pass this test.
    for (from, stop, pass) in [(48_000u32, 9_000.0, 6_000.0), (44_100, 8_500.0, 6_000.0)] {
        let x = common::sine(stop, 2.0, from, 0.5);
        let y = resample(&x, from, 16_000);
        let atten = amplitude_db(middle_rms(&y) / middle_rms(&x));
        assert!(atten < -60.0, "{from}: {stop} Hz only {atten:.1} dB down");
        let x = common::sine(pass, 2.0, from, 0.5);
        let y = resample(&x, from, 16_000);
        let gain = amplitude_db(middle_rms(&y) / middle_rms(&x));
        assert!(
            gain.abs() < 0.1,
            "{from}: {pass} Hz changed by {gain:.3} dB"
        );
    }
}

/// Frequency of a clean tone from its upward zero crossings (linearly interpolated).
fn zero_crossing_frequency(x: &[f32], rate: u32) -> f64 {
    let mut crossings = Vec::new();
    for i in 1..x.len() {
        let (a, b) = (f64::from(x[i - 1]), f64::from(x[i]));
        if a < 0.0 && b >= 0.0 {
            crossings.push((i - 1) as f64 + a / (a - b));
        }
    }
    // Skip the first and last crossings, near the clip's edges.
    let c = &crossings[2..crossings.len() - 2];
    (c.len() - 1) as f64 / ((c[c.len() - 1] - c[0]) / f64::from(rate))
}

#[test]
fn speed_perturbation_moves_pitch_and_duration() {
    // Physics: a recording played f times faster has every frequency times f and lasts
    // d / f. The factors 0.9 / 1.0 / 1.1 are the speed-perturbation set of Ko et al.,
    // Interspeech 2015; 0.93 and 1.0669 stand for values drawn from a range.
    let rate = 16_000;
    let x = common::sine(440.0, 3.0, rate, 0.5);
    for factor in [0.9, 1.0, 1.1, 0.93, 1.066_9] {
        let out = run(
            &format!("do = \"speed\"\nfactor = {factor}"),
            Audio {
                rate,
                samples: x.clone(),
            },
            1,
        );
        let f = zero_crossing_frequency(&out.audio.samples, rate);
        assert!(
            (f - 440.0 * factor).abs() < 0.01,
            "factor {factor}: {f} Hz, expected {}",
            440.0 * factor
        );
        let d = out.audio.duration();
        assert!(
            (d - 3.0 / factor).abs() <= 1.0 / f64::from(rate),
            "factor {factor}: {d} s"
        );
        assert_eq!(out.drawn["factor"], factor);
        assert_eq!(out.measured["duration_s"], d);
        // The map is the physical one, t -> t / f; the written length is that rounded to a
        // whole sample, so the two ends agree within half a sample.
        let (lo, hi) = out.map.range();
        assert_eq!(lo, 0.0);
        assert!((hi - 3.0 / factor).abs() < 1e-12, "map ends at {hi}");
        assert!(
            (hi - d).abs() <= 0.5 / f64::from(rate) + 1e-12,
            "map end {hi} vs duration {d}"
        );
    }
}

/// A click train at `rate`: Gaussian clicks (sigma 0.4 ms, so nothing above 4 kHz is
/// within 100 dB of their peak) centred one every 0.237 s, at instants that fall between
/// samples, for `secs` seconds. Returns the samples and the click times in seconds.
fn click_train(rate: u32, secs: f64) -> (Vec<f32>, Vec<f64>) {
    let rate = f64::from(rate);
    let sigma = 0.4e-3;
    let n = (secs * rate) as usize;
    let mut x = vec![0.0f32; n];
    let mut times = Vec::new();
    let mut t = 0.1 + 0.3 / rate;
    while t < secs - 0.1 {
        let centre = (t * rate) as usize;
        for (i, v) in x.iter_mut().enumerate().take(centre + 40).skip(centre - 40) {
            let d = i as f64 / rate - t;
            *v += (0.8 * (-0.5 * (d / sigma).powi(2)).exp()) as f32;
        }
        times.push(t);
        t += 0.237;
    }
    (x, times)
}

/// Position in samples of the click peak of `y` near sample `near`: a parabola through
/// the log of the largest sample and its neighbours (exact for a Gaussian).
fn peak_near(y: &[f32], near: f64) -> f64 {
    let lo = (near as usize).saturating_sub(20);
    let hi = (near as usize + 20).min(y.len() - 2);
    let i = (lo..=hi).max_by(|&a, &b| y[a].total_cmp(&y[b])).unwrap();
    let (a, b, c) = (
        f64::from(y[i - 1]).ln(),
        f64::from(y[i]).ln(),
        f64::from(y[i + 1]).ln(),
    );
    i as f64 + 0.5 * (a - c) / (a - 2.0 * b + c)
}

#[test]
fn clicks_land_on_their_mapped_times() {
    // The time map is the contract: a click at source time t must peak at map(t) in the
    // take, over a whole 12 s clip. A resampler delay left uncompensated would put every
    // click several samples late; a wrong ratio would make the error grow along the clip.
    // Two checks per click, each within 0.05 sample: against the physics of speed
    // perturbation (t -> t / f) and against the step's map (which is that same line).
    let rate = 16_000;
    let (x, times) = click_train(rate, 12.0);
    for (step, factor) in [
        ("do = \"speed\"\nfactor = 1.1", 1.1),
        ("do = \"speed\"\nfactor = 0.9", 0.9),
        ("do = \"speed\"\nfactor = 0.937", 0.937),
        ("do = \"speed\"\nfactor = 1.066_9", 1.066_9),
        ("do = \"resample\"\nvia_rate = 8000", 1.0),
        ("do = \"resample\"\nvia_rate = 11025", 1.0),
        ("do = \"resample\"\nvia_rate = 44100", 1.0),
    ] {
        let out = run(
            step,
            Audio {
                rate,
                samples: x.clone(),
            },
            3,
        );
        let y = &out.audio.samples;
        let (mut vs_physics, mut vs_map): (f64, f64) = (0.0, 0.0);
        for &t in &times {
            let physics = t / factor * f64::from(rate);
            let mapped = out.map.apply(t) * f64::from(rate);
            let got = peak_near(y, mapped);
            vs_physics = vs_physics.max((got - physics).abs());
            vs_map = vs_map.max((got - mapped).abs());
        }
        assert!(
            vs_physics < 0.05 && vs_map < 0.05,
            "{step}: a click is {vs_physics:.3} samples off t / f, {vs_map:.3} off its mapped time"
        );
    }
    // Plain resampling between rates: a click at t is at t * 16000 in the output.
    for from in [44_100u32, 48_000, 22_050] {
        let (x, times) = click_train(from, 12.0);
        let y = resample(&x, from, 16_000);
        for &t in &times {
            let want = t * 16_000.0;
            let got = peak_near(&y, want);
            assert!(
                (got - want).abs() < 0.05,
                "{from} -> 16000: click at {t} s found at sample {got}, expected {want}"
            );
        }
    }
}

#[test]
fn speed_of_one_and_identity_rates_leave_samples_alone() {
    let (x, _) = click_train(16_000, 1.0);
    assert_eq!(speed(&x, 1.0), x);
    assert_eq!(resample(&x, 16_000, 16_000), x);
}

fn tone_audio(peak_amp: f64) -> Audio {
    Audio {
        rate: 16_000,
        samples: (0..16_000)
            .map(|i| (peak_amp * (2.0 * PI * 300.0 * f64::from(i) / 16_000.0).sin()) as f32)
            .collect(),
    }
}

#[test]
fn gain_applies_the_drawn_gain_when_there_is_headroom() {
    // dBFS here is 20 log10 of the peak with full scale 1.0 (common practice, no single
    // source). A 0.25 peak (-12.04 dBFS) raised by 6 dB is 0.499 (-6.04 dBFS): under the
    // -1 dBFS ceiling, so the drawn gain is applied as is.
    let audio = tone_audio(0.25);
    let before = peak(&audio.samples);
    let out = run("do = \"gain\"\ndb = 6.0", audio.clone(), 1);
    let applied = out.measured["applied_db"].as_f64().unwrap();
    assert!((applied - 6.0).abs() < 1e-9, "{applied}");
    let ratio = peak(&out.audio.samples) / before;
    assert!((amplitude_db(ratio) - 6.0).abs() < 1e-5, "{ratio}");
    let peak_dbfs = out.measured["peak_dbfs"].as_f64().unwrap();
    assert!((peak_dbfs - amplitude_db(before * ratio)).abs() < 1e-9);
    assert!((peak_dbfs - (-6.0412)).abs() < 1e-3, "{peak_dbfs}");
    // Cuts never meet the guard.
    let out = run("do = \"gain\"\ndb = -20", audio, 1);
    assert!((out.measured["applied_db"].as_f64().unwrap() + 20.0).abs() < 1e-9);
}

#[test]
fn gain_guard_holds_the_ceiling() {
    // A 0.5 peak (-6.02 dBFS) raised by 12 dB would reach +5.98 dBFS; with the ceiling at
    // -1 dBFS the gain is lowered to -1 - (-6.02) = 5.02 dB and the peak sits on the ceiling.
    for (ceiling, step) in [
        (-1.0, "do = \"gain\"\ndb = 12.0"),
        (
            -3.0,
            "do = \"gain\"\ndb = { low = 10.0, high = 20.0 }\nceiling_db = -3.0",
        ),
        (0.0, "do = \"gain\"\ndb = 40\nceiling_db = 0"),
    ] {
        for seed in 0..5 {
            let out = run(step, tone_audio(0.5), seed);
            let p = peak(&out.audio.samples);
            assert!(
                p <= 10f64.powf(ceiling / 20.0),
                "{step}: peak {p} above the ceiling"
            );
            let peak_dbfs = out.measured["peak_dbfs"].as_f64().unwrap();
            assert!((peak_dbfs - ceiling).abs() < 1e-5, "{step}: {peak_dbfs}");
            let applied = out.measured["applied_db"].as_f64().unwrap();
            let expected = ceiling - amplitude_db(0.5);
            assert!((applied - expected).abs() < 1e-5, "{step}: {applied}");
            assert!(applied < out.drawn["db"].as_f64().unwrap());
        }
    }
}
