//! STFT and inverse STFT against the outside world (scipy's STFT; numpy's reflect padding
//! and real FFT), exact resynthesis over a matrix of configurations, signals and lengths,
//! frame and bin placement in seconds and Hz, configuration errors, and the mel formulas
//! against values worked by hand.

mod common;

use retake::dsp::mel::{self, MelScale};
use retake::dsp::stft::{
    Edge, MIN_OVERLAP_FLOOR, Spectrogram, Stft, StftConfig, StftError, Window,
};

/// Resynthesis must give the signal back within this, relative to its peak.
const ROUND_TRIP_TOL: f64 = 1e-6;
/// Spectra must agree with a float64 reference within this, relative to the reference's
/// largest magnitude (the transforms here run in f32).
const SPECTRUM_TOL: f64 = 1e-5;

/// The configurations every check runs over: the speech default (25 ms / 10 ms at 16 kHz,
/// padded FFT), a 75 %-overlap frame with no padding, a long frame with a doubled FFT.
const CONFIGS: [(usize, usize, usize); 3] = [(400, 160, 512), (512, 128, 512), (1024, 256, 2048)];

fn config(window_len: usize, hop: usize, fft_len: usize, edge: Edge) -> StftConfig {
    StftConfig {
        window_len,
        hop,
        fft_len,
        window: Window::Hann,
        edge,
    }
}

/// A speech-like signal at 16 kHz: a voiced source gliding from 110 to 190 Hz with 30
/// harmonics shaped by two formant-like resonances (700 Hz and 1200 Hz), under a 4 Hz
/// syllable envelope, plus quiet noise (so the pauses are not digital silence).
fn speech_like(n: usize, seed: u64) -> Vec<f32> {
    let rate = 16_000.0;
    let hiss = common::noise(n, seed);
    let mut phase = 0.0_f64;
    (0..n)
        .map(|i| {
            let t = i as f64 / rate;
            let f0 = 110.0 + 80.0 * (0.5 - 0.5 * (2.0 * std::f64::consts::PI * 0.7 * t).cos());
            phase += 2.0 * std::f64::consts::PI * f0 / rate;
            let voiced: f64 = (1..=30)
                .map(|h| {
                    let f = h as f64 * f0;
                    let formant = |c: f64, bw: f64| 1.0 / (1.0 + ((f - c) / bw).powi(2));
                    (formant(700.0, 150.0) + 0.6 * formant(1200.0, 200.0) + 0.02)
                        * (h as f64 * phase).sin()
                })
                .sum();
            let envelope = (std::f64::consts::PI * 4.0 * t).sin().powi(2);
            (0.3 * envelope * voiced + 0.01 * f64::from(hiss[i])) as f32
        })
        .collect()
}

/// Max abs error over max abs of `want`.
fn relative_error(got: &[f32], want: &[f32]) -> f64 {
    assert_eq!(got.len(), want.len(), "lengths differ");
    let err = got
        .iter()
        .zip(want)
        .map(|(g, w)| (f64::from(*g) - f64::from(*w)).abs())
        .fold(0.0, f64::max);
    let scale = want.iter().map(|w| f64::from(*w).abs()).fold(0.0, f64::max);
    err / scale
}

#[test]
fn resynthesis_returns_the_signal_over_configs_signals_and_lengths() {
    // Lengths: one sample; shorter than every window; one sample either side of a window;
    // not a multiple of any hop; whole seconds plus a remainder.
    let lengths = [1, 2, 37, 399, 401, 1000, 1023, 4097, 16_003, 48_017];
    // Plus odd window and FFT lengths (the inverse FFT has no Nyquist bin then).
    for (window_len, hop, fft_len) in CONFIGS.into_iter().chain([(401, 150, 403)]) {
        for edge in [Edge::Reflect, Edge::Zero] {
            let mut stft = Stft::new(config(window_len, hop, fft_len, edge)).expect("valid");
            let mut worst = 0.0_f64;
            for (k, &n) in lengths.iter().enumerate() {
                for (kind, x) in [
                    ("noise", common::noise(n, k as u64 + 1)),
                    ("speech-like", speech_like(n, k as u64 + 100)),
                ] {
                    let spec = stft.analyse(&x);
                    assert_eq!(spec.frames(), n.div_ceil(hop) + 1);
                    let y = stft.synthesise(&spec);
                    let err = relative_error(&y, &x);
                    assert!(
                        err <= ROUND_TRIP_TOL,
                        "{window_len}/{hop}/{fft_len} {edge:?} {kind} n={n}: error {err:.2e}"
                    );
                    worst = worst.max(err);
                }
            }
            println!("round trip {window_len}/{hop}/{fft_len} {edge:?}: worst {worst:.2e}");
        }
    }
}

#[test]
fn resynthesis_at_the_longest_accepted_hop_is_still_exact() {
    // The longest hop validate() accepts for a 400-sample window sits where the squared
    // windows overlap-add to just over MIN_OVERLAP_FLOOR of their peak; the inverse must
    // still hold there.
    let max_hop = match config(400, 400, 512, Edge::Reflect).validate() {
        Err(StftError::SparseOverlap { max_hop, .. }) => max_hop,
        other => panic!("hop = window must be refused as sparse, got {other:?}"),
    };
    // Computed once with numpy (PyPI) from the periodic Hann window, min over max of
    // sum_j w[p + j hop]^2 over the phases p of the hop: 0.1017 at hop 274, 0.0988 at 275.
    assert_eq!(max_hop, 274);
    match config(400, max_hop + 1, 512, Edge::Reflect).validate() {
        Err(StftError::SparseOverlap { floor, .. }) => {
            assert!((floor - 0.0988).abs() < 1e-4, "floor {floor}");
            assert!(floor < MIN_OVERLAP_FLOOR);
        }
        other => panic!("hop {} must be refused, got {other:?}", max_hop + 1),
    }
    let mut stft = Stft::new(config(400, max_hop, 512, Edge::Reflect)).expect("accepted");
    for n in [150, 5_003] {
        let x = speech_like(n, 7);
        let spec = stft.analyse(&x);
        let err = relative_error(&stft.synthesise(&spec), &x);
        assert!(err <= ROUND_TRIP_TOL, "hop {max_hop} n={n}: {err:.2e}");
    }
}

#[test]
fn reused_buffers_give_the_same_results() {
    let mut stft = Stft::new(StftConfig::default()).expect("valid");
    let long = speech_like(20_000, 3);
    let short = common::noise(3_001, 4);
    let mut spec = Spectrogram::default();
    stft.analyse_into(&long, &mut spec);
    assert_eq!(spec, stft.analyse(&long));
    stft.analyse_into(&short, &mut spec);
    let fresh = stft.analyse(&short);
    assert_eq!(spec, fresh);
    assert_eq!((spec.frames(), spec.signal_len()), (20, 3_001));
    let mut out = vec![9.0; short.len()];
    stft.synthesise_into(&spec, &mut out);
    assert_eq!(out, stft.synthesise(&fresh));
    // A clone shares the plans and gives the same spectrum.
    assert_eq!(stft.clone().analyse(&short), fresh);
}

#[test]
fn empty_signal_has_no_frames_and_resynthesises_empty() {
    let mut stft = Stft::new(StftConfig::default()).expect("valid");
    let spec = stft.analyse(&[]);
    assert_eq!((spec.frames(), spec.bins(), spec.data().len()), (0, 257, 0));
    assert!(stft.synthesise(&spec).is_empty());
}

#[test]
#[should_panic(expected = "different STFT configuration")]
fn synthesis_refuses_a_spectrogram_of_another_configuration() {
    let x = common::noise(2_000, 5);
    let spec = Stft::new(StftConfig::default()).expect("valid").analyse(&x);
    let mut other = Stft::new(config(512, 128, 512, Edge::Reflect)).expect("valid");
    let _ = other.synthesise(&spec);
}

/// For each case `window_len hop fft_len n seed`: x (standard normal, rounded to float32),
/// then Zxx from scipy.signal.stft with a periodic Hann window, boundary="zeros",
/// padded=True (its defaults), scaling="spectrum" (its default: the DFT divided by
/// sum(window)), flattened frame by frame as (re, im) pairs.
const SCIPY_STFT: &str = r#"
import sys
import numpy as np
from scipy import signal
out = sys.argv[1]
xs, zs = [], []
for case in sys.argv[2:]:
    w, hop, nfft, n, seed = map(int, case.split(":"))
    x = np.random.default_rng(seed).standard_normal(n).astype(np.float32).astype(np.float64)
    _, _, z = signal.stft(x, window="hann", nperseg=w, noverlap=w - hop, nfft=nfft,
                          boundary="zeros", padded=True, scaling="spectrum")
    xs.append(x)
    zs.append(np.stack([z.T.real, z.T.imag], axis=-1).ravel())
np.concatenate(xs).tofile(out + ".x")
np.concatenate(zs).tofile(out + ".z")
"#;

#[test]
fn frames_agree_with_scipy_stft() {
    // Lengths of at least one window (scipy shortens the window for shorter signals), on
    // and off the hop grid; an odd window length too.
    let cases: Vec<(usize, usize, usize, usize)> = CONFIGS
        .iter()
        .flat_map(|&(w, h, f)| [(w, h, f, w), (w, h, f, 5 * h), (w, h, f, 16_003)])
        .chain([(401, 100, 512, 3_333)])
        .collect();
    let dir = tempfile::tempdir().expect("temp dir");
    let base = dir.path().join("stft");
    let args: Vec<String> = std::iter::once(base.display().to_string())
        .chain(
            cases
                .iter()
                .enumerate()
                .map(|(i, (w, h, f, n))| format!("{w}:{h}:{f}:{n}:{i}")),
        )
        .collect();
    let arg_refs: Vec<&str> = args.iter().map(String::as_str).collect();
    common::run_python(SCIPY_STFT, &arg_refs);
    let xs = common::read_f64(&base.with_extension("x"));
    let zs = common::read_f64(&base.with_extension("z"));
    let (mut x_at, mut z_at) = (0, 0);
    for &(w, h, f, n) in &cases {
        let cfg = config(w, h, f, Edge::Zero);
        let x: Vec<f32> = xs[x_at..x_at + n].iter().map(|&v| v as f32).collect();
        x_at += n;
        let spec = Stft::new(cfg).expect("valid").analyse(&x);
        let count = spec.frames() * spec.bins();
        let want = &zs[z_at..z_at + 2 * count];
        z_at += 2 * count;
        // scaling="spectrum": scipy divides the DFT by sum(window); ours is unscaled.
        let window_sum: f64 = Window::Hann
            .coefficients(w)
            .iter()
            .map(|&c| f64::from(c))
            .sum();
        let mut err = 0.0_f64;
        let mut scale = 0.0_f64;
        for (got, pair) in spec.data().iter().zip(want.chunks_exact(2)) {
            let (re, im) = (
                f64::from(got.re) / window_sum,
                f64::from(got.im) / window_sum,
            );
            err = err.max((re - pair[0]).hypot(im - pair[1]));
            scale = scale.max(pair[0].hypot(pair[1]));
        }
        // Reference: scipy.signal.stft (PyPI scipy 1.17.1), same framing and frame count.
        assert!(
            err / scale <= SPECTRUM_TOL,
            "{w}/{h}/{f} n={n}: relative error {:.2e} against scipy.signal.stft",
            err / scale
        );
        println!("scipy {w}/{h}/{f} n={n}: {:.2e}", err / scale);
    }
    assert_eq!((x_at, z_at), (xs.len(), zs.len()), "every value compared");
}

/// For each case `window_len hop fft_len n seed`: x (standard normal, float32), padded in
/// one np.pad(mode="reflect") call by window_len // 2 on the left and on the right as far
/// as the last of the ceil(n / hop) + 1 frames reaches, cut into frames starting every hop
/// samples, times a periodic Hann window, transformed with np.fft.rfft(n=nfft).
const NUMPY_REFLECT: &str = r#"
import sys
import numpy as np
out = sys.argv[1]
xs, zs = [], []
for case in sys.argv[2:]:
    w, hop, nfft, n, seed = map(int, case.split(":"))
    x = np.random.default_rng(seed).standard_normal(n).astype(np.float32).astype(np.float64)
    half = w // 2
    frames = -(-n // hop) + 1
    padded = np.pad(x, (half, (frames - 1) * hop + w - half - n), mode="reflect")
    win = 0.5 - 0.5 * np.cos(2 * np.pi * np.arange(w) / w)
    z = np.stack([np.fft.rfft(padded[t * hop:t * hop + w] * win, n=nfft) for t in range(frames)])
    xs.append(x)
    zs.append(np.stack([z.real, z.imag], axis=-1).ravel())
np.concatenate(xs).tofile(out + ".x")
np.concatenate(zs).tofile(out + ".z")
"#;

#[test]
fn reflected_edges_agree_with_numpy_pad_and_rfft() {
    // Short signals too: numpy mirrors back and forth when the padding is longer than
    // the signal, and so must we.
    let cases: Vec<(usize, usize, usize, usize)> = CONFIGS
        .iter()
        .flat_map(|&(w, h, f)| {
            [
                (w, h, f, 2),
                (w, h, f, 37),
                (w, h, f, w + 3),
                (w, h, f, 4_001),
            ]
        })
        .collect();
    let dir = tempfile::tempdir().expect("temp dir");
    let base = dir.path().join("reflect");
    let args: Vec<String> = std::iter::once(base.display().to_string())
        .chain(
            cases
                .iter()
                .enumerate()
                .map(|(i, (w, h, f, n))| format!("{w}:{h}:{f}:{n}:{}", i + 50)),
        )
        .collect();
    let arg_refs: Vec<&str> = args.iter().map(String::as_str).collect();
    common::run_python(NUMPY_REFLECT, &arg_refs);
    let xs = common::read_f64(&base.with_extension("x"));
    let zs = common::read_f64(&base.with_extension("z"));
    let (mut x_at, mut z_at) = (0, 0);
    for &(w, h, f, n) in &cases {
        let x: Vec<f32> = xs[x_at..x_at + n].iter().map(|&v| v as f32).collect();
        x_at += n;
        let spec = Stft::new(config(w, h, f, Edge::Reflect))
            .expect("valid")
            .analyse(&x);
        let want = &zs[z_at..z_at + 2 * spec.data().len()];
        z_at += want.len();
        let mut err = 0.0_f64;
        let mut scale = 0.0_f64;
        for (got, pair) in spec.data().iter().zip(want.chunks_exact(2)) {
            err = err.max((f64::from(got.re) - pair[0]).hypot(f64::from(got.im) - pair[1]));
            scale = scale.max(pair[0].hypot(pair[1]));
        }
        // Reference: numpy.pad(mode="reflect") and numpy.fft.rfft (PyPI numpy 2.4.6).
        assert!(
            err / scale <= SPECTRUM_TOL,
            "{w}/{h}/{f} n={n}: relative error {:.2e} against numpy",
            err / scale
        );
    }
    assert_eq!((x_at, z_at), (xs.len(), zs.len()), "every value compared");
}

#[test]
fn frames_and_bins_are_placed_in_seconds_and_hz() {
    let cfg = StftConfig::default();
    assert_eq!(
        (cfg.window_len, cfg.hop, cfg.fft_len, cfg.bins()),
        (400, 160, 512, 257)
    );
    // 160 samples at 16 kHz are 10 ms; 16000 / 512 = 31.25 Hz per bin.
    assert_eq!(cfg.frame_secs(100, 16_000), 1.0);
    assert_eq!(cfg.frame_secs(3, 16_000), 0.03);
    assert_eq!(cfg.bin_hz(32, 16_000), 1000.0);
    assert_eq!(cfg.bin_hz(256, 16_000), 8000.0);

    // A click at 0.5 s (sample 8000) peaks in the frame centred on 0.5 s.
    let mut stft = Stft::new(cfg).expect("valid");
    let mut x = vec![0.0_f32; 16_000];
    x[8_000] = 1.0;
    let spec = stft.analyse(&x);
    let energy = |t: usize| spec.frame(t).iter().map(|c| c.norm_sqr()).sum::<f32>();
    let loudest = (0..spec.frames())
        .max_by(|&a, &b| energy(a).total_cmp(&energy(b)))
        .expect("frames");
    assert_eq!(loudest, 50);
    assert_eq!(cfg.frame_secs(loudest, 16_000), 0.5);

    // A 1 kHz sine of amplitude 0.5 sits on bin 32 with magnitude A * sum(w) / 2 =
    // 0.5 * 200 / 2 = 50 (a periodic Hann window of 400 samples sums to 200) in a frame
    // away from the edges (worked by hand).
    let sine = common::sine(1000.0, 1.0, 16_000, 0.5);
    let spec = stft.analyse(&sine);
    let frame = spec.frame(40);
    let peak = (0..spec.bins())
        .max_by(|&a, &b| frame[a].norm().total_cmp(&frame[b].norm()))
        .expect("bins");
    assert_eq!(peak, 32);
    assert!(
        (frame[32].norm() - 50.0).abs() < 1e-3,
        "{}",
        frame[32].norm()
    );
    assert_eq!(spec.bins_within(990.0, 1010.0, 16_000), 32..33);

    // Ranges for masks: centres in [start, end), clipped to what exists. 0.03 s is frame
    // 3 exactly even though 0.03 * 16000 / 160 rounds to 3.0000000000000004.
    assert_eq!(spec.frames(), 101);
    assert_eq!(spec.frames_within(0.03, 0.05, 16_000), 3..5);
    assert_eq!(spec.frames_within(0.031, 0.05, 16_000), 4..5);
    assert_eq!(spec.frames_within(-1.0, 0.0, 16_000), 0..0);
    assert_eq!(spec.frames_within(0.9, 5.0, 16_000), 90..101);
    assert_eq!(spec.frames_within(0.5, 0.2, 16_000), 50..50);
    assert_eq!(spec.bins_within(0.0, 1000.0, 16_000), 0..32);
    assert_eq!(spec.bins_within(7000.0, 9000.0, 16_000), 224..257);
}

#[test]
fn masked_frames_resynthesise_to_silence_there() {
    // Zeroing every frame centred in 0.5 s..0.7 s silences the middle of that span
    // (the edges fade over half a window) and leaves the signal a window away untouched.
    let mut stft = Stft::new(StftConfig::default()).expect("valid");
    let x = speech_like(16_000, 9);
    let mut spec = stft.analyse(&x);
    for t in spec.frames_within(0.5, 0.7, 16_000) {
        spec.frame_mut(t).fill(Default::default());
    }
    let y = stft.synthesise(&spec);
    let peak = x.iter().fold(0.0_f32, |m, v| m.max(v.abs()));
    // Frames 50..70 (centres 8000..=11040) are zero. A frame's window is non-zero within
    // 199 samples of its centre, so the live frames 49 (centre 7840) and 70 (11200) reach
    // samples up to 8039 and from 11001: samples 8040..=11000 are silent. Samples below
    // 7801 (frame 50 starts there) and from 11240 (frame 69 ends at 11239) see only
    // unmodified frames.
    assert!(y[8_040..11_001].iter().all(|v| v.abs() < 1e-6 * peak));
    // ... and no wider: a few dozen samples either side still carry the signal.
    let energy = |s: &[f32]| s.iter().map(|v| f64::from(*v).powi(2)).sum::<f64>();
    assert!(energy(&y[7_950..8_000]) > 1e-3 * energy(&x[7_950..8_000]));
    assert!(energy(&y[11_050..11_100]) > 1e-3 * energy(&x[11_050..11_100]));
    let untouched = relative_error(&y[..7_801], &x[..7_801]);
    assert!(untouched <= ROUND_TRIP_TOL, "{untouched:.2e}");
    let untouched = relative_error(&y[11_240..], &x[11_240..]);
    assert!(untouched <= ROUND_TRIP_TOL, "{untouched:.2e}");
}

#[test]
fn bad_configurations_are_refused_with_clear_messages() {
    let good = StftConfig::default();
    assert_eq!(good.validate(), Ok(()));
    let cases: [(StftConfig, &str); 6] = [
        (
            StftConfig {
                window_len: 0,
                ..good
            },
            "STFT window_len is 0: window_len, hop and fft_len must each be at least 1",
        ),
        (
            StftConfig { hop: 0, ..good },
            "STFT hop is 0: window_len, hop and fft_len must each be at least 1",
        ),
        (
            StftConfig { fft_len: 0, ..good },
            "STFT fft_len is 0: window_len, hop and fft_len must each be at least 1",
        ),
        (
            StftConfig { hop: 401, ..good },
            "STFT hop 401 is longer than the window (400 samples): the samples between \
             windows would lie in no frame; use a hop of at most half the window",
        ),
        (
            StftConfig {
                fft_len: 256,
                ..good
            },
            "STFT fft_len 256 is shorter than the window (400 samples): a frame's FFT must \
             be at least as long as its window",
        ),
        (
            StftConfig { hop: 400, ..good },
            "STFT hop 400 is too long for a 400-sample Hann window: the squared windows \
             overlap-add to as little as 0.000 of their peak (at least 0.1 is needed to \
             invert stably); use a hop of at most ",
        ),
    ];
    for (cfg, message) in cases {
        let err = cfg.validate().expect_err("bad config");
        let text = err.to_string();
        assert!(text.starts_with(message), "{text}\nwanted: {message}");
        assert_eq!(Stft::new(cfg).expect_err("refused"), err);
    }
    // A one-sample Hann window is a single zero: nothing to invert with.
    let one = StftConfig {
        window_len: 1,
        hop: 1,
        fft_len: 1,
        ..good
    };
    assert!(matches!(
        one.validate(),
        Err(StftError::SparseOverlap { floor, .. }) if floor == 0.0
    ));
    // Half-window hops give a floor of exactly 0.5 (sin^4 + cos^4 >= 1/2): accepted.
    assert_eq!(StftConfig { hop: 200, ..good }.validate(), Ok(()));
}

#[test]
fn mel_formulas_match_values_worked_by_hand() {
    // HTK, 2595 log10(1 + f / 700):
    //   700 Hz  -> 2595 log10(2)           = 2595 * 0.30103000 = 781.1728
    //   1000 Hz -> 2595 log10(2.4285714)   = 2595 * 0.38535088 = 999.9855
    //   6300 Hz -> 2595 log10(10)          = 2595
    //   0 Hz    -> 0
    let htk = [
        (0.0, 0.0),
        (700.0, 781.1729),
        (1000.0, 999.9855),
        (6300.0, 2595.0),
    ];
    for (hz, want) in htk {
        let got = MelScale::Htk.hz_to_mel(hz);
        assert!((got - want).abs() < 1e-3, "HTK {hz} Hz: {got}, want {want}");
        assert_eq!(got, mel::htk_hz_to_mel(hz));
    }
    assert!((MelScale::Htk.hz_to_mel(1000.0) - 1000.0).abs() < 0.5);

    // Slaney: f / (200 / 3) below 1 kHz; 15 + 27 ln(f / 1000) / ln(6.4) from 1 kHz:
    //   500 Hz  -> 500 * 3 / 200                     = 7.5
    //   1000 Hz -> 15
    //   2000 Hz -> 15 + 27 * 0.69314718 / 1.85629799 = 15 + 18.7149739 / 1.85629799 = 25.081880
    //   6400 Hz -> 15 + 27                           = 42
    let slaney = [
        (0.0, 0.0),
        (500.0, 7.5),
        (1000.0, 15.0),
        (2000.0, 25.08188),
        (6400.0, 42.0),
    ];
    for (hz, want) in slaney {
        let got = MelScale::Slaney.hz_to_mel(hz);
        assert!(
            (got - want).abs() < 1e-5,
            "Slaney {hz} Hz: {got}, want {want}"
        );
        assert_eq!(got, mel::slaney_hz_to_mel(hz));
    }
    // The Slaney pieces meet at the break: just below and at 1 kHz agree to first order.
    let below = MelScale::Slaney.hz_to_mel(999.999);
    assert!((below - 15.0).abs() < 1e-4, "{below}");

    // Round trips both ways, across the break and up to 24 kHz.
    for scale in [MelScale::Htk, MelScale::Slaney] {
        for i in 0..=480 {
            let hz = 50.0 * f64::from(i);
            let back = scale.mel_to_hz(scale.hz_to_mel(hz));
            assert!(
                (back - hz).abs() <= 1e-9 * hz.max(1.0),
                "{scale:?} {hz}: {back}"
            );
        }
        let top = scale.hz_to_mel(24_000.0);
        for i in 0..=400 {
            let m = top * f64::from(i) / 400.0;
            let again = scale.hz_to_mel(scale.mel_to_hz(m));
            assert!(
                (again - m).abs() <= 1e-9 * m.max(1.0),
                "{scale:?} {m} mel: {again}"
            );
        }
        // Monotone: higher frequency, higher pitch.
        assert!(scale.hz_to_mel(4000.0) > scale.hz_to_mel(3999.0));
    }
    assert_eq!(mel::slaney_mel_to_hz(7.5), 500.0);
    assert!((mel::htk_mel_to_hz(2595.0) - 6300.0).abs() < 1e-9);
}
