//! `rejects.jsonl` and `left_out.jsonl` grouped by reason, read line by line.

use std::collections::BTreeMap;
use std::io::BufRead;

use serde_json::Value;

use super::gather::Tally;

/// Records of one file by reason.
#[derive(Debug, Clone, Default)]
pub struct Grouped {
    /// Records read.
    pub total: u64,
    /// By reason (numbers and file names taken out, so one kind of reason is one group).
    pub by_reason: BTreeMap<String, Tally>,
}

/// Group the records of a rejects or left-out file: `id_key` names the id field (`id` or
/// `source`), `reason_keys` the fields that say why (joined).
///
/// # Errors
/// Reading the file.
pub fn group(reader: impl BufRead, id_key: &str, reason_keys: &[&str]) -> std::io::Result<Grouped> {
    let mut g = Grouped::default();
    for line in reader.lines() {
        let line = line?;
        if line.trim().is_empty() {
            continue;
        }
        g.total += 1;
        let rec: Value = serde_json::from_str(&line).unwrap_or(Value::Null);
        let id = rec
            .get(id_key)
            .and_then(Value::as_str)
            .map(str::to_string)
            .or_else(|| rec.get("line").map(|l| format!("line {l}")))
            .unwrap_or_else(|| "(unreadable record)".into());
        let reason: Vec<String> = reason_keys
            .iter()
            .filter_map(|k| rec.get(*k).and_then(Value::as_str))
            .filter(|s| !s.is_empty())
            .map(general)
            .collect();
        let reason = if reason.is_empty() {
            "(no reason recorded)".to_string()
        } else {
            reason.join(": ")
        };
        g.by_reason.entry(reason).or_default().add(&id);
    }
    Ok(g)
}

/// A reason with its particulars taken out: runs of digits become `#`, words that look
/// like file paths become `FILE`, indices in field paths go.
fn general(reason: &str) -> String {
    reason
        .split(' ')
        .map(|w| {
            if w.contains('/') || w.ends_with(".wav") || w.ends_with(".flac") {
                "FILE".to_string()
            } else {
                let mut out = String::new();
                let mut last_digit = false;
                for c in w.chars() {
                    if c.is_ascii_digit() {
                        if !last_digit {
                            out.push('#');
                        }
                        last_digit = true;
                    } else {
                        // "2.5" stays one number.
                        if !(c == '.' && last_digit) {
                            out.push(c);
                            last_digit = false;
                        }
                    }
                }
                out
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reasons_of_one_kind_group_together() {
        let text = concat!(
            r#"{"line":5,"id":"a","field":"lines[0].words[2].end","reason":"2.5 s is past the end of the audio clips/a.wav (2.0000 s)"}"#,
            "\n",
            r#"{"line":9,"id":"b","field":"lines[1].words[0].end","reason":"3.25 s is past the end of the audio clips/b.wav (3.0000 s)"}"#,
            "\n",
            r#"{"line":11,"id":"c","reason":"not JSON"}"#,
            "\n"
        );
        let g = group(text.as_bytes(), "id", &["field", "reason"]).unwrap();
        assert_eq!(g.total, 3);
        assert_eq!(g.by_reason.len(), 2, "{:?}", g.by_reason.keys());
        let past = g
            .by_reason
            .iter()
            .find(|(k, _)| k.contains("past the end"))
            .unwrap();
        assert_eq!(past.1.count, 2);
        assert_eq!(past.1.first, vec!["a", "b"]);
        assert!(
            past.0.starts_with("lines[#].words[#].end: # s"),
            "{}",
            past.0
        );
    }

    #[test]
    fn left_out_records_group_by_their_reason_and_source() {
        let text = concat!(
            r#"{"source":"long-1","line":2,"start":0.0,"end":31.0,"text":"a","reason":"too_long","detail":"31 s"}"#,
            "\n",
            r#"{"source":"long-2","line":3,"start":4.0,"end":4.2,"text":"b","reason":"too_short","detail":"0.2 s"}"#,
            "\n",
            r#"{"source":"long-3","line":4,"start":9.0,"end":40.0,"text":"c","reason":"too_long","detail":"31 s"}"#,
            "\n"
        );
        let g = group(text.as_bytes(), "source", &["reason"]).unwrap();
        assert_eq!(g.total, 3);
        assert_eq!(g.by_reason["too_long"].first, vec!["long-1", "long-3"]);
        assert_eq!(g.by_reason["too_short"].count, 1);
    }
}
