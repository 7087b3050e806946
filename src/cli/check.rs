//! `retake check`: print one line per problem; exit 0 only when clean.

use std::path::Path;
use std::process::ExitCode;

pub fn check(manifest: &Path) -> ExitCode {
    match retake::check::check_manifest(manifest) {
        Err(e) => {
            eprintln!("retake: {}: cannot read manifest: {e}", manifest.display());
            ExitCode::FAILURE
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
                ExitCode::SUCCESS
            } else {
                eprintln!(
                    "{}: {} problems in {} lines",
                    manifest.display(),
                    report.problems.len(),
                    report.lines
                );
                ExitCode::FAILURE
            }
        }
    }
}
