//! Cue text: the specification's cue text tokenizer, and what is built on it (plain text and
//! speaker, inline timestamp checks and retiming).

use super::timestamp::{format_timestamp, read_timestamp};

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
/// written), character references decoded as HTML does (every named reference of the HTML
/// standard, `&eacute;` `&quot;` `&nbsp;` ..., and numeric), every line break a single space, ASCII whitespace
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

/// Inline timestamps of a cue's text that are malformed, outside the cue, or earlier than
/// the one before: (line offset within the text, message).
pub(super) fn check_inline(text: &str, start: f64, end: f64) -> Vec<(usize, String)> {
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
pub(super) fn retime_inline(text: &str, f: &mut impl FnMut(f64) -> f64) -> String {
    let mut out = String::with_capacity(text.len());
    let mut copied = 0;
    for token in tokenize(text) {
        if let Kind::Stamp(value) = &token.kind
            && let Ok(t) = read_timestamp(value)
        {
            let at = token.at + 1; // after '<'
            out.push_str(&text[copied..at]);
            out.push_str(&format_timestamp(f(t)));
            copied = at + value.len();
        }
    }
    out.push_str(&text[copied..]);
    out
}

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

/// A character reference starting at `pos` (just after `&`), as the HTML standard's tokenizer
/// consumes one in text (which WebVTT's cue text tokenizer defers to): numeric (`&#233;`,
/// `&#xE9;`, semicolon optional; zero, surrogates and values past U+10FFFF give U+FFFD, and
/// 0x80-0x9F take the standard's windows-1252 replacements), or the longest name from the
/// standard's table of 2,231 named character references that the text starts with, which
/// covers the legacy names that need no semicolon (`&eacute` alone, `&notit;` as `¬it;`).
/// On success `pos` moves past it; otherwise nothing is consumed and the `&` stays text.
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
            0x80..=0x9f => windows_1252(value),
            v => char::from_u32(v).unwrap_or('\u{fffd}'),
        };
        let mut used = digits_from + digits.len();
        if rest[used..].starts_with(';') {
            used += 1;
        }
        *pos += used;
        return Some(c.to_string());
    }
    let names = named_references();
    let longest = rest
        .char_indices()
        .map(|(i, c)| i + c.len_utf8())
        .take(names.longest)
        .filter_map(|end| names.table.get(&rest[..end]).map(|chars| (end, *chars)))
        .last();
    let (len, chars) = longest?;
    *pos += len;
    Some(chars.to_string())
}

/// The HTML standard's named character references, without their `&`, and the longest name.
struct Names {
    table: std::collections::HashMap<&'static str, &'static str>,
    longest: usize,
}

fn named_references() -> &'static Names {
    static NAMES: std::sync::OnceLock<Names> = std::sync::OnceLock::new();
    NAMES.get_or_init(|| {
        let table: std::collections::HashMap<_, _> = entities::ENTITIES
            .iter()
            .map(|e| (e.entity.trim_start_matches('&'), e.characters))
            .collect();
        let longest = table.keys().map(|k| k.chars().count()).max().unwrap_or(0);
        Names { table, longest }
    })
}

/// The HTML standard's replacements for numeric references to C1 controls (its "numeric
/// character reference end state" table); a code point it does not list stays as it is.
fn windows_1252(value: u32) -> char {
    let replaced = match value {
        0x80 => 0x20ac,
        0x82 => 0x201a,
        0x83 => 0x0192,
        0x84 => 0x201e,
        0x85 => 0x2026,
        0x86 => 0x2020,
        0x87 => 0x2021,
        0x88 => 0x02c6,
        0x89 => 0x2030,
        0x8a => 0x0160,
        0x8b => 0x2039,
        0x8c => 0x0152,
        0x8e => 0x017d,
        0x91 => 0x2018,
        0x92 => 0x2019,
        0x93 => 0x201c,
        0x94 => 0x201d,
        0x95 => 0x2022,
        0x96 => 0x2013,
        0x97 => 0x2014,
        0x98 => 0x02dc,
        0x99 => 0x2122,
        0x9a => 0x0161,
        0x9b => 0x203a,
        0x9c => 0x0153,
        0x9e => 0x017e,
        0x9f => 0x0178,
        v => v,
    };
    char::from_u32(replaced).unwrap_or('\u{fffd}')
}

#[cfg(test)]
mod tests {
    use super::*;

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
    fn every_named_reference_of_the_html_standard_is_decoded() {
        // The HTML standard's table (its entities.json) has 2,231 entries: 2,125 names with a
        // semicolon and 106 legacy ones also valid without.
        assert_eq!(named_references().table.len(), 2231);
        let legacy = named_references()
            .table
            .keys()
            .filter(|k| !k.ends_with(';'))
            .count();
        assert_eq!(legacy, 106);
        assert_eq!(
            cue_text("caf&eacute; &quot;ok&quot; a&nbsp;b &ccedil;a &Eacute").text,
            "café \"ok\" a\u{a0}b ça É"
        );
        // Longest match, legacy names without a semicolon, two-code-point references.
        assert_eq!(
            cue_text("&notit; &notin; &ampx &nvlt;").text,
            "¬it; ∉ &x <\u{20d2}"
        );
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
    fn retime_touches_only_timestamp_tags() {
        let text = "<v a<00:01.000>x<00:01.000>&lt;00:01.000><00:01.5>";
        // Inside an annotation and an escaped one are text; the last is not a timestamp.
        assert_eq!(
            retime_inline(text, &mut |t| t + 1.0),
            "<v a<00:01.000>x<00:00:02.000>&lt;00:01.000><00:01.5>"
        );
    }
}
