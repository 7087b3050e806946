//! Band-limited resampling (rubato), with the resampler's delay compensated so that sample
//! `i` of the output sits at time `i / rate_out` of the same signal.

/// Resample from `from` Hz to `to` Hz. The output has `round(len * to / from)` samples and
/// no added delay.
pub fn resample(samples: &[f32], from: u32, to: u32) -> Vec<f32> {
    let _ = (samples, from, to);
    todo!("dsp::resample::resample")
}
