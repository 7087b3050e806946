//! Decoding with symphonia 0.6 into one mono `f32` buffer.

use std::io::ErrorKind;
use std::path::{Path, PathBuf};

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
    let mut stream = Stream::open(path, channels)?;
    let reserve = stream
        .declared_frames()
        .unwrap_or(0)
        .min(MAX_RESERVED_FRAMES) as usize;
    let mut samples = Vec::with_capacity(reserve);
    while stream.read_into(&mut samples)? {}
    Ok(Audio {
        rate: stream.rate()?,
        samples,
    })
}

/// What one pass over a file found, without keeping its samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Scan {
    /// Samples per second.
    pub rate: u32,
    /// Frames decoded (the file's length, checked against its header).
    pub frames: u64,
    /// Index of the first sample that is NaN or infinite, if any.
    pub first_non_finite: Option<u64>,
}

impl Scan {
    /// What a scan of the file would have found, for audio already decoded.
    pub fn of(audio: &Audio) -> Self {
        Scan {
            rate: audio.rate,
            frames: audio.samples.len() as u64,
            first_non_finite: audio.first_non_finite().map(|i| i as u64),
        }
    }

    /// Length in seconds.
    pub fn duration(&self) -> f64 {
        self.frames as f64 / f64::from(self.rate)
    }
}

/// Decode a whole file as [`decode`] does, but keep only its length and whether every
/// sample is finite: memory stays at one packet however long the recording.
///
/// # Errors
/// As [`decode`].
pub fn scan(path: &Path, channels: ChannelPolicy) -> Result<Scan, AudioError> {
    let mut stream = Stream::open(path, channels)?;
    let (mut frames, mut first_non_finite, mut buf) = (0u64, None, Vec::new());
    while stream.read_into(&mut buf)? {
        if first_non_finite.is_none() {
            first_non_finite = super::first_non_finite(&buf).map(|i| frames + i as u64);
        }
        frames += buf.len() as u64;
        buf.clear();
    }
    Ok(Scan {
        rate: stream.rate()?,
        frames,
        first_non_finite,
    })
}

/// A file decoded packet by packet, for callers that must not hold a long recording whole
/// (`slice`). Same formats, channel policy and checks as [`decode`], which is built on it: the
/// length check against the header happens when the stream ends.
pub struct Stream {
    path: PathBuf,
    format: Box<dyn FormatReader>,
    decoder: Box<dyn AudioDecoder>,
    track_id: u32,
    declared: Option<u64>,
    /// Rate from the codec parameters, replaced by the first packet's.
    rate: Option<u32>,
    sink: MonoSink,
    found: u64,
    ended: bool,
}

impl std::fmt::Debug for Stream {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Stream")
            .field("path", &self.path)
            .field("declared", &self.declared)
            .field("found", &self.found)
            .finish_non_exhaustive()
    }
}

impl Stream {
    /// Open `path` and find its audio track.
    ///
    /// # Errors
    /// As [`decode`], for everything that can be known before the first packet.
    pub fn open(path: &Path, channels: ChannelPolicy) -> Result<Self, AudioError> {
        let io_err = |source| AudioError::Io {
            path: path.to_path_buf(),
            source,
        };
        let file = crate::input_file::open(path).map_err(io_err)?;
        let mss = MediaSourceStream::new(Box::new(file), Default::default());

        let mut hint = Hint::new();
        if let Some(ext) = path.extension().and_then(|e| e.to_str()) {
            hint.with_extension(ext);
        }
        let format = symphonia::default::get_probe()
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

        let decoder = symphonia::default::get_codecs()
            .make_audio_decoder(&params, &AudioDecoderOptions::default())
            .map_err(|e| decode_err(path, e.to_string()))?;
        Ok(Stream {
            path: path.to_path_buf(),
            format,
            decoder,
            track_id,
            declared,
            rate: params.sample_rate.filter(|&r| r > 0),
            sink: MonoSink::new(channels),
            found: 0,
            ended: false,
        })
    }

    /// The length in frames the header declares, when it is exact (WAV, FLAC, Ogg, MP3 with
    /// a LAME tag); the stream is checked against it when it ends.
    pub fn declared_frames(&self) -> Option<u64> {
        self.declared
    }

    /// The sample rate.
    ///
    /// # Errors
    /// Neither the header nor a decoded packet gave one.
    pub fn rate(&self) -> Result<u32, AudioError> {
        self.sink
            .rate
            .or(self.rate)
            .filter(|&r| r > 0)
            .ok_or_else(|| decode_err(&self.path, "no sample rate in the stream".to_string()))
    }

    /// Append the next packet's frames (one channel, by the policy) to `out`. Returns
    /// `false` once the stream has ended and its length checked; nothing is appended then.
    ///
    /// # Errors
    /// As [`decode`]: a read or decode failure, or a stream shorter than its header says.
    pub fn read_into(&mut self, out: &mut Vec<f32>) -> Result<bool, AudioError> {
        while !self.ended {
            let packet = match self.format.next_packet() {
                Ok(Some(packet)) => packet,
                Ok(None) => return self.end(false),
                Err(SymError::IoError(e)) if e.kind() == ErrorKind::UnexpectedEof => {
                    return self.end(true);
                }
                Err(SymError::IoError(source)) => {
                    return Err(AudioError::Io {
                        path: self.path.clone(),
                        source,
                    });
                }
                Err(e) => {
                    return Err(decode_err(
                        &self.path,
                        format!("after {} frames: {e}", self.found),
                    ));
                }
            };
            if packet.track_id != self.track_id {
                continue;
            }
            let buf = self.decoder.decode(&packet).map_err(|e| {
                decode_err(
                    &self.path,
                    format!("packet after {} frames: {e}", self.found),
                )
            })?;
            let before = out.len();
            self.sink.push(&self.path, &buf, out)?;
            self.found += (out.len() - before) as u64;
            if out.len() > before {
                return Ok(true);
            }
        }
        Ok(false)
    }

    /// The stream is over: check its length. `inside_packet` when the demuxer hit end of
    /// file in the middle of a packet.
    fn end(&mut self, inside_packet: bool) -> Result<bool, AudioError> {
        self.ended = true;
        match self.declared {
            Some(declared) if self.found < declared => Err(AudioError::Truncated {
                path: self.path.clone(),
                declared,
                found: self.found,
            }),
            _ if inside_packet => Err(decode_err(
                &self.path,
                format!("stream ends inside a packet after {} frames", self.found),
            )),
            _ => Ok(false),
        }
    }
}

/// Turns decoded buffers into one channel, by the channel policy.
struct MonoSink {
    policy: ChannelPolicy,
    rate: Option<u32>,
    /// Interleaved copy of a multichannel packet, reused across packets.
    scratch: Vec<f32>,
}

impl MonoSink {
    fn new(policy: ChannelPolicy) -> Self {
        MonoSink {
            policy,
            rate: None,
            scratch: Vec::new(),
        }
    }

    fn push(
        &mut self,
        path: &Path,
        buf: &symphonia::core::audio::GenericAudioBufferRef<'_>,
        out: &mut Vec<f32>,
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
                    path,
                    format!("sample rate changes from {r} to {} mid-stream", spec.rate()),
                ));
            }
            Some(_) => {}
        }
        let n = spec.channels().count();
        if n == 0 {
            return Err(decode_err(
                path,
                "decoded audio has no channels".to_string(),
            ));
        }
        if let ChannelPolicy::Pick(wanted) = self.policy
            && wanted >= n
        {
            return Err(AudioError::NoSuchChannel {
                path: path.to_path_buf(),
                wanted,
                channels: n,
            });
        }
        if n == 1 {
            let start = out.len();
            out.resize(start + frames, 0.0);
            buf.copy_to_slice_interleaved(&mut out[start..]);
            return Ok(());
        }
        buf.copy_to_vec_interleaved(&mut self.scratch);
        match self.policy {
            ChannelPolicy::Mix => {
                let n_f = n as f32;
                out.extend(
                    self.scratch
                        .chunks_exact(n)
                        .map(|frame| frame.iter().sum::<f32>() / n_f),
                );
            }
            ChannelPolicy::Pick(k) => {
                out.extend(self.scratch.chunks_exact(n).map(|frame| frame[k]));
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
        // The probe found no container it knows: say so in the user's terms.
        SymError::Unsupported(_) => decode_err(
            path,
            "not an audio format retake reads (WAV, FLAC, MP3, Ogg Vorbis, ...)".to_string(),
        ),
        other => decode_err(path, other.to_string()),
    }
}
