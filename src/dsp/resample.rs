//! Band-limited resampling (rubato), with the resampler's delay compensated so that sample
//! `i` of the output sits at time `i / rate_out` of the same signal.
//!
//! Two engines, picked per call from the ratio alone:
//!
//! - **Fixed ratio** ([`rubato::Fft`]): when the ratio is a fraction `b / a` with both
//!   terms at most [`MAX_FIXED_TERM`] (44.1 kHz → 16 kHz is 160/441; a speed factor of 1.1
//!   is 10/11). Its FFT block sizes are chosen even on both sides, which makes its delay a
//!   whole number of output samples, exactly the one rubato reports and trims.
//! - **Free ratio** ([`rubato::Async`] with windowed-sinc interpolation): any other ratio,
//!   e.g. a speed factor drawn uniformly from a range. Its delay is fractional, so the input
//!   is led in by a few zeros and a few output samples are dropped, chosen so that the
//!   remaining offset is a small fraction of a sample (see [`resample_by`]).
//!
//! Building a resampler costs far more than running one on a short clip, so every worker
//! thread keeps the few it used last (plan once, process many). Free-ratio resamplers are
//! shared across nearby ratios: one is built per ratio band and retuned to the exact ratio
//! before each call.

use std::cell::RefCell;

use rubato::audioadapter_buffers::direct::SequentialSlice;
use rubato::{
    Adjustable, Async, Fft, FixedAsync, FixedSync, Indexing, Resampler,
    SincInterpolationParameters, SincInterpolationType, WindowFunction,
};

/// The largest numerator or denominator (in lowest terms) the fixed-ratio engine takes.
/// Larger terms mean FFT blocks of twice that size or more; beyond this the free-ratio
/// engine is used instead.
pub const MAX_FIXED_TERM: u64 = 2000;

/// Fixed-ratio FFT blocks are at least this long on their shorter side. Shorter blocks
/// widen the anti-aliasing filter's transition band and so lower its cutoff: at 512 the
/// cutoff sits at about 97 % of the lower Nyquist frequency.
const MIN_FFT_BLOCK: u64 = 512;

/// Length of the free-ratio engine's sinc filter (a multiple of 8, so rubato keeps it).
const SINC_LEN: usize = 128;

/// Sinc table oversampling of the free-ratio engine; with linear interpolation between the
/// tables the interpolation error stays near -125 dB.
const SINC_OVERSAMPLING: usize = 512;

/// Input frames per call to the free-ratio engine.
const FREE_CHUNK: usize = 1024;

/// Downsampling free-ratio bands are this wide (ratio of their ends). A band's resampler
/// has its anti-aliasing cutoff set for the band's lowest ratio, so a ratio inside the
/// band gives up at most this fraction of its bandwidth and never aliases.
const DOWN_BAND: f64 = 1.02;

/// Resamplers each thread keeps.
const CACHE_SLOTS: usize = 8;

/// Zero lead-ins tried when aligning the free-ratio engine.
const MAX_LEAD: usize = 256;

/// Samples a resample from `from` Hz to `to` Hz produces from `len` samples:
/// `round(len * to / from)`, halves rounded up, in exact integer arithmetic.
///
/// # Panics
/// When `from` is zero.
pub fn output_len(len: usize, from: u32, to: u32) -> usize {
    assert!(from > 0, "input rate must be positive");
    let num = len as u128 * u128::from(to) * 2 + u128::from(from);
    (num / (u128::from(from) * 2)) as usize
}

/// Resample from `from` Hz to `to` Hz. The output has [`output_len`] samples and no added
/// delay: output sample `i` is the band-limited input at time `i / to`.
///
/// Content above the lower Nyquist frequency is filtered out (attenuated by well over
/// 60 dB); the passband reaches about 97 % of the lower Nyquist frequency.
///
/// # Panics
/// When either rate is zero.
pub fn resample(samples: &[f32], from: u32, to: u32) -> Vec<f32> {
    assert!(
        from > 0 && to > 0,
        "sample rates must be positive: {from} -> {to}"
    );
    if from == to {
        return samples.to_vec();
    }
    let g = gcd(u64::from(from), u64::from(to));
    let (a, b) = (u64::from(from) / g, u64::from(to) / g);
    let n_out = output_len(samples.len(), from, to);
    if n_out == 0 {
        return Vec::new();
    }
    if a.max(b) <= MAX_FIXED_TERM {
        with_fixed(a, b, |r| run_fixed(r, samples, n_out))
    } else {
        run_free(samples, f64::from(to) / f64::from(from), n_out)
    }
}

/// Resample by an arbitrary `ratio` of output to input samples: `round(len * ratio)`
/// samples out, output sample `i` being the band-limited input at position `i / ratio`.
///
/// A ratio that is a fraction with both terms at most [`MAX_FIXED_TERM`] (to within
/// 1e-10 relative) goes to the fixed-ratio engine and is exact; any other ratio goes to the
/// free-ratio engine, whose residual offset is the smallest over a few hundred zero
/// lead-ins: below 0.005 sample for most ratios (0.18 at worst over 20 000 random ratios
/// between 0.8 and 1.25), but up to half a sample for a ratio just beside a simple
/// fraction, such as 1.00001.
///
/// # Panics
/// When `ratio` is not positive and finite.
pub fn resample_by(samples: &[f32], ratio: f64) -> Vec<f32> {
    assert!(
        ratio.is_finite() && ratio > 0.0,
        "resampling ratio must be positive and finite, got {ratio}"
    );
    let n_out = (samples.len() as f64 * ratio).round() as usize;
    if n_out == 0 {
        return Vec::new();
    }
    if ratio == 1.0 {
        return samples.to_vec();
    }
    match as_fraction(ratio) {
        Some((b, a)) => with_fixed(a, b, |r| run_fixed(r, samples, n_out)),
        None => run_free(samples, ratio, n_out),
    }
}

/// Speed perturbation: play the take `factor` times faster, so it lasts `1 / factor` as
/// long and every frequency is multiplied by `factor` (pitch moves with tempo). The output
/// has `round(len / factor)` samples at the same rate; output sample `i` is the input at
/// position `i * factor`. A factor of 1 returns the input unchanged.
///
/// # Panics
/// When `factor` is not positive and finite.
pub fn speed(samples: &[f32], factor: f64) -> Vec<f32> {
    assert!(
        factor.is_finite() && factor > 0.0,
        "speed factor must be positive and finite, got {factor}"
    );
    if factor == 1.0 {
        return samples.to_vec();
    }
    // The factor as written (1.1 = 11/10) is the fraction to look for: its reciprocal in
    // floating point is only close to one.
    match as_fraction(factor) {
        Some((a, b)) => {
            let n_out = (samples.len() as f64 / factor).round() as usize;
            if n_out == 0 {
                return Vec::new();
            }
            with_fixed(a, b, |r| run_fixed(r, samples, n_out))
        }
        None => resample_by(samples, 1.0 / factor),
    }
}

/// `x` as `p / q` in lowest terms with both at most [`MAX_FIXED_TERM`], if it is one to
/// within 1e-10 relative.
fn as_fraction(x: f64) -> Option<(u64, u64)> {
    (1..=MAX_FIXED_TERM).find_map(|q| {
        let p = (x * q as f64).round();
        let close = (x * q as f64 - p).abs() <= 1e-10 * x * q as f64;
        (close && p >= 1.0 && p <= MAX_FIXED_TERM as f64).then_some((p as u64, q))
    })
}

fn gcd(mut a: u64, mut b: u64) -> u64 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// A fixed-ratio engine's key: input rate `a`, output rate `b`, in lowest terms.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct FixedKey {
    a: u64,
    b: u64,
}

/// A free-ratio engine's key: the band of ratios it serves.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum FreeKey {
    /// Ratios in `[2^octave, 2^(octave+1))`: upsampling, whose cutoff does not depend on
    /// the ratio.
    Up { octave: i32 },
    /// Ratios in `[DOWN_BAND^band, DOWN_BAND^(band+1))` (band < 0): downsampling, with the
    /// cutoff set for the band's lowest ratio.
    Down { band: i32 },
}

/// The engines a thread used last, most recent use stamped.
struct Lru<K, E> {
    slots: Vec<(K, Box<E>, u64)>,
}

impl<K: PartialEq + Copy, E> Lru<K, E> {
    const fn new() -> Self {
        Self { slots: Vec::new() }
    }

    /// The engine for `key`, built (evicting the least recently used) if absent.
    fn get(&mut self, key: K, now: u64, build: impl FnOnce(K) -> E) -> &mut E {
        let i = match self.slots.iter().position(|s| s.0 == key) {
            Some(i) => i,
            None if self.slots.len() < CACHE_SLOTS => {
                self.slots.push((key, Box::new(build(key)), now));
                self.slots.len() - 1
            }
            None => {
                let oldest = (0..self.slots.len())
                    .min_by_key(|&i| self.slots[i].2)
                    .unwrap_or(0);
                self.slots[oldest] = (key, Box::new(build(key)), now);
                oldest
            }
        };
        self.slots[i].2 = now;
        &mut self.slots[i].1
    }
}

struct Cache {
    fixed: Lru<FixedKey, Fft<f32>>,
    free: Lru<FreeKey, Async<f32>>,
    clock: u64,
    /// Lead-in zeros plus input for the free-ratio engine, reused across calls.
    scratch: Vec<f32>,
}

thread_local! {
    static CACHE: RefCell<Cache> = const {
        RefCell::new(Cache {
            fixed: Lru::new(),
            free: Lru::new(),
            clock: 0,
            scratch: Vec::new(),
        })
    };
}

fn build_fixed(key: FixedKey) -> Fft<f32> {
    let FixedKey { a, b } = key;
    // k repeats of the minimal a:b block per FFT. a and b are coprime, so at least one is
    // odd: an even k makes both FFT sizes even and the delay (half the output block) a whole
    // number of output samples. A power of two adds no awkward prime to the FFT lengths
    // (k = 58 for 9:10 would make them multiples of 29 and the resampler 2.7 times slower).
    let k = MIN_FFT_BLOCK.div_ceil(a.min(b)).next_power_of_two().max(2);
    Fft::<f32>::new_custom(
        a as usize,
        b as usize,
        (k * a) as usize,
        1,
        1,
        WindowFunction::BlackmanHarris2,
        FixedSync::Both,
    )
    .expect("fixed-ratio resampler: rates and chunk are positive")
}

fn build_free(key: FreeKey) -> Async<f32> {
    let (design_ratio, band) = match key {
        FreeKey::Up { octave } => (2f64.powi(octave), 2.0),
        FreeKey::Down { band } => (DOWN_BAND.powi(band), DOWN_BAND),
    };
    let params = SincInterpolationParameters::new(SINC_LEN, WindowFunction::BlackmanHarris2)
        .interpolation(SincInterpolationType::Linear)
        .oversampling_factor(SINC_OVERSAMPLING);
    // A hair of slack so the exact top of the band is never refused by rounding.
    Async::<f32>::new_sinc(
        design_ratio,
        band * (1.0 + 1e-9),
        &params,
        FREE_CHUNK,
        1,
        FixedAsync::Input,
    )
    .expect("free-ratio resampler: ratio and chunk are positive")
}

/// The band whose resampler serves `ratio`.
fn free_key(ratio: f64) -> FreeKey {
    if ratio >= 1.0 {
        let mut octave = ratio.log2().floor() as i32;
        if 2f64.powi(octave) > ratio {
            octave -= 1;
        }
        FreeKey::Up { octave }
    } else {
        let mut band = (ratio.ln() / DOWN_BAND.ln()).floor() as i32;
        // Guard the floating-point edges: the band must start at or below the ratio (so its
        // cutoff is low enough) and end above it.
        while DOWN_BAND.powi(band) > ratio {
            band -= 1;
        }
        while DOWN_BAND.powi(band + 1) <= ratio {
            band += 1;
        }
        FreeKey::Down { band }
    }
}

fn with_fixed<T>(a: u64, b: u64, f: impl FnOnce(&mut Fft<f32>) -> T) -> T {
    CACHE.with(|c| {
        let mut c = c.borrow_mut();
        c.clock += 1;
        let now = c.clock;
        f(c.fixed.get(FixedKey { a, b }, now, build_fixed))
    })
}

/// Whole clip through the fixed-ratio engine; rubato trims its (whole-sample) delay.
fn run_fixed(r: &mut Fft<f32>, samples: &[f32], n_out: usize) -> Vec<f32> {
    r.reset();
    let n = samples.len();
    let room = r.process_all_needed_output_len(n).max(n_out);
    let mut out = vec![0.0f32; room];
    let input = SequentialSlice::new(samples, 1, n).expect("mono slice");
    let mut output = SequentialSlice::new_mut(&mut out, 1, room).expect("mono slice");
    let (_, produced) = r
        .process_all_into_buffer(&input, &mut output, n, None)
        .expect("output sized by the resampler's own figure");
    debug_assert!(produced >= n_out, "{produced} < {n_out}");
    out.truncate(n_out);
    out
}

/// How many zeros to lead the input in with, and how many output samples to drop, so that
/// the kept output sample `i` sits at input position `i * step`.
///
/// Rubato's sinc engine (5.x) computes its output sample `j` (counted from a reset) at
/// input position `(j + 1) * step - len / 2 + 1 / oversampling`; with `z` zeros in front
/// that is `z` later in the original input. Dropping `m` samples needs
/// `(m + 1) * step = len / 2 - 1 / oversampling + z`, which an integer `m` meets only
/// approximately; the lead-in `z` that brings it closest wins. The unit tests measure the
/// resulting offset, so a change in rubato's internals cannot pass unnoticed.
fn alignment(step: f64) -> (usize, usize) {
    let centre = SINC_LEN as f64 / 2.0 - 1.0 / SINC_OVERSAMPLING as f64;
    let mut best = (0usize, 0usize, f64::INFINITY);
    for z in 0..MAX_LEAD {
        let m = (centre + z as f64) / step - 1.0;
        let miss = (m - m.round()).abs();
        if miss < best.2 {
            best = (z, m.round() as usize, miss);
            if miss < 1e-3 {
                break;
            }
        }
    }
    (best.0, best.1)
}

/// Whole clip through a free-ratio engine tuned to `ratio`.
fn run_free(samples: &[f32], ratio: f64, n_out: usize) -> Vec<f32> {
    CACHE.with(|c| {
        let mut c = c.borrow_mut();
        let (lead, drop) = alignment(1.0 / ratio);
        let mut scratch = std::mem::take(&mut c.scratch);
        scratch.clear();
        scratch.resize(lead, 0.0);
        scratch.extend_from_slice(samples);
        c.clock += 1;
        let now = c.clock;
        let r = c.free.get(free_key(ratio), now, build_free);
        r.reset();
        r.set_resample_ratio(ratio, false)
            .expect("ratio inside the band the engine was built for");
        let wanted = drop + n_out;
        let mut out = vec![0.0f32; wanted + r.output_frames_max()];
        let room = out.len();
        let total = scratch.len();
        let input = SequentialSlice::new(&scratch[..], 1, total).expect("mono slice");
        let mut output = SequentialSlice::new_mut(&mut out, 1, room).expect("mono slice");
        let (mut consumed, mut produced) = (0usize, 0usize);
        while produced < wanted {
            let left = total - consumed;
            let indexing = Indexing {
                input_offset: consumed,
                output_offset: produced,
                partial_len: (left < r.input_frames_next()).then_some(left),
                active_channels_mask: None,
            };
            let (n_in, n_o) = r
                .process_into_buffer(&input, &mut output, Some(&indexing))
                .expect("buffers sized by the resampler's own figures");
            consumed = (consumed + n_in).min(total);
            produced += n_o;
        }
        c.scratch = scratch;
        out.drain(..drop);
        out.truncate(n_out);
        out
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    fn tone(freq: f64, rate: f64, n: usize) -> Vec<f32> {
        (0..n)
            .map(|i| (2.0 * PI * freq * i as f64 / rate).sin() as f32)
            .collect()
    }

    /// Least-squares fit of `sin(2 pi f (i - tau) / rate)` to the middle half of `y`:
    /// returns `tau` in samples (positive = late) and the fit's error-to-signal in dB.
    fn fit(y: &[f32], freq: f64, rate: f64) -> (f64, f64) {
        let (lo, hi) = (y.len() / 4, 3 * y.len() / 4);
        let (mut ss, mut sc, mut cc, mut ys, mut yc) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (i, &v) in y.iter().enumerate().take(hi).skip(lo) {
            let w = 2.0 * PI * freq * i as f64 / rate;
            let (s, c, v) = (w.sin(), w.cos(), f64::from(v));
            ss += s * s;
            sc += s * c;
            cc += c * c;
            ys += v * s;
            yc += v * c;
        }
        let det = ss * cc - sc * sc;
        let a = (ys * cc - yc * sc) / det;
        let b = (yc * ss - ys * sc) / det;
        let (mut err, mut pow) = (0.0, 0.0);
        for (i, &v) in y.iter().enumerate().take(hi).skip(lo) {
            let w = 2.0 * PI * freq * i as f64 / rate;
            let m = a * w.sin() + b * w.cos();
            err += (f64::from(v) - m).powi(2);
            pow += m * m;
        }
        let tau = (-b).atan2(a) / (2.0 * PI * freq) * rate;
        (tau, 10.0 * (err / pow).log10())
    }

    #[test]
    fn output_len_rounds_half_up() {
        assert_eq!(output_len(441, 44_100, 16_000), 160);
        assert_eq!(output_len(1, 48_000, 16_000), 0); // 1/3 rounds down
        assert_eq!(output_len(3, 4, 2), 2); // 1.5 rounds up
        assert_eq!(output_len(0, 8_000, 16_000), 0);
    }

    #[test]
    fn fractions_are_found_only_when_exact() {
        assert_eq!(as_fraction(1.1), Some((11, 10)));
        assert_eq!(as_fraction(0.93), Some((93, 100)));
        assert_eq!(as_fraction(160.0 / 441.0), Some((160, 441)));
        assert_eq!(as_fraction(1.0 / 1.1), Some((10, 11)));
        assert_eq!(as_fraction(0.937_281_5), None);
        assert_eq!(as_fraction(std::f64::consts::SQRT_2), None);
    }

    #[test]
    fn free_bands_contain_their_ratio() {
        for &r in &[
            0.5,
            0.51,
            0.909_090_9,
            0.98,
            0.999_999,
            1.0,
            1.07,
            1.999,
            2.0,
            3.3,
        ] {
            match free_key(r) {
                FreeKey::Up { octave } => {
                    assert!(2f64.powi(octave) <= r && r < 2f64.powi(octave + 1), "{r}")
                }
                FreeKey::Down { band } => {
                    let lo = DOWN_BAND.powi(band);
                    assert!(lo <= r && r < lo * DOWN_BAND, "{r}");
                }
            }
        }
    }

    #[test]
    fn every_engine_keeps_time_to_a_small_fraction_of_a_sample() {
        // A 1 kHz tone through each engine must come out as the same tone, not delayed:
        // the fitted offset is the resampler's uncompensated delay. Fixed fractions and
        // free ratios on either side of 1, and a rate pair with large terms (free engine).
        let rate = 16_000.0;
        let x = tone(1000.0, rate, 32_000);
        for &factor in &[1.1, 0.9, 0.93, 1.0713, 0.937_281_5, 1.5, 0.61, 1.999] {
            let y = speed(&x, factor);
            assert_eq!(y.len(), (32_000.0 / factor).round() as usize);
            let (tau, ets) = fit(&y, 1000.0 * factor, rate);
            // Free-ratio alignment is chosen to within 1e-3 sample when a lead-in allows it;
            // 0.02 leaves room for the fit itself.
            assert!(tau.abs() < 0.02, "speed {factor}: offset {tau} samples");
            assert!(ets < -90.0, "speed {factor}: error {ets} dB");
        }
        for &(from, to) in &[
            (44_100u32, 16_000u32),
            (48_000, 16_000),
            (16_000, 44_100),
            (22_050, 16_000),
            (16_000, 12_345),
            (12_345, 16_000),
        ] {
            let x = tone(1000.0, f64::from(from), from as usize * 2);
            let y = resample(&x, from, to);
            assert_eq!(y.len(), output_len(x.len(), from, to));
            let (tau, ets) = fit(&y, 1000.0, f64::from(to));
            assert!(tau.abs() < 0.02, "{from} -> {to}: offset {tau} samples");
            assert!(ets < -90.0, "{from} -> {to}: error {ets} dB");
        }
    }

    #[test]
    fn empty_and_tiny_inputs() {
        assert!(resample(&[], 44_100, 16_000).is_empty());
        assert!(speed(&[], 1.1).is_empty());
        assert!(resample_by(&[], 0.937).is_empty());
        assert_eq!(resample(&[0.5], 16_000, 48_000).len(), 3);
        assert_eq!(resample(&[0.5], 48_000, 16_000).len(), 0);
        assert_eq!(speed(&[0.1, 0.2, 0.3], 0.9).len(), 3);
        assert_eq!(speed(&[0.1, 0.2, 0.3], 0.937_281_5).len(), 3);
        assert_eq!(resample(&[0.25, -0.25], 8_000, 8_000), vec![0.25, -0.25]);
    }

    #[test]
    fn cache_is_bounded_and_reused() {
        for &f in &[
            1.1, 0.9, 1.05, 0.95, 1.2, 0.8, 1.3, 0.7, 1.4, 0.6, 1.1, 1.066_9,
        ] {
            let _ = speed(&[0.0; 100], f);
        }
        let sizes = || CACHE.with(|c| (c.borrow().fixed.slots.len(), c.borrow().free.slots.len()));
        let before = sizes();
        assert!(
            before.0 <= CACHE_SLOTS && before.1 <= CACHE_SLOTS,
            "{before:?}"
        );
        let _ = speed(&[0.0; 100], 1.1);
        let _ = speed(&[0.0; 100], 1.066_9);
        assert_eq!(sizes(), before);
    }
}
