//! The transcript of a run of units: whole lines where the run holds all of a line, the part
//! of a line where a slice split it, every time moved to the slice's own timeline.

use std::collections::BTreeMap;

use super::units::Unit;
use crate::transcript::{Line, Word};

/// The lines (or parts of lines) whose labels lie in `units`, in line order, with every
/// time `t` rewritten as `t - offset` (to the nanosecond) and held inside `[0, duration]`.
///
/// A line the run holds whole keeps everything as it was. A part of a split line keeps the
/// line's speaker and extra fields; its text is its words' texts joined by spaces, and it
/// spans its words, or reaches the line's own start (end) when it holds the first (last)
/// word.
pub fn lines_of(lines: &[Line], units: &[Unit], offset: f64, duration: f64) -> Vec<Line> {
    let at = |t: f64| {
        // Rounded to the nanosecond, far below a sample, so a manifest reads 1.154625 rather
        // than the subtraction's 1.1546249999999998; rounding is monotone, order is kept.
        let x = ((t - offset) * 1e9).round() / 1e9;
        // `x <= 0` also catches -0.0, written as +0.0 as a manifest should say; times are
        // finite (validated), so there is no NaN to fall through.
        if x <= 0.0 { 0.0 } else { x.min(duration) }
    };
    let mut held: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for p in units.iter().flat_map(|u| &u.pieces) {
        let words = held.entry(p.line).or_default();
        words.extend(p.word);
    }
    held.into_iter()
        .map(|(li, mut ws)| {
            let line = &lines[li];
            ws.sort_unstable();
            let whole = ws.len() == line.words.len();
            let words: Vec<Word> = ws
                .iter()
                .map(|&wi| {
                    let w = &line.words[wi];
                    Word {
                        start: at(w.start),
                        end: at(w.end),
                        ..w.clone()
                    }
                })
                .collect();
            if whole {
                return Line {
                    start: at(line.start),
                    end: at(line.end),
                    words,
                    ..line.clone()
                };
            }
            let (first, last) = (ws[0], ws[ws.len() - 1]);
            let start = if first == 0 {
                line.start
            } else {
                line.words[first].start
            };
            let end = if last + 1 == line.words.len() {
                line.end
            } else {
                line.words[last].end
            };
            let text = ws
                .iter()
                .map(|&wi| line.words[wi].text.as_str())
                .collect::<Vec<_>>()
                .join(" ");
            Line {
                start: at(start),
                end: at(end),
                text,
                words,
                ..line.clone()
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use serde_json::Value;

    use super::*;
    use crate::slice::units::find_units;
    use crate::transcript::parse_clip;

    const CLIP: &str = r#"{"id":"d","audio":"d.wav","lines":[
        {"start":0.5,"end":2.5,"text":"Reefer at DOCK four","speaker":"ruben","tone":"calm",
         "words":[{"start":0.5,"end":0.9,"text":"reefer"},{"start":1.0,"end":1.2,"text":"at"},
                  {"start":1.6,"end":2.0,"text":"dock","stress":1},{"start":2.1,"end":2.5,"text":"four"}]},
        {"start":3.0,"end":3.5,"text":"copy"}]}"#;

    #[test]
    fn a_split_line_keeps_speaker_and_fields_and_joins_its_word_texts() {
        let clip = parse_clip(&CLIP.replace('\n', "")).unwrap();
        let lines = clip.lines.unwrap();
        let u = find_units(&lines, 100, 400).units;
        // Units: the four words, then the line without words.
        assert_eq!(u.len(), 5);
        // Slice at 1.4 s: the second part starts at sample 140.
        let first = lines_of(&lines, &u[..2], 0.0, 1.4);
        let second = lines_of(&lines, &u[2..], 1.4, 2.6);
        assert_eq!(first.len(), 1);
        assert_eq!(second.len(), 2);
        assert_eq!(first[0].text, "reefer at");
        assert_eq!(second[0].text, "dock four");
        assert_eq!(second[1].text, "copy");
        for part in [&first[0], &second[0]] {
            assert_eq!(part.speaker.as_deref(), Some("ruben"));
            assert_eq!(part.extra.get("tone"), Some(&Value::from("calm")));
        }
        assert_eq!(
            second[0].words[0].extra.get("stress"),
            Some(&Value::from(1))
        );
        // Spans: the first part from the line's start to "at"'s end; the second from
        // "dock" to the line's end, both moved by 1.4 s; the whole line moved as it was.
        let close = |a: f64, b: f64| (a - b).abs() < 1e-12;
        assert!(close(first[0].start, 0.5) && close(first[0].end, 1.2));
        assert!(close(second[0].start, 0.2) && close(second[0].end, 1.1));
        assert!(close(second[0].words[1].start, 0.7));
        assert!(close(second[1].start, 1.6) && close(second[1].end, 2.1));
    }

    #[test]
    fn a_whole_line_is_unchanged_but_for_time() {
        let clip = parse_clip(&CLIP.replace('\n', "")).unwrap();
        let lines = clip.lines.unwrap();
        let u = find_units(&lines, 100, 400).units;
        let all = lines_of(&lines, &u, 0.25, 3.5);
        assert_eq!(all[0].text, "Reefer at DOCK four");
        assert_eq!(all[0].words.len(), 4);
        assert!((all[0].start - 0.25).abs() < 1e-12);
        // Held inside the slice: 3.5 - 0.3 = 3.2 > 3.1.
        assert_eq!(lines_of(&lines, &u, 0.3, 3.1)[1].end, 3.1);
        // Never a negative zero.
        let z = lines_of(&lines, &u[..1], 0.5, 1.0)[0].start;
        assert!(z == 0.0 && z.is_sign_positive());
    }
}
