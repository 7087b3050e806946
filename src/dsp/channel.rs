//! Channel nonlinearities: hard and soft clipping, and uniform re-quantisation.

/// Clip every sample to `[-level, level]`.
///
/// A negative `level` is taken as its magnitude; NaN samples stay NaN.
pub fn hard_clip(x: &[f32], level: f32) -> Vec<f32> {
    let level = level.abs();
    x.iter().map(|&s| s.clamp(-level, level)).collect()
}

/// Saturate every sample smoothly toward `±level`: `y = level * tanh(x / level)` (in f64).
///
/// The curve is odd, strictly increasing, has slope 1 at 0 (so quiet samples pass
/// unchanged) and approaches `±level` without reaching it; at `x = level` it gives
/// `0.762 level`. A `level` of 0 silences the signal; a negative `level` is taken as its
/// magnitude.
pub fn soft_clip(x: &[f32], level: f32) -> Vec<f32> {
    let level = f64::from(level.abs());
    if level == 0.0 {
        return vec![0.0; x.len()];
    }
    x.iter()
        .map(|&s| (level * (f64::from(s) / level).tanh()) as f32)
        .collect()
}

/// Re-quantise to `bits` bits: uniform mid-tread levels `k q` with `q = 2^(1 - bits)` and
/// `k` in `-2^(bits - 1) ..= 2^(bits - 1) - 1` (the two's-complement grid, e.g. the 16-bit
/// PCM grid for 16), each sample rounded to the nearest level (halves away from zero) and
/// clamped to the grid.
///
/// The error is at most `q / 2 = 2^-bits` for samples in `[-1, 1 - q / 2]`; above that the
/// top level `1 - q` is the nearest. `bits` outside `1..=16` is clamped into that range
/// (so 0 means 1).
pub fn bit_reduce(x: &[f32], bits: u32) -> Vec<f32> {
    let bits = bits.clamp(1, 16);
    let steps = f64::from(1u32 << (bits - 1));
    let (lo, hi) = (-steps, steps - 1.0);
    x.iter()
        .map(|&s| ((f64::from(s) * steps).round().clamp(lo, hi) / steps) as f32)
        .collect()
}
