//! Any other annotation of the source clips (phone TSV, speaker-turn WebVTT, sound-event
//! spans) carried to the takes through the time maps a run stored in its manifest.
//!
//! The annotation of source clip `ID` is `LABELS/ID.tsv` and/or `LABELS/ID.vtt`. Each take
//! gets the same file with every time put through its `origin.time_map` and held inside the
//! take; everything else (extra columns, cue ids, settings, markup, NOTE and STYLE blocks) is
//! written back as it was. A WebVTT cue needs an end after its start, so a cue the map
//! squeezes to nothing (it lay entirely in a stretch a step cut away) is dropped and counted;
//! a TSV row keeps its zero length and is counted.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use crate::files::{file_stem, write_atomically};
use crate::outdir::FolderLock;
use crate::timemap::TimeMap;
use crate::transcript::{Manifest, Problem, tsv, webvtt};

/// A parsed annotation, kept whole so it is written back unchanged but for its times.
#[derive(Debug, Clone)]
pub enum Annotation {
    /// Rows of `start<TAB>end<TAB>label[<TAB>...]`.
    Tsv(tsv::Table),
    /// A WebVTT file.
    WebVtt(webvtt::Document),
}

/// Annotation file extensions looked for, in this order.
pub const EXTENSIONS: [&str; 2] = ["tsv", "vtt"];

impl Annotation {
    /// Read an annotation file; the extension picks the format.
    ///
    /// # Errors
    /// Unreadable file or every syntax problem, naming the file and line.
    pub fn read(path: &Path) -> Result<Self, Vec<Problem>> {
        let whole = |message: String| Problem {
            file: path.to_path_buf(),
            line: 0,
            field: String::new(),
            message,
        };
        let text = crate::transcript::read_text(path).map_err(|p| vec![p])?;
        match path.extension().and_then(|e| e.to_str()) {
            Some("tsv") => tsv::parse(path, &text).map(Self::Tsv),
            Some("vtt") => webvtt::parse(&text).map(Self::WebVtt).map_err(|errors| {
                errors
                    .into_iter()
                    .map(|e| Problem {
                        file: path.to_path_buf(),
                        line: e.line,
                        field: String::new(),
                        message: e.message,
                    })
                    .collect()
            }),
            _ => Err(vec![whole("expected a .tsv or .vtt file".into())]),
        }
    }

    /// The file extension this annotation is written with.
    pub fn extension(&self) -> &'static str {
        match self {
            Self::Tsv(_) => "tsv",
            Self::WebVtt(_) => "vtt",
        }
    }

    /// Every time through `map`, held inside `[0, duration]`. Returns how many spans were
    /// squeezed to zero length (WebVTT cues among them are removed).
    pub fn through(&mut self, map: &TimeMap, duration: f64) -> usize {
        let put = |t: f64| map.apply_within(t, duration);
        match self {
            Self::Tsv(table) => {
                let before: Vec<bool> = table.rows().map(|r| r.end > r.start).collect();
                table.retime(put);
                table
                    .rows()
                    .zip(before)
                    .filter(|(r, had)| *had && r.end <= r.start)
                    .count()
            }
            Self::WebVtt(doc) => {
                doc.retime(put);
                let n = doc.blocks.len();
                doc.blocks
                    .retain(|b| !matches!(b, webvtt::Block::Cue(c) if c.end <= c.start));
                n - doc.blocks.len()
            }
        }
    }

    /// The annotation as file text.
    pub fn to_text(&self) -> String {
        match self {
            Self::Tsv(t) => t.to_text(),
            Self::WebVtt(d) => d.to_text(),
        }
    }
}

/// The annotation files of source clip `source` under `labels`: `LABELS/<source>.<ext>`
/// for each extension that exists. A source id is a path inside the labels folder (ids
/// made by `import` hold `/` for subfolders), so one that is absolute or holds `..` or `.`
/// parts is refused, as is a file that a link leads outside the folder.
///
/// # Errors
/// Why the id cannot name a file inside `labels`.
pub fn label_files(labels: &Path, source: &str) -> Result<Vec<PathBuf>, String> {
    use std::path::Component;
    let rel = Path::new(source);
    let plain = !source.is_empty()
        && !source.contains('\\')
        && rel.components().all(|c| matches!(c, Component::Normal(_)))
        && !source
            .split('/')
            .any(|part| part.is_empty() || part == "." || part == "..");
    if !plain {
        return Err(format!(
            "source id `{source}` cannot name an annotation file: only ids that are plain \
             relative paths (no leading `/`, no `.` or `..` parts) are looked up inside the \
             labels folder"
        ));
    }
    let root = labels
        .canonicalize()
        .map_err(|e| format!("{}: {e}", labels.display()))?;
    let mut found = Vec::new();
    for ext in EXTENSIONS {
        let path = labels.join(format!("{source}.{ext}"));
        if !path.is_file() {
            continue;
        }
        match path.canonicalize() {
            Ok(real) if real.starts_with(&root) => found.push(path),
            _ => {
                return Err(format!(
                    "{}: a link leads outside the labels folder {}; not read",
                    path.display(),
                    labels.display()
                ));
            }
        }
    }
    Ok(found)
}

/// What a remap did.
#[derive(Debug, Default)]
pub struct Report {
    /// Takes in the manifest.
    pub takes: usize,
    /// Files written.
    pub written: Vec<PathBuf>,
    /// Source clips with no annotation file (ids), each listed once.
    pub missing: Vec<String>,
    /// Spans squeezed to zero length, over all files written.
    pub collapsed: usize,
    /// Bad annotation files and manifest lines that are not takes.
    pub problems: Vec<Problem>,
    /// Findings in annotation files that were carried over all the same (WebVTT cue
    /// settings a player would ignore), each naming its file and line.
    pub warnings: Vec<Problem>,
}

/// Carry the annotations in `labels` to every take of `manifest`, writing
/// `out/<take stem>.<ext>`.
///
/// # Errors
/// Only when the output folder or a file in it cannot be written, or another process holds
/// its lock ([`FolderLock`]).
pub fn remap(manifest: &Manifest, labels: &Path, out: &Path) -> std::io::Result<Report> {
    // One writer at a time: held until the last file is written.
    let _lock = FolderLock::acquire(out).map_err(std::io::Error::other)?;
    let mut report = Report {
        takes: manifest.entries.len(),
        problems: manifest.problems.clone(),
        ..Report::default()
    };
    let mut sources: HashMap<String, Vec<Annotation>> = HashMap::new();
    for entry in &manifest.entries {
        let take = &entry.clip;
        let (Some(origin), Some(duration)) = (&take.origin, take.duration) else {
            report.problems.push(Problem {
                file: manifest.path.clone(),
                line: entry.line,
                field: "origin".into(),
                message: format!(
                    "`{}` is not a take (no origin and duration); remap reads a run's output \
                     manifest",
                    take.id
                ),
            });
            continue;
        };
        if !sources.contains_key(&origin.source) {
            let paths = match label_files(labels, &origin.source) {
                Ok(paths) => paths,
                Err(reason) => {
                    report.problems.push(Problem {
                        file: manifest.path.clone(),
                        line: entry.line,
                        field: "origin.source".into(),
                        message: reason,
                    });
                    sources.insert(origin.source.clone(), Vec::new());
                    continue;
                }
            };
            if paths.is_empty() {
                report.missing.push(origin.source.clone());
            }
            let mut found = Vec::new();
            for path in paths {
                match Annotation::read(&path) {
                    Ok(a) => {
                        if let Annotation::WebVtt(doc) = &a {
                            report.warnings.extend(doc.warnings.iter().map(|w| Problem {
                                file: path.clone(),
                                line: w.line,
                                field: String::new(),
                                message: w.message.clone(),
                            }));
                        }
                        found.push(a);
                    }
                    Err(p) => report.problems.extend(p),
                }
            }
            sources.insert(origin.source.clone(), found);
        }
        for annotation in &sources[&origin.source] {
            let mut moved = annotation.clone();
            report.collapsed += moved.through(&origin.time_map, duration);
            let dest = out.join(format!("{}.{}", file_stem(&take.id), moved.extension()));
            let text = moved.to_text();
            write_atomically(&dest, |w| std::io::Write::write_all(w, text.as_bytes()))?;
            report.written.push(dest);
        }
    }
    Ok(report)
}
