//! Mixing helpers: noise excerpts that loop without a click, and power over time spans.

/// `len` samples of `noise` from `offset`, looping when the noise runs out.
///
/// Each seam is an equal-power crossfade of `fade` samples from the noise's last `fade`
/// samples into its first `fade`, so the loop has no step. Plain equal-power gains
/// (cos, sin) keep the power of *uncorrelated* ends; for correlated ends (a steady hum) they
/// would raise it by up to 3 dB mid-fade. So the gains are divided by
/// `sqrt(cos² + sin² + 2ρ·cos·sin)`, with `ρ` the measured correlation of the two ends
/// (clamped to [0, 1]): the blend's expected power stays constant for any correlation, and
/// the gains are the plain equal-power ones when `ρ = 0`. `fade` is reduced to a third of
/// the noise's length when the noise is short. `offset` is taken modulo the loop.
///
/// # Panics
/// When `noise` is empty and `len > 0`.
pub fn excerpt(noise: &[f32], offset: usize, len: usize, fade: usize) -> Vec<f32> {
    let mut out = Vec::with_capacity(len);
    if len == 0 {
        return out;
    }
    assert!(!noise.is_empty(), "excerpt of an empty noise");
    let n = noise.len();
    if offset < n && offset + len <= n {
        out.extend_from_slice(&noise[offset..offset + len]);
        return out;
    }
    let fade = fade.min(n / 3);
    // One period of the loop is noise[fade..n]: its tail (the last `fade` samples) blends
    // into the head noise[0..fade] that the next period skips.
    let period = n - fade;
    let rho = correlation(&noise[n - fade..], &noise[..fade]).clamp(0.0, 1.0);
    let gains: Vec<(f32, f32)> = (0..fade)
        .map(|i| {
            let theta = std::f64::consts::FRAC_PI_2 * (i as f64 + 0.5) / fade as f64;
            let (b, a) = theta.sin_cos();
            let norm = (a * a + b * b + 2.0 * rho * a * b).sqrt();
            ((a / norm) as f32, (b / norm) as f32)
        })
        .collect();
    // Position inside the looped signal, whose first period starts at sample 0 of `noise`.
    let mut pos = offset % period;
    while out.len() < len {
        if fade == 0 || pos < n - fade {
            // Plain stretch up to the start of the tail (or to the end, with no fade).
            let stop = if fade == 0 { n } else { n - fade };
            let take = (stop - pos).min(len - out.len());
            out.extend_from_slice(&noise[pos..pos + take]);
            pos += take;
            if fade == 0 && pos == n {
                pos = 0;
            }
        } else {
            // Inside the tail: blend tail sample with the matching head sample.
            let i = pos - (n - fade);
            let (g_out, g_in) = gains[i];
            out.push(noise[pos] * g_out + noise[i] * g_in);
            pos += 1;
            if pos == n {
                pos = fade;
            }
        }
    }
    out
}

/// Normalised correlation of two equal-length signals (0 when either is silent).
fn correlation(a: &[f32], b: &[f32]) -> f64 {
    let (mut ab, mut aa, mut bb) = (0.0f64, 0.0f64, 0.0f64);
    for (&x, &y) in a.iter().zip(b) {
        let (x, y) = (f64::from(x), f64::from(y));
        ab += x * y;
        aa += x * x;
        bb += y * y;
    }
    if aa == 0.0 || bb == 0.0 {
        0.0
    } else {
        ab / (aa * bb).sqrt()
    }
}

/// Sample ranges `[start, end)` of spans given in seconds at `rate`, clipped to `len`
/// samples, sorted and merged where they overlap, so no sample counts twice.
pub fn spans_to_samples(spans: &[(f64, f64)], rate: u32, len: usize) -> Vec<(usize, usize)> {
    let at = |t: f64| ((t * f64::from(rate)).round().max(0.0) as usize).min(len);
    let mut ranges: Vec<(usize, usize)> = spans
        .iter()
        .map(|&(a, b)| (at(a), at(b)))
        .filter(|(a, b)| b > a)
        .collect();
    ranges.sort_unstable();
    let mut merged: Vec<(usize, usize)> = Vec::with_capacity(ranges.len());
    for (a, b) in ranges {
        match merged.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => merged.push((a, b)),
        }
    }
    merged
}

/// Mean square of `x` over sample ranges (f64), and the number of samples counted.
pub fn power_over(x: &[f32], ranges: &[(usize, usize)]) -> (f64, usize) {
    let mut sum = 0.0f64;
    let mut count = 0usize;
    for &(a, b) in ranges {
        for &s in &x[a..b] {
            sum += f64::from(s) * f64::from(s);
        }
        count += b - a;
    }
    if count == 0 {
        (0.0, 0)
    } else {
        (sum / count as f64, count)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ramp(n: usize) -> Vec<f32> {
        (0..n).map(|i| i as f32).collect()
    }

    #[test]
    fn slice_when_it_fits() {
        assert_eq!(excerpt(&ramp(10), 3, 4, 2), vec![3.0, 4.0, 5.0, 6.0]);
    }

    #[test]
    fn loops_with_blended_seam() {
        let noise = ramp(10);
        let out = excerpt(&noise, 0, 20, 2);
        // 0..8 plain, then two blended samples (8,9 with 0,1), then 2.. again.
        assert_eq!(&out[..8], &noise[..8]);
        // Tail [8, 9] and head [0, 1]: correlation 9 / sqrt(145 * 1).
        let rho = 9.0 / 145f64.sqrt();
        let g = |i: f64| {
            let (b, a) = (std::f64::consts::FRAC_PI_2 * (i + 0.5) / 2.0).sin_cos();
            let norm = (a * a + b * b + 2.0 * rho * a * b).sqrt();
            (a / norm, b / norm)
        };
        let (a0, b0) = g(0.0);
        assert!((f64::from(out[8]) - (8.0 * a0 + 0.0 * b0)).abs() < 1e-5);
        let (a1, b1) = g(1.0);
        assert!((f64::from(out[9]) - (9.0 * a1 + 1.0 * b1)).abs() < 1e-5);
        assert_eq!(&out[10..16], &noise[2..8]);
        assert_eq!(out.len(), 20);
    }

    /// Mean square of `x[a..b]`.
    fn ms(x: &[f32], a: usize, b: usize) -> f64 {
        power_over(x, &[(a, b)]).0
    }

    #[test]
    fn seam_keeps_the_power_of_noise_and_of_a_hum() {
        // Uncorrelated ends (white noise from a fixed LCG): plain equal-power gains, whose
        // squares sum to one, keep the power (textbook: var(aX + bY) = a² + b² for
        // independent unit-variance X, Y).
        let mut state = 1u64;
        let white: Vec<f32> = (0..32_000)
            .map(|_| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1);
                ((state >> 40) as f32 / (1u64 << 24) as f32) - 0.5
            })
            .collect();
        let y = excerpt(&white, 0, 64_000, 4000);
        let seam = 32_000 - 4000;
        let ratio_db = 10.0 * (ms(&y, seam, seam + 4000) / ms(&white, 0, 32_000)).log10();
        assert!(ratio_db.abs() < 0.3, "noise seam {ratio_db:.2} dB");
        // Correlated ends: a 100 Hz hum whose length is a whole number of periods, so tail
        // and head are the same waveform (ρ = 1). Plain equal-power gains would lift the
        // middle of the fade by 10·log10((cos 45° + sin 45°)²) = +3.01 dB; the correlation
        // correction keeps it flat.
        let hum: Vec<f32> = (0..16_000)
            .map(|i| {
                (0.5 * (2.0 * std::f64::consts::PI * 100.0 * i as f64 / 16_000.0).sin()) as f32
            })
            .collect();
        let y = excerpt(&hum, 0, 32_000, 1600);
        let mid = 16_000 - 1600 + 800;
        let ratio_db = 10.0 * (ms(&y, mid - 80, mid + 80) / ms(&hum, 0, 16_000)).log10();
        assert!(ratio_db.abs() < 0.05, "hum seam {ratio_db:.3} dB");
    }

    #[test]
    fn every_offset_gives_the_looped_signal() {
        // The looped signal of ramp(10) with fade 2, written out by hand for two periods.
        let noise = ramp(10);
        let full = excerpt(&noise, 0, 40, 2);
        for offset in 0..8 {
            let out = excerpt(&noise, offset, 20, 2);
            assert_eq!(&out[..], &full[offset..offset + 20], "offset {offset}");
        }
    }

    #[test]
    fn offset_past_the_end_wraps() {
        let out = excerpt(&ramp(10), 12, 3, 0);
        assert_eq!(out, vec![2.0, 3.0, 4.0]);
    }

    #[test]
    fn spans_merge_and_clip() {
        let r = spans_to_samples(&[(0.5, 1.0), (0.0, 0.2), (0.9, 1.5), (3.0, 4.0)], 10, 20);
        assert_eq!(r, vec![(0, 2), (5, 15)]);
        let x: Vec<f32> = (0..20).map(|i| if i < 2 { 2.0 } else { 1.0 }).collect();
        let (p, n) = power_over(&x, &r);
        assert_eq!(n, 12);
        assert!((p - (2.0 * 4.0 + 10.0) / 12.0).abs() < 1e-12);
    }
}
