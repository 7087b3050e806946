//! `retake join`: the shards' parts into one manifest, and what it did.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::join::{self, JoinSpec};
use retake::recipe;
use retake::run::{MANIFEST_NAME, REJECTS_NAME};

pub fn join(recipe_path: &Path, input: &Path, out: &Path) -> ExitCode {
    let plan = match recipe::load(recipe_path) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("retake: recipe error: {e}");
            return Exit::Usage.into();
        }
    };
    let spec = JoinSpec {
        plan: &plan,
        input,
        out,
    };
    match join::join(&spec) {
        // Missing or unfinished shards: the join could not start (it names them).
        Err(e) => {
            eprintln!("retake: {e}");
            Exit::Failed.into()
        }
        Ok(s) => {
            println!(
                "joined  {}: {} done, {} rejected",
                super::count(s.shards, "shard"),
                super::count(s.clips, "clip"),
                s.rejected
            );
            if s.removed > 0 {
                println!(
                    "removed {} files of an earlier run that this one did not make again",
                    s.removed
                );
            }
            println!(
                "output  {} ({})",
                out.join(MANIFEST_NAME).display(),
                super::count(s.takes, "take")
            );
            if s.rejected > 0 {
                println!("rejects {}", out.join(REJECTS_NAME).display());
                Exit::DoneWithRejects.into()
            } else {
                Exit::Done.into()
            }
        }
    }
}
