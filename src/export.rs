//! A manifest's transcripts written out as WebVTT or TSV, one file per clip, so a person can
//! open a take next to its label in any player or spreadsheet.
//!
//! By default each file goes beside its audio with the same stem (`takes/dock-01.t2.wav` ->
//! `takes/dock-01.t2.vtt`), which is where players look for subtitles. An existing file is
//! never replaced unless asked: beside source recordings it may be the original transcript.

use std::path::{Path, PathBuf};

use crate::files::{file_stem, write_atomically};
use crate::transcript::{Clip, tsv, webvtt};

/// Output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// WebVTT: one cue per line, speaker as a voice span; no word timings.
    WebVtt,
    /// TSV: word rows, a blank row between lines.
    Tsv,
}

impl Format {
    /// The file extension written.
    pub fn extension(self) -> &'static str {
        match self {
            Self::WebVtt => "vtt",
            Self::Tsv => "tsv",
        }
    }

    /// A clip's transcript in this format; `None` for an untimed clip.
    pub fn render(self, clip: &Clip) -> Option<String> {
        let lines = clip.lines.as_ref()?;
        Some(match self {
            Self::WebVtt => webvtt::write_lines(lines),
            Self::Tsv => tsv::write_lines(lines),
        })
    }
}

/// Where a clip's file goes: beside its audio (`out` is `None`, audio resolved against
/// `base`, the manifest's folder) or in `out` named by the clip id.
pub fn destination(clip: &Clip, base: &Path, out: Option<&Path>, format: Format) -> PathBuf {
    match out {
        Some(dir) => dir.join(format!("{}.{}", file_stem(&clip.id), format.extension())),
        None => base.join(&clip.audio).with_extension(format.extension()),
    }
}

/// What happened to one clip.
#[derive(Debug)]
pub enum Outcome {
    /// Written to this file.
    Written(PathBuf),
    /// Not written: an untimed clip has nothing to time.
    Untimed,
    /// Not written: the file exists and replacing was not asked for.
    Exists(PathBuf),
    /// Not written beside the audio, and why (the audio is missing or lies outside the
    /// manifest's folder tree); `--out` names a folder instead.
    NotBeside(String),
}

/// Write one clip's transcript.
///
/// # Errors
/// Writing the file.
pub fn export_clip(
    clip: &Clip,
    base: &Path,
    out: Option<&Path>,
    format: Format,
    replace: bool,
) -> std::io::Result<Outcome> {
    let Some(text) = format.render(clip) else {
        return Ok(Outcome::Untimed);
    };
    let dest = match out {
        Some(_) => destination(clip, base, out, format),
        None => match beside_audio(clip, base, format) {
            Ok(dest) => dest,
            Err(reason) => return Ok(Outcome::NotBeside(reason)),
        },
    };
    if dest.exists() && !replace {
        return Ok(Outcome::Exists(dest));
    }
    if let Some(parent) = dest.parent() {
        std::fs::create_dir_all(parent)?;
    }
    write_atomically(&dest, |w| std::io::Write::write_all(w, text.as_bytes()))?;
    Ok(Outcome::Written(dest))
}

/// Where a clip's file goes beside its audio, when that is inside the folders the user
/// named: the audio must exist and lie (links followed) inside the manifest's folder tree.
/// Otherwise the reason, so that a manifest pointing anywhere cannot make `export` write
/// anywhere.
///
/// # Errors
/// Why the file is not written beside the audio.
pub fn beside_audio(clip: &Clip, base: &Path, format: Format) -> Result<PathBuf, String> {
    let audio = base.join(&clip.audio);
    let real = match audio.canonicalize() {
        Ok(real) if real.is_file() => real,
        _ => {
            return Err(format!(
                "its audio {} does not exist, so there is nothing to write beside (use --out \
                 to write into a folder)",
                audio.display()
            ));
        }
    };
    let root = base
        .canonicalize()
        .map_err(|e| format!("{}: {e}", base.display()))?;
    if !real.starts_with(&root) {
        return Err(format!(
            "its audio {} lies outside the manifest's folder {}; export writes beside audio \
             only inside it (use --out to write into a folder)",
            real.display(),
            root.display()
        ));
    }
    Ok(real.with_extension(format.extension()))
}
