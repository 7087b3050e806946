//! On a real cluster engine: the job files of `retake jobs --for slurm` submitted to the
//! local one-node Slurm that `.ci/run` starts (`dev/slurm-local`), over the demo clips
//! repeated to 200, joined by the dependent job, compared byte for byte with a run on one
//! machine; and a task cancelled mid-run, resubmitted alone, joined: identical.
//!
//! Without a Slurm controller answering `sinfo` these tests say they are skipped and why;
//! with `CI=true` a missing Slurm is a failure.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::{Mutex, OnceLock};
use std::time::{Duration, Instant};

use common::{demo, retake};
use retake::shard::{Shard, keep};
use retake::transcript::read_manifest;

/// Demo clips repeated to this many.
const CLIPS: usize = 200;
/// Array tasks.
const SHARDS: usize = 4;
/// Longest a test waits for Slurm.
const PATIENCE: Duration = Duration::from_secs(900);

/// Speed, room, noise and gain: every kind of step record, and slow enough in a debug build
/// (about 0.4 s a clip on one thread) that a task can be caught mid-run.
fn recipe_text() -> String {
    format!(
        "seed = 9\ntakes = 3\nkeep_source = true\nrate = 16000\n\n\
         [[step]]\ndo = \"speed\"\nfactor = [0.9, 1.0, 1.1]\n\n\
         [[step]]\ndo = \"room\"\nwidth_m = {{ low = 4.0, high = 8.0 }}\n\
         length_m = {{ low = 12.0, high = 30.0 }}\nheight_m = {{ low = 5.0, high = 9.0 }}\n\
         rt60_s = {{ low = 0.4, high = 1.0 }}\ndrr_db = {{ low = 0.0, high = 10.0 }}\nchance = 0.5\n\n\
         [[step]]\ndo = \"noise\"\nbank = \"{}\"\nsnr_db = {{ low = 5.0, high = 25.0 }}\n\n\
         [[step]]\ndo = \"gain\"\ndb = {{ low = -6.0, high = 6.0 }}\n",
        demo().join("noise").display()
    )
}

/// Whether Slurm answers here; a skip (with the reason) locally, a failure under CI=true.
fn slurm_or_skip(test: &str) -> bool {
    let answer = Command::new("sinfo").args(["-h", "-o", "%T"]).output();
    let reason = match answer {
        Err(e) => format!("`sinfo` cannot run ({e}): Slurm is not installed"),
        Ok(o) if !o.status.success() => format!(
            "`sinfo` failed: {}",
            String::from_utf8_lossy(&o.stderr).trim()
        ),
        Ok(o) => {
            let states = String::from_utf8_lossy(&o.stdout).to_string();
            if states
                .lines()
                .any(|s| matches!(s.trim(), "idle" | "mixed" | "allocated"))
            {
                return true;
            }
            format!("no node up in `sinfo` (states: {})", states.trim())
        }
    };
    if std::env::var("CI").is_ok_and(|v| v == "true") {
        panic!(
            "{test}: CI=true needs Slurm running ({reason}); .ci/run starts it with dev/slurm-local"
        );
    }
    eprintln!("SKIPPED {test}: {reason}; as root, `dev/slurm-local` starts a one-node Slurm");
    false
}

/// One Slurm test at a time: they share the node's two CPUs.
fn one_at_a_time() -> std::sync::MutexGuard<'static, ()> {
    static LOCK: Mutex<()> = Mutex::new(());
    LOCK.lock().unwrap_or_else(|e| e.into_inner())
}

struct Setup {
    _dir: tempfile::TempDir,
    root: PathBuf,
    recipe: PathBuf,
    input: PathBuf,
    /// The run on one machine, the reference.
    whole: PathBuf,
}

/// The 200-clip input, the recipe and the one-machine run, made once for both tests.
fn setup() -> &'static Setup {
    static SETUP: OnceLock<Setup> = OnceLock::new();
    SETUP.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path().to_path_buf();
        let clips = demo().join("clips");
        let demo_lines: Vec<serde_json::Value> =
            std::fs::read_to_string(demo().join("manifest.jsonl"))
                .unwrap()
                .lines()
                .map(|l| serde_json::from_str(l).unwrap())
                .collect();
        let mut lines = Vec::new();
        for i in 0..CLIPS {
            let mut clip = demo_lines[i % demo_lines.len()].clone();
            let id = format!(
                "{}-r{:02}",
                clip["id"].as_str().unwrap(),
                i / demo_lines.len()
            );
            let audio = clips.join(
                Path::new(clip["audio"].as_str().unwrap())
                    .file_name()
                    .unwrap(),
            );
            clip["id"] = id.into();
            clip["audio"] = audio.display().to_string().into();
            lines.push(clip.to_string());
        }
        let input = root.join("in.jsonl");
        std::fs::write(&input, lines.join("\n") + "\n").unwrap();
        let recipe = root.join("recipe.toml");
        std::fs::write(&recipe, recipe_text()).unwrap();
        let whole = root.join("whole");
        let started = Instant::now();
        let o = retake(&[
            "run",
            recipe.to_str().unwrap(),
            "-i",
            input.to_str().unwrap(),
            "-o",
            whole.to_str().unwrap(),
        ]);
        assert_eq!(
            o.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        eprintln!(
            "one-machine run of {CLIPS} clips: {:.1} s",
            started.elapsed().as_secs_f64()
        );
        Setup {
            _dir: dir,
            root,
            recipe,
            input,
            whole,
        }
    })
}

/// `retake jobs --for slurm` into `jobs/`, one thread per task; returns the folder.
fn job_files(s: &Setup, name: &str, out: &Path) -> PathBuf {
    let jobs = s.root.join(format!("jobs-{name}"));
    let o = retake(&[
        "jobs",
        s.recipe.to_str().unwrap(),
        "-i",
        s.input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--shards",
        &SHARDS.to_string(),
        "--threads",
        "1",
        "--name",
        name,
        "--to",
        jobs.to_str().unwrap(),
        "--retake",
        env!("CARGO_BIN_EXE_retake"),
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    jobs
}

fn sh(program: &str, args: &[&str], dir: &Path) -> String {
    let o = Command::new(program)
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{program} {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// The job ids submit.sh prints: (array job, join job).
fn submit(jobs: &Path) -> (String, String) {
    let said = sh("bash", &["submit.sh"], jobs);
    let ids: Vec<&str> = said
        .split_whitespace()
        .filter(|w| w.bytes().all(|b| b.is_ascii_digit()))
        .collect();
    assert!(ids.len() >= 2, "submit.sh said: {said}");
    (ids[0].to_string(), ids[ids.len() - 1].to_string())
}

/// Every task's state (`scontrol show job`): (array index or None, state).
fn states(job: &str) -> Vec<(Option<usize>, String)> {
    let o = Command::new("scontrol")
        .args(["show", "job", job])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    let mut out = Vec::new();
    let mut task = None;
    for word in text.split_whitespace() {
        if let Some(t) = word.strip_prefix("ArrayTaskId=") {
            task = t.parse().ok();
        }
        if let Some(s) = word.strip_prefix("JobState=") {
            out.push((task.take(), s.to_string()));
        }
    }
    out
}

/// Wait until no task of `job` is pending or running, or fail after [`PATIENCE`].
fn wait_done(job: &str, started: Instant) {
    loop {
        let live = states(job).iter().any(|(_, s)| {
            matches!(
                s.as_str(),
                "PENDING" | "RUNNING" | "CONFIGURING" | "COMPLETING"
            )
        });
        if !live {
            return;
        }
        assert!(
            started.elapsed() < PATIENCE,
            "job {job} still running: {:?}",
            states(job)
        );
        std::thread::sleep(Duration::from_millis(200));
    }
}

/// The sharded output equals the one-machine run: 200 clips x 3 takes, their completion
/// records, manifest, rejects and lock.
fn assert_same_as_whole(whole: &Path, out: &Path) {
    let files = common::assert_same_output_but_parts(whole, out);
    assert_eq!(files, CLIPS * 3 + CLIPS + 3);
}

#[test]
fn a_slurm_array_and_its_join_make_what_one_machine_makes() {
    if !slurm_or_skip("a_slurm_array_and_its_join_make_what_one_machine_makes") {
        return;
    }
    let _one = one_at_a_time();
    let s = setup();
    let out = s.root.join("array");
    let jobs = job_files(s, "retake-array", &out);
    let started = Instant::now();
    let (array, join) = submit(&jobs);
    wait_done(&array, started);
    wait_done(&join, started);
    eprintln!(
        "{SHARDS}-task array and join over {CLIPS} clips: {:.1} s",
        started.elapsed().as_secs_f64()
    );
    let tasks = states(&array);
    assert_eq!(tasks.len(), SHARDS, "{tasks:?}");
    assert!(tasks.iter().all(|(_, s)| s == "COMPLETED"), "{tasks:?}");
    assert_eq!(states(&join), [(None, "COMPLETED".to_string())]);
    assert_same_as_whole(&s.whole, &out);
}

#[test]
fn a_task_cancelled_mid_run_and_resubmitted_joins_to_the_same_output() {
    if !slurm_or_skip("a_task_cancelled_mid_run_and_resubmitted_joins_to_the_same_output") {
        return;
    }
    let _one = one_at_a_time();
    let s = setup();
    let out = s.root.join("cancelled");
    let jobs = job_files(s, "retake-cancel", &out);
    // The clips of shard 1, as every shard computes them.
    let mut mine = read_manifest(&s.input).unwrap();
    keep(
        &mut mine,
        Shard {
            index: 1,
            count: SHARDS,
        },
    );
    let records: Vec<PathBuf> = mine
        .entries
        .iter()
        .map(|e| out.join(".done").join(format!("{}.json", e.clip.id)))
        .collect();
    let done = || records.iter().filter(|r| r.exists()).count();

    let started = Instant::now();
    let (array, join) = submit(&jobs);
    // Mid-run: a few of its clips finished, its part record not yet written.
    while done() < 3 {
        assert!(
            started.elapsed() < PATIENCE,
            "shard 1 never started: {:?}",
            states(&array)
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    sh("scancel", &[&format!("{array}_1")], &s.root);
    wait_done(&array, started);
    let finished = done();
    let tasks = states(&array);
    let task1 = tasks
        .iter()
        .find(|(t, _)| *t == Some(1))
        .map(|(_, s)| s.clone());
    assert_eq!(task1.as_deref(), Some("CANCELLED"), "{tasks:?}");
    assert!(
        finished < records.len() && !out.join("parts/1-of-4.json").exists(),
        "the cancel came too late: shard 1 had finished {finished} of {} clips",
        records.len()
    );
    // The join waits for a dependency that will never be met; the join itself refuses.
    let join_state = states(&join);
    assert_eq!(
        join_state,
        [(None, "PENDING".to_string())],
        "{join_state:?}"
    );
    sh("scancel", &[&join], &s.root);
    let o = retake(&[
        "join",
        s.recipe.to_str().unwrap(),
        "-i",
        s.input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        String::from_utf8_lossy(&o.stderr).contains("shard 1/4 did not finish"),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );

    // Resubmit index 1 alone, then the join after it.
    let again = sh(
        "sbatch",
        &["--parsable", "--array=1", "retake-cancel-shards.sbatch"],
        &jobs,
    );
    let again = again.trim().split(';').next().unwrap().to_string();
    let join2 = sh(
        "sbatch",
        &[
            "--parsable",
            &format!("--dependency=afterok:{again}"),
            "retake-cancel-join.sbatch",
        ],
        &jobs,
    );
    let join2 = join2.trim().split(';').next().unwrap().to_string();
    wait_done(&again, started);
    wait_done(&join2, started);
    eprintln!(
        "cancel at {finished} of {} clips of shard 1, resubmit, join: {:.1} s in all",
        records.len(),
        started.elapsed().as_secs_f64()
    );
    assert_eq!(states(&again), [(Some(1), "COMPLETED".to_string())]);
    assert_eq!(states(&join2), [(None, "COMPLETED".to_string())]);
    assert_same_as_whole(&s.whole, &out);
}
