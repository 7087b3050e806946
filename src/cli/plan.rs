//! `retake plan` (check a recipe and print what it will do, writing nothing) and
//! `retake steps` (every step and its keys, from the step registry).

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::audio::ChannelPolicy;
use retake::recipe;
use retake::steps::REGISTRY;

pub fn plan(recipe_path: &Path) -> ExitCode {
    let plan = match recipe::load(recipe_path) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("retake: recipe error: {e}");
            return Exit::Usage.into();
        }
    };
    let take0 = if plan.keep_source {
        ", take 0 the source"
    } else {
        ""
    };
    println!(
        "recipe  {} (seed {}, {} per clip{take0})",
        recipe_path.display(),
        plan.seed,
        super::count(plan.takes as usize, "take")
    );
    let format = plan.format.spec().label;
    let channels = match plan.channels {
        ChannelPolicy::Mix => String::from("mix of all channels"),
        ChannelPolicy::Pick(n) => format!("channel {n}"),
    };
    println!("output  {} Hz, {format}, {channels}", plan.rate);
    let width = plan
        .steps
        .iter()
        .map(|s| s.step.name().len())
        .max()
        .unwrap_or(0);
    for (i, s) in plan.steps.iter().enumerate() {
        let chance = if s.chance >= 1.0 {
            String::from("every take")
        } else {
            format!("chance {}", s.chance)
        };
        let values: Vec<String> = s
            .written
            .iter()
            .filter(|(k, _)| k != "chance")
            .map(|(k, v)| format!("{k} = {v}"))
            .collect();
        println!(
            "step {}  {:width$}  {chance:<11} {}",
            i + 1,
            s.step.name(),
            values.join("; ")
        );
    }
    if plan.steps.is_empty() {
        println!("(no steps: every take is the source at the output rate)");
    }
    for w in &plan.warnings {
        eprintln!("retake: warning: {w}");
    }
    println!("recipe is valid; nothing was written");
    Exit::Done.into()
}

pub fn steps() -> ExitCode {
    for kind in REGISTRY {
        println!("{}  {}", kind.name, kind.summary);
        println!("    keys: {}, chance", kind.keys.join(", "));
    }
    println!("Every key, its range and default: docs/recipe.md");
    Exit::Done.into()
}
