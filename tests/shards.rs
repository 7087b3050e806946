//! Sharded runs of the real binary: every shard of N = 1, 2, 3, 7 into one folder, joined,
//! equals a run on one machine byte for byte; the join refuses missing, unfinished and
//! foreign shards, naming them; a sharded rerun cleans up after an earlier whole run.

mod common;

use std::path::{Path, PathBuf};

use common::{demo, files_under, read_jsonl, retake};

/// Cheap enough for a debug binary, still every kind of record: two takes, a speed draw.
const RECIPE: &str = "seed = 3\ntakes = 2\nkeep_source = true\nrate = 16000\n\n[[step]]\ndo = \"speed\"\nfactor = [0.9, 1.1]\n\n[[step]]\ndo = \"gain\"\ndb = { low = -3.0, high = 3.0 }\n";

/// The demo clips with absolute audio paths, a line that is not a clip and a clip whose
/// audio is missing, so rejects come from both kinds of line.
fn setup(dir: &Path) -> (PathBuf, PathBuf) {
    let clips = demo().join("clips");
    let mut lines: Vec<String> = std::fs::read_to_string(demo().join("manifest.jsonl"))
        .unwrap()
        .lines()
        .map(|l| l.replace("\"clips/", &format!("\"{}/", clips.display())))
        .collect();
    lines.insert(3, "{not json".into());
    lines.insert(
        7,
        r#"{"id": "gone", "audio": "nowhere.wav", "text": "x"}"#.into(),
    );
    let input = dir.join("in.jsonl");
    std::fs::write(&input, lines.join("\n") + "\n").unwrap();
    let recipe = dir.join("recipe.toml");
    std::fs::write(&recipe, RECIPE).unwrap();
    (recipe, input)
}

fn run(recipe: &Path, input: &Path, out: &Path, extra: &[&str]) -> std::process::Output {
    let mut args = vec![
        "run",
        recipe.to_str().unwrap(),
        "-i",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    retake(&args)
}

fn join(recipe: &Path, input: &Path, out: &Path) -> std::process::Output {
    retake(&[
        "join",
        recipe.to_str().unwrap(),
        "-i",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ])
}

fn stderr(o: &std::process::Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn every_split_joins_to_the_one_machine_output() {
    let tmp = tempfile::tempdir().unwrap();
    let (recipe, input) = setup(tmp.path());
    let whole = tmp.path().join("whole");
    let o = run(&recipe, &input, &whole, &[]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    assert_eq!(read_jsonl(&whole.join("rejects.jsonl")).len(), 2);
    let clips = read_jsonl(&whole.join("manifest.jsonl")).len() / 2;
    assert_eq!(clips, 10);
    for n in [1usize, 2, 3, 7] {
        let out = tmp.path().join(format!("split{n}"));
        let mut seen: Vec<String> = Vec::new();
        for k in 0..n {
            let shard = format!("{k}/{n}");
            let o = run(&recipe, &input, &out, &["--shard", &shard]);
            assert!(
                matches!(o.status.code(), Some(0 | 3)),
                "{shard}: {}",
                stderr(&o)
            );
            assert!(
                !out.join("manifest.jsonl").exists(),
                "a shard writes only its parts"
            );
            let part = out.join(format!("parts/{k}-of-{n}.manifest.jsonl"));
            for t in read_jsonl(&part) {
                seen.push(t["origin"]["source"].as_str().unwrap().to_string());
            }
        }
        seen.dedup();
        let before = seen.len();
        seen.sort();
        seen.dedup();
        assert_eq!(before, clips, "N={n}: a clip appears in two shards");
        assert_eq!(seen.len(), clips, "N={n}: the shards hold every clip once");
        let o = join(&recipe, &input, &out);
        assert_eq!(o.status.code(), Some(3), "N={n}: {}", stderr(&o));
        common::assert_same_output_but_parts(&whole, &out);
    }
}

#[test]
fn the_join_names_missing_unfinished_and_foreign_shards() {
    let tmp = tempfile::tempdir().unwrap();
    let (recipe, input) = setup(tmp.path());
    let out = tmp.path().join("out");
    let o = join(&recipe, &input, &out);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("no shard parts here"), "{}", stderr(&o));

    for k in [0, 2] {
        let o = run(&recipe, &input, &out, &["--shard", &format!("{k}/3")]);
        assert!(matches!(o.status.code(), Some(0 | 3)), "{}", stderr(&o));
    }
    let o = join(&recipe, &input, &out);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        stderr(&o).contains("shard 1/3 is missing"),
        "{}",
        stderr(&o)
    );
    assert!(!out.join("manifest.jsonl").exists());

    // Started but not finished: its lock is there, its record is not.
    std::fs::write(out.join("parts/1-of-3.lock"), "").unwrap();
    let o = join(&recipe, &input, &out);
    assert!(
        stderr(&o).contains("shard 1/3 did not finish"),
        "{}",
        stderr(&o)
    );

    // Another recipe for shard 1, another input for shard 2.
    let other = tmp.path().join("other.toml");
    std::fs::write(&other, RECIPE.replace("seed = 3", "seed = 4")).unwrap();
    let o = run(&other, &input, &out, &["--shard", "1/3"]);
    assert!(matches!(o.status.code(), Some(0 | 3)), "{}", stderr(&o));
    let fewer = tmp.path().join("fewer.jsonl");
    let text = std::fs::read_to_string(&input).unwrap();
    std::fs::write(
        &fewer,
        text.lines().take(5).collect::<Vec<_>>().join("\n") + "\n",
    )
    .unwrap();
    let o = run(&recipe, &fewer, &out, &["--shard", "2/3"]);
    assert!(matches!(o.status.code(), Some(0 | 3)), "{}", stderr(&o));
    std::fs::write(out.join("parts/0-of-2.lock"), "").unwrap();
    let o = join(&recipe, &input, &out);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{e}");
    assert!(e.contains("shard 1/3 was made with another recipe"), "{e}");
    assert!(
        e.contains("shard 2/3 was made from another input manifest"),
        "{e}"
    );
    assert!(e.contains("parts/0-of-2.lock belongs to a split"), "{e}");
    assert!(!out.join("manifest.jsonl").exists());

    // Made again as asked, the join goes through.
    std::fs::remove_file(out.join("parts/0-of-2.lock")).unwrap();
    for k in [1, 2] {
        let o = run(&recipe, &input, &out, &["--shard", &format!("{k}/3")]);
        assert!(matches!(o.status.code(), Some(0 | 3)), "{}", stderr(&o));
    }
    let o = join(&recipe, &input, &out);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let whole = tmp.path().join("whole");
    run(&recipe, &input, &whole, &[]);
    common::assert_same_output_but_parts(&whole, &out);
}

#[test]
fn a_sharded_rerun_removes_what_an_earlier_whole_run_made_and_it_did_not() {
    let tmp = tempfile::tempdir().unwrap();
    let (recipe, input) = setup(tmp.path());
    let out = tmp.path().join("out");
    let three = tmp.path().join("three.toml");
    std::fs::write(&three, RECIPE.replace("takes = 2", "takes = 3")).unwrap();
    let o = run(&three, &input, &out, &[]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    assert!(out.join("takes/dock-001.t2.wav").exists());
    for k in 0..2 {
        run(&recipe, &input, &out, &["--shard", &format!("{k}/2")]);
        // No manifest lists audio the shards are remaking.
        assert!(!out.join("manifest.jsonl").exists());
    }
    let o = join(&recipe, &input, &out);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    assert!(String::from_utf8_lossy(&o.stdout).contains("removed 10 files"));
    let whole = tmp.path().join("whole");
    run(&recipe, &input, &whole, &[]);
    common::assert_same_output_but_parts(&whole, &out);
    let left: Vec<String> = files_under(&out.join("parts"))
        .into_iter()
        .map(|f| f.0)
        .collect();
    assert!(
        left.iter().all(|n| !n.starts_with("earlier-")),
        "the set-aside manifest is gone after the join: {left:?}"
    );

    // A whole run into the folder remakes the takes: the old parts can no longer be joined.
    let o = run(&three, &input, &out, &[]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let o = join(&recipe, &input, &out);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        stderr(&o).contains("shard 0/2 did not finish"),
        "{}",
        stderr(&o)
    );
    assert_eq!(
        read_jsonl(&out.join("manifest.jsonl")).len(),
        30,
        "the whole run's manifest stays"
    );
}

#[test]
fn shard_from_the_environment_and_its_errors() {
    let tmp = tempfile::tempdir().unwrap();
    let (recipe, input) = setup(tmp.path());
    let out = tmp.path().join("out");
    let bin = env!("CARGO_BIN_EXE_retake");
    let with_env = |vars: &[(&str, &str)], shard: &str| {
        let mut c = std::process::Command::new(bin);
        c.args([
            "run",
            recipe.to_str().unwrap(),
            "-i",
            input.to_str().unwrap(),
        ])
        .args(["-o", out.to_str().unwrap(), "--shard", shard]);
        for v in [
            "SLURM_ARRAY_TASK_ID",
            "SLURM_ARRAY_TASK_MIN",
            "SLURM_ARRAY_TASK_MAX",
            "SLURM_ARRAY_TASK_COUNT",
            "JOB_COMPLETION_INDEX",
        ] {
            c.env_remove(v);
        }
        c.envs(vars.iter().copied());
        c.output().unwrap()
    };
    let o = with_env(&[], "env");
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("neither SLURM_ARRAY_TASK_ID"),
        "{}",
        stderr(&o)
    );
    let o = with_env(&[("JOB_COMPLETION_INDEX", "1")], "env");
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("env/N"), "{}", stderr(&o));
    let o = with_env(&[("JOB_COMPLETION_INDEX", "1")], "env/2");
    assert!(matches!(o.status.code(), Some(0 | 3)), "{}", stderr(&o));
    assert!(out.join("parts/1-of-2.json").exists());
    let slurm = [
        ("SLURM_ARRAY_TASK_ID", "5"),
        ("SLURM_ARRAY_TASK_MIN", "5"),
        ("SLURM_ARRAY_TASK_MAX", "6"),
        ("SLURM_ARRAY_TASK_COUNT", "2"),
    ];
    let o = with_env(&slurm, "env");
    assert!(matches!(o.status.code(), Some(0 | 3)), "{}", stderr(&o));
    assert!(out.join("parts/0-of-2.json").exists());
    let o = join(&recipe, &input, &out);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let o = retake(&["run", "x.toml", "-i", "y", "-o", "z", "--shard", "2/2"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("counted from 0 to 1"), "{}", stderr(&o));
}
