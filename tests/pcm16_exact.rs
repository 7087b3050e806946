//! 16-bit output is bit-transparent: one PCM scale both ways (code k is k / 32768), checked
//! against libsndfile (python-soundfile reading our files as int16) and Python's `audioop`
//! (G.711 over every 16-bit value through the `channel` step).

mod common;

use std::path::Path;

use common::{read_jsonl, run_python, run_recipe};

/// A mono 16-bit WAV holding every 16-bit value once, in order from -32768 to 32767.
fn every_code_clip(dir: &Path, rate: u32) -> std::path::PathBuf {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: rate,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(dir.join("codes.wav"), spec).unwrap();
    for k in i16::MIN..=i16::MAX {
        w.write_sample(k).unwrap();
    }
    w.finalize().unwrap();
    let m = dir.join("in.jsonl");
    std::fs::write(
        &m,
        "{\"id\": \"codes\", \"audio\": \"codes.wav\", \"text\": \"every code\"}\n",
    )
    .unwrap();
    m
}

fn take_path(dir: &Path, k: u64) -> std::path::PathBuf {
    let takes = read_jsonl(&dir.join("out").join("manifest.jsonl"));
    let t = takes
        .iter()
        .find(|t| t["origin"]["take"].as_u64() == Some(k))
        .expect("take");
    dir.join("out").join(t["audio"].as_str().unwrap())
}

fn read_i16(path: &Path) -> Vec<i16> {
    let mut r = hound::WavReader::open(path).unwrap();
    assert_eq!(r.spec().bits_per_sample, 16);
    r.samples::<i16>().map(Result::unwrap).collect()
}

/// libsndfile (python-soundfile) reading a file as int16: how many samples differ from
/// the int16 codes in a second file (little-endian), and the first difference.
const SNDFILE_COMPARE: &str = r#"
import sys
import numpy as np, soundfile as sf
y, _ = sf.read(sys.argv[1], dtype="int16")
want = np.fromfile(sys.argv[2], dtype="<i2")
bad = np.flatnonzero(y != want) if len(y) == len(want) else [0]
print(len(y), len(bad), int(bad[0]) if len(bad) else -1)
"#;

/// libsndfile reads `path` as 65 536 int16 codes, every one equal to `reference`'s.
fn assert_all_codes_equal(path: &Path, reference: &Path, what: &str) {
    let out = run_python(
        SNDFILE_COMPARE,
        &[path.to_str().unwrap(), reference.to_str().unwrap()],
    );
    assert_eq!(out.trim(), "65536 0 -1", "{what}: frames, differing, first");
}

#[test]
fn every_16_bit_value_comes_back_identical_through_keep_source() {
    // Take 0 with keep_source at the clip's own rate is the clip: every one of the 65 536
    // codes must come back as itself (before the fix, written as round(x · 32767), 32 703
    // of them moved by one step). Read back twice: by hound, and by libsndfile as int16
    // (python-soundfile), against the intended codes.
    let tmp = tempfile::tempdir().unwrap();
    let m = every_code_clip(tmp.path(), 16_000);
    let recipe = "takes = 2\nkeep_source = true\n[[step]]\ndo = \"gain\"\ndb = 0\n";
    let (code, err, _) = run_recipe(tmp.path(), recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    let want: Vec<i16> = (i16::MIN..=i16::MAX).collect();
    let path = take_path(tmp.path(), 0);
    let got = read_i16(&path);
    let moved = got.iter().zip(&want).filter(|(a, b)| a != b).count();
    assert_eq!((got.len(), moved), (65_536, 0));

    let codes = tmp.path().join("want.i16");
    std::fs::write(
        &codes,
        want.iter()
            .flat_map(|k| k.to_le_bytes())
            .collect::<Vec<u8>>(),
    )
    .unwrap();
    assert_all_codes_equal(&path, &codes, "keep_source take 0");
}

/// Python 3.11 `audioop` (standard library), width 2: every 16-bit value through
/// lin2ulaw/ulaw2lin and lin2alaw/alaw2lin, written as little-endian int16 files; after
/// [`common::AUDIOOP_EVERY_PCM16`].
const AUDIOOP_ROUND_TRIPS: &str = r#"
open(sys.argv[1], "wb").write(audioop.ulaw2lin(audioop.lin2ulaw(data, 2), 2))
open(sys.argv[2], "wb").write(audioop.alaw2lin(audioop.lin2alaw(data, 2), 2))
"#;

#[test]
fn g711_through_the_channel_step_is_bit_exact_with_audioop() {
    // At rate 8000 the channel step's codec needs no resampling, so a 16-bit clip of every
    // code through `codec = "mulaw"` / `"alaw"` and 16-bit output must equal audioop's
    // round trip of the same codes exactly (before the fix the float → int16 scale was
    // 32767, and 33 036 mu-law values came back one segment step off). libsndfile reads
    // our file as int16 for the comparison.
    let tmp = tempfile::tempdir().unwrap();
    let m = every_code_clip(tmp.path(), 8_000);
    let (ulaw, alaw) = (tmp.path().join("ulaw.i16"), tmp.path().join("alaw.i16"));
    run_python(
        &format!("{}{AUDIOOP_ROUND_TRIPS}", common::AUDIOOP_EVERY_PCM16),
        &[ulaw.to_str().unwrap(), alaw.to_str().unwrap()],
    );
    for (codec, reference) in [("mulaw", &ulaw), ("alaw", &alaw)] {
        let recipe =
            format!("takes = 2\nrate = 8000\n[[step]]\ndo = \"channel\"\ncodec = \"{codec}\"\n");
        let (code, err, _) = run_recipe(tmp.path(), &recipe, &m);
        assert_eq!(code, Some(0), "{codec}: {err}");
        for k in [0, 1] {
            let path = take_path(tmp.path(), k);
            assert_all_codes_equal(&path, reference, &format!("{codec} take {k}"));
        }
    }
}
