//! `retake slice` end to end on a long session built from the demo (tests/common/session.rs)
//! and on small made-up clips: limits, words kept whole and in place, samples equal to the
//! source's (read back by soundfile), word energy inside the rewritten timings, left-out
//! stretches, rejects, output formats and thread-count independence.

mod common;

use std::path::Path;

use common::session::{self, RATE, Session};
use common::{files_under, outside_minus_inside_db, read_jsonl, retake, run_python};
use retake::audio::{self, ChannelPolicy};
use serde_json::Value;

/// Run `retake slice` on `manifest` into `out` with extra options; (exit code, stdout).
fn slice(manifest: &Path, out: &Path, options: &[&str]) -> (Option<i32>, String) {
    let mut args = vec![
        "slice",
        manifest.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(options);
    let o = retake(&args);
    assert!(
        o.status.code().is_some_and(|c| c == 0 || c == 3),
        "retake slice failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stdout).to_string(),
    )
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// Words of a slice record as (start, end, text), in its own timeline.
fn slice_words(c: &Value) -> Vec<(f64, f64, String)> {
    c["lines"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|l| l["words"].as_array().cloned().unwrap_or_default())
        .map(|w| {
            (
                f(&w["start"]),
                f(&w["end"]),
                w["text"].as_str().unwrap().into(),
            )
        })
        .collect()
}

/// Everything a slice of the session must satisfy, for limits `shortest..=longest`.
/// `float`: the slices were written as float WAV (samples must be equal), else 16-bit PCM
/// (WAV, or FLAC when `ext` is `flac`).
fn check_session_slices(
    s: &Session,
    out: &Path,
    (shortest, longest): (f64, f64),
    float: bool,
    ext: &str,
) {
    let slices = read_jsonl(&out.join("manifest.jsonl"));
    let source_words = s.words();
    // Every word is in a slice and no slice is longer than `longest`.
    let word_time: f64 = source_words.iter().map(|w| w.1 - w.0).sum();
    assert!(word_time > 60.0);
    assert!(
        slices.len() as f64 >= word_time / longest,
        "only {} slices",
        slices.len()
    );
    let mut words_back = Vec::new();
    let mut split_lines = 0;
    for (k, c) in slices.iter().enumerate() {
        assert_eq!(c["id"], format!("fjellvik-night-shift.c{k}"));
        assert_eq!(
            c["audio"],
            format!("slices/fjellvik-night-shift.c{k}.{ext}")
        );
        assert_eq!(c["site"], "fjellvik-cold-store");
        assert_eq!(c["shift"], "night");
        let (d, from, to) = (
            f(&c["duration"]),
            f(&c["slice"]["start"]),
            f(&c["slice"]["end"]),
        );
        assert_eq!(c["slice"]["source"], "fjellvik-night-shift");
        assert_eq!(c["slice"]["audio"], "session.wav");
        assert!(
            d >= shortest - 1e-9 && d <= longest + 1e-9,
            "slice {k}: {d} s outside {shortest}..{longest}"
        );
        assert!((to - from - d).abs() < 1e-9);
        for t in [from, to] {
            let n = t * f64::from(RATE);
            assert!(
                (n - n.round()).abs() < 1e-6,
                "slice {k}: {t} s is not on a sample"
            );
        }
        for line in c["lines"].as_array().unwrap() {
            let (ls, le) = (f(&line["start"]), f(&line["end"]));
            assert!(
                0.0 <= ls && ls <= le && le <= d,
                "slice {k}: line {ls}..{le} of {d}"
            );
            let words = line["words"].as_array().unwrap();
            for w in words {
                let (ws, we) = (f(&w["start"]), f(&w["end"]));
                assert!(
                    ls <= ws && ws <= we && we <= le,
                    "slice {k}: word outside its line"
                );
            }
            let joined: Vec<&str> = words.iter().map(|w| w["text"].as_str().unwrap()).collect();
            let from_clip = line["from"].as_str().expect("line fields are kept");
            assert!(line["speaker"].is_string() && line["round"].is_u64());
            let whole =
                s.clip.lines.as_ref().unwrap().iter().any(|l| {
                    l.text == line["text"].as_str().unwrap() && l.words.len() == words.len()
                });
            if !whole {
                // A part of a split line: its text is its words' texts.
                assert_eq!(line["text"], joined.join(" "), "slice {k} ({from_clip})");
                split_lines += 1;
            }
        }
        for (ws, we, text) in slice_words(c) {
            words_back.push((ws + from, we + from, text));
        }
    }

    // Every word of the session, once, in order, at its own time.
    assert_eq!(words_back.len(), source_words.len());
    let (mut sum_in, mut sum_out) = (0.0, 0.0);
    for (got, want) in words_back.iter().zip(&source_words) {
        assert_eq!(got.2, want.2);
        assert!((got.0 - want.0).abs() < 1e-9 && (got.1 - want.1).abs() < 1e-9);
        sum_in += want.1 - want.0;
        sum_out += got.1 - got.0;
    }
    // Total word time kept, within 1 ms per word (the brief's tolerance).
    assert!((sum_in - sum_out).abs() < 1e-3 * source_words.len() as f64);

    // Slices in order and apart.
    for w in slices.windows(2) {
        assert!(f(&w[0]["slice"]["end"]) <= f(&w[1]["slice"]["start"]) + 1e-12);
    }

    samples_match_the_session(s, out, &slices, float);
    energy_lies_inside_words(s, out, &slices);
    if longest < 3.0 {
        assert!(split_lines >= 4, "only {split_lines} split lines");
    }
}

/// Each slice's samples equal the session's from its `slice.start`, read by soundfile.
/// Reference: soundfile (libsndfile) reading both files; numpy compares. Float slices must be
/// equal; 16-bit slices hold round(x · 32768) (the scale documented on retake's writer, the
/// one libsndfile reads with), so within half a step. Control: one sample later the match must fail.
fn samples_match_the_session(s: &Session, out: &Path, slices: &[Value], float: bool) {
    let list: Vec<Value> = slices
        .iter()
        .map(|c| {
            serde_json::json!({
                "path": out.join(c["audio"].as_str().unwrap()),
                "start": f(&c["slice"]["start"]),
                "duration": f(&c["duration"]),
            })
        })
        .collect();
    let list_path = out.join("check-list.json");
    std::fs::write(&list_path, serde_json::to_string(&list).unwrap()).unwrap();
    let code = r#"
import json, sys
import numpy as np, soundfile as sf
x, sr = sf.read(sys.argv[1], dtype="float64")
pcm = sys.argv[3] == "pcm"
rows = []
for c in json.load(open(sys.argv[2])):
    y, r = sf.read(c["path"], dtype="int16" if pcm else "float64")
    y = y.astype(np.float64)
    start = int(round(c["start"] * sr))
    scale = 32768.0 if pcm else 1.0
    ref = x[start:start + len(y)] * scale
    later = x[start + 1:start + 1 + len(y)] * scale
    n = min(len(later), len(y))
    rows.append([r, len(y), int(round(c["duration"] * sr)), len(ref),
                 float(np.max(np.abs(y - ref))) if len(ref) == len(y) else 1e9,
                 float(np.max(np.abs(y[:n] - later[:n])))])
print(json.dumps(rows))
"#;
    let mode = if float { "float" } else { "pcm" };
    let rows: Vec<Vec<f64>> = serde_json::from_str(&run_python(
        code,
        &[s.audio.to_str().unwrap(), list_path.to_str().unwrap(), mode],
    ))
    .unwrap();
    std::fs::remove_file(list_path).unwrap();
    for (k, row) in rows.iter().enumerate() {
        assert_eq!(row[0], f64::from(RATE), "slice {k}: rate");
        assert_eq!(row[1], row[2], "slice {k}: length vs duration");
        assert_eq!(row[1], row[3], "slice {k}: runs past the session");
        if float {
            assert_eq!(row[4], 0.0, "slice {k}: samples differ from the session");
        } else {
            assert!(
                row[4] <= 0.5,
                "slice {k}: {} steps from the session",
                row[4]
            );
        }
        // One sample late, speech-bearing audio differs by far more than rounding.
        assert!(
            row[5] > 50.0 * if float { 1.0 / 32768.0 } else { 1.0 },
            "slice {k}: {row:?}"
        );
    }
}

/// Each word is at least 12 dB above the 40 ms around it in the slice (the threshold and the
/// method of tests/demo_alignment.rs; the words are the demo's synthesis ground truth).
/// Control: the session's own timings, not rewritten, fail on most words of the same audio.
fn energy_lies_inside_words(s: &Session, out: &Path, slices: &[Value]) {
    let (mut checked, mut stale_failures) = (0, 0);
    for c in slices {
        let a = audio::decode(&out.join(c["audio"].as_str().unwrap()), ChannelPolicy::Mix).unwrap();
        let words: Vec<(f64, f64)> = slice_words(c).iter().map(|w| (w.0, w.1)).collect();
        for (i, db) in outside_minus_inside_db(&a.samples, a.rate, &words)
            .into_iter()
            .enumerate()
        {
            assert!(
                db < -12.0,
                "{} word {i}: outside only {db:.1} dB below",
                c["id"]
            );
            checked += 1;
        }
        let from = f(&c["slice"]["start"]);
        let stale: Vec<(f64, f64)> = words.iter().map(|w| (w.0 + from, w.1 + from)).collect();
        stale_failures += outside_minus_inside_db(&a.samples, a.rate, &stale)
            .into_iter()
            .filter(|&db| db >= -12.0)
            .count();
    }
    assert_eq!(checked, s.words().len());
    assert!(
        stale_failures * 2 >= checked,
        "control too weak: {stale_failures}/{checked}"
    );
}

#[test]
fn a_long_session_is_sliced_within_the_limits_with_every_word_kept_in_place() {
    let tmp = tempfile::tempdir().unwrap();
    let s = session::build(tmp.path(), 180.0);
    assert!(s.samples as f64 / f64::from(RATE) >= 180.0);
    let out = tmp.path().join("out");
    let (code, stdout) = slice(&s.manifest, &out, &[]);
    assert_eq!(code, Some(0), "{stdout}");
    assert_eq!(
        std::fs::read_to_string(out.join("left_out.jsonl")).unwrap(),
        ""
    );
    assert_eq!(
        std::fs::read_to_string(out.join("rejects.jsonl")).unwrap(),
        ""
    );
    assert!(stdout.contains("1 clips in"), "{stdout}");
    check_session_slices(&s, &out, (2.0, 15.0), false, "wav");
    // The output is a manifest like any other: `retake check` finds nothing wrong with it
    // (labels inside each slice, `duration` within 1 ms of the audio).
    let manifest = out.join("manifest.jsonl");
    let o = retake(&["check", manifest.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn tight_limits_split_lines_between_words_and_float_slices_equal_the_source() {
    let tmp = tempfile::tempdir().unwrap();
    let s = session::build(tmp.path(), 180.0);
    let out = tmp.path().join("out");
    let options = [
        "--shortest",
        "1",
        "--longest",
        "2.5",
        "--pad",
        "0.05..0.3",
        "--seed",
        "9",
        "--format",
        "float32",
    ];
    let (code, stdout) = slice(&s.manifest, &out, &options);
    assert_eq!(code, Some(0), "{stdout}");
    check_session_slices(&s, &out, (1.0, 2.5), true, "wav");
}

/// Slices go through the output-format table as takes do: `--format flac16` writes `.flac`
/// files that libsndfile (through soundfile, from PyPI) decodes to the session's samples as
/// 16-bit PCM, and the manifest is a 16-bit WAV run's but for the extension.
#[test]
fn flac_slices_decode_to_the_sixteen_bit_samples() {
    let tmp = tempfile::tempdir().unwrap();
    let s = session::build(tmp.path(), 180.0);
    let (flac, wav) = (tmp.path().join("flac"), tmp.path().join("wav"));
    let options = ["--longest", "9", "--seed", "4"];
    let (code, stdout) = slice(
        &s.manifest,
        &flac,
        &[&options[..], &["--format", "flac16"]].concat(),
    );
    assert_eq!(code, Some(0), "{stdout}");
    slice(&s.manifest, &wav, &options);
    let slices = read_jsonl(&flac.join("manifest.jsonl"));
    assert!(slices.len() >= 10, "{} slices", slices.len());
    for c in &slices {
        let audio = c["audio"].as_str().unwrap();
        assert!(
            audio.starts_with("slices/") && audio.ends_with(".flac"),
            "{audio}"
        );
        assert!(flac.join(audio).is_file(), "{audio}");
    }
    let as_wav: Vec<String> = std::fs::read_to_string(flac.join("manifest.jsonl"))
        .unwrap()
        .lines()
        .map(|l| l.replace(".flac\"", ".wav\""))
        .collect();
    let wav_lines: Vec<String> = std::fs::read_to_string(wav.join("manifest.jsonl"))
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect();
    assert_eq!(as_wav, wav_lines);
    check_session_slices(&s, &flac, (2.0, 9.0), false, "flac");
}

#[test]
fn output_is_the_same_byte_for_byte_on_one_or_two_threads() {
    let tmp = tempfile::tempdir().unwrap();
    let s = session::build(tmp.path(), 180.0);
    // A second clip so that two workers have something to share.
    let mut text = std::fs::read_to_string(&s.manifest).unwrap();
    text.push_str(&text.replace("fjellvik-night-shift", "fjellvik-day-shift"));
    std::fs::write(&s.manifest, text).unwrap();
    let options = ["--pad", "0.05..0.4", "--seed", "3", "--longest", "9"];
    let (one, two) = (tmp.path().join("one"), tmp.path().join("two"));
    slice(&s.manifest, &one, &[&options[..], &["-j", "1"]].concat());
    slice(&s.manifest, &two, &[&options[..], &["-j", "2"]].concat());
    let (a, b) = (files_under(&one), files_under(&two));
    assert!(a.len() > 20, "{} files", a.len());
    assert_eq!(
        a.iter().map(|f| &f.0).collect::<Vec<_>>(),
        b.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    for (x, y) in a.iter().zip(&b) {
        assert!(x.1 == y.1, "{} differs", x.0);
    }
    // The drawn pads do vary: the silence before the first word differs among slices.
    let leads: Vec<f64> = read_jsonl(&one.join("manifest.jsonl"))
        .iter()
        .map(|c| f(&c["lines"][0]["start"]))
        .collect();
    let spread = leads.iter().cloned().fold(f64::NEG_INFINITY, f64::max)
        - leads.iter().cloned().fold(f64::INFINITY, f64::min);
    assert!(spread > 0.1, "pads do not vary: {leads:?}");
}

/// Room tone with 300 Hz bursts standing in for speech over `spans` (seconds).
fn bursts(rate: u32, secs: f64, spans: &[(f64, f64)]) -> Vec<f32> {
    let tone = common::noise((secs * f64::from(rate)) as usize, 5);
    tone.iter()
        .enumerate()
        .map(|(i, &n)| {
            let t = i as f64 / f64::from(rate);
            let on = spans.iter().any(|&(a, b)| a <= t && t < b);
            let s = if on {
                0.4 * (2.0 * std::f64::consts::PI * 300.0 * t).sin()
            } else {
                0.0
            };
            s as f32 + 0.003 * n
        })
        .collect()
}

#[test]
fn a_line_without_words_longer_than_the_longest_is_left_out_and_the_rest_comes_through() {
    let tmp = tempfile::tempdir().unwrap();
    let spans = [
        (0.5, 1.0),
        (1.2, 1.8),
        (2.5, 20.5),
        (22.0, 22.9),
        (23.1, 24.0),
    ];
    common::write_wav_pcm16(
        &tmp.path().join("yard.wav"),
        16_000,
        &bursts(16_000, 25.0, &spans),
    );
    let clip = serde_json::json!({
        "id": "yard-tannoy", "audio": "yard.wav", "site": "fjellvik-cold-store",
        "lines": [
            {"start": 0.5, "end": 1.8, "text": "gate seven", "speaker": "ruben",
             "words": [{"start": 0.5, "end": 1.0, "text": "gate"}, {"start": 1.2, "end": 1.8, "text": "seven"}]},
            {"start": 2.5, "end": 20.5, "text": "attention all drivers the north yard closes at six for gritting"},
            {"start": 22.0, "end": 24.0, "text": "copy that", "speaker": "ruben",
             "words": [{"start": 22.0, "end": 22.9, "text": "copy"}, {"start": 23.1, "end": 24.0, "text": "that"}]}
        ]
    });
    let manifest = tmp.path().join("in.jsonl");
    std::fs::write(&manifest, clip.to_string() + "\n").unwrap();
    let out = tmp.path().join("out");
    let (code, stdout) = slice(&manifest, &out, &[]);
    assert_eq!(code, Some(3), "{stdout}");
    assert!(stdout.contains("1 stretch left out"), "{stdout}");
    let left = read_jsonl(&out.join("left_out.jsonl"));
    assert_eq!(left.len(), 1);
    assert_eq!(left[0]["source"], "yard-tannoy");
    assert_eq!(left[0]["line"], 1);
    assert_eq!((f(&left[0]["start"]), f(&left[0]["end"])), (2.5, 20.5));
    assert_eq!(
        left[0]["text"],
        "attention all drivers the north yard closes at six for gritting"
    );
    assert_eq!(left[0]["reason"], "too_long");
    // The rest comes through: "gate seven" (1.3 s of speech; 0.5 s of silence before and
    // 0.35 s, half the gap, after reach the 2 s shortest) and "copy that".
    let slices = read_jsonl(&out.join("manifest.jsonl"));
    let texts: Vec<&str> = slices
        .iter()
        .map(|c| c["lines"][0]["text"].as_str().unwrap())
        .collect();
    assert_eq!(texts, ["gate seven", "copy that"]);
    let first = &slices[0];
    assert!((f(&first["duration"]) - 2.0).abs() < 1e-9);
    assert!(f(&first["slice"]["end"]) <= 1.8 + 0.35 + 1e-9);
    assert_eq!(first["site"], "fjellvik-cold-store");
    assert_eq!(
        std::fs::read_to_string(out.join("rejects.jsonl")).unwrap(),
        ""
    );
}

#[test]
fn bad_clips_are_rejected_by_file_line_and_field_and_the_others_are_slice() {
    let tmp = tempfile::tempdir().unwrap();
    let demo = read_jsonl(&common::demo().join("manifest.jsonl"));
    let absolute = |c: &Value| {
        let mut c = c.clone();
        c["audio"] = Value::from(
            common::demo()
                .join(c["audio"].as_str().unwrap())
                .to_str()
                .unwrap(),
        );
        c
    };
    let good = absolute(&demo[0]);
    // pick-b-001 is 8.29 s long; its last line now ends at 12 s.
    let mut long = absolute(&demo[1]);
    long["lines"][2]["end"] = Value::from(12.0);
    long["lines"][2]["words"][2]["end"] = Value::from(12.0);
    let mut missing = absolute(&demo[2]);
    missing["audio"] = Value::from(tmp.path().join("nowhere.wav").to_str().unwrap());
    let untimed = absolute(demo.iter().find(|c| c["text"].is_string()).unwrap());
    let lines = [
        good.to_string(),
        long.to_string(),
        missing.to_string(),
        untimed.to_string(),
        r#"{"id": "half-written", "audio": "#.to_string(),
    ];
    let manifest = tmp.path().join("in.jsonl");
    std::fs::write(&manifest, lines.join("\n") + "\n").unwrap();
    let out = tmp.path().join("out");
    let (code, stdout) = slice(&manifest, &out, &[]);
    assert_eq!(code, Some(3), "{stdout}");
    assert!(stdout.contains("3 rejected"), "{stdout}");
    let rejects = read_jsonl(&out.join("rejects.jsonl"));
    let named: Vec<(u64, &str)> = rejects
        .iter()
        .map(|r| {
            (
                r["line"].as_u64().unwrap(),
                r["field"].as_str().unwrap_or(""),
            )
        })
        .collect();
    // The slice-off line names the field it was in when the text ended.
    assert_eq!(named, [(2, "lines[2].end"), (3, "audio"), (5, "audio")]);
    for r in &rejects {
        assert_eq!(r["file"], manifest.to_str().unwrap());
    }
    assert!(
        rejects[0]["reason"]
            .as_str()
            .unwrap()
            .contains("past the end")
    );
    let slices = read_jsonl(&out.join("manifest.jsonl"));
    let sources: Vec<&str> = slices
        .iter()
        .map(|c| c["slice"]["source"].as_str().unwrap())
        .collect();
    assert!(sources.contains(&"pick-a-001"), "{sources:?}");
    // The untimed clip (5.97 s) is one whole slice with its text.
    let whole: Vec<&Value> = slices
        .iter()
        .filter(|c| c["slice"]["source"] == untimed["id"])
        .collect();
    assert_eq!(whole.len(), 1);
    assert_eq!(whole[0]["text"], untimed["text"]);
    assert_eq!(f(&whole[0]["slice"]["start"]), 0.0);
    assert!((f(&whole[0]["duration"]) - 95_566.0 / 16_000.0).abs() < 1e-9);
    assert!(out.join(whole[0]["audio"].as_str().unwrap()).is_file());
}

#[test]
fn an_untimed_clip_too_long_is_left_out_and_bad_options_are_usage_errors() {
    let tmp = tempfile::tempdir().unwrap();
    let demo = read_jsonl(&common::demo().join("manifest.jsonl"));
    let mut untimed = demo.iter().find(|c| c["text"].is_string()).unwrap().clone();
    untimed["audio"] = Value::from(
        common::demo()
            .join(untimed["audio"].as_str().unwrap())
            .to_str()
            .unwrap(),
    );
    let manifest = tmp.path().join("in.jsonl");
    std::fs::write(&manifest, untimed.to_string() + "\n").unwrap();
    let out = tmp.path().join("out");
    let (code, _) = slice(&manifest, &out, &["--longest", "4"]);
    assert_eq!(code, Some(3));
    let left = read_jsonl(&out.join("left_out.jsonl"));
    assert_eq!(left.len(), 1);
    assert_eq!(left[0]["reason"], "too_long");
    assert_eq!(left[0]["text"], untimed["text"]);
    assert_eq!(read_jsonl(&out.join("manifest.jsonl")).len(), 0);

    for bad in [
        &["--shortest", "5", "--longest", "4"][..],
        &["--pad", "0.3..0.1"],
        &["--pad=-0.1"],
        &["--longest", "0"],
        &["--format", "mp3"],
        &["--float", "--format", "pcm24"],
    ] {
        let mut args = vec![
            "slice",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ];
        args.extend_from_slice(bad);
        let o = retake(&args);
        assert_eq!(o.status.code(), Some(2), "{bad:?}");
        assert!(!String::from_utf8_lossy(&o.stderr).is_empty());
    }
}

#[test]
fn a_recording_shorter_than_its_header_says_is_rejected_with_no_slices_left() {
    // The recording is streamed, so the first slices are written before the end of the file is
    // reached; a WAV whose data chunk declares more than the file holds must still end as a
    // reject with every slice of it removed.
    let tmp = tempfile::tempdir().unwrap();
    let rate = 16_000;
    let spans: Vec<(f64, f64)> = (0..12)
        .map(|i| (0.5 + 2.0 * i as f64, 1.2 + 2.0 * i as f64))
        .collect();
    let wav = tmp.path().join("long.wav");
    common::write_wav_pcm16(&wav, rate, &bursts(rate, 25.0, &spans));
    let full = std::fs::metadata(&wav).unwrap().len();
    // Chop the last 5 s of samples (2 bytes each) but keep the header's declared size.
    let f = std::fs::OpenOptions::new().write(true).open(&wav).unwrap();
    f.set_len(full - 5 * 2 * u64::from(rate)).unwrap();
    let lines: Vec<Value> = spans
        .iter()
        .take(8)
        .enumerate()
        .map(|(i, (a, b))| {
            serde_json::json!({"start": a, "end": b, "text": format!("beep {i}"),
                "words": [{"start": a, "end": b, "text": "beep"}]})
        })
        .collect();
    let manifest = tmp.path().join("in.jsonl");
    std::fs::write(
        &manifest,
        serde_json::json!({"id": "long", "audio": "long.wav", "lines": lines}).to_string() + "\n",
    )
    .unwrap();
    let out = tmp.path().join("out");
    let (code, stdout) = slice(&manifest, &out, &["--longest", "3"]);
    assert_eq!(code, Some(3), "{stdout}");
    let rejects = read_jsonl(&out.join("rejects.jsonl"));
    assert_eq!(rejects.len(), 1, "{rejects:?}");
    assert_eq!(rejects[0]["field"], "audio");
    let reason = rejects[0]["reason"].as_str().unwrap();
    assert!(
        reason.contains("long.wav") && reason.contains("truncated"),
        "{reason}"
    );
    assert!(read_jsonl(&out.join("manifest.jsonl")).is_empty());
    let left: Vec<_> = std::fs::read_dir(out.join("slices")).unwrap().collect();
    assert!(
        left.is_empty(),
        "slices of a rejected recording remain: {left:?}"
    );
}

#[test]
fn a_rerun_with_other_limits_leaves_no_stale_slices_and_nothing_else_is_touched() {
    let tmp = tempfile::tempdir().unwrap();
    let s = session::build(tmp.path(), 60.0);
    let out = tmp.path().join("out");
    slice(&s.manifest, &out, &["--longest", "3", "--shortest", "1"]);
    let many = read_jsonl(&out.join("manifest.jsonl")).len();
    // Something of the user's in the output folder, named like a slice.
    std::fs::write(out.join("slices/notes.c99.wav"), b"mine").unwrap();
    slice(&s.manifest, &out, &["--longest", "15"]);
    let listed: Vec<String> = read_jsonl(&out.join("manifest.jsonl"))
        .iter()
        .map(|c| c["audio"].as_str().unwrap().to_string())
        .collect();
    assert!(listed.len() < many, "{} slices then {}", many, listed.len());
    let mut on_disk: Vec<String> = std::fs::read_dir(out.join("slices"))
        .unwrap()
        .map(|e| format!("slices/{}", e.unwrap().file_name().to_string_lossy()))
        .collect();
    on_disk.sort();
    let mut expected = listed.clone();
    expected.push("slices/notes.c99.wav".into());
    expected.sort();
    assert_eq!(on_disk, expected);
}

/// Slices carry their time map in `origin` like every take, so `remap` moves another
/// annotation of the source (here a word TSV, a row per word) onto each slice: a row inside
/// a slice lands at its source time minus the slice's start (the slice's own `slice.start`,
/// a plain offset, computed here independently of the map), and the slice's own words,
/// rewritten by the slicer, agree with the moved rows.
#[test]
fn remap_moves_source_annotations_onto_slices() {
    let tmp = tempfile::tempdir().unwrap();
    let s = session::build(tmp.path(), 60.0);
    let out = tmp.path().join("out");
    slice(&s.manifest, &out, &["--shortest", "2", "--longest", "12"]);
    let labels = tmp.path().join("labels");
    std::fs::create_dir_all(&labels).unwrap();
    let rows: Vec<(f64, f64, String)> = s.words();
    let tsv: String = rows
        .iter()
        .map(|(a, b, w)| format!("{a:.6}\t{b:.6}\t{w}\n"))
        .collect();
    std::fs::write(labels.join(format!("{}.tsv", s.clip.id)), tsv).unwrap();
    let moved = tmp.path().join("moved");
    let o = retake(&[
        "remap",
        out.join("manifest.jsonl").to_str().unwrap(),
        labels.to_str().unwrap(),
        "-o",
        moved.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let slices = read_jsonl(&out.join("manifest.jsonl"));
    assert!(slices.len() >= 5, "{} slices", slices.len());
    let mut inside = 0;
    for c in &slices {
        let (start, duration) = (f(&c["slice"]["start"]), f(&c["duration"]));
        assert_eq!(c["origin"]["source"], s.clip.id.as_str());
        let id = c["id"].as_str().unwrap();
        let text = std::fs::read_to_string(moved.join(format!("{id}.tsv"))).unwrap();
        let got: Vec<(f64, f64, String)> = text
            .lines()
            .map(|l| {
                let p: Vec<&str> = l.split('\t').collect();
                (
                    p[0].parse().unwrap(),
                    p[1].parse().unwrap(),
                    p[2].to_string(),
                )
            })
            .collect();
        assert_eq!(got.len(), rows.len(), "{id}: every row is kept");
        let own = slice_words(c);
        for ((a, b, w), (ga, gb, gw)) in rows.iter().zip(&got) {
            assert_eq!(w, gw);
            let (ea, eb) = (
                (a - start).clamp(0.0, duration),
                (b - start).clamp(0.0, duration),
            );
            assert!(
                (ga - ea).abs() < 2e-6 && (gb - eb).abs() < 2e-6,
                "{id}: {w} at {a}..{b} moved to {ga}..{gb}, expected {ea}..{eb}"
            );
            if *a >= start && *b <= start + duration {
                inside += 1;
                let mine = own
                    .iter()
                    .find(|(oa, _, ow)| ow == w && (oa - ga).abs() < 1e-3);
                assert!(
                    mine.is_some(),
                    "{id}: the slice's own labels lack {w} at {ga}"
                );
            }
        }
    }
    assert!(
        inside >= rows.len() / 2,
        "only {inside} of {} rows inside slices",
        rows.len()
    );
}
