//! Integrated loudness of a mono signal per ITU-R BS.1770-4: K-weighting, mean square over
//! gating blocks of 400 ms with 75 % overlap, an absolute gate at -70 LKFS and a relative
//! gate 10 LU below the absolute-gated loudness. All arithmetic is f64.
//!
//! # K-weighting at any rate
//!
//! The recommendation gives the two K-weighting stages only as biquad coefficients at
//! 48 kHz. Every biquad is the bilinear transform of an analogue second-order section
//!
//! ```text
//!          high_gain · s² + band_gain · (w0/q) · s + low_gain · w0²
//! H(s) = ------------------------------------------------------------
//!                        s² + (w0/q) · s + w0²
//! ```
//!
//! (w0 = 2π f0) by `s = c (z - 1) / (z + 1)` with `c = 2π fw / tan(π fw / rate)`, pre-warped
//! so that analogue and digital agree exactly at the frequency `fw`. With
//! `k = w0 / c = (f0 / fw) · tan(π fw / rate)` and `a0 = k² + k/q + 1`:
//!
//! ```text
//! b0 = (low_gain k² + band_gain k/q + high_gain) / a0     a1 = 2 (k² - 1) / a0
//! b1 = 2 (low_gain k² - high_gain) / a0                   a2 = (k² - k/q + 1) / a0
//! b2 = (low_gain k² - band_gain k/q + high_gain) / a0
//! ```
//!
//! Inverting these five equations on the 48 kHz coefficients of the recommendation
//! (k² = (1 + a1 + a2) / (1 - a1 + a2), a0 = 4 / (1 - a1 + a2), k/q = a0 (1 - a2) / 2,
//! low_gain = a0 (b0 + b1 + b2) / 4k², high_gain = a0 (b0 - b1 + b2) / 4,
//! band_gain = a0 (b0 - b2) / (2 k/q), f0 = fw · k / tan(π fw / 48000)) gives the analogue
//! parameters in [`SHELF`] and [`HIGH_PASS`]; [`Section::at_rate`] transforms them back at
//! any rate, and at 48 kHz reproduces the recommendation's coefficients (checked in
//! `tests/dsp_loudness.rs`).
//!
//! The choice of `fw`: the shelf is warped at 997 Hz, the recommendation's calibration
//! frequency, so its gain there (and the -3.01 LKFS of a full-scale 997 Hz sine) is the same
//! at every rate; the high-pass is warped at its own f0 (38 Hz), where its shape matters.
//! The bilinear transform compresses the shelf towards Nyquist, so at lower rates the
//! response departs from the 48 kHz one above 1 kHz: at 44.1 kHz by at most 0.003 dB, at
//! 16 kHz by at most 0.103 dB (near 2 kHz), at 8 kHz by up to 0.44 dB (near 2 kHz).

use std::f64::consts::PI;

/// Length of a gating block, seconds (ITU-R BS.1770-4: 400 ms).
pub const BLOCK_SECONDS: f64 = 0.4;

/// Absolute gate, LKFS (ITU-R BS.1770-4: -70 LKFS).
pub const ABSOLUTE_GATE_LKFS: f64 = -70.0;

/// Relative gate, LU below the absolute-gated loudness (ITU-R BS.1770-4: -10 LU).
pub const RELATIVE_GATE_LU: f64 = -10.0;

/// The constant in L = -0.691 + 10 log10(Σ G_i z_i) (ITU-R BS.1770-4, eq. 2).
const OFFSET_DB: f64 = -0.691;

/// Blocks start every 100 ms (75 % overlap): a block spans this many steps.
const STEPS_PER_BLOCK: usize = 4;

/// An analogue second-order section, the prototype of one K-weighting stage, with the
/// frequency at which its bilinear transform is pre-warped.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Section {
    /// Natural frequency f0 in Hz.
    pub f0_hz: f64,
    /// Quality factor of the poles.
    pub q: f64,
    /// Gain of the s² numerator term (the response far above f0), linear.
    pub high_gain: f64,
    /// Gain of the (w0/q)·s numerator term, linear.
    pub band_gain: f64,
    /// Gain of the w0² numerator term (the response at DC), linear.
    pub low_gain: f64,
    /// The frequency in Hz where the digital response equals the analogue one exactly.
    pub warp_hz: f64,
}

/// First K-weighting stage: the high shelf (about +4 dB above 2 kHz) modelling the head.
///
/// Derived by the inverse bilinear transform pre-warped at 997 Hz (see the module docs) from
/// the 48 kHz pre-filter coefficients of ITU-R BS.1770-4, Table 1. `high_gain` is
/// 10^(4.0/20) to five digits; `low_gain` came out as 1 within 1e-14 and is set to 1.
pub const SHELF: Section = Section {
    f0_hz: 1_686.404_333_261_516_5,
    q: 0.707_175_236_955_419_3,
    high_gain: 1.584_864_701_130_855_6,
    band_gain: 1.258_720_930_232_561_3,
    low_gain: 1.0,
    warp_hz: 997.0,
};

/// Second K-weighting stage: the high-pass (the revised low-frequency B-curve).
///
/// Derived by the inverse bilinear transform pre-warped at its own f0 from ITU-R BS.1770-4,
/// Table 2. That table's numerator is `1, -2, 1` without normalisation, so the stage's gain
/// far above f0 is not 1 but 1.004995 (+0.043 dB); it is kept, since the recommendation's
/// -0.691 dB constant is calibrated with it.
pub const HIGH_PASS: Section = Section {
    f0_hz: 38.135_470_876_113_05,
    q: 0.500_327_037_325_042_1,
    high_gain: 1.004_994_898_714_688_4,
    band_gain: 0.0,
    low_gain: 0.0,
    warp_hz: 38.135_470_876_113_05,
};

/// A digital biquad, `H(z) = (b0 + b1 z⁻¹ + b2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Biquad {
    /// Numerator b0, b1, b2.
    pub b: [f64; 3],
    /// Denominator a1, a2 (a0 is 1).
    pub a: [f64; 2],
}

impl Section {
    /// The section as a biquad at `rate` Hz (bilinear transform pre-warped at `warp_hz`).
    ///
    /// `None` when `rate` is zero or its Nyquist frequency is not above `warp_hz`.
    pub fn at_rate(&self, rate: u32) -> Option<Biquad> {
        let fs = f64::from(rate);
        if rate == 0 || self.warp_hz >= fs / 2.0 {
            return None;
        }
        let k = self.f0_hz / self.warp_hz * (PI * self.warp_hz / fs).tan();
        let kq = k / self.q;
        let k2 = k * k;
        let a0 = k2 + kq + 1.0;
        Some(Biquad {
            b: [
                (self.low_gain * k2 + self.band_gain * kq + self.high_gain) / a0,
                2.0 * (self.low_gain * k2 - self.high_gain) / a0,
                (self.low_gain * k2 - self.band_gain * kq + self.high_gain) / a0,
            ],
            a: [2.0 * (k2 - 1.0) / a0, (k2 - kq + 1.0) / a0],
        })
    }
}

impl Biquad {
    /// Magnitude response in dB at `freq` Hz for a filter running at `rate` Hz.
    pub fn magnitude_db(&self, freq: f64, rate: u32) -> f64 {
        let w = 2.0 * PI * freq / f64::from(rate);
        // |Σ c_n e^{-iwn}|² for coefficients c.
        let mag2 = |c: [f64; 3]| {
            let re = c[0] + c[1] * w.cos() + c[2] * (2.0 * w).cos();
            let im = -c[1] * w.sin() - c[2] * (2.0 * w).sin();
            re * re + im * im
        };
        10.0 * (mag2(self.b) / mag2([1.0, self.a[0], self.a[1]])).log10()
    }
}

/// The two K-weighting stages at `rate` Hz: [shelf, high-pass].
///
/// `None` when `rate` is zero or too low for the shelf (Nyquist at or below 997 Hz).
pub fn k_weighting(rate: u32) -> Option<[Biquad; 2]> {
    Some([SHELF.at_rate(rate)?, HIGH_PASS.at_rate(rate)?])
}

/// Total K-weighting magnitude in dB at `freq` Hz for a filter running at `rate` Hz.
///
/// `None` when [`k_weighting`] has no filter for `rate`.
pub fn k_weighting_db(freq: f64, rate: u32) -> Option<f64> {
    let [s, h] = k_weighting(rate)?;
    Some(s.magnitude_db(freq, rate) + h.magnitude_db(freq, rate))
}

/// The outcome of an integrated loudness measurement.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Loudness {
    /// Integrated loudness, LKFS (= LUFS).
    pub lufs: f64,
    /// Gating blocks in the signal (400 ms, one every 100 ms; a partial last block is not
    /// counted).
    pub blocks: usize,
    /// Blocks that passed both gates and make up `lufs`.
    pub blocks_kept: usize,
    /// The relative gate that was applied, LKFS: the absolute-gated loudness - 10 LU.
    pub relative_gate_lufs: f64,
}

/// Integrated loudness of mono `x` at `rate` Hz in LKFS, per ITU-R BS.1770-4.
///
/// A mono signal is one channel of weight 1, so a full-scale 997 Hz sine reads -3.01 LKFS.
/// `None` when `x` is shorter than one 400 ms block, when every block is gated out (for
/// example silence), or when [`k_weighting`] has no filter for `rate`.
pub fn integrated_loudness(x: &[f32], rate: u32) -> Option<f64> {
    measure(x, rate).map(|l| l.lufs)
}

/// Integrated loudness with the block counts and the relative gate; see
/// [`integrated_loudness`].
///
/// Block `j` spans samples `[round(j·rate/10), round((j+4)·rate/10))`, so at rates that are
/// not a multiple of 10 Hz a block may be one sample longer or shorter than 400 ms; its mean
/// square is taken over its own length. Blocks holding a non-finite sample never pass the
/// gates.
pub fn measure(x: &[f32], rate: u32) -> Option<Loudness> {
    let [s1, s2] = k_weighting(rate)?;
    // Boundary j of the 100 ms steps, j·rate/10 rounded to the nearest sample (half up).
    let bound = |j: usize| ((j as u64 * u64::from(rate) + 5) / 10) as usize;
    let mut steps = 0;
    while bound(steps + 1) <= x.len() {
        steps += 1;
    }
    if steps < STEPS_PER_BLOCK {
        return None;
    }

    // One pass through both stages (transposed direct form II), summing squares per step.
    let mut sums = vec![0.0f64; steps];
    let (mut u1, mut u2, mut v1, mut v2) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
    for (j, sum) in sums.iter_mut().enumerate() {
        for &sample in &x[bound(j)..bound(j + 1)] {
            let x0 = f64::from(sample);
            let y = s1.b[0] * x0 + u1;
            u1 = s1.b[1] * x0 - s1.a[0] * y + u2;
            u2 = s1.b[2] * x0 - s1.a[1] * y;
            let z = s2.b[0] * y + v1;
            v1 = s2.b[1] * y - s2.a[0] * z + v2;
            v2 = s2.b[2] * y - s2.a[1] * z;
            *sum += z * z;
        }
    }

    let blocks = steps + 1 - STEPS_PER_BLOCK;
    let power: Vec<f64> = (0..blocks)
        .map(|j| {
            let len = bound(j + STEPS_PER_BLOCK) - bound(j);
            sums[j..j + STEPS_PER_BLOCK].iter().sum::<f64>() / len as f64
        })
        .collect();
    let loudness = |p: f64| OFFSET_DB + 10.0 * p.log10();

    // Mean power of the blocks above `gate` LKFS (comparisons false for NaN), and the count.
    let gated_mean = |gate: f64| {
        let (sum, n) = power
            .iter()
            .filter(|&&p| loudness(p) > gate)
            .fold((0.0, 0usize), |(s, n), &p| (s + p, n + 1));
        (n > 0).then(|| (sum / n as f64, n))
    };
    let (absolute_mean, _) = gated_mean(ABSOLUTE_GATE_LKFS)?;
    let relative_gate = loudness(absolute_mean) + RELATIVE_GATE_LU;
    // The relative gate is above the absolute one whenever some block passed the latter.
    let (mean, kept) = gated_mean(relative_gate.max(ABSOLUTE_GATE_LKFS))?;
    Some(Loudness {
        lufs: loudness(mean),
        blocks,
        blocks_kept: kept,
        relative_gate_lufs: relative_gate,
    })
}
