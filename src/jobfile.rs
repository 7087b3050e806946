//! Ready job files for a sharded run: a Slurm job array with the join as a job that waits
//! for it (`--dependency=afterok`), or a Kubernetes Indexed Job with a join Job to apply
//! after it. Every task runs `retake run ... --shard env/N`: the engine's index is the shard.
//! CPU and memory requests come from the memory model ([`crate::memory`]).

use std::path::{Path, PathBuf};

use serde_json::{Value, json};

/// What every job file of a run says.
#[derive(Debug, Clone)]
pub struct JobSpec {
    /// Name of the jobs (`<name>-shards`, `<name>-join`); lowercase letters, digits and `-`.
    pub name: String,
    /// The `retake` program as the nodes see it.
    pub retake: PathBuf,
    /// Recipe, input manifest and shared output folder, as the nodes see them.
    pub recipe: PathBuf,
    /// The input manifest.
    pub input: PathBuf,
    /// The shared output folder.
    pub out: PathBuf,
    /// Shards (array tasks, Job completions).
    pub shards: usize,
    /// Worker threads (and CPUs asked for) per shard.
    pub threads: usize,
    /// Memory asked for per shard, bytes (from [`crate::memory::process_bytes`]).
    pub shard_memory: u64,
    /// Memory asked for by the join, bytes.
    pub join_memory: u64,
}

/// Where a Kubernetes Job finds its program and the shared folder.
#[derive(Debug, Clone)]
pub struct Container {
    /// The container image holding `retake`.
    pub image: String,
    /// The PersistentVolumeClaim of the shared file system (ReadWriteMany).
    pub claim: String,
    /// Where the claim is mounted; the recipe, input and output folder lie under it.
    pub mount: PathBuf,
}

/// A name is usable for both engines: a DNS label (Kubernetes), short enough that
/// `<name>-shards-<index>` stays a valid pod host name.
pub fn check_name(name: &str) -> Result<(), String> {
    let ok = !name.is_empty()
        && name.len() <= 40
        && name
            .bytes()
            .all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'-')
        && !name.starts_with('-')
        && !name.ends_with('-');
    if ok {
        Ok(())
    } else {
        Err(format!(
            "`{name}`: a job name is 1 to 40 lowercase letters, digits and `-`, not starting or \
             ending with `-`"
        ))
    }
}

/// Whole mebibytes, rounded up: what Slurm's `--mem` and Kubernetes' `Mi` take.
pub fn mebibytes(bytes: u64) -> u64 {
    bytes.div_ceil(1 << 20)
}

/// A word for a POSIX shell: single-quoted unless plainly safe.
pub fn shell_word(s: &str) -> String {
    let plain = !s.is_empty()
        && s.bytes()
            .all(|b| b.is_ascii_alphanumeric() || b"/._-+=:,@%".contains(&b));
    if plain {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', r"'\''"))
    }
}

/// The shell lines that run one retake command and treat its exit 3 (done, some clips
/// rejected: they are in the rejects) as success, so the join still runs.
fn run_tolerating_rejects(command: &str) -> String {
    format!(
        "status=0\n{command} || status=$?\n\
         # 3: done, some clips rejected (listed in the rejects); not a failed task.\n\
         if [ \"$status\" -eq 3 ]; then status=0; fi\nexit \"$status\"\n"
    )
}

/// `retake <verb> RECIPE --input INPUT --out OUT` and what follows.
fn command(spec: &JobSpec, verb: &str, more: &[String]) -> Vec<String> {
    let path = |p: &Path| p.to_string_lossy().into_owned();
    [path(&spec.retake), verb.into(), path(&spec.recipe)]
        .into_iter()
        .chain([
            "--input".into(),
            path(&spec.input),
            "--out".into(),
            path(&spec.out),
        ])
        .chain(more.iter().cloned())
        .collect()
}

fn run_command(spec: &JobSpec) -> Vec<String> {
    let shard = format!("env/{}", spec.shards);
    let threads = spec.threads.to_string();
    command(
        spec,
        "run",
        &["--shard".into(), shard, "--threads".into(), threads],
    )
}

fn join_command(spec: &JobSpec) -> Vec<String> {
    command(spec, "join", &[])
}

fn shell_line(words: &[String]) -> String {
    words
        .iter()
        .map(|w| shell_word(w))
        .collect::<Vec<_>>()
        .join(" ")
}

/// The Slurm array script: one task per shard; `logs` is where the tasks' output goes.
pub fn slurm_shards(spec: &JobSpec, logs: &Path) -> String {
    format!(
        "#!/bin/bash\n\
         # Made by `retake jobs`: one array task per shard of the run below. Submit with\n\
         # submit.sh (the join waits for every task); a task that failed or was cancelled is\n\
         # run again alone with `sbatch --array=K {name}-shards.sbatch` (it keeps the clips\n\
         # it finished), then the join.\n\
         #SBATCH --job-name={name}-shards\n\
         #SBATCH --array=0-{last}\n\
         #SBATCH --ntasks=1\n\
         #SBATCH --cpus-per-task={threads}\n\
         #SBATCH --mem={mem}M\n\
         #SBATCH --output={logs}/{name}-shard-%a-%A.log\n\
         set -uo pipefail\n{body}",
        name = spec.name,
        last = spec.shards - 1,
        threads = spec.threads,
        mem = mebibytes(spec.shard_memory),
        logs = logs.to_string_lossy(),
        body = run_tolerating_rejects(&shell_line(&run_command(spec))),
    )
}

/// The Slurm join script, submitted to wait for the array (`--dependency=afterok`).
pub fn slurm_join(spec: &JobSpec, logs: &Path) -> String {
    format!(
        "#!/bin/bash\n\
         # Made by `retake jobs`: joins the shards into manifest.jsonl and rejects.jsonl once\n\
         # every array task has succeeded (submit.sh gives it --dependency=afterok).\n\
         #SBATCH --job-name={name}-join\n\
         #SBATCH --ntasks=1\n\
         #SBATCH --cpus-per-task=1\n\
         #SBATCH --mem={mem}M\n\
         #SBATCH --output={logs}/{name}-join-%j.log\n\
         set -uo pipefail\n{body}",
        name = spec.name,
        mem = mebibytes(spec.join_memory),
        logs = logs.to_string_lossy(),
        body = run_tolerating_rejects(&shell_line(&join_command(spec))),
    )
}

/// The script that submits the array, then the join after it.
pub fn slurm_submit(spec: &JobSpec) -> String {
    format!(
        "#!/bin/bash\n\
         # Made by `retake jobs`: submit the shards, then the join to run when all succeed.\n\
         set -euo pipefail\n\
         cd \"$(dirname \"$0\")\"\n\
         shards=$(sbatch --parsable {name}-shards.sbatch)\n\
         shards=${{shards%%;*}}\n\
         join=$(sbatch --parsable --dependency=afterok:\"$shards\" {name}-join.sbatch)\n\
         echo \"shards: job $shards ({n} array tasks); join: job ${{join%%;*}} (after them)\"\n",
        name = spec.name,
        n = spec.shards,
    )
}

/// Kubernetes wants `/bin/sh -c` to tell exit 3 from a failure, so the run goes through it.
fn sh_c(words: &[String]) -> Value {
    json!(["/bin/sh", "-c", run_tolerating_rejects(&shell_line(words))])
}

fn pod_spec(c: &Container, command: Value, cpus: usize, memory: u64) -> Value {
    let mem = format!("{}Mi", mebibytes(memory));
    json!({
        "restartPolicy": "Never",
        "containers": [{
            "name": "retake",
            "image": c.image,
            "command": command,
            "resources": {
                "requests": {"cpu": cpus.to_string(), "memory": mem},
                "limits": {"memory": mem},
            },
            "volumeMounts": [{"name": "shared", "mountPath": c.mount.to_string_lossy()}],
        }],
        "volumes": [{"name": "shared", "persistentVolumeClaim": {"claimName": c.claim}}],
    })
}

/// The Kubernetes Indexed Job: one completion per shard, the index as the shard.
pub fn kubernetes_shards(spec: &JobSpec, c: &Container) -> Value {
    json!({
        "apiVersion": "batch/v1",
        "kind": "Job",
        "metadata": {
            "name": format!("{}-shards", spec.name),
            "labels": {"app.kubernetes.io/name": "retake", "app.kubernetes.io/instance": spec.name},
        },
        "spec": {
            "completionMode": "Indexed",
            "completions": spec.shards,
            "parallelism": spec.shards,
            // A pod lost with its node is retried; the shard keeps the clips it finished.
            "backoffLimit": 2 * spec.shards,
            "template": {
                "metadata": {"labels": {"app.kubernetes.io/name": "retake"}},
                "spec": pod_spec(c, sh_c(&run_command(spec)), spec.threads, spec.shard_memory),
            },
        },
    })
}

/// The Kubernetes join Job, to apply once the shards' Job is complete.
pub fn kubernetes_join(spec: &JobSpec, c: &Container) -> Value {
    json!({
        "apiVersion": "batch/v1",
        "kind": "Job",
        "metadata": {
            "name": format!("{}-join", spec.name),
            "labels": {"app.kubernetes.io/name": "retake", "app.kubernetes.io/instance": spec.name},
        },
        "spec": {
            "completions": 1,
            "backoffLimit": 2,
            "template": {
                "metadata": {"labels": {"app.kubernetes.io/name": "retake"}},
                "spec": pod_spec(c, sh_c(&join_command(spec)), 1, spec.join_memory),
            },
        },
    })
}

/// The longest clip of a manifest in seconds ([`crate::memory::clip_seconds`]: its
/// `duration`, else its audio file's header), and how many clips said neither.
///
/// # Errors
/// When the manifest cannot be read.
pub fn longest_clip(input: &Path) -> std::io::Result<(f64, usize)> {
    let manifest = crate::transcript::read_manifest(input)?;
    let mut longest = 0.0f64;
    let mut unknown = 0;
    for e in &manifest.entries {
        let audio = manifest.base().join(&e.clip.audio);
        match crate::memory::clip_seconds(e.clip.duration, &audio) {
            Some(s) => longest = longest.max(s),
            None => unknown += 1,
        }
    }
    Ok((longest, unknown))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shell_words_survive_spaces_and_quotes() {
        assert_eq!(shell_word("/data/a-b_c.toml"), "/data/a-b_c.toml");
        assert_eq!(
            shell_word("my clips/it's.jsonl"),
            r"'my clips/it'\''s.jsonl'"
        );
        assert_eq!(shell_word(""), "''");
    }

    #[test]
    fn names_are_dns_labels() {
        assert!(check_name("site-a-2026").is_ok());
        for bad in ["", "Site", "a_b", "-a", "a-", &"x".repeat(41)] {
            assert!(check_name(bad).is_err(), "{bad}");
        }
    }
}
