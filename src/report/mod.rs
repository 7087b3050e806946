//! The report: a static page (`OUT/report/index.html` with its pictures) that shows what a
//! run made — figures at a glance, every step's values against the recipe, label health,
//! rejects, and a gallery of spectrograms with players.
//!
//! Built for large runs: every figure comes from one streaming pass over the manifest in
//! memory that does not grow with the number of takes ([`gather`]); the gallery is a
//! bounded, seeded sample, plus any takes asked for by id. The page needs no network: no
//! script, no remote font, every picture a file beside it.
//!
//! Drawing: spectrograms are PNGs through the `png` crate (the library's own STFT and mel
//! scale make the pixels); charts and overlays are SVG written directly, so every
//! coordinate is exact and documented (see [`svg`]).

pub mod gallery;
pub mod gather;
pub mod hist;
mod html;
pub mod ranges;
pub mod rejects;
pub mod spectrogram;
pub mod svg;

use std::io::{BufReader, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::files::write_atomically;
use crate::run::{MANIFEST_NAME, REJECTS_NAME};
use crate::slice::LEFT_OUT_NAME;
use crate::transcript::{Clip, parse_clip};
use gallery::SourceClip;
use gather::{GatherSpec, gather};

/// Folder of the report inside a run's output folder.
pub const REPORT_DIR: &str = "report";
/// The page.
pub const INDEX_NAME: &str = "index.html";
/// What a run told the report about itself, kept beside the page so a later
/// `retake report` shows it again.
pub const FACTS_NAME: &str = "run.json";
/// Takes drawn for the gallery unless asked otherwise.
pub const DEFAULT_SAMPLE: usize = 8;
/// Most takes shown for the ids asked for.
pub const SHOW_LIMIT: usize = 64;

/// Facts only the run knows: kept in `report/run.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunFacts {
    /// Version of the tool that made the takes.
    pub version: String,
    /// Wall-clock seconds of the run.
    pub wall_seconds: f64,
    /// Seconds of take audio the run made (kept takes excluded), for the throughput.
    pub seconds_made: f64,
    /// Manifest lines the run read (clips in, rejects included).
    pub clips_in: usize,
    /// The recipe's path as given.
    pub recipe_path: String,
    /// The recipe as written.
    pub recipe_text: String,
    /// The input manifest's path as given.
    pub input: String,
}

/// What to report on and how.
#[derive(Debug, Clone)]
pub struct ReportSpec<'a> {
    /// The run's output folder (holds `manifest.jsonl`).
    pub out: &'a Path,
    /// Facts from the run that just finished; else those a `--report` run saved are used.
    pub facts: Option<RunFacts>,
    /// The recipe, when given (else the one in the saved facts).
    pub recipe: Option<&'a Path>,
    /// The input manifest, to find source clips (else the saved one, else take 0).
    pub input: Option<&'a Path>,
    /// Takes drawn for the gallery.
    pub sample: usize,
    /// Seed of the gallery sample (default: the recipe's seed).
    pub seed: Option<u64>,
    /// Take ids or source ids to show as well.
    pub show: &'a [String],
}

/// What was written.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportSummary {
    /// The page.
    pub index: PathBuf,
    /// Takes in the manifest.
    pub takes: u64,
    /// Takes in the gallery.
    pub gallery: usize,
    /// Ids asked for that matched no take.
    pub not_found: Vec<String>,
    /// Bytes written (page, styles, pictures, copied source audio).
    pub bytes: u64,
}

/// Why no report could be written.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// A file the report reads.
    #[error("{}: cannot read: {source}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// A file the report writes.
    #[error("{}: cannot write: {source}", path.display())]
    Write {
        /// The file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
}

fn read_err(path: &Path) -> impl FnOnce(std::io::Error) -> ReportError + '_ {
    move |source| ReportError::Read {
        path: path.to_path_buf(),
        source,
    }
}

fn write_err(path: &Path) -> impl FnOnce(std::io::Error) -> ReportError + '_ {
    move |source| ReportError::Write {
        path: path.to_path_buf(),
        source,
    }
}

/// Resolve a path given relative to a folder (absolute paths stay).
fn under(base: &Path, p: &str) -> PathBuf {
    let p = Path::new(p);
    if p.is_absolute() {
        p.to_path_buf()
    } else {
        base.join(p)
    }
}

/// A relative path as a URL path: every byte outside the unreserved set percent-encoded
/// (a take file named `north%2Fdock` must be linked as `north%252Fdock`).
pub fn url_path(rel: &str) -> String {
    let mut o = String::new();
    for b in rel.bytes() {
        if b.is_ascii_alphanumeric() || b"-._~/".contains(&b) {
            o.push(b as char);
        } else {
            o.push_str(&format!("%{b:02X}"));
        }
    }
    o
}

/// Write the report of the run in `spec.out`.
///
/// # Errors
/// The manifest cannot be read, or a report file cannot be written.
pub fn write_report(spec: &ReportSpec<'_>) -> Result<ReportSummary, ReportError> {
    let dir = spec.out.join(REPORT_DIR);
    std::fs::create_dir_all(&dir).map_err(write_err(&dir))?;
    let facts_path = dir.join(FACTS_NAME);
    let facts = match &spec.facts {
        Some(f) => {
            let text = serde_json::to_string_pretty(f).unwrap_or_default();
            write_atomically(&facts_path, |w| w.write_all(text.as_bytes()))
                .map_err(write_err(&facts_path))?;
            Some(f.clone())
        }
        None => std::fs::read_to_string(&facts_path)
            .ok()
            .and_then(|t| serde_json::from_str::<RunFacts>(&t).ok()),
    };
    let recipe_text = match spec.recipe {
        Some(p) => Some(std::fs::read_to_string(p).map_err(read_err(p))?),
        None => facts.as_ref().map(|f| f.recipe_text.clone()),
    };
    let ranges = recipe_text
        .as_deref()
        .map(ranges::recipe_ranges)
        .unwrap_or_default();
    let input: Option<PathBuf> = spec
        .input
        .map(Path::to_path_buf)
        .or_else(|| facts.as_ref().map(|f| PathBuf::from(&f.input)));
    let seed = spec.seed.or(ranges.seed.map(|s| s as u64)).unwrap_or(0);

    let manifest = spec.out.join(MANIFEST_NAME);
    let file = std::fs::File::open(&manifest).map_err(read_err(&manifest))?;
    let gspec = GatherSpec {
        seed,
        sample: spec.sample,
        show: spec.show,
        show_limit: SHOW_LIMIT,
    };
    let agg = gather(BufReader::new(file), &gspec).map_err(read_err(&manifest))?;
    let rejects = group_file(&spec.out.join(REJECTS_NAME), "id", &["field", "reason"])?;
    let left_out = group_file(&spec.out.join(LEFT_OUT_NAME), "source", &["reason"])?;

    // Gallery: asked-for takes first, then the sample, each take once.
    let mut picks: Vec<(Clip, bool)> = agg.asked.iter().map(|c| (c.clone(), true)).collect();
    let not_found: Vec<String> = spec
        .show
        .iter()
        .filter(|s| {
            !agg.asked
                .iter()
                .any(|c| c.id == **s || c.origin.as_ref().is_some_and(|o| o.source == **s))
        })
        .cloned()
        .collect();
    for (_, clip) in agg.sample.clone().into_sorted() {
        if !picks.iter().any(|(c, _)| c.id == clip.id) {
            picks.push((clip, false));
        }
    }
    let sources = find_sources(&picks, input.as_deref(), &manifest)?;

    // Earlier pictures and copies go: the folders hold only what this page links.
    for sub in ["img", "media"] {
        let p = dir.join(sub);
        if p.exists() {
            std::fs::remove_dir_all(&p).map_err(write_err(&p))?;
        }
        std::fs::create_dir_all(&p).map_err(write_err(&p))?;
    }
    let mut bytes = 0u64;
    let mut cards = Vec::new();
    for (i, (take, asked)) in picks.iter().enumerate() {
        let source_id = take.origin.as_ref().map_or("", |o| o.source.as_str());
        let source = sources.iter().find(|s| s.clip.id == source_id);
        let take_audio = under(spec.out, &take.audio);
        let take_href = if Path::new(&take.audio).is_absolute() {
            format!("file://{}", url_path(&take.audio))
        } else {
            format!("../{}", url_path(&take.audio))
        };
        let (card, files) = gallery::entry(
            &gallery::Entry {
                index: i,
                take,
                take_audio: &take_audio,
                take_href,
                source,
                asked: *asked,
            },
            i == 0,
        );
        for (name, data) in files {
            let p = dir.join(&name);
            write_atomically(&p, |w| w.write_all(&data)).map_err(write_err(&p))?;
            bytes += data.len() as u64;
        }
        cards.push(card);
    }
    let page = html::page(&html::Page {
        out: spec.out,
        facts: facts.as_ref(),
        recipe_text: recipe_text.as_deref(),
        ranges: &ranges,
        agg: &agg,
        rejects: &rejects,
        left_out: &left_out,
        cards: &cards,
        sample_seed: seed,
        sample_size: spec.sample,
        not_found: &not_found,
    });
    let css_path = dir.join(html::CSS_NAME);
    write_atomically(&css_path, |w| w.write_all(html::CSS.as_bytes()))
        .map_err(write_err(&css_path))?;
    let index = dir.join(INDEX_NAME);
    write_atomically(&index, |w| w.write_all(page.as_bytes())).map_err(write_err(&index))?;
    bytes += (page.len() + html::CSS.len()) as u64;
    Ok(ReportSummary {
        index,
        takes: agg.takes,
        gallery: cards.len(),
        not_found,
        bytes,
    })
}

fn group_file(
    path: &Path,
    id_key: &str,
    reason_keys: &[&str],
) -> Result<Option<rejects::Grouped>, ReportError> {
    match std::fs::File::open(path) {
        Ok(f) => rejects::group(BufReader::new(f), id_key, reason_keys)
            .map(Some)
            .map_err(read_err(path)),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(read_err(path)(e)),
    }
}

/// The source clips of the picked takes: from the input manifest when there is one, else
/// each source's take 0 when it is the untouched source (no step ran).
fn find_sources(
    picks: &[(Clip, bool)],
    input: Option<&Path>,
    manifest: &Path,
) -> Result<Vec<SourceClip>, ReportError> {
    let mut wanted: Vec<&str> = picks
        .iter()
        .filter_map(|(c, _)| c.origin.as_ref().map(|o| o.source.as_str()))
        .collect();
    wanted.sort_unstable();
    wanted.dedup();
    let mut found = Vec::new();
    let scan = |path: &Path, found: &mut Vec<SourceClip>, takes: bool| -> std::io::Result<()> {
        use std::io::BufRead;
        let base = path.parent().unwrap_or(Path::new("."));
        let f = std::fs::File::open(path)?;
        for line in BufReader::new(f).lines() {
            let line = line?;
            let Ok(clip) = parse_clip(line.trim_start_matches('\u{feff}')) else {
                continue;
            };
            let id = match (&clip.origin, takes) {
                (None, false) => clip.id.clone(),
                (Some(o), true) if o.take == 0 && o.steps.iter().all(|s| !s.ran) => {
                    o.source.clone()
                }
                _ => continue,
            };
            if wanted.contains(&id.as_str()) && !found.iter().any(|s: &SourceClip| s.clip.id == id)
            {
                let audio = under(base, &clip.audio);
                let mut clip = clip;
                clip.id = id;
                found.push(SourceClip { clip, audio });
            }
        }
        Ok(())
    };
    if let Some(input) = input.filter(|p| p.is_file()) {
        scan(input, &mut found, false).map_err(read_err(input))?;
    }
    if found.len() < wanted.len() {
        scan(manifest, &mut found, true).map_err(read_err(manifest))?;
    }
    Ok(found)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn links_escape_what_a_url_would_misread() {
        assert_eq!(url_path("takes/a-1.t0.wav"), "takes/a-1.t0.wav");
        // A file name that holds `%` (an escaped clip id) must keep it as a byte.
        assert_eq!(
            url_path("takes/north%2Fdock%201.t2.wav"),
            "takes/north%252Fdock%25201.t2.wav"
        );
        assert_eq!(url_path("a b#c?.wav"), "a%20b%23c%3F.wav");
    }
}
