//! ITU-T G.711 companding: mu-law and A-law, 8-bit codes to and from 16-bit linear PCM.
//!
//! The codes are the transmitted characters of G.711: mu-law with bits 2 to 8 inverted
//! (positive zero is `0xFF`, the largest positive value `0x80`), A-law with the even bits
//! inverted (`0x55` applied; positive zero is `0xD5`). Bit 1 (the most significant) is the
//! polarity, set for positive values in both laws.
//!
//! Linear values are 16-bit. G.711 works on 14-bit (mu-law) and 13-bit (A-law) uniform
//! codes; the encoders drop the low bits by an arithmetic shift (rounding toward negative
//! infinity) and the decoders return the segment's reconstruction value scaled back to 16
//! bits. This is the convention of Python's `audioop` (`lin2ulaw`, `ulaw2lin`, `lin2alaw`,
//! `alaw2lin` with width 2), against which the tests check every input.
//!
//! ```
//! use retake::dsp::g711::{alaw_to_linear, linear_to_alaw, linear_to_ulaw, ulaw_to_linear};
//!
//! assert_eq!(linear_to_ulaw(0), 0xFF);
//! assert_eq!(ulaw_to_linear(0x80), 32_124);
//! assert_eq!(linear_to_alaw(0), 0xD5);
//! assert_eq!(alaw_to_linear(0xAA), 32_256);
//! ```

use super::pcm16;

/// mu-law bias in 14-bit units (G.711: decision values are offset by 33 before segmenting).
const ULAW_BIAS: i32 = 33;
/// Largest 14-bit magnitude coded before saturation: with the bias it reaches 8192, the top
/// of the last segment.
const ULAW_CLIP: i32 = 8159;
/// A-law transmits its characters with the even bits inverted.
const ALAW_INVERT: u8 = 0x55;

/// Encode one 16-bit sample as a G.711 mu-law code.
pub fn linear_to_ulaw(x: i16) -> u8 {
    // 14-bit uniform code, as G.711 specifies for mu-law.
    let v = i32::from(x) >> 2;
    let (positive, magnitude) = if v < 0 { (false, -v) } else { (true, v) };
    // Biased magnitude in 33..=8192: its highest set bit (5..=13) gives the segment.
    let biased = magnitude.min(ULAW_CLIP) + ULAW_BIAS;
    let top_bit = 31 - biased.leading_zeros() as i32;
    let segment = top_bit - 5;
    let (segment, mantissa) = if segment > 7 {
        (7, 0x0F)
    } else {
        (segment, (biased >> (segment + 1)) & 0x0F)
    };
    let code = ((segment << 4) | mantissa) as u8;
    // Bits 2..8 inverted; the polarity bit is 1 for positive values.
    if positive { !code } else { code ^ 0x7F }
}

/// Decode one G.711 mu-law code to a 16-bit sample.
pub fn ulaw_to_linear(code: u8) -> i16 {
    let c = !code;
    let negative = c & 0x80 != 0;
    let segment = i32::from((c >> 4) & 0x07);
    let mantissa = i32::from(c & 0x0F);
    // G.711 mu-law reconstruction in 14-bit units: ((2m + 33) << s) - 33; times 4.
    let magnitude = (((2 * mantissa + ULAW_BIAS) << segment) - ULAW_BIAS) * 4;
    (if negative { -magnitude } else { magnitude }) as i16
}

/// Encode one 16-bit sample as a G.711 A-law code.
pub fn linear_to_alaw(x: i16) -> u8 {
    // 13-bit uniform code, as G.711 specifies for A-law. A negative value v is coded with
    // magnitude -v - 1 (its one's complement), so x and -x - 1 share a magnitude.
    let v = i32::from(x) >> 3;
    let (sign, magnitude) = if v < 0 { (0u8, !v) } else { (0x80u8, v) };
    // magnitude is 0..=4095. Segment 0 covers 0..32 with the same step as segment 1.
    let segment = if magnitude < 32 {
        0
    } else {
        (31 - magnitude.leading_zeros() as i32) - 4
    };
    let shift = segment.max(1);
    let mantissa = (magnitude >> shift) & 0x0F;
    (sign | ((segment << 4) | mantissa) as u8) ^ ALAW_INVERT
}

/// Decode one G.711 A-law code to a 16-bit sample.
pub fn alaw_to_linear(code: u8) -> i16 {
    let c = code ^ ALAW_INVERT;
    let positive = c & 0x80 != 0;
    let segment = i32::from((c >> 4) & 0x07);
    let mantissa = i32::from(c & 0x0F);
    // G.711 A-law reconstruction in 12-bit magnitude units: 2m + 1 in segment 0,
    // (2m + 33) << (s - 1) above; times 8 for 16 bits.
    let magnitude = if segment == 0 {
        2 * mantissa + 1
    } else {
        (2 * mantissa + 33) << (segment - 1)
    } * 8;
    (if positive { magnitude } else { -magnitude }) as i16
}

/// Pass samples through a mu-law encoder and decoder.
///
/// Scaling: each sample becomes a 16-bit code by the one PCM scale of
/// [`crate::dsp::pcm16`] (`round(x * 32768)`, clamped), is coded and decoded, and comes
/// back as `y / 32768`: a sample read from a 16-bit file passes exactly as `audioop` would
/// pass its code, with no gain. A non-finite sample becomes 0 (NaN) or full scale
/// (infinities).
pub fn ulaw_round_trip(x: &[f32]) -> Vec<f32> {
    x.iter()
        .map(|&s| pcm16::to_f32(ulaw_to_linear(linear_to_ulaw(pcm16::to_i16(s)))))
        .collect()
}

/// Pass samples through an A-law encoder and decoder, scaled as in [`ulaw_round_trip`].
pub fn alaw_round_trip(x: &[f32]) -> Vec<f32> {
    x.iter()
        .map(|&s| pcm16::to_f32(alaw_to_linear(linear_to_alaw(pcm16::to_i16(s)))))
        .collect()
}
