//! The diffuse late field: after a transition time the image sum is replaced by seeded noise
//! whose energy decays at Eyring's rate.
//!
//! Why. A shoebox with specular walls never becomes diffuse: the images along the room's
//! longest dimension meet few walls, so the image sum's decay slows down with time and its
//! measured reverberation time runs 10 to 65 % over Eyring's figure (see
//! [`super::absorption::image_source_rt60`]). Real rooms scatter sound at their walls and
//! furniture, so their late field is close to diffuse, which is what Eyring's formula
//! assumes. Replacing the late images by a diffuse decay — an idea published by Lehmann &
//! Johansson (2010), implemented here from the description of the idea alone — makes the
//! simulated room decay as Eyring predicts while the early reflections stay exact.
//!
//! How, for a response `h` of the image sum (before the high-pass):
//! - **Transition** at `t_x = t_d + max(50 ms, 3·sqrt(V / 1 m³) ms)` ([`transition_s`]),
//!   `t_d` the direct path's delay: the exact part is counted from the direct sound, so it
//!   always holds the direct path and the first reflections, however far the microphone
//!   stands from the source. (Counted from the source's emission instead, a microphone
//!   more than 50 ms of travel away in a long corridor got a response with no direct path
//!   at all: the window before `t_x` was silent, the tail was skipped and the response was
//!   all zeros, which the `room` step's direct-path normalisation turned into NaN.)
//!   `sqrt(V)` ms is the usual rule of thumb for the mixing time after which a room's
//!   reflections are dense (from memory; a rule of thumb, not a standard). Three times it,
//!   and never less than 50 ms, is our choice, made for the level match below: images
//!   arrive at a rate of `4π c³ t² / V` per second (one image per room-sized cell of the
//!   mirror lattice), so at `t = k·sqrt(V)` ms the rate is `4π c³ k² 10⁻⁶` per second,
//!   whatever the volume: about 4 600 per second at `k = 3` (c = 343 m/s), 46 images in
//!   the 10 ms matching window; at `t_x`, later by `t_d`, there are more. Fewer images
//!   make the measured level a noisy estimate. The 50 ms leave the 10 ms window clear of
//!   the direct path's kernel (±16 samples, 2 ms at 8 kHz) and of the first reflections.
//! - **Level.** The tail's power envelope is `P₀ · 10^(-6 (t - t_x) / T)`, `T` Eyring's
//!   RT60, with `P₀` chosen so that the envelope's mean over the [`MATCH_WINDOW_S`] window
//!   just before `t_x` equals the variance of the image sum over that window (its mean
//!   removed: the image sum carries a slowly varying positive mean, the "DC build-up",
//!   which the high-pass removes and which would otherwise count as power).
//! - **Mean.** Every image adds a positive pulse, so the image sum has a mean of (image
//!   rate / sample rate) × (mean image amplitude) per sample, which grows as `t` while the
//!   amplitudes fall as `e^(-λt/2) / t` (`λ` the energy decay rate): `m(t) ∝ t e^(-λt/2)`.
//!   The tail carries this mean on, from the window's mean at the window's centre, so the
//!   high-pass removes it from tail and image sum alike. Without it the mean would drop to
//!   zero at the join (it is 0.5 to 1.5 times the fluctuation's RMS at `t_x`), and the
//!   high-pass would turn that drop into a low-frequency thump of up to half the local RMS.
//! - **Join.** Over [`CROSSFADE_S`] from `t_x` the image sum's fluctuation about that mean
//!   fades out along a quarter cosine and the noise fades in along a quarter sine; the two
//!   are uncorrelated, so the expected power stays on the envelope through the join.
//! - **Noise.** White Gaussian samples (Box–Muller on the portable ChaCha8 stream of
//!   [`crate::seed::TakeRng`]), seeded by a stable hash of the room, the placement, the
//!   rate and the speed of sound ([`tail_seed`]): the same room gives the same response on
//!   every run and thread, and a longer response starts with the shorter one's samples.
//!   White, because every wall absorbs all frequencies alike in this model, so the image
//!   sum it continues is white too.

use crate::seed::{TakeRng, stable_hash};

use super::{Placement, Shoebox};

/// The transition never comes earlier than this, in seconds.
pub const MIN_TRANSITION_S: f64 = 0.050;

/// The transition is this many times `sqrt(V)` milliseconds (V in m³) when that is later
/// than [`MIN_TRANSITION_S`].
pub const TRANSITION_PER_SQRT_V: f64 = 3.0;

/// Length of the window before the transition over which the image sum's power is
/// measured, in seconds.
pub const MATCH_WINDOW_S: f64 = 0.010;

/// Length of the crossfade from the image sum to the noise tail, in seconds.
pub const CROSSFADE_S: f64 = 0.005;

/// The time at which the diffuse tail takes over from the image sum, in seconds after the
/// source fires: `direct_s + max(50 ms, 3·sqrt(V) ms)` with `direct_s` the direct path's
/// delay and `V` the room's volume in m³ (see the module notes for why).
pub fn transition_s(dims_m: [f64; 3], direct_s: f64) -> f64 {
    let v = super::volume_m3(dims_m);
    direct_s + MIN_TRANSITION_S.max(TRANSITION_PER_SQRT_V * v.sqrt() * 1e-3)
}

/// The seed of the noise tail: a stable hash of the exact bit patterns of the room's
/// dimensions and absorption, both positions, the rate and the speed of sound.
pub fn tail_seed(room: &Shoebox, at: &Placement, rate: u32, c_m_s: f64) -> u64 {
    let mut bytes = Vec::with_capacity(12 * 8 + 4);
    for v in room
        .dims_m
        .iter()
        .chain([&room.absorption])
        .chain(&at.source_m)
        .chain(&at.mic_m)
        .chain([&c_m_s])
    {
        bytes.extend_from_slice(&v.to_bits().to_le_bytes());
    }
    bytes.extend_from_slice(&rate.to_le_bytes());
    stable_hash(&[b"retake room diffuse tail v1", &bytes])
}

/// Where the join lies, in samples.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Join {
    /// First sample of the crossfade (the transition).
    pub start: usize,
    /// Crossfade length in samples (>= 1).
    pub fade: usize,
    /// Matching window length in samples, ending at `start` (>= 2, <= `start`).
    pub window: usize,
}

impl Join {
    /// The join for a room whose direct path takes `direct_s`, at rate `fs`, or `None`
    /// when it does not fit before `len` samples (the whole response is then image sum).
    pub(crate) fn for_room(dims_m: [f64; 3], direct_s: f64, fs: f64, len: usize) -> Option<Join> {
        let start = (transition_s(dims_m, direct_s) * fs).round() as usize;
        let fade = ((CROSSFADE_S * fs).round() as usize).max(1);
        let window = ((MATCH_WINDOW_S * fs).round() as usize).clamp(2, start.max(2));
        (start >= window && start + fade < len).then_some(Join {
            start,
            fade,
            window,
        })
    }

    /// Samples of the image sum the join needs: everything before the end of the
    /// crossfade.
    pub(crate) fn images_end(&self) -> usize {
        self.start + self.fade
    }
}

/// Replaces `h` from `join.start` on by the diffuse tail (see the module notes): the
/// continued mean plus noise under the decaying envelope. The image sum in
/// `h[..join.start + join.fade]` must be complete; what `h` holds after that is ignored.
/// `t60_s` is Eyring's RT60 (> 0). Leaves `h` alone when the window does not fluctuate.
pub(crate) fn add_diffuse_tail(h: &mut [f64], join: Join, fs: f64, t60_s: f64, seed: u64) {
    let Join {
        start,
        fade,
        window,
    } = join;
    let before = &h[start - window..start];
    let mean = before.iter().sum::<f64>() / window as f64;
    let variance = before.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / window as f64;
    if !variance.is_finite() || variance <= 0.0 {
        return;
    }
    // Power falls by 10^-6 in t60_s: per sample by q = exp(-rate), rate = 6 ln 10 / (T fs).
    let rate = 6.0 * std::f64::consts::LN_10 / (t60_s * fs);
    // Mean over the window (samples start - window .. start) of q^(i - start).
    let window_mean = (1..=window).map(|k| (rate * k as f64).exp()).sum::<f64>() / window as f64;
    let amplitude0 = (variance / window_mean).sqrt();
    // The mean continues from the window's centre c: m(i) = mean · (i / c) · q^((i - c) / 2).
    let centre = start as f64 - (window as f64 + 1.0) / 2.0;
    let mut noise = Gaussian::new(seed);
    for (k, v) in h[start..].iter_mut().enumerate() {
        let i = (start + k) as f64;
        let trend = mean * (i / centre) * (-0.5 * rate * (i - centre)).exp();
        let tail = amplitude0 * (-0.5 * rate * k as f64).exp() * noise.next();
        *v = if k < fade {
            let u = (k as f64 + 0.5) / fade as f64 * std::f64::consts::FRAC_PI_2;
            trend + (*v - trend) * u.cos() + tail * u.sin()
        } else {
            trend + tail
        };
    }
}

/// Standard normal samples by the Box–Muller transform on a [`TakeRng`] stream.
struct Gaussian {
    rng: TakeRng,
    spare: Option<f64>,
}

impl Gaussian {
    fn new(seed: u64) -> Self {
        Gaussian {
            rng: TakeRng::new(seed),
            spare: None,
        }
    }

    fn next(&mut self) -> f64 {
        if let Some(v) = self.spare.take() {
            return v;
        }
        // 1 - unit() is in (0, 1]: the logarithm is finite.
        let r = (-2.0 * (1.0 - self.rng.unit()).ln()).sqrt();
        let phi = 2.0 * std::f64::consts::PI * self.rng.unit();
        self.spare = Some(r * phi.sin());
        r * phi.cos()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaussian_has_unit_variance_and_zero_mean() {
        // Standard normal: mean 0, variance 1, fourth moment 3. Standard errors at n = 10⁵:
        // 0.0032 (mean), 0.0045 (variance), 0.03 (fourth moment).
        let mut g = Gaussian::new(11);
        let n = 100_000;
        let (mut s1, mut s2, mut s4) = (0.0, 0.0, 0.0);
        for _ in 0..n {
            let v = g.next();
            (s1, s2, s4) = (s1 + v, s2 + v * v, s4 + v.powi(4));
        }
        let n = n as f64;
        assert!((s1 / n).abs() < 0.015, "{}", s1 / n);
        assert!((s2 / n - 1.0).abs() < 0.02, "{}", s2 / n);
        assert!((s4 / n - 3.0).abs() < 0.15, "{}", s4 / n);
    }

    #[test]
    fn transition_follows_the_volume_above_50_ms_after_the_direct_path() {
        // 72 m³: 3 sqrt(72) = 25.5 ms, so the 50 ms floor; 1800 m³: 3 · 42.43 = 127.3 ms;
        // both counted from the direct sound.
        assert_eq!(transition_s([6.0, 4.0, 3.0], 0.0), 0.050);
        assert!((transition_s([6.0, 4.0, 3.0], 0.010) - 0.060).abs() < 1e-15);
        assert!((transition_s([20.0, 15.0, 6.0], 0.0) - 0.127_279).abs() < 1e-6);
        assert!((transition_s([20.0, 15.0, 6.0], 0.1) - 0.227_279).abs() < 1e-6);
    }

    #[test]
    fn the_tail_matches_the_window_power_and_decays_at_the_given_rate() {
        // Before the join: a zero-mean ±1 square wave (variance 1). After it the tail's
        // power, decay-compensated, averages 1 (within 3 standard errors of a 20 000-sample
        // mean of squared normals, 3 · sqrt(2 / 20 000) = 0.03).
        let fs = 16_000.0;
        let join = Join {
            start: 800,
            fade: 80,
            window: 160,
        };
        let square = |offset: f64| -> Vec<f64> {
            (0..40_000)
                .map(|i| offset + if i % 2 == 0 { 1.0 } else { -1.0 })
                .collect()
        };
        let mut h = square(0.0);
        let t60 = 1.0;
        add_diffuse_tail(&mut h, join, fs, t60, 3);
        let rate = 6.0 * std::f64::consts::LN_10 / (t60 * fs);
        // The window's mean power of the envelope is 1, so the envelope at `start` is a
        // little below: 1 / window_mean.
        let window_mean = (1..=160).map(|k| (rate * k as f64).exp()).sum::<f64>() / 160.0;
        let from = join.start + join.fade;
        let power: f64 = h[from..from + 20_000]
            .iter()
            .enumerate()
            .map(|(k, v)| v * v * (rate * (k + join.fade) as f64).exp())
            .sum::<f64>()
            / 20_000.0;
        assert!((power * window_mean - 1.0).abs() < 0.03, "{power}");

        // With a mean of 5 added before the join, the same seed gives the same noise and
        // the difference after the crossfade is the continued mean 5 (i / c) q^((i - c)/2),
        // c = 800 - 80.5 = 719.5 the window's centre. The part before the join is
        // untouched.
        let mut offset = square(5.0);
        add_diffuse_tail(&mut offset, join, fs, t60, 3);
        assert_eq!(offset[799], 4.0);
        for i in [880, 1000, 10_000, 39_999] {
            let x = i as f64;
            let expected = 5.0 * x / 719.5 * (-0.5 * rate * (x - 719.5)).exp();
            assert!(
                (offset[i] - h[i] - expected).abs() < 1e-9 * expected,
                "{i}: {} vs {expected}",
                offset[i] - h[i]
            );
        }
    }
}
