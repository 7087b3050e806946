//! Active speech level after ITU-T Recommendation P.56 (12/2011), method B (clause 8).
//!
//! The active speech level is the mean power of a signal taken over the time speech is
//! active only; the activity factor is the fraction of the time it is active, so that
//! long-term power = active power × activity factor (P.56 clause 3, definitions of active
//! speech level and activity factor; clause 8.1, principle of measurement).
//!
//! # The method as implemented (P.56 clause 8.2, details of realization)
//!
//! 1. Envelope: the rectified signal is smoothed by two first-order exponential averages in
//!    cascade, `p(i) = g p(i-1) + (1-g) |x(i)|`, `q(i) = g q(i-1) + (1-g) p(i)`, with
//!    `g = exp(-1 / (T f_s))` and `p`, `q` starting at 0.
//! 2. Activity counts: for each threshold `c_j` of a fixed set, sample `i` counts as active
//!    when `q(i) >= c_j`, or when it lies at most `I = round(H f_s)` samples after the last
//!    sample where `q >= c_j` (hangover). Before the envelope first reaches `c_j` nothing is
//!    counted.
//! 3. For each threshold with a non-zero count `a_j`: `A_j = 10 log10(E / a_j)` (`E` the
//!    signal's total energy, sum of squares), `C_j = 20 log10(c_j)`, `Δ_j = A_j - C_j`.
//! 4. Going up from the lowest threshold, the first `j` with `Δ_j <= M` and the threshold
//!    below it bracket the point where the active level exceeds the threshold by exactly
//!    the margin `M`. Between the two, `A` and `C` are taken as linear in the threshold's
//!    dB value; the active level is the `A` where `A - C = M`:
//!    `t = (Δ_{j-1} - M) / (Δ_{j-1} - Δ_j)`, `level = A_{j-1} + t (A_j - A_{j-1})`.
//! 5. Activity factor = long-term power / active power (clause 3), i.e.
//!    `(E / N) / 10^(level / 10)`.
//!
//! The time constant `T`, hangover `H` and margin `M` are the values of P.56 clause 8.3
//! ("Values of the parameters"). The clause numbers refer to the 12/2011 edition (its
//! table of contents was checked). The values T = 0.03 s, H = 0.20 s, M = 15.9 dB, the
//! hangover length `round(H f_s)`, the cascade of two first-order averages with
//! `g = exp(-1 / (f_s T))` and the thresholds (below) were checked against the ITU-T's own
//! realization of P.56, module sv-p56 (v2.3, 2005) of the ITU-T G.191 Software Tool
//! Library; the recommendation's text itself could not be opened here. The algorithm is
//! our own writing of the method, not a copy of that listing. One difference: between the
//! two bracketing thresholds the G.191 module searches by bisection to a 0.5 dB tolerance,
//! where step 4 above solves the linear interpolation exactly.
//!
//! # Scale and thresholds
//!
//! Samples are floats with full scale 1.0 and all arithmetic is f64. Levels are
//! `10 log10(mean square)` relative to a full-scale DC value, so a full-scale square wave
//! reads 0 dB and a full-scale sine -3.01 dB (the convention of P.56's "dBov" for a 16-bit
//! word; not the AES "dBFS" in which a full-scale sine reads 0).
//!
//! The standard's realization for 16-bit words uses thresholds spaced by a factor of two
//! (6.02 dB), one per bit: 15 of them, from one quantizing step up to half the largest
//! code, `c_j = 2^j` for `j = 0..=14` in integer units (ITU-T G.191, sv-p56, as above). A
//! 16-bit value `v` is the float `v / 32768`, so these are `2^-15 ..= 2^-1` here. The set is extended, keeping
//! the factor-two spacing, down to `2^-32` and up to `2^4`: floats carry levels far below
//! the 16-bit floor and may exceed full scale before a clipping guard. The extension does
//! not move the result for any signal the 16-bit set can measure: a threshold at least
//! `M` below the long-term level always has `Δ_j > M` (since `a_j <= N`, `A_j` is at least
//! the long-term level), so the crossing is found at the same pair of thresholds.
//!
//! Cost: one pass over the samples, constant work per sample except when the envelope
//! crosses a power of two (the activity counts are kept as runs, not updated per threshold
//! per sample), no allocation.

/// Envelope time constant `T` in seconds (P.56 clause 8.3; ITU-T G.191 sv-p56: 0.03 s).
pub const TIME_CONSTANT_S: f64 = 0.03;

/// Hangover time `H` in seconds (P.56 clause 8.3; ITU-T G.191 sv-p56: 0.20 s).
pub const HANGOVER_S: f64 = 0.2;

/// Margin `M` in dB between the active level and the threshold that decides activity
/// (P.56 clause 8.3; ITU-T G.191 sv-p56: 15.9 dB).
pub const MARGIN_DB: f64 = 15.9;

/// The lowest threshold is `2^LOWEST_EXPONENT` (full scale 1.0): about -192.7 dB, so active
/// levels down to about -176.8 dB (that plus the margin) are measured.
const LOWEST_EXPONENT: i32 = -32;

/// The highest threshold is `2^HIGHEST_EXPONENT` (full scale 1.0): +24.1 dB.
const HIGHEST_EXPONENT: i32 = 4;

/// Number of thresholds `c_j = 2^(LOWEST_EXPONENT + j)`.
const THRESHOLDS: usize = (HIGHEST_EXPONENT - LOWEST_EXPONENT + 1) as usize;

/// The active speech level of a signal, with the figures it was derived from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ActiveLevel {
    /// Active speech level in dB relative to full-scale power: `10 log10` of the mean square
    /// over the active time, full scale 1.0 (a full-scale sine that is active throughout
    /// reads -3.01 dB).
    pub level_db: f64,
    /// Activity factor: the fraction of the signal's duration counted as active, 0..=1.
    pub activity: f64,
    /// Long-term level in dB relative to full-scale power: `10 log10` of the mean square over
    /// the whole signal. Equals `level_db + 10 log10(activity)`.
    pub long_term_db: f64,
}

/// Active speech level of `samples` at `rate` Hz by ITU-T P.56 method B (see the module
/// documentation for the algorithm and its constants).
///
/// The signal is measured as given: no band-limiting filter is applied and DC is not
/// removed; the standard assumes a signal without DC.
///
/// Returns `None` when there is nothing to measure: an empty slice, a zero rate, a signal
/// with no energy (digital silence), a non-finite sample, or an active level below the
/// lowest threshold's reach (about -176.8 dB).
pub fn active_speech_level(samples: &[f32], rate: u32) -> Option<ActiveLevel> {
    if samples.is_empty() || rate == 0 {
        return None;
    }
    let fs = f64::from(rate);
    let g = (-1.0 / (TIME_CONSTANT_S * fs)).exp();
    let hangover = (HANGOVER_S * fs).round() as usize;
    level_from_counts(&count_activity(samples, g, hangover))
}

/// What one pass over the signal yields: its energy and, per threshold, the active count.
#[derive(Debug, Clone, PartialEq)]
struct Counts {
    /// Sum of squares.
    energy: f64,
    /// Number of samples.
    len: usize,
    /// `a_j` for `c_j = 2^(LOWEST_EXPONENT + j)`.
    active: [u64; THRESHOLDS],
}

/// The one pass: energy, envelope and activity counts with envelope factor `g` and a
/// hangover of `hangover` samples.
fn count_activity(samples: &[f32], g: f64, hangover: usize) -> Counts {
    let h = 1.0 - g;
    let mut p = 0.0f64;
    let mut q = 0.0f64;
    let mut energy = 0.0f64;
    let mut counter = RunCounter::new(hangover);
    for (i, &s) in samples.iter().enumerate() {
        let x = f64::from(s);
        energy += x * x;
        p = g * p + h * x.abs();
        q = g * q + h * p;
        counter.push(i, thresholds_reached(q));
    }
    Counts {
        energy,
        len: samples.len(),
        active: counter.finish(samples.len()),
    }
}

/// How many thresholds the envelope value `q` reaches (`q >= c_j`): since the thresholds are
/// the powers of two from `2^LOWEST_EXPONENT` up, this is `floor(log2 q) - LOWEST_EXPONENT
/// + 1`, clamped to the set, with `floor(log2 q)` read exactly from the f64 exponent field.
fn thresholds_reached(q: f64) -> usize {
    // Also true for NaN. Below the lowest threshold q may be subnormal and its exponent
    // field misleading.
    if q.is_nan() || q < f64::from(LOWEST_EXPONENT).exp2() {
        return 0;
    }
    // q is now positive and normal: its biased exponent is floor(log2 q) + 1023.
    let floor_log2 = ((q.to_bits() >> 52) & 0x7ff) as i32 - 1023;
    ((floor_log2 - LOWEST_EXPONENT + 1) as usize).min(THRESHOLDS)
}

/// Activity counts kept as runs. Sample `i` is active for threshold `j` exactly when some
/// sample `k` in `i - hangover ..= i` has `q(k) >= c_j`: the standard's per-sample hangover
/// counter restated. Thresholds are nested (reaching `c_j` means reaching every lower one),
/// so per sample only the thresholds between the previous and the current count change
/// state, and each change settles the count of a whole run at once.
struct RunCounter {
    hangover: usize,
    /// Thresholds reached by the previous sample; those below it are in a run.
    reached: usize,
    /// First sample of the current run, for thresholds in a run.
    run_start: [usize; THRESHOLDS],
    /// Last sample that reached the threshold, for thresholds not in a run.
    last_reached: [Option<usize>; THRESHOLDS],
    active: [u64; THRESHOLDS],
}

impl RunCounter {
    fn new(hangover: usize) -> Self {
        Self {
            hangover,
            reached: 0,
            run_start: [0; THRESHOLDS],
            last_reached: [None; THRESHOLDS],
            active: [0; THRESHOLDS],
        }
    }

    /// Sample `i` reaches the lowest `reached` thresholds.
    fn push(&mut self, i: usize, reached: usize) {
        if reached > self.reached {
            // A run starts at i: it adds i itself and the gap since the last run, as far as
            // that run's hangover covered it.
            for j in self.reached..reached {
                let gained = match self.last_reached[j] {
                    Some(k) => (i - k).min(self.hangover + 1),
                    None => 1,
                };
                self.active[j] += gained as u64;
                self.run_start[j] = i;
            }
        } else {
            // A run ended at i - 1 (i > 0 here: nothing is in a run before sample 0). Its
            // first sample is already counted; its hangover is settled when the next run
            // starts or at the end.
            for j in reached..self.reached {
                let end = i - 1;
                self.active[j] += (end - self.run_start[j]) as u64;
                self.last_reached[j] = Some(end);
            }
        }
        self.reached = reached;
    }

    /// Close the runs and hangovers at the end of a signal of `len` samples.
    fn finish(mut self, len: usize) -> [u64; THRESHOLDS] {
        let Some(last) = len.checked_sub(1) else {
            return self.active;
        };
        for j in 0..self.reached {
            self.active[j] += (last - self.run_start[j]) as u64;
            self.last_reached[j] = Some(last);
        }
        for j in 0..THRESHOLDS {
            if let Some(k) = self.last_reached[j] {
                self.active[j] += (last - k).min(self.hangover) as u64;
            }
        }
        self.active
    }
}

/// Steps 3 to 5 of the method: the active level and activity factor from the counts.
fn level_from_counts(counts: &Counts) -> Option<ActiveLevel> {
    let energy = counts.energy;
    if !(energy > 0.0 && energy.is_finite()) || counts.len == 0 {
        return None;
    }
    let long_term = energy / counts.len as f64;
    let db_per_step = 20.0 * 2f64.log10();
    // (A_j, Δ_j) of the threshold below the one being looked at.
    let mut below: Option<(f64, f64)> = None;
    let mut level = None;
    for (j, &a) in counts.active.iter().enumerate() {
        if a == 0 {
            // The envelope never reached this threshold, nor any above it.
            break;
        }
        let a_db = 10.0 * (energy / a as f64).log10();
        let c_db = f64::from(LOWEST_EXPONENT + j as i32) * db_per_step;
        let delta = a_db - c_db;
        if delta <= MARGIN_DB {
            // Crossing at the lowest threshold: the level lies below the set's reach.
            let (a_prev, delta_prev) = below?;
            let t = (delta_prev - MARGIN_DB) / (delta_prev - delta);
            level = Some(a_prev + t * (a_db - a_prev));
            break;
        }
        below = Some((a_db, delta));
    }
    // No crossing below the highest threshold the envelope reached: a signal whose power is
    // far above its envelope (sparse clicks). The standard leaves this open; the active
    // level is taken over the samples active at that highest threshold.
    let level_db = match level {
        Some(l) => l,
        None => below?.0,
    };
    let activity = (long_term / 10f64.powf(level_db / 10.0)).min(1.0);
    Some(ActiveLevel {
        level_db,
        activity,
        long_term_db: 10.0 * long_term.log10(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Activity counts exactly as the standard states them: one hangover counter per
    /// threshold, reset when the envelope reaches the threshold, counting up to `hangover`
    /// otherwise (starting full, so nothing counts before the threshold is first reached).
    fn literal_counts(samples: &[f32], g: f64, hangover: usize) -> Counts {
        let h = 1.0 - g;
        let (mut p, mut q, mut energy) = (0.0f64, 0.0f64, 0.0f64);
        let mut hang = [hangover; THRESHOLDS];
        let mut active = [0u64; THRESHOLDS];
        for &s in samples {
            let x = f64::from(s);
            energy += x * x;
            p = g * p + h * x.abs();
            q = g * q + h * p;
            for j in 0..THRESHOLDS {
                let c = f64::from(LOWEST_EXPONENT + j as i32).exp2();
                if q >= c {
                    active[j] += 1;
                    hang[j] = 0;
                } else if hang[j] < hangover {
                    active[j] += 1;
                    hang[j] += 1;
                }
            }
        }
        Counts {
            energy,
            len: samples.len(),
            active,
        }
    }

    /// Deterministic pseudo-random numbers in [-1, 1) (a 64-bit LCG, Knuth's MMIX constants).
    fn lcg(state: &mut u64) -> f64 {
        *state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (*state >> 11) as f64 / (1u64 << 52) as f64 - 1.0
    }

    /// Noise bursts of random length and level with silences and faint noise between:
    /// exercises runs that start, end and re-start at many thresholds.
    fn bursty(seed: u64, len: usize) -> Vec<f32> {
        let mut s = seed;
        let mut out = Vec::with_capacity(len);
        while out.len() < len {
            let on = 20 + ((lcg(&mut s) + 1.0) * 400.0) as usize;
            let gain = 10f64.powf((lcg(&mut s) - 0.5) * 3.0);
            for _ in 0..on {
                out.push((gain * lcg(&mut s)) as f32);
            }
            let off = ((lcg(&mut s) + 1.0) * 300.0) as usize;
            let floor = if lcg(&mut s) > 0.0 { 1e-5 } else { 0.0 };
            for _ in 0..off {
                out.push((floor * lcg(&mut s)) as f32);
            }
        }
        out.truncate(len);
        out
    }

    #[test]
    fn thresholds_reached_matches_direct_comparison() {
        let mut values = vec![0.0, f64::NAN, 1e-300, 5e-324, 1e9, f64::INFINITY];
        for e in (LOWEST_EXPONENT - 3)..=(HIGHEST_EXPONENT + 3) {
            let c = f64::from(e).exp2();
            values.extend([
                c,
                c * (1.0 - f64::EPSILON),
                c * (1.0 + f64::EPSILON),
                c * 1.5,
            ]);
        }
        for q in values {
            let direct = (0..THRESHOLDS)
                .filter(|&j| q >= f64::from(LOWEST_EXPONENT + j as i32).exp2())
                .count();
            assert_eq!(thresholds_reached(q), direct, "q = {q:e}");
        }
    }

    #[test]
    fn run_counts_equal_the_standards_per_sample_counters() {
        // Short hangovers and a fast envelope make runs end and restart often; 3200 is the
        // standard's hangover at 16 kHz (0.2 s, clause 8.3).
        let x = bursty(7, 40_000);
        for g in [0.0, 0.5, 0.9, (-1.0f64 / (0.03 * 16000.0)).exp()] {
            for hangover in [0, 1, 2, 7, 150, 3200] {
                let fast = count_activity(&x, g, hangover);
                let literal = literal_counts(&x, g, hangover);
                assert_eq!(fast, literal, "g = {g}, hangover = {hangover}");
            }
        }
        // The counts really differ between thresholds and hangovers (the check has teeth).
        let c = count_activity(&x, 0.9, 7);
        let distinct: std::collections::BTreeSet<u64> = c.active.iter().copied().collect();
        assert!(distinct.len() > 10, "{:?}", c.active);
    }

    #[test]
    fn sparse_clicks_fall_back_to_the_highest_threshold_reached() {
        // A full-scale click every 0.5 s at 16 kHz: long-term power -39 dB, but the
        // envelope peaks near -62 dB, so even at the highest threshold it reaches, each
        // click's hangover keeps Δ far above the margin and no crossing exists.
        let mut x = vec![0.0f32; 80_000];
        for k in 0..10 {
            x[k * 8000 + 100] = 1.0;
        }
        let g = (-1.0 / (TIME_CONSTANT_S * 16000.0)).exp();
        let c = count_activity(&x, g, 3200);
        let top = c.active.iter().rposition(|&a| a > 0).unwrap();
        let a_top = 10.0 * (c.energy / c.active[top] as f64).log10();
        let c_top = f64::from(LOWEST_EXPONENT + top as i32) * 20.0 * 2f64.log10();
        assert!(a_top - c_top > MARGIN_DB + 5.0, "{a_top} {c_top}");
        let m = level_from_counts(&c).unwrap();
        assert_eq!(m.level_db, a_top);
        assert!((m.activity - c.active[top] as f64 / 80_000.0).abs() < 1e-12);
        assert!((m.long_term_db - 10.0 * (10.0f64 / 80_000.0).log10()).abs() < 1e-9);
    }

    #[test]
    fn one_sample_signal_and_trailing_hangover() {
        // A single full-scale sample with g = 0: the envelope is 1 at sample 0 and 0 after.
        let mut x = vec![0.0f32; 10];
        x[0] = 1.0;
        let c = count_activity(&x, 0.0, 3);
        // Threshold 2^0 = 1 is reached at sample 0; samples 1..=3 are its hangover.
        assert_eq!(c.active[THRESHOLDS - 1 - HIGHEST_EXPONENT as usize], 4);
        // Thresholds above 1 are never reached.
        assert_eq!(c.active[THRESHOLDS - 1], 0);
        let one = count_activity(&x[..1], 0.0, 3);
        assert_eq!(one.active[THRESHOLDS - 1 - HIGHEST_EXPONENT as usize], 1);
    }
}
