//! `retake jobs`: write the job files of a sharded run (Slurm or Kubernetes) and say how to
//! submit them.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use super::Exit;

use retake::files::write_atomically;
use retake::jobfile::{self, Container, JobSpec};
use retake::{memory, recipe};

/// The cluster engine the files are for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Engine {
    /// A Slurm job array plus a join job (`sbatch`).
    Slurm,
    /// A Kubernetes Indexed Job plus a join Job (`kubectl apply`).
    Kubernetes,
}

/// Arguments of `retake jobs`.
#[derive(Debug, clap::Args)]
pub struct JobsArgs {
    /// The recipe (TOML).
    recipe: PathBuf,
    /// Input manifest (JSON Lines).
    #[arg(long, short)]
    input: PathBuf,
    /// The shared output folder every shard writes into.
    #[arg(long, short)]
    out: PathBuf,
    /// How many shards (array tasks, Job completions).
    #[arg(long, value_parser = clap::value_parser!(u32).range(1..=100_000))]
    shards: u32,
    /// Worker threads (and CPUs asked for) per shard.
    #[arg(long, short = 'j', default_value_t = 2, value_parser = clap::value_parser!(u32).range(1..=1024))]
    threads: u32,
    /// The engine.
    #[arg(long = "for", value_enum, default_value = "slurm")]
    engine: Engine,
    /// Folder to write the job files into.
    #[arg(long, default_value = "retake-jobs")]
    to: PathBuf,
    /// Name of the jobs: `<name>-shards`, `<name>-join`.
    #[arg(long, default_value = "retake")]
    name: String,
    /// The retake program as the nodes see it [default: this one (Slurm), `retake` (Kubernetes)].
    #[arg(long)]
    retake: Option<PathBuf>,
    /// Kubernetes: the container image holding retake.
    #[arg(long, required_if_eq("engine", "kubernetes"))]
    image: Option<String>,
    /// Kubernetes: the PersistentVolumeClaim (ReadWriteMany) of the shared folder.
    #[arg(long, required_if_eq("engine", "kubernetes"))]
    claim: Option<String>,
    /// Kubernetes: where the claim is mounted; recipe, input and output lie under it.
    #[arg(long, required_if_eq("engine", "kubernetes"))]
    mount: Option<PathBuf>,
}

fn absolute(p: &Path) -> PathBuf {
    std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf())
}

pub fn jobs(args: JobsArgs) -> ExitCode {
    if let Err(e) = jobfile::check_name(&args.name) {
        eprintln!("retake: --name {e}");
        return Exit::Usage.into();
    }
    let plan = match recipe::load(&args.recipe) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("retake: recipe error: {e}");
            return Exit::Usage.into();
        }
    };
    let (longest, unknown) = match jobfile::longest_clip(&args.input) {
        Ok(l) => l,
        Err(e) => {
            eprintln!(
                "retake: {}: cannot read manifest: {e}",
                args.input.display()
            );
            return Exit::Failed.into();
        }
    };
    let threads = args.threads as usize;
    let banks = memory::input_bytes(&plan);
    let retake = args.retake.clone().unwrap_or_else(|| match args.engine {
        Engine::Slurm => std::env::current_exe().unwrap_or_else(|_| "retake".into()),
        Engine::Kubernetes => "retake".into(),
    });
    let spec = JobSpec {
        name: args.name.clone(),
        retake,
        recipe: absolute(&args.recipe),
        input: absolute(&args.input),
        out: absolute(&args.out),
        shards: args.shards as usize,
        threads,
        shard_memory: memory::process_bytes(&plan, longest, threads, banks),
        join_memory: memory::FIXED_BYTES + (256 << 20),
    };
    let to = &args.to;
    let files: Vec<(String, String)> = match args.engine {
        Engine::Slurm => {
            let logs = absolute(to);
            vec![
                (
                    format!("{}-shards.sbatch", spec.name),
                    jobfile::slurm_shards(&spec, &logs),
                ),
                (
                    format!("{}-join.sbatch", spec.name),
                    jobfile::slurm_join(&spec, &logs),
                ),
                ("submit.sh".into(), jobfile::slurm_submit(&spec)),
            ]
        }
        Engine::Kubernetes => {
            let c = Container {
                image: args.image.clone().unwrap_or_default(),
                claim: args.claim.clone().unwrap_or_default(),
                mount: args.mount.clone().unwrap_or_default(),
            };
            for p in [&spec.recipe, &spec.input, &spec.out] {
                if !p.starts_with(&c.mount) {
                    eprintln!(
                        "retake: {} is not under --mount {}: the pods would not see it",
                        p.display(),
                        c.mount.display()
                    );
                    return Exit::Usage.into();
                }
            }
            let pretty = |v| serde_json::to_string_pretty(&v).unwrap_or_default() + "\n";
            vec![
                (
                    format!("{}-shards.job.json", spec.name),
                    pretty(jobfile::kubernetes_shards(&spec, &c)),
                ),
                (
                    format!("{}-join.job.json", spec.name),
                    pretty(jobfile::kubernetes_join(&spec, &c)),
                ),
            ]
        }
    };
    if let Err(e) = std::fs::create_dir_all(to) {
        eprintln!("retake: {}: cannot make the folder: {e}", to.display());
        return Exit::Failed.into();
    }
    for (name, text) in &files {
        let path = to.join(name);
        if let Err(e) = write_atomically(&path, |w| std::io::Write::write_all(w, text.as_bytes())) {
            eprintln!("retake: {}: cannot write: {e}", path.display());
            return Exit::Failed.into();
        }
        #[cfg(unix)]
        if name.ends_with(".sh") || name.ends_with(".sbatch") {
            use std::os::unix::fs::PermissionsExt;
            let _ = std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o755));
        }
        println!("wrote   {}", path.display());
    }
    println!(
        "memory  {} MiB per shard: {threads} workers x {longest:.1} s longest clip x {:.0} kB/s (memory model, docs/cluster.md)",
        jobfile::mebibytes(spec.shard_memory),
        memory::bytes_per_second(&plan) / 1000.0
    );
    if unknown > 0 {
        println!(
            "warning {} without a duration or a readable header: not counted in the memory asked for",
            super::count(unknown, "clip")
        );
    }
    match args.engine {
        Engine::Slurm => println!("submit  bash {}", to.join("submit.sh").display()),
        Engine::Kubernetes => {
            let n = &spec.name;
            println!(
                "submit  kubectl apply -f {shards} && kubectl wait --for=condition=complete --timeout=-1s job/{n}-shards && kubectl apply -f {join}",
                shards = to.join(format!("{n}-shards.job.json")).display(),
                join = to.join(format!("{n}-join.job.json")).display(),
            );
        }
    }
    Exit::Done.into()
}
