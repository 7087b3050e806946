//! Integrated loudness (ITU-R BS.1770-4): the recommendation's own figures, its 48 kHz
//! K-weighting coefficients, and agreement with `pyloudnorm` (PyPI) on speech-like signals.

mod common;

use retake::dsp::loudness::{self, SHELF, integrated_loudness, k_weighting, measure};

/// A small deterministic generator (xorshift64*), uniform in [-1, 1).
struct Noise(u64);

impl Noise {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11;
        v as f64 / (1u64 << 52) as f64 - 1.0
    }
}

/// Speech-like test signal: noise bursts (syllables of 120-320 ms with raised-cosine edges,
/// pauses of 40-400 ms) through three formant-like two-pole resonators, scaled to peak
/// `peak`. `silences` inserts that many 3 s stretches of digital silence, and `floor` adds a
/// steady noise floor of that RMS under everything (0 for none).
fn speechlike(rate: u32, secs: f64, seed: u64, peak: f64, silences: usize, floor: f64) -> Vec<f32> {
    let fs = f64::from(rate);
    let mut rng = Noise(seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) | 1);
    let n = (secs * fs) as usize;
    // Envelope: bursts and pauses.
    let mut env = vec![0.0f64; n];
    let mut i = (0.1 * fs) as usize;
    while i < n {
        let len = ((0.12 + 0.2 * (rng.next() + 1.0) / 2.0) * fs) as usize;
        let amp = 0.4 + 0.6 * (rng.next() + 1.0) / 2.0;
        let edge = (0.02 * fs) as usize;
        for k in 0..len.min(n - i) {
            let ramp = if k < edge {
                0.5 - 0.5 * (std::f64::consts::PI * k as f64 / edge as f64).cos()
            } else if len - k < edge {
                0.5 - 0.5 * (std::f64::consts::PI * (len - k) as f64 / edge as f64).cos()
            } else {
                1.0
            };
            env[i + k] = amp * ramp;
        }
        i += len + ((0.04 + 0.36 * (rng.next() + 1.0) / 2.0) * fs) as usize;
    }
    // Formant-like resonators (centre Hz, bandwidth Hz, weight).
    let formants = [
        (550.0, 90.0, 1.0),
        (1500.0, 140.0, 0.5),
        (2600.0, 200.0, 0.25),
    ];
    let mut y = vec![0.0f64; n];
    for &(fc, bw, w) in &formants {
        let r = (-std::f64::consts::PI * bw / fs).exp();
        let c = 2.0 * r * (2.0 * std::f64::consts::PI * fc / fs).cos();
        let (mut y1, mut y2) = (0.0, 0.0);
        for (k, out) in y.iter_mut().enumerate() {
            let v = (1.0 - r) * env[k] * rng.next() + c * y1 - r * r * y2;
            y2 = y1;
            y1 = v;
            *out += w * v;
        }
    }
    let m = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let mut x: Vec<f64> = y.iter().map(|v| v * peak / m).collect();
    for s in 0..silences {
        let at = (n / (silences + 1)) * (s + 1);
        let gap = vec![0.0; (3.0 * fs) as usize];
        x.splice(at..at, gap);
    }
    if floor > 0.0 {
        // Uniform noise of RMS `floor`: amplitude floor·sqrt(3).
        for v in &mut x {
            *v += floor * 3f64.sqrt() * rng.next();
        }
    }
    x.iter().map(|&v| v as f32).collect()
}

#[test]
fn full_scale_997_hz_sine_reads_minus_3_01_lkfs() {
    // ITU-R BS.1770-4 (stated in the recommendation): a 0 dBFS 997 Hz sine in one of the
    // front channels reads -3.01 LKFS.
    for rate in [48_000, 44_100, 16_000] {
        let x = common::sine(997.0, 5.0, rate, 1.0);
        let l = integrated_loudness(&x, rate).expect("a sine has loudness");
        assert!((l + 3.01).abs() < 0.02, "{rate} Hz: {l} LKFS");
    }
}

#[test]
fn k_weighting_at_48_khz_reproduces_the_published_coefficients() {
    // ITU-R BS.1770-4, Table 1 (pre-filter) and Table 2 (RLB high-pass), 48 kHz; values typed
    // from memory of the recommendation. Table 2's numerator is 1, -2, 1 unnormalised.
    let table1_b = [
        1.535_124_859_586_97,
        -2.691_696_189_406_38,
        1.198_392_810_852_85,
    ];
    let table1_a = [-1.690_659_293_182_41, 0.732_480_774_215_85];
    let table2_b = [1.0, -2.0, 1.0];
    let table2_a = [-1.990_047_454_833_98, 0.990_072_250_366_21];

    let [shelf, hp] = k_weighting(48_000).expect("48 kHz");
    let close = |got: f64, want: f64| (got - want).abs() <= 1e-6 * want.abs();
    for (got, want) in shelf
        .b
        .iter()
        .zip(table1_b)
        .chain(shelf.a.iter().zip(table1_a))
    {
        assert!(close(*got, want), "pre-filter: {got} vs {want}");
    }
    for (got, want) in hp.b.iter().zip(table2_b).chain(hp.a.iter().zip(table2_a)) {
        assert!(close(*got, want), "high-pass: {got} vs {want}");
    }
    // The shelf prototype is what the docs say it is: +4 dB far above f0.
    assert!((20.0 * SHELF.high_gain.log10() - 4.0).abs() < 1e-3);
}

#[test]
fn k_weighting_gain_at_997_hz_is_what_the_offset_cancels() {
    // ITU-R BS.1770-4: the -0.691 constant cancels the K-weighting gain at 997 Hz, so the
    // filter reads +0.691 dB there (from memory of the recommendation's note on eq. 2).
    // The shelf is pre-warped at 997 Hz, so that gain holds at every rate.
    for rate in [48_000, 44_100, 32_000, 22_050, 16_000, 8_000] {
        let g = loudness::k_weighting_db(997.0, rate).expect("rate");
        assert!((g - 0.691).abs() < 0.002, "{rate} Hz: {g} dB");
    }
    // Magnitude response at 48 kHz against the published filter (Table 1/2 coefficients,
    // from memory as above) evaluated by scipy.signal.freqz (PyPI), 20 Hz to 20 kHz.
    let table = "import sys, numpy as np\nfrom scipy.signal import freqz\n\
        b1=[1.53512485958697,-2.69169618940638,1.19839281085285];a1=[1,-1.69065929318241,0.73248077421585]\n\
        b2=[1,-2,1];a2=[1,-1.99004745483398,0.99007225036621]\n\
        f=np.array([float(v) for v in sys.argv[1:]])\n\
        _,h1=freqz(b1,a1,worN=f,fs=48000);_,h2=freqz(b2,a2,worN=f,fs=48000)\n\
        print(' '.join(str(float(v)) for v in 20*np.log10(np.abs(h1*h2))))";
    let freqs = [
        20.0, 50.0, 100.0, 500.0, 1000.0, 2000.0, 5000.0, 10000.0, 20000.0,
    ];
    let args: Vec<String> = freqs.iter().map(|f| f.to_string()).collect();
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let want: Vec<f64> = common::run_python(table, &args)
        .split_whitespace()
        .map(|v| v.parse().unwrap())
        .collect();
    for (f, w) in freqs.iter().zip(want) {
        let g = loudness::k_weighting_db(*f, 48_000).unwrap();
        assert!((g - w).abs() < 0.01, "{f} Hz: {g} dB vs scipy {w} dB");
    }
}

#[test]
fn k_weighting_at_other_rates_follows_the_48_khz_response() {
    // The bounds stated in the module docs: the bilinear transform compresses the shelf
    // towards Nyquist, by at most 0.003 dB at 44.1 kHz and 0.103 dB at 16 kHz, 20 Hz up to
    // 0.47·rate.
    for (rate, bound) in [(44_100u32, 0.003), (16_000, 0.105)] {
        let mut worst = 0.0f64;
        let mut f = 20.0;
        while f < 0.47 * f64::from(rate) {
            let at = loudness::k_weighting_db(f, rate).unwrap();
            let reference = loudness::k_weighting_db(f, 48_000).unwrap();
            worst = worst.max((at - reference).abs());
            f *= 1.02;
        }
        assert!(worst < bound, "{rate} Hz: {worst} dB");
        assert!(
            worst > bound / 10.0,
            "{rate} Hz: {worst} dB, the bound is loose"
        );
    }
}

#[test]
fn speechlike_signals_agree_with_pyloudnorm() {
    // Reference: pyloudnorm (PyPI, pinned in tests/reference/requirements.txt),
    // Meter(rate).integrated_loudness, which implements ITU-R BS.1770-4. Its K-weighting is
    // its own design, not the table's coefficients; we measured differences of 0.042 LU at
    // 48 kHz and 0.051 LU at 16 kHz on these signals, mostly the +0.043 dB gain of Table 2's
    // unnormalised high-pass numerator, which we keep.
    let dir = tempfile::tempdir().unwrap();
    let mut cases = Vec::new();
    for rate in [16_000u32, 48_000] {
        // (seed, peak, silences, floor RMS): several levels; long silences (absolute gate);
        // a noise floor under the silences (relative gate).
        for (seed, peak, silences, floor) in [
            (1, 0.9, 0, 0.0),
            (2, 0.3, 0, 0.0),
            (3, 0.05, 0, 0.0),
            (4, 0.005, 0, 0.0),
            (5, 0.5, 3, 0.0),
            (6, 0.5, 3, 0.002),
        ] {
            let x = speechlike(rate, 8.0, seed, peak, silences, floor);
            let path = dir.path().join(format!("{rate}_{seed}.f64"));
            let xd: Vec<f64> = x.iter().map(|&v| f64::from(v)).collect();
            common::write_f64(&path, &xd);
            cases.push((rate, seed, x, path));
        }
    }
    let code = "import sys, numpy as np, pyloudnorm\n\
        args=sys.argv[1:]\n\
        for rate, path in zip(args[0::2], args[1::2]):\n\
        \x20   x=np.fromfile(path,'<f8')\n\
        \x20   print(float(pyloudnorm.Meter(int(rate)).integrated_loudness(x)))";
    let rates: Vec<String> = cases.iter().map(|c| c.0.to_string()).collect();
    let mut args = Vec::new();
    for (c, r) in cases.iter().zip(&rates) {
        args.push(r.as_str());
        args.push(c.3.to_str().unwrap());
    }
    let want: Vec<f64> = common::run_python(code, &args)
        .lines()
        .map(|v| v.trim().parse().unwrap())
        .collect();
    assert_eq!(want.len(), cases.len());
    let mut worst = 0.0f64;
    for ((rate, seed, x, _), w) in cases.iter().zip(want) {
        let got = measure(x, *rate).expect("speech has loudness");
        let d = (got.lufs - w).abs();
        worst = worst.max(d);
        assert!(
            d < 0.1,
            "{rate} Hz seed {seed}: {} LUFS vs pyloudnorm {w} LUFS",
            got.lufs
        );
        if *seed >= 5 {
            // The silences (or the floor under them) were gated out.
            assert!(got.blocks_kept < got.blocks, "{got:?}");
        }
    }
    assert!(worst < 0.1, "worst difference {worst} LU");
}

#[test]
fn doubling_the_amplitude_adds_6_02_lu() {
    // 20·log10(2) = 6.0206 dB; gating is relative to the signal's own loudness, so the same
    // blocks are kept and the loudness moves by exactly the gain.
    let x = speechlike(16_000, 6.0, 9, 0.3, 1, 0.0);
    let y: Vec<f32> = x.iter().map(|v| v * 2.0).collect();
    let a = measure(&x, 16_000).unwrap();
    let b = measure(&y, 16_000).unwrap();
    assert_eq!(a.blocks_kept, b.blocks_kept);
    let d = b.lufs - a.lufs;
    assert!((d - 6.0206).abs() < 0.01, "{d} LU");
    assert!((d - 20.0 * 2f64.log10()).abs() < 1e-9, "{d} LU");
}

#[test]
fn silence_and_short_signals_have_no_loudness() {
    assert_eq!(integrated_loudness(&vec![0.0; 48_000], 48_000), None);
    // Below the absolute gate: a sine at -80 dBFS reads about -83 LKFS, all blocks gated.
    let quiet = common::sine(997.0, 2.0, 48_000, 1e-4);
    assert_eq!(integrated_loudness(&quiet, 48_000), None);
    let s = common::sine(997.0, 1.0, 16_000, 1.0);
    // One sample short of a 400 ms block: none; exactly one block: one block kept.
    assert_eq!(integrated_loudness(&s[..6399], 16_000), None);
    let one = measure(&s[..6400], 16_000).unwrap();
    assert_eq!((one.blocks, one.blocks_kept), (1, 1));
    // 1 s holds blocks starting at 0, 100, ..., 600 ms.
    assert_eq!(measure(&s, 16_000).unwrap().blocks, 7);
    assert_eq!(integrated_loudness(&[], 16_000), None);
    assert_eq!(integrated_loudness(&s, 0), None);
}

#[test]
fn relative_gate_drops_a_part_20_db_quieter() {
    // 4 s of a sine at 0.5, then 4 s at 0.05 (-20 dB): the quiet part is below the relative
    // gate (loudness of both together - 10 LU), so the result is close to the loud part alone.
    let rate = 48_000;
    let mut x = common::sine(997.0, 4.0, rate, 0.5);
    x.extend(common::sine(997.0, 4.0, rate, 0.05));
    let loud = integrated_loudness(&x[..4 * rate as usize], rate).unwrap();
    let both = measure(&x, rate).unwrap();
    // The few blocks straddling the step are kept while they are mostly loud.
    assert!((both.lufs - loud).abs() < 0.3, "{both:?} vs {loud}");
    // Kept: the 37 loud blocks (starts 0-3.6 s) and the three straddling ones (3.7-3.9 s,
    // at least 1/4 loud, so at most -6 dB); the quiet ones sit near -20 dB, below the gate
    // at about -13 dB. Without gating the result would be 10·log10((1 + 0.01) / 2) = -2.97 dB
    // below the loud part, well outside the 0.3 LU above.
    assert_eq!((both.blocks, both.blocks_kept), (77, 40), "{both:?}");
}
