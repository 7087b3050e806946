//! Property tests for the slice planner on random label sets (lines with words of random
//! lengths and gaps, lines without words, some very long, lines overlapping their
//! predecessors): every slice is within the limits and inside the recording, slices are in
//! order and do not overlap, no slice boundary falls inside a word or a line without words,
//! every label is in exactly one slice or one left-out stretch, and speech is conserved.
//! Everything is checked against the raw label times, not the planner's own units.

use proptest::prelude::*;
use retake::slice::plan::{Limits, PadRange, PlanSpec, Reason, plan};
use retake::slice::units::find_units;
use retake::transcript::{Line, Word};

#[derive(Debug, Clone)]
enum Shape {
    /// (length, gap after) per word; the line starts `lead` before its first word.
    Words { lead: f64, words: Vec<(f64, f64)> },
    /// A line without words, this long.
    Whole(f64),
}

fn arb_shape() -> impl Strategy<Value = Shape> {
    let word_len = prop_oneof![12 => 0.02f64..1.5, 1 => 3.0f64..20.0];
    let words = prop::collection::vec((word_len, 0.0f64..0.5), 1..8);
    let whole = prop_oneof![4 => 0.2f64..4.0, 1 => 10.0f64..25.0];
    prop_oneof![
        3 => (0.0f64..0.3, words).prop_map(|(lead, words)| Shape::Words { lead, words }),
        1 => whole.prop_map(Shape::Whole),
    ]
}

/// Lines in start order; a negative gap makes a line overlap the one before it.
fn build(lead_in: f64, shapes: &[(f64, Shape)], tail: f64) -> (Vec<Line>, f64) {
    let mut lines = Vec::new();
    let (mut cursor, mut prev_start) = (lead_in, 0.0f64);
    for (i, (gap, shape)) in shapes.iter().enumerate() {
        let start = prev_start.max(cursor + gap);
        let line = match shape {
            Shape::Whole(len) => Line {
                start,
                end: start + len,
                text: format!("line {i}"),
                speaker: None,
                words: vec![],
                extra: Default::default(),
            },
            Shape::Words { lead, words } => {
                let mut t = start + lead;
                let ws: Vec<Word> = words
                    .iter()
                    .enumerate()
                    .map(|(k, &(len, gap))| {
                        let w = Word {
                            start: t,
                            end: t + len,
                            text: format!("w{i}.{k}"),
                            extra: Default::default(),
                        };
                        t += len + gap;
                        w
                    })
                    .collect();
                Line {
                    start,
                    end: ws.last().unwrap().end + lead / 2.0,
                    text: format!("line {i}"),
                    speaker: None,
                    words: ws,
                    extra: Default::default(),
                }
            }
        };
        cursor = cursor.max(line.end);
        prev_start = start;
        lines.push(line);
    }
    (lines, cursor + tail)
}

/// Spans no slice may slice: words, and lines without words.
fn labels(lines: &[Line]) -> Vec<(f64, f64)> {
    lines
        .iter()
        .flat_map(|l| {
            if l.words.is_empty() {
                vec![(l.start, l.end)]
            } else {
                l.words.iter().map(|w| (w.start, w.end)).collect()
            }
        })
        .collect()
}

/// Length of the union of spans.
fn union(mut spans: Vec<(f64, f64)>) -> f64 {
    spans.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut total = 0.0;
    let mut cur: Option<(f64, f64)> = None;
    for (a, b) in spans {
        match cur {
            Some((s, e)) if a <= e => cur = Some((s, e.max(b))),
            Some((s, e)) => {
                total += e - s;
                cur = Some((a, b));
            }
            None => cur = Some((a, b)),
        }
    }
    total + cur.map_or(0.0, |(s, e)| e - s)
}

const EPS: f64 = 1e-9;

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn plans_respect_limits_units_and_speech(
        lead_in in 0.0f64..2.0,
        shapes in prop::collection::vec((-1.0f64..3.0, arb_shape()), 0..25),
        tail in 0.0f64..2.0,
        rate in prop::sample::select(vec![8_000u32, 16_000, 44_100]),
        shortest in 0.0f64..6.0,
        extra in 0.1f64..15.0,
        pad_low in 0.0f64..0.5,
        pad_width in 0.0f64..0.5,
        seed in any::<u64>(),
    ) {
        let (lines, duration) = build(lead_in, &shapes, tail);
        let r = f64::from(rate);
        let total = (duration * r).ceil() as u64;
        let longest = shortest + extra;
        let spec = PlanSpec {
            limits: Limits::new(shortest, longest).unwrap(),
            pad: PadRange::new(pad_low, pad_low + pad_width).unwrap(),
            seed,
        };
        let units = find_units(&lines, rate, total);
        let p = plan(&units, total, rate, &spec, "session-7");

        // Limits, to a sample, padding included; inside the recording; in order, apart.
        for c in &p.slices {
            let n = (c.end - c.start) as f64;
            prop_assert!(n >= shortest * r - 1e-6 && n <= longest * r + 1e-6,
                "slice {c:?}: {} s outside {shortest}..{longest}", n / r);
            prop_assert!(c.end <= total);
        }
        for w in p.slices.windows(2) {
            prop_assert!(w[0].end <= w[1].start, "{:?} overlaps {:?}", w[0], w[1]);
        }

        // No boundary inside a word, a line without words, or a line's edge beyond its
        // words (only gaps between words may split a line).
        for c in &p.slices {
            for b in [c.start, c.end] {
                let t = b as f64 / r;
                for (s, e) in labels(&lines) {
                    prop_assert!(!(s + EPS < t && t < e - EPS), "boundary {t} inside {s}..{e}");
                }
                for l in lines.iter().filter(|l| !l.words.is_empty()) {
                    let (w0, wn) = (&l.words[0], &l.words[l.words.len() - 1]);
                    prop_assert!(!(l.start + EPS < t && t < w0.start - EPS));
                    prop_assert!(!(wn.end + EPS < t && t < l.end - EPS));
                }
            }
        }

        // Every label in exactly one slice or one left-out stretch.
        let stretch = |k: usize| {
            let range = &p.left_out[k].units;
            (units.units[range.start].start, units.units[range.end - 1].end)
        };
        let inside = |(s, e): (f64, f64), (a, b): (u64, u64)| {
            s >= a as f64 / r - EPS && e <= b as f64 / r + EPS
        };
        let mut kept = vec![Vec::new(); p.slices.len()];
        let mut left = vec![Vec::new(); p.left_out.len()];
        for span in labels(&lines) {
            let in_slices: Vec<usize> = (0..p.slices.len())
                .filter(|&k| inside(span, (p.slices[k].start, p.slices[k].end)))
                .collect();
            let in_left: Vec<usize> = (0..p.left_out.len())
                .filter(|&k| inside(span, stretch(k)))
                .collect();
            prop_assert_eq!(in_slices.len() + in_left.len(), 1, "label {:?}", span);
            if let Some(&k) = in_slices.first() {
                kept[k].push(span);
            } else {
                left[in_left[0]].push(span);
            }
        }
        // The units too: each index exactly once, slices and stretches in time order.
        let mut seen: Vec<usize> = p.slices.iter().flat_map(|c| c.units.clone())
            .chain(p.left_out.iter().flat_map(|l| l.units.clone()))
            .collect();
        seen.sort_unstable();
        prop_assert_eq!(seen, (0..units.units.len()).collect::<Vec<_>>());

        // Speech in slices + left out = speech in the input.
        let all = union(labels(&lines));
        let parts: f64 = kept.into_iter().chain(left).map(union).sum();
        prop_assert!((all - parts).abs() < 1e-6, "speech {all} s in, {parts} s out");

        // Nothing left out that could have been a slice on its own (the first rule of the
        // plan), and each reason matches the lengths.
        let u = &units.units;
        let (min, max) = spec.limits.in_samples(rate);
        for l in &p.left_out {
            for k in l.units.clone() {
                let before = if k == 0 { u[0].start } else { (u[k].start - u[k - 1].end) / 2 };
                let after = if k + 1 == u.len() { total - u[k].end } else { (u[k + 1].start - u[k].end) / 2 };
                let alone_fits = u[k].len() <= max && u[k].len() + before + after >= min;
                prop_assert!(!alone_fits || u[k].is_empty(), "unit {k} {:?} left out but fits alone", u[k]);
                prop_assert_eq!(l.reason == Reason::TooLong, u[k].len() > max);
            }
        }
    }

    #[test]
    fn a_pad_does_not_depend_on_other_slices(
        shapes in prop::collection::vec((0.3f64..3.0, arb_shape()), 2..12),
        seed in any::<u64>(),
    ) {
        // Two plans of the same labels with different limits: a slice boundary at the same
        // gap, unclamped by limits or room in both, gets the same pad.
        let (lines, duration) = build(1.0, &shapes, 1.0);
        let rate = 16_000;
        let total = (duration * 16_000.0).ceil() as u64;
        let units = find_units(&lines, rate, total);
        let pad = PadRange::new(0.0, 0.1).unwrap();
        let plan_with = |longest: f64| {
            let spec = PlanSpec { limits: Limits::new(0.0, longest).unwrap(), pad, seed };
            plan(&units, total, rate, &spec, "session-7")
        };
        let (a, b) = (plan_with(8.0), plan_with(30.0));
        for ca in &a.slices {
            for cb in b.slices.iter().filter(|cb| cb.units.start == ca.units.start) {
                let (pa, pb) = (units.units[ca.units.start].start - ca.start, units.units[cb.units.start].start - cb.start);
                // Shrinking only happens when speech + pads exceed the longest.
                let roomy = |c: &retake::slice::plan::PlannedSlice, longest: f64| {
                    ((c.end - c.start) as f64) < longest * 16_000.0 - 1.0
                };
                if roomy(ca, 8.0) && roomy(cb, 30.0) {
                    prop_assert_eq!(pa, pb);
                }
            }
        }
    }
}
