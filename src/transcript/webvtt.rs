//! WebVTT (W3C, <https://www.w3.org/TR/webvtt1/>): a file read whole so it can be retimed
//! and written back, and read or written as transcript [`Line`]s.
//!
//! The reader follows the specification's parser for the file's structure (how lines make
//! blocks, which block is a cue, where a cue's text ends) but is strict where that parser
//! forgives: every departure from the specification's syntax is an error with its line,
//! because a cue the parser quietly drops is a label silently lost.

use std::collections::{HashMap, HashSet};
use std::fmt;
use std::path::Path;

use serde_json::Map;

use super::{Line, Problem};

/// One parsed WebVTT file, kept whole so it can be written back after retiming.
#[derive(Debug, Clone, PartialEq)]
pub struct Document {
    /// Everything after `WEBVTT` on line 1 (e.g. `" - site B, night shift"`), plus any header
    /// lines below it up to the first blank line, each after a `'\n'`, as written.
    pub header: String,
    /// The blocks after the header, in file order.
    pub blocks: Vec<Block>,
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
/// of start-time order, an unknown or badly valued cue or region setting, a duplicate cue
/// identifier, STYLE or REGION after the first cue, a block that is none of cue, NOTE, STYLE
/// or REGION, `-->` where a new block needs a blank line before it, a malformed inline
/// timestamp or one outside its cue).
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

/// `hh:mm:ss.mmm` (hours two or more digits), rounded to the nearest millisecond of the exact
/// value of `t` (halves up); negative and NaN give `00:00:00.000`.
pub fn format_timestamp(t: f64) -> String {
    let ms = round_ms(t);
    let (h, rest) = (ms / 3_600_000, ms % 3_600_000);
    format!(
        "{h:02}:{:02}:{:02}.{:03}",
        rest / 60_000,
        rest / 1000 % 60,
        rest % 1000
    )
}

/// Whole milliseconds nearest to the exact value of `t`: the candidate from `round` is
/// checked against the half-way points with a fused multiply-add, whose sign is exact, so
/// 1.0005 (stored as 1.00049999999999994...) gives 1000, not 1001.
fn round_ms(t: f64) -> u64 {
    if t.is_nan() || t <= 0.0 {
        return 0;
    }
    let k = (t * 1000.0).round();
    if k >= 2f64.powi(52) {
        return k as u64; // saturates; halves are not representable up there anyway
    }
    if t.mul_add(1000.0, -(k + 0.5)) >= 0.0 {
        k as u64 + 1
    } else if t.mul_add(1000.0, -(k - 0.5)) < 0.0 {
        k as u64 - 1
    } else {
        k as u64
    }
}

/// The specification's timestamp syntax: optional hours (two or more digits) and `:`,
/// minutes `00`-`59`, `:`, seconds `00`-`59`, `.`, exactly three digits. Seconds, or `None`.
pub fn parse_timestamp(s: &str) -> Option<f64> {
    read_timestamp(s).ok()
}

/// [`parse_timestamp`] with the reason when `s` is not a timestamp.
fn read_timestamp(s: &str) -> Result<f64, String> {
    let bad = |why: &str| {
        Err(format!(
            "`{s}` is not a WebVTT timestamp ([hh:]mm:ss.ttt): {why}"
        ))
    };
    let digits = |x: &str| !x.is_empty() && x.bytes().all(|b| b.is_ascii_digit());
    if s.is_empty() {
        return Err("timestamp is missing".into());
    }
    let Some((clock, frac)) = s.rsplit_once('.') else {
        if s.contains(',') {
            return bad("the milliseconds follow a '.', not a ',' as in SRT");
        }
        return bad("no '.' before the milliseconds");
    };
    if frac.len() != 3 || !digits(frac) {
        return bad("the milliseconds need exactly three digits");
    }
    let parts: Vec<&str> = clock.split(':').collect();
    let (hours, minutes, seconds) = match parts.as_slice() {
        [m, s] => ("0", *m, *s),
        [h, m, s] => {
            if h.len() < 2 || !digits(h) {
                return bad("hours need two or more digits");
            }
            (*h, *m, *s)
        }
        _ => return bad("expected mm:ss.ttt or hh:mm:ss.ttt"),
    };
    for (name, v) in [("minutes", minutes), ("seconds", seconds)] {
        if v.len() != 2 || !digits(v) {
            return bad(&format!("{name} need exactly two digits"));
        }
        if v > "59" {
            return bad(&format!("{name} must be 00-59"));
        }
    }
    let n = |x: &str| x.parse::<u64>().ok();
    let total = n(hours)
        .and_then(|h| h.checked_mul(3_600_000))
        .and_then(|h| h.checked_add(n(minutes)? * 60_000 + n(seconds)? * 1000 + n(frac)?));
    match total {
        Some(ms) => Ok(ms as f64 / 1000.0),
        None => bad("hours too large"),
    }
}

/// A cue payload as plain text.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CueText {
    /// The first voice span's annotation (`<v Name>`, `<v.class Name>`), when there is one.
    pub speaker: Option<String>,
    /// The text.
    pub text: String,
}

/// Cue payload to plain text, through the specification's cue text tokenizer and tree rules:
/// tags removed (c, i, b, u, ruby, rt, v, lang, timestamps, unknown ones), ruby text left out
/// as the specification's rules for extracting a chapter title do (the base text is what was
/// written), character references decoded (`&amp; &lt; &gt; &lrm; &rlm; &nbsp;` and numeric;
/// other named ones are kept as written), every line break a single space, ASCII whitespace
/// trimmed at both ends. The speaker is the first voice span's annotation that is not empty.
pub fn cue_text(raw: &str) -> CueText {
    #[derive(PartialEq)]
    enum Node {
        Class,
        Italic,
        Bold,
        Underline,
        Ruby,
        RubyText,
        Voice,
        Lang,
    }
    let raw = raw.replace("\r\n", "\n").replace('\r', "\n");
    let mut stack: Vec<Node> = Vec::new();
    let mut text = String::new();
    let mut speaker = None;
    for token in tokenize(&raw) {
        match token.kind {
            Kind::Text(s) => {
                if !stack.contains(&Node::RubyText) {
                    text.push_str(&s);
                }
            }
            Kind::Start { name, annotation } => {
                let node = match name.as_str() {
                    "c" => Node::Class,
                    "i" => Node::Italic,
                    "b" => Node::Bold,
                    "u" => Node::Underline,
                    "ruby" => Node::Ruby,
                    "rt" if stack.last() == Some(&Node::Ruby) => Node::RubyText,
                    "v" => {
                        if speaker.is_none() && !annotation.is_empty() {
                            speaker = Some(annotation);
                        }
                        Node::Voice
                    }
                    "lang" => Node::Lang,
                    _ => continue,
                };
                stack.push(node);
            }
            Kind::End(name) => {
                let top = stack.last();
                let closes = matches!(
                    (name.as_str(), top),
                    ("c", Some(Node::Class))
                        | ("i", Some(Node::Italic))
                        | ("b", Some(Node::Bold))
                        | ("u", Some(Node::Underline))
                        | ("ruby", Some(Node::Ruby))
                        | ("rt", Some(Node::RubyText))
                        | ("v", Some(Node::Voice))
                        | ("lang", Some(Node::Lang))
                );
                if closes {
                    stack.pop();
                } else if name == "ruby" && top == Some(&Node::RubyText) {
                    stack.pop();
                    stack.pop();
                }
            }
            Kind::Stamp(_) => {}
        }
    }
    let text = text.replace(['\r', '\n'], " ");
    CueText {
        speaker,
        text: text
            .trim_matches(|c: char| c.is_ascii_whitespace())
            .to_string(),
    }
}

/// A WebVTT file as transcript lines: one line per cue, text and speaker from [`cue_text`],
/// no words (a cue's inline timestamps give word starts but no ends).
///
/// # Errors
/// Each a [`Problem`] naming `path` and the file line: every [`SyntaxError`], plus every pair
/// of overlapping cues (reported on the later one), which a transcript cannot hold — except
/// when both carry voice spans with different speakers, which is cross-talk.
pub fn read_lines(path: &Path, text: &str) -> Result<Vec<Line>, Vec<Problem>> {
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
    for (k, (cue, words)) in cues.iter().enumerate() {
        running.retain(|&o| cues[o].0.end > cue.start);
        for &o in &running {
            let (earlier, earlier_words) = &cues[o];
            let cross_talk = matches!(
                (&earlier_words.speaker, &words.speaker),
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
    Ok(cues
        .into_iter()
        .map(|(cue, words)| Line {
            start: cue.start,
            end: cue.end,
            text: words.text,
            speaker: words.speaker,
            words: Vec::new(),
            extra: Map::new(),
        })
        .collect())
}

/// Transcript lines as a WebVTT file: `WEBVTT`, a blank line, then one cue per line,
/// `hh:mm:ss.mmm --> hh:mm:ss.mmm` (rounded to the millisecond) and a one-line payload:
/// `<v speaker>` when the line has a speaker, then the text, with `&`, `<` and `>` escaped
/// (so no markup and no `-->` can come from the text) and line breaks as spaces.
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

// ---------------------------------------------------------------------------------------
// File structure: the specification's "WebVTT parser algorithm" and "collect a WebVTT
// block", with an error wherever the syntax section is broken.

/// The document made of every block that could be read, and every error found.
fn parse_all(text: &str) -> (Document, Vec<SyntaxError>) {
    let mut parser = Parser {
        lines: split_lines(text),
        errors: Vec::new(),
        blocks: Vec::new(),
        seen_cue: false,
        latest_start: None,
        cue_ids: HashMap::new(),
        regions: HashMap::new(),
    };
    let header = parser.header();
    let mut i = 1 + header.matches('\n').count();
    if i < parser.lines.len() && parser.lines[i].contains("-->") {
        parser.error(
            i,
            "a cue needs a blank line between the header and it".into(),
        );
    }
    loop {
        while i < parser.lines.len() && parser.lines[i].is_empty() {
            i += 1;
        }
        if i >= parser.lines.len() {
            break;
        }
        i = parser.block(i);
    }
    let mut errors = parser.errors;
    errors.sort_by_key(|e| e.line);
    let doc = Document {
        header,
        blocks: parser.blocks,
    };
    (doc, errors)
}

/// Lines split at CRLF, LF or CR, after an optional byte order mark; NUL becomes U+FFFD (the
/// specification's preprocessing). A final line terminator does not start another line.
fn split_lines(text: &str) -> Vec<String> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut lines = Vec::new();
    let mut current = String::new();
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\r' => {
                if chars.peek() == Some(&'\n') {
                    chars.next();
                }
                lines.push(std::mem::take(&mut current));
            }
            '\n' => lines.push(std::mem::take(&mut current)),
            '\0' => current.push('\u{fffd}'),
            c => current.push(c),
        }
    }
    if !current.is_empty() || lines.is_empty() {
        lines.push(current);
    }
    lines
}

struct Parser {
    lines: Vec<String>,
    errors: Vec<SyntaxError>,
    blocks: Vec<Block>,
    seen_cue: bool,
    /// The latest cue start so far and its (0-based) line.
    latest_start: Option<(f64, usize)>,
    cue_ids: HashMap<String, usize>,
    regions: HashMap<String, usize>,
}

impl Parser {
    /// Record an error on 0-based line `i`.
    fn error(&mut self, i: usize, message: String) {
        self.errors.push(SyntaxError {
            line: i + 1,
            message,
        });
    }

    /// The signature line and header lines up to the first blank line (or a line with `-->`,
    /// where the specification's parser also stops): the [`Document::header`] text.
    fn header(&mut self) -> String {
        let first = self.lines[0].clone();
        let mut header = match first.strip_prefix("WEBVTT") {
            Some(rest) => {
                if let Some(c) = rest.chars().next().filter(|c| !matches!(c, ' ' | '\t')) {
                    self.error(
                        0,
                        format!(
                            "\"WEBVTT\" must be followed by a space, a tab or the end of the \
                             line, not {c:?}"
                        ),
                    );
                }
                rest.to_string()
            }
            None => {
                self.error(
                    0,
                    "a WebVTT file starts with \"WEBVTT\" (after an optional byte order mark)"
                        .into(),
                );
                String::new()
            }
        };
        for i in 1..self.lines.len() {
            let line = self.lines[i].clone();
            if line.is_empty() || line.contains("-->") {
                break;
            }
            if keyword_line(&line, "STYLE") || keyword_line(&line, "REGION") {
                self.error(
                    i,
                    format!("{line} needs a blank line between the header and it"),
                );
            }
            header.push('\n');
            header.push_str(&line);
        }
        header
    }

    /// Collect the block starting at 0-based line `first`; return the line after it.
    fn block(&mut self, first: usize) -> usize {
        let mut j = first;
        let mut timing = None;
        let mut arrow_inside = false;
        while j < self.lines.len() {
            let line = &self.lines[j];
            if line.contains("-->") {
                // The timing line is the block's first line, or its second after an identifier.
                if timing.is_none() && j - first < 2 {
                    timing = Some(j);
                    j += 1;
                    continue;
                }
                arrow_inside = true;
                break;
            }
            if line.is_empty() {
                break;
            }
            j += 1;
        }
        let kind = match timing {
            Some(t) => {
                self.cue(first, t, j);
                "a cue's text"
            }
            None => self.other_block(first, j),
        };
        if arrow_inside {
            // The specification's parser starts a new block at this line.
            self.error(
                j,
                format!(
                    "\"-->\" cannot appear in {kind}; if this line starts a new cue, put a \
                     blank line before it"
                ),
            );
        }
        j
    }

    /// A cue block: lines `first..end`, its timing line at `t`.
    fn cue(&mut self, first: usize, t: usize, end: usize) {
        self.seen_cue = true;
        let id = (t > first).then(|| self.lines[first].clone());
        let text = self.lines[t + 1..end].join("\n");
        let (start, stop, settings) = match parse_timing(&self.lines[t]) {
            Ok(v) => v,
            Err(messages) => {
                for m in messages {
                    self.error(t, m);
                }
                return;
            }
        };
        if stop <= start {
            self.error(
                t,
                format!(
                    "end {} is not after start {}",
                    format_timestamp(stop),
                    format_timestamp(start)
                ),
            );
        }
        if let Some((latest, at)) = self.latest_start {
            if start < latest {
                self.error(
                    t,
                    format!(
                        "cue starts at {}, before the cue on line {} ({}): cues must be in \
                         start-time order",
                        format_timestamp(start),
                        at + 1,
                        format_timestamp(latest)
                    ),
                );
            }
        }
        if self.latest_start.is_none_or(|(latest, _)| start >= latest) {
            self.latest_start = Some((start, t));
        }
        for m in self.check_settings(&settings) {
            self.error(t, m);
        }
        if let Some(id) = &id {
            if let Some(prev) = self.cue_ids.insert(id.clone(), first) {
                self.error(
                    first,
                    format!(
                        "cue identifier `{id}` is already used on line {}; identifiers must be \
                         unique",
                        prev + 1
                    ),
                );
            }
        }
        for (offset, m) in check_inline(&text, start, stop) {
            self.error(t + 1 + offset, m);
        }
        self.blocks.push(Block::Cue(Cue {
            line: t + 1,
            id,
            start,
            end: stop,
            settings,
            text,
        }));
    }

    /// A block without a timing line: NOTE, STYLE, REGION, or an error. Returns what it is,
    /// for messages.
    fn other_block(&mut self, first: usize, end: usize) -> &'static str {
        let head = self.lines[first].clone();
        let text = self.lines[first..end].join("\n");
        if head
            .strip_prefix("NOTE")
            .is_some_and(|r| r.is_empty() || r.starts_with([' ', '\t']))
        {
            self.blocks.push(Block::Note(text));
            return "a NOTE block";
        }
        for (keyword, kind) in [("STYLE", "a STYLE block"), ("REGION", "a REGION block")] {
            if !keyword_line(&head, keyword) {
                continue;
            }
            if self.seen_cue {
                self.error(
                    first,
                    format!(
                        "{keyword} block after the first cue: {keyword} blocks go before every cue"
                    ),
                );
            } else if keyword == "STYLE" {
                self.blocks.push(Block::Style(text));
            } else {
                self.check_region(first, end);
                self.blocks.push(Block::Region(text));
            }
            return kind;
        }
        let timing_like = (first..end.min(first + 2)).find(|&i| looks_like_timing(&self.lines[i]));
        match timing_like {
            Some(i) => self.error(i, "cue timing line without \"-->\"".into()),
            None => self.error(
                first,
                "block is not a cue (no \"start --> end\" line first or after an identifier), \
                 NOTE, STYLE or REGION"
                    .into(),
            ),
        }
        "a block"
    }

    /// The specification's region settings syntax, on the lines after `REGION`.
    fn check_region(&mut self, first: usize, end: usize) {
        let mut seen = HashSet::new();
        let mut id = None;
        for i in first + 1..end {
            let line = self.lines[i].clone();
            for token in line.split_ascii_whitespace() {
                let Some((name, value)) = token.split_once(':') else {
                    self.error(i, format!("region setting `{token}` needs name:value"));
                    continue;
                };
                let expected = match name {
                    "id" => (value.is_empty() || value.contains("-->"))
                        .then_some("one or more characters, no \"-->\""),
                    "width" => (!is_percentage(value)).then_some("a percentage 0-100%"),
                    "lines" => (value.is_empty() || !value.bytes().all(|b| b.is_ascii_digit()))
                        .then_some("a whole number"),
                    "regionanchor" | "viewportanchor" => (!value
                        .split_once(',')
                        .is_some_and(|(x, y)| is_percentage(x) && is_percentage(y)))
                    .then_some("two percentages, x%,y%"),
                    "scroll" => (value != "up").then_some("up"),
                    _ => {
                        self.error(
                            i,
                            format!(
                                "unknown region setting `{name}` (WebVTT has id, width, lines, \
                                 regionanchor, viewportanchor, scroll)"
                            ),
                        );
                        continue;
                    }
                };
                if !seen.insert(name.to_string()) {
                    self.error(i, format!("region setting `{name}` given twice"));
                } else if let Some(expected) = expected {
                    self.error(
                        i,
                        format!(
                            "bad value `{value}` for region setting `{name}`: expected {expected}"
                        ),
                    );
                } else if name == "id" {
                    id = Some(value.to_string());
                }
            }
        }
        match id {
            None => self.error(first, "a REGION needs an id:".into()),
            Some(id) => {
                if let Some(prev) = self.regions.insert(id.clone(), first) {
                    self.error(
                        first,
                        format!("region id `{id}` is already used on line {}", prev + 1),
                    );
                }
            }
        }
    }

    /// The specification's cue settings syntax: each of vertical, line, position, size, align
    /// and region at most once, with the values it defines.
    fn check_settings(&self, settings: &str) -> Vec<String> {
        let mut out = Vec::new();
        let mut seen = HashSet::new();
        for token in settings.split([' ', '\t']).filter(|s| !s.is_empty()) {
            let Some((name, value)) = token.split_once(':') else {
                out.push(format!("cue setting `{token}` needs name:value"));
                continue;
            };
            let (ok, expected) = match name {
                "vertical" => (matches!(value, "rl" | "lr"), "rl or lr"),
                "line" => {
                    let (at, align) = split_align(value);
                    (
                        (is_percentage(at) || is_line_number(at))
                            && align.is_none_or(|a| matches!(a, "start" | "center" | "end")),
                        "a line number or a percentage 0-100%, optionally followed by ,start \
                         ,center or ,end",
                    )
                }
                "position" => {
                    let (at, align) = split_align(value);
                    (
                        is_percentage(at)
                            && align
                                .is_none_or(|a| matches!(a, "line-left" | "center" | "line-right")),
                        "a percentage 0-100%, optionally followed by ,line-left ,center or \
                         ,line-right",
                    )
                }
                "size" => (is_percentage(value), "a percentage 0-100%"),
                "align" => (
                    matches!(value, "start" | "center" | "end" | "left" | "right"),
                    "start, center, end, left or right",
                ),
                "region" => (
                    self.regions.contains_key(value),
                    "the id of a REGION defined before the first cue",
                ),
                _ => {
                    out.push(format!(
                        "unknown cue setting `{name}` (WebVTT has vertical, line, position, size, \
                         align, region)"
                    ));
                    continue;
                }
            };
            if !seen.insert(name) {
                out.push(format!("cue setting `{name}` given twice"));
            } else if !ok {
                out.push(format!(
                    "bad value `{value}` for cue setting `{name}`: expected {expected}"
                ));
            }
        }
        out
    }
}

/// `keyword` alone on the line, perhaps followed by spaces or tabs.
fn keyword_line(line: &str, keyword: &str) -> bool {
    line.strip_prefix(keyword)
        .is_some_and(|r| r.chars().all(|c| matches!(c, ' ' | '\t')))
}

/// A line that starts like a timestamp (digits and a colon), for a better message when its
/// `-->` is missing.
fn looks_like_timing(line: &str) -> bool {
    let first = line.split([' ', '\t']).next().unwrap_or("");
    first.starts_with(|c: char| c.is_ascii_digit()) && first.contains(':')
}

/// Start, end and the settings text of a timing line: timestamp, spaces or tabs, `-->`,
/// spaces or tabs, timestamp, then optionally spaces or tabs and settings.
fn parse_timing(line: &str) -> Result<(f64, f64, String), Vec<String>> {
    let ws = [' ', '\t'];
    let mut errors = Vec::new();
    let Some(arrow) = line.find("-->") else {
        return Err(vec!["cue timing line without \"-->\"".into()]);
    };
    let (left, right) = (&line[..arrow], &line[arrow + 3..]);
    if line.starts_with(ws) {
        errors.push("the timing line must start with the start time, not a space or tab".into());
    }
    let start_text = left.trim_matches(ws);
    if left.trim_end_matches(ws).len() == left.len() {
        errors.push("a space or tab must come before \"-->\"".into());
    }
    let after = right.trim_start_matches(ws);
    if after.len() == right.len() {
        errors.push("a space or tab must come after \"-->\"".into());
    }
    let (end_text, settings) = match after.find(ws) {
        Some(k) => (&after[..k], after[k..].trim_matches(ws)),
        None => (after, ""),
    };
    let start = read_timestamp(start_text).map_err(|why| errors.push(format!("start time: {why}")));
    let end = read_timestamp(end_text).map_err(|why| errors.push(format!("end time: {why}")));
    match (start, end) {
        (Ok(start), Ok(end)) if errors.is_empty() => Ok((start, end, settings.to_string())),
        _ => Err(errors),
    }
}

/// `value` split at its first comma into the position and the alignment.
fn split_align(value: &str) -> (&str, Option<&str>) {
    match value.split_once(',') {
        Some((at, align)) => (at, Some(align)),
        None => (value, None),
    }
}

/// The specification's percentage: digits, optionally `.` and digits, then `%`; 0 to 100.
fn is_percentage(s: &str) -> bool {
    let Some(number) = s.strip_suffix('%') else {
        return false;
    };
    let digits = |x: &str| !x.is_empty() && x.bytes().all(|b| b.is_ascii_digit());
    let well_formed = match number.split_once('.') {
        Some((whole, frac)) => digits(whole) && digits(frac),
        None => digits(number),
    };
    well_formed && number.parse::<f64>().is_ok_and(|v| v <= 100.0)
}

/// A line number in the `line` setting: optionally `-`, then one or more digits.
fn is_line_number(s: &str) -> bool {
    let digits = s.strip_prefix('-').unwrap_or(s);
    !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit())
}

/// Inline timestamps of a cue's text that are malformed, outside the cue, or earlier than
/// the one before: (line offset within the text, message).
fn check_inline(text: &str, start: f64, end: f64) -> Vec<(usize, String)> {
    let mut out = Vec::new();
    let mut previous = start;
    for token in tokenize(text) {
        let Kind::Stamp(value) = &token.kind else {
            continue;
        };
        let offset = text[..token.at].matches('\n').count();
        match read_timestamp(value) {
            Err(why) => out.push((offset, format!("inline timestamp <{value}>: {why}"))),
            Ok(t) if t < start || t > end => out.push((
                offset,
                format!(
                    "inline timestamp <{value}> lies outside its cue ({} --> {})",
                    format_timestamp(start),
                    format_timestamp(end)
                ),
            )),
            Ok(t) if t < previous => out.push((
                offset,
                format!("inline timestamp <{value}> is earlier than the one before it"),
            )),
            Ok(t) => previous = t,
        }
    }
    out
}

/// `text` with every well-formed inline timestamp's value put through `f`.
fn retime_inline(text: &str, f: &mut impl FnMut(f64) -> f64) -> String {
    let mut out = String::with_capacity(text.len());
    let mut copied = 0;
    for token in tokenize(text) {
        if let Kind::Stamp(value) = &token.kind {
            if let Ok(t) = read_timestamp(value) {
                let at = token.at + 1; // after '<'
                out.push_str(&text[copied..at]);
                out.push_str(&format_timestamp(f(t)));
                copied = at + value.len();
            }
        }
    }
    out.push_str(&text[copied..]);
    out
}

// ---------------------------------------------------------------------------------------
// Cue text: the specification's "WebVTT cue text tokenizer".

struct Token {
    /// Byte offset of the token's first character in the text.
    at: usize,
    kind: Kind,
}

enum Kind {
    /// Text, character references decoded.
    Text(String),
    /// A start tag; the annotation has its whitespace collapsed, references decoded.
    Start {
        name: String,
        annotation: String,
    },
    End(String),
    /// A timestamp tag's value, as written.
    Stamp(String),
}

fn tokenize(text: &str) -> Vec<Token> {
    let mut pos = 0;
    let mut out = Vec::new();
    while pos < text.len() {
        let at = pos;
        let kind = next_token(text, &mut pos);
        out.push(Token { at, kind });
    }
    out
}

/// One token from `pos` (a byte offset), following the tokenizer's states.
fn next_token(text: &str, pos: &mut usize) -> Kind {
    enum State {
        Data,
        Tag,
        StartTag,
        Class,
        Annotation,
        EndTag,
        Stamp,
    }
    let mut state = State::Data;
    let mut result = String::new();
    let mut buffer = String::new();
    let annotation = |buffer: &str| {
        buffer
            .split_ascii_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
    };
    loop {
        let c = text[*pos..].chars().next();
        match state {
            State::Data => match c {
                Some('&') => {
                    *pos += 1;
                    match char_ref(text, pos) {
                        Some(s) => result.push_str(&s),
                        None => result.push('&'),
                    }
                    continue;
                }
                Some('<') if !result.is_empty() => return Kind::Text(result),
                Some('<') => state = State::Tag,
                None => return Kind::Text(result),
                Some(c) => result.push(c),
            },
            State::Tag => match c {
                Some('\t' | '\n' | '\x0c' | ' ') => state = State::Annotation,
                Some('.') => state = State::Class,
                Some('/') => state = State::EndTag,
                Some(d) if d.is_ascii_digit() => {
                    result.push(d);
                    state = State::Stamp;
                }
                Some('>') | None => {
                    *pos += usize::from(c.is_some());
                    return Kind::Start {
                        name: String::new(),
                        annotation: String::new(),
                    };
                }
                Some(c) => {
                    result.push(c);
                    state = State::StartTag;
                }
            },
            State::StartTag | State::Class => match c {
                Some('\t' | '\n' | '\x0c' | ' ') => state = State::Annotation,
                Some('.') => state = State::Class,
                Some('>') | None => {
                    *pos += usize::from(c.is_some());
                    return Kind::Start {
                        name: result,
                        annotation: String::new(),
                    };
                }
                // Class names are not needed here; the tag name stops growing at the first '.'.
                Some(c) => {
                    if matches!(state, State::StartTag) {
                        result.push(c);
                    }
                }
            },
            State::Annotation => match c {
                Some('&') => {
                    *pos += 1;
                    match char_ref(text, pos) {
                        Some(s) => buffer.push_str(&s),
                        None => buffer.push('&'),
                    }
                    continue;
                }
                Some('>') | None => {
                    *pos += usize::from(c.is_some());
                    return Kind::Start {
                        name: result,
                        annotation: annotation(&buffer),
                    };
                }
                Some(c) => buffer.push(c),
            },
            State::EndTag => match c {
                Some('>') | None => {
                    *pos += usize::from(c.is_some());
                    return Kind::End(result);
                }
                Some(c) => result.push(c),
            },
            State::Stamp => match c {
                Some('>') | None => {
                    *pos += usize::from(c.is_some());
                    return Kind::Stamp(result);
                }
                Some(c) => result.push(c),
            },
        }
        *pos += c.map_or(0, char::len_utf8);
    }
}

/// A character reference starting at `pos` (just after `&`): `&amp; &lt; &gt; &lrm; &rlm;
/// &nbsp;` with their semicolon, or numeric (`&#233;`, `&#xE9;`, semicolon optional as in
/// HTML; zero, surrogates and values past U+10FFFF give U+FFFD). On success `pos` moves past
/// it; otherwise nothing is consumed and the `&` stays text.
fn char_ref(text: &str, pos: &mut usize) -> Option<String> {
    let rest = &text[*pos..];
    if let Some(num) = rest.strip_prefix('#') {
        let (radix, digits_from) = match num.strip_prefix(['x', 'X']) {
            Some(_) => (16, 2),
            None => (10, 1),
        };
        let digits: &str = {
            let body = &rest[digits_from..];
            let len = body
                .find(|c: char| !c.is_digit(radix))
                .unwrap_or(body.len());
            &body[..len]
        };
        if digits.is_empty() {
            return None;
        }
        let value = u32::from_str_radix(digits, radix).unwrap_or(u32::MAX);
        let c = match value {
            0 => '\u{fffd}',
            v => char::from_u32(v).unwrap_or('\u{fffd}'),
        };
        let mut used = digits_from + digits.len();
        if rest[used..].starts_with(';') {
            used += 1;
        }
        *pos += used;
        return Some(c.to_string());
    }
    const NAMED: [(&str, char); 6] = [
        ("amp;", '&'),
        ("lt;", '<'),
        ("gt;", '>'),
        ("lrm;", '\u{200e}'),
        ("rlm;", '\u{200f}'),
        ("nbsp;", '\u{a0}'),
    ];
    let (name, c) = NAMED.iter().find(|(name, _)| rest.starts_with(name))?;
    *pos += name.len();
    Some(c.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timestamps_follow_the_spec_syntax() {
        // W3C WebVTT §"WebVTT timestamp": [hours (2+ digits):]mm:ss.ttt, mm and ss 00-59.
        assert_eq!(parse_timestamp("00:11.000"), Some(11.0));
        assert_eq!(parse_timestamp("04:05.001"), Some(245.001));
        assert_eq!(parse_timestamp("01:02:03.004"), Some(3723.004));
        assert_eq!(parse_timestamp("123:00:00.000"), Some(442_800.0));
        for bad in [
            "1:02.000",     // minutes need two digits
            "1:02:03.000",  // hours need two or more digits
            "00:61.000",    // seconds 00-59
            "60:00.000",    // without hours, the first field is minutes
            "00:01.00",     // exactly three fraction digits
            "00:01.0000",   //
            "00:01",        // fraction required
            "00:00:01,000", // SRT's comma
            " 00:01.000",   // no surrounding space
            "00:01.000 ",   //
            "+0:01.000",    //
            "00:0１.000",   // fullwidth digit is not an ASCII digit
            "",
        ] {
            assert_eq!(parse_timestamp(bad), None, "{bad:?}");
        }
        let why = read_timestamp("00:00:01,000").unwrap_err();
        assert!(why.contains("SRT"), "{why}");
    }

    #[test]
    fn format_rounds_to_the_nearest_millisecond_of_the_exact_value() {
        assert_eq!(format_timestamp(0.0), "00:00:00.000");
        assert_eq!(format_timestamp(-3.2), "00:00:00.000");
        assert_eq!(format_timestamp(f64::NAN), "00:00:00.000");
        assert_eq!(format_timestamp(3723.004), "01:02:03.004");
        assert_eq!(format_timestamp(360_000.0), "100:00:00.000");
        // 1.0005 is stored as 1.00049999999999994..., 2.0005 as 2.00050000000000017...
        assert_eq!(format_timestamp(1.0005), "00:00:01.000");
        assert_eq!(format_timestamp(2.0005), "00:00:02.001");
        // 0.0625 is exactly 62.5 ms: halves go up.
        assert_eq!(format_timestamp(0.0625), "00:00:00.063");
        assert_eq!(format_timestamp(59.9996), "00:01:00.000");
    }

    #[test]
    fn percentages_and_line_numbers() {
        // W3C WebVTT §"WebVTT percentage": digits [. digits] %, 0..100.
        for ok in ["0%", "100%", "35%", "10.5%", "100.0%"] {
            assert!(is_percentage(ok), "{ok}");
        }
        for bad in ["101%", "100.01%", ".5%", "5.%", "5", "-5%", "5 %", "%"] {
            assert!(!is_percentage(bad), "{bad}");
        }
        assert!(is_line_number("-1") && is_line_number("0") && is_line_number("12"));
        assert!(!is_line_number("1.5") && !is_line_number("-") && !is_line_number("+1"));
    }

    #[test]
    fn tokenizer_keeps_offsets_and_decodes_references() {
        let text = "a&amp;b<v.loud  Mary &amp;  Jo >x</v><00:01.500>é&#x263a;&#9731&bogus;";
        let tokens = tokenize(text);
        let kinds: Vec<String> = tokens
            .iter()
            .map(|t| match &t.kind {
                Kind::Text(s) => format!("T({s})"),
                Kind::Start { name, annotation } => format!("S({name}|{annotation})"),
                Kind::End(n) => format!("E({n})"),
                Kind::Stamp(v) => format!("@({v})"),
            })
            .collect();
        assert_eq!(
            kinds,
            [
                "T(a&b)",
                "S(v|Mary & Jo)",
                "T(x)",
                "E(v)",
                "@(00:01.500)",
                "T(é☺☃&bogus;)"
            ]
        );
        // Each token starts where its first character is.
        let stamp = tokens
            .iter()
            .find(|t| matches!(t.kind, Kind::Stamp(_)))
            .unwrap();
        assert_eq!(&text[stamp.at..stamp.at + 11], "<00:01.500>");
    }

    #[test]
    fn numeric_references_outside_unicode_become_replacement_characters() {
        assert_eq!(
            cue_text("&#0;|&#xD800;|&#x110000;|&#99999999999;").text,
            "\u{fffd}|\u{fffd}|\u{fffd}|\u{fffd}"
        );
        // No digits: not a reference.
        assert_eq!(cue_text("&#;&#x;").text, "&#;&#x;");
    }

    #[test]
    fn settings_are_checked_against_their_definitions() {
        let p = Parser {
            lines: vec![],
            errors: vec![],
            blocks: vec![],
            seen_cue: false,
            latest_start: None,
            cue_ids: HashMap::new(),
            regions: HashMap::from([("fred".to_string(), 2)]),
        };
        // W3C WebVTT §"WebVTT cue settings".
        for ok in [
            "",
            "vertical:rl",
            "vertical:lr line:-1 position:10%,line-left size:35% align:left",
            "line:0 align:start",
            "line:50%,center position:90%,line-right align:right",
            "line:12,end size:100% region:fred",
            "align:center\tsize:50%",
        ] {
            assert!(
                p.check_settings(ok).is_empty(),
                "{ok}: {:?}",
                p.check_settings(ok)
            );
        }
        for (bad, needle) in [
            ("vertical:up", "bad value `up` for cue setting `vertical`"),
            ("line:1.5", "cue setting `line`"),
            ("line:0,middle", "cue setting `line`"),
            ("position:50", "cue setting `position`"),
            ("position:50%,left", "cue setting `position`"),
            ("size:120%", "cue setting `size`"),
            ("align:justify", "cue setting `align`"),
            ("region:bill", "REGION"),
            ("colour:red", "unknown cue setting `colour`"),
            ("align", "needs name:value"),
            ("align:start align:end", "given twice"),
        ] {
            let errors = p.check_settings(bad);
            assert_eq!(errors.len(), 1, "{bad}: {errors:?}");
            assert!(errors[0].contains(needle), "{bad}: {errors:?}");
        }
    }

    #[test]
    fn timing_line_needs_spaces_around_the_arrow() {
        // W3C WebVTT §"WebVTT cue timings": one or more spaces or tabs on each side of "-->".
        assert_eq!(
            parse_timing("00:01.000\t-->  00:02.000  align:start  size:50% ").unwrap(),
            (1.0, 2.0, "align:start  size:50%".to_string())
        );
        let errors = parse_timing("00:01.000-->00:02.000").unwrap_err();
        assert_eq!(errors.len(), 2, "{errors:?}");
        assert!(parse_timing(" 00:01.000 --> 00:02.000").is_err());
        let errors = parse_timing("00:01.000 --> ").unwrap_err();
        assert!(errors[0].contains("end time"), "{errors:?}");
    }

    #[test]
    fn lines_split_at_every_terminator() {
        assert_eq!(split_lines("a\r\nb\rc\nd"), ["a", "b", "c", "d"]);
        assert_eq!(split_lines("a\n\n"), ["a", ""]);
        assert_eq!(split_lines("\u{feff}WEBVTT\0"), ["WEBVTT\u{fffd}"]);
        assert_eq!(split_lines(""), [""]);
    }

    #[test]
    fn retime_touches_only_timestamp_tags() {
        let text = "<v a<00:01.000>x<00:01.000>&lt;00:01.000><00:01.5>";
        // Inside an annotation and an escaped one are text; the last is not a timestamp.
        assert_eq!(
            retime_inline(text, &mut |t| t + 1.0),
            "<v a<00:01.000>x<00:00:02.000>&lt;00:01.000><00:01.5>"
        );
    }
}
