//! Choosing where to slice a clip: pure arithmetic over its [`Units`], no audio, no I/O.
//!
//! # The rule
//! A slice (one output clip) holds a run of consecutive units plus padding on each side. It is
//! possible when its speech span (first unit's start to last unit's end) is at most the
//! longest length, and speech plus all the silence it may take reaches the shortest. A slice
//! may take silence up to half the gap to each neighbouring unit (so slices never overlap), or
//! up to the recording's edge beyond the first and last unit.
//!
//! Among all ways to split the units into possible slices and left-out units, a dynamic
//! programme picks the one that, compared in this order:
//! 1. leaves out the least speech (samples), then the fewest units;
//! 2. splits the fewest lines (a boundary in a gap between two words of one line);
//! 3. has the smallest sum over its boundaries of `1 + τ / (τ + gap)`, with τ = 0.25 s and
//!    `gap` the silence in seconds: every boundary costs at least 1, so clips are as long as
//!    the limits allow, and a long gap costs less than a short one (τ is our choice: a
//!    quarter second sits between the pauses inside a sentence and those between sentences).
//!
//! # Padding
//! Each gap (before the first unit, between units, after the last) has its own stream,
//! `TakeRng(stable_hash(seed, clip id, gap index))`, which draws two pads in order: the pad
//! after the slice ending at that gap, then the pad before the slice starting there. So a pad does
//! not depend on where other slices fall. A pad is held to the silence available on its side;
//! if the slice is then shorter than the shortest, both pads grow (evenly, then whichever side
//! still has silence); if it is longer than the longest, both shrink the same way.

use std::ops::Range;

use super::units::Units;
use crate::seed::{TakeRng, stable_hash};

/// Shortest and longest length of a slice, padding included.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limits {
    /// Seconds, at least 0.
    pub shortest: f64,
    /// Seconds, more than 0 and at least `shortest`.
    pub longest: f64,
}

/// Padding drawn uniformly from `low..=high` seconds per side (a fixed pad when equal).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PadRange {
    /// Seconds, at least 0.
    pub low: f64,
    /// Seconds, at least `low`.
    pub high: f64,
}

/// A value the planner cannot work with.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{0}")]
pub struct LimitError(pub String);

impl Limits {
    /// Checked limits.
    ///
    /// # Errors
    /// A non-finite or negative value, a zero longest, or shortest above longest.
    pub fn new(shortest: f64, longest: f64) -> Result<Self, LimitError> {
        if !(shortest.is_finite() && shortest >= 0.0) {
            return Err(LimitError(format!(
                "shortest {shortest} s: expected a finite number of seconds >= 0"
            )));
        }
        if !(longest.is_finite() && longest > 0.0) {
            return Err(LimitError(format!(
                "longest {longest} s: expected a finite number of seconds > 0"
            )));
        }
        if shortest > longest {
            return Err(LimitError(format!(
                "shortest {shortest} s is above longest {longest} s"
            )));
        }
        Ok(Self { shortest, longest })
    }

    /// (shortest, longest) in whole samples at `rate`: the tightest sample counts inside
    /// the limits (a micro-sample of slack absorbs decimal seconds that are not exact in
    /// binary, e.g. 0.1 s at 44.1 kHz).
    pub fn in_samples(&self, rate: u32) -> (u64, u64) {
        let r = f64::from(rate);
        let min = (self.shortest * r - 1e-6).ceil().max(0.0) as u64;
        let max = (self.longest * r + 1e-6).floor().max(0.0) as u64;
        (min, max)
    }
}

impl PadRange {
    /// A checked range.
    ///
    /// # Errors
    /// A non-finite or negative bound, or `low > high`.
    pub fn new(low: f64, high: f64) -> Result<Self, LimitError> {
        if !(low.is_finite() && high.is_finite() && low >= 0.0 && high >= 0.0) {
            return Err(LimitError(format!(
                "pad {low}..{high} s: expected finite seconds >= 0"
            )));
        }
        if low > high {
            return Err(LimitError(format!("pad {low}..{high} s has low > high")));
        }
        Ok(Self { low, high })
    }
}

/// Everything besides the labels that decides a clip's plan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlanSpec {
    /// Length limits.
    pub limits: Limits,
    /// Padding draw.
    pub pad: PadRange,
    /// Seed of the pad draws.
    pub seed: u64,
}

/// One planned slice: units `units` and samples `start..end` of the recording.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PlannedSlice {
    /// Indices of the units it holds.
    pub units: Range<usize>,
    /// First sample.
    pub start: u64,
    /// One past the last sample.
    pub end: u64,
}

/// Why units were left out (written as `too_long` / `too_short`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reason {
    /// A unit is longer than the longest slice: there is no gap to slice it at.
    TooLong,
    /// The units cannot reach the shortest slice with the silence around them, and cannot
    /// join a neighbour within the longest.
    TooShort,
}

/// A run of consecutive left-out units with one reason.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LeftOut {
    /// Indices of the units.
    pub units: Range<usize>,
    /// Why.
    pub reason: Reason,
}

/// A clip's plan: slices and left-out stretches, each in time order; every unit is in exactly
/// one of them.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Plan {
    /// The slices.
    pub slices: Vec<PlannedSlice>,
    /// What could not be sliced within the limits.
    pub left_out: Vec<LeftOut>,
}

/// τ of the boundary cost, seconds (see the module doc).
const GAP_SCALE_S: f64 = 0.25;

/// What a partial solution costs, compared field by field in this order.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
struct Score {
    left_samples: u64,
    left_units: usize,
    split_lines: usize,
    boundaries: f64,
}

impl Score {
    fn better_than(&self, other: &Score) -> bool {
        (self.left_samples, self.left_units, self.split_lines)
            .cmp(&(other.left_samples, other.left_units, other.split_lines))
            .then(self.boundaries.total_cmp(&other.boundaries))
            .is_lt()
    }
}

#[derive(Debug, Clone, Copy)]
enum Step {
    /// Units `from..here` form a slice.
    Slice { from: usize },
    /// The unit before `here` is left out.
    Leave,
}

/// Plan the slices of a clip of `total` samples at `rate` whose labels make `units`.
pub fn plan(units: &Units, total: u64, rate: u32, spec: &PlanSpec, clip_id: &str) -> Plan {
    let u = &units.units;
    let n = u.len();
    if n == 0 {
        return Plan::default();
    }
    let (min, max) = spec.limits.in_samples(rate);
    let room_before = |i: usize| {
        if i == 0 {
            u[0].start
        } else {
            (u[i].start - u[i - 1].end) / 2
        }
    };
    let room_after = |j: usize| {
        if j + 1 == n {
            total - u[j].end
        } else {
            (u[j + 1].start - u[j].end) / 2
        }
    };
    // Cost of a boundary at gap k (between units k-1 and k); none at the recording's edges.
    let boundary = |k: usize, s: Score| -> Score {
        if k == 0 || k == n {
            return s;
        }
        let gap = (u[k].start - u[k - 1].end) as f64 / f64::from(rate);
        Score {
            split_lines: s.split_lines + usize::from(units.inside_line[k - 1]),
            boundaries: s.boundaries + 1.0 + GAP_SCALE_S / (GAP_SCALE_S + gap),
            ..s
        }
    };

    let mut best: Vec<(Score, Step)> = Vec::with_capacity(n + 1);
    best.push((Score::default(), Step::Leave));
    for j in 1..=n {
        let mut choice: Option<(Score, Step)> = None;
        for i in (0..j).rev() {
            let span = u[j - 1].end - u[i].start;
            if span > max {
                break;
            }
            if span + room_before(i) + room_after(j - 1) >= min {
                let s = boundary(j, best[i].0);
                if choice.is_none_or(|(c, _)| s.better_than(&c)) {
                    choice = Some((s, Step::Slice { from: i }));
                }
            }
        }
        let prev = best[j - 1].0;
        let leave = boundary(
            j,
            Score {
                left_samples: prev.left_samples + u[j - 1].len(),
                left_units: prev.left_units + 1,
                ..prev
            },
        );
        if choice.is_none_or(|(c, _)| leave.better_than(&c)) {
            choice = Some((leave, Step::Leave));
        }
        best.push(choice.expect("a unit can always be left out"));
    }

    // Walk back from the end, then put the pieces in time order.
    let mut slices = Vec::new();
    let mut left: Vec<usize> = Vec::new();
    let mut j = n;
    while j > 0 {
        match best[j].1 {
            Step::Slice { from } => {
                slices.push(from..j);
                j = from;
            }
            Step::Leave => {
                left.push(j - 1);
                j -= 1;
            }
        }
    }
    slices.reverse();
    left.reverse();

    let draws = |gap: usize| -> (f64, f64) {
        let key = stable_hash(&[
            &spec.seed.to_le_bytes(),
            clip_id.as_bytes(),
            &(gap as u64).to_le_bytes(),
        ]);
        let mut rng = TakeRng::new(key);
        let after = rng.uniform(spec.pad.low, spec.pad.high);
        let before = rng.uniform(spec.pad.low, spec.pad.high);
        (after, before)
    };
    let to_samples = |s: f64| (s * f64::from(rate)).round() as u64;
    let slices = slices
        .into_iter()
        .map(|range| {
            let (first, last) = (range.start, range.end - 1);
            let speech = u[last].end - u[first].start;
            let want_before = to_samples(draws(first).1);
            let want_after = to_samples(draws(range.end).0);
            let (before, after) = fit_pads(
                speech,
                (want_before, room_before(first)),
                (want_after, room_after(last)),
                (min, max),
            );
            PlannedSlice {
                start: u[first].start - before,
                end: u[last].end + after,
                units: range,
            }
        })
        .collect();

    let reason = |k: usize| {
        if u[k].len() > max {
            Reason::TooLong
        } else {
            Reason::TooShort
        }
    };
    let mut left_out: Vec<LeftOut> = Vec::new();
    for k in left {
        match left_out.last_mut() {
            Some(l) if l.units.end == k && l.reason == reason(k) => l.units.end = k + 1,
            _ => left_out.push(LeftOut {
                units: k..k + 1,
                reason: reason(k),
            }),
        }
    }
    Plan { slices, left_out }
}

/// Pads (before, after) in samples for `speech` samples, from the wanted pads and the
/// silence available on each side, so that the total lies in `min..=max` whenever
/// `speech <= max` and `speech + room_before + room_after >= min`.
fn fit_pads(
    speech: u64,
    (want_before, room_before): (u64, u64),
    (want_after, room_after): (u64, u64),
    (min, max): (u64, u64),
) -> (u64, u64) {
    let mut before = want_before.min(room_before);
    let mut after = want_after.min(room_after);
    let total = speech + before + after;
    if total < min {
        let (b, a) = share(min - total, room_before - before, room_after - after);
        before += b;
        after += a;
    } else if total > max {
        let (b, a) = share(total - max, before, after);
        before -= b;
        after -= a;
    }
    (before, after)
}

/// Split `need` between two sides holding at most `left` and `right`: half each where
/// possible, the rest on the side with room (`need` is capped at `left + right`).
fn share(need: u64, left: u64, right: u64) -> (u64, u64) {
    let l = left.min(need / 2);
    let r = right.min(need - l);
    let l = left.min(need - r);
    (l, r)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::slice::units::Unit;

    /// Units from (start, end) sample spans; `inside` flags the gaps inside a line.
    fn units(spans: &[(u64, u64)], inside: &[bool]) -> Units {
        Units {
            units: spans
                .iter()
                .map(|&(start, end)| Unit {
                    start,
                    end,
                    pieces: vec![],
                })
                .collect(),
            inside_line: inside.to_vec(),
        }
    }

    fn spec(shortest: f64, longest: f64, pad: f64) -> PlanSpec {
        PlanSpec {
            limits: Limits::new(shortest, longest).unwrap(),
            pad: PadRange::new(pad, pad).unwrap(),
            seed: 0,
        }
    }

    #[test]
    fn pads_share_out_what_is_needed() {
        assert_eq!(share(10, 100, 100), (5, 5));
        assert_eq!(share(10, 2, 100), (2, 8));
        assert_eq!(share(10, 100, 3), (7, 3));
        assert_eq!(share(11, 100, 100), (5, 6));
        // Grow: 50 samples of speech, wanted pads 5 and 5, rooms 40 and 10, shortest 100.
        assert_eq!(fit_pads(50, (5, 40), (5, 10), (100, 200)), (40, 10));
        // Shrink: 95 of speech, wanted 10 and 10 with room, longest 100: 15 over, 7 taken
        // off before and 8 after.
        assert_eq!(fit_pads(95, (10, 50), (10, 50), (0, 100)), (3, 2));
        // Speech alone at the longest: no pads at all.
        assert_eq!(fit_pads(100, (10, 50), (10, 50), (0, 100)), (0, 0));
    }

    #[test]
    fn a_line_gap_is_preferred_to_a_word_gap_and_a_long_gap_to_a_short_one() {
        // At 10 Hz (one sample = 0.1 s): two lines of three 0.5 s words, 0.6 s apart.
        // Gaps inside line 1: 0.4 s then 0.2 s; inside line 2: 0.3 s then 0.2 s.
        let spans = [(0, 5), (9, 14), (16, 21), (27, 32), (35, 40), (42, 47)];
        let inside = [true, true, false, true, true];
        let ranges = |p: &Plan| p.slices.iter().map(|c| c.units.clone()).collect::<Vec<_>>();
        // Longest 3 s: one boundary, at the gap between the lines (slice 4 would fit too).
        let p = plan(&units(&spans, &inside), 50, 10, &spec(0.0, 3.0, 0.0), "x");
        assert_eq!(ranges(&p), [0..3, 3..6]);
        // Longest 1.5 s: each line must be split once, at its longer pause.
        let p = plan(&units(&spans, &inside), 50, 10, &spec(0.0, 1.5, 0.0), "x");
        assert_eq!(ranges(&p), [0..1, 1..3, 3..4, 4..6]);
        assert!(p.left_out.is_empty());
    }

    #[test]
    fn what_cannot_fit_is_left_out_with_its_reason() {
        // At 10 Hz, limits 1..3 s, no pad: a 4 s unit; a 0.5 s unit with 0.2 s of silence
        // on each side, too far from its neighbours to join them; 2.5 s that fits.
        let spans = [(0, 40), (44, 49), (53, 78)];
        let p = plan(
            &units(&spans, &[false, false]),
            78,
            10,
            &spec(1.0, 3.0, 0.0),
            "x",
        );
        assert_eq!(
            p.left_out,
            [
                LeftOut {
                    units: 0..1,
                    reason: Reason::TooLong
                },
                LeftOut {
                    units: 1..2,
                    reason: Reason::TooShort
                }
            ]
        );
        assert_eq!(
            p.slices,
            [PlannedSlice {
                units: 2..3,
                start: 53,
                end: 78
            }]
        );
    }

    #[test]
    fn short_speech_takes_silence_up_to_half_each_gap() {
        // At 10 Hz: units at 0-1 s, 3.0-3.4 s and 5.4-7.4 s of an 8 s recording; the
        // middle one has 1.0 s of half-gap on each side. Pads of 0.1 s.
        let spans = [(0, 10), (30, 34), (54, 74)];
        let bounds = |p: &Plan| {
            p.slices
                .iter()
                .map(|c| (c.start, c.end))
                .collect::<Vec<_>>()
        };
        // Limits 0.5..1.5 s: the drawn pads fit (none before the recording's start); the
        // 2 s unit is too long.
        let p = plan(
            &units(&spans, &[false, false]),
            80,
            10,
            &spec(0.5, 1.5, 0.1),
            "x",
        );
        assert_eq!(bounds(&p), [(0, 11), (29, 35)]);
        assert_eq!(p.left_out.len(), 1);
        assert_eq!(p.left_out[0].reason, Reason::TooLong);
        // Limits 2..2.5 s: the first grows after it to 2 s; the middle one needs 1.6 s of
        // pads, 0.8 s each side; the last keeps its pads (2.2 s).
        let p = plan(
            &units(&spans, &[false, false]),
            80,
            10,
            &spec(2.0, 2.5, 0.1),
            "x",
        );
        assert_eq!(bounds(&p), [(0, 20), (22, 42), (53, 75)]);
        assert!(p.left_out.is_empty());
    }
}
