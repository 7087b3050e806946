//! serde_json's errors in a manifest writer's terms.
//!
//! The parser says "invalid type: string \"abc\", expected f64" or "EOF while parsing a
//! value"; a person editing a manifest needs "`start` must be a number of seconds, found the
//! text \"abc\"" and "the line ends before the record is complete". This module rewrites
//! every message serde_json (and the derived manifest types) can give, and keeps the
//! original text only for a message it does not know.

use serde_json::error::Category;

/// One manifest line's JSON failure as `(field path, message)`. `path` is the field the
/// deserializer was in (serde_path_to_error's `.` for the top level); a syntax error or a
/// line that ends early is located there too.
pub fn explain(path: &str, error: &serde_json::Error) -> (String, String) {
    // serde_path_to_error writes `?` for a key it could not read; the field is its parent.
    let known = path.trim_end_matches(".?").trim_end_matches('?');
    let field = if known == "." {
        String::new()
    } else {
        known.to_string()
    };
    let inner = strip_position(&error.to_string());
    match error.classify() {
        Category::Eof => (
            field,
            "the line ends before the record is complete (a closing `}` or `]` or a quote is \
             missing; each clip must be whole on one line)"
                .into(),
        ),
        Category::Syntax => (field, syntax(&inner, error.column())),
        Category::Io => (field, inner),
        Category::Data => data(field, &inner),
    }
}

/// A message without serde_json's trailing "at line 1 column 57" (the manifest line is
/// already named, and the column is given in words where it helps).
fn strip_position(message: &str) -> String {
    match message.rfind(" at line ") {
        Some(i) => message[..i].to_string(),
        None => message.to_string(),
    }
}

fn syntax(message: &str, column: usize) -> String {
    let what = match message {
        "expected value" => {
            "a value is missing or is not JSON (text goes in double quotes; NaN and Infinity \
             are not JSON numbers)"
        }
        "expected ident" => "a word that is not JSON (only true, false and null are written bare)",
        "expected `,` or `}`" => "a `,` between fields or the closing `}` is missing",
        "expected `,` or `]`" => "a `,` between items or the closing `]` is missing",
        "expected `:`" => "a `:` is missing after a field name",
        "key must be a string" => "a field name is not in double quotes",
        "trailing comma" => "a comma stands before a closing bracket",
        "trailing characters" => {
            "there is more text after the clip's closing `}` (one clip per line)"
        }
        "invalid escape" => {
            "a string holds an escape JSON does not know (use \\\\ for a backslash)"
        }
        "invalid number" => "a number is not written as JSON writes numbers",
        "number out of range" => "a number is too large",
        "invalid unicode code point" | "lone leading surrogate in hex escape" => {
            "a \\u escape is not a valid character"
        }
        "recursion limit exceeded" => "the record is nested too deeply",
        m if m.contains("hex escape") || m.contains("surrogate") => {
            "a \\u escape is not a valid character"
        }
        m if m.starts_with("control character") => {
            "a string holds a raw control character (a tab or line break); write it as \\t or \\n"
        }
        m if m.starts_with("expected") => return format!("not valid JSON at column {column}"),
        other => return format!("not valid JSON at column {column}: {other}"),
    };
    format!("not valid JSON at column {column}: {what}")
}

fn data(field: String, message: &str) -> (String, String) {
    let last = field.rsplit('.').next().unwrap_or("").to_string();
    let named = if last.is_empty() {
        field.clone()
    } else {
        last.clone()
    };
    if let Some(name) = between(message, "missing field `", "`") {
        let full = join(&field, name);
        let message = if matches!(full.as_str(), "id" | "audio") {
            format!("`{name}` is missing (every clip needs `id` and `audio`)")
        } else {
            format!("`{name}` is missing")
        };
        return (full, message);
    }
    if let Some(name) = between(message, "duplicate field `", "`") {
        let full = join(&field, name);
        return (full, format!("`{name}` is given twice"));
    }
    if let Some(rest) = message
        .strip_prefix("invalid type: ")
        .or_else(|| message.strip_prefix("invalid value: "))
        && let Some((found, wanted)) = rest.split_once(", expected ")
    {
        let wanted = expected(wanted, &last);
        let found = found_as(found);
        let message = if field.is_empty() {
            format!("a clip must be {wanted}, found {found}")
        } else {
            format!("`{named}` must be {wanted}, found {found}")
        };
        return (field, message);
    }
    if let Some(rest) = message.strip_prefix("invalid length ")
        && let Some((n, wanted)) = rest.split_once(", expected ")
    {
        let wanted = expected(wanted, &last);
        return (
            field.clone(),
            format!("`{named}` must be {wanted}, found a list of {n}"),
        );
    }
    (field, message.to_string())
}

fn join(parent: &str, name: &str) -> String {
    if parent.is_empty() {
        name.to_string()
    } else {
        format!("{parent}.{name}")
    }
}

fn between<'a>(text: &'a str, open: &str, close: &str) -> Option<&'a str> {
    let start = text.find(open)? + open.len();
    let len = text[start..].find(close)?;
    Some(&text[start..start + len])
}

/// What serde says it expected, in the words of the manifest docs. `field` is the last
/// part of the field path, which says whether a number is a time.
fn expected(wanted: &str, field: &str) -> String {
    let timed = matches!(field, "start" | "end" | "duration");
    match wanted {
        "f64" | "f32" if timed => "a number of seconds".into(),
        "f64" | "f32" => "a number".into(),
        "u8" | "u16" | "u32" | "u64" | "usize" => "a whole number from 0".into(),
        "i32" | "i64" => "a whole number".into(),
        "a string" => "text in double quotes".into(),
        "a boolean" => "true or false".into(),
        "struct Clip" => "a JSON object".into(),
        "struct Line" => "a JSON object with `start`, `end` and `text`".into(),
        "struct Word" => "a JSON object with `start`, `end` and `text`".into(),
        "struct Origin" => "a JSON object (a take's origin)".into(),
        "struct StepRecord" => "a JSON object (one step's record)".into(),
        "a sequence" => "a list in square brackets".into(),
        "a map" => "a JSON object".into(),
        "an array of length 2" => "a pair [source_s, take_s]".into(),
        w if w.starts_with("struct ") => "a JSON object".into(),
        other => other.to_string(),
    }
}

/// serde's "string \"abc\"", "integer `5`", "floating point `1.5`", "boolean `true`",
/// "null", "sequence", "map" as a person would say them.
fn found_as(found: &str) -> String {
    let quoted = |s: &str| between(s, "`", "`").map(str::to_string);
    if let Some(text) = found.strip_prefix("string ") {
        return format!("the text {text}");
    }
    if found.starts_with("integer ") || found.starts_with("floating point ") {
        return format!("the number {}", quoted(found).unwrap_or_default());
    }
    if found.starts_with("boolean ") {
        return quoted(found).unwrap_or_else(|| found.to_string());
    }
    match found {
        "null" => "null".into(),
        "sequence" => "a list".into(),
        "map" => "an object".into(),
        "unit value" => "null".into(),
        other => other.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use crate::transcript::parse_clip;

    const CLIP: &str =
        r#"{"id":"a","audio":"a.wav","lines":[{"start":0.5,"end":1.5,"text":"bay"}]}"#;

    fn explained(json: &str) -> (String, String) {
        parse_clip(json).unwrap_err()
    }

    #[test]
    fn type_errors_name_the_field_and_what_was_found() {
        let (f, m) = explained(&CLIP.replace("0.5", r#""abc""#));
        assert_eq!(f, "lines[0].start");
        assert_eq!(
            m,
            "`start` must be a number of seconds, found the text \"abc\""
        );
        let (_, m) = explained(&CLIP.replace("0.5", "true"));
        assert_eq!(m, "`start` must be a number of seconds, found true");
        let (f, m) = explained(&CLIP.replace(r#""bay""#, "7"));
        assert_eq!(
            (f.as_str(), m.as_str()),
            (
                "lines[0].text",
                "`text` must be text in double quotes, found the number 7"
            )
        );
        let (f, m) = explained(&CLIP.replace(r#"[{"#, r#"[7,{"#));
        assert_eq!(f, "lines[0]");
        assert!(m.starts_with("`lines[0]` must be a JSON object"), "{m}");
    }

    #[test]
    fn parser_phrases_are_replaced() {
        let cases = [
            CLIP.trim_end_matches('}').to_string(),
            CLIP.replace("0.5", ""),
            CLIP.replace(r#""id":"#, r#""id""#),
            CLIP.replace(r#""id":"a","#, ""),
            format!("{CLIP} {CLIP}"),
            "[1, 2]".to_string(),
            CLIP.replace("0.5", "NaN"),
        ];
        for json in &cases {
            let (_, m) = explained(json);
            for phrase in [
                "expected f64",
                "EOF while parsing",
                "expected struct",
                "invalid type",
            ] {
                assert!(!m.contains(phrase), "{json}: {m}");
            }
        }
        assert!(explained(&cases[0]).1.starts_with("the line ends before"));
        assert_eq!(
            explained(&cases[3]),
            (
                "id".into(),
                "`id` is missing (every clip needs `id` and `audio`)".into()
            )
        );
        assert_eq!(
            explained(&cases[5]).1,
            "a clip must be a JSON object `{...}`, found a list"
        );
    }
}
