//! End-to-end runs of the real binary in temporary folders: good clips, bad clips, bad
//! recipes, thread-count independence and `check`.

mod common;

use std::path::{Path, PathBuf};

use common::{files_under, read_jsonl, retake, write_wav_pcm16 as write_wav};
use serde_json::Value;

/// Tone bursts standing in for words: 0.3 s bursts every 0.6 s from 0.2 s.
fn bursts(rate: u32, secs: f64) -> Vec<f32> {
    let n = (secs * f64::from(rate)) as usize;
    (0..n)
        .map(|i| {
            let t = i as f64 / f64::from(rate);
            let on = t >= 0.2 && ((t - 0.2) % 0.6) < 0.3;
            if on {
                (0.5 * (2.0 * std::f64::consts::PI * 300.0 * t).sin()) as f32
            } else {
                0.0
            }
        })
        .collect()
}

const RECIPE: &str = r#"
seed = 11
takes = 3
keep_source = true
rate = 16000

[[step]]
do = "speed"
factor = [0.9, 1.1]

[[step]]
do = "gain"
db = { low = -3.0, high = 3.0 }
"#;

fn line(id: &str, audio: &str, words: &[(f64, f64, &str)]) -> String {
    let ws: Vec<Value> = words
        .iter()
        .map(|(s, e, t)| serde_json::json!({"start": s, "end": e, "text": t}))
        .collect();
    // The line spans its words, whatever order they are in.
    let s = words.iter().map(|w| w.0).fold(f64::INFINITY, f64::min);
    let e = words.iter().map(|w| w.1).fold(f64::NEG_INFINITY, f64::max);
    let text: Vec<&str> = words.iter().map(|w| w.2).collect();
    serde_json::json!({"id": id, "audio": audio, "lines": [{"start": s, "end": e, "text": text.join(" "), "words": ws}]})
        .to_string()
}

const WORDS: &[(f64, f64, &str)] = &[(0.2, 0.5, "bay"), (0.8, 1.1, "four"), (1.4, 1.7, "clear")];

fn setup_good(dir: &Path) -> PathBuf {
    write_wav(&dir.join("a.wav"), 16000, &bursts(16000, 2.0));
    write_wav(&dir.join("b.wav"), 44100, &bursts(44100, 2.0));
    std::fs::write(dir.join("recipe.toml"), RECIPE).unwrap();
    let manifest = dir.join("in.jsonl");
    std::fs::write(
        &manifest,
        [line("a", "a.wav", WORDS), line("b", "b.wav", WORDS)].join("\n") + "\n",
    )
    .unwrap();
    manifest
}

#[test]
fn run_writes_takes_with_rewritten_labels_and_check_accepts_them() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup_good(tmp.path());
    let out = tmp.path().join("out");
    let o = retake(&[
        "run",
        tmp.path().join("recipe.toml").to_str().unwrap(),
        "--input",
        manifest.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let takes = read_jsonl(&out.join("manifest.jsonl"));
    assert_eq!(takes.len(), 6);
    assert_eq!(
        std::fs::read_to_string(out.join("rejects.jsonl")).unwrap(),
        ""
    );
    for t in &takes {
        let origin = &t["origin"];
        let k = origin["take"].as_u64().unwrap();
        let d = t["duration"].as_f64().unwrap();
        let speed = &origin["steps"][0];
        if k == 0 {
            // keep_source: take 0 is the clip at the recipe rate, untouched.
            assert_eq!(speed["ran"], false);
            assert!((d - 2.0).abs() < 1e-3, "{d}");
        } else {
            let f = speed["drawn"]["factor"].as_f64().unwrap();
            assert!(f == 0.9 || f == 1.1, "{f}");
            // Speed perturbation: duration d/f and every timing t/f (physics).
            assert!((d - 2.0 / f).abs() < 2e-4, "duration {d} for factor {f}");
            let w = &t["lines"][0]["words"][1];
            assert!((w["start"].as_f64().unwrap() - 0.8 / f).abs() < 2e-4);
            assert!((w["end"].as_f64().unwrap() - 1.1 / f).abs() < 2e-4);
        }
        assert_eq!(
            origin["source_rate"],
            if origin["source"] == "a" {
                16000
            } else {
                44100
            }
        );
    }
    let o = retake(&["check", out.join("manifest.jsonl").to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn output_is_byte_identical_for_one_and_two_threads() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup_good(tmp.path());
    let recipe = tmp.path().join("recipe.toml");
    let mut results = Vec::new();
    for threads in ["1", "2"] {
        let out = tmp.path().join(format!("out{threads}"));
        let o = retake(&[
            "run",
            recipe.to_str().unwrap(),
            "-i",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--threads",
            threads,
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        results.push(files_under(&out));
    }
    // manifest, rejects, the (empty) lock file, six takes and two completion records.
    assert_eq!(results[0].len(), 3 + 6 + 2);
    assert!(
        results[0] == results[1],
        "outputs differ between --threads 1 and 2"
    );
}

#[test]
fn bad_clips_are_rejected_by_line_and_field_and_the_rest_complete() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    let manifest = setup_good(dir);
    std::fs::write(
        dir.join("garbage.wav"),
        b"this is not audio at all, just words",
    )
    .unwrap();
    let full = std::fs::read(dir.join("a.wav")).unwrap();
    std::fs::write(dir.join("cut.wav"), &full[..full.len() / 2]).unwrap();
    let mut lines = vec![
        line("good", "a.wav", WORDS),                                    // 1
        line("missing", "nowhere.wav", WORDS),                           // 2
        line("garbage", "garbage.wav", WORDS),                           // 3
        line("truncated", "cut.wav", WORDS),                             // 4
        line("late", "a.wav", &[(0.2, 0.5, "bay"), (1.8, 2.5, "four")]), // 5
        line("negative", "a.wav", &[(-0.2, 0.5, "bay")]),                // 6
        line("backwards", "a.wav", &[(0.9, 0.5, "bay")]),                // 7
        line(
            "unsorted",
            "a.wav",
            &[(0.8, 1.1, "four"), (0.2, 0.5, "bay")],
        ), // 8
        line("overlap", "a.wav", &[(0.2, 0.9, "bay"), (0.8, 1.1, "four")]), // 9
    ];
    lines.push(line("nan", "a.wav", WORDS).replace("0.8", "NaN")); // 10
    lines.push(String::new()); // 11
    lines.push(line("also-good", "b.wav", WORDS)); // 12
    std::fs::write(&manifest, lines.join("\n") + "\n").unwrap();
    let out = dir.join("out");
    let o = retake(&[
        "run",
        dir.join("recipe.toml").to_str().unwrap(),
        "-i",
        manifest.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(
        o.status.code(),
        Some(3),
        "finished with rejects: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let takes = read_jsonl(&out.join("manifest.jsonl"));
    let sources: std::collections::BTreeSet<&str> = takes
        .iter()
        .map(|t| t["origin"]["source"].as_str().unwrap())
        .collect();
    assert_eq!(
        sources.into_iter().collect::<Vec<_>>(),
        ["also-good", "good"]
    );
    let rejects = read_jsonl(&out.join("rejects.jsonl"));
    let got: Vec<(u64, &str)> = rejects
        .iter()
        .map(|r| {
            (
                r["line"].as_u64().unwrap(),
                r["field"].as_str().unwrap_or(""),
            )
        })
        .collect();
    assert_eq!(
        got,
        [
            (2, "audio"),
            (3, "audio"),
            (4, "audio"),
            (5, "lines[0].end"),
            (6, "lines[0].start"),
            (7, "lines[0].end"),
            (8, "lines[0].words[1].start"),
            (9, "lines[0].words[1].start"),
            // NaN is not JSON: a parse error, still located at its field.
            (10, "lines[0].words[1].start"),
            (11, ""),
        ]
    );
    let reasons: Vec<&str> = rejects
        .iter()
        .map(|r| r["reason"].as_str().unwrap())
        .collect();
    assert!(reasons[0].contains("nowhere.wav"), "{}", reasons[0]);
    assert!(reasons[2].contains("truncated"), "{}", reasons[2]);
    assert!(reasons[3].contains("past the end"), "{}", reasons[3]);
    assert!(reasons[9].contains("empty line"), "{}", reasons[9]);
    // Nothing half-written: only the good clips' takes, no temporary files.
    let names: Vec<String> = files_under(&out.join("takes"))
        .into_iter()
        .map(|(n, _)| n)
        .collect();
    assert_eq!(names.len(), 6, "{names:?}");
    assert!(
        names
            .iter()
            .all(|n| n.starts_with("good.") || n.starts_with("also-good.")),
        "{names:?}"
    );
}

#[test]
fn recipe_errors_name_file_line_and_key_and_write_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup_good(tmp.path());
    let cases = [
        (
            RECIPE.replace("factor = [0.9, 1.1]", "factor = [0.9, 1.1]\nfactr = 2"),
            10,
            "unknown key `factr`",
        ),
        (
            RECIPE.replace("low = -3.0, high = 3.0", "low = 3.0, high = -3.0"),
            13,
            "range low 3 is above high -3",
        ),
        (
            RECIPE.replace("takes = 3", "takes = 3\nshuffle = true"),
            4,
            "unknown key `shuffle`",
        ),
        (
            RECIPE.replace("do = \"gain\"", "do = \"gian\""),
            12,
            "unknown step `gian`",
        ),
    ];
    for (text, want_line, want) in cases {
        let recipe = tmp.path().join("bad.toml");
        std::fs::write(&recipe, &text).unwrap();
        let out = tmp.path().join("never");
        let o = retake(&[
            "run",
            recipe.to_str().unwrap(),
            "-i",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(
            err.contains(&format!("bad.toml line {want_line}:")),
            "want line {want_line}: {err}"
        );
        assert!(err.contains(want), "want `{want}`: {err}");
        assert!(
            !out.exists(),
            "a failed recipe must not create the output folder"
        );
    }
}

#[test]
fn check_reports_every_problem_with_line_and_field() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    let manifest = setup_good(dir);
    let lines = [
        line("good", "a.wav", WORDS),
        line("late", "a.wav", &[(0.2, 0.5, "bay"), (1.8, 2.5, "four")]),
        line("missing", "gone.wav", WORDS),
        String::new(),
    ];
    std::fs::write(&manifest, lines.join("\n") + "\n").unwrap();
    let o = retake(&["check", manifest.to_str().unwrap()]);
    assert_eq!(
        o.status.code(),
        Some(3),
        "check finding problems exits 3 (README, Exit status)"
    );
    let err = String::from_utf8_lossy(&o.stderr);
    let m = manifest.display().to_string();
    assert!(
        err.contains(&format!("{m} line 2: lines[0].end: 2.5 s is past the end")),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "{m} line 2: lines[0].words[1].end: 2.5 s is past the end"
        )),
        "{err}"
    );
    assert!(
        err.contains(&format!("{m} line 3: audio: ")) && err.contains("gone.wav"),
        "{err}"
    );
    assert!(err.contains(&format!("{m} line 4: empty line")), "{err}");
    // A float file with a NaN at sample 1234, and a duration that disagrees with the audio.
    let mut x = bursts(16000, 2.0);
    x[1234] = f32::NAN;
    common::write_wav_float(&dir.join("nan.wav"), 16000, &x);
    let mut wrong = serde_json::from_str::<Value>(&line("long", "a.wav", WORDS)).unwrap();
    wrong["duration"] = Value::from(2.5);
    let lines = [line("nan", "nan.wav", WORDS), wrong.to_string()];
    std::fs::write(&manifest, lines.join("\n") + "\n").unwrap();
    let o = retake(&["check", manifest.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(3));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains(&format!(
            "{m} line 1: audio: {}: sample 1234 (at 0.077125 s) is not finite",
            dir.join("nan.wav").display()
        )),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "{m} line 2: duration: 2.5 s, but the audio lasts 2.0000 s"
        )),
        "{err}"
    );
    // Clean manifest: exit 0.
    std::fs::write(&manifest, line("good", "a.wav", WORDS) + "\n").unwrap();
    assert!(
        retake(&["check", manifest.to_str().unwrap()])
            .status
            .success()
    );
}

#[test]
fn an_interrupted_run_resumed_with_the_same_command_matches_a_clean_run() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup_good(tmp.path());
    let recipe = tmp.path().join("recipe.toml");
    let run = |out: &Path| {
        retake(&[
            "run",
            recipe.to_str().unwrap(),
            "-i",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ])
    };
    let clean = tmp.path().join("clean");
    assert!(run(&clean).status.success());
    // Simulate a crash after clip `a` was finished and while clip `b` was being written:
    // b's takes and completion record gone, a half-written temporary file, no manifest.
    let out = tmp.path().join("crashed");
    assert!(run(&out).status.success());
    for k in 0..3 {
        std::fs::remove_file(out.join(format!("takes/b.t{k}.wav"))).unwrap();
    }
    std::fs::remove_file(out.join(".done/b.json")).unwrap();
    // A temporary file of the tool's own pattern (`<name>.<pid>.<n>.part`).
    std::fs::write(out.join("takes/b.t0.wav.4242.7.part"), b"RIFF half").unwrap();
    std::fs::remove_file(out.join("manifest.jsonl")).unwrap();
    let o = run(&out);
    assert!(o.status.success());
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(stdout.contains("kept    1 clip (3 takes"), "{stdout}");
    assert!(stdout.contains("made    3 takes"), "{stdout}");
    let (got, want) = (files_under(&out), files_under(&clean));
    let names = |v: &[(String, Vec<u8>)]| v.iter().map(|f| f.0.clone()).collect::<Vec<_>>();
    assert_eq!(names(&got), names(&want));
    for (g, w) in got.iter().zip(&want) {
        assert!(g.1 == w.1, "{} differs after resuming", g.0);
    }
    // A changed recipe makes the records stale: everything is made again.
    std::fs::write(&recipe, RECIPE.replace("seed = 11", "seed = 12")).unwrap();
    let o = run(&out);
    assert!(!String::from_utf8_lossy(&o.stdout).contains("kept"));
    assert!(files_under(&out) != files_under(&clean));
}

#[test]
fn channels_option_picks_a_channel() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    setup_good(dir);
    // Left channel silent, right channel bursts.
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 16000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(dir.join("st.wav"), spec).unwrap();
    for s in bursts(16000, 2.0) {
        w.write_sample(0i16).unwrap();
        w.write_sample((s * 32768.0) as i16).unwrap();
    }
    w.finalize().unwrap();
    let manifest = dir.join("st.jsonl");
    std::fs::write(&manifest, line("st", "st.wav", WORDS) + "\n").unwrap();
    std::fs::write(dir.join("one.toml"), "takes = 1\n").unwrap();
    let peak = |channels: &str| {
        let out = dir.join(format!("out-{channels}"));
        let o = retake(&[
            "run",
            dir.join("one.toml").to_str().unwrap(),
            "-i",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--channels",
            channels,
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let mut r = hound::WavReader::open(out.join("takes/st.t0.wav")).unwrap();
        r.samples::<i16>()
            .map(|s| s.unwrap().unsigned_abs())
            .max()
            .unwrap()
    };
    assert_eq!(peak("0"), 0);
    let right = peak("1");
    let mixed = peak("mix");
    assert!(right > 16000, "{right}");
    // The mix is the mean of the channels: half the right channel's peak.
    assert!(
        (f64::from(mixed) - f64::from(right) / 2.0).abs() <= 1.0,
        "{mixed} vs {right}"
    );
    let o = retake(&["run", "x.toml", "-i", "x", "-o", "y", "--channels", "left"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("expected `mix` or a channel number"));
}

#[test]
fn every_step_gives_the_same_bytes_on_one_and_two_threads() {
    // The demo recipe (speed, narrow-band pass, noise from a shared bank, gain) plus a
    // simulated room from the shared room cache, over the demo clips.
    let tmp = tempfile::tempdir().unwrap();
    let demo = common::demo();
    let recipe = std::fs::read_to_string(demo.join("recipe.toml")).unwrap()
        + "\n[[step]]\ndo = \"room\"\nwidth_m = [4.0, 6.0]\nlength_m = 5.0\nheight_m = 3.0\nrt60_s = [0.3, 0.5]\nmax_ir_s = 0.6\n";
    let recipe = recipe.replace(
        "bank = \"noise\"",
        &format!("bank = \"{}\"", demo.join("noise").display()),
    );
    assert!(recipe.contains("demo_audio/noise"));
    let recipe_path = tmp.path().join("recipe.toml");
    std::fs::write(&recipe_path, &recipe).unwrap();
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let out = tmp.path().join(threads);
        let o = retake(&[
            "run",
            recipe_path.to_str().unwrap(),
            "-i",
            demo.join("manifest.jsonl").to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "-j",
            threads,
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        outs.push(files_under(&out));
    }
    // manifest, rejects, the (empty) lock file, takes, completion records.
    assert_eq!(outs[0].len(), 1 + 1 + 1 + 40 + 10);
    for (a, b) in outs[0].iter().zip(&outs[1]) {
        assert!(a == b, "{} differs between 1 and 2 threads", a.0);
    }
}
