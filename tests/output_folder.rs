//! The output folder of `run`, through the real binary: one writer at a time, names that
//! never collide, kept takes only when their inputs are unchanged and their files whole, no
//! output over an input, and after a finished run nothing in `takes/` or `.done/` that the
//! manifest does not list (while files the tool did not write are never touched).

mod common;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use common::{read_jsonl, retake, sine, write_wav_pcm16 as write_wav};

const RECIPE: &str = r#"
seed = 4
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

fn clip(id: &str, audio: &str, secs: f64) -> String {
    serde_json::json!({"id": id, "audio": audio, "duration": secs,
        "lines": [{"start": 0.1, "end": secs - 0.1, "text": "bay four clear"}]})
    .to_string()
}

/// Clips `a` (1.0 s) and `b` (1.5 s) at 16 kHz, the recipe, and the manifest `in.jsonl`.
fn setup(dir: &Path) -> PathBuf {
    write_wav(&dir.join("a.wav"), 16000, &sine(300.0, 1.0, 16000, 0.3));
    write_wav(&dir.join("b.wav"), 16000, &sine(500.0, 1.5, 16000, 0.3));
    std::fs::write(dir.join("recipe.toml"), RECIPE).unwrap();
    let manifest = dir.join("in.jsonl");
    let lines = [clip("a", "a.wav", 1.0), clip("b", "b.wav", 1.5)];
    std::fs::write(&manifest, lines.join("\n") + "\n").unwrap();
    manifest
}

fn run(recipe: &Path, manifest: &Path, out: &Path) -> std::process::Output {
    retake(&[
        "run",
        recipe.to_str().unwrap(),
        "-i",
        manifest.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ])
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).to_string()
}

/// Names of the files in `dir` (not recursive), sorted.
fn names(dir: &Path) -> BTreeSet<String> {
    std::fs::read_dir(dir)
        .map(|d| {
            d.map(|e| e.unwrap().file_name().to_string_lossy().to_string())
                .collect()
        })
        .unwrap_or_default()
}

/// Every file a manifest names (take audio and stems), relative to its folder.
fn listed(out: &Path) -> BTreeSet<String> {
    let mut files = BTreeSet::new();
    for t in read_jsonl(&out.join("manifest.jsonl")) {
        files.insert(t["audio"].as_str().unwrap().to_string());
        for s in t["origin"]["steps"].as_array().unwrap() {
            if let Some(stems) = s["stems"].as_object() {
                files.extend(stems.values().map(|v| v.as_str().unwrap().to_string()));
            }
        }
    }
    files
}

/// Frames and rate of a WAV, read with hound.
fn frames(path: &Path) -> (u32, u32) {
    let r = hound::WavReader::open(path).unwrap();
    (r.spec().sample_rate, r.duration())
}

#[test]
fn a_second_run_into_a_locked_folder_is_refused_at_once_naming_the_holder() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let out = tmp.path().join("out");
    let held = retake::outdir::FolderLock::acquire(&out).unwrap();
    let t = Instant::now();
    let o = run(&tmp.path().join("recipe.toml"), &manifest, &out);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stdout));
    // "At once": no waiting for the holder (the whole run takes about a second here).
    assert!(t.elapsed() < Duration::from_secs(5));
    let err = text(&o.stderr);
    assert!(
        err.contains(&format!("process id {}", std::process::id())),
        "{err}"
    );
    assert!(!out.join("manifest.jsonl").exists() && !out.join("takes").exists());
    drop(held);
    let o = run(&tmp.path().join("recipe.toml"), &manifest, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
}

#[test]
fn files_that_are_not_the_tools_temporary_files_are_left_alone() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let out = tmp.path().join("out");
    std::fs::create_dir_all(out.join("takes")).unwrap();
    std::fs::write(out.join("takes/notes.part"), b"mine").unwrap();
    std::fs::write(out.join("takes/a.t0.wav.part"), b"mine too").unwrap();
    let o = run(&tmp.path().join("recipe.toml"), &manifest, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert_eq!(
        std::fs::read(out.join("takes/notes.part")).unwrap(),
        b"mine"
    );
    assert_eq!(
        std::fs::read(out.join("takes/a.t0.wav.part")).unwrap(),
        b"mine too"
    );
}

#[test]
fn ids_that_shared_a_file_name_get_their_own_takes() {
    let tmp = tempfile::tempdir().unwrap();
    setup(tmp.path());
    let long = "dock-".repeat(60); // 300 bytes: over the 255-byte name limit as it is.
    let manifest = tmp.path().join("in.jsonl");
    let lines = [
        clip("north/dock 1", "a.wav", 1.0),
        clip("north_dock_1-bfc812e8", "b.wav", 1.5),
        clip(&long, "b.wav", 1.5),
    ];
    std::fs::write(&manifest, lines.join("\n") + "\n").unwrap();
    let out = tmp.path().join("out");
    let o = run(&tmp.path().join("recipe.toml"), &manifest, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let takes = read_jsonl(&out.join("manifest.jsonl"));
    assert_eq!(takes.len(), 9);
    let paths: BTreeSet<&str> = takes.iter().map(|t| t["audio"].as_str().unwrap()).collect();
    assert_eq!(paths.len(), 9, "two takes share a file: {paths:?}");
    for t in &takes {
        // Each take's file holds that take's own audio: its length is the record's.
        let (rate, n) = frames(&out.join(t["audio"].as_str().unwrap()));
        let want = (t["duration"].as_f64().unwrap() * f64::from(rate)).round();
        assert_eq!(f64::from(n), want, "{}", t["id"]);
        let name = Path::new(t["audio"].as_str().unwrap()).file_name().unwrap();
        assert!(name.len() < 255, "{}", name.len());
    }
    // Ordinary ids stay readable.
    assert!(
        paths.contains("takes/north_dock_1-bfc812e8.t0.wav"),
        "{paths:?}"
    );
}

#[test]
fn a_changed_noise_file_makes_kept_takes_stale() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let bank = tmp.path().join("bank");
    std::fs::create_dir_all(&bank).unwrap();
    write_wav(&bank.join("fan.wav"), 16000, &common::noise(32000, 1));
    let recipe = tmp.path().join("noisy.toml");
    std::fs::write(
        &recipe,
        "seed = 3\ntakes = 2\n[[step]]\ndo = \"noise\"\nbank = \"bank\"\nsnr_db = 10.0\n",
    )
    .unwrap();
    let out = tmp.path().join("out");
    assert_eq!(run(&recipe, &manifest, &out).status.code(), Some(0));
    let before = std::fs::read(out.join("takes/a.t0.wav")).unwrap();
    let again = run(&recipe, &manifest, &out);
    assert!(
        text(&again.stdout).contains("kept    2 clips"),
        "{}",
        text(&again.stdout)
    );
    // The same bank file, other noise: every take must be made again.
    write_wav(&bank.join("fan.wav"), 16000, &common::noise(32000, 2));
    let o = run(&recipe, &manifest, &out);
    assert_eq!(o.status.code(), Some(0));
    let stdout = text(&o.stdout);
    assert!(!stdout.contains("kept"), "{stdout}");
    assert!(stdout.contains("made    4 takes"), "{stdout}");
    assert_ne!(std::fs::read(out.join("takes/a.t0.wav")).unwrap(), before);
}

#[test]
fn a_truncated_take_is_made_again_and_the_rest_kept() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let recipe = tmp.path().join("recipe.toml");
    let (clean, out) = (tmp.path().join("clean"), tmp.path().join("out"));
    assert_eq!(run(&recipe, &manifest, &clean).status.code(), Some(0));
    assert_eq!(run(&recipe, &manifest, &out).status.code(), Some(0));
    // Cut short after the header (a copy stopped halfway, a disk error): the file exists.
    let take = out.join("takes/a.t1.wav");
    let len = std::fs::metadata(&take).unwrap().len();
    std::fs::OpenOptions::new()
        .write(true)
        .open(&take)
        .unwrap()
        .set_len(len / 2)
        .unwrap();
    let o = run(&recipe, &manifest, &out);
    assert_eq!(o.status.code(), Some(0));
    let stdout = text(&o.stdout);
    assert!(stdout.contains("kept    1 clip (3 takes"), "{stdout}");
    assert!(stdout.contains("made    3 takes"), "{stdout}");
    assert_eq!(
        std::fs::read(&take).unwrap(),
        std::fs::read(clean.join("takes/a.t1.wav")).unwrap()
    );
}

#[test]
fn an_output_over_an_input_is_refused_and_nothing_is_written() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let recipe = tmp.path().join("recipe.toml");
    // The input manifest is where the output manifest would go.
    let data = tmp.path().join("data");
    std::fs::create_dir_all(&data).unwrap();
    let input = data.join("manifest.jsonl");
    let lines = [clip("a", "../a.wav", 1.0), clip("b", "../b.wav", 1.5)];
    std::fs::write(&input, lines.join("\n") + "\n").unwrap();
    let before = std::fs::read(&input).unwrap();
    let o = run(&recipe, &input, &data.join("."));
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stdout));
    let err = text(&o.stderr);
    assert!(
        err.contains("input manifest") && err.contains("manifest.jsonl"),
        "{err}"
    );
    assert_eq!(std::fs::read(&input).unwrap(), before);
    assert_eq!(names(&data), BTreeSet::from(["manifest.jsonl".to_string()]));
    // Audio inside the folder takes are written to, named by a manifest elsewhere.
    let out = tmp.path().join("out");
    assert_eq!(run(&recipe, &manifest, &out).status.code(), Some(0));
    let chained = tmp.path().join("chained.jsonl");
    std::fs::write(&chained, clip("x", "out/takes/a.t0.wav", 1.0) + "\n").unwrap();
    let o = run(&recipe, &chained, &out);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("audio of clip `x`"),
        "{}",
        text(&o.stderr)
    );
    // The recipe itself, where the rejects would go.
    let other = tmp.path().join("other");
    std::fs::create_dir_all(&other).unwrap();
    std::fs::write(other.join("rejects.jsonl"), RECIPE).unwrap();
    let o = run(&other.join("rejects.jsonl"), &manifest, &other);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
    assert!(
        text(&o.stderr).contains("the recipe would be overwritten"),
        "{}",
        text(&o.stderr)
    );
}

#[test]
fn a_rerun_with_fewer_takes_and_clips_leaves_only_what_its_manifest_lists() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let out = tmp.path().join("out");
    std::fs::create_dir_all(out.join("takes")).unwrap();
    // Files the tool did not write: never removed, even when they look like its own.
    std::fs::write(out.join("takes/mine.wav"), b"not a take").unwrap();
    std::fs::write(out.join("takes/a.t7.wav"), b"not a take either").unwrap();
    let recipe = tmp.path().join("recipe.toml");
    assert_eq!(run(&recipe, &manifest, &out).status.code(), Some(0));
    assert_eq!(listed(&out).len(), 6);
    // Two takes instead of three, and clip `b` gone from the input.
    let fewer = tmp.path().join("fewer.toml");
    std::fs::write(&fewer, RECIPE.replace("takes = 3", "takes = 2")).unwrap();
    let only_a = tmp.path().join("only_a.jsonl");
    std::fs::write(&only_a, clip("a", "a.wav", 1.0) + "\n").unwrap();
    let o = run(&fewer, &only_a, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert!(
        text(&o.stdout).contains("removed 5 files"),
        "{}",
        text(&o.stdout)
    );
    let takes: BTreeSet<String> = names(&out.join("takes"))
        .into_iter()
        .map(|n| format!("takes/{n}"))
        .collect();
    let mut want = listed(&out);
    assert_eq!(want.len(), 2);
    want.extend(["takes/mine.wav".to_string(), "takes/a.t7.wav".to_string()]);
    assert_eq!(takes, want);
    assert_eq!(
        names(&out.join(".done")),
        BTreeSet::from(["a.json".to_string()])
    );
    assert_eq!(
        std::fs::read(out.join("takes/mine.wav")).unwrap(),
        b"not a take"
    );
}

#[test]
fn a_manifest_the_run_did_not_write_never_gets_its_audio_removed() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let out = tmp.path().join("out");
    std::fs::create_dir_all(out.join("takes")).unwrap();
    // An imported manifest (no `origin`: not takes) naming a recording under takes/.
    std::fs::write(out.join("takes/user.wav"), b"a recording").unwrap();
    std::fs::write(
        out.join("manifest.jsonl"),
        clip("u", "takes/user.wav", 1.0) + "\n",
    )
    .unwrap();
    let o = run(&tmp.path().join("recipe.toml"), &manifest, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert_eq!(
        std::fs::read(out.join("takes/user.wav")).unwrap(),
        b"a recording"
    );
}

#[test]
fn slice_remap_and_export_respect_the_lock_and_slice_refuses_an_output_over_its_input() {
    let tmp = tempfile::tempdir().unwrap();
    setup(tmp.path());
    let data = tmp.path().join("data");
    std::fs::create_dir_all(&data).unwrap();
    std::fs::copy(tmp.path().join("b.wav"), data.join("b.wav")).unwrap();
    let input = data.join("manifest.jsonl");
    std::fs::write(&input, clip("b", "b.wav", 1.5) + "\n").unwrap();
    let slice = |out: &Path| {
        retake(&[
            "slice",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--shortest",
            "0.5",
        ])
    };
    let before = std::fs::read(&input).unwrap();
    let o = slice(&data);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
    assert!(
        text(&o.stderr).contains("input manifest"),
        "{}",
        text(&o.stderr)
    );
    assert_eq!(std::fs::read(&input).unwrap(), before);
    let out = tmp.path().join("out");
    let held = retake::outdir::FolderLock::acquire(&out).unwrap();
    let pid = format!("process id {}", std::process::id());
    let o = slice(&out);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains(&pid), "{}", text(&o.stderr));
    let labels = tmp.path().join("labels");
    std::fs::create_dir_all(&labels).unwrap();
    let o = retake(&[
        "remap",
        input.to_str().unwrap(),
        labels.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains(&pid), "{}", text(&o.stderr));
    let o = retake(&[
        "export",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains(&pid), "{}", text(&o.stderr));
    assert!(!out.join("b.vtt").exists());
    drop(held);
    assert_eq!(
        slice(&out).status.code(),
        Some(0),
        "{}",
        text(&slice(&out).stderr)
    );
}

#[test]
fn a_changed_measured_response_makes_kept_takes_stale() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = setup(tmp.path());
    let irs = tmp.path().join("irs");
    std::fs::create_dir_all(&irs).unwrap();
    // A response: a direct path, then a decaying tail (invented, 0.1 s).
    let response = |decay: f32| -> Vec<f32> {
        (0..1600)
            .map(|i| {
                if i == 0 {
                    1.0
                } else {
                    0.3 * (-(i as f32) / decay).exp() * if i % 2 == 0 { 1.0 } else { -1.0 }
                }
            })
            .collect()
    };
    common::write_wav_float(&irs.join("aisle.wav"), 16000, &response(200.0));
    let recipe = tmp.path().join("room.toml");
    std::fs::write(
        &recipe,
        "seed = 3\ntakes = 1\n[[step]]\ndo = \"room\"\nirs = \"irs\"\n",
    )
    .unwrap();
    let out = tmp.path().join("out");
    let o = run(&recipe, &manifest, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert!(text(&run(&recipe, &manifest, &out).stdout).contains("kept    2 clips"));
    let before = std::fs::read(out.join("takes/a.t0.wav")).unwrap();
    common::write_wav_float(&irs.join("aisle.wav"), 16000, &response(600.0));
    let stdout = text(&run(&recipe, &manifest, &out).stdout);
    assert!(
        !stdout.contains("kept") && stdout.contains("made    2 takes"),
        "{stdout}"
    );
    assert_ne!(std::fs::read(out.join("takes/a.t0.wav")).unwrap(), before);
}
