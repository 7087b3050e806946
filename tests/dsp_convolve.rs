//! FFT overlap-add convolution against the outside world: scipy's FFT convolution on random
//! signals of awkward lengths, and the defining sum on small ones, through every method.

mod common;

use retake::dsp::convolve::{Method, convolve, convolve_into, convolve_with, full_len, method};

/// Max abs error over max abs reference.
fn relative_error(got: &[f32], want: &[f64]) -> f64 {
    assert_eq!(got.len(), want.len(), "lengths differ");
    let err = got
        .iter()
        .zip(want)
        .map(|(g, w)| (f64::from(*g) - w).abs())
        .fold(0.0, f64::max);
    let scale = want.iter().map(|w| w.abs()).fold(0.0, f64::max);
    err / scale
}

/// The defining sum `y[k] = sum_i x[i] h[k - i]` (textbook), in f64.
fn direct_sum(x: &[f32], h: &[f32]) -> Vec<f64> {
    let mut y = vec![0.0; full_len(x.len(), h.len())];
    for (i, &xi) in x.iter().enumerate() {
        for (j, &hj) in h.iter().enumerate() {
            y[i + j] += f64::from(xi) * f64::from(hj);
        }
    }
    y
}

/// For each case `kind n m seed`, writes x (n samples) and h (m samples) as float32 values
/// stored in f64, and y = scipy.signal.fftconvolve(x, h) computed in float64.
/// Kinds: "white" is standard normal noise for both; "room" is a clip-like x (two tones in
/// noise) and h exponentially decaying noise with a direct-path spike, 60 dB down over its
/// length (a synthetic room response).
const SCIPY_CONVOLVE: &str = r#"
import sys
import numpy as np
from scipy import signal
out = sys.argv[1]
for case in sys.argv[2:]:
    kind, n, m, seed = case.split(":")
    n, m, seed = int(n), int(m), int(seed)
    rng = np.random.default_rng(seed)
    if kind == "white":
        x = rng.standard_normal(n)
        h = rng.standard_normal(m)
    else:
        t = np.arange(n) / 16000
        x = 0.5 * np.sin(2 * np.pi * 440 * t) + 0.2 * np.sin(2 * np.pi * 1230 * t) + 0.05 * rng.standard_normal(n)
        h = rng.standard_normal(m) * np.exp(-6.9078 * np.arange(m) / m)
        h[0] = 8.0
    x = x.astype(np.float32).astype(np.float64)
    h = h.astype(np.float32).astype(np.float64)
    y = signal.fftconvolve(x, h)
    x.astype("<f8").tofile(f"{out}/{case}.x")
    h.astype("<f8").tofile(f"{out}/{case}.h")
    y.astype("<f8").tofile(f"{out}/{case}.y")
"#;

#[test]
fn agrees_with_scipy_fftconvolve() {
    // Reference: scipy.signal.fftconvolve (PyPI, scipy 1.17.1), computed in float64 from
    // the same float32 inputs. Tolerance: 1e-5 of the largest output sample (max abs error
    // / max abs reference); f32 transforms of up to 2^17 points measure about 1e-7 to 1e-6
    // here.
    let cases = [
        "white:1:1:1",
        "white:7:1:2",
        "white:1:7:3",
        "white:7:7:4",
        "white:1000:7:5",
        "white:1000:1000:6",
        "white:16001:257:7",
        "white:16001:4800:8",
        "white:48000:1:9",
        "white:48000:16000:10",
        "white:48000:48000:11",
        "white:500:16000:12",
        "white:7:16001:13",
        "white:16001:48000:14",
        "room:80000:4800:15",
        "room:80000:16000:16",
        "room:1000:16000:17",
    ];
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().to_str().unwrap();
    let mut args = vec![d];
    args.extend(cases);
    common::run_python(SCIPY_CONVOLVE, &args);
    let mut worst: f64 = 0.0;
    for case in cases {
        let read = |ext: &str| common::read_f64(&dir.path().join(format!("{case}.{ext}")));
        let to_f32 = |v: Vec<f64>| v.into_iter().map(|s| s as f32).collect::<Vec<f32>>();
        let (x, h, y) = (to_f32(read("x")), to_f32(read("h")), read("y"));
        let got = convolve(&x, &h);
        let err = relative_error(&got, &y);
        assert!(
            err < 1e-5,
            "{case} ({:?}): relative error {err:.2e}",
            method(x.len(), h.len())
        );
        eprintln!(
            "{case}: {:?}, relative error {err:.2e}",
            method(x.len(), h.len())
        );
        worst = worst.max(err);
    }
    // Not a tolerance but a sanity floor: f32 cannot be this exact on these sizes, so a
    // reference that matched to 1e-12 would mean the comparison read the wrong files.
    assert!(worst > 1e-9, "suspiciously exact: {worst:.2e}");
}

#[test]
fn every_method_matches_the_defining_sum_on_small_sizes() {
    // Reference: the defining sum of linear convolution (textbook), in f64. Every method
    // the cost model can pick (direct, and overlap-add with every FFT size from the
    // smallest allowed to twice the single-block size) on every pair of lengths 1..=12 and
    // a few larger ones. Tolerance 1e-6 of the largest output sample.
    let mut lengths: Vec<usize> = (1..=12).collect();
    lengths.extend([31, 64, 65, 100]);
    let mut checked = 0;
    for &n in &lengths {
        for &m in &lengths {
            let x = common::noise(n, n as u64);
            let h = common::noise(m, 1000 + m as u64);
            let want = direct_sum(&x, &h);
            let short = n.min(m);
            let mut methods = vec![Method::Direct];
            let mut fft_len = short.next_power_of_two().max(2);
            while fft_len <= 2 * (n + m - 1).next_power_of_two() {
                methods.push(Method::OverlapAdd { fft_len });
                fft_len *= 2;
            }
            for meth in methods {
                let mut got = vec![f32::NAN; full_len(n, m)];
                convolve_with(&x, &h, meth, &mut got);
                let err = relative_error(&got, &want);
                assert!(
                    err < 1e-6,
                    "n {n}, m {m}, {meth:?}: relative error {err:.2e}"
                );
                checked += 1;
            }
        }
    }
    assert!(checked > 1000, "only {checked} combinations checked");
}

#[test]
fn empty_operands_give_an_empty_result() {
    assert!(convolve(&[], &[1.0, 2.0]).is_empty());
    assert!(convolve(&[1.0, 2.0], &[]).is_empty());
    assert!(convolve(&[], &[]).is_empty());
    assert_eq!(full_len(0, 5), 0);
    assert_eq!(full_len(3, 5), 7);
}

#[test]
fn operands_commute_and_a_unit_impulse_is_the_identity() {
    // Textbook properties: x * h = h * x; x * delta = x; x * delta(t - d) = x delayed by d.
    let x = common::noise(5000, 1);
    let h = common::noise(700, 2);
    let (a, b) = (convolve(&x, &h), convolve(&h, &x));
    assert_eq!(a.len(), 5699);
    let diff = a
        .iter()
        .zip(&b)
        .map(|(p, q)| (p - q).abs())
        .fold(0.0, f32::max);
    assert!(diff < 1e-5, "x*h and h*x differ by {diff}");

    let mut delayed = vec![0.0; 301];
    delayed[300] = 1.0;
    let y = convolve(&x, &delayed);
    assert_eq!(y.len(), 5300);
    assert!(y[..300].iter().all(|v| v.abs() < 1e-6));
    let err = y[300..]
        .iter()
        .zip(&x)
        .map(|(p, q)| (p - q).abs())
        .fold(0.0, f32::max);
    assert!(err < 1e-6, "delayed copy off by {err}");
}

#[test]
fn convolve_into_overwrites_the_callers_buffer() {
    let x = common::noise(3000, 3);
    let h = common::noise(200, 4);
    let mut out = vec![123.0; full_len(x.len(), h.len())];
    convolve_into(&x, &h, &mut out);
    assert_eq!(out, convolve(&x, &h));
}

#[test]
#[should_panic(expected = "needs an output of 7")]
fn convolve_into_refuses_a_wrong_length() {
    convolve_into(&[1.0; 4], &[1.0; 4], &mut [0.0; 6]);
}

#[test]
fn the_cost_model_picks_sensible_sizes() {
    // Our cost model, measured on this machine (see `DIRECT_MAC_COST`): direct for a
    // few-tap filter; blocks a few times the response for short responses; one block
    // holding the whole result when the response is as long as the clip or longer.
    assert_eq!(method(80_000, 4), Method::Direct);
    assert_eq!(method(4, 80_000), Method::Direct);
    assert_eq!(method(80_000, 128), Method::OverlapAdd { fft_len: 1024 });
    for (n, m) in [(80_000, 4800), (80_000, 16_000)] {
        let Method::OverlapAdd { fft_len } = method(n, m) else {
            panic!("direct for {n} x {m}");
        };
        assert!(
            (2 * m..=8 * m).contains(&fft_len),
            "{n} x {m}: FFT size {fft_len}"
        );
    }
    assert_eq!(
        method(500, 16_000),
        Method::OverlapAdd { fft_len: 2048 },
        "the 500-sample signal is the filter"
    );
    assert_eq!(
        method(16_000, 16_000),
        Method::OverlapAdd { fft_len: 32768 }
    );
}
