//! `retake check`: print one line per problem; exit 0 when clean, 3 when it found problems.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

pub fn check(manifest: &Path) -> ExitCode {
    match retake::check::check_manifest(manifest) {
        Err(e) => {
            eprintln!("retake: {}: cannot read manifest: {e}", manifest.display());
            Exit::Failed.into()
        }
        Ok(report) => {
            for p in &report.problems {
                eprintln!("{p}");
            }
            if report.problems.is_empty() {
                println!(
                    "{}: {} clips, {:.1} s of audio, no problems",
                    manifest.display(),
                    report.lines,
                    report.seconds
                );
                Exit::Done.into()
            } else {
                eprintln!(
                    "{}: {} problems in {} lines",
                    manifest.display(),
                    report.problems.len(),
                    report.lines
                );
                Exit::DoneWithRejects.into()
            }
        }
    }
}
