//! A folder of recordings with transcripts beside them becomes a manifest.
//!
//! Each audio file (`.wav`, `.flac`, `.mp3`, `.ogg`, `.oga`) pairs with the one transcript of
//! the same stem in the same folder: `.vtt` (WebVTT), `.tsv` (word rows) or `.txt` (untimed
//! text). Subfolders are walked; a clip's id is its path from the folder without the
//! extension (`day1/aisle-03`). Every audio file is decoded once (without keeping its samples), so a
//! transcript that runs past its audio is caught here rather than in the middle of a run.
//!
//! Bad pairs do not stop the import: the good clips come through and each problem names the
//! file and line it is about.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::audio::{self, ChannelPolicy};
use crate::transcript::{Clip, END_TOLERANCE_S, Line, Problem, tsv, validate, webvtt};

/// Audio extensions that pair with a transcript (lower case).
pub const AUDIO_EXTENSIONS: &[&str] = &["wav", "flac", "mp3", "ogg", "oga"];

/// Transcript kinds, by extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sidecar {
    /// `.vtt`: WebVTT, one line per cue.
    WebVtt,
    /// `.tsv`: word rows (see [`crate::transcript::tsv`]).
    Tsv,
    /// `.txt`: untimed text.
    Text,
}

impl Sidecar {
    /// The kind a file extension names, if any.
    pub fn from_extension(ext: &str) -> Option<Self> {
        match ext.to_ascii_lowercase().as_str() {
            "vtt" => Some(Self::WebVtt),
            "tsv" => Some(Self::Tsv),
            "txt" => Some(Self::Text),
            _ => None,
        }
    }
}

/// What an import found.
#[derive(Debug, Default)]
pub struct Import {
    /// Clips that paired and checked out, in path order.
    pub clips: Vec<Clip>,
    /// Everything that did not, each naming its file (and line where there is one).
    pub problems: Vec<Problem>,
    /// Findings in files that were imported all the same (WebVTT cue settings ignored),
    /// each naming its file and line.
    pub warnings: Vec<Problem>,
}

/// One clip that came through, with the warnings its transcript gave.
type Imported = (Clip, Vec<Problem>);

/// The files of one stem.
#[derive(Debug, Default)]
struct Pair {
    audio: Vec<PathBuf>,
    sidecars: Vec<(PathBuf, Sidecar)>,
}

/// Import every recording under `dir` with its transcript. Audio paths in the clips are
/// written relative to `manifest_dir` (the folder the manifest will be written in).
///
/// # Errors
/// Only when `dir` itself cannot be read; problems with single files are in
/// [`Import::problems`].
pub fn import_folder(
    dir: &Path,
    manifest_dir: &Path,
    channels: ChannelPolicy,
) -> std::io::Result<Import> {
    let mut pairs: BTreeMap<String, Pair> = BTreeMap::new();
    let mut files = Vec::new();
    walk(dir, &mut files)?;
    for path in files {
        let Some(ext) = path.extension().and_then(|e| e.to_str()) else {
            continue;
        };
        let rel = path.strip_prefix(dir).unwrap_or(&path).with_extension("");
        let id = rel
            .components()
            .map(|c| c.as_os_str().to_string_lossy())
            .collect::<Vec<_>>()
            .join("/");
        if AUDIO_EXTENSIONS.contains(&ext.to_ascii_lowercase().as_str()) {
            pairs.entry(id).or_default().audio.push(path);
        } else if let Some(kind) = Sidecar::from_extension(ext) {
            pairs.entry(id).or_default().sidecars.push((path, kind));
        }
    }
    let results: Vec<Result<Imported, Vec<Problem>>> = pairs
        .into_par_iter()
        .map(|(id, pair)| import_pair(id, pair, manifest_dir, channels))
        .collect();
    let mut import = Import::default();
    for r in results {
        match r {
            Ok((clip, warnings)) => {
                import.clips.push(clip);
                import.warnings.extend(warnings);
            }
            Err(p) => import.problems.extend(p),
        }
    }
    Ok(import)
}

/// Files under `dir`, sorted, skipping hidden entries.
fn walk(dir: &Path, out: &mut Vec<PathBuf>) -> std::io::Result<()> {
    let mut entries: Vec<_> = std::fs::read_dir(dir)?.collect::<Result<_, _>>()?;
    entries.sort_by_key(std::fs::DirEntry::file_name);
    for entry in entries {
        if entry.file_name().to_string_lossy().starts_with('.') {
            continue;
        }
        let path = entry.path();
        if entry.file_type()?.is_dir() {
            walk(&path, out)?;
        } else {
            out.push(path);
        }
    }
    Ok(())
}

fn whole_file(file: &Path, message: String) -> Problem {
    Problem {
        file: file.to_path_buf(),
        line: 0,
        field: String::new(),
        message,
    }
}

fn import_pair(
    id: String,
    pair: Pair,
    manifest_dir: &Path,
    channels: ChannelPolicy,
) -> Result<Imported, Vec<Problem>> {
    let names = |paths: &mut dyn Iterator<Item = &PathBuf>| {
        paths
            .map(|p| {
                p.file_name()
                    .unwrap_or_default()
                    .to_string_lossy()
                    .into_owned()
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let (audio_path, (sidecar, kind)) = match (&pair.audio[..], &pair.sidecars[..]) {
        ([a], [s]) => (a, s),
        ([], sidecars) => {
            return Err(sidecars
                .iter()
                .map(|(s, _)| {
                    whole_file(
                        s,
                        format!(
                            "no audio file with this stem beside it (looked for .{})",
                            AUDIO_EXTENSIONS.join(", .")
                        ),
                    )
                })
                .collect());
        }
        ([a], []) => {
            return Err(vec![whole_file(
                a,
                "no transcript with this stem beside it (.vtt, .tsv or .txt)".into(),
            )]);
        }
        (audio, _) if audio.len() > 1 => {
            return Err(vec![whole_file(
                &audio[0],
                format!(
                    "{} audio files share the stem `{id}` ({}); keep one",
                    audio.len(),
                    names(&mut audio.iter())
                ),
            )]);
        }
        (_, sidecars) => {
            return Err(vec![whole_file(
                &sidecars[0].0,
                format!(
                    "{} transcripts share the stem `{id}` ({}); keep one",
                    sidecars.len(),
                    names(&mut sidecars.iter().map(|(p, _)| p))
                ),
            )]);
        }
    };
    let text = crate::transcript::read_text(sidecar).map_err(|p| vec![p])?;
    // The problem names the file; the audio error's own leading path is not repeated.
    let audio_problem = |e: audio::AudioError| {
        let text = e.to_string();
        let prefix = format!("{}: ", audio_path.display());
        let text = text.strip_prefix(&prefix).unwrap_or(&text).to_string();
        vec![whole_file(audio_path, text)]
    };
    let scanned = audio::scan(audio_path, channels).map_err(audio_problem)?;
    audio::usable(audio_path, &scanned, None).map_err(audio_problem)?;
    let duration = scanned.duration();
    let audio_rel = relative_to(audio_path, manifest_dir);
    let mut clip = Clip {
        id,
        audio: audio_rel,
        lines: None,
        text: None,
        duration: Some(duration),
        origin: None,
        extra: Default::default(),
    };
    let audio_name = audio_path.file_name().unwrap_or_default().to_string_lossy();
    let past_end = |line: usize, t: f64| -> Option<Problem> {
        (t > duration + END_TOLERANCE_S).then(|| Problem {
            file: sidecar.clone(),
            line,
            field: "end".into(),
            message: format!("{t} s is past the end of its audio {audio_name} ({duration:.3} s)"),
        })
    };
    let mut warnings = Vec::new();
    let lines: Vec<Line> = match kind {
        Sidecar::Text => {
            let t = text.split_whitespace().collect::<Vec<_>>().join(" ");
            if t.is_empty() {
                return Err(vec![whole_file(sidecar, "empty transcript".into())]);
            }
            clip.text = Some(t);
            return Ok((clip, Vec::new()));
        }
        Sidecar::Tsv => {
            let table = tsv::parse(sidecar, &text)?;
            let late: Vec<Problem> = table
                .rows()
                .filter_map(|r| past_end(r.line, r.end))
                .collect();
            if !late.is_empty() {
                return Err(late);
            }
            tsv::lines_of(sidecar, &table)?
        }
        Sidecar::WebVtt => {
            if let Ok(doc) = webvtt::parse(&text) {
                let late: Vec<Problem> =
                    doc.cues().filter_map(|c| past_end(c.line, c.end)).collect();
                if !late.is_empty() {
                    return Err(late);
                }
            }
            let read = webvtt::read_transcript(sidecar, &text)?;
            warnings = read.warnings;
            read.lines
        }
    };
    if lines.is_empty() {
        return Err(vec![whole_file(sidecar, "no timed lines in it".into())]);
    }
    clip.lines = Some(lines);
    clip.derive_text();
    let left: Vec<Problem> = validate(&clip, Some(duration))
        .into_iter()
        .map(|(field, message)| Problem {
            file: sidecar.clone(),
            line: 0,
            field,
            message,
        })
        .collect();
    if left.is_empty() {
        Ok((clip, warnings))
    } else {
        Err(left)
    }
}

/// `path` as written relative to `base` when both resolve, with `/` separators; else
/// absolute.
pub fn relative_to(path: &Path, base: &Path) -> String {
    let (Ok(p), Ok(b)) = (path.canonicalize(), base.canonicalize()) else {
        return path.to_string_lossy().into_owned();
    };
    let pc: Vec<_> = p.components().collect();
    let bc: Vec<_> = b.components().collect();
    let common = pc.iter().zip(&bc).take_while(|(x, y)| x == y).count();
    if common == 0 {
        return p.to_string_lossy().into_owned();
    }
    let mut parts: Vec<String> = vec!["..".into(); bc.len() - common];
    parts.extend(
        pc[common..]
            .iter()
            .map(|c| c.as_os_str().to_string_lossy().into_owned()),
    );
    parts.join("/")
}
