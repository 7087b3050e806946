//! `retake report` (and `run --report`): write the report page, print where it is.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use clap::Args;
use retake::report::{self, DEFAULT_SAMPLE, ReportSpec, RunFacts};

use super::Exit;

/// Arguments of `retake report`.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// The run's output folder (holds manifest.jsonl); the page goes to OUT/report/.
    pub out: PathBuf,
    /// The recipe, shown as written and its ranges marked [default: the one a `run
    /// --report` kept].
    #[arg(long, short)]
    pub recipe: Option<PathBuf>,
    /// The input manifest, to show each gallery take's source clip [default: the one a
    /// `run --report` kept, else take 0 when it is the untouched source].
    #[arg(long, short)]
    pub input: Option<PathBuf>,
    /// Takes drawn at random (seeded) for the gallery.
    #[arg(long, default_value_t = DEFAULT_SAMPLE, value_parser = parse_sample)]
    pub sample: usize,
    /// Seed of the gallery sample [default: the recipe's seed].
    #[arg(long)]
    pub seed: Option<u64>,
    /// A take id or source clip id to show in the gallery as well (repeat for more).
    #[arg(long, value_name = "ID")]
    pub show: Vec<String>,
}

pub fn report(args: &ReportArgs) -> ExitCode {
    write(
        &args.out,
        None,
        args.recipe.as_deref(),
        args.input.as_deref(),
        args,
    )
}

/// Write the page; `facts` come from a run that just finished.
pub fn write(
    out: &Path,
    facts: Option<RunFacts>,
    recipe: Option<&Path>,
    input: Option<&Path>,
    args: &ReportArgs,
) -> ExitCode {
    let spec = ReportSpec {
        out,
        facts,
        recipe,
        input,
        sample: args.sample,
        seed: args.seed,
        show: &args.show,
    };
    match report::write_report(&spec) {
        Ok(s) => {
            for id in &s.not_found {
                eprintln!("retake: warning: no take has the id or source id {id}");
            }
            println!(
                "report  {} ({}, {} in the gallery, {:.1} MB)",
                s.index.display(),
                super::count(s.takes as usize, "take"),
                s.gallery,
                s.bytes as f64 / 1e6
            );
            Exit::Done.into()
        }
        Err(e) => {
            eprintln!("retake: {e}");
            Exit::Failed.into()
        }
    }
}

/// Gallery size: 0 to 500 takes (each brings two pictures and a copy of its source).
fn parse_sample(s: &str) -> Result<usize, String> {
    match s.parse::<usize>() {
        Ok(n) if n <= 500 => Ok(n),
        _ => Err(format!("`{s}`: expected a number of takes from 0 to 500")),
    }
}
