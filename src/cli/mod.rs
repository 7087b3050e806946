//! Command-line front end: parse, call the library, print. No signal processing here.

mod bank;
mod check;
mod demo;
mod export;
mod import;
mod jobs;
mod join;
mod plan;
mod progress;
mod remap;
mod report;
mod run;
mod slice;

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{CommandFactory, Parser, Subcommand};
use retake::audio::ChannelPolicy;
use retake::export::Format;
use retake::shard::ShardArg;

/// How a command ended; the one place an ending becomes an exit status (the table in the
/// README's "Exit status" section).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Exit {
    /// Everything asked for was done: 0.
    Done,
    /// The command finished, but some inputs were rejected or had problems: 3.
    DoneWithRejects,
    /// The command line or the recipe is wrong; nothing was written: 2.
    Usage,
    /// The command could not start or finish (unreadable input, full disk): 1.
    Failed,
}

impl Exit {
    /// The process exit status for this ending.
    pub fn code(self) -> u8 {
        match self {
            Exit::Done => 0,
            Exit::Failed => 1,
            Exit::Usage => 2,
            Exit::DoneWithRejects => 3,
        }
    }
}

impl From<Exit> for ExitCode {
    fn from(o: Exit) -> ExitCode {
        ExitCode::from(o.code())
    }
}

/// Grow a small, time-aligned speech set into a large augmented one, labels kept aligned.
#[derive(Debug, Parser)]
#[command(name = "retake", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Make a manifest from a folder of recordings with transcripts beside them.
    ///
    /// Each audio file pairs with the `.vtt` (WebVTT), `.tsv` (word rows) or `.txt` (untimed
    /// text) of the same stem.
    Import {
        /// The folder (walked with its subfolders).
        dir: PathBuf,
        /// The manifest to write [default: DIR/manifest.jsonl].
        #[arg(long, short)]
        out: Option<PathBuf>,
        /// Multichannel audio: `mix` or a channel number from 0 (used to measure length).
        #[arg(long, value_parser = parse_channels, default_value = "mix")]
        channels: ChannelPolicy,
    },
    /// Validate a manifest and its audio; one message per problem.
    Check {
        /// The manifest to check.
        manifest: PathBuf,
    },
    /// Split long recordings into clips between two lengths, only in gaps between words.
    Slice(slice::SliceArgs),
    /// Describe a noise bank: per file its part, length, level, centroid and steadiness.
    Bank {
        /// The bank folder (first-level subfolders are categories).
        dir: PathBuf,
        /// Sample rate the files are brought to, Hz.
        #[arg(
            long,
            default_value_t = 16_000,
            value_parser = clap::value_parser!(u32).range(1..)
        )]
        rate: u32,
        /// Fraction of the files set aside as the held-out part, from 0 to 1.
        #[arg(
            long = "held-out",
            value_name = "FRACTION",
            default_value_t = 0.0,
            value_parser = parse_fraction
        )]
        held_out: f64,
    },
    /// Make takes of every clip in a manifest, as a recipe says.
    Run {
        /// The recipe (TOML).
        recipe: PathBuf,
        /// Input manifest (JSON Lines, one clip per line).
        #[arg(long, short)]
        input: PathBuf,
        /// Output folder: takes/, manifest.jsonl and rejects.jsonl are written here.
        #[arg(long, short)]
        out: PathBuf,
        /// Worker threads (default: one per core).
        #[arg(long, short = 'j', value_parser = parse_threads)]
        threads: Option<usize>,
        /// Multichannel input: `mix` (mean of channels) or a channel number from 0.
        /// Overrides the recipe's `channels`.
        #[arg(long, value_parser = parse_channels)]
        channels: Option<ChannelPolicy>,
        /// Make only shard K of N (K from 0) into parts under OUT/parts/, for `retake join`.
        /// `env` takes K and N from a Slurm job array (SLURM_ARRAY_TASK_ID, _MIN, _MAX or
        /// _COUNT); `env/N` takes K from a Kubernetes Indexed Job (JOB_COMPLETION_INDEX).
        #[arg(long, value_name = "K/N|env|env/N", value_parser = parse_shard)]
        shard: Option<ShardArg>,
        /// Memory one worker may need for one clip, MiB (memory model, docs/cluster.md); a
        /// longer clip is a reject pointing at `retake slice`.
        #[arg(long, value_name = "MIB", default_value_t = retake::memory::DEFAULT_LIMIT_BYTES >> 20,
              value_parser = clap::value_parser!(u64).range(1..=(1 << 30)))]
        max_clip_memory: u64,
        /// Also write the report page, OUT/report/index.html (see `retake report`).
        #[arg(long)]
        report: bool,
    },
    /// Join the shards of a sharded run into one manifest.jsonl and rejects.jsonl.
    ///
    /// The result is byte for byte what one `retake run` without `--shard` writes. Refused,
    /// naming them, when a shard is missing, unfinished, or made with another recipe or
    /// input.
    Join {
        /// The recipe the shards ran.
        recipe: PathBuf,
        /// The input manifest the shards read.
        #[arg(long, short)]
        input: PathBuf,
        /// The shared output folder.
        #[arg(long, short)]
        out: PathBuf,
    },
    /// Write ready job files for a sharded run: a Slurm array with the join after it, or a
    /// Kubernetes Indexed Job and a join Job; CPU and memory from the memory model.
    Jobs(jobs::JobsArgs),
    /// Write a run's report: OUT/report/index.html, figures, spectrograms and players.
    ///
    /// Opens from the file system with no network. Every figure comes from one pass over
    /// OUT/manifest.jsonl; the gallery is a seeded sample plus the takes named with --show.
    Report(report::ReportArgs),
    /// Check a recipe and print its plan (each step, its values, its chance); writes nothing.
    Plan {
        /// The recipe (TOML).
        recipe: PathBuf,
    },
    /// List every step a recipe can use, with the keys it reads.
    Steps,
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell) to stdout.
    ///
    /// For bash: `retake completions bash > ~/.local/share/bash-completion/completions/retake`.
    Completions {
        /// The shell.
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff) to stdout: `retake manual > retake.1; man ./retake.1`.
    Manual,
    /// Carry other annotations of the source clips (TSV, WebVTT) to a run's takes.
    ///
    /// Every time goes through the time map stored in each take's `origin`.
    Remap {
        /// The run's output manifest (takes).
        manifest: PathBuf,
        /// Folder holding `<source id>.tsv` and/or `<source id>.vtt`.
        labels: PathBuf,
        /// Folder to write `<take>.tsv` / `<take>.vtt` into.
        #[arg(long, short)]
        out: PathBuf,
    },
    /// Write each clip's transcript as WebVTT or TSV, beside its audio or into a folder.
    Export {
        /// The manifest (source clips or takes).
        manifest: PathBuf,
        /// Format: `vtt` or `tsv`; give it twice for both.
        #[arg(long, short = 't', value_parser = parse_format, default_value = "vtt")]
        to: Vec<Format>,
        /// Folder to write into, files named by clip id [default: beside each audio file].
        #[arg(long, short)]
        out: Option<PathBuf>,
        /// Overwrite files that already exist.
        #[arg(long)]
        replace: bool,
    },
    /// Run the bundled recipe on the bundled demo clips (a cold-store warehouse).
    ///
    /// The demo set is inside the binary: it is written to OUT/demo_audio/ first, then run
    /// into OUT.
    Demo {
        /// Output folder.
        #[arg(long, short, default_value = "retake-demo")]
        out: PathBuf,
        /// Worker threads (default: one per core).
        #[arg(long, short = 'j', value_parser = parse_threads)]
        threads: Option<usize>,
        /// Also write the report page, OUT/report/index.html (as `run --report`).
        #[arg(long)]
        report: bool,
    },
}

/// Parse the command line and run the command.
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli.command {
        Command::Run {
            recipe,
            input,
            out,
            threads,
            channels,
            shard,
            max_clip_memory,
            report,
        } => run::run(
            &recipe,
            &input,
            &out,
            threads,
            channels,
            run::Extras {
                shard,
                clip_memory_limit: max_clip_memory << 20,
                report,
            },
        ),
        Command::Join { recipe, input, out } => join::join(&recipe, &input, &out),
        Command::Jobs(args) => jobs::jobs(args),
        Command::Report(args) => report::report(&args),
        Command::Check { manifest } => check::check(&manifest),
        Command::Bank {
            dir,
            rate,
            held_out,
        } => bank::bank(&dir, rate, held_out),
        Command::Slice(args) => slice::slice(args),
        Command::Import { dir, out, channels } => import::import(&dir, out.as_deref(), channels),
        Command::Export {
            manifest,
            to,
            out,
            replace,
        } => export::export(&manifest, &to, out.as_deref(), replace),
        Command::Remap {
            manifest,
            labels,
            out,
        } => remap::run(&manifest, &labels, &out),
        Command::Demo {
            out,
            threads,
            report,
        } => demo::demo(&out, threads, report),
        Command::Plan { recipe } => plan::plan(&recipe),
        Command::Steps => plan::steps(),
        Command::Completions { shell } => {
            clap_complete::generate(shell, &mut Cli::command(), "retake", &mut std::io::stdout());
            Exit::Done.into()
        }
        Command::Manual => {
            match clap_mangen::Man::new(Cli::command()).render(&mut std::io::stdout()) {
                Ok(()) => Exit::Done.into(),
                // `retake manual | head` closing the pipe early is not a failure.
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Exit::Done.into(),
                Err(e) => {
                    eprintln!("retake: cannot write the manual: {e}");
                    Exit::Failed.into()
                }
            }
        }
    }
}

fn parse_channels(s: &str) -> Result<ChannelPolicy, String> {
    if s == "mix" {
        return Ok(ChannelPolicy::Mix);
    }
    s.parse::<usize>()
        .map(ChannelPolicy::Pick)
        .map_err(|_| format!("`{s}`: expected `mix` or a channel number counted from 0"))
}

fn parse_audio_format(s: &str) -> Result<retake::audio::SampleFormat, String> {
    retake::audio::SampleFormat::from_name(s).ok_or_else(|| {
        format!(
            "`{s}`: expected an output format: {}",
            retake::audio::SampleFormat::names().join(", ")
        )
    })
}

fn parse_shard(s: &str) -> Result<ShardArg, String> {
    retake::shard::parse_arg(s).map_err(|e| e.to_string())
}

fn parse_format(s: &str) -> Result<Format, String> {
    match s {
        "vtt" | "webvtt" => Ok(Format::WebVtt),
        "tsv" => Ok(Format::Tsv),
        _ => Err(format!("`{s}`: expected `vtt` or `tsv`")),
    }
}

/// Worker threads: 1 to 1024 (more than any machine this runs on has cores).
fn parse_threads(s: &str) -> Result<usize, String> {
    match s.parse::<usize>() {
        Ok(n) if (1..=1024).contains(&n) => Ok(n),
        _ => Err(format!(
            "`{s}`: expected a number of worker threads from 1 to 1024"
        )),
    }
}

fn parse_fraction(s: &str) -> Result<f64, String> {
    match s.parse::<f64>() {
        Ok(f) if (0.0..=1.0).contains(&f) => Ok(f),
        _ => Err(format!("`{s}`: expected a fraction from 0 to 1")),
    }
}

/// `n` and the noun, plural unless `n` is 1: "1 take", "40 takes".
pub fn count(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}
