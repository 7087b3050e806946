//! Levels: peak and RMS in linear terms and in dBFS, computed in f64.

/// Largest absolute sample value (0 for an empty slice; NaN samples are passed over).
///
/// Taken in `f32`, which is exact (the largest magnitude is one of the samples), over
/// eight independent lanes so the loop vectorises instead of waiting on one running
/// maximum; steps take it several times per take.
pub fn peak(samples: &[f32]) -> f64 {
    const LANES: usize = 8;
    let mut lanes = [0.0f32; LANES];
    let blocks = samples.chunks_exact(LANES);
    let tail = blocks
        .remainder()
        .iter()
        .fold(0.0f32, |m, s| m.max(s.abs()));
    for block in blocks {
        for (m, s) in lanes.iter_mut().zip(block) {
            *m = m.max(s.abs());
        }
    }
    f64::from(lanes.iter().fold(tail, |m, &l| m.max(l)))
}

/// Mean power (mean of squares) in f64 (0 for an empty slice).
pub fn power(samples: &[f32]) -> f64 {
    if samples.is_empty() {
        return 0.0;
    }
    samples
        .iter()
        .map(|&s| f64::from(s) * f64::from(s))
        .sum::<f64>()
        / samples.len() as f64
}

/// A linear amplitude in dB relative to full scale (1.0). Zero gives negative infinity.
pub fn amplitude_db(a: f64) -> f64 {
    20.0 * a.log10()
}

/// A dB value as a linear amplitude factor.
pub fn db_to_amplitude(db: f64) -> f64 {
    10f64.powf(db / 20.0)
}

/// `x` times `gain`, lowered where needed so the peak is at most `ceiling` (linear).
/// Returns the scaled samples and the gain actually applied. When the gain would pass the
/// ceiling it becomes `ceiling / peak`; f32 rounding can then leave the peak an ulp above,
/// so the gain is nudged down by a float epsilon until the ceiling holds.
pub fn scale_under(x: &[f32], gain: f64, ceiling: f64) -> (Vec<f32>, f64) {
    let before = peak(x);
    let mut k = if before * gain > ceiling {
        ceiling / before
    } else {
        gain
    };
    let scale = |k: f64| {
        x.iter()
            .map(|&s| (f64::from(s) * k) as f32)
            .collect::<Vec<f32>>()
    };
    let mut y = scale(k);
    while peak(&y) > ceiling {
        k *= 1.0 - f64::from(f32::EPSILON);
        y = scale(k);
    }
    (y, k)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn peak_is_the_largest_magnitude_wherever_it_sits() {
        for len in [0usize, 1, 7, 8, 9, 100] {
            for at in 0..len {
                let mut x: Vec<f32> = (0..len).map(|i| (i as f32 * 0.3).sin() * 0.5).collect();
                x[at] = -0.75;
                assert_eq!(peak(&x), 0.75, "len {len}, at {at}");
            }
        }
        assert_eq!(peak(&[]), 0.0);
        assert_eq!(peak(&[f32::NAN, -0.25, f32::NAN]), 0.25);
    }

    #[test]
    fn full_scale_sine_is_minus_3_dbfs_rms() {
        // A sine of amplitude 1 has RMS 1/sqrt(2), i.e. -3.01 dB (textbook identity).
        let x: Vec<f32> = (0..16000)
            .map(|i| (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / 16000.0).sin() as f32)
            .collect();
        let rms_db = 10.0 * power(&x).log10();
        assert!((rms_db + 3.0103).abs() < 0.001, "{rms_db}");
        assert!((peak(&x) - 1.0).abs() < 1e-6);
        assert!((db_to_amplitude(-6.0206) - 0.5).abs() < 1e-4);
        assert!((amplitude_db(0.5) + 6.0206).abs() < 1e-3);
    }

    #[test]
    fn scale_under_holds_the_ceiling_and_keeps_headroom_gains() {
        let x: Vec<f32> = (0..1000).map(|i| ((i as f32) * 0.1).sin() * 0.5).collect();
        let ceiling = db_to_amplitude(-1.0);
        let (y, k) = scale_under(&x, 4.0, ceiling);
        assert!(peak(&y) <= ceiling && peak(&y) > ceiling * 0.999_999);
        assert!((k - ceiling / peak(&x)).abs() < 1e-6);
        let (y, k) = scale_under(&x, 0.5, ceiling);
        assert_eq!(k, 0.5);
        assert!((peak(&y) - 0.25).abs() < 1e-6);
    }
}
