//! `retake export`: a manifest's transcripts to WebVTT or TSV files.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::export::{Format, Outcome, export_clip};
use retake::outdir::FolderLock;
use retake::transcript::read_manifest;

pub fn export(manifest: &Path, formats: &[Format], out: Option<&Path>, replace: bool) -> ExitCode {
    let read = match read_manifest(manifest) {
        Ok(m) => m,
        Err(e) => {
            eprintln!("retake: {}: cannot read manifest: {e}", manifest.display());
            return Exit::Usage.into();
        }
    };
    for p in &read.problems {
        eprintln!("{p}");
    }
    // One writer at a time into a folder of exports. Beside the audio each file is written
    // by one atomic rename, and source folders get no lock file.
    let _lock = match out.map(FolderLock::acquire).transpose() {
        Ok(l) => l,
        Err(e) => {
            eprintln!("retake: {e}");
            return Exit::Failed.into();
        }
    };
    let (mut written, mut untimed, mut failed) = (0, 0, 0);
    let mut kept = Vec::new();
    for entry in &read.entries {
        for &format in formats {
            match export_clip(&entry.clip, read.base(), out, format, replace) {
                Ok(Outcome::Written(_)) => written += 1,
                Ok(Outcome::Untimed) => untimed += 1,
                Ok(Outcome::Exists(path)) => kept.push(path),
                Ok(Outcome::NotBeside(reason)) => {
                    eprintln!(
                        "{} line {}: clip `{}`: not written: {reason}",
                        manifest.display(),
                        entry.line,
                        entry.clip.id
                    );
                    failed += 1;
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
    if !kept.is_empty() {
        // A rerun over the same takes would otherwise print one line per file.
        const SHOWN: usize = 3;
        for path in kept.iter().take(SHOWN) {
            eprintln!("{}: exists, left as it is", path.display());
        }
        if kept.len() > SHOWN {
            eprintln!("... and {} more", kept.len() - SHOWN);
        }
        println!(
            "kept {} existing files as they were (--replace to overwrite)",
            kept.len()
        );
    }
    if kept.len() + failed + read.problems.len() > 0 {
        Exit::DoneWithRejects.into()
    } else {
        Exit::Done.into()
    }
}
