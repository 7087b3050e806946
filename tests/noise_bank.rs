//! Loading noise banks from small folders made on the spot: categories, order, hidden
//! names, resampling, skipped files, every error, the held-out split and thread-count
//! independence.

mod common;

use std::path::Path;

use retake::noise::{BankError, NoiseBank, is_held_out, load_bank};

/// A 16-bit PCM WAV with `channels` interleaved channels.
fn write_wav(path: &Path, rate: u32, channels: u16, interleaved: &[f32]) {
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    let spec = hound::WavSpec {
        channels,
        sample_rate: rate,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for &s in interleaved {
        w.write_sample((s * 32768.0).round() as i16).unwrap();
    }
    w.finalize().unwrap();
}

fn tone(rate: u32, secs: f64) -> Vec<f32> {
    common::sine(440.0, secs, rate, 0.5)
}

fn rel_paths(b: &NoiseBank) -> Vec<&str> {
    b.files.iter().map(|f| f.rel_path.as_str()).collect()
}

#[test]
fn categories_order_and_hidden_names() {
    let dir = tempfile::tempdir().unwrap();
    let r = dir.path();
    let x = tone(16_000, 0.25);
    write_wav(&r.join("fans/zz.wav"), 16_000, 1, &x);
    write_wav(&r.join("fans/sub/deep.wav"), 16_000, 1, &x);
    write_wav(&r.join("beeper/b.wav"), 16_000, 1, &x);
    write_wav(&r.join("top.wav"), 16_000, 1, &x);
    // Hidden files and folders are not part of the bank, not even as skipped.
    write_wav(&r.join(".hidden.wav"), 16_000, 1, &x);
    write_wav(&r.join(".cache/c.wav"), 16_000, 1, &x);
    std::fs::write(r.join("fans/.DS_Store"), b"junk").unwrap();

    let b = load_bank(r, 16_000, 0.0).unwrap();
    assert_eq!(
        rel_paths(&b),
        [
            "beeper/b.wav",
            "fans/sub/deep.wav",
            "fans/zz.wav",
            "top.wav"
        ]
    );
    let cats: Vec<&str> = b.files.iter().map(|f| f.category.as_str()).collect();
    assert_eq!(cats, ["beeper", "fans", "fans", "."]);
    assert_eq!(b.categories(), [".", "beeper", "fans"]);
    assert!(b.skipped.is_empty(), "{:?}", b.skipped);
    assert_eq!(b.rate, 16_000);
    assert_eq!(b.root, r);
    // Same rate: the samples are the file's 16-bit values, which the decoder scales by
    // 1 / 32768 (symphonia's PCM convention, documented on `audio::decode`).
    let expected: Vec<f32> = x
        .iter()
        .map(|&s| (s * 32768.0).round().min(32767.0) / 32768.0)
        .collect();
    for f in &b.files {
        assert_eq!(f.samples, expected, "{}", f.rel_path);
    }
}

#[test]
fn files_come_out_at_the_bank_rate() {
    let dir = tempfile::tempdir().unwrap();
    let r = dir.path();
    // 1 s at 22.05 kHz -> 16000 samples at 16 kHz; 0.5 s at 48 kHz stereo -> 8000.
    write_wav(&r.join("a/slow.wav"), 22_050, 1, &tone(22_050, 1.0));
    let left = tone(48_000, 0.5);
    let stereo: Vec<f32> = left.iter().flat_map(|&s| [s, 0.0]).collect();
    write_wav(&r.join("b/stereo.wav"), 48_000, 2, &stereo);

    let b = load_bank(r, 16_000, 0.0).unwrap();
    assert_eq!(rel_paths(&b), ["a/slow.wav", "b/stereo.wav"]);
    assert_eq!(b.files[0].samples.len(), 16_000);
    assert_eq!(b.files[1].samples.len(), 8_000);
    // Level kept through the resampler (away from the edges): a sine of amplitude A has
    // RMS A / sqrt(2) (textbook identity). Stereo is mixed as the mean, so the right
    // channel's silence halves the amplitude: 0.5 -> 0.25.
    let rms = |x: &[f32]| {
        (x.iter().map(|&s| f64::from(s) * f64::from(s)).sum::<f64>() / x.len() as f64).sqrt()
    };
    let a = rms(&b.files[0].samples[1000..15_000]);
    let s = rms(&b.files[1].samples[1000..7_000]);
    assert!((a - 0.5 / 2f64.sqrt()).abs() < 0.005, "{a}");
    assert!((s - 0.25 / 2f64.sqrt()).abs() < 0.003, "{s}");
    // The pitch stays: 440 Hz has 440 zero-crossing pairs per second.
    let crossings = b.files[0].samples[..16_000]
        .windows(2)
        .filter(|w| w[0] < 0.0 && w[1] >= 0.0)
        .count();
    assert!((439..=441).contains(&crossings), "{crossings}");
}

#[test]
fn undecodable_and_empty_files_are_skipped_with_a_reason() {
    let dir = tempfile::tempdir().unwrap();
    let r = dir.path();
    write_wav(&r.join("fans/good.wav"), 16_000, 1, &tone(16_000, 0.2));
    write_wav(&r.join("fans/empty.wav"), 16_000, 1, &[]);
    std::fs::write(r.join("fans/notes.txt"), "recorded at dock 4, 2 pm\n").unwrap();
    std::fs::write(r.join("broken.wav"), b"RIFF\x10\x00\x00\x00WAVEjunk").unwrap();

    let b = load_bank(r, 16_000, 0.0).unwrap();
    assert_eq!(rel_paths(&b), ["fans/good.wav"]);
    let skipped: Vec<&str> = b.skipped.iter().map(|(p, _)| p.as_str()).collect();
    assert_eq!(skipped, ["broken.wav", "fans/empty.wav", "fans/notes.txt"]);
    assert_eq!(b.skipped[1].1, "holds no samples");
    for (p, why) in &b.skipped {
        assert!(!why.is_empty(), "{p}");
        // The reason does not repeat the path; the path is beside it.
        assert!(!why.contains(r.to_str().unwrap()), "{p}: {why}");
    }
}

#[test]
fn a_file_shorter_than_one_sample_at_the_bank_rate_is_skipped() {
    let dir = tempfile::tempdir().unwrap();
    let r = dir.path();
    // One sample at 48 kHz is round(1/3) = 0 samples at 16 kHz.
    write_wav(&r.join("tick.wav"), 48_000, 1, &[0.5]);
    write_wav(&r.join("ok.wav"), 48_000, 1, &tone(48_000, 0.1));
    let b = load_bank(r, 16_000, 0.0).unwrap();
    assert_eq!(rel_paths(&b), ["ok.wav"]);
    assert_eq!(b.skipped.len(), 1);
    assert!(b.skipped[0].1.contains("too short"), "{:?}", b.skipped);
}

#[test]
fn every_error_names_the_folder() {
    let dir = tempfile::tempdir().unwrap();

    let missing = dir.path().join("no-such-bank");
    let e = load_bank(&missing, 16_000, 0.0).unwrap_err();
    assert!(matches!(e, BankError::Missing(_)), "{e:?}");
    assert_eq!(
        e.to_string(),
        format!("{}: no such folder", missing.display())
    );

    // A file where a folder should be.
    let file = dir.path().join("plain.wav");
    write_wav(&file, 16_000, 1, &tone(16_000, 0.1));
    let e = load_bank(&file, 16_000, 0.0).unwrap_err();
    assert!(matches!(e, BankError::Missing(_)), "{e:?}");
    assert!(e.to_string().contains(file.to_str().unwrap()), "{e}");

    // Only hidden files and an empty subfolder: nothing to load.
    let empty = dir.path().join("empty");
    std::fs::create_dir_all(empty.join("fans")).unwrap();
    std::fs::write(empty.join(".keep"), "").unwrap();
    let e = load_bank(&empty, 16_000, 0.0).unwrap_err();
    assert!(matches!(e, BankError::Empty(_)), "{e:?}");
    assert_eq!(
        e.to_string(),
        format!("{}: the noise bank holds no files", empty.display())
    );

    // Files, none usable: the count and the first file's problem.
    let bad = dir.path().join("bad");
    std::fs::create_dir_all(bad.join("x")).unwrap();
    std::fs::write(bad.join("a.txt"), "not audio").unwrap();
    write_wav(&bad.join("x/b.wav"), 16_000, 1, &[]);
    let e = load_bank(&bad, 16_000, 0.0).unwrap_err();
    match &e {
        BankError::NothingUsable { path, count, first } => {
            assert_eq!(path, &bad);
            assert_eq!(*count, 2);
            assert!(first.starts_with("a.txt: "), "{first}");
        }
        other => panic!("expected NothingUsable, got {other:?}"),
    }
    let msg = e.to_string();
    assert!(
        msg.starts_with(&format!("{}: none of the 2 files", bad.display())),
        "{msg}"
    );
}

/// 40 tiny files over three categories.
fn many_files(r: &Path) {
    let x = tone(16_000, 0.05);
    for i in 0..40 {
        let cat = ["beeper", "compressor", "fans"][i % 3];
        write_wav(&r.join(format!("{cat}/n{i:02}.wav")), 16_000, 1, &x);
    }
}

#[test]
fn held_out_part_follows_the_path_hash() {
    let dir = tempfile::tempdir().unwrap();
    many_files(dir.path());
    let b = load_bank(dir.path(), 16_000, 0.3).unwrap();
    for f in &b.files {
        assert_eq!(f.held_out, is_held_out(&f.rel_path, 0.3), "{}", f.rel_path);
    }
    let held = b.part(true).len();
    assert_eq!(held + b.part(false).len(), 40);
    // Binomial(40, 0.3): mean 12, standard deviation 2.9 (textbook formula); 3.5 sd.
    assert!((2..=22).contains(&held), "{held} of 40 held out");
    assert_eq!(load_bank(dir.path(), 16_000, 0.3).unwrap(), b);

    let none = load_bank(dir.path(), 16_000, 0.0).unwrap();
    assert!(none.files.iter().all(|f| !f.held_out));
    let all = load_bank(dir.path(), 16_000, 1.0).unwrap();
    assert!(all.files.iter().all(|f| f.held_out));
}

#[test]
fn result_does_not_depend_on_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    many_files(dir.path());
    // Some resampled, some skipped, so every path through the loader is exercised.
    write_wav(
        &dir.path().join("fans/slow.wav"),
        22_050,
        1,
        &tone(22_050, 0.3),
    );
    std::fs::write(dir.path().join("fans/readme.md"), "#").unwrap();
    let load = |threads| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| load_bank(dir.path(), 16_000, 0.5).unwrap())
    };
    let one = load(1);
    assert_eq!(one.files.len(), 41);
    assert_eq!(one.skipped.len(), 1);
    assert_eq!(load(4), one);
    assert_eq!(load(16), one);
}
