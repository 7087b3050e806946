//! Mixing helpers: noise excerpts that loop without a click, and power over time spans.

/// `len` samples of `noise` from `offset`, looping when the noise runs out.
///
/// Each seam is an equal-power crossfade of `fade` samples (sine/cosine gains whose squares
/// sum to one) from the noise's last `fade` samples into its first `fade`, so the loop has
/// no step and uncorrelated noise keeps its power through the seam. `fade` is reduced to a
/// third of the noise's length when the noise is short. `offset` is taken modulo the loop.
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
    let gains: Vec<(f32, f32)> = (0..fade)
        .map(|i| {
            let theta = std::f64::consts::FRAC_PI_2 * (i as f64 + 0.5) / fade as f64;
            (theta.cos() as f32, theta.sin() as f32)
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
        let g = |i: f64| (std::f64::consts::FRAC_PI_2 * (i + 0.5) / 2.0).sin_cos();
        let (s0, c0) = g(0.0);
        assert!((f64::from(out[8]) - (8.0 * c0 + 0.0 * s0)).abs() < 1e-5);
        let (s1, c1) = g(1.0);
        assert!((f64::from(out[9]) - (9.0 * c1 + 1.0 * s1)).abs() < 1e-5);
        assert_eq!(&out[10..16], &noise[2..8]);
        assert_eq!(out.len(), 20);
    }

    #[test]
    fn equal_power_gains() {
        for fade in [1usize, 7, 800] {
            for i in 0..fade {
                let t = std::f64::consts::FRAC_PI_2 * (i as f64 + 0.5) / fade as f64;
                assert!((t.cos().powi(2) + t.sin().powi(2) - 1.0).abs() < 1e-12);
            }
        }
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
