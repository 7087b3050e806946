//! WebVTT (W3C, <https://www.w3.org/TR/webvtt1/>): a file read whole so it can be retimed
//! and written back, and read or written as transcript [`Line`]s.
//!
//! The reader follows the specification's parser for the file's structure (how lines make
//! blocks, which block is a cue, where a cue's text ends) but is strict where that parser
//! forgives: every departure from the specification's syntax is an error with its line,
//! because a cue the parser quietly drops is a label silently lost.

use std::fmt;
use std::path::Path;

use serde_json::Map;

use super::{Line, Problem};

mod markup;
mod structure;
mod timestamp;

pub use markup::{CueText, cue_text};
pub use timestamp::{format_timestamp, parse_timestamp};

use markup::retime_inline;
use structure::parse_all;

/// One parsed WebVTT file, kept whole so it can be written back after retiming.
#[derive(Debug, Clone, PartialEq)]
pub struct Document {
    /// Everything after `WEBVTT` on line 1 (e.g. `" - site B, night shift"`), plus any header
    /// lines below it up to the first blank line, each after a `'\n'`, as written.
    pub header: String,
    /// The blocks after the header, in file order.
    pub blocks: Vec<Block>,
    /// Departures from the syntax that lose nothing and so do not refuse the file: cue
    /// settings the specification's parser ignores or that break the syntax (a setting only
    /// changes a player's layout). Kept as written in `blocks`; line numbers as in errors.
    pub warnings: Vec<SyntaxError>,
}

/// One block of a WebVTT file.
#[derive(Debug, Clone, PartialEq)]
pub enum Block {
    /// A cue.
    Cue(Cue),
    /// A comment: the whole block as written, from `NOTE` on, lines joined by `'\n'`.
    Note(String),
    /// A style sheet: the whole block as written, from `STYLE` on, lines joined by `'\n'`.
    Style(String),
    /// A region definition: the whole block as written, from `REGION` on.
    Region(String),
}

/// One cue: a timed stretch of text.
#[derive(Debug, Clone, PartialEq)]
pub struct Cue {
    /// 1-based line number of the timing line in the file.
    pub line: usize,
    /// The cue identifier, when the block has one.
    pub id: Option<String>,
    /// Start, seconds.
    pub start: f64,
    /// End, seconds.
    pub end: f64,
    /// The cue settings after the end time, as written (e.g. `"align:start line:0"`).
    pub settings: String,
    /// The raw cue payload, markup kept, lines joined by `'\n'`.
    pub text: String,
}

/// One place where a file breaks the WebVTT syntax.
#[derive(Debug, Clone, PartialEq)]
pub struct SyntaxError {
    /// 1-based line number.
    pub line: usize,
    /// What is wrong.
    pub message: String,
}

impl fmt::Display for SyntaxError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

impl std::error::Error for SyntaxError {}

/// Parse per the W3C WebVTT specification's file structure and parsing rules, but strictly:
/// every error is collected with its line (missing or garbled `WEBVTT` signature, a bad
/// timestamp, a timing line without spaces around `-->`, an end not after its start, cues out
/// of start-time order, an unknown or badly valued region setting, a duplicate cue
/// identifier, STYLE or REGION after the first cue, a block that is none of cue, NOTE, STYLE
/// or REGION, `-->` where a new block needs a blank line before it, a malformed inline
/// timestamp or one outside its cue).
///
/// Cue settings are the exception: one that is unknown, badly valued or given twice is a
/// [`Document::warnings`] entry, not an error, since it can change nothing but a player's
/// layout and the specification's parser skips the bad ones.
///
/// Header lines below the `WEBVTT` line are accepted (the specification's parser skips them
/// and files in the wild carry them). Inline timestamps may equal their cue's start or end, as
/// in the specification's own example for `:past` and `:future`.
///
/// # Errors
/// Every syntax error found, in line order.
pub fn parse(text: &str) -> Result<Document, Vec<SyntaxError>> {
    let (doc, errors) = parse_all(text);
    if errors.is_empty() {
        Ok(doc)
    } else {
        Err(errors)
    }
}

impl Document {
    /// The cues, in file order.
    pub fn cues(&self) -> impl Iterator<Item = &Cue> {
        self.blocks.iter().filter_map(|b| match b {
            Block::Cue(c) => Some(c),
            _ => None,
        })
    }

    /// Every cue's start and end, and every inline timestamp tag (`<00:00:01.500>`) in cue
    /// text, through `f` (seconds to seconds). Inline timestamps are written back rounded to
    /// the millisecond; anything else in the text is untouched.
    pub fn retime(&mut self, mut f: impl FnMut(f64) -> f64) {
        for block in &mut self.blocks {
            if let Block::Cue(cue) = block {
                cue.start = f(cue.start);
                cue.end = f(cue.end);
                cue.text = retime_inline(&cue.text, &mut f);
            }
        }
    }

    /// Serialise: `WEBVTT` and the header, then each block after one blank line, times as
    /// `hh:mm:ss.mmm`. `parse(&doc.to_text())` gives back the same document, times to the
    /// millisecond (and cue line numbers too, unless the original had runs of blank lines).
    /// A header that is not empty must start with a space, a tab or a line break, and cue text
    /// must hold no blank line, as in any parsed document.
    pub fn to_text(&self) -> String {
        let mut out = format!("WEBVTT{}\n", self.header);
        for block in &self.blocks {
            out.push('\n');
            match block {
                Block::Cue(cue) => {
                    if let Some(id) = &cue.id {
                        out.push_str(id);
                        out.push('\n');
                    }
                    out.push_str(&format_timestamp(cue.start));
                    out.push_str(" --> ");
                    out.push_str(&format_timestamp(cue.end));
                    if !cue.settings.is_empty() {
                        out.push(' ');
                        out.push_str(&cue.settings);
                    }
                    out.push('\n');
                    if !cue.text.is_empty() {
                        out.push_str(&cue.text);
                        out.push('\n');
                    }
                }
                Block::Note(text) | Block::Style(text) | Block::Region(text) => {
                    out.push_str(text);
                    out.push('\n');
                }
            }
        }
        out
    }
}

/// A WebVTT file as transcript lines: one line per cue, text and speaker from [`cue_text`],
/// no words (a cue's inline timestamps give word starts but no ends). Cue identifiers and
/// settings, NOTE, STYLE and REGION blocks are not carried over.
///
/// # Errors
/// Each a [`Problem`] naming `path` and the file line: every [`SyntaxError`], plus every pair
/// of overlapping cues (reported on the later one), which a transcript cannot hold — except
/// when both carry voice spans with different speakers, which is cross-talk. Warnings are
/// left out here; [`read_transcript`] keeps them.
pub fn read_lines(path: &Path, text: &str) -> Result<Vec<Line>, Vec<Problem>> {
    read_transcript(path, text).map(|t| t.lines)
}

/// A WebVTT file read as transcript lines, with what was worth saying about it.
#[derive(Debug, Clone, PartialEq)]
pub struct Transcript {
    /// One line per cue, as [`read_lines`] gives them.
    pub lines: Vec<Line>,
    /// The file's [`Document::warnings`], each naming `path` and the file line.
    pub warnings: Vec<Problem>,
}

/// [`read_lines`], keeping the warnings (cue settings that were ignored) for the caller to
/// show.
///
/// # Errors
/// As [`read_lines`].
pub fn read_transcript(path: &Path, text: &str) -> Result<Transcript, Vec<Problem>> {
    let problem = |line: usize, message: String| Problem {
        file: path.to_path_buf(),
        line,
        field: String::new(),
        message,
    };
    let (doc, errors) = parse_all(text);
    let mut problems: Vec<Problem> = errors
        .into_iter()
        .map(|e| problem(e.line, e.message))
        .collect();
    let cues: Vec<(&Cue, CueText)> = doc.cues().map(|c| (c, cue_text(&c.text))).collect();
    // Earlier cues still running at the current cue's start (cues come in start order).
    let mut running: Vec<usize> = Vec::new();
    for (k, (cue, plain)) in cues.iter().enumerate() {
        running.retain(|&o| cues[o].0.end > cue.start);
        for &o in &running {
            let (earlier, earlier_plain) = &cues[o];
            let cross_talk = matches!(
                (&earlier_plain.speaker, &plain.speaker),
                (Some(a), Some(b)) if a != b
            );
            if !cross_talk {
                problems.push(problem(
                    cue.line,
                    format!(
                        "cue starting at {} overlaps the cue on line {} (until {}); transcript \
                         lines may overlap only as cross-talk, with different <v> speakers",
                        format_timestamp(cue.start),
                        earlier.line,
                        format_timestamp(earlier.end)
                    ),
                ));
            }
        }
        running.push(k);
    }
    if !problems.is_empty() {
        problems.sort_by_key(|p| p.line);
        return Err(problems);
    }
    let lines = cues
        .into_iter()
        .map(|(cue, plain)| Line {
            start: cue.start,
            end: cue.end,
            text: plain.text,
            speaker: plain.speaker,
            words: Vec::new(),
            extra: Map::new(),
        })
        .collect();
    let warnings = doc
        .warnings
        .iter()
        .map(|w| problem(w.line, w.message.clone()))
        .collect();
    Ok(Transcript { lines, warnings })
}

/// Transcript lines as a WebVTT file: `WEBVTT`, a blank line, then one cue per line,
/// `hh:mm:ss.mmm --> hh:mm:ss.mmm` (rounded to the millisecond) and a one-line payload:
/// `<v speaker>` when the line has a speaker, then the text, with `&`, `<` and `>` escaped
/// (so no markup and no `-->` can come from the text) and line breaks as spaces. The payload
/// is always one line, so the cue of `lines[k]` has its timing line on line `3 + 3k`.
///
/// Words are not written: WebVTT has inline timestamps for word starts but nothing for word
/// ends. Lines are written as given: a line shorter than a millisecond, lines out of order or
/// overlapping lines (other than cross-talk) make a file that [`read_lines`] rejects. Reading
/// back trims ASCII whitespace from the text and collapses whitespace in the speaker (the
/// specification's rule for annotations); a speaker of only whitespace is not written.
pub fn write_lines(lines: &[Line]) -> String {
    let mut out = String::from("WEBVTT\n");
    for line in lines {
        out.push('\n');
        out.push_str(&format_timestamp(line.start));
        out.push_str(" --> ");
        out.push_str(&format_timestamp(line.end));
        out.push('\n');
        if let Some(speaker) = &line.speaker {
            let speaker = one_line(speaker);
            if !speaker
                .trim_matches(|c: char| c.is_ascii_whitespace())
                .is_empty()
            {
                out.push_str("<v ");
                out.push_str(&escape(&speaker));
                out.push('>');
            }
        }
        out.push_str(&escape(&one_line(&line.text)));
        out.push('\n');
    }
    out
}

fn one_line(s: &str) -> String {
    s.replace("\r\n", " ").replace(['\r', '\n'], " ")
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}
