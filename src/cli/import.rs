//! `retake import`: a folder of recordings and transcripts to a manifest.

use std::path::Path;
use std::process::ExitCode;

use super::Exit;

use retake::audio::ChannelPolicy;
use retake::files::write_atomically;
use retake::import::import_folder;
use retake::transcript::write_manifest;

pub fn import(dir: &Path, manifest: Option<&Path>, channels: ChannelPolicy) -> ExitCode {
    if !dir.is_dir() {
        let what = if dir.exists() {
            "is not a folder"
        } else {
            "the folder does not exist"
        };
        eprintln!("retake: {}: {what}; nothing imported", dir.display());
        return Exit::Usage.into();
    }
    let default = dir.join("manifest.jsonl");
    let manifest = manifest.unwrap_or(&default);
    let base = manifest.parent().filter(|p| !p.as_os_str().is_empty());
    let base = base.unwrap_or(Path::new("."));
    if let Err(e) = std::fs::create_dir_all(base) {
        eprintln!("retake: {}: {e}", base.display());
        return Exit::Failed.into();
    }
    let found = match import_folder(dir, base, channels) {
        Ok(f) => f,
        Err(e) => {
            eprintln!("retake: {}: cannot read folder: {e}", dir.display());
            return Exit::Usage.into();
        }
    };
    for p in &found.problems {
        eprintln!("{p}");
    }
    for w in &found.warnings {
        eprintln!("warning: {w}");
    }
    if found.clips.is_empty() {
        eprintln!(
            "retake: {}: no recording with a usable transcript; nothing written",
            dir.display()
        );
        return Exit::Usage.into();
    }
    if let Err(e) = write_atomically(manifest, |w| write_manifest(w, &found.clips)) {
        eprintln!("retake: {}: {e}", manifest.display());
        return Exit::Failed.into();
    }
    let seconds: f64 = found.clips.iter().filter_map(|c| c.duration).sum();
    let timed = found.clips.iter().filter(|c| c.lines.is_some()).count();
    println!(
        "imported {} clip{} ({timed} timed, {} untimed), {:.3} h of audio",
        found.clips.len(),
        if found.clips.len() == 1 { "" } else { "s" },
        found.clips.len() - timed,
        seconds / 3600.0
    );
    println!("output   {}", manifest.display());
    if found.problems.is_empty() {
        Exit::Done.into()
    } else {
        println!(
            "left out files with {} problem{} (listed above, each with its file and line)",
            found.problems.len(),
            if found.problems.len() == 1 { "" } else { "s" }
        );
        Exit::DoneWithRejects.into()
    }
}
