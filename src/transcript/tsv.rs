//! TSV transcripts: one `start<TAB>end<TAB>text` row per word, times in seconds.
//!
//! The layout is the plainest a forced aligner or a spreadsheet writes:
//! - rows are words; a blank row ends a line (a file without blank rows is one line);
//! - a first row `start<TAB>end<TAB>text[<TAB>more...]` is a header naming the columns; a
//!   column named `speaker` gives the line's speaker, other named columns are kept on the
//!   word as text fields;
//! - rows starting with `#` are comments.
//!
//! A line that is a single row whose text holds more than one token is a line without word
//! timings (a segment-level TSV); a single-token row is a line of one word. Written files
//! carry the same structure back, so a manifest survives a round trip with every time to the
//! microsecond, every text and every speaker; a line's own start and end become its words'
//! extent, which is what they are in an aligner's output.

use std::path::Path;

use serde_json::{Map, Value};

use super::{END_TOLERANCE_S, Line, Problem, Word};

/// One data row.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// 1-based line number in the file.
    pub line: usize,
    /// Start, seconds.
    pub start: f64,
    /// End, seconds.
    pub end: f64,
    /// The third column.
    pub text: String,
    /// Columns after the third, as written.
    pub rest: Vec<String>,
}

/// A parsed TSV file: its header (if any) and its rows in groups separated by blank rows.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Table {
    /// Column names when the file has a header row.
    pub header: Option<Vec<String>>,
    /// Runs of rows between blank rows, in file order; never empty.
    pub groups: Vec<Vec<Row>>,
}

impl Table {
    /// All rows in file order.
    pub fn rows(&self) -> impl Iterator<Item = &Row> {
        self.groups.iter().flatten()
    }

    /// Every row's start and end through `f` (for carrying an annotation through a time map).
    pub fn retime(&mut self, mut f: impl FnMut(f64) -> f64) {
        for row in self.groups.iter_mut().flatten() {
            row.start = f(row.start);
            row.end = f(row.end);
        }
    }

    /// The table as TSV text: header, rows, a blank row between groups.
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        if let Some(h) = &self.header {
            out.push_str(&h.join("\t"));
            out.push('\n');
        }
        for (i, group) in self.groups.iter().enumerate() {
            if i > 0 {
                out.push('\n');
            }
            for row in group {
                out.push_str(&format_seconds(row.start));
                out.push('\t');
                out.push_str(&format_seconds(row.end));
                out.push('\t');
                out.push_str(&row.text);
                for r in &row.rest {
                    out.push('\t');
                    out.push_str(r);
                }
                out.push('\n');
            }
        }
        out
    }
}

/// Seconds with six decimals (a microsecond), trailing zeros trimmed to three.
pub fn format_seconds(t: f64) -> String {
    let mut s = format!("{t:.6}");
    while s.ends_with('0') && s.len() - s.find('.').unwrap_or(s.len()) > 4 {
        s.pop();
    }
    s
}

/// Parse TSV text. Syntax only: every row has start, end and text; times are finite,
/// non-negative seconds with end >= start. Order and overlaps are the caller's business
/// (a transcript forbids overlapping words; sound-event spans may overlap).
///
/// # Errors
/// Every bad row, as a [`Problem`] naming `path`, the line and the column.
pub fn parse(path: &Path, text: &str) -> Result<Table, Vec<Problem>> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut table = Table::default();
    let mut problems = Vec::new();
    let mut group: Vec<Row> = Vec::new();
    let mut seen_data = false;
    let problem = |line: usize, field: &str, message: String| Problem {
        file: path.to_path_buf(),
        line,
        field: field.into(),
        message,
    };
    for (i, raw) in text.lines().enumerate() {
        let line = i + 1;
        let raw = raw.strip_suffix('\r').unwrap_or(raw);
        if raw.trim().is_empty() {
            if !group.is_empty() {
                table.groups.push(std::mem::take(&mut group));
            }
            continue;
        }
        if raw.starts_with('#') {
            continue;
        }
        let fields: Vec<&str> = raw.split('\t').collect();
        if !seen_data && table.header.is_none() && is_header(&fields) {
            table.header = Some(fields.iter().map(|f| f.trim().to_string()).collect());
            continue;
        }
        seen_data = true;
        let columns = table.header.as_ref().map_or(3, Vec::len);
        if fields.len() < 3 {
            problems.push(problem(
                line,
                "",
                format!(
                    "{} field{}; a row is start<TAB>end<TAB>text",
                    fields.len(),
                    if fields.len() == 1 { "" } else { "s" }
                ),
            ));
            continue;
        }
        if table.header.is_some() && fields.len() != columns {
            problems.push(problem(
                line,
                "",
                format!("{} fields but the header names {columns}", fields.len()),
            ));
            continue;
        }
        let start = seconds(fields[0]);
        let end = seconds(fields[1]);
        let mut bad = false;
        for (name, value, raw) in [("start", start, fields[0]), ("end", end, fields[1])] {
            if let Err(why) = value {
                problems.push(problem(line, name, format!("`{raw}` {why}")));
                bad = true;
            }
        }
        if bad {
            continue;
        }
        let (start, end) = (start.unwrap_or(0.0), end.unwrap_or(0.0));
        if end < start {
            problems.push(problem(
                line,
                "end",
                format!("end {end} s is before start {start} s"),
            ));
            continue;
        }
        group.push(Row {
            line,
            start,
            end,
            text: fields[2].to_string(),
            rest: fields[3..].iter().map(|s| (*s).to_string()).collect(),
        });
    }
    if !group.is_empty() {
        table.groups.push(group);
    }
    if problems.is_empty() {
        Ok(table)
    } else {
        Err(problems)
    }
}

/// A header row: the first two fields are the words `start` and `end`.
fn is_header(fields: &[&str]) -> bool {
    fields.len() >= 3
        && fields[0].trim().eq_ignore_ascii_case("start")
        && fields[1].trim().eq_ignore_ascii_case("end")
}

fn seconds(s: &str) -> Result<f64, &'static str> {
    match s.trim().parse::<f64>() {
        Ok(t) if !t.is_finite() => Err("is not a finite time"),
        Ok(t) if t < 0.0 => Err("is a negative time"),
        Ok(t) => Ok(t),
        Err(_) => Err("is not a time in seconds"),
    }
}

/// A TSV transcript as lines (see the module doc for the layout). Beyond [`parse`]'s
/// checks, rows must be in order and words must not overlap.
///
/// # Errors
/// Every problem found, each naming `path` and the line.
pub fn read_lines(path: &Path, text: &str) -> Result<Vec<Line>, Vec<Problem>> {
    lines_of(path, &parse(path, text)?)
}

/// A parsed table as transcript lines; `path` names the file in problems.
///
/// # Errors
/// Rows out of order, overlapping words, unnamed extra columns.
pub fn lines_of(path: &Path, table: &Table) -> Result<Vec<Line>, Vec<Problem>> {
    let names: Vec<String> = table.header.clone().unwrap_or_default();
    let speaker_col = names.iter().position(|n| n == "speaker");
    let mut problems = Vec::new();
    let mut prev: Option<&Row> = None;
    for row in table.rows() {
        if table.header.is_none() && !row.rest.is_empty() {
            problems.push(Problem {
                file: path.to_path_buf(),
                line: row.line,
                field: String::new(),
                message: format!(
                    "{} fields; a transcript row is start<TAB>end<TAB>text (name further \
                     columns in a header row)",
                    row.rest.len() + 3
                ),
            });
        }
        if let Some(p) = prev {
            if row.start < p.start {
                problems.push(Problem {
                    file: path.to_path_buf(),
                    line: row.line,
                    field: "start".into(),
                    message: format!(
                        "{} s is before the previous row's start {} s (line {}); rows must be in \
                         time order",
                        row.start, p.start, p.line
                    ),
                });
            } else if row.start < p.end - END_TOLERANCE_S {
                problems.push(Problem {
                    file: path.to_path_buf(),
                    line: row.line,
                    field: "start".into(),
                    message: format!(
                        "{} s overlaps the previous row (line {}), which ends at {} s",
                        row.start, p.line, p.end
                    ),
                });
            }
        }
        prev = Some(row);
    }
    if !problems.is_empty() {
        return Err(problems);
    }
    let extra_of = |row: &Row| -> Map<String, Value> {
        row.rest
            .iter()
            .enumerate()
            .filter(|(k, _)| Some(k + 3) != speaker_col)
            .filter_map(|(k, v)| {
                names
                    .get(k + 3)
                    .map(|n| (n.clone(), Value::from(v.clone())))
            })
            .collect()
    };
    let lines = table
        .groups
        .iter()
        .map(|group| {
            let speaker = speaker_col
                .and_then(|c| group[0].rest.get(c - 3))
                .filter(|s| !s.is_empty())
                .cloned();
            let (first, last) = (&group[0], &group[group.len() - 1]);
            let segment = group.len() == 1 && first.text.split_whitespace().nth(1).is_some();
            let words = if segment {
                Vec::new()
            } else {
                group
                    .iter()
                    .map(|r| Word {
                        start: r.start,
                        end: r.end,
                        text: r.text.clone(),
                        extra: extra_of(r),
                    })
                    .collect()
            };
            let text = group
                .iter()
                .map(|r| r.text.as_str())
                .collect::<Vec<_>>()
                .join(" ");
            Line {
                start: first.start,
                end: group.iter().map(|r| r.end).fold(last.end, f64::max),
                text,
                speaker,
                words,
                extra: if segment { extra_of(first) } else { Map::new() },
            }
        })
        .collect();
    Ok(lines)
}

/// Lines as a TSV transcript: a header (with a `speaker` column when any line has a
/// speaker), word rows, a blank row between lines; a line without words is one row.
/// Word and line fields other than the timing and text are not written.
pub fn write_lines(lines: &[Line]) -> String {
    let with_speaker = lines.iter().any(|l| l.speaker.is_some());
    let mut header = vec!["start".to_string(), "end".into(), "text".into()];
    if with_speaker {
        header.push("speaker".into());
    }
    let groups = lines
        .iter()
        .enumerate()
        .map(|(i, line)| {
            let rest = || -> Vec<String> {
                if with_speaker {
                    vec![line.speaker.clone().unwrap_or_default()]
                } else {
                    Vec::new()
                }
            };
            let row = |start: f64, end: f64, text: &str| Row {
                line: i + 1,
                start,
                end,
                text: one_field(text),
                rest: rest(),
            };
            if line.words.is_empty() {
                vec![row(line.start, line.end, &line.text)]
            } else {
                line.words
                    .iter()
                    .map(|w| row(w.start, w.end, &w.text))
                    .collect()
            }
        })
        .collect();
    Table {
        header: Some(header),
        groups,
    }
    .to_text()
}

/// Text made safe for one TSV field: tabs and line breaks become spaces.
fn one_field(text: &str) -> String {
    text.replace(['\t', '\n', '\r'], " ")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p() -> &'static Path {
        Path::new("words.tsv")
    }

    #[test]
    fn words_group_into_lines_at_blank_rows() {
        let text = "start\tend\ttext\tspeaker\n0.5\t0.9\tbay\tastrid\n1.0\t1.5\tthree\tastrid\n\n\
                    2.0\t3.25\tcheck digit five\truben\n";
        let lines = read_lines(p(), text).unwrap();
        assert_eq!(lines.len(), 2);
        assert_eq!(
            (lines[0].start, lines[0].end, lines[0].text.as_str()),
            (0.5, 1.5, "bay three")
        );
        assert_eq!(lines[0].words.len(), 2);
        assert_eq!(lines[0].speaker.as_deref(), Some("astrid"));
        assert!(
            lines[1].words.is_empty(),
            "a multi-token single row is a segment"
        );
        assert_eq!(lines[1].speaker.as_deref(), Some("ruben"));
    }

    #[test]
    fn header_is_optional_and_comments_are_skipped() {
        let lines = read_lines(p(), "# aligner output\n0\t0.25\tgo\n0.3\t0.5\tnow\n").unwrap();
        assert_eq!(lines.len(), 1);
        assert_eq!(lines[0].text, "go now");
        assert_eq!(lines[0].words[1].start, 0.3);
    }

    #[test]
    fn bad_rows_name_line_and_column() {
        let err =
            read_lines(p(), "0.1\t0.2\tok\n0.3\t0.4\n0.5\tlate\tx\n0.9\t0.6\ty\n").unwrap_err();
        let got: Vec<(usize, &str)> = err.iter().map(|e| (e.line, e.field.as_str())).collect();
        assert_eq!(got, [(2, ""), (3, "end"), (4, "end")]);
        assert!(err[0].message.contains("2 fields"), "{}", err[0]);
        assert!(
            err[1]
                .to_string()
                .starts_with("words.tsv line 3: end: `late`")
        );
    }

    #[test]
    fn overlap_and_disorder_are_transcript_errors_but_not_syntax_errors() {
        let text = "0.0\t1.0\ta\n0.5\t1.5\tb\n0.2\t0.3\tc\n";
        assert!(parse(p(), text).is_ok());
        let err = read_lines(p(), text).unwrap_err();
        assert_eq!(err.len(), 2);
        assert!(err[0].message.contains("overlaps"), "{}", err[0]);
        assert!(err[1].message.contains("time order"), "{}", err[1]);
    }

    #[test]
    fn extra_named_columns_are_kept_verbatim() {
        let text = "start\tend\ttext\tclass\n0.1\t0.2\tk\tplosive\n";
        let table = parse(p(), text).unwrap();
        assert_eq!(
            table.to_text(),
            "start\tend\ttext\tclass\n0.100\t0.200\tk\tplosive\n"
        );
        assert!(parse(p(), "0.1\t0.2\tk\tplosive\n").is_ok());
        assert!(read_lines(p(), "0.1\t0.2\tk\tplosive\n").is_err());
    }

    #[test]
    fn seconds_are_written_to_the_microsecond() {
        assert_eq!(format_seconds(0.237875), "0.237875");
        assert_eq!(format_seconds(3.5), "3.500");
        assert_eq!(format_seconds(0.1 + 0.2), "0.300");
        assert_eq!(format_seconds(7_200.000_000_4), "7200.000");
    }
}
