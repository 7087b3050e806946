//! `retake demo`: the demo set travels inside the binary, so an installed `retake` (with no
//! checkout anywhere) can still run it. The files are written out under the output folder
//! and the ordinary `run` takes over from there.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use super::Exit;

use retake::files::write_atomically;

/// The folder under the demo's output folder that receives the demo set.
pub const SOURCE_DIR: &str = "demo_audio";

macro_rules! demo_files {
    ($($path:literal),* $(,)?) => {
        /// Every file of `demo_audio/` a run reads (the generator script stays in the
        /// checkout): (path inside `demo_audio/`, contents).
        pub const FILES: &[(&str, &[u8])] = &[
            $(($path, include_bytes!(concat!(env!("CARGO_MANIFEST_DIR"), "/demo_audio/", $path)))),*
        ];
    };
}

demo_files!(
    "README.md",
    "recipe.toml",
    "manifest.jsonl",
    "clips/control-001.wav",
    "clips/dock-001.wav",
    "clips/dock-002.wav",
    "clips/dock-003.wav",
    "clips/pick-a-001.wav",
    "clips/pick-a-002.flac",
    "clips/pick-b-001.wav",
    "clips/pick-c-001.wav",
    "clips/pick-c-002.ogg",
    "clips/pick-d-001.wav",
    "noise/beeper/forklift-reversing-dock.wav",
    "noise/compressor/compressor-plantroom.wav",
    "noise/fans/evaporator-fans-chamber2.wav",
);

/// Write the demo set under `out/demo_audio/`, leaving files that already hold the same bytes
/// untouched (so a rerun resumes instead of seeing changed audio), and run it into `out`.
pub fn demo(out: &Path, threads: Option<usize>, report: bool) -> ExitCode {
    let source = out.join(SOURCE_DIR);
    if let Err((path, e)) = write_out(&source) {
        eprintln!("retake: {}: cannot write the demo set: {e}", path.display());
        return Exit::Failed.into();
    }
    super::run::run(
        &source.join("recipe.toml"),
        &source.join("manifest.jsonl"),
        out,
        threads,
        None,
        super::run::Extras {
            report,
            ..super::run::Extras::default()
        },
    )
}

fn write_out(source: &Path) -> Result<(), (PathBuf, std::io::Error)> {
    for (rel, bytes) in FILES {
        let path = source.join(rel);
        if std::fs::read(&path).is_ok_and(|old| old == *bytes) {
            continue;
        }
        if let Some(dir) = path.parent() {
            std::fs::create_dir_all(dir).map_err(|e| (dir.to_path_buf(), e))?;
        }
        write_atomically(&path, |w| std::io::Write::write_all(w, bytes))
            .map_err(|e| (path.clone(), e))?;
    }
    Ok(())
}
