//! Decoding with symphonia 0.6 into one mono `f32` buffer.

use std::fs::File;
use std::io::ErrorKind;
use std::path::Path;

use symphonia::core::codecs::audio::{AudioDecoder, AudioDecoderOptions};
use symphonia::core::errors::Error as SymError;
use symphonia::core::formats::probe::Hint;
use symphonia::core::formats::well_known::{FORMAT_ID_MP1, FORMAT_ID_MP2, FORMAT_ID_MP3};
use symphonia::core::formats::{FormatOptions, FormatReader, Track, TrackType};
use symphonia::core::io::MediaSourceStream;
use symphonia::core::meta::MetadataOptions;

use super::{Audio, AudioError, ChannelPolicy};

/// Most frames reserved up front from a header's declared length (2^24 frames, 64 MiB of
/// `f32`, about 5.8 minutes at 48 kHz). A longer file still decodes (the buffer grows); the
/// cap only stops a lying header from reserving gigabytes before a single frame is read.
const MAX_RESERVED_FRAMES: u64 = 1 << 24;

/// Decode a file (WAV PCM 8/16/24/32 and float, FLAC, MP3, Ogg Vorbis) to one channel.
///
/// The file's extension is passed to symphonia as a hint; the content decides the format.
/// Integer PCM is scaled by symphonia as `s / 2^(bits-1)` (unsigned 8-bit: `(s - 128) / 128`),
/// so full-scale negative is exactly -1.0 and full-scale positive is `1 - 2^-(bits-1)`.
///
/// Channels are reduced by `channels`: [`ChannelPolicy::Mix`] averages all channels frame by
/// frame; [`ChannelPolicy::Pick`] keeps one, counted in symphonia's canonical order (speaker
/// position order). For WAV, FLAC, MP3 and mono/stereo Vorbis that is the order in the file;
/// Vorbis with three or more channels stores centre second, symphonia moves it after right.
///
/// Encoder delay and padding: symphonia 0.6 decodes gaplessly by default. The container or
/// stream tells the demuxer how many leading (delay) and trailing (padding) frames the encoder
/// added, the demuxer marks them on each packet, and the decoder trims them. In practice:
/// - MP3 with a LAME tag (libsndfile writes one): the trimmed delay is the tag's encoder delay
///   plus the 529-frame decoder delay (1105 frames for LAME's usual 576), and the tag's
///   padding is trimmed from the end, so the output has the source's exact length and
///   alignment. Without the tag (per symphonia's source; not exercised by our tests) nothing
///   is trimmed: the output starts 529 + encoder-delay frames late and keeps the padding.
/// - Ogg Vorbis: the granule positions fix the length exactly; the first packet (which only
///   primes the overlap-add) yields nothing and the last page's padding is trimmed.
/// - FLAC and WAV have no delay.
///
/// Zero-length audio decodes to empty samples; callers decide whether that is acceptable.
///
/// # Errors
/// - [`AudioError::Io`]: the file cannot be opened or a read fails (other than ending early).
/// - [`AudioError::Decode`]: no known format, no audio track, a packet that does not decode,
///   or a stream that ends early when its length was never declared.
/// - [`AudioError::Truncated`]: the stream ends before the length its header declares, with
///   the frames that were present. WAV: the data chunk's size declares the length; a cut file
///   gives one short packet (the whole frames left) and then a read past end of file. FLAC:
///   STREAMINFO declares it; the demuxer stops at the last whole FLAC frame with end of file.
///   MP1/2/3: the demuxer ends quietly at a cut frame, so only the length from a LAME tag is
///   trusted (without one it is estimated from the bitrate, and a cut MP3 then decodes as a
///   short one). Ogg is never reported truncated: its demuxer reads the last page while
///   opening, so a cut Ogg file fails there as [`AudioError::Decode`].
/// - [`AudioError::NoSuchChannel`]: [`ChannelPolicy::Pick`] beyond the file's channels.
///
/// No partial audio is ever returned.
pub fn decode(path: &Path, channels: ChannelPolicy) -> Result<Audio, AudioError> {
    let io_err = |source| AudioError::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = File::open(path).map_err(io_err)?;
    let mss = MediaSourceStream::new(Box::new(file), Default::default());

    let mut hint = Hint::new();
    if let Some(ext) = path.extension().and_then(|e| e.to_str()) {
        hint.with_extension(ext);
    }
    let mut format = symphonia::default::get_probe()
        .probe(
            &hint,
            mss,
            FormatOptions::default(),
            MetadataOptions::default(),
        )
        .map_err(|e| opening_error(path, e))?;

    let track = format
        .default_track(TrackType::Audio)
        .ok_or_else(|| decode_err(path, "no audio track".to_string()))?;
    let track_id = track.id;
    let declared = trusted_frame_count(format.as_ref(), track);
    let params = track
        .codec_params
        .as_ref()
        .and_then(|p| p.audio())
        .ok_or_else(|| decode_err(path, "audio track without codec parameters".to_string()))?
        .clone();

    if let (ChannelPolicy::Pick(wanted), Some(layout)) = (channels, &params.channels) {
        let count = layout.count();
        if wanted >= count {
            return Err(AudioError::NoSuchChannel {
                path: path.to_path_buf(),
                wanted,
                channels: count,
            });
        }
    }

    let mut decoder = symphonia::default::get_codecs()
        .make_audio_decoder(&params, &AudioDecoderOptions::default())
        .map_err(|e| decode_err(path, e.to_string()))?;

    let reserve = declared.unwrap_or(0).min(MAX_RESERVED_FRAMES) as usize;
    let mut sink = MonoSink::new(path, channels, reserve);
    let ended_early = pump(path, format.as_mut(), decoder.as_mut(), track_id, &mut sink)?;

    let found = sink.samples.len() as u64;
    match declared {
        Some(declared) if found < declared => {
            return Err(AudioError::Truncated {
                path: path.to_path_buf(),
                declared,
                found,
            });
        }
        _ if ended_early => {
            return Err(decode_err(
                path,
                format!("stream ends inside a packet after {found} frames"),
            ));
        }
        _ => {}
    }

    let rate = sink
        .rate
        .or(params.sample_rate)
        .filter(|&r| r > 0)
        .ok_or_else(|| decode_err(path, "no sample rate in the stream".to_string()))?;
    Ok(Audio {
        rate,
        samples: sink.samples,
    })
}

/// Read and decode every packet of `track_id` into `sink`. Returns `true` when the demuxer hit
/// end of file inside a packet (the caller decides between truncated and undecodable).
fn pump(
    path: &Path,
    format: &mut dyn FormatReader,
    decoder: &mut dyn AudioDecoder,
    track_id: u32,
    sink: &mut MonoSink<'_>,
) -> Result<bool, AudioError> {
    loop {
        let packet = match format.next_packet() {
            Ok(Some(packet)) => packet,
            Ok(None) => return Ok(false),
            Err(SymError::IoError(e)) if e.kind() == ErrorKind::UnexpectedEof => return Ok(true),
            Err(SymError::IoError(source)) => {
                return Err(AudioError::Io {
                    path: path.to_path_buf(),
                    source,
                });
            }
            Err(e) => {
                return Err(decode_err(
                    path,
                    format!("after {} frames: {e}", sink.samples.len()),
                ));
            }
        };
        if packet.track_id != track_id {
            continue;
        }
        let buf = decoder.decode(&packet).map_err(|e| {
            decode_err(
                path,
                format!("packet after {} frames: {e}", sink.samples.len()),
            )
        })?;
        sink.push(&buf)?;
    }
}

/// Collects decoded buffers into one mono `Vec`, by the channel policy.
struct MonoSink<'p> {
    path: &'p Path,
    policy: ChannelPolicy,
    rate: Option<u32>,
    samples: Vec<f32>,
    /// Interleaved copy of a multichannel packet, reused across packets.
    scratch: Vec<f32>,
}

impl<'p> MonoSink<'p> {
    fn new(path: &'p Path, policy: ChannelPolicy, reserve: usize) -> Self {
        MonoSink {
            path,
            policy,
            rate: None,
            samples: Vec::with_capacity(reserve),
            scratch: Vec::new(),
        }
    }

    fn push(
        &mut self,
        buf: &symphonia::core::audio::GenericAudioBufferRef<'_>,
    ) -> Result<(), AudioError> {
        let frames = buf.frames();
        if frames == 0 {
            return Ok(());
        }
        let spec = buf.spec();
        match self.rate {
            None => self.rate = Some(spec.rate()),
            Some(r) if r != spec.rate() => {
                return Err(decode_err(
                    self.path,
                    format!("sample rate changes from {r} to {} mid-stream", spec.rate()),
                ));
            }
            Some(_) => {}
        }
        let n = spec.channels().count();
        if n == 0 {
            return Err(decode_err(
                self.path,
                "decoded audio has no channels".to_string(),
            ));
        }
        if let ChannelPolicy::Pick(wanted) = self.policy {
            if wanted >= n {
                return Err(AudioError::NoSuchChannel {
                    path: self.path.to_path_buf(),
                    wanted,
                    channels: n,
                });
            }
        }
        if n == 1 {
            let start = self.samples.len();
            self.samples.resize(start + frames, 0.0);
            buf.copy_to_slice_interleaved(&mut self.samples[start..]);
            return Ok(());
        }
        buf.copy_to_vec_interleaved(&mut self.scratch);
        match self.policy {
            ChannelPolicy::Mix => {
                let n_f = n as f32;
                self.samples.extend(
                    self.scratch
                        .chunks_exact(n)
                        .map(|frame| frame.iter().sum::<f32>() / n_f),
                );
            }
            ChannelPolicy::Pick(k) => {
                self.samples
                    .extend(self.scratch.chunks_exact(n).map(|frame| frame[k]));
            }
        }
        Ok(())
    }
}

/// The track's declared length in frames, when it is exact rather than an estimate.
fn trusted_frame_count(format: &dyn FormatReader, track: &Track) -> Option<u64> {
    let id = format.format_info().format;
    let mpeg = id == FORMAT_ID_MP1 || id == FORMAT_ID_MP2 || id == FORMAT_ID_MP3;
    if mpeg && track.delay.is_none() {
        return None;
    }
    track.num_frames
}

fn decode_err(path: &Path, reason: String) -> AudioError {
    AudioError::Decode {
        path: path.to_path_buf(),
        reason,
    }
}

/// Errors while probing: a short or unknown file is undecodable, not an I/O failure.
fn opening_error(path: &Path, e: SymError) -> AudioError {
    match e {
        SymError::IoError(source) if source.kind() != ErrorKind::UnexpectedEof => AudioError::Io {
            path: path.to_path_buf(),
            source,
        },
        other => decode_err(path, other.to_string()),
    }
}
