//! Audio in (symphonia) and out (hound), and the mono buffer every step works on.
//!
//! Steps work on one channel: a multichannel file is reduced when it is decoded, by the
//! recipe's [`ChannelPolicy`].

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

mod decode;
mod encode;
pub mod flac_tail;
pub mod format;

pub use decode::{Scan, Stream, decode, scan};
pub use encode::write_audio;
pub use format::{Container, OUTPUT_FORMATS, OutputFormat, STEM_FORMAT};

/// Mono samples in [-1, 1] at a known rate.
#[derive(Debug, Clone, PartialEq)]
pub struct Audio {
    /// Samples per second.
    pub rate: u32,
    /// The samples, nominally in [-1, 1].
    pub samples: Vec<f32>,
}

impl Audio {
    /// Length in seconds.
    pub fn duration(&self) -> f64 {
        self.samples.len() as f64 / f64::from(self.rate)
    }

    /// Index of the first NaN or infinite sample, if any (see [`first_non_finite`]).
    pub fn first_non_finite(&self) -> Option<usize> {
        first_non_finite(&self.samples)
    }
}

/// Index of the first NaN or infinite sample, if any.
///
/// Every step's input and output and every written file is checked, so this runs several
/// times per take: blocks of 64 are tested without a branch per sample (an all-ones
/// exponent is what NaN and the infinities share), which the compiler vectorises, and only
/// a block that fails is searched sample by sample.
pub fn first_non_finite(samples: &[f32]) -> Option<usize> {
    const BLOCK: usize = 64;
    const EXPONENT: u32 = 0x7f80_0000;
    samples.chunks(BLOCK).enumerate().find_map(|(b, block)| {
        let bad = block
            .iter()
            .fold(false, |bad, s| bad | (s.to_bits() & EXPONENT == EXPONENT));
        if bad {
            block
                .iter()
                .position(|s| !s.is_finite())
                .map(|i| b * BLOCK + i)
        } else {
            None
        }
    })
}

/// How a multichannel file becomes the one channel steps work on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum ChannelPolicy {
    /// The mean of all channels.
    #[default]
    Mix,
    /// One channel, counted from 0.
    Pick(usize),
}

/// Sample format (and container) of written audio files: one row each of
/// [`format::OUTPUT_FORMATS`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum SampleFormat {
    /// 16-bit signed PCM WAV: `round(x * 32768)`, clamped to [-32768, 32767] (the decoder's
    /// scale, [`crate::dsp::pcm16`]).
    #[default]
    Pcm16,
    /// 24-bit signed PCM WAV: `round(x * 8388608)`, clamped to [-8388608, 8388607].
    Pcm24,
    /// 32-bit IEEE float WAV.
    Float32,
    /// 16-bit FLAC, the codes of [`SampleFormat::Pcm16`].
    Flac16,
    /// 24-bit FLAC, the codes of [`SampleFormat::Pcm24`].
    Flac24,
}

/// What went wrong reading or writing audio, always with the file.
#[derive(Debug, thiserror::Error)]
pub enum AudioError {
    /// The file could not be opened or read.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The decoder could not make sense of the file.
    #[error("{path}: cannot decode: {reason}")]
    Decode {
        /// The file.
        path: PathBuf,
        /// What the decoder said.
        reason: String,
    },
    /// The file holds fewer frames than its header declares.
    #[error("{path}: truncated: header declares {declared} frames, only {found} present")]
    Truncated {
        /// The file.
        path: PathBuf,
        /// Frames the header promises.
        declared: u64,
        /// Frames decoded before the stream ended.
        found: u64,
    },
    /// The recipe picks a channel the file does not have.
    #[error("{path}: channel {wanted} requested, file has {channels}")]
    NoSuchChannel {
        /// The file.
        path: PathBuf,
        /// Channel asked for (from 0).
        wanted: usize,
        /// Channels in the file.
        channels: usize,
    },
    /// A sample to be written is NaN or infinite.
    #[error("{path}: sample {index} is not finite")]
    NotFinite {
        /// The file.
        path: PathBuf,
        /// Index of the first bad sample.
        index: usize,
    },
    /// The decoded audio holds no samples at all.
    #[error("{path}: no samples (the file holds no audio)")]
    Empty {
        /// The file.
        path: PathBuf,
    },
    /// The decoded audio is too short to hold even one sample at the rate it is brought to.
    #[error(
        "{path}: {frames} frame{} at {rate} Hz is less than one sample at {target_rate} Hz",
        if *frames == 1 { "" } else { "s" }
    )]
    TooShort {
        /// The file.
        path: PathBuf,
        /// Frames decoded.
        frames: u64,
        /// The file's rate.
        rate: u32,
        /// The rate it was to be brought to.
        target_rate: u32,
    },
    /// A decoded sample is NaN or infinite (float files can hold them): no step can work
    /// on it, so the clip is refused before any.
    #[error(
        "{path}: sample {index} (at {time_s:.6} s) is not finite; the file holds NaN or infinite audio"
    )]
    BadSample {
        /// The file.
        path: PathBuf,
        /// Index of the first bad sample (frame, after channel reduction).
        index: u64,
        /// Its time, seconds from the start.
        time_s: f64,
    },
    /// The WAV writer failed.
    #[error("{path}: cannot write: {reason}")]
    Write {
        /// The file.
        path: PathBuf,
        /// What the writer said.
        reason: String,
    },
}

/// Whether decoded audio can go into the steps: it holds samples, keeps at least one when
/// brought to `target_rate` (when given), and every sample is finite. What a decode found
/// is described by `scan` ([`Scan::of`] for a decoded [`Audio`]); `path` names the file in
/// the error. Every place that decodes a clip calls this before any DSP.
///
/// # Errors
/// [`AudioError::Empty`], [`AudioError::TooShort`] or [`AudioError::BadSample`] (the first
/// non-finite sample, with its index and time).
pub fn usable(path: &Path, scan: &Scan, target_rate: Option<u32>) -> Result<(), AudioError> {
    if scan.frames == 0 {
        return Err(AudioError::Empty {
            path: path.to_path_buf(),
        });
    }
    if let Some(target_rate) = target_rate {
        let frames = usize::try_from(scan.frames).unwrap_or(usize::MAX);
        if crate::dsp::resample::output_len(frames, scan.rate, target_rate) == 0 {
            return Err(AudioError::TooShort {
                path: path.to_path_buf(),
                frames: scan.frames,
                rate: scan.rate,
                target_rate,
            });
        }
    }
    if let Some(index) = scan.first_non_finite {
        return Err(AudioError::BadSample {
            path: path.to_path_buf(),
            index,
            time_s: index as f64 / f64::from(scan.rate),
        });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::first_non_finite;

    #[test]
    fn first_non_finite_finds_the_first_bad_sample_at_every_position() {
        // The values IEEE 754 calls not finite, at every offset around block edges, with a
        // second bad sample later that must not be the one reported.
        for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, -f32::NAN] {
            for len in [1usize, 63, 64, 65, 200] {
                for at in 0..len {
                    let mut x: Vec<f32> = (0..len).map(|i| (i as f32 * 0.37).sin()).collect();
                    x[at] = bad;
                    if at + 70 < len {
                        x[at + 70] = f32::NAN;
                    }
                    assert_eq!(first_non_finite(&x), Some(at), "len {len}, at {at}");
                }
            }
        }
    }

    #[test]
    fn extreme_finite_values_pass() {
        let x = [
            f32::MAX,
            f32::MIN,
            f32::MIN_POSITIVE,
            1e-45,
            -0.0,
            0.0,
            1.0,
            -1.0,
        ];
        assert_eq!(first_non_finite(&x), None);
        assert_eq!(first_non_finite(&[]), None);
    }
}
