//! Bank figures against closed-form values and against numpy/scipy computing the same
//! definitions independently; warnings for silent, loud and skipped files.

mod common;

use std::f64::consts::PI;

use retake::noise::describe::{FileFigures, Warning, describe};
use retake::noise::{NoiseBank, NoiseFile};
use retake::seed::TakeRng;

const RATE: u32 = 16_000;

fn bank(files: Vec<(&str, Vec<f32>)>, skipped: Vec<(&str, &str)>) -> NoiseBank {
    NoiseBank {
        root: "bank".into(),
        rate: RATE,
        files: files
            .into_iter()
            .map(|(p, samples)| NoiseFile {
                rel_path: p.to_string(),
                category: p.split_once('/').map_or(".", |c| c.0).to_string(),
                samples,
                held_out: false,
            })
            .collect(),
        skipped: skipped
            .into_iter()
            .map(|(p, w)| (p.to_string(), w.to_string()))
            .collect(),
    }
}

fn figures(samples: Vec<f32>) -> FileFigures {
    describe(&bank(vec![("x.wav", samples)], vec![])).files[0].clone()
}

/// Uniform white noise in [-amp, amp] from the portable generator.
fn white(secs: f64, amp: f64, seed: u64) -> Vec<f32> {
    let mut rng = TakeRng::new(seed);
    let n = (secs * f64::from(RATE)).round() as usize;
    (0..n).map(|_| rng.uniform(-amp, amp) as f32).collect()
}

/// The same figures computed by numpy and scipy (PyPI, pinned in
/// tests/reference/requirements.txt): level as 10 log10 of numpy's mean square; frame levels
/// from 1600-sample frames via reshape and `np.std` (population); the centroid from
/// `scipy.signal.welch` with its own periodic Hann window, 1024-sample segments, 512 overlap,
/// no detrending, one-sided power spectrum, and `rfftfreq` frequencies.
fn reference(samples: &[f32]) -> [f64; 4] {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("x.f64");
    let x: Vec<f64> = samples.iter().map(|&s| f64::from(s)).collect();
    common::write_f64(&path, &x);
    let code = r#"
import sys, numpy as np, scipy.signal as ss
x = np.fromfile(sys.argv[1], '<f8'); rate = int(sys.argv[2])
with np.errstate(divide='ignore'):
    level = 10 * np.log10(np.mean(x ** 2))
    L = int(round(0.1 * rate)); n = len(x) // L
    fl = 10 * np.log10(np.mean(x[:n * L].reshape(n, L) ** 2, axis=1))
quiet = np.mean(fl < -60)
spread = np.std(np.maximum(fl, -100))
f, p = ss.welch(x, fs=rate, window='hann', nperseg=1024, noverlap=512, detrend=False,
                scaling='spectrum', return_onesided=True, average='mean')
centroid = np.sum(f * p) / np.sum(p)
print(*(repr(float(v)) for v in (level, centroid, spread, quiet)))
"#;
    let out = common::run_python(code, &[path.to_str().unwrap(), &RATE.to_string()]);
    let v: Vec<f64> = out.split_whitespace().map(|t| t.parse().unwrap()).collect();
    [v[0], v[1], v[2], v[3]]
}

/// Our figures equal the reference's to rounding (f64 sums in a different order).
fn assert_matches_reference(name: &str, samples: &[f32]) -> FileFigures {
    let ours = figures(samples.to_vec());
    let [level, centroid, spread, quiet] = reference(samples);
    let c = ours.centroid_hz.expect("signal has power");
    assert!(
        (ours.level_dbfs - level).abs() < 1e-9,
        "{name}: level {ours:?} vs {level}"
    );
    assert!(
        (c - centroid).abs() < 1e-6,
        "{name}: centroid {c} vs {centroid}"
    );
    assert!(
        (ours.level_spread_db - spread).abs() < 1e-9,
        "{name}: spread {} vs {spread}",
        ours.level_spread_db
    );
    assert_eq!(ours.quiet_fraction, quiet, "{name}: quiet fraction");
    ours
}

#[test]
fn full_scale_sine_reads_minus_3_01_dbfs() {
    // A sine of amplitude 1 has mean square 1/2: 10 log10(1/2) = -3.0103 dB (textbook
    // identity). 1 kHz at 16 kHz: exactly 16 samples per period, 1000 whole periods.
    let f = figures(common::sine(1000.0, 1.0, RATE, 1.0));
    assert!((f.level_dbfs + 3.0103).abs() < 1e-4, "{}", f.level_dbfs);
    // Half amplitude: 6.02 dB lower (20 log10 2, textbook).
    let h = figures(common::sine(1000.0, 1.0, RATE, 0.5));
    assert!((f.level_dbfs - h.level_dbfs - 6.0206).abs() < 1e-3);
    assert!((f.duration_s - 1.0).abs() < 1e-12);
    // A steady sine: every 100 ms frame holds whole periods and reads the same.
    assert!(f.level_spread_db < 1e-6, "{}", f.level_spread_db);
    assert_eq!(f.quiet_fraction, 0.0);
}

#[test]
fn a_sines_centroid_is_its_frequency_within_a_bin() {
    let bin = f64::from(RATE) / 1024.0; // 15.6 Hz
    for freq in [250.0, 1000.0, 1234.5, 3000.7, 6500.0] {
        let f = figures(common::sine(freq, 2.0, RATE, 0.3));
        let c = f.centroid_hz.unwrap();
        assert!((c - freq).abs() < bin, "{freq} Hz: centroid {c}");
    }
}

#[test]
fn white_noise_centroid_is_a_quarter_of_the_rate() {
    // A flat spectrum from 0 to rate/2 has its mean frequency at rate/4 (4000 Hz).
    let f = figures(white(5.0, 0.5, 7));
    let c = f.centroid_hz.unwrap();
    assert!((c - 4000.0).abs() < 40.0, "{c}");
    // Uniform in [-a, a] has mean square a²/3 (textbook): 0.25/3 -> -10.79 dBFS.
    let expected = 10.0 * (0.25f64 / 3.0).log10();
    assert!((f.level_dbfs - expected).abs() < 0.05, "{}", f.level_dbfs);
    // Steady: 1600-sample frames of white noise vary by a fraction of a dB.
    assert!(f.level_spread_db < 0.5, "{}", f.level_spread_db);
}

#[test]
fn gated_noise_is_less_steady_than_steady_noise() {
    // 0.5 s on, 0.5 s off at 1/100 of the amplitude (40 dB down), aligned with the frames:
    // half the frames near L and half near L - 40, whose population standard deviation is
    // 40 / 2 = 20 dB (two equally frequent values d apart deviate d/2 from their mean).
    let steady = white(10.0, 0.5, 11);
    let gated: Vec<f32> = steady
        .iter()
        .enumerate()
        .map(|(i, &s)| if (i / 8000) % 2 == 0 { s } else { s * 0.01 })
        .collect();
    let s = figures(steady);
    let g = figures(gated);
    assert!(s.level_spread_db < 0.5, "{}", s.level_spread_db);
    assert!(
        (g.level_spread_db - 20.0).abs() < 0.3,
        "{}",
        g.level_spread_db
    );
    assert!(g.level_spread_db > s.level_spread_db + 15.0);
}

#[test]
fn figures_match_numpy_and_scipy() {
    let rate = f64::from(RATE);
    // A tone with a DC offset, a harmonic and a slow swell (the swell moves frame levels).
    let hum: Vec<f32> = (0..(3.3 * rate) as usize)
        .map(|i| {
            let t = i as f64 / rate;
            let swell = 1.0 + 0.5 * (2.0 * PI * 0.7 * t).sin();
            (0.05
                + swell * (0.2 * (2.0 * PI * 50.0 * t).sin() + 0.05 * (2.0 * PI * 150.0 * t).sin()))
                as f32
        })
        .collect();
    assert_matches_reference("hum", &hum);
    assert_matches_reference("white", &white(2.05, 0.3, 3));
    // Bursts over digital silence: frames at minus infinity are floored and counted quiet.
    let mut bursts = white(4.0, 0.5, 5);
    for (i, s) in bursts.iter_mut().enumerate() {
        if (i / 4800) % 3 != 0 {
            *s = 0.0;
        }
    }
    let b = assert_matches_reference("bursts", &bursts);
    // 0.3 s on, 0.6 s off: of 40 frames, 15 carry noise (4 whole cycles of 3 and the
    // last cycle's 3), 25 are digital silence.
    assert_eq!(b.quiet_fraction, 25.0 / 40.0);
    // A beeper: 1.03 kHz gated 0.5 s on, 0.5 s off, over faint rumble.
    let mut rumble = white(3.0, 0.01, 9);
    for (i, s) in rumble.iter_mut().enumerate() {
        let t = i as f64 / rate;
        if (t % 1.0) < 0.5 {
            *s += (0.3 * (2.0 * PI * 1030.0 * t).sin()) as f32;
        }
    }
    assert_matches_reference("beeper", &rumble);
}

#[test]
fn digital_silence_has_no_centroid_and_is_mostly_silent() {
    let f = figures(vec![0.0; 8000]);
    assert_eq!(f.level_dbfs, f64::NEG_INFINITY);
    assert_eq!(f.centroid_hz, None);
    assert_eq!(f.quiet_fraction, 1.0);
    assert_eq!(f.level_spread_db, 0.0);
}

#[test]
fn files_shorter_than_a_frame_still_get_figures() {
    // 500 samples: one level frame (the whole file), one zero-padded FFT frame.
    let f = figures(common::sine(2000.0, 500.0 / 16000.0, RATE, 1.0));
    assert!((f.level_dbfs + 3.01).abs() < 0.05, "{}", f.level_dbfs);
    assert_eq!(f.level_spread_db, 0.0);
    let c = f.centroid_hz.unwrap();
    assert!((c - 2000.0).abs() < 2.0 * 15.625, "{c}");
}

/// Noise at `dbfs` RMS for `secs`.
fn noise_at(dbfs: f64, secs: f64, seed: u64) -> Vec<f32> {
    // Uniform in [-a, a] has RMS a / sqrt(3) (textbook).
    white(secs, 10f64.powf(dbfs / 20.0) * 3f64.sqrt(), seed)
}

#[test]
fn silent_loud_and_skipped_files_are_warned_about() {
    // 0.3 s of noise then 1.7 s of digital silence: 17 of 20 frames quiet.
    let mut silent = noise_at(-30.0, 0.3, 1);
    silent.resize(32_000, 0.0);
    let b = bank(
        vec![
            ("a/quiet-ish.wav", noise_at(-32.0, 2.0, 2)),
            ("a/mid.wav", noise_at(-30.0, 2.0, 3)),
            ("b/silent.wav", silent),
            ("b/upper.wav", noise_at(-28.0, 2.0, 4)),
            ("c/loud.wav", noise_at(-5.0, 2.0, 5)),
        ],
        vec![("c/broken.wav", "cannot decode: no known format")],
    );
    let r = describe(&b);
    assert_eq!(r.files.len(), 5);
    assert_eq!(r.categories, 3);
    assert_eq!(r.skipped, b.skipped);
    assert_eq!(r.train.files, 5);
    assert!((r.train.seconds - 10.0).abs() < 1e-9);
    // The median leaves the mostly silent file out: levels -32, -30, -28, -5 -> -29.
    let m = r.median_level_dbfs.unwrap();
    assert!((m + 29.0).abs() < 0.1, "{m}");

    assert_eq!(r.warnings.len(), 3, "{:?}", r.warnings);
    match &r.warnings[0] {
        Warning::MostlySilent {
            rel_path,
            quiet_fraction,
        } => {
            assert_eq!(rel_path, "b/silent.wav");
            assert!((quiet_fraction - 0.85).abs() < 1e-12, "{quiet_fraction}");
        }
        w => panic!("expected mostly silent, got {w:?}"),
    }
    match &r.warnings[1] {
        Warning::MuchLouder {
            rel_path,
            level_dbfs,
            median_dbfs,
        } => {
            assert_eq!(rel_path, "c/loud.wav");
            assert!((level_dbfs + 5.0).abs() < 0.1, "{level_dbfs}");
            assert_eq!(*median_dbfs, m);
        }
        w => panic!("expected much louder, got {w:?}"),
    }
    assert_eq!(
        r.warnings[2],
        Warning::Skipped {
            rel_path: "c/broken.wav".into(),
            reason: "cannot decode: no known format".into()
        }
    );
    assert!(
        r.warnings[0]
            .to_string()
            .starts_with("b/silent.wav: mostly silent (85 % of 100 ms")
    );
    assert!(
        r.warnings[1].to_string().contains("24.0 dB above"),
        "{}",
        r.warnings[1]
    );
}

#[test]
fn nine_db_above_the_median_is_not_much_louder() {
    let b = bank(
        vec![
            ("a.wav", noise_at(-30.0, 1.0, 1)),
            ("b.wav", noise_at(-30.0, 1.0, 2)),
            ("c.wav", noise_at(-21.0, 1.0, 3)),
        ],
        vec![],
    );
    let r = describe(&b);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    // ...and 11 dB above is.
    let b = bank(
        vec![
            ("a.wav", noise_at(-30.0, 1.0, 1)),
            ("b.wav", noise_at(-30.0, 1.0, 2)),
            ("c.wav", noise_at(-19.0, 1.0, 3)),
        ],
        vec![],
    );
    let r = describe(&b);
    assert_eq!(r.warnings.len(), 1, "{:?}", r.warnings);
    assert_eq!(r.warnings[0].rel_path(), "c.wav");
}

#[test]
fn held_out_files_are_counted_in_their_part() {
    let mut b = bank(
        vec![
            ("a.wav", noise_at(-30.0, 1.0, 1)),
            ("b.wav", noise_at(-30.0, 2.0, 2)),
            ("c.wav", noise_at(-30.0, 0.5, 3)),
        ],
        vec![],
    );
    b.files[1].held_out = true;
    let r = describe(&b);
    assert_eq!((r.train.files, r.held_out.files), (2, 1));
    assert!((r.train.seconds - 1.5).abs() < 1e-12);
    assert!((r.held_out.seconds - 2.0).abs() < 1e-12);
    assert!(r.files[1].held_out && !r.files[0].held_out);
}
