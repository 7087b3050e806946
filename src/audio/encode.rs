//! Writing mono audio files: WAV through hound, FLAC through flacenc, as the output-format
//! table ([`super::format`]) says.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use flacenc::component::BitRepr;
use flacenc::error::Verify;
use hound::{WavSpec, WavWriter};

use super::format::Container;
use super::{Audio, AudioError, SampleFormat};
use crate::dsp::pcm16;

/// Samples handed to hound's 16-bit writer per call; its internal buffer is reused.
const PCM16_CHUNK: usize = 1 << 16;

/// Size of the RIFF header hound writes in front of the data, at most (WAVE_FORMAT_EXTENSIBLE).
const MAX_HEADER_BYTES: u64 = 68;

/// Full scale of 24-bit codes: code `k` is the float `k / 2²³`.
const PCM24_SCALE: f32 = 8_388_608.0;

/// A float as a 24-bit code: `round(x · 2²³)` (halves away from zero), clamped to
/// [-8388608, 8388607]; the 24-bit twin of [`pcm16::to_i16`].
pub fn to_i24(x: f32) -> i32 {
    // x · 2²³ is exact in f32 (a power-of-two scale); `as` maps NaN to 0.
    ((x * PCM24_SCALE).round() as i32).clamp(-8_388_608, 8_388_607)
}

/// Write a mono audio file in the given format to exactly `path` (created or overwritten).
/// The caller picks the name (its extension from [`SampleFormat::extension`]): the runner
/// writes to a temporary name and renames.
///
/// Scales:
/// - 16-bit ([`SampleFormat::Pcm16`], [`SampleFormat::Flac16`]): `round(x * 32768)` (ties
///   away from zero), clamped to [-32768, 32767] ([`crate::dsp::pcm16`]): the decoder's
///   own scale, so a 16-bit input written back unchanged is bit-identical. -1.0 → -32768;
///   1.0 clips to 32767. A 16-bit FLAC holds exactly the codes of the 16-bit WAV.
/// - 24-bit ([`SampleFormat::Pcm24`], [`SampleFormat::Flac24`]): [`to_i24`].
/// - [`SampleFormat::Float32`]: the `f32` values unchanged (IEEE float WAV), no clipping.
///
/// # Errors
/// - [`AudioError::NotFinite`] for the first NaN or infinite sample; nothing is created.
/// - [`AudioError::Write`] for a zero sample rate, audio too long for a RIFF file (4 GiB),
///   or an encoder's refusal.
/// - [`AudioError::Io`] when the file system fails (a full disk among others), with its
///   error kind. A file left half-written by a writer failing after creating it is removed,
///   best effort.
pub fn write_audio(path: &Path, audio: &Audio, format: SampleFormat) -> Result<(), AudioError> {
    if let Some(index) = audio.first_non_finite() {
        return Err(AudioError::NotFinite {
            path: path.to_path_buf(),
            index,
        });
    }
    if audio.rate == 0 {
        return Err(AudioError::Write {
            path: path.to_path_buf(),
            reason: "sample rate is 0".to_string(),
        });
    }
    match format.spec().container {
        Container::Wav => write_wav(path, audio, format),
        Container::Flac => write_flac(path, audio, format),
    }
}

fn write_wav(path: &Path, audio: &Audio, format: SampleFormat) -> Result<(), AudioError> {
    let write_err = |reason: String| AudioError::Write {
        path: path.to_path_buf(),
        reason,
    };
    let spec = format.spec();
    let bits = spec.bits;
    let sample_format = if spec.float {
        hound::SampleFormat::Float
    } else {
        hound::SampleFormat::Int
    };
    let data_bytes = audio.samples.len() as u64 * u64::from(bits / 8);
    if data_bytes + MAX_HEADER_BYTES > u64::from(u32::MAX) {
        return Err(write_err(format!(
            "{} samples need {data_bytes} bytes, more than a RIFF file holds",
            audio.samples.len()
        )));
    }
    let wav = WavSpec {
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
    let mut writer = WavWriter::create(path, wav).map_err(hound_err)?;
    let written = match (bits, spec.float) {
        (16, false) => write_pcm16(&mut writer, &audio.samples),
        (_, false) => audio
            .samples
            .iter()
            .try_for_each(|&x| writer.write_sample(to_i24(x))),
        (_, true) => audio
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

/// FLAC with flacenc's default settings (its fixed block size), one thread: the encoder is
/// deterministic, so a take's FLAC file is the same bytes on every machine.
fn write_flac(path: &Path, audio: &Audio, format: SampleFormat) -> Result<(), AudioError> {
    let write_err = |reason: String| AudioError::Write {
        path: path.to_path_buf(),
        reason,
    };
    let bits = format.spec().bits;
    let codes: Vec<i32> = if bits == 16 {
        audio
            .samples
            .iter()
            .map(|&x| i32::from(pcm16::to_i16(x)))
            .collect()
    } else {
        audio.samples.iter().map(|&x| to_i24(x)).collect()
    };
    let config = flacenc::config::Encoder::default()
        .into_verified()
        .map_err(|(_, e)| write_err(format!("FLAC settings: {e}")))?;
    let source =
        flacenc::source::MemSource::from_samples(&codes, 1, usize::from(bits), audio.rate as usize);
    drop(codes);
    let mut stream = flacenc::encode_with_fixed_block_size(&config, source, config.block_size)
        .map_err(|e| write_err(format!("FLAC encoder: {e}")))?;
    // STREAMINFO's minimum block size excludes the last block (RFC 9639, 8.2); flacenc
    // counts the last, shorter one, and a stream whose minimum and maximum differ reads as
    // one of variable block size, which symphonia (our own decoder) then refuses.
    if stream.frame_count() > 1 {
        let max = stream.stream_info().max_block_size();
        stream
            .stream_info_mut()
            .set_block_sizes(max, max)
            .map_err(|e| write_err(format!("FLAC encoder: {e}")))?;
    }
    let mut sink = flacenc::bitsink::ByteSink::new();
    stream
        .write(&mut sink)
        .map_err(|e| write_err(format!("FLAC encoder: {e}")))?;
    std::fs::write(path, sink.as_slice()).map_err(|source| {
        let _ = std::fs::remove_file(path);
        AudioError::Io {
            path: path.to_path_buf(),
            source,
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_24_bit_scale_is_exact_on_its_grid_and_clamps() {
        for k in [-8_388_608, -1, 0, 1, 4_194_304, 8_388_607] {
            assert_eq!(to_i24(k as f32 / PCM24_SCALE), k);
        }
        assert_eq!(to_i24(1.0), 8_388_607);
        assert_eq!(to_i24(-1.5), -8_388_608);
        assert_eq!(to_i24(f32::NAN), 0);
    }
}
