//! Gallery pictures: a log-magnitude spectrogram on a mel frequency axis, as a PNG.
//!
//! The STFT is the library's own ([`crate::dsp::stft`]: 25 ms Hann windows every 10 ms)
//! and the frequency axis the HTK mel scale ([`crate::dsp::mel`]); this module only picks
//! the rows, takes decibels and colours them. One column per frame, so the picture's time
//! axis is exact: column `c` is centred on `c * hop / rate` seconds.

use crate::dsp::mel::MelScale;
use crate::dsp::stft::{Stft, StftConfig, StftError};

/// Rows of every picture (mel bands from 0 Hz to the Nyquist frequency).
pub const ROWS: usize = 128;
/// The quietest level shown, in dB below the loudest cell of the pictures compared.
pub const RANGE_DB: f32 = 80.0;

/// A spectrogram in decibels, rows top (highest band) to bottom.
#[derive(Debug, Clone)]
pub struct LogMel {
    /// Frames (picture columns).
    pub columns: usize,
    /// Seconds between column centres.
    pub hop_s: f64,
    /// The top row's upper frequency, Hz.
    pub top_hz: f64,
    /// dB re full scale of each cell, `ROWS × columns`, row-major.
    pub db: Vec<f32>,
}

impl LogMel {
    /// The loudest cell, dB.
    pub fn peak_db(&self) -> f32 {
        self.db.iter().copied().fold(f32::NEG_INFINITY, f32::max)
    }
}

/// The framing used for a rate: 25 ms windows every 10 ms, FFT the next power of two.
pub fn framing(rate: u32) -> StftConfig {
    let window_len = (f64::from(rate) * 0.025).round().max(16.0) as usize;
    let hop = (f64::from(rate) * 0.010).round().max(4.0) as usize;
    StftConfig {
        window_len,
        hop,
        fft_len: window_len.next_power_of_two(),
        ..StftConfig::default()
    }
}

/// Height of `hz` on a picture `height` units tall whose top is `top_hz` (mel scale).
pub fn mel_y(hz: f64, top_hz: f64, height: f64) -> f64 {
    let m = MelScale::Htk.hz_to_mel(hz.clamp(0.0, top_hz));
    height * (1.0 - m / MelScale::Htk.hz_to_mel(top_hz))
}

/// The log-magnitude mel picture of `samples` at `rate`, from 0 Hz up to `top_hz` (at most
/// the Nyquist frequency: pictures of a source and a take at different rates then share
/// one frequency axis).
///
/// # Errors
/// A framing the STFT refuses (a rate too low to hold a 25 ms window).
pub fn log_mel(samples: &[f32], rate: u32, top_hz: f64) -> Result<LogMel, StftError> {
    let config = framing(rate);
    let mut stft = Stft::new(config)?;
    let spec = stft.analyse(samples);
    let nyquist = f64::from(rate) / 2.0;
    let top_hz = top_hz.min(nyquist);
    let bins = spec.bins();
    // The bins each row covers, from its lower to its upper mel edge (at least one).
    let top_mel = MelScale::Htk.hz_to_mel(top_hz);
    let rows: Vec<(usize, usize)> = (0..ROWS)
        .map(|r| {
            let lo_mel = top_mel * (ROWS - 1 - r) as f64 / ROWS as f64;
            let hi_mel = top_mel * (ROWS - r) as f64 / ROWS as f64;
            let bin = |mel: f64| MelScale::Htk.mel_to_hz(mel) / nyquist * (bins - 1) as f64;
            let a = bin(lo_mel).round() as usize;
            let b = (bin(hi_mel).round() as usize).max(a + 1).min(bins);
            (a.min(bins - 1), b)
        })
        .collect();
    // Scale so a full-scale sine reads about 0 dB (the Hann window's sum / 2).
    let norm = config.window_len as f32 / 4.0;
    let mut db = vec![0f32; ROWS * spec.frames()];
    for t in 0..spec.frames() {
        let frame = spec.frame(t);
        for (r, &(a, b)) in rows.iter().enumerate() {
            let power = frame[a..b]
                .iter()
                .map(|c| c.norm_sqr())
                .fold(0f32, f32::max);
            db[r * spec.frames() + t] = 10.0 * (power / (norm * norm)).max(1e-12).log10();
        }
    }
    Ok(LogMel {
        columns: spec.frames(),
        hop_s: config.hop as f64 / f64::from(rate),
        top_hz,
        db,
    })
}

/// Colour ramp of our own: deep ink to pale straw, lightness rising steadily, so the
/// picture reads the same to every kind of colour vision and in grey.
const RAMP: [[f32; 3]; 5] = [
    [16.0, 18.0, 38.0],
    [52.0, 46.0, 110.0],
    [38.0, 120.0, 140.0],
    [140.0, 190.0, 120.0],
    [246.0, 240.0, 200.0],
];

fn colour(x: f32) -> [u8; 3] {
    let x = x.clamp(0.0, 1.0) * (RAMP.len() - 1) as f32;
    let i = (x.floor() as usize).min(RAMP.len() - 2);
    let f = x - i as f32;
    let mix = |c: usize| (RAMP[i][c] * (1.0 - f) + RAMP[i + 1][c] * f).round() as u8;
    [mix(0), mix(1), mix(2)]
}

/// The picture as PNG bytes, `peak_db` the level drawn brightest (the loudest of the
/// pictures shown together, so they share one scale) and [`RANGE_DB`] below it darkest.
///
/// # Errors
/// The PNG encoder's.
pub fn png_bytes(pic: &LogMel, peak_db: f32) -> Result<Vec<u8>, png::EncodingError> {
    let mut out = Vec::new();
    let mut enc = png::Encoder::new(&mut out, pic.columns.max(1) as u32, ROWS as u32);
    enc.set_color(png::ColorType::Rgb);
    enc.set_depth(png::BitDepth::Eight);
    let mut w = enc.write_header()?;
    let mut rgb = Vec::with_capacity(pic.db.len() * 3);
    for &v in &pic.db {
        rgb.extend_from_slice(&colour((v - peak_db + RANGE_DB) / RANGE_DB));
    }
    if pic.columns == 0 {
        rgb = vec![0; ROWS * 3];
    }
    w.write_image_data(&rgb)?;
    w.finish()?;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_tone_lands_in_its_mel_row_and_the_ramp_rises() {
        let rate = 16_000;
        let hz = 1000.0;
        let x: Vec<f32> = (0..rate)
            .map(|i| (2.0 * std::f64::consts::PI * hz * i as f64 / f64::from(rate)).sin() as f32)
            .collect();
        let pic = log_mel(&x, rate, 8000.0).unwrap();
        assert_eq!(pic.columns, 101);
        let t = 50;
        let loudest = (0..ROWS)
            .max_by(|&a, &b| pic.db[a * pic.columns + t].total_cmp(&pic.db[b * pic.columns + t]))
            .unwrap();
        // The row holding 1 kHz on the HTK mel scale (its centre height).
        let want = mel_y(hz, 8000.0, ROWS as f64);
        assert!(
            (loudest as f64 - want).abs() <= 1.5,
            "row {loudest}, want {want}"
        );
        // A full-scale sine reads within 1 dB of 0 dB at its bin.
        assert!(pic.db[loudest * pic.columns + t].abs() < 1.0);
        let lum = |c: [u8; 3]| 0.2126 * c[0] as f32 + 0.7152 * c[1] as f32 + 0.0722 * c[2] as f32;
        let mut last = -1.0;
        for i in 0..=20 {
            let l = lum(colour(i as f32 / 20.0));
            assert!(l > last, "lightness falls at {i}");
            last = l;
        }
        let png = png_bytes(&pic, pic.peak_db()).unwrap();
        assert_eq!(&png[1..4], b"PNG");
    }
}
