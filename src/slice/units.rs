//! A clip's labels as the stretches no slice may split ("units") and the gaps between them.
//!
//! Each word of a line with words is a unit; a line without words is one unit. The first
//! and last word of a line also cover any part of the line outside its words, so a slice can
//! never fall inside a line's span without falling between two of its words. Spans are
//! widened to whole samples (start rounded down, end up) and units that overlap or touch
//! merge: a gap is at least one whole sample of silence, so words that touch (as forced
//! alignments often write them) are never separated.

use crate::transcript::Line;

/// One label inside a unit: a word, or a whole line without words.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub struct Piece {
    /// Index of the line in the clip.
    pub line: usize,
    /// Index of the word in its line; `None` for a line without words.
    pub word: Option<usize>,
}

/// A stretch of speech no slice may cross: samples `start..end` of the recording.
#[derive(Debug, Clone, PartialEq)]
pub struct Unit {
    /// First sample.
    pub start: u64,
    /// One past the last sample.
    pub end: u64,
    /// The labels it holds, in time order.
    pub pieces: Vec<Piece>,
}

impl Unit {
    /// Length in samples.
    pub fn len(&self) -> u64 {
        self.end - self.start
    }

    /// True for a zero-length unit (a zero-length word on a sample boundary).
    pub fn is_empty(&self) -> bool {
        self.end == self.start
    }
}

/// A clip's units in time order, with what lies between them.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Units {
    /// The units, in order, with at least one sample between neighbours.
    pub units: Vec<Unit>,
    /// For the gap before unit `k` (index `k - 1`): true when a line continues across it,
    /// so a slice there splits the line between two of its words.
    pub inside_line: Vec<bool>,
}

impl Units {
    /// Samples of speech: the length of the union of every label's span.
    pub fn speech(&self) -> u64 {
        self.units.iter().map(Unit::len).sum()
    }
}

/// Samples `floor(start·rate)..ceil(end·rate)`, held inside `0..=total`.
fn to_samples(start: f64, end: f64, rate: u32, total: u64) -> (u64, u64) {
    let r = f64::from(rate);
    // Float-to-int `as` saturates, and negative times are refused by validation anyway.
    let a = ((start * r).floor().max(0.0) as u64).min(total);
    let b = ((end * r).ceil().max(0.0) as u64).clamp(a, total);
    (a, b)
}

/// The units of `lines` for a recording of `total` samples at `rate`.
pub fn find_units(lines: &[Line], rate: u32, total: u64) -> Units {
    let mut spans: Vec<(u64, u64, Piece)> = Vec::new();
    for (li, line) in lines.iter().enumerate() {
        if line.words.is_empty() {
            let (a, b) = to_samples(line.start, line.end, rate, total);
            spans.push((
                a,
                b,
                Piece {
                    line: li,
                    word: None,
                },
            ));
            continue;
        }
        let last = line.words.len() - 1;
        for (wi, w) in line.words.iter().enumerate() {
            let s = if wi == 0 {
                w.start.min(line.start)
            } else {
                w.start
            };
            let e = if wi == last {
                w.end.max(line.end)
            } else {
                w.end
            };
            let (a, b) = to_samples(s, e, rate, total);
            spans.push((
                a,
                b,
                Piece {
                    line: li,
                    word: Some(wi),
                },
            ));
        }
    }
    spans.sort_by_key(|&(a, b, p)| (a, b, p));

    let mut units: Vec<Unit> = Vec::new();
    for (a, b, piece) in spans {
        match units.last_mut() {
            Some(u) if a <= u.end => {
                u.end = u.end.max(b);
                u.pieces.push(piece);
            }
            _ => units.push(Unit {
                start: a,
                end: b,
                pieces: vec![piece],
            }),
        }
    }

    // A line continues across every gap between the first and last unit holding its pieces.
    let mut inside_line = vec![false; units.len().saturating_sub(1)];
    let mut reach: Vec<Option<(usize, usize)>> = vec![None; lines.len()];
    for (k, u) in units.iter().enumerate() {
        for p in &u.pieces {
            let r = reach[p.line].get_or_insert((k, k));
            r.1 = k;
        }
    }
    for (first, last) in reach.into_iter().flatten() {
        for flag in &mut inside_line[first..last] {
            *flag = true;
        }
    }
    Units { units, inside_line }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::transcript::Word;

    fn word(start: f64, end: f64, text: &str) -> Word {
        Word {
            start,
            end,
            text: text.into(),
            extra: Default::default(),
        }
    }

    fn line(start: f64, end: f64, words: Vec<Word>) -> Line {
        Line {
            start,
            end,
            text: String::new(),
            speaker: None,
            words,
            extra: Default::default(),
        }
    }

    #[test]
    fn words_lines_and_overlaps_become_units() {
        // At 100 Hz: line 0 has words 0.10-0.30 and 0.50-0.70 but spans 0.05-0.75; line 1
        // has no words and overlaps line 0's last word; line 2's words touch each other.
        let lines = vec![
            line(
                0.05,
                0.75,
                vec![word(0.10, 0.30, "a"), word(0.50, 0.70, "b")],
            ),
            line(0.72, 1.00, vec![]),
            line(
                1.20,
                1.60,
                vec![word(1.20, 1.40, "c"), word(1.40, 1.60, "d")],
            ),
        ];
        let u = find_units(&lines, 100, 200);
        let spans: Vec<(u64, u64)> = u.units.iter().map(|u| (u.start, u.end)).collect();
        assert_eq!(spans, [(5, 30), (50, 100), (120, 160)]);
        assert_eq!(u.units[1].pieces.len(), 2);
        assert_eq!(u.inside_line, [true, false]);
        assert_eq!(u.speech(), 25 + 50 + 40);
    }

    #[test]
    fn spans_widen_to_whole_samples_and_stay_in_the_recording() {
        // 0.104 s and 0.196 s at 100 Hz lie inside samples 10..20.
        let lines = vec![line(0.104, 0.196, vec![]), line(0.5, 0.60001, vec![])];
        let u = find_units(&lines, 100, 60);
        let spans: Vec<(u64, u64)> = u.units.iter().map(|u| (u.start, u.end)).collect();
        assert_eq!(spans, [(10, 20), (50, 60)]);
    }
}
