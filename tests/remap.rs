//! `retake remap`: an annotation that is not the transcript (a burst train, as TSV and as
//! WebVTT) follows speed perturbation and a simulated room to within 2 ms of the bursts'
//! measured onsets; missing and bad annotations are listed.

mod common;

use std::path::Path;

use common::{read_jsonl, retake, run_recipe, write_wav_float};

const RATE: u32 = 16_000;

/// Irregular burst starts (seconds) over a 4 s clip; each burst is 20 ms of a 2 kHz tone
/// with a 1 ms raised-cosine attack and release.
const BURSTS: [f64; 8] = [0.3, 0.75, 1.1, 1.62, 2.05, 2.5, 3.01, 3.4];
const BURST_S: f64 = 0.02;

fn burst_clip(dir: &Path) {
    let mut x = vec![0.0f32; 4 * RATE as usize];
    let ramp = (0.001 * f64::from(RATE)) as usize;
    let len = (BURST_S * f64::from(RATE)) as usize;
    for &t in &BURSTS {
        let at = (t * f64::from(RATE)).round() as usize;
        for k in 0..len {
            let edge = k.min(len - 1 - k);
            let g = if edge < ramp {
                0.5 * (1.0 - (std::f64::consts::PI * edge as f64 / ramp as f64).cos())
            } else {
                1.0
            };
            let phase = 2.0 * std::f64::consts::PI * 2000.0 * k as f64 / f64::from(RATE);
            x[at + k] = (0.4 * g * phase.sin()) as f32;
        }
    }
    write_wav_float(&dir.join("bursts.wav"), RATE, &x);
    // An untimed clip: the transcript says nothing about the bursts; only remap moves them.
    std::fs::write(
        dir.join("in.jsonl"),
        r#"{"id":"yard/bursts","audio":"bursts.wav","text":"reversing beeper test"}"#.to_string()
            + "\n",
    )
    .unwrap();
    let labels = dir.join("labels/yard");
    std::fs::create_dir_all(&labels).unwrap();
    let mut tsv = String::from("start\tend\tlabel\tchannel\n");
    for (i, t) in BURSTS.iter().enumerate() {
        tsv += &format!("{t}\t{}\tbeep{i}\tleft\n", t + BURST_S);
    }
    std::fs::write(labels.join("bursts.tsv"), tsv).unwrap();
    // The same bursts as WebVTT with identifiers, settings and a NOTE, all to be kept.
    let mut vtt = String::from("WEBVTT - yard test\n\nNOTE bursts from the reversing beeper\n\n");
    for (i, t) in BURSTS.iter().enumerate() {
        let (a, b) = (
            retake::transcript::webvtt::format_timestamp(*t),
            retake::transcript::webvtt::format_timestamp(t + BURST_S),
        );
        vtt += &format!("beep{i}\n{a} --> {b} align:start\n<v beeper>beep {i}\n\n");
    }
    std::fs::write(labels.join("bursts.vtt"), vtt).unwrap();
}

fn read_wav(path: &Path) -> Vec<f32> {
    let mut r = hound::WavReader::open(path).unwrap();
    r.samples::<i16>()
        .map(|s| f32::from(s.unwrap()) / 32768.0)
        .collect()
}

#[test]
fn burst_annotation_follows_speed_and_room_to_two_ms() {
    let tmp = tempfile::tempdir().unwrap();
    burst_clip(tmp.path());
    // Seven drawn takes: both speed factors appear unless all seven draws agree (a 1 in 64
    // chance for an arbitrary seed; with 3 drawn takes it was 1 in 4).
    let recipe = "takes = 8\nseed = 11\nkeep_source = true\n[[step]]\ndo = \"speed\"\nfactor = [0.9, 1.1]\n[[step]]\ndo = \"room\"\nwidth_m = { low = 3.0, high = 8.0 }\nlength_m = { low = 3.0, high = 10.0 }\nheight_m = 3.0\nrt60_s = { low = 0.3, high = 0.6 }\n";
    let (code, err, takes) = run_recipe(tmp.path(), recipe, &tmp.path().join("in.jsonl"));
    assert_eq!(code, Some(0), "{err}");
    assert_eq!(takes.len(), 8);
    let out = tmp.path().join("moved");
    let o = retake(&[
        "remap",
        tmp.path().join("out/manifest.jsonl").to_str().unwrap(),
        tmp.path().join("labels").to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut worst: f64 = 0.0;
    let mut factors = Vec::new();
    for take in &takes {
        let id = take["id"].as_str().unwrap();
        let y = read_wav(&tmp.path().join("out").join(take["audio"].as_str().unwrap()));
        let moved = out.join(format!("{}.tsv", retake::files::file_stem(id)));
        let text = std::fs::read_to_string(&moved).unwrap();
        let rows: Vec<Vec<&str>> = text
            .lines()
            .skip(1)
            .map(|l| l.split('\t').collect())
            .collect();
        assert_eq!(rows.len(), BURSTS.len(), "{text}");
        for (i, row) in rows.iter().enumerate() {
            // Labels and extra columns come through untouched.
            assert_eq!((row[2], row[3]), (format!("beep{i}").as_str(), "left"));
            let start: f64 = row[0].parse().unwrap();
            let end: f64 = row[1].parse().unwrap();
            // The measured onset: the first sample within ±20 ms that reaches a quarter of the
            // largest magnitude there. The room is normalised to a direct peak of 1, so the
            // direct sound crosses that level within the burst's 1 ms attack even when
            // reflections add up to twice its amplitude later in the burst.
            let onset = common::onset_near(&y, RATE, start, 0.25);
            worst = worst.max((onset - start).abs());
            // The issue's bound: within 2 ms of the measured onset. The onset is a whole
            // sample, so the bound is counted in samples (2 ms = 32 at 16 kHz): an onset
            // exactly 2 ms off must not fail on the rounding of 1.0 - 0.998.
            let off_samples = ((onset - start).abs() * f64::from(RATE)).round();
            assert!(
                off_samples <= 0.002 * f64::from(RATE),
                "{id}: burst {i} annotated at {start:.6} s, measured onset {onset:.6} s; {}",
                take["origin"]
            );
            // Duration follows the speed factor (room trimming shifts, never stretches).
            let f = take["origin"]["steps"]
                .get(0)
                .and_then(|s| s["drawn"]["factor"].as_f64())
                .unwrap_or(1.0);
            assert!(
                ((end - start) - BURST_S / f).abs() < 2e-6,
                "{end} - {start} at {f}"
            );
            factors.push(f);
        }
        // The trimmed delay is the direct path's: distance / c, c = 343 m/s (air at 20 °C,
        // the step's constant), to the sample. A reflection that sums to a larger peak than
        // the direct sound (source near walls) must not be taken for it.
        let room = &take["origin"]["steps"][1];
        if room["ran"] == true {
            let p = |k: &str| -> Vec<f64> {
                room["drawn"][k]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|v| v.as_f64().unwrap())
                    .collect()
            };
            let (s, m) = (p("source_m"), p("mic_m"));
            let d = s
                .iter()
                .zip(&m)
                .map(|(a, b)| (a - b).powi(2))
                .sum::<f64>()
                .sqrt();
            let trimmed = room["measured"]["trimmed_s"].as_f64().unwrap();
            assert!(
                (trimmed - d / 343.0).abs() <= 0.5 / f64::from(RATE) + 1e-12,
                "{id}: trimmed {trimmed} s, direct path {} s",
                d / 343.0
            );
        }
    }
    assert!(
        factors.contains(&0.9) && factors.contains(&1.1),
        "both speeds drawn: {factors:?}"
    );
    // The WebVTT copy, read by webvtt-py (PyPI), must say the same to WebVTT's millisecond.
    let mut vtt_worst: f64 = 0.0;
    for take in &takes {
        let id = take["id"].as_str().unwrap();
        let y = read_wav(&tmp.path().join("out").join(take["audio"].as_str().unwrap()));
        let moved = out.join(format!("{}.vtt", retake::files::file_stem(id)));
        let text = std::fs::read_to_string(&moved).unwrap();
        assert!(
            text.starts_with("WEBVTT - yard test\n\nNOTE bursts"),
            "{text}"
        );
        let cues = common::run_python(
            "import sys, webvtt\nfor c in webvtt.read(sys.argv[1]):\n    print(c.identifier, c.start_in_seconds, c.start, c.text, sep='|')",
            &[moved.to_str().unwrap()],
        );
        let cues: Vec<Vec<&str>> = cues.lines().map(|l| l.split('|').collect()).collect();
        assert_eq!(cues.len(), BURSTS.len(), "{text}");
        for (i, cue) in cues.iter().enumerate() {
            assert_eq!(cue[0], format!("beep{i}"));
            assert!(text.contains(" align:start\n<v beeper>"), "{text}");
            // webvtt-py's start: "hh:mm:ss.mmm"; seconds and milliseconds parsed here.
            let hms: Vec<f64> = cue[2].split(':').map(|x| x.parse().unwrap()).collect();
            let start = hms[0] * 3600.0 + hms[1] * 60.0 + hms[2];
            assert_eq!(start.floor(), cue[1].parse::<f64>().unwrap());
            let onset = common::onset_near(&y, RATE, start, 0.25);
            vtt_worst = vtt_worst.max((onset - start).abs());
            assert!(
                (onset - start).abs() <= 0.002,
                "{id}: cue {i} at {start}, onset {onset}"
            );
        }
    }
    eprintln!(
        "worst onset error {:.3} ms (TSV), {:.3} ms (WebVTT)",
        worst * 1e3,
        vtt_worst * 1e3
    );
}

/// `retake remap dir/<manifest> dir/labels -o dir/moved`: exit code and stderr.
fn remap(dir: &Path, manifest: &str) -> (Option<i32>, String) {
    let o = retake(&[
        "remap",
        dir.join(manifest).to_str().unwrap(),
        dir.join("labels").to_str().unwrap(),
        "-o",
        dir.join("moved").to_str().unwrap(),
    ]);
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn missing_annotations_and_non_takes_are_listed() {
    let tmp = tempfile::tempdir().unwrap();
    burst_clip(tmp.path());
    for ext in ["tsv", "vtt"] {
        std::fs::remove_file(tmp.path().join(format!("labels/yard/bursts.{ext}"))).unwrap();
    }
    let recipe = "takes = 1\n[[step]]\ndo = \"gain\"\ndb = -3.0\n";
    let (code, err, _) = run_recipe(tmp.path(), recipe, &tmp.path().join("in.jsonl"));
    assert_eq!(code, Some(0), "{err}");
    // The source manifest is not a run's output: its line is named.
    let (code, err) = remap(tmp.path(), "in.jsonl");
    assert_eq!(code, Some(3), "{err}");
    assert!(err.contains("in.jsonl line 1: origin:"), "{err}");
    let (code, err) = remap(tmp.path(), "out/manifest.jsonl");
    // Listed, but not a failure: not every clip has every kind of annotation.
    assert_eq!(code, Some(0), "{err}");
    assert!(
        err.contains("no annotation for source clip `yard/bursts`"),
        "{err}"
    );
    assert!(read_jsonl(&tmp.path().join("out/manifest.jsonl")).len() == 1);
    // A bad annotation is named by file and line, and fails the command.
    std::fs::write(
        tmp.path().join("labels/yard/bursts.vtt"),
        "WEBVTT\n\n00:01.000 --> 00:00.500\nbeep\n",
    )
    .unwrap();
    let (code, err) = remap(tmp.path(), "out/manifest.jsonl");
    assert_eq!(code, Some(3), "{err}");
    assert!(err.contains("bursts.vtt line 3:"), "{err}");
    // A cue setting the WebVTT parser ignores (§6.3: `align` takes start, center, end, left
    // or right) is a warning: the file is carried over, setting and all, and the command
    // succeeds.
    std::fs::write(
        tmp.path().join("labels/yard/bursts.vtt"),
        "WEBVTT\n\n00:00.300 --> 00:00.320 align:middle\nbeep\n",
    )
    .unwrap();
    let (code, err) = remap(tmp.path(), "out/manifest.jsonl");
    assert_eq!(code, Some(0), "{err}");
    assert!(
        err.contains("warning: ") && err.contains("bursts.vtt line 3:"),
        "{err}"
    );
    let carried: Vec<String> = std::fs::read_dir(tmp.path().join("moved"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "vtt"))
        .map(|p| std::fs::read_to_string(p).unwrap())
        .collect();
    assert_eq!(carried.len(), 1);
    assert!(carried[0].contains(" align:middle\nbeep"), "{}", carried[0]);
}
