//! `retake export`: a manifest's transcripts to WebVTT or TSV files.

use std::path::Path;
use std::process::ExitCode;

use retake::export::{Format, Outcome, export_clip};
use retake::transcript::read_manifest;

pub fn export(manifest: &Path, formats: &[Format], out: Option<&Path>, replace: bool) -> ExitCode {
    let read = match read_manifest(manifest) {
        Ok(m) => m,
        Err(e) => {
            eprintln!("retake: {}: cannot read manifest: {e}", manifest.display());
            return ExitCode::from(2);
        }
    };
    for p in &read.problems {
        eprintln!("{p}");
    }
    let (mut written, mut untimed, mut kept, mut failed) = (0, 0, 0, 0);
    for entry in &read.entries {
        for &format in formats {
            match export_clip(&entry.clip, read.base(), out, format, replace) {
                Ok(Outcome::Written(_)) => written += 1,
                Ok(Outcome::Untimed) => untimed += 1,
                Ok(Outcome::Exists(path)) => {
                    eprintln!(
                        "{}: exists, left as it is (--replace to overwrite)",
                        path.display()
                    );
                    kept += 1;
                }
                Err(e) => {
                    eprintln!(
                        "{} line {}: clip `{}`: cannot write: {e}",
                        manifest.display(),
                        entry.line,
                        entry.clip.id
                    );
                    failed += 1;
                }
            }
        }
    }
    println!("wrote {written} files for {} clips", read.entries.len());
    if untimed > 0 {
        println!("skipped {untimed} untimed (text only, nothing to time)");
    }
    if kept + failed + read.problems.len() > 0 {
        ExitCode::from(super::EXIT_REJECTS)
    } else {
        ExitCode::SUCCESS
    }
}
