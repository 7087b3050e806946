//! Audio in and out against libsndfile, through `soundfile` (PyPI, pinned in
//! `tests/reference/requirements.txt`; its wheel bundles libsndfile 1.2.2 with FLAC, Vorbis and
//! LAME/mpg123). Files written by libsndfile must decode to the signal that went in; files we
//! write must read back in libsndfile with the spec and values we meant.

mod common;

use std::path::{Path, PathBuf};

use retake::audio::{Audio, AudioError, ChannelPolicy, SampleFormat, decode, write_audio};

/// Writes the interleaved f64 signal in argv[1] (`rate`, `channels`) once per
/// `path|FORMAT|SUBTYPE` argument with libsndfile, then reads each file back with libsndfile
/// as float64 into `path.ref` (interleaved), so tests can compare against libsndfile's own
/// decoding too.
const WRITE_WITH_LIBSNDFILE: &str = r#"
import sys, numpy as np, soundfile as sf
src, rate, ch = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
x = np.fromfile(src, '<f8').reshape(-1, ch)
for spec in sys.argv[4:]:
    path, fmt, sub = spec.split('|')
    sf.write(path, x, rate, format=fmt, subtype=sub)
    y, _ = sf.read(path, dtype='float64', always_2d=True)
    y.astype('<f8').tofile(path + '.ref')
"#;

/// Prints `rate frames channels subtype format` of argv[1] and dumps its samples as float64
/// (libsndfile reads integer PCM as code / 2^(bits-1)).
const READ_WITH_LIBSNDFILE: &str = r#"
import sys, numpy as np, soundfile as sf
info = sf.info(sys.argv[1])
y, _ = sf.read(sys.argv[1], dtype='float64', always_2d=True)
y.astype('<f8').tofile(sys.argv[2])
print(info.samplerate, info.frames, info.channels, info.subtype, info.format)
"#;

/// Write `interleaved` (frames × `channels`) with libsndfile in each `(name, format,
/// subtype)`; return the paths.
fn libsndfile_write(
    dir: &Path,
    interleaved: &[f64],
    rate: u32,
    channels: usize,
    files: &[(&str, &str, &str)],
) -> Vec<PathBuf> {
    let src = dir.join("signal.f64");
    common::write_f64(&src, interleaved);
    let paths: Vec<PathBuf> = files.iter().map(|(name, _, _)| dir.join(name)).collect();
    let specs: Vec<String> = files
        .iter()
        .zip(&paths)
        .map(|((_, format, subtype), p)| format!("{}|{format}|{subtype}", p.display()))
        .collect();
    let mut args = vec![
        src.to_str().unwrap().to_string(),
        rate.to_string(),
        channels.to_string(),
    ];
    args.extend(specs);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    common::run_python(WRITE_WITH_LIBSNDFILE, &args);
    paths
}

/// libsndfile's own decoding of a file written by [`libsndfile_write`] (interleaved).
fn libsndfile_decoding(path: &Path) -> Vec<f64> {
    let mut name = path.as_os_str().to_owned();
    name.push(".ref");
    common::read_f64(Path::new(&name))
}

/// What libsndfile reports about a file, and its samples (interleaved, float64).
struct Readback {
    rate: u32,
    frames: usize,
    channels: usize,
    subtype: String,
    format: String,
    samples: Vec<f64>,
}

fn libsndfile_read(path: &Path) -> Readback {
    let out = path.with_extension("readback.f64");
    let line = common::run_python(
        READ_WITH_LIBSNDFILE,
        &[path.to_str().unwrap(), out.to_str().unwrap()],
    );
    let f: Vec<&str> = line.split_whitespace().collect();
    Readback {
        rate: f[0].parse().unwrap(),
        frames: f[1].parse().unwrap(),
        channels: f[2].parse().unwrap(),
        subtype: f[3].to_string(),
        format: f[4].to_string(),
        samples: common::read_f64(&out),
    }
}

fn max_abs_diff(a: &[f32], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len(), "lengths differ");
    a.iter()
        .zip(b)
        .map(|(&x, &y)| (f64::from(x) - y).abs())
        .fold(0.0, f64::max)
}

/// Frequency of a clean sine from its upward zero crossings (linearly interpolated).
fn sine_frequency(x: &[f32], rate: u32) -> f64 {
    let ups: Vec<f64> = x
        .windows(2)
        .enumerate()
        .filter(|(_, w)| w[0] < 0.0 && w[1] >= 0.0)
        .map(|(i, w)| i as f64 + f64::from(w[0]) / f64::from(w[0] - w[1]))
        .collect();
    assert!(ups.len() > 10, "too few zero crossings: {}", ups.len());
    let periods = (ups.len() - 1) as f64;
    periods * f64::from(rate) / (ups[ups.len() - 1] - ups[0])
}

fn rms_db(x: &[f32]) -> f64 {
    let ms = x.iter().map(|&v| f64::from(v) * f64::from(v)).sum::<f64>() / x.len() as f64;
    10.0 * ms.log10()
}

/// The lag (in frames, within ±`max_lag`) at which `y` best matches `x`: y[n] ≈ x[n - lag].
fn best_lag(x: &[f64], y: &[f32], max_lag: i64) -> i64 {
    let n = x.len().min(y.len()) as i64;
    let corr = |lag: i64| -> f64 {
        (max_lag..n - max_lag)
            .map(|i| x[(i - lag) as usize] * f64::from(y[i as usize]))
            .sum()
    };
    let scores: Vec<(i64, f64)> = (-max_lag..=max_lag).map(|lag| (lag, corr(lag))).collect();
    scores.iter().max_by(|a, b| a.1.total_cmp(&b.1)).unwrap().0
}

fn sine64(freq: f64, secs: f64, rate: u32, amp: f64) -> Vec<f64> {
    common::sine(freq, secs, rate, amp)
        .into_iter()
        .map(f64::from)
        .collect()
}

#[test]
fn wav_int_and_float_from_libsndfile_decode_to_the_signal_within_one_step() {
    let dir = tempfile::tempdir().unwrap();
    let rate = 16_000;
    // Amplitude 0.5: libsndfile writes float as round(x * (2^(b-1) - 1)) and integer PCM
    // reads back as code / 2^(b-1), so the error is at most half a step for rounding plus
    // |x| / 2^(b-1) for the scale: at most one step for |x| <= 0.5.
    let x = sine64(440.0, 0.25, rate, 0.5);
    let cases = [
        ("u8.wav", "WAV", "PCM_U8", 8),
        ("s16.wav", "WAV", "PCM_16", 16),
        ("s24.wav", "WAV", "PCM_24", 24),
        ("s32.wav", "WAV", "PCM_32", 32),
        ("s24x.wav", "WAVEX", "PCM_24", 24),
        ("f32.wav", "WAV", "FLOAT", 0),
    ];
    let files: Vec<_> = cases.iter().map(|&(n, f, s, _)| (n, f, s)).collect();
    let paths = libsndfile_write(dir.path(), &x, rate, 1, &files);
    for (path, &(name, _, _, bits)) in paths.iter().zip(&cases) {
        let audio = decode(path, ChannelPolicy::Mix).unwrap();
        assert_eq!(audio.rate, rate, "{name}");
        assert_eq!(audio.samples.len(), x.len(), "{name}: frame count");
        // f32 holds 24 significant bits: 32-bit codes lose up to half an f32 ulp (2^-26 at
        // |x| < 0.5); 2^-24 covers it.
        let f32_rounding = 2f64.powi(-24);
        let step = if bits == 0 { 0.0 } else { 2f64.powi(1 - bits) };
        let err = max_abs_diff(&audio.samples, &x);
        let tol = if bits == 0 {
            f64::from(f32::EPSILON) / 4.0
        } else {
            step + f32_rounding
        };
        assert!(
            err <= tol,
            "{name}: max error {err:e} > {tol:e} (step {step:e})"
        );
        // And the same values libsndfile itself decodes: same scale, same sign, same order.
        let reference = libsndfile_decoding(path);
        let err = max_abs_diff(&audio.samples, &reference);
        assert!(
            err <= f32_rounding,
            "{name}: differs from libsndfile's decoding by {err:e}"
        );
    }
}

#[test]
fn wav_multichannel_mix_is_the_mean_and_pick_takes_one_channel() {
    let dir = tempfile::tempdir().unwrap();
    let rate = 8_000;
    let chans = [
        sine64(300.0, 0.2, rate, 0.5),
        sine64(1000.0, 0.2, rate, 0.3),
        sine64(50.0, 0.2, rate, 0.9),
    ];
    let frames = chans[0].len();
    let stereo: Vec<f64> = (0..frames)
        .flat_map(|i| [chans[0][i], chans[1][i]])
        .collect();
    let three: Vec<f64> = (0..frames)
        .flat_map(|i| [chans[0][i], chans[1][i], chans[2][i]])
        .collect();
    // 32-bit float WAV: libsndfile stores the f32 of each value, so comparisons are exact up
    // to f32 rounding.
    let stereo_path =
        &libsndfile_write(dir.path(), &stereo, rate, 2, &[("st.wav", "WAV", "FLOAT")])[0];
    let three_path = &libsndfile_write(
        dir.path(),
        &three,
        rate,
        3,
        &[("three.wav", "WAV", "FLOAT")],
    )[0];
    let tol = 1e-7; // below half an f32 ulp at 1.0 (6e-8) plus one rounding of the mean

    let left = decode(stereo_path, ChannelPolicy::Pick(0)).unwrap();
    let right = decode(stereo_path, ChannelPolicy::Pick(1)).unwrap();
    let mix = decode(stereo_path, ChannelPolicy::Mix).unwrap();
    assert!(max_abs_diff(&left.samples, &chans[0]) <= tol);
    assert!(max_abs_diff(&right.samples, &chans[1]) <= tol);
    let mean2: Vec<f64> = (0..frames)
        .map(|i| (chans[0][i] + chans[1][i]) / 2.0)
        .collect();
    assert!(max_abs_diff(&mix.samples, &mean2) <= tol);
    // The right channel is not the left one: Pick really chooses.
    assert!(max_abs_diff(&right.samples, &chans[0]) > 0.1);

    let mix3 = decode(three_path, ChannelPolicy::Mix).unwrap();
    let mean3: Vec<f64> = (0..frames)
        .map(|i| (chans[0][i] + chans[1][i] + chans[2][i]) / 3.0)
        .collect();
    assert!(max_abs_diff(&mix3.samples, &mean3) <= 2.0 * tol);
    let third = decode(three_path, ChannelPolicy::Pick(2)).unwrap();
    assert!(max_abs_diff(&third.samples, &chans[2]) <= tol);

    match decode(stereo_path, ChannelPolicy::Pick(2)) {
        Err(AudioError::NoSuchChannel {
            path,
            wanted: 2,
            channels: 2,
        }) => {
            assert_eq!(&path, stereo_path)
        }
        other => panic!("expected NoSuchChannel, got {other:?}"),
    }
}

#[test]
fn flac_from_libsndfile_decodes_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let rate = 22_050;
    // Not a multiple of FLAC's 4096-frame block, so the short last block is exercised.
    let x = sine64(440.0, 0.7, rate, 0.5);
    let files = [
        ("s16.flac", "FLAC", "PCM_16"),
        ("s24.flac", "FLAC", "PCM_24"),
    ];
    let paths = libsndfile_write(dir.path(), &x, rate, 1, &files);
    for (path, (name, _, _)) in paths.iter().zip(files) {
        let audio = decode(path, ChannelPolicy::Mix).unwrap();
        assert_eq!(audio.rate, rate, "{name}");
        assert_eq!(
            audio.samples.len(),
            x.len(),
            "{name}: FLAC is lossless, length is exact"
        );
        // Lossless: bit-identical to libsndfile's decoding (libFLAC) up to f32 rounding.
        let err = max_abs_diff(&audio.samples, &libsndfile_decoding(path));
        assert!(
            err <= 2f64.powi(-24),
            "{name}: differs from libFLAC by {err:e}"
        );
        let err = max_abs_diff(&audio.samples, &x);
        assert!(
            err <= 2f64.powi(-15),
            "{name}: more than one 16-bit step off the signal"
        );
    }
}

/// A 440 Hz, 0.5-amplitude tone gated on from 0.1 s to 0.9 s of a 1 s signal: the silent
/// ends make its position unambiguous (a steady sine matches itself every period).
fn gated_tone(rate: u32) -> Vec<f64> {
    let mut x = sine64(440.0, 1.0, rate, 0.5);
    let tenth = (rate / 10) as usize;
    let n = x.len();
    x[..tenth].fill(0.0);
    x[n - tenth..].fill(0.0);
    x
}

/// What a lossy round trip must keep of [`gated_tone`].
fn check_lossy(path: &Path, x: &[f64], rate: u32, what: &str) {
    let audio = decode(path, ChannelPolicy::Mix).unwrap();
    assert_eq!(audio.rate, rate, "{what}: rate");
    // Length tolerance 0: both formats carry the exact length (Ogg: the last page's granule
    // position; MP3: the LAME tag libsndfile writes, with encoder delay and padding), and
    // symphonia trims delay and padding by default.
    assert_eq!(audio.samples.len(), x.len(), "{what}: length");
    // Alignment: with delay trimmed the tone sits where it was (lag 0 within ±600 frames;
    // untrimmed, MP3 would sit 1105 frames late and Vorbis 128 to 1024).
    assert_eq!(
        best_lag(x, &audio.samples, 600),
        0,
        "{what}: delay not trimmed exactly"
    );
    // Steady part of the tone only: codecs smear onsets over a few milliseconds.
    let (from, to) = ((rate as usize) * 3 / 20, (rate as usize) * 17 / 20);
    let tone = &audio.samples[from..to];
    // Pitch within 0.1 Hz (0.02 %): coding noise ~40 dB down barely moves zero crossings
    // (observed: within 0.003 Hz).
    let f = sine_frequency(tone, rate);
    assert!((f - 440.0).abs() < 0.1, "{what}: frequency {f} Hz");
    // Level within 0.2 dB of the source's RMS (0.5 / sqrt 2 = -9.03 dBFS): coding error
    // 30 dB down can move the level by at most 0.28 dB, and is ~40 dB down in practice.
    let want = 20.0 * (0.5 / 2f64.sqrt()).log10();
    let got = rms_db(tone);
    assert!(
        (got - want).abs() < 0.2,
        "{what}: level {got:.2} dB, want {want:.2} dB"
    );
    // Waveform: at least 30 dB signal-to-error against the aligned source (observed 38 to
    // 48 dB at libsndfile's default quality; a frame of misalignment drops it below 10 dB).
    let err: f64 = tone
        .iter()
        .zip(&x[from..to])
        .map(|(&y, &s)| (f64::from(y) - s).powi(2))
        .sum();
    let sig: f64 = x[from..to].iter().map(|s| s * s).sum();
    let snr = 10.0 * (sig / err).log10();
    assert!(snr > 30.0, "{what}: signal-to-error {snr:.1} dB");
}

#[test]
fn ogg_vorbis_from_libsndfile_keeps_rate_length_pitch_and_level() {
    let dir = tempfile::tempdir().unwrap();
    for rate in [16_000, 44_100] {
        let x = gated_tone(rate);
        let name = format!("tone{rate}.ogg");
        let path = &libsndfile_write(dir.path(), &x, rate, 1, &[(&name, "OGG", "VORBIS")])[0];
        check_lossy(path, &x, rate, &name);
        // Two decoders of one bitstream (symphonia, libvorbis via libsndfile) agree to float
        // rounding: Vorbis decoding is fully specified (observed max difference 3e-7).
        let audio = decode(path, ChannelPolicy::Mix).unwrap();
        let err = max_abs_diff(&audio.samples, &libsndfile_decoding(path));
        assert!(err < 1e-5, "{name}: differs from libvorbis by {err:e}");
    }
}

#[test]
fn mp3_from_libsndfile_keeps_rate_length_pitch_and_level() {
    let dir = tempfile::tempdir().unwrap();
    // 16 kHz is MPEG-2 Layer III (576-frame granules), 44.1 kHz is MPEG-1 (1152).
    for rate in [16_000, 44_100] {
        let x = gated_tone(rate);
        let name = format!("tone{rate}.mp3");
        let path =
            &libsndfile_write(dir.path(), &x, rate, 1, &[(&name, "MP3", "MPEG_LAYER_III")])[0];
        check_lossy(path, &x, rate, &name);
        // mpg123 (through libsndfile) decodes the same frames. The MP3 standard lets decoders
        // differ slightly in precision; these two agree to 7e-7, the bound leaves 10x room.
        let audio = decode(path, ChannelPolicy::Mix).unwrap();
        let err = max_abs_diff(&audio.samples, &libsndfile_decoding(path));
        assert!(err < 1e-5, "{name}: differs from mpg123 by {err:e}");
    }
}

#[test]
fn written_pcm16_reads_back_in_libsndfile_with_the_documented_scale() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("out.wav");
    let mut samples = vec![
        -1.5f32,
        -1.0,
        -0.5,
        0.0,
        0.4 / 32768.0,
        0.6 / 32768.0,
        0.5,
        1.0,
        1.2,
    ];
    samples.extend(common::sine(440.0, 0.1, 16_000, 0.7));
    let audio = Audio {
        rate: 16_000,
        samples,
    };
    write_audio(&path, &audio, SampleFormat::Pcm16).unwrap();

    let back = libsndfile_read(&path);
    assert_eq!(back.format, "WAV");
    assert_eq!(back.subtype, "PCM_16");
    assert_eq!(
        (back.rate, back.channels, back.frames),
        (16_000, 1, audio.samples.len())
    );
    // libsndfile reads PCM_16 as code / 32768, so code = value * 32768 exactly.
    let codes: Vec<i32> = back.samples.iter().map(|v| (v * 32768.0) as i32).collect();
    assert_eq!(
        &codes[..9],
        &[-32768, -32768, -16384, 0, 0, 1, 16384, 32767, 32767]
    );
    for (i, (&x, &code)) in audio.samples.iter().zip(&codes).enumerate() {
        // The documented scale: round(x · 32768), clamped (libsndfile's reading scale).
        let want = (f64::from(x) * 32768.0).round().clamp(-32768.0, 32767.0) as i32;
        assert_eq!(code, want, "sample {i} ({x})");
    }
}

#[test]
fn written_float32_reads_back_in_libsndfile_unchanged() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("out.wav");
    let mut samples = vec![-1.5f32, -1.0, 1e-30, 0.0, 1.0, 2.5];
    samples.extend(common::sine(1000.0, 0.1, 48_000, 0.9));
    let audio = Audio {
        rate: 48_000,
        samples,
    };
    write_audio(&path, &audio, SampleFormat::Float32).unwrap();

    let back = libsndfile_read(&path);
    // hound writes float WAV with the extensible header, which libsndfile names WAVEX.
    assert!(
        ["WAV", "WAVEX"].contains(&back.format.as_str()),
        "format {}",
        back.format
    );
    assert_eq!(back.subtype, "FLOAT");
    assert_eq!(
        (back.rate, back.channels, back.frames),
        (48_000, 1, audio.samples.len())
    );
    for (i, (&x, &y)) in audio.samples.iter().zip(&back.samples).enumerate() {
        assert_eq!(
            f64::from(x),
            y,
            "sample {i}: float WAV must not scale or clip"
        );
    }
    // And our own decoder reads our file back bit for bit.
    assert_eq!(decode(&path, ChannelPolicy::Mix).unwrap(), audio);
}

#[test]
fn empty_audio_writes_and_decodes_as_empty() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("empty.wav");
    let audio = Audio {
        rate: 16_000,
        samples: vec![],
    };
    write_audio(&path, &audio, SampleFormat::Pcm16).unwrap();
    let back = libsndfile_read(&path);
    assert_eq!((back.rate, back.frames), (16_000, 0));
    assert_eq!(decode(&path, ChannelPolicy::Mix).unwrap(), audio);
}

fn assert_names_path(e: &AudioError, path: &Path) {
    let msg = e.to_string();
    assert!(
        msg.contains(path.to_str().unwrap()),
        "message lacks the path: {msg}"
    );
}

#[test]
fn missing_file_is_an_io_error_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nowhere.wav");
    let e = decode(&path, ChannelPolicy::Mix).unwrap_err();
    match &e {
        AudioError::Io { path: p, source } => {
            assert_eq!(p, &path);
            assert_eq!(source.kind(), std::io::ErrorKind::NotFound);
        }
        other => panic!("expected Io, got {other:?}"),
    }
    assert_names_path(&e, &path);
}

#[test]
fn garbage_and_empty_files_are_decode_errors_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let garbage = dir.path().join("garbage.wav");
    std::fs::write(
        &garbage,
        (0..4096u32)
            .map(|i| (i * 7 % 251) as u8)
            .collect::<Vec<_>>(),
    )
    .unwrap();
    let empty = dir.path().join("empty.mp3");
    std::fs::write(&empty, b"").unwrap();
    // A RIFF header that promises WAVE data and stops.
    let stub = dir.path().join("stub.wav");
    std::fs::write(&stub, b"RIFF\x24\x00\x00\x00WAVEfmt ").unwrap();
    for path in [garbage, empty, stub] {
        let e = decode(&path, ChannelPolicy::Mix).unwrap_err();
        assert!(
            matches!(e, AudioError::Decode { .. }),
            "{}: got {e:?}",
            path.display()
        );
        assert_names_path(&e, &path);
    }
}

#[test]
fn wav_chopped_at_the_end_is_truncated_with_both_counts() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole.wav");
    let audio = Audio {
        rate: 16_000,
        samples: common::sine(440.0, 1.0, 16_000, 0.5),
    };
    write_audio(&whole, &audio, SampleFormat::Pcm16).unwrap();
    let bytes = std::fs::read(&whole).unwrap();
    // Chop 1001 bytes: 500.5 frames of 16-bit mono, so 500 whole frames are gone and one
    // frame is cut in half.
    let chopped = dir.path().join("chopped.wav");
    std::fs::write(&chopped, &bytes[..bytes.len() - 1001]).unwrap();

    let e = decode(&chopped, ChannelPolicy::Mix).unwrap_err();
    match &e {
        AudioError::Truncated {
            path,
            declared,
            found,
        } => {
            assert_eq!(path, &chopped);
            assert_eq!(*declared, 16_000);
            assert_eq!(*found, 16_000 - 501);
        }
        other => panic!("expected Truncated, got {other:?}"),
    }
    assert_names_path(&e, &chopped);
}

#[test]
fn chopped_flac_and_mp3_are_truncated_and_chopped_ogg_is_undecodable() {
    let dir = tempfile::tempdir().unwrap();
    let rate = 16_000;
    let x = sine64(440.0, 1.0, rate, 0.5);
    let files = [
        ("t.flac", "FLAC", "PCM_16"),
        ("t.mp3", "MP3", "MPEG_LAYER_III"),
        ("t.ogg", "OGG", "VORBIS"),
    ];
    let paths = libsndfile_write(dir.path(), &x, rate, 1, &files);
    for path in &paths {
        let bytes = std::fs::read(path).unwrap();
        let cut = path.with_file_name(format!(
            "cut-{}",
            path.file_name().unwrap().to_str().unwrap()
        ));
        std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
        let e = decode(&cut, ChannelPolicy::Mix).unwrap_err();
        assert_names_path(&e, &cut);
        match (&e, cut.extension().unwrap().to_str().unwrap()) {
            // FLAC's STREAMINFO and MP3's LAME tag declare the length.
            (
                AudioError::Truncated {
                    declared, found, ..
                },
                "flac" | "mp3",
            ) => {
                assert_eq!(*declared, 16_000);
                assert!(*found < 12_000, "{}: found {found}", cut.display());
            }
            // The Ogg demuxer reads the last page while opening; a cut file has none.
            (AudioError::Decode { .. }, "ogg") => {}
            _ => panic!("{}: unexpected {e:?}", cut.display()),
        }
    }
}

#[test]
fn a_non_finite_sample_is_refused_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    for (bad, format) in [
        (f32::NAN, SampleFormat::Pcm16),
        (f32::INFINITY, SampleFormat::Float32),
        (f32::NEG_INFINITY, SampleFormat::Pcm16),
    ] {
        let path = dir.path().join(format!("bad-{format:?}-{bad}.wav"));
        let mut samples = vec![0.25f32; 100];
        samples[37] = bad;
        samples[80] = f32::NAN; // only the first bad index is reported
        let e = write_audio(
            &path,
            &Audio {
                rate: 16_000,
                samples,
            },
            format,
        )
        .unwrap_err();
        match &e {
            AudioError::NotFinite { path: p, index: 37 } => assert_eq!(p, &path),
            other => panic!("expected NotFinite at 37, got {other:?}"),
        }
        assert_names_path(&e, &path);
        assert!(!path.exists(), "{} was created", path.display());
    }
}
