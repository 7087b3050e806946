//! The output formats of the one format table: FLAC (16 and 24-bit) and 24-bit WAV beside
//! 16-bit WAV and float. Checked with libsndfile (python-soundfile 0.14.0 from PyPI, the
//! reference venv): a 16-bit FLAC take decodes to exactly the codes of the 16-bit WAV take,
//! a 24-bit FLAC to those of the 24-bit WAV, and the 24-bit codes lie within one 16-bit step
//! of the 16-bit ones (the same float, rounded on two grids). retake's own decoder reads its
//! FLAC takes back, and their STREAMINFO follows RFC 9639.

mod common;

use std::path::{Path, PathBuf};

use common::{demo, read_jsonl, retake, run_python};
use retake::audio::{self, ChannelPolicy};

const RECIPE: &str = "seed = 5\ntakes = 2\nkeep_source = true\nrate = 16000\nformat = \"FORMAT\"\n\n[[step]]\ndo = \"speed\"\nfactor = [0.9, 1.1]\n\n[[step]]\ndo = \"noise\"\nbank = \"NOISE\"\nsnr_db = { low = 5.0, high = 20.0 }\n\n[[step]]\ndo = \"gain\"\ndb = { low = -3.0, high = 3.0 }\n";

fn run_format(dir: &Path, format: &str) -> PathBuf {
    let recipe = dir.join(format!("{format}.toml"));
    let text = RECIPE
        .replace("FORMAT", format)
        .replace("NOISE", &demo().join("noise").display().to_string());
    std::fs::write(&recipe, text).unwrap();
    let out = dir.join(format);
    let o = run_demo(&recipe, &out);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{format}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    out
}

/// `retake run RECIPE` over the demo clips into `out`.
fn run_demo(recipe: &Path, out: &Path) -> std::process::Output {
    retake(&[
        "run",
        recipe.to_str().unwrap(),
        "-i",
        demo().join("manifest.jsonl").to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ])
}

/// Per take (paths relative to the folders given): the subtype libsndfile reports for each
/// file, and the largest difference between their integer codes.
const COMPARE: &str = r#"
import json, sys
import numpy as np, soundfile as sf
wav16, flac16, wav24, flac24 = sys.argv[1:5]
takes = [json.loads(l)["audio"] for l in open(wav16 + "/manifest.jsonl")]
worst = {"flac16": 0, "flac24": 0, "wav24_vs_16": 0}
subtypes = set()
frames = 0
for rel in takes:
    stem = rel.rsplit(".", 1)[0]
    a, _ = sf.read(f"{wav16}/{stem}.wav", dtype="int16")
    b, _ = sf.read(f"{flac16}/{stem}.flac", dtype="int16")
    c, _ = sf.read(f"{wav24}/{stem}.wav", dtype="int32")
    d, _ = sf.read(f"{flac24}/{stem}.flac", dtype="int32")
    for name, root, ext in (("w16", wav16, "wav"), ("f16", flac16, "flac"), ("w24", wav24, "wav"), ("f24", flac24, "flac")):
        i = sf.info(f"{root}/{stem}.{ext}")
        subtypes.add((name, i.format, i.subtype, i.samplerate, i.channels))
    assert a.shape == b.shape == c.shape == d.shape, rel
    frames += a.size
    worst["flac16"] = max(worst["flac16"], int(np.max(np.abs(a.astype(np.int64) - b))))
    worst["flac24"] = max(worst["flac24"], int(np.max(np.abs(c.astype(np.int64) - d))))
    # libsndfile reads 24-bit codes into the top of an int32: k24 << 8; to 16-bit steps: >> 16.
    worst["wav24_vs_16"] = max(worst["wav24_vs_16"], float(np.max(np.abs(c / 65536.0 - a))))
print(json.dumps({"takes": len(takes), "frames": frames, "worst": worst, "subtypes": sorted(subtypes)}))
"#;

fn bytes_of(dir: &Path) -> u64 {
    std::fs::read_dir(dir.join("takes"))
        .unwrap()
        .map(|e| e.unwrap().metadata().unwrap().len())
        .sum()
}

#[test]
fn flac_takes_decode_to_the_codes_of_the_wav_takes() {
    let tmp = tempfile::tempdir().unwrap();
    let [wav16, flac16, wav24, flac24] =
        ["pcm16", "flac16", "pcm24", "flac24"].map(|f| run_format(tmp.path(), f));
    let said = run_python(
        COMPARE,
        &[wav16, flac16.clone(), wav24, flac24.clone()]
            .iter()
            .map(|p| p.to_str().unwrap())
            .collect::<Vec<_>>(),
    );
    let v: serde_json::Value = serde_json::from_str(said.trim()).unwrap();
    assert_eq!(v["takes"], 20, "{said}");
    assert_eq!(v["worst"]["flac16"], 0, "FLAC 16 vs WAV 16 codes: {said}");
    assert_eq!(v["worst"]["flac24"], 0, "FLAC 24 vs WAV 24 codes: {said}");
    // Both round one float: at most half a 16-bit step apart, plus the 24-bit rounding.
    let apart = v["worst"]["wav24_vs_16"].as_f64().unwrap();
    assert!(
        apart <= 0.5 + 1.0 / 256.0,
        "24-bit vs 16-bit: {apart} steps: {said}"
    );
    let subtypes = v["subtypes"].to_string();
    for want in [
        r#"["f16","FLAC","PCM_16",16000,1]"#,
        r#"["f24","FLAC","PCM_24",16000,1]"#,
        r#"["w16","WAV","PCM_16",16000,1]"#,
        // hound writes WAVE_FORMAT_EXTENSIBLE past 16 bits (as Microsoft's WAVEFORMATEXTENSIBLE
        // note asks for more than 16 bits per sample): libsndfile calls that WAVEX.
        r#"["w24","WAVEX","PCM_24",16000,1]"#,
    ] {
        assert!(subtypes.contains(want), "{want} in {subtypes}");
    }
    let ratio = bytes_of(&flac16) as f64 / bytes_of(&tmp.path().join("pcm16")) as f64;
    eprintln!(
        "demo takes: FLAC 16 / WAV 16 size {ratio:.3}, FLAC 24 / WAV 24 size {:.3}",
        bytes_of(&flac24) as f64 / bytes_of(&tmp.path().join("pcm24")) as f64
    );
    // Lossless compression of noisy speech: smaller, never larger than the WAV.
    assert!(ratio < 1.0, "FLAC 16 / WAV 16 = {ratio}");

    // The labels do not depend on the container: the manifests differ only in extensions.
    let without_ext = |dir: &Path, ext: &str| -> Vec<serde_json::Value> {
        read_jsonl(&dir.join("manifest.jsonl"))
            .into_iter()
            .map(|mut t| {
                let audio = t["audio"].as_str().unwrap().to_string();
                let stem = audio.strip_suffix(ext).unwrap_or_else(|| panic!("{audio}"));
                t["audio"] = stem.into();
                t
            })
            .collect()
    };
    let (a, b) = (
        without_ext(&tmp.path().join("pcm16"), ".wav"),
        without_ext(&flac16, ".flac"),
    );
    assert!(a == b, "manifests differ beyond the take files' extensions");

    // Takes can go back in: retake's own decoder reads every FLAC take to the samples of the
    // WAV take of the same depth, and `check` passes the FLAC run's manifest.
    for (wav, flac) in [("pcm16", &flac16), ("pcm24", &flac24)] {
        for t in read_jsonl(&flac.join("manifest.jsonl")) {
            let rel = t["audio"].as_str().unwrap();
            let got = audio::decode(&flac.join(rel), ChannelPolicy::Mix)
                .unwrap_or_else(|e| panic!("{rel}: {e}"));
            let wav_rel = rel.replace(".flac", ".wav");
            let want =
                audio::decode(&tmp.path().join(wav).join(&wav_rel), ChannelPolicy::Mix).unwrap();
            assert_eq!(
                (got.rate, got.samples.len()),
                (want.rate, want.samples.len()),
                "{rel}"
            );
            assert!(
                got.samples == want.samples,
                "{rel}: samples differ from {wav_rel}"
            );
            // RFC 9639, 8.2: STREAMINFO's minimum block size excludes the last block, so a
            // stream of several fixed-size blocks states one block size twice.
            let bytes = std::fs::read(flac.join(rel)).unwrap();
            let (min, max) = (
                u16::from_be_bytes([bytes[8], bytes[9]]),
                u16::from_be_bytes([bytes[10], bytes[11]]),
            );
            if got.samples.len() > usize::from(max) {
                assert_eq!(min, max, "{rel}: STREAMINFO block sizes");
            }
        }
        let o = retake(&["check", flac.join("manifest.jsonl").to_str().unwrap()]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stdout));
    }
}

#[test]
fn a_rerun_keeps_whole_flac_takes_and_remakes_a_damaged_one() {
    let tmp = tempfile::tempdir().unwrap();
    let out = run_format(tmp.path(), "flac24");
    let take = out.join("takes/dock-001.t1.flac");
    let before = std::fs::read(&take).unwrap();
    // A header that no longer says the recorded length: the take is made again.
    let mut damaged = before.clone();
    damaged[21] ^= 0x01;
    std::fs::write(&take, &damaged).unwrap();
    // A file cut short behind a whole header: its last frame is gone, so it is made again.
    let cut = out.join("takes/pick-a-001.t0.flac");
    let whole = std::fs::read(&cut).unwrap();
    std::fs::write(&cut, &whole[..whole.len() - 10]).unwrap();
    let o = run_demo(&tmp.path().join("flac24.toml"), &out);
    let said = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{said}");
    assert!(said.contains("kept    8 clips (16 takes"), "{said}");
    assert_eq!(std::fs::read(&take).unwrap(), before);
    assert_eq!(std::fs::read(&cut).unwrap(), whole);
}
