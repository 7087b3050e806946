//! The clip / line / word model, the JSON Lines manifest, and label validation.
//!
//! One manifest line is one [`Clip`]. Input and output share the schema, so a run's output
//! can be the input of another; takes carry an [`Origin`]. Unknown fields are kept and
//! written back unchanged.

pub mod json_error;
pub mod stream;
pub mod tsv;

use std::io::Write;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use serde_json::{Map, Value};

use crate::timemap::TimeMap;

pub mod webvtt;

/// Timings may lie past the audio's end by this much (seconds) before it is a problem: a
/// tenth of a millisecond, below one sample at 8 kHz, absorbs rounding in hand-made labels.
pub const END_TOLERANCE_S: f64 = 1e-4;

/// A timed token inside a line.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Word {
    /// Start, seconds from the start of the audio.
    pub start: f64,
    /// End, seconds.
    pub end: f64,
    /// The token.
    pub text: String,
    /// Fields this version does not know, carried through.
    #[serde(flatten)]
    pub extra: Map<String, Value>,
}

/// A timed stretch of speech.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Line {
    /// Start, seconds.
    pub start: f64,
    /// End, seconds.
    pub end: f64,
    /// What was said.
    pub text: String,
    /// Who said it, when known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speaker: Option<String>,
    /// Word timings, when known, in order.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub words: Vec<Word>,
    /// Fields this version does not know, carried through.
    #[serde(flatten)]
    pub extra: Map<String, Value>,
}

/// What one step did to one take, as written in the manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StepRecord {
    /// Step name as in the recipe.
    pub step: String,
    /// False when the step's chance said no for this take.
    pub ran: bool,
    /// Values drawn for this take.
    #[serde(default, skip_serializing_if = "Map::is_empty")]
    pub drawn: Map<String, Value>,
    /// Values measured on the result.
    #[serde(default, skip_serializing_if = "Map::is_empty")]
    pub measured: Map<String, Value>,
    /// Why a step that was due left the take unchanged (e.g. silent speech for a noise step).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// Extra files the step wrote next to the take, by name (paths relative to the output
    /// manifest's folder), e.g. `clean` and `noise` stems of a mix.
    #[serde(default, skip_serializing_if = "Map::is_empty")]
    pub stems: Map<String, Value>,
}

/// Where a take came from: enough to explain and reproduce it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Origin {
    /// Id of the source clip.
    pub source: String,
    /// Take index, from 0.
    pub take: u32,
    /// The take's seed (a stable hash of recipe seed, clip id and take index), below 2^53.
    pub seed: u64,
    /// Sample rate of the source file before it was brought to the recipe's rate.
    pub source_rate: u32,
    /// Every step of the recipe in order, with what it drew and measured.
    pub steps: Vec<StepRecord>,
    /// Source time to take time, all steps composed; in JSON `{"source": [...], "take": [...]}`.
    pub time_map: TimeMap,
}

/// One recording and its transcript: one manifest line.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Clip {
    /// Unique id.
    pub id: String,
    /// Audio path, relative to the manifest's folder (or absolute).
    pub audio: String,
    /// Timed transcript.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lines: Option<Vec<Line>>,
    /// The transcript as one string. Without `lines` it is the untimed transcript; beside
    /// `lines` it is their texts joined by one space ([`joined_text`]), written on every
    /// clip this crate makes so a loader needs no glue, and checked by [`validate`].
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub text: Option<String>,
    /// Audio length in seconds (written on takes; optional on input).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub duration: Option<f64>,
    /// How a take was made; absent on source clips.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub origin: Option<Origin>,
    /// Fields this version does not know, carried through.
    #[serde(flatten)]
    pub extra: Map<String, Value>,
}

impl Clip {
    /// Set `text` to the lines' texts joined ([`joined_text`]) when the clip is timed; an
    /// untimed clip keeps its own `text`.
    pub fn derive_text(&mut self) {
        if let Some(lines) = &self.lines {
            self.text = Some(joined_text(lines));
        }
    }
}

/// The texts of `lines` in order, joined by one space: a timed clip's top-level `text`.
pub fn joined_text(lines: &[Line]) -> String {
    lines
        .iter()
        .map(|l| l.text.as_str())
        .collect::<Vec<_>>()
        .join(" ")
}

/// One thing wrong with one line of a manifest or transcript file.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// The file (manifest, WebVTT, TSV, ...).
    pub file: PathBuf,
    /// 1-based line number in the file (0 when the problem is the whole file).
    pub line: usize,
    /// The field, as a path (`lines[0].words[2].end`), or empty for the whole line.
    pub field: String,
    /// What is wrong.
    pub message: String,
}

impl std::fmt::Display for Problem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.line == 0 {
            write!(f, "{}: ", self.file.display())?;
        } else {
            write!(f, "{} line {}: ", self.file.display(), self.line)?;
        }
        if !self.field.is_empty() {
            write!(f, "{}: ", self.field)?;
        }
        f.write_str(&self.message)
    }
}

impl std::error::Error for Problem {}

/// A manifest line that parsed, with its position.
#[derive(Debug, Clone)]
pub struct Entry {
    /// 1-based line number.
    pub line: usize,
    /// The clip.
    pub clip: Clip,
}

/// A manifest read line by line: good entries and the problems of the bad lines.
#[derive(Debug, Default)]
pub struct Manifest {
    /// The file read.
    pub path: PathBuf,
    /// Lines that parsed, in file order.
    pub entries: Vec<Entry>,
    /// Lines that did not, one problem each.
    pub problems: Vec<Problem>,
}

impl Manifest {
    /// The folder audio paths are relative to.
    pub fn base(&self) -> &Path {
        audio_base(&self.path)
    }
}

/// The folder the audio paths of manifest `manifest` are relative to: its own.
pub fn audio_base(manifest: &Path) -> &Path {
    manifest.parent().unwrap_or(Path::new("."))
}

/// Read a JSON Lines manifest. A bad line (empty, not UTF-8, not JSON, wrong field type,
/// duplicate id) becomes a [`Problem`] and reading goes on. A UTF-8 byte-order mark at the
/// start is skipped.
///
/// # Errors
/// When the file itself cannot be opened or read, is not a regular file, or is plainly not a
/// JSON Lines manifest at all (a TOML recipe, one JSON document over many lines): then one
/// error of kind [`std::io::ErrorKind::InvalidData`] says so, instead of one problem per
/// line.
pub fn read_manifest(path: &Path) -> std::io::Result<Manifest> {
    let bytes = crate::input_file::read(path)?;
    let mut manifest = Manifest {
        path: path.to_path_buf(),
        ..Manifest::default()
    };
    let mut seen = std::collections::HashMap::new();
    let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(&bytes);
    for (i, raw) in manifest_lines(body).enumerate() {
        let line = i + 1;
        let parsed = match std::str::from_utf8(raw) {
            Ok(text) => parse_clip(text),
            Err(e) => Err((String::new(), not_utf8(raw, &e))),
        };
        match parsed {
            Ok(clip) => {
                if let Some(first) = seen.insert(clip.id.clone(), line) {
                    manifest.problems.push(Problem {
                        file: path.to_path_buf(),
                        line,
                        field: "id".into(),
                        message: format!("`{}` already used on line {first}", clip.id),
                    });
                } else {
                    manifest.entries.push(Entry { line, clip });
                }
            }
            Err((field, message)) => manifest.problems.push(Problem {
                file: path.to_path_buf(),
                line,
                field,
                message,
            }),
        }
    }
    if manifest.entries.is_empty()
        && !manifest.problems.is_empty()
        && let Some(what) = not_json_lines(path, body)
    {
        return Err(std::io::Error::new(
            std::io::ErrorKind::InvalidData,
            format!("not a JSON Lines manifest: {what}"),
        ));
    }
    Ok(manifest)
}

/// The lines of a file as bytes, as [`std::io::BufRead::lines`] splits them (`\n` or `\r\n`, no
/// empty line after a final line break).
fn manifest_lines(body: &[u8]) -> impl Iterator<Item = &[u8]> {
    let body = body.strip_suffix(b"\n").unwrap_or(body);
    let empty = body.is_empty();
    body.split(|&b| b == b'\n')
        .map(|l| l.strip_suffix(b"\r").unwrap_or(l))
        .filter(move |_| !empty)
}

/// A transcript or annotation file as text: regular files only, a UTF-8 byte-order mark
/// dropped, and bytes that are not UTF-8 reported with their line and column.
///
/// # Errors
/// One [`Problem`] naming the file (and the line, for bad bytes).
pub fn read_text(path: &Path) -> Result<String, Problem> {
    let problem = |line: usize, message: String| Problem {
        file: path.to_path_buf(),
        line,
        field: String::new(),
        message,
    };
    let mut bytes =
        crate::input_file::read(path).map_err(|e| problem(0, format!("cannot read: {e}")))?;
    if bytes.starts_with(b"\xEF\xBB\xBF") {
        bytes.drain(..3);
    }
    String::from_utf8(bytes).map_err(|e| {
        let bytes = e.as_bytes();
        let at = e.utf8_error().valid_up_to();
        let start = bytes[..at]
            .iter()
            .rposition(|&b| b == b'\n')
            .map_or(0, |i| i + 1);
        let line = bytes[..at].iter().filter(|&&b| b == b'\n').count() + 1;
        let raw = &bytes[start..];
        let end = raw.iter().position(|&b| b == b'\n').unwrap_or(raw.len());
        let raw = &raw[..end];
        let e = std::str::from_utf8(raw).expect_err("the bad byte is on this line");
        problem(line, not_utf8(raw, &e))
    })
}

/// Where a line stops being UTF-8, in a person's terms.
pub(crate) fn not_utf8(raw: &[u8], e: &std::str::Utf8Error) -> String {
    let at = e.valid_up_to();
    let column = String::from_utf8_lossy(&raw[..at]).chars().count() + 1;
    format!(
        "not UTF-8 text: byte 0x{:02X} at column {column} (save the file as UTF-8)",
        raw[at]
    )
}

/// Why a file none of whose lines is a clip is not a manifest at all, when that is plain.
fn not_json_lines(path: &Path, body: &[u8]) -> Option<String> {
    let text = std::str::from_utf8(body).ok()?;
    let toml_name = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("toml"));
    let toml_table = text.parse::<toml::Table>().is_ok_and(|t| !t.is_empty());
    if toml_name || toml_table {
        return Some(
            "it is a TOML file (a recipe?); `--input` takes the JSON Lines manifest, one clip \
             per line, and the recipe comes first"
                .into(),
        );
    }
    if text.lines().count() > 1 && serde_json::from_str::<Value>(text).is_ok() {
        return Some(
            "it is one JSON document over several lines; a manifest holds one clip per line \
             (JSON Lines)"
                .into(),
        );
    }
    None
}

/// Parse one manifest line into a clip, or (field path, message). Messages are in the
/// manifest's terms (see [`json_error`]), not the JSON parser's.
pub fn parse_clip(text: &str) -> Result<Clip, (String, String)> {
    if text.trim().is_empty() {
        return Err((
            String::new(),
            "empty line (one clip per line, no blank lines)".into(),
        ));
    }
    let first = text.trim_start().chars().next().unwrap_or(' ');
    if first != '{' {
        let found = match first {
            '[' => "a list",
            '"' => "text",
            '0'..='9' | '-' => "a number",
            't' | 'f' | 'n' => "a bare word",
            _ => "something that is not JSON",
        };
        return Err((
            String::new(),
            format!("a clip must be a JSON object `{{...}}`, found {found}"),
        ));
    }
    let mut de = serde_json::Deserializer::from_str(text);
    let clip: Clip = serde_path_to_error::deserialize(&mut de).map_err(|e| {
        let path = e.path().to_string();
        json_error::explain(&path, e.inner())
    })?;
    de.end().map_err(|e| json_error::explain(".", &e))?;
    Ok(clip)
}

/// Write clips as JSON Lines.
///
/// # Errors
/// A failing writer.
pub fn write_manifest<'a, W: Write>(
    mut out: W,
    clips: impl IntoIterator<Item = &'a Clip>,
) -> std::io::Result<()> {
    for clip in clips {
        serde_json::to_writer(&mut out, clip)?;
        out.write_all(b"\n")?;
    }
    out.flush()
}

/// Check a clip's labels; `duration` is the audio's length when known.
/// Returns (field path, message) for every problem found.
pub fn validate(clip: &Clip, duration: Option<f64>) -> Vec<(String, String)> {
    let mut out = Vec::new();
    if clip.id.trim().is_empty() {
        out.push(("id".into(), "empty".into()));
    }
    if clip.audio.trim().is_empty() {
        out.push(("audio".into(), "empty".into()));
    }
    let Some(lines) = &clip.lines else {
        if clip.text.is_none() {
            out.push((
                String::new(),
                "needs `lines` (timed) or `text` (untimed)".into(),
            ));
        }
        return out;
    };
    if let Some(text) = &clip.text {
        let joined = joined_text(lines);
        if *text != joined {
            out.push((
                "text".into(),
                format!(
                    "beside `lines`, `text` must be the lines' texts joined by one space \
                     ({joined:?}), not {text:?}; leave it out and it is written for you"
                ),
            ));
        }
    }
    for (li, line) in lines.iter().enumerate() {
        let at = format!("lines[{li}]");
        check_span(&mut out, &at, line.start, line.end, duration, &clip.audio);
        if li > 0 && line.start < lines[li - 1].start {
            out.push((
                format!("{at}.start"),
                format!(
                    "{} s is before the previous line's start {} s (lines must be in order)",
                    line.start,
                    lines[li - 1].start
                ),
            ));
        }
        for (wi, word) in line.words.iter().enumerate() {
            let wat = format!("{at}.words[{wi}]");
            check_span(&mut out, &wat, word.start, word.end, duration, &clip.audio);
            if word.start < line.start - END_TOLERANCE_S || word.end > line.end + END_TOLERANCE_S {
                out.push((
                    wat.clone(),
                    format!(
                        "word {}..{} s lies outside its line {}..{} s",
                        word.start, word.end, line.start, line.end
                    ),
                ));
            }
            if wi > 0 {
                let prev = &line.words[wi - 1];
                if word.start < prev.start {
                    out.push((format!("{wat}.start"), format!("{} s is before the previous word's start {} s (words must be in order)", word.start, prev.start)));
                } else if word.start < prev.end - END_TOLERANCE_S {
                    out.push((
                        format!("{wat}.start"),
                        format!(
                            "{} s overlaps the previous word, which ends at {} s",
                            word.start, prev.end
                        ),
                    ));
                }
            }
        }
    }
    out
}

fn check_span(
    out: &mut Vec<(String, String)>,
    at: &str,
    start: f64,
    end: f64,
    duration: Option<f64>,
    audio: &str,
) {
    for (name, t) in [("start", start), ("end", end)] {
        if !t.is_finite() {
            out.push((format!("{at}.{name}"), format!("{t} is not a finite time")));
        } else if t < 0.0 {
            out.push((format!("{at}.{name}"), format!("{t} s is negative")));
        } else if let Some(d) = duration
            && t > d + END_TOLERANCE_S
        {
            out.push((
                format!("{at}.{name}"),
                format!("{t} s is past the end of the audio {audio} ({d:.4} s)"),
            ));
        }
    }
    if start.is_finite() && end.is_finite() && end < start {
        out.push((
            format!("{at}.end"),
            format!("end {end} s is before start {start} s"),
        ));
    }
}

/// Every line and word through `map`, held inside `[0, duration]`. Order and nesting are
/// kept because the map is monotone; nothing else about the labels changes.
pub fn remap_lines(lines: &[Line], map: &TimeMap, duration: f64) -> Vec<Line> {
    let put = |t: f64| map.apply_within(t, duration);
    lines
        .iter()
        .map(|line| Line {
            start: put(line.start),
            end: put(line.end),
            words: line
                .words
                .iter()
                .map(|w| Word {
                    start: put(w.start),
                    end: put(w.end),
                    ..w.clone()
                })
                .collect(),
            ..line.clone()
        })
        .collect()
}

/// Record on every line and word the fraction of its duration that lies under `hidden`
/// spans (seconds, any order, may overlap), as `obscured` in [0, 1]. A zero-length label is
/// obscured when its instant is hidden.
pub fn mark_obscured(lines: &mut [Line], hidden: &[(f64, f64)]) {
    let mut spans: Vec<(f64, f64)> = hidden.iter().copied().filter(|(a, b)| b > a).collect();
    spans.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut merged: Vec<(f64, f64)> = Vec::with_capacity(spans.len());
    for (a, b) in spans {
        match merged.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => merged.push((a, b)),
        }
    }
    let fraction = |start: f64, end: f64| -> f64 {
        if end <= start {
            let inside = merged.iter().any(|&(a, b)| a <= start && start < b);
            return if inside { 1.0 } else { 0.0 };
        }
        // A fold from +0.0: an empty float sum is -0.0, which would be written as such.
        let covered = merged
            .iter()
            .map(|&(a, b)| (b.min(end) - a.max(start)).max(0.0))
            .fold(0.0, |sum, x| sum + x);
        (covered / (end - start)).clamp(0.0, 1.0)
    };
    for line in lines {
        line.extra.insert(
            "obscured".into(),
            Value::from(fraction(line.start, line.end)),
        );
        for w in &mut line.words {
            w.extra
                .insert("obscured".into(), Value::from(fraction(w.start, w.end)));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"{"id":"a","audio":"a.wav","lines":[{"start":0.5,"end":1.5,"text":"bay three","speaker":"p1","words":[{"start":0.5,"end":0.9,"text":"bay"},{"start":1.0,"end":1.5,"text":"three"}]}],"site":"north"}"#;

    #[test]
    fn text_beside_lines_must_be_the_joined_lines() {
        let mut clip = parse_clip(GOOD).unwrap();
        assert_eq!(clip.text, None);
        clip.derive_text();
        assert_eq!(clip.text.as_deref(), Some("bay three"));
        assert!(validate(&clip, Some(2.0)).is_empty());
        // Written and read back, it is still a timed clip with the same text.
        let mut buf = Vec::new();
        write_manifest(&mut buf, [&clip]).unwrap();
        let back = parse_clip(std::str::from_utf8(&buf).unwrap().trim_end()).unwrap();
        assert_eq!(back, clip);
        assert!(back.lines.is_some());
        clip.text = Some("bay four".into());
        let problems = validate(&clip, Some(2.0));
        assert_eq!(problems.len(), 1, "{problems:?}");
        assert_eq!(problems[0].0, "text");
        // An untimed clip keeps its own text.
        let mut untimed = parse_clip(r#"{"id":"u","audio":"u.wav","text":"gate  seven"}"#).unwrap();
        untimed.derive_text();
        assert_eq!(untimed.text.as_deref(), Some("gate  seven"));
        assert!(validate(&untimed, None).is_empty());
    }

    #[test]
    fn round_trip_keeps_unknown_fields() {
        let clip = parse_clip(GOOD).unwrap();
        assert_eq!(clip.extra.get("site"), Some(&Value::from("north")));
        let mut buf = Vec::new();
        write_manifest(&mut buf, [&clip]).unwrap();
        let back = parse_clip(std::str::from_utf8(&buf).unwrap().trim_end()).unwrap();
        assert_eq!(back, clip);
        assert!(validate(&clip, Some(2.0)).is_empty());
    }

    #[test]
    fn times_survive_a_write_and_read_bit_for_bit() {
        let mut clip = parse_clip(GOOD).unwrap();
        let awkward = [
            0.1 + 0.2,
            0.237_874_999_999_999_98,
            1.0 / 3.0,
            7.802_688_000_000_001,
        ];
        clip.lines.as_mut().unwrap()[0].words[0].start = awkward[0];
        for (w, t) in clip.lines.as_mut().unwrap()[0]
            .words
            .iter_mut()
            .zip(&awkward[1..])
        {
            w.end = *t;
        }
        let text = serde_json::to_string(&clip).unwrap();
        assert_eq!(parse_clip(&text).unwrap(), clip);
    }

    #[test]
    fn bad_field_type_names_the_path() {
        let bad = GOOD.replace(r#""end":0.9"#, r#""end":"late""#);
        let (field, msg) = parse_clip(&bad).unwrap_err();
        assert_eq!(field, "lines[0].words[0].end");
        assert_eq!(
            msg,
            "`end` must be a number of seconds, found the text \"late\""
        );
    }

    #[test]
    fn nan_is_not_json() {
        let bad = GOOD.replace("0.9", "NaN");
        assert!(parse_clip(&bad).is_err());
    }

    #[test]
    fn empty_line_is_a_problem() {
        assert!(parse_clip("   ").unwrap_err().1.contains("empty line"));
    }

    #[test]
    fn validation_finds_each_kind_of_problem() {
        let clip = parse_clip(GOOD).unwrap();
        let fields = |c: &Clip, d| {
            validate(c, d)
                .into_iter()
                .map(|(f, _)| f)
                .collect::<Vec<_>>()
        };
        // Past the end of a 1.2 s audio.
        assert_eq!(
            fields(&clip, Some(1.2)),
            ["lines[0].end", "lines[0].words[1].end"]
        );
        let mut c = clip.clone();
        c.lines.as_mut().unwrap()[0].words[1].start = 0.8;
        assert_eq!(fields(&c, Some(2.0)), ["lines[0].words[1].start"]);
        let mut c = clip.clone();
        c.lines.as_mut().unwrap()[0].words.swap(0, 1);
        assert_eq!(fields(&c, Some(2.0)), ["lines[0].words[1].start"]);
        let mut c = clip.clone();
        c.lines.as_mut().unwrap()[0].end = 0.2;
        let f = fields(&c, Some(2.0));
        assert!(
            f.contains(&"lines[0].end".to_string()) && f.contains(&"lines[0].words[1]".to_string()),
            "{f:?}"
        );
        let mut c = clip.clone();
        c.lines.as_mut().unwrap()[0].start = -0.1;
        assert_eq!(fields(&c, Some(2.0)), ["lines[0].start"]);
        let mut c = clip;
        c.lines.as_mut().unwrap()[0].words[0].end = f64::NAN;
        assert!(fields(&c, Some(2.0)).contains(&"lines[0].words[0].end".to_string()));
    }

    #[test]
    fn obscured_is_the_covered_fraction() {
        let mut lines = parse_clip(GOOD).unwrap().lines.unwrap();
        // Words 0.5-0.9 and 1.0-1.5; hidden 0.7-1.1 and 1.05-1.2 (overlapping).
        mark_obscured(&mut lines, &[(1.05, 1.2), (0.7, 1.1)]);
        let o = |v: &Map<String, Value>| v["obscured"].as_f64().unwrap();
        assert!((o(&lines[0].words[0].extra) - 0.5).abs() < 1e-12);
        assert!((o(&lines[0].words[1].extra) - 0.4).abs() < 1e-12);
        assert!((o(&lines[0].extra) - 0.5).abs() < 1e-12);
        mark_obscured(&mut lines, &[]);
        let zero = o(&lines[0].words[0].extra);
        assert!(zero == 0.0 && zero.is_sign_positive(), "{zero}");
    }

    #[test]
    fn remap_keeps_nesting_and_bounds() {
        let clip = parse_clip(GOOD).unwrap();
        let map = TimeMap::linear(2.0, 2.0 / 1.1);
        let lines = remap_lines(clip.lines.as_ref().unwrap(), &map, 2.0 / 1.1);
        let w = &lines[0].words[1];
        assert!((w.start - 1.0 / 1.1).abs() < 1e-12 && (w.end - 1.5 / 1.1).abs() < 1e-12);
        let c = Clip {
            lines: Some(lines),
            ..clip
        };
        assert!(validate(&c, Some(2.0 / 1.1)).is_empty());
    }
}
