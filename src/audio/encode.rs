//! Writing mono WAV files with hound.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use hound::{WavSpec, WavWriter};

use super::{Audio, AudioError, SampleFormat};
use crate::dsp::pcm16;

/// Samples handed to hound's 16-bit writer per call; its internal buffer is reused.
const PCM16_CHUNK: usize = 1 << 16;

/// Size of the RIFF header hound writes in front of the data, at most (WAVE_FORMAT_EXTENSIBLE).
const MAX_HEADER_BYTES: u64 = 68;

/// Write a mono WAV file in the given format to exactly `path` (created or overwritten). The
/// caller picks the name: the runner writes to a temporary name and renames.
///
/// Scales:
/// - [`SampleFormat::Pcm16`]: `round(x * 32768)` (ties away from zero), clamped to
///   [-32768, 32767] ([`crate::dsp::pcm16`]): the decoder's own scale, so a 16-bit input
///   written back unchanged is bit-identical. -1.0 → -32768; 1.0 clips to 32767.
/// - [`SampleFormat::Float32`]: the `f32` values unchanged (IEEE float WAV), no clipping.
///
/// # Errors
/// - [`AudioError::NotFinite`] for the first NaN or infinite sample; nothing is created.
/// - [`AudioError::Write`] for a zero sample rate or audio too long for a RIFF file (4 GiB).
/// - [`AudioError::Io`] when the file system fails (a full disk among others), with its
///   error kind. A file left half-written by a writer failing after creating it is removed,
///   best effort.
pub fn write_wav(path: &Path, audio: &Audio, format: SampleFormat) -> Result<(), AudioError> {
    if let Some(index) = audio.samples.iter().position(|x| !x.is_finite()) {
        return Err(AudioError::NotFinite {
            path: path.to_path_buf(),
            index,
        });
    }
    let write_err = |reason: String| AudioError::Write {
        path: path.to_path_buf(),
        reason,
    };
    if audio.rate == 0 {
        return Err(write_err("sample rate is 0".to_string()));
    }
    let (bits, sample_format) = match format {
        SampleFormat::Pcm16 => (16u16, hound::SampleFormat::Int),
        SampleFormat::Float32 => (32u16, hound::SampleFormat::Float),
    };
    let data_bytes = audio.samples.len() as u64 * u64::from(bits / 8);
    if data_bytes + MAX_HEADER_BYTES > u64::from(u32::MAX) {
        return Err(write_err(format!(
            "{} samples need {data_bytes} bytes, more than a RIFF file holds",
            audio.samples.len()
        )));
    }
    let spec = WavSpec {
        channels: 1,
        sample_rate: audio.rate,
        bits_per_sample: bits,
        sample_format,
    };

    // A failing file system keeps its error kind (a full disk must stop a run, not reject a
    // clip); hound's own refusals are messages.
    let hound_err = |e: hound::Error| match e {
        hound::Error::IoError(source) => AudioError::Io {
            path: path.to_path_buf(),
            source,
        },
        other => write_err(other.to_string()),
    };
    let mut writer = WavWriter::create(path, spec).map_err(hound_err)?;
    let written = match format {
        SampleFormat::Pcm16 => write_pcm16(&mut writer, &audio.samples),
        SampleFormat::Float32 => audio
            .samples
            .iter()
            .try_for_each(|&x| writer.write_sample(x)),
    };
    written.and_then(|()| writer.finalize()).map_err(|e| {
        // The file exists now and is incomplete: do not leave a broken WAV at `path`.
        let _ = std::fs::remove_file(path);
        hound_err(e)
    })
}

fn write_pcm16(
    writer: &mut WavWriter<BufWriter<File>>,
    samples: &[f32],
) -> Result<(), hound::Error> {
    for chunk in samples.chunks(PCM16_CHUNK) {
        // Length fits: chunks are at most PCM16_CHUNK long.
        let mut w = writer.get_i16_writer(chunk.len() as u32);
        for &x in chunk {
            w.write_sample(pcm16::to_i16(x));
        }
        w.flush()?;
    }
    Ok(())
}
