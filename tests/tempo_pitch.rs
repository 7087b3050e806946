//! `stretch` (WSOLA tempo) and `pitch` (WSOLA + resampling): frequency, duration and burst
//! onsets against the rewritten timings.

mod common;

use std::path::Path;

use retake::recipe;

const RATE: u32 = 16_000;
/// One WSOLA frame at 16 kHz (25 ms), the duration tolerance the issue allows.
const FRAME_S: f64 = 0.025;

fn tone(freq: f64, secs: f64) -> Vec<f32> {
    (0..(secs * f64::from(RATE)) as usize)
        .map(|i| (0.5 * (std::f64::consts::TAU * freq * i as f64 / f64::from(RATE)).sin()) as f32)
        .collect()
}

/// Frequency from rising zero crossings (linear interpolation) over the middle of `y`.
fn frequency(y: &[f32]) -> f64 {
    let mid = &y[y.len() / 4..3 * y.len() / 4];
    let ups: Vec<f64> = mid
        .windows(2)
        .enumerate()
        .filter(|(_, w)| w[0] < 0.0 && w[1] >= 0.0)
        .map(|(i, w)| i as f64 + f64::from(w[0] / (w[0] - w[1])))
        .collect();
    f64::from(RATE) * (ups.len() - 1) as f64 / (ups[ups.len() - 1] - ups[0])
}

/// 1 kHz bursts of 40 ms every 250 ms from 0.1 s, and their onsets.
fn bursts(secs: f64) -> (Vec<f32>, Vec<f64>) {
    let onsets: Vec<f64> = (0..)
        .map(|i| 0.1 + 0.25 * f64::from(i))
        .take_while(|t| t + 0.1 < secs)
        .collect();
    let x = (0..(secs * f64::from(RATE)) as usize)
        .map(|i| {
            let t = i as f64 / f64::from(RATE);
            if onsets.iter().any(|&o| t >= o && t < o + 0.04) {
                (0.5 * (std::f64::consts::TAU * 1000.0 * t).sin()) as f32
            } else {
                0.0
            }
        })
        .collect();
    (x, onsets)
}

/// First sample after `from - 20 ms` reaching a quarter of the burst amplitude.
fn onset_near(y: &[f32], t: f64) -> f64 {
    let a = ((t - 0.02).max(0.0) * f64::from(RATE)) as usize;
    let i = (a..y.len())
        .find(|&i| y[i].abs() >= 0.125)
        .expect("a burst");
    i as f64 / f64::from(RATE)
}

#[test]
fn stretch_keeps_pitch_and_scales_duration() {
    // Tempo change without pitch change (Verhelst & Roelands 1993): frequency kept within
    // 1 %, duration d / f within one frame (physics of the operation; the bounds).
    let x = tone(300.0, 3.0);
    for f in [0.8, 1.25] {
        let out = common::apply_step(&format!("do = \"stretch\"\nfactor = {f}"), RATE, &x, &[], 1);
        let got = frequency(&out.audio.samples);
        assert!((got / 300.0 - 1.0).abs() < 0.01, "factor {f}: {got} Hz");
        let d = out.audio.duration();
        assert!((d - 3.0 / f).abs() <= FRAME_S, "factor {f}: {d} s");
        assert!((out.map.range().1 - d).abs() <= 1.0 / f64::from(RATE) + 1e-9);
    }
}

#[test]
fn stretch_moves_bursts_with_their_timings() {
    let (x, onsets) = bursts(4.0);
    for f in [0.8, 1.25, 0.93] {
        let out = common::apply_step(&format!("do = \"stretch\"\nfactor = {f}"), RATE, &x, &[], 1);
        for &o in &onsets {
            let mapped = out.map.apply(o);
            // The burst's own onset: a quarter amplitude 1/24 period (0.04 ms) after it starts.
            let got = onset_near(&out.audio.samples, mapped);
            assert!(
                (got - mapped).abs() <= 0.010,
                "factor {f}: burst at {o} s lands at {got:.4}, timing says {mapped:.4}"
            );
        }
    }
}

#[test]
fn pitch_moves_frequency_and_keeps_time() {
    let x = tone(300.0, 3.0);
    for s in [2.0, -3.0, 7.0, -12.0] {
        let out = common::apply_step(
            &format!("do = \"pitch\"\nsemitones = {s}"),
            RATE,
            &x,
            &[],
            1,
        );
        // Equal temperament: a semitone is a factor 2^(1/12) (textbook).
        let want = 300.0 * 2f64.powf(s / 12.0);
        let got = frequency(&out.audio.samples);
        assert!(
            (got / want - 1.0).abs() < 0.01,
            "{s} semitones: {got} Hz, want {want}"
        );
        assert!(
            (out.audio.duration() - 3.0).abs() <= FRAME_S,
            "{s}: {} s",
            out.audio.duration()
        );
    }
    let (x, onsets) = bursts(4.0);
    for s in [3.0, -4.0] {
        let out = common::apply_step(
            &format!("do = \"pitch\"\nsemitones = {s}"),
            RATE,
            &x,
            &[],
            1,
        );
        for &o in &onsets {
            let mapped = out.map.apply(o);
            assert!(
                (mapped - o).abs() <= FRAME_S,
                "{s}: timing {o} moved to {mapped}"
            );
            let got = onset_near(&out.audio.samples, mapped);
            assert!(
                (got - mapped).abs() <= 0.010,
                "{s}: burst at {o} lands at {got:.4}, timing says {mapped:.4}"
            );
        }
    }
}

#[test]
fn bad_factors_and_shifts_are_recipe_errors() {
    for (step, key) in [
        ("do = \"stretch\"\nfactor = 0", "factor:"),
        ("do = \"stretch\"\nfactor = -1.1", "factor:"),
        (
            "do = \"stretch\"\nfactor = { low = 0.9, high = 3.0 }",
            "factor:",
        ),
        ("do = \"pitch\"\nsemitones = 13", "semitones:"),
        ("do = \"pitch\"\nsemitones = [-24, 0]", "semitones:"),
    ] {
        let e = recipe::parse(
            Path::new("r.toml"),
            &format!("takes = 1\n[[step]]\n{step}\n"),
        )
        .unwrap_err();
        assert_eq!(e.line, Some(4), "{e}");
        assert!(e.message.contains(key), "{step}: {e}");
    }
}
