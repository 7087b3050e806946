//! File structure: the specification's "WebVTT parser algorithm" and "collect a WebVTT
//! block", with an error wherever the syntax section is broken; cue and region settings.

use std::collections::{HashMap, HashSet};

use super::markup::check_inline;
use super::timestamp::{format_timestamp, read_timestamp};
use super::{Block, Cue, Document, SyntaxError};

/// The document made of every block that could be read, and every error found.
pub(super) fn parse_all(text: &str) -> (Document, Vec<SyntaxError>) {
    let mut parser = Parser {
        lines: split_lines(text),
        errors: Vec::new(),
        warnings: Vec::new(),
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
        warnings: parser.warnings,
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
    warnings: Vec<SyntaxError>,
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
        if let Some((latest, at)) = self.latest_start
            && start < latest
        {
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
        if self.latest_start.is_none_or(|(latest, _)| start >= latest) {
            self.latest_start = Some((start, t));
        }
        for m in self.check_settings(&settings) {
            self.warnings.push(SyntaxError {
                line: t + 1,
                message: m,
            });
        }
        if let Some(id) = &id
            && let Some(prev) = self.cue_ids.insert(id.clone(), first)
        {
            self.error(
                first,
                format!(
                    "cue identifier `{id}` is already used on line {}; identifiers must be \
                         unique",
                    prev + 1
                ),
            );
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

    /// The cue settings checked against the specification's syntax (each of vertical, line,
    /// position, size, align and region at most once, with the values it defines): one
    /// warning per setting that breaks it. A setting only changes how a player lays the cue
    /// out, never its times or text, so none of this refuses the file; each warning says
    /// whether the specification's parser ("parse the WebVTT cue settings") ignores the
    /// setting or applies it although it is outside the syntax.
    fn check_settings(&self, settings: &str) -> Vec<String> {
        let mut out = Vec::new();
        let mut seen = HashSet::new();
        for token in settings.split_ascii_whitespace() {
            let fate = match parser_ignores(token, &self.regions) {
                true => "ignored, as the WebVTT parser does",
                false => {
                    "kept as written; players apply it, though it is outside the WebVTT syntax"
                }
            };
            let Some((name, value)) = token.split_once(':') else {
                out.push(format!("cue setting `{token}` needs name:value; {fate}"));
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
                         align, region); {fate}"
                    ));
                    continue;
                }
            };
            if !seen.insert(name) {
                out.push(format!(
                    "cue setting `{name}` given twice; the later one is {fate}"
                ));
            } else if !ok {
                out.push(format!(
                    "bad value `{value}` for cue setting `{name}`: expected {expected}; {fate}"
                ));
            }
        }
        out
    }
}

/// Whether the specification's "parse the WebVTT cue settings" skips `token` (one setting as
/// split at spaces), given the regions defined so far. Its steps, by name: no colon, or the
/// colon first or last, skips; `region` names a defined region or sets none; `vertical` takes
/// `rl` or `lr`; `line` needs a digit, then a percentage when it ends in `%`, else only `-`
/// (first), digits and one `.` between digits, and an alignment of start, center or end if
/// any; `position` a percentage and an alignment of line-left, center or line-right if any;
/// `size` a percentage; `align` start, center, end, left or right; any other name is skipped.
fn parser_ignores(token: &str, regions: &HashMap<String, usize>) -> bool {
    let Some((name, value)) = token.split_once(':') else {
        return true;
    };
    if name.is_empty() || value.is_empty() {
        return true;
    }
    match name {
        "region" => !regions.contains_key(value),
        "vertical" => !matches!(value, "rl" | "lr"),
        "line" => {
            let (at, align) = split_align(value);
            if !at.bytes().any(|b| b.is_ascii_digit()) {
                return true;
            }
            let number_ok = if at.ends_with('%') {
                is_percentage(at)
            } else {
                let bytes = at.as_bytes();
                let digit = |i: usize| bytes.get(i).is_some_and(u8::is_ascii_digit);
                let dots: Vec<usize> = (0..bytes.len()).filter(|&i| bytes[i] == b'.').collect();
                at.bytes()
                    .all(|b| b == b'-' || b == b'.' || b.is_ascii_digit())
                    && !at[1..].contains('-')
                    && dots.len() <= 1
                    && dots.iter().all(|&i| i > 0 && digit(i - 1) && digit(i + 1))
                    && at.trim_start_matches('-').parse::<f64>().is_ok()
            };
            !number_ok || align.is_some_and(|a| !matches!(a, "start" | "center" | "end"))
        }
        "position" => {
            let (at, align) = split_align(value);
            !is_percentage(at)
                || align.is_some_and(|a| !matches!(a, "line-left" | "center" | "line-right"))
        }
        "size" => !is_percentage(value),
        "align" => !matches!(value, "start" | "center" | "end" | "left" | "right"),
        _ => true,
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

#[cfg(test)]
mod tests {
    use super::*;

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
    fn settings_are_checked_against_their_definitions() {
        let p = Parser {
            lines: vec![],
            errors: vec![],
            warnings: vec![],
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
}
