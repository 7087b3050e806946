//! `retake remap`: other annotations of the source clips carried to the takes.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::remap::remap;
use retake::transcript::read_manifest;

pub fn run(manifest: &Path, labels: &Path, out: &Path) -> ExitCode {
    let read = match read_manifest(manifest) {
        Ok(m) => m,
        Err(e) => {
            eprintln!("retake: {}: cannot read manifest: {e}", manifest.display());
            return Exit::Usage.into();
        }
    };
    if !labels.is_dir() {
        eprintln!("retake: {}: not a folder of annotations", labels.display());
        return Exit::Usage.into();
    }
    let report = match remap(&read, labels, out) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("retake: {}: {e}", out.display());
            return Exit::Failed.into();
        }
    };
    for p in &report.problems {
        eprintln!("{p}");
    }
    for w in &report.warnings {
        eprintln!("warning: {w}");
    }
    for id in &report.missing {
        eprintln!(
            "{}: no annotation for source clip `{id}` (looked for {id}.tsv and {id}.vtt)",
            labels.display()
        );
    }
    println!(
        "wrote {} files for {} takes into {}",
        report.written.len(),
        report.takes,
        out.display()
    );
    if report.collapsed > 0 {
        println!(
            "{} spans fell inside stretches a step removed and have zero length now (WebVTT cues \
             among them were dropped)",
            report.collapsed
        );
    }
    // Sources without an annotation are normal (not every clip was phone-labelled): listed,
    // not failed.
    if report.problems.is_empty() {
        Exit::Done.into()
    } else {
        Exit::DoneWithRejects.into()
    }
}
