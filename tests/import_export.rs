//! `retake export` and `retake import`: the demo manifest goes out as TSV and WebVTT files
//! beside copies of its audio and comes back with every timing and text; bad sidecars are
//! listed with file and line while the good clips still come through.

mod common;

use std::path::Path;

use common::{demo, read_jsonl, retake};
use retake::transcript::{Clip, read_manifest};

fn demo_clips() -> Vec<Clip> {
    read_manifest(&demo().join("manifest.jsonl"))
        .unwrap()
        .entries
        .into_iter()
        .map(|e| e.clip)
        .collect()
}

/// Copy the demo's audio into `dir` flat (`<id>.<ext>`), as a site folder would hold it.
fn copy_audio(dir: &Path) {
    std::fs::create_dir_all(dir).unwrap();
    for clip in demo_clips() {
        let src = demo().join(&clip.audio);
        let ext = src.extension().unwrap().to_str().unwrap();
        std::fs::copy(&src, dir.join(format!("{}.{ext}", clip.id))).unwrap();
    }
}

fn run_ok(args: &[&str]) -> String {
    let o = retake(args);
    assert!(
        o.status.success(),
        "retake {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Lines of `a` and `b` agree: times within `tol`, texts and speakers equal, words too
/// when `words` is set.
fn assert_same_labels(a: &Clip, b: &Clip, tol: f64, words: bool) {
    let (la, lb) = (a.lines.as_ref().unwrap(), b.lines.as_ref().unwrap());
    assert_eq!(la.len(), lb.len(), "{}", a.id);
    for (x, y) in la.iter().zip(lb) {
        assert!(
            (x.start - y.start).abs() <= tol && (x.end - y.end).abs() <= tol,
            "{}: {}..{} vs {}..{}",
            a.id,
            x.start,
            x.end,
            y.start,
            y.end
        );
        assert_eq!((&x.text, &x.speaker), (&y.text, &y.speaker), "{}", a.id);
        if words {
            assert_eq!(x.words.len(), y.words.len());
            for (u, v) in x.words.iter().zip(&y.words) {
                assert!((u.start - v.start).abs() <= tol && (u.end - v.end).abs() <= tol);
                assert_eq!(u.text, v.text);
            }
        }
    }
}

fn round_trip(to: &str, tol: f64, words: bool) {
    let tmp = tempfile::tempdir().unwrap();
    let site = tmp.path().join("site");
    copy_audio(&site);
    let labels = tmp.path().join("labels");
    let out = run_ok(&[
        "export",
        demo().join("manifest.jsonl").to_str().unwrap(),
        "--to",
        to,
        "--out",
        labels.to_str().unwrap(),
    ]);
    assert!(out.contains("skipped 1 untimed"), "{out}");
    for e in std::fs::read_dir(&labels).unwrap() {
        let p = e.unwrap().path();
        std::fs::copy(&p, site.join(p.file_name().unwrap())).unwrap();
    }
    std::fs::write(
        site.join("dock-003.txt"),
        "  trailer seven\nloaded and sealed \n",
    )
    .unwrap();
    run_ok(&["import", site.to_str().unwrap()]);
    let back = read_manifest(&site.join("manifest.jsonl")).unwrap();
    assert!(back.problems.is_empty(), "{:?}", back.problems);
    let back: Vec<Clip> = back.entries.into_iter().map(|e| e.clip).collect();
    let originals = demo_clips();
    assert_eq!(back.len(), originals.len());
    for original in &originals {
        let clip = back.iter().find(|c| c.id == original.id).unwrap();
        assert!(clip.duration.unwrap() > 1.0);
        let ext = Path::new(&original.audio).extension().unwrap();
        assert_eq!(
            clip.audio,
            format!("{}.{}", original.id, ext.to_str().unwrap())
        );
        match &original.lines {
            Some(_) => assert_same_labels(original, clip, tol, words),
            None => assert_eq!(
                clip.text.as_deref(),
                Some("trailer seven loaded and sealed")
            ),
        }
    }
    // The imported manifest is a valid input: `check` decodes every file and finds nothing.
    run_ok(&["check", site.join("manifest.jsonl").to_str().unwrap()]);
}

#[test]
fn demo_round_trips_through_tsv_with_every_word() {
    // TSV carries words to the microsecond (six decimals).
    round_trip("tsv", 5e-7, true);
}

#[test]
fn demo_round_trips_through_webvtt_to_the_millisecond() {
    // WebVTT timestamps have milliseconds (W3C WebVTT, "WebVTT timestamp"); no word ends.
    round_trip("vtt", 5e-4 + 1e-9, false);
}

#[test]
fn bad_sidecars_are_listed_and_good_clips_come_through() {
    let tmp = tempfile::tempdir().unwrap();
    let site = tmp.path().join("site");
    copy_audio(&site);
    let clips = demo_clips();
    let good = clips.iter().find(|c| c.id == "pick-a-001").unwrap();
    std::fs::write(
        site.join("pick-a-001.tsv"),
        retake::transcript::tsv::write_lines(good.lines.as_ref().unwrap()),
    )
    .unwrap();
    // Two fields on line 3; a time that is not a number on line 4.
    std::fs::write(
        site.join("pick-b-001.tsv"),
        "start\tend\ttext\n0.2\t0.5\tseal\n0.6\t0.9\n1.0\tlater\tdoor\n",
    )
    .unwrap();
    // Longer than its audio (pick-c-001 is under 20 s): line 2 named.
    std::fs::write(
        site.join("pick-c-001.tsv"),
        "0.5\t1.0\tdock\n30.0\t30.5\tnine\n",
    )
    .unwrap();
    // Malformed WebVTT: no header.
    std::fs::write(
        site.join("control-001.vtt"),
        "00:01.000 --> 00:02.000\nhello\n",
    )
    .unwrap();
    // A transcript with no audio of its stem.
    std::fs::write(site.join("ghost-004.tsv"), "0.1\t0.2\tboo\n").unwrap();
    // Two transcripts for one recording.
    std::fs::write(site.join("dock-001.txt"), "door twelve\n").unwrap();
    std::fs::write(site.join("dock-001.tsv"), "0.1\t0.4\tdoor\n").unwrap();
    let o = retake(&["import", site.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    let has = |s: &str| assert!(err.contains(s), "missing `{s}` in:\n{err}");
    has("pick-b-001.tsv line 3: 2 fields");
    has("pick-b-001.tsv line 4: end: `later` is not a time in seconds");
    has("pick-c-001.tsv line 2: end: 30.5 s is past the end of its audio pick-c-001.wav");
    has("control-001.vtt line 1:");
    has("ghost-004.tsv: no audio file with this stem");
    has("2 transcripts share the stem `dock-001`");
    // Clips without any sidecar are listed too.
    has("pick-d-001.wav: no transcript with this stem beside it");
    let written = read_jsonl(&site.join("manifest.jsonl"));
    let ids: Vec<&str> = written.iter().map(|c| c["id"].as_str().unwrap()).collect();
    assert_eq!(ids, ["pick-a-001"]);
}

#[test]
fn import_reads_a_webvtt_file_with_ignored_settings_and_prints_the_warning() {
    // W3C WebVTT §6.3 "Parse the WebVTT cue settings": `align:middle` matches none of the
    // align values and an unknown name matches no substep, so the parser skips both settings
    // and keeps the cue. The import does the same and says so, naming the file and line.
    let tmp = tempfile::tempdir().unwrap();
    let site = tmp.path().join("site");
    copy_audio(&site);
    for e in std::fs::read_dir(&site).unwrap() {
        let p = e.unwrap().path();
        if p.file_stem().unwrap() != "pick-a-001" {
            std::fs::remove_file(p).unwrap();
        }
    }
    std::fs::write(
        site.join("pick-a-001.vtt"),
        "WEBVTT\n\n00:00.237 --> 00:02.919 align:middle\n<v astrid>aisle fourteen bay three \
         confirm\n\n00:03.500 --> 00:05.267 colour:red size:50%\ncheck digit &eacute;five\n",
    )
    .unwrap();
    let o = retake(&["import", site.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(0), "{err}");
    let vtt = site.join("pick-a-001.vtt");
    let warnings: Vec<&str> = err.lines().filter(|l| l.starts_with("warning: ")).collect();
    assert_eq!(warnings.len(), 2, "{err}");
    assert!(
        warnings[0].contains(&format!("{} line 3:", vtt.display()))
            && warnings[0].contains("middle"),
        "{err}"
    );
    assert!(
        warnings[1].contains(&format!("{} line 6:", vtt.display()))
            && warnings[1].contains("colour"),
        "{err}"
    );
    let clips = read_jsonl(&site.join("manifest.jsonl"));
    assert_eq!(clips.len(), 1);
    let lines = clips[0]["lines"].as_array().unwrap();
    assert_eq!(lines.len(), 2);
    // The named reference is decoded (HTML standard: &eacute; is U+00E9).
    assert_eq!(lines[1]["text"], "check digit éfive");
    assert_eq!(
        clips[0]["text"],
        "aisle fourteen bay three confirm check digit éfive"
    );
}
