//! Reverberation time of an impulse response: Schroeder's backward integration of the
//! squared response (Schroeder 1965) and least-squares lines fitted to the energy decay
//! curve over the ranges ISO 3382-1 names: EDT from 0 to -10 dB, T20 from -5 to -25 dB,
//! T30 from -5 to -35 dB, each extrapolated to a 60 dB decay.
//!
//! The decay is taken from the direct-path peak (the largest sample) on. A measured
//! response ends in a noise floor, and integrating the floor bends the curve up and
//! lengthens every time, so the floor is dealt with before integrating, after the
//! iterative procedure of Lundeby et al. (1995):
//!
//! 1. Average the energy in 10 ms windows; take the floor as the mean energy of the last
//!    tenth of the response.
//! 2. Fit a line (level in dB against time) to the windows from the start down to 10 dB
//!    above the floor; where it meets the floor is the crossing point.
//! 3. Repeat up to five times with windows of a fifth of the time the line takes to fall
//!    10 dB, the floor measured from the point where the line is 10 dB below it (or the
//!    last tenth, whichever is longer), and the line fitted from -5 dB down to 10 dB above
//!    the floor, until the crossing point moves by less than a window.
//!
//! The curve is then integrated from the crossing point back to the peak with the floor's
//! mean energy subtracted from every sample, plus the energy the fitted line would still
//! hold after the crossing point (an exponential continuation). Exact trailing zeros are
//! dropped first. A response whose floor region still falls (its later half more than
//! half the fall the line predicts below its earlier half) has no floor: a simulated
//! response, or one cut off before its decay met any noise. Its curve is integrated to the
//! end with nothing subtracted, plus the same continuation, which makes it the curve of
//! the decay as if it had gone on.
//!
//! A time is reported only when the decay's dynamic range (how far the curve falls before
//! the crossing point) reaches 10 dB below the bottom of its evaluation range: 20 dB for
//! EDT, 35 dB for T20, 45 dB for T30. The margin follows ISO 3382-1's requirement that the
//! noise floor lie at least 10 dB below the evaluation range (from memory; for EDT it is
//! our choice, by analogy).

/// Length of the first smoothing windows.
const FIRST_WINDOW_S: f64 = 0.010;

/// Rounds of the floor / line / crossing-point iteration after the first.
const ITERATIONS: usize = 5;

/// A fitted line must stay this far above the noise floor, in dB.
const FLOOR_MARGIN_DB: f64 = 10.0;

/// Reverberation times of one impulse response, in seconds, each `None` when the decay
/// does not reach the depth its evaluation range needs (see the module notes).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DecayFit {
    /// T20: the line fitted to the energy decay curve from -5 to -25 dB, extrapolated to
    /// 60 dB of decay.
    pub t20_s: Option<f64>,
    /// T30: the same from -5 to -35 dB.
    pub t30_s: Option<f64>,
    /// Early decay time: the same from 0 to -10 dB.
    pub edt_s: Option<f64>,
    /// Time of the direct-path peak (the largest absolute sample) from the start of the
    /// response; the decay is measured from here.
    pub peak_s: f64,
    /// Where the integration was cut, in seconds after the peak: the crossing point with
    /// the noise floor, or the end of the response when it has none; 0 when no decay was
    /// found.
    pub truncated_s: f64,
    /// Dynamic range: how far the energy decay curve falls by the crossing point, in dB; 0
    /// when no decay was found.
    pub range_db: f64,
}

/// Reverberation times of the impulse response `h` sampled at `rate` Hz. All times are
/// `None` for an empty, silent or non-finite response or one that does not decay.
///
/// # Panics
/// When `rate` is zero.
pub fn decay_times(h: &[f32], rate: u32) -> DecayFit {
    assert!(rate > 0, "sample rate must be positive");
    let rate_f = f64::from(rate);
    let peak = h
        .iter()
        .enumerate()
        .fold((0, 0.0f32), |(bi, bv), (i, v)| {
            if v.abs() > bv { (i, v.abs()) } else { (bi, bv) }
        })
        .0;
    let none = DecayFit {
        t20_s: None,
        t30_s: None,
        edt_s: None,
        peak_s: peak as f64 / rate_f,
        truncated_s: 0.0,
        range_db: 0.0,
    };
    if h.iter().any(|v| !v.is_finite()) {
        return none;
    }
    let mut energy: Vec<f64> = h[peak..].iter().map(|&v| f64::from(v).powi(2)).collect();
    while energy.last() == Some(&0.0) {
        energy.pop();
    }
    let Some(floor) = find_floor(&energy, rate_f) else {
        return none;
    };
    let Some(curve) = decay_curve(&energy, &floor, rate_f) else {
        return none;
    };
    let time = |upper_db: f64, lower_db: f64| {
        if curve.range_db < -lower_db + FLOOR_MARGIN_DB {
            return None;
        }
        fit_time(&curve.db, upper_db, lower_db, rate_f)
    };
    DecayFit {
        t20_s: time(-5.0, -25.0),
        t30_s: time(-5.0, -35.0),
        edt_s: time(0.0, -10.0),
        truncated_s: curve.db.len() as f64 / rate_f,
        range_db: curve.range_db,
        ..none
    }
}

/// The reverberation time RT60 of `h`: T30 when the decay is deep enough for it, else
/// T20, else `None`.
///
/// # Panics
/// When `rate` is zero.
pub fn rt60(h: &[f32], rate: u32) -> Option<f64> {
    let fit = decay_times(h, rate);
    fit.t30_s.or(fit.t20_s)
}

/// Schroeder's backward integral of `h` squared, from each sample to the end, relative to
/// the whole response's energy, in dB: 0 at the first sample, falling to the last
/// sample's share at the end. No peak search and no noise-floor treatment; `-inf` where
/// the remaining energy is zero. Accumulated in `f64`.
pub fn schroeder_db(h: &[f32]) -> Vec<f64> {
    let mut remaining = vec![0.0; h.len()];
    let mut acc = 0.0;
    for (r, &v) in remaining.iter_mut().zip(h).rev() {
        acc += f64::from(v).powi(2);
        *r = acc;
    }
    let total = acc;
    remaining
        .into_iter()
        .map(|r| 10.0 * (r / total).log10())
        .collect()
}

/// The noise floor and the decay line that meets it.
struct Floor {
    /// Mean energy per sample of the floor; 0 when the response still decays at its end
    /// (it has no floor).
    energy: f64,
    /// The decay line: level (dB of mean energy per sample) = `intercept + slope * t`.
    intercept: f64,
    /// dB per second, negative.
    slope: f64,
    /// Where the line meets the floor, in seconds (may lie past the end); the end of the
    /// response when it has no floor.
    crossing_s: f64,
}

/// Levels of `energy` averaged over windows of `w` samples: (centre time in s, level in
/// dB), `-inf` for a silent window.
fn window_levels(energy: &[f64], w: usize, rate: f64) -> Vec<(f64, f64)> {
    energy
        .chunks(w)
        .enumerate()
        .map(|(k, c)| {
            let mean = c.iter().sum::<f64>() / c.len() as f64;
            let centre = (k * w) as f64 + (c.len() as f64 - 1.0) / 2.0;
            (centre / rate, 10.0 * mean.log10())
        })
        .collect()
}

/// Least-squares line `y = a + b x` through `points`: `(a, b)`, or `None` for fewer than
/// two distinct abscissae.
fn fit_line(points: impl Iterator<Item = (f64, f64)> + Clone) -> Option<(f64, f64)> {
    let (mut n, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for (x, y) in points.clone() {
        n += 1.0;
        sx += x;
        sy += y;
    }
    if n < 2.0 {
        return None;
    }
    let (mx, my) = (sx / n, sy / n);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (x, y) in points {
        sxx += (x - mx) * (x - mx);
        sxy += (x - mx) * (y - my);
    }
    if sxx <= 0.0 {
        return None;
    }
    let b = sxy / sxx;
    Some((my - b * mx, b))
}

/// Mean of `energy[start..]` (the last sample if `start` is past it).
fn mean_from(energy: &[f64], start: usize) -> f64 {
    let tail = &energy[start.min(energy.len() - 1)..];
    tail.iter().sum::<f64>() / tail.len() as f64
}

/// A line through the window levels from the first at or below `start_db` down to the
/// last before one falls below `floor_db + FLOOR_MARGIN_DB` or is silent; `None` unless
/// it has at least two windows and falls.
fn fit_decay(levels: &[(f64, f64)], start_db: f64, floor_db: f64) -> Option<(f64, f64)> {
    let first = levels.iter().position(|&(_, l)| l <= start_db)?;
    let stop = levels[first..]
        .iter()
        .position(|&(_, l)| l < floor_db + FLOOR_MARGIN_DB || !l.is_finite())
        .map_or(levels.len(), |k| first + k);
    let (a, b) = fit_line(levels[first..stop].iter().copied())?;
    (b < 0.0).then_some((a, b))
}

/// The noise floor of `energy` (from the peak on) and the decay line meeting it, by the
/// iteration in the module notes; `None` when no falling line clears the floor.
fn find_floor(energy: &[f64], rate: f64) -> Option<Floor> {
    let n = energy.len();
    if n < 10 {
        return None;
    }
    let last_tenth = n - n / 10;
    let max_window = n / 10;
    let mut w = ((FIRST_WINDOW_S * rate).round() as usize).clamp(1, max_window);
    let mut floor = mean_from(energy, last_tenth);
    let levels = window_levels(energy, w, rate);
    let top = levels[0].1;
    let (mut a, mut b) = fit_decay(&levels, top, 10.0 * floor.log10())?;
    let mut crossing = (10.0 * floor.log10() - a) / b;
    let mut floor_from = last_tenth;
    for _ in 0..ITERATIONS {
        // A fifth of the time the line takes to fall 10 dB.
        let w_s = 2.0 / -b;
        w = ((w_s * rate).round() as usize).clamp(1, max_window);
        let levels = window_levels(energy, w, rate);
        let from = ((crossing + FLOOR_MARGIN_DB / -b) * rate).round();
        let from = if from.is_finite() && from >= 0.0 {
            from as usize
        } else {
            n
        };
        floor_from = from.min(last_tenth);
        floor = mean_from(energy, floor_from);
        let floor_db = 10.0 * floor.log10();
        let top = levels[0].1;
        let Some((a2, b2)) = fit_decay(&levels, top - 5.0, floor_db) else {
            break;
        };
        (a, b) = (a2, b2);
        let next = (floor_db - a) / b;
        let moved = (next - crossing).abs();
        crossing = next;
        if moved < w as f64 / rate {
            break;
        }
    }
    // A floor is flat; a tail that still falls at the decay's rate is no floor. Compare the
    // two halves of the floor region against the fall the line predicts between them.
    let region = &energy[floor_from.min(n - 2)..];
    let (early, late) = region.split_at(region.len() / 2);
    let mean = |x: &[f64]| x.iter().sum::<f64>() / x.len() as f64;
    let fall_db = 10.0 * (mean(early) / mean(late)).log10();
    let predicted_db = -b * (region.len() as f64 / 2.0) / rate;
    if fall_db > predicted_db / 2.0 {
        return Some(Floor {
            energy: 0.0,
            intercept: a,
            slope: b,
            crossing_s: n as f64 / rate,
        });
    }
    Some(Floor {
        energy: floor,
        intercept: a,
        slope: b,
        crossing_s: crossing,
    })
}

/// The energy decay curve used for the fits.
struct DecayCurve {
    /// Level in dB relative to the start, one per sample up to the crossing point.
    db: Vec<f64>,
    /// The curve's depth at the crossing point, in dB (positive).
    range_db: f64,
}

/// Schroeder's integral of `energy` minus the floor, cut at the crossing point, plus the
/// fitted line's energy beyond it.
fn decay_curve(energy: &[f64], floor: &Floor, rate: f64) -> Option<DecayCurve> {
    let n = energy.len();
    let end = (floor.crossing_s * rate).round();
    let end = if end.is_finite() && end >= 1.0 {
        (end as usize).min(n)
    } else {
        1
    };
    let end_s = end as f64 / rate;
    // The line's energy per sample at the cut, continued as a geometric series with the
    // line's ratio per sample.
    let at_end = 10f64.powf((floor.intercept + floor.slope * end_s) / 10.0);
    let ratio = 10f64.powf(floor.slope / (10.0 * rate));
    let tail = at_end / (1.0 - ratio);
    let mut remaining = vec![0.0; end];
    let mut acc = tail;
    for (r, &e) in remaining.iter_mut().zip(&energy[..end]).rev() {
        acc += e - floor.energy;
        *r = acc;
    }
    let total = remaining[0];
    if !(total > tail && tail > 0.0) {
        return None;
    }
    let db = remaining
        .into_iter()
        .map(|r| 10.0 * (r.max(0.0) / total).log10())
        .collect();
    Some(DecayCurve {
        db,
        range_db: 10.0 * (total / tail).log10(),
    })
}

/// The time the curve `db` (one value per sample at `rate`) takes to fall 60 dB by the
/// least-squares line through its samples from the first at or below `upper_db` to the
/// last before it first falls below `lower_db`; `None` if it never falls that far.
fn fit_time(db: &[f64], upper_db: f64, lower_db: f64, rate: f64) -> Option<f64> {
    let first = db.iter().position(|&l| l <= upper_db)?;
    let stop = first + db[first..].iter().position(|&l| l < lower_db)?;
    let (_, slope) = fit_line((first..stop).map(|i| (i as f64 / rate, db[i])))?;
    (slope < 0.0).then(|| -60.0 / slope)
}
