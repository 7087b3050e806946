//! Active speech level (ITU-T P.56 method B) against signals whose answer is known from the
//! standard's definitions and the envelope's closed form, and against an independent numpy
//! implementation written from the standard's description.
//!
//! The expected activity of a gated signal follows from the method itself (P.56 clauses
//! 8.2, 8.3): a threshold `c` counts a burst as active from the moment the envelope rises
//! to `c` until the envelope has decayed back to `c` after the burst, plus the hangover
//! `H = 0.2 s`. The envelope is two first-order averages in cascade with `T = 0.03 s`, so
//! for a burst whose rectified mean is `e`, with `x = t / T`, it rises as
//! `e (1 - e^-x (1 + x))` and decays as `e e^-x (1 + x)` (the step response of two equal
//! first-order sections: textbook). The threshold that decides is the one `M = 15.9 dB`
//! below the active level, which depends on the activity itself, so the prediction is
//! iterated to its fixed point.

mod common;

use retake::dsp::active_level::{
    ActiveLevel, HANGOVER_S, MARGIN_DB, TIME_CONSTANT_S, active_speech_level,
};

const RATE: u32 = 16_000;

/// 20 log10(2): the gain of doubling the amplitude, in dB.
const DB_DOUBLE: f64 = 6.020_599_913_279_624;

fn db_power(x: &[f32]) -> f64 {
    10.0 * (x.iter().map(|&s| f64::from(s).powi(2)).sum::<f64>() / x.len() as f64).log10()
}

fn mean_abs(x: &[f32]) -> f64 {
    x.iter().map(|&s| f64::from(s).abs()).sum::<f64>() / x.len() as f64
}

/// The x = t / T > 0 at which the monotone `f` equals `target` (bisection).
fn solve(f: impl Fn(f64) -> f64, target: f64, rising: bool) -> f64 {
    let (mut lo, mut hi) = (0.0f64, 60.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if (f(mid) < target) == rising {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Seconds the envelope of a burst takes to rise to `r` times its steady value.
fn rise_time(r: f64) -> f64 {
    TIME_CONSTANT_S * solve(|x| 1.0 - (-x).exp() * (1.0 + x), r, true)
}

/// Seconds the envelope takes to decay from its steady value to `r` times it.
fn decay_time(r: f64) -> f64 {
    TIME_CONSTANT_S * solve(|x| (-x).exp() * (1.0 + x), r, false)
}

/// Predicted activity factor of a signal `total` seconds long made of equal bursts
/// `[start, end)` (seconds) with rectified mean `e` and silence between, whose long-term
/// level is `long_term_db`: the union of each burst's active span
/// `[start + rise, end + decay + H]`, as a fraction of the duration, iterated to the fixed
/// point where the deciding threshold sits `M` below the resulting active level.
fn predicted_activity(bursts: &[(f64, f64)], total: f64, e: f64, long_term_db: f64) -> f64 {
    let mut activity = 0.5f64;
    for _ in 0..50 {
        let level_db = long_term_db - 10.0 * activity.log10();
        let r = 10f64.powf((level_db - MARGIN_DB) / 20.0) / e;
        assert!(
            r < 1.0,
            "the deciding threshold lies above the burst envelope"
        );
        let (rise, decay) = (rise_time(r), decay_time(r));
        let mut covered = 0.0;
        let mut reach = 0.0f64; // end of the union so far
        for &(start, end) in bursts {
            let a = (start + rise).max(reach);
            let b = (end + decay + HANGOVER_S).min(total);
            if b > a {
                covered += b - a;
                reach = b;
            }
        }
        activity = covered / total;
    }
    activity
}

/// A harmonic complex (fundamental 140 Hz, 12 harmonics at amplitude 1/k, phases pi k^2 / 12)
/// of `n` samples, peak below 0.6: a deterministic, speech-like voiced sound.
fn harmonic_complex(n: usize, rate: u32) -> Vec<f32> {
    (0..n)
        .map(|i| {
            let t = i as f64 / f64::from(rate);
            let v: f64 = (1..=12)
                .map(|k| {
                    let k = f64::from(k);
                    (2.0 * std::f64::consts::PI * 140.0 * k * t
                        + std::f64::consts::PI * k * k / 12.0)
                        .sin()
                        / k
                })
                .sum();
            (0.2 * v) as f32
        })
        .collect()
}

/// `count` bursts of the harmonic complex, `on` seconds each, every `period` seconds,
/// digital silence between; the signal ends with the last gap. Returns the signal and the
/// bursts' spans in seconds.
fn gated(on: f64, period: f64, count: usize) -> (Vec<f32>, Vec<(f64, f64)>) {
    let on_n = (on * f64::from(RATE)).round() as usize;
    let period_n = (period * f64::from(RATE)).round() as usize;
    let burst = harmonic_complex(on_n, RATE);
    let mut x = vec![0.0f32; period_n * count];
    let mut spans = Vec::new();
    for k in 0..count {
        x[k * period_n..k * period_n + on_n].copy_from_slice(&burst);
        spans.push((k as f64 * period, k as f64 * period + on));
    }
    (x, spans)
}

/// Deterministic pseudo-random numbers in [-1, 1) (a 64-bit LCG, Knuth's MMIX constants).
fn lcg(state: &mut u64) -> f64 {
    *state = state
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    (*state >> 11) as f64 / (1u64 << 52) as f64 - 1.0
}

/// Speech-like: syllables of 80-350 ms (noise or the harmonic complex, level varying over
/// 12 dB, 10 ms raised-cosine edges) separated by pauses of 30-700 ms with a faint noise
/// floor 60 dB below full scale.
fn speech_like(secs: f64, rate: u32, seed: u64) -> Vec<f32> {
    let n = (secs * f64::from(rate)).round() as usize;
    let voiced = harmonic_complex(n, rate);
    let mut s = seed;
    let mut x = Vec::with_capacity(n);
    while x.len() < n {
        let on = ((0.08 + 0.135 * (lcg(&mut s) + 1.0)) * f64::from(rate)) as usize;
        let gain = 10f64.powf(6.0 * lcg(&mut s) / 20.0);
        let noisy = lcg(&mut s) > 0.3;
        let edge = (0.01 * f64::from(rate)) as usize;
        for i in 0..on {
            let w = if i < edge {
                0.5 - 0.5 * (std::f64::consts::PI * i as f64 / edge as f64).cos()
            } else if on - i <= edge {
                0.5 - 0.5 * (std::f64::consts::PI * (on - i) as f64 / edge as f64).cos()
            } else {
                1.0
            };
            let v = if noisy {
                0.3 * lcg(&mut s)
            } else {
                f64::from(voiced[x.len() % n])
            };
            x.push((gain * w * v) as f32);
        }
        let off = ((0.03 + 0.335 * (lcg(&mut s) + 1.0)) * f64::from(rate)) as usize;
        for _ in 0..off {
            x.push((1e-3 * lcg(&mut s)) as f32);
        }
    }
    x.truncate(n);
    x
}

fn measure(x: &[f32], rate: u32) -> ActiveLevel {
    active_speech_level(x, rate).expect("a signal with energy has a level")
}

#[test]
fn continuous_tone_is_active_throughout_at_its_rms_level() {
    // A sine of amplitude a has mean square a^2 / 2: -3.01 dB for a = 1 (textbook identity).
    // The only time not counted active is the envelope's rise to the deciding threshold at
    // the start (about 23 ms of 10 s), so the predicted activity is 1 - rise / 10 s and the
    // level sits at most 10 log10(1 / 0.997) = 0.013 dB above the RMS level.
    // Tolerance on the activity, 2e-4: one sample is 6e-6 of the signal, and interpolating
    // between thresholds 6 dB apart moves the activity by less than a tenth of its change
    // over one threshold step (0.001 here).
    for (freq, amp_db) in [(1000.0, 0.0), (300.0, -20.0), (2500.0, -45.0)] {
        let amp = 10f64.powf(amp_db / 20.0);
        let x = common::sine(freq, 10.0, RATE, amp);
        let rms_db = amp_db - 3.0103;
        let m = measure(&x, RATE);
        let predicted = predicted_activity(&[(0.0, 10.0)], 10.0, mean_abs(&x), rms_db);
        assert!((0.996..0.999).contains(&predicted), "{predicted}");
        assert!(
            (m.activity - predicted).abs() < 2e-4,
            "{freq} Hz: {m:?} vs {predicted}"
        );
        assert!((m.long_term_db - rms_db).abs() < 1e-3, "{m:?}");
        assert!(
            m.level_db - rms_db > 0.0 && m.level_db - rms_db < 0.015,
            "{m:?}"
        );
    }
}

#[test]
fn gated_bursts_give_the_power_of_the_bursts_and_their_share_of_time() {
    // P.56 clause 3: active level = long-term power / activity factor. With bursts on half
    // the time and digital silence between, the active level is the bursts' own power,
    // long-term + 3.01 dB, except that each burst is counted active for its envelope's decay
    // plus the 0.2 s hangover after it ends, less its envelope's rise (about +0.27 s per
    // burst in all): predicted by `predicted_activity`. Tolerances: 0.002 on the activity
    // (edges quantised to one sample, 5e-5 here; linear interpolation between thresholds
    // 6 dB apart, under 1e-3 since the activity changes by about 0.01 per threshold step),
    // i.e. 0.02 dB on the level.
    for (on, period, count, lo, hi) in [
        // 50 % nominal: 4 s bursts, 4 s gaps.
        (4.0, 8.0, 4, 0.52, 0.55),
        // 25 % nominal: 1 s bursts, 3 s gaps.
        (1.0, 4.0, 5, 0.30, 0.33),
    ] {
        let (x, spans) = gated(on, period, count);
        let total = period * count as f64;
        let on_n = (on * f64::from(RATE)).round() as usize;
        let burst_db = db_power(&x[..on_n]);
        let e = mean_abs(&x[..on_n]);
        let m = measure(&x, RATE);
        let nominal = on / period;
        assert!(
            (m.long_term_db - (burst_db + 10.0 * nominal.log10())).abs() < 1e-6,
            "{m:?}"
        );
        let predicted = predicted_activity(&spans, total, e, m.long_term_db);
        assert!((lo..hi).contains(&predicted), "{predicted}");
        assert!(
            (m.activity - predicted).abs() < 0.002,
            "{m:?} vs {predicted}"
        );
        let level_predicted = m.long_term_db - 10.0 * predicted.log10();
        assert!(
            (m.level_db - level_predicted).abs() < 0.02,
            "{m:?} vs {level_predicted}"
        );
        // The active level is the bursts' power, lowered only by the hangover's share.
        let hangover_share_db = 10.0 * (predicted / nominal).log10();
        assert!(
            (m.level_db - (burst_db - hangover_share_db)).abs() < 0.02,
            "{m:?}, bursts at {burst_db} dB"
        );
    }
}

#[test]
fn pauses_shorter_than_the_hangover_count_as_active() {
    // 200 ms bursts with 200 ms of silence between: every pause is shorter than the
    // deciding threshold's decay plus the 0.2 s hangover (P.56 clause 8.3), so the method
    // counts it as speech, as it is meant to for the short pauses inside an utterance. Only
    // the envelope's rise at the very start is inactive: predicted activity about 0.998,
    // not 0.5, and the active level equals the long-term level (+3.01 dB would be wrong).
    let (x, spans) = gated(0.2, 0.4, 25);
    let e = mean_abs(&x[..3200]);
    let m = measure(&x, RATE);
    let predicted = predicted_activity(&spans, 10.0, e, m.long_term_db);
    assert!(predicted > 0.997, "{predicted}");
    assert!(
        (m.activity - predicted).abs() < 2e-4,
        "{m:?} vs {predicted}"
    );
    assert!((m.level_db - m.long_term_db).abs() < 0.015, "{m:?}");
}

#[test]
fn gain_moves_the_level_db_for_db_and_leaves_the_activity() {
    let x = speech_like(20.0, RATE, 11);
    let base = measure(&x, RATE);
    assert!((0.4..0.95).contains(&base.activity), "{base:?}");
    // Doubling the amplitude (+6.02 dB) shifts the envelope by exactly one threshold step
    // (the thresholds are a factor of two apart, and scaling by two is exact in binary
    // floating point), so the activity is the same to rounding and the level is 6.02 dB up.
    let doubled: Vec<f32> = x.iter().map(|&s| 2.0 * s).collect();
    let d = measure(&doubled, RATE);
    assert!(
        (d.level_db - base.level_db - DB_DOUBLE).abs() < 1e-9,
        "{d:?} vs {base:?}"
    );
    assert!((d.long_term_db - base.long_term_db - DB_DOUBLE).abs() < 1e-9);
    assert!((d.activity - base.activity).abs() < 1e-12);
    // Any other gain places the thresholds differently against the signal; the level then
    // follows dB for dB only up to the interpolation between thresholds 6 dB apart. The
    // bound, 0.05 dB on the level and 0.005 on the activity, is our own choice (no source);
    // the sweep below covers a whole threshold step.
    for tenth_db in (5..60).step_by(5) {
        let gain_db = -f64::from(tenth_db) / 10.0;
        let g = 10f64.powf(gain_db / 20.0) as f32;
        let y: Vec<f32> = x.iter().map(|&s| g * s).collect();
        let m = measure(&y, RATE);
        let gain_applied = m.long_term_db - base.long_term_db;
        assert!((gain_applied - gain_db).abs() < 1e-4);
        assert!(
            (m.level_db - base.level_db - gain_applied).abs() < 0.05,
            "{gain_db} dB: {m:?} vs {base:?}"
        );
        assert!(
            (m.activity - base.activity).abs() < 0.005,
            "{gain_db} dB: {m:?} vs {base:?}"
        );
    }
}

#[test]
fn silence_and_unmeasurable_input_give_none() {
    assert_eq!(active_speech_level(&[], RATE), None);
    assert_eq!(active_speech_level(&vec![0.0; 16_000], RATE), None);
    let tone = common::sine(440.0, 1.0, RATE, 0.5);
    assert_eq!(active_speech_level(&tone, 0), None);
    let mut bad = tone.clone();
    bad[100] = f32::NAN;
    assert_eq!(active_speech_level(&bad, RATE), None);
    // -800 dB (f32 subnormals): below the lowest threshold's reach.
    let faint = common::sine(440.0, 1.0, RATE, 1e-40);
    assert!(faint.iter().any(|&s| s != 0.0));
    assert_eq!(active_speech_level(&faint, RATE), None);
    // The lowest threshold is 2^-32 (-192.7 dB); with the 15.9 dB margin, active levels
    // below about -176.8 dB are out of reach: -185 dB peak is, -170 dB peak is not.
    let below_reach = common::sine(440.0, 1.0, RATE, 10f64.powf(-185.0 / 20.0));
    assert_eq!(active_speech_level(&below_reach, RATE), None);
    let within_reach = common::sine(440.0, 1.0, RATE, 10f64.powf(-170.0 / 20.0));
    assert!(active_speech_level(&within_reach, RATE).is_some());
    // A tone at -150 dB is far below the 16-bit floor but within the float threshold set.
    // Like the tones above, 10 s long: within 0.015 dB above its RMS level.
    let quiet = common::sine(440.0, 10.0, RATE, 10f64.powf(-150.0 / 20.0));
    let m = measure(&quiet, RATE);
    assert!((m.long_term_db - (-153.0103)).abs() < 1e-3, "{m:?}");
    assert!(
        m.level_db - m.long_term_db > 0.0 && m.level_db - m.long_term_db < 0.015,
        "{m:?}"
    );
}

/// An implementation of P.56 method B written for this test from the standard's
/// description (numpy only), with the activity rule in its windowed form: sample i is active
/// for threshold c when the envelope reached c at some sample in [i - I, i].
const NUMPY_P56: &str = r#"
import sys
import numpy as np

x = np.fromfile(sys.argv[1], '<f8')
fs = float(sys.argv[2])
T, H, M = 0.03, 0.2, 15.9  # P.56 clause 8.3, as realized in ITU-T G.191 sv-p56
g = np.exp(-1.0 / (T * fs))
h = 1.0 - g
I = int(np.floor(H * fs + 0.5))
q = np.empty(len(x))
p_, q_ = 0.0, 0.0
for i, v in enumerate(np.abs(x).tolist()):
    p_ = g * p_ + h * v
    q_ = g * q_ + h * p_
    q[i] = q_
energy = float(np.sum(x * x))
n = len(x)
idx = np.arange(n)
level = None
prev = None
for e in range(-32, 5):
    c = 2.0 ** e
    last = np.maximum.accumulate(np.where(q >= c, idx, -(10 ** 12)))
    a = int(np.count_nonzero(idx - last <= I))
    if a == 0:
        break
    A = 10 * np.log10(energy / a)
    C = 20 * np.log10(c)
    D = A - C
    if D <= M:
        A0, D0 = prev
        level = A0 + (D0 - M) / (D0 - D) * (A - A0)
        break
    prev = (A, D)
if level is None:
    level = prev[0]
lt = energy / n
print(repr(float(level)), repr(float(lt / 10 ** (level / 10))), repr(float(10 * np.log10(lt))))
"#;

#[test]
fn agrees_with_an_independent_numpy_implementation() {
    let dir = tempfile::tempdir().unwrap();
    let quiet: Vec<f32> = speech_like(6.0, 8000, 5)
        .iter()
        .map(|&s| s * 1e-5)
        .collect();
    let cases: Vec<(&str, Vec<f32>, u32)> = vec![
        ("speech-like 16 kHz", speech_like(20.0, RATE, 3), RATE),
        ("speech-like 8 kHz, -100 dB", quiet, 8000),
        ("gated bursts", gated(1.0, 2.5, 4).0, RATE),
        ("speech-like 44.1 kHz", speech_like(8.0, 44_100, 9), 44_100),
    ];
    for (name, x, rate) in cases {
        let path = dir.path().join("x.f64");
        let xf: Vec<f64> = x.iter().map(|&s| f64::from(s)).collect();
        common::write_f64(&path, &xf);
        let out = common::run_python(NUMPY_P56, &[path.to_str().unwrap(), &rate.to_string()]);
        let v: Vec<f64> = out.split_whitespace().map(|t| t.parse().unwrap()).collect();
        let m = measure(&x, rate);
        assert!(
            (m.level_db - v[0]).abs() < 1e-9,
            "{name}: {m:?} vs numpy {v:?}"
        );
        assert!(
            (m.activity - v[1]).abs() < 1e-12,
            "{name}: {m:?} vs numpy {v:?}"
        );
        assert!(
            (m.long_term_db - v[2]).abs() < 1e-9,
            "{name}: {m:?} vs numpy {v:?}"
        );
    }
}

#[test]
fn the_constants_are_p56s() {
    // P.56 clause 8.3 "Values of the parameters", as realized by the ITU-T itself in the
    // G.191 Software Tool Library (module sv-p56, v2.3): T = 0.03 s, H = 0.20 s,
    // M = 15.9 dB.
    assert_eq!((TIME_CONSTANT_S, HANGOVER_S, MARGIN_DB), (0.03, 0.2, 15.9));
}
