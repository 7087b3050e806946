//! `retake run` and `retake demo`: progress bar and closing summary.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::audio::ChannelPolicy;
use retake::recipe;
use retake::run::{self, Event, REJECTS_NAME, RunSpec, Summary};
use retake::shard::{self, ShardArg};

/// What `run` does besides the whole run on one machine.
pub struct Extras {
    /// `--shard`: only this shard, into parts.
    pub shard: Option<ShardArg>,
    /// `--max-clip-memory`, bytes.
    pub clip_memory_limit: u64,
    /// `--report`: write the report page after the run.
    pub report: bool,
}

impl Default for Extras {
    fn default() -> Self {
        Extras {
            shard: None,
            clip_memory_limit: retake::memory::DEFAULT_LIMIT_BYTES,
            report: false,
        }
    }
}

pub fn run(
    recipe_path: &Path,
    input: &Path,
    out: &Path,
    threads: Option<usize>,
    channels: Option<ChannelPolicy>,
    extras: Extras,
) -> ExitCode {
    let Extras {
        shard,
        clip_memory_limit,
        report,
    } = extras;
    let shard = match shard.map(|a| shard::resolve(a, |k| std::env::var(k).ok())) {
        None => None,
        Some(Ok(s)) => Some(s),
        Some(Err(e)) => {
            eprintln!("retake: {e}");
            return Exit::Usage.into();
        }
    };
    let mut plan = match recipe::load(recipe_path) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("retake: recipe error: {e}");
            return Exit::Usage.into();
        }
    };
    if let Some(c) = channels {
        plan.channels = c;
    }
    for w in &plan.warnings {
        eprintln!("retake: warning: {w}");
    }
    let progress = super::progress::ClipProgress::new();
    let on_event = |e: Event| progress.on_event(e);
    let spec = RunSpec {
        plan: &plan,
        recipe: Some(recipe_path),
        input,
        out,
        threads,
        shard,
        clip_memory_limit,
    };
    let result = run::run(&spec, &on_event);
    progress.finish();
    match result {
        Err(e) => {
            eprintln!("retake: {e}");
            // An output over the input is a command line to change; the rest could not run.
            if matches!(e, run::RunError::WouldOverwrite(_)) {
                Exit::Usage.into()
            } else {
                Exit::Failed.into()
            }
        }
        Ok(summary) => {
            // A shard's manifest and rejects are parts, for `retake join`.
            let (manifest, rejects) = match shard.map(retake::parts::PartNames::of) {
                Some(p) => (out.join(p.manifest()), out.join(p.rejects())),
                None => (out.join(run::MANIFEST_NAME), out.join(REJECTS_NAME)),
            };
            print_summary(&summary, &manifest, &rejects);
            if let Some(s) = shard {
                println!(
                    "shard   {s} done; when every shard is: retake join {} -i {} -o {}",
                    recipe_path.display(),
                    input.display(),
                    out.display()
                );
                if report {
                    println!("report  after the join: retake report {}", out.display());
                }
            } else if report {
                let code = write_report(&summary, recipe_path, input, out);
                if code != ExitCode::from(Exit::Done) {
                    return code;
                }
            }
            if summary.rejected > 0 {
                Exit::DoneWithRejects.into()
            } else {
                Exit::Done.into()
            }
        }
    }
}

fn print_summary(s: &Summary, manifest: &Path, rejects: &Path) {
    println!(
        "clips   {} read, {} done, {} rejected",
        s.clips_in, s.clips_done, s.rejected
    );
    if s.clips_resumed > 0 {
        println!(
            "kept    {} ({}, {:.1} s of audio) finished by an earlier run of this recipe",
            super::count(s.clips_resumed, "clip"),
            super::count(s.takes_kept, "take"),
            s.seconds_out_kept
        );
    }
    println!(
        "made    {}, {:.3} h of audio ({:.1} s) from {:.1} s of source",
        super::count(s.takes_made(), "take"),
        s.seconds_out_made() / 3600.0,
        s.seconds_out_made(),
        s.seconds_in - s.seconds_in_kept
    );
    if s.removed > 0 {
        println!(
            "removed {} files of an earlier run that this one did not make again",
            s.removed
        );
    }
    if s.takes_made() == 0 {
        println!("time    {:.2} s (nothing left to make)", s.wall_seconds);
    } else {
        println!(
            "time    {:.2} s, {:.0}x real time (audio made per wall second)",
            s.wall_seconds,
            s.made_per_second()
        );
    }
    println!(
        "output  {} ({}, {:.3} h)",
        manifest.display(),
        super::count(s.takes, "take"),
        s.seconds_out / 3600.0
    );
    if s.rejected > 0 {
        println!(
            "rejects {} (one line per clip, with the reason)",
            rejects.display()
        );
    }
}

/// `--report`: the page, with the facts only this run knows (its time, its recipe).
fn write_report(s: &Summary, recipe_path: &Path, input: &Path, out: &Path) -> ExitCode {
    let facts = retake::report::RunFacts {
        version: env!("CARGO_PKG_VERSION").to_string(),
        wall_seconds: s.wall_seconds,
        seconds_made: s.seconds_out_made(),
        clips_in: s.clips_in,
        recipe_path: recipe_path.display().to_string(),
        recipe_text: std::fs::read_to_string(recipe_path).unwrap_or_default(),
        input: std::path::absolute(input)
            .unwrap_or_else(|_| input.to_path_buf())
            .display()
            .to_string(),
    };
    let args = super::report::ReportArgs {
        out: out.to_path_buf(),
        recipe: None,
        input: None,
        sample: retake::report::DEFAULT_SAMPLE,
        seed: None,
        show: Vec::new(),
    };
    super::report::write(out, Some(facts), None, None, &args)
}
