//! The one streaming pass over a run's manifest: every figure on the page except the
//! gallery's pictures comes from here, in memory that does not grow with the number of
//! takes (histograms of fixed size, seeded bounded samples, capped lists of ids).

use std::collections::{BTreeMap, BinaryHeap};
use std::io::BufRead;

use serde_json::Value;

use super::hist::Hist;
use crate::seed::stable_hash;
use crate::transcript::{Clip, parse_clip, validate};

/// Most ids listed per reason or problem.
pub const FIRST_IDS: usize = 5;
/// Most points kept per drawn-versus-measured scatter (a seeded sample of the takes).
pub const SCATTER_POINTS: usize = 2000;
/// Steps whose record says they moved time (their word-length changes are grouped by them).
pub const TIME_STEPS: &[&str] = &["speed", "stretch", "warp", "pitch"];

/// A drawn value and the measured one that must agree with it, and how closely.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pair {
    /// Step name.
    pub step: &'static str,
    /// Key in `drawn`.
    pub drawn: &'static str,
    /// Key in `measured`.
    pub measured: &'static str,
    /// Allowed difference: absolute (in the value's unit) or relative (a fraction).
    pub tolerance: Tolerance,
    /// Where the tolerance comes from, shown under the plot.
    pub source: &'static str,
}

/// How far a measured value may be from its target.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Tolerance {
    /// `|measured - drawn| <= x`.
    Absolute(f64),
    /// `|measured - drawn| <= x * drawn`.
    Relative(f64),
}

impl Tolerance {
    /// Half-width of the band at `drawn`.
    pub fn half_width(self, drawn: f64) -> f64 {
        match self {
            Tolerance::Absolute(x) => x,
            Tolerance::Relative(x) => x * drawn.abs(),
        }
    }
}

/// The pairs the page plots.
pub const PAIRS: &[Pair] = &[
    Pair {
        step: "noise",
        drawn: "snr_db",
        measured: "snr_db",
        tolerance: Tolerance::Absolute(0.05),
        source: "±0.05 dB: the agreement docs/recipe.md promises for the noise step",
    },
    Pair {
        step: "room",
        drawn: "rt60_s",
        measured: "rt60_s",
        tolerance: Tolerance::Relative(0.10),
        source: "±10 %: the bound docs/recipe.md gives for simulated rooms at the range limits",
    },
    Pair {
        step: "level",
        drawn: "lufs",
        measured: "lufs",
        tolerance: Tolerance::Absolute(0.1),
        source: "±0.1 LU: the bound tests/level_step.rs holds against pyloudnorm (a ceiling can stop a target short)",
    },
];

/// A count with the first few ids it covers.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Tally {
    /// How many.
    pub count: u64,
    /// The first [`FIRST_IDS`] ids, in manifest order.
    pub first: Vec<String>,
}

impl Tally {
    /// Count `id`.
    pub fn add(&mut self, id: &str) {
        self.count += 1;
        if self.first.len() < FIRST_IDS {
            self.first.push(id.to_string());
        }
    }
}

/// A bounded sample chosen by a seeded hash of each item's key: the same items whatever the
/// order they come in (the `n` smallest hashes).
#[derive(Debug, Clone)]
pub struct Sample<T> {
    n: usize,
    heap: BinaryHeap<(u64, String, Keep<T>)>,
}

/// A sampled item (ordered by hash and key only).
#[derive(Debug, Clone)]
struct Keep<T>(T);
impl<T> PartialEq for Keep<T> {
    fn eq(&self, _: &Self) -> bool {
        true
    }
}
impl<T> Eq for Keep<T> {}
impl<T> PartialOrd for Keep<T> {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl<T> Ord for Keep<T> {
    fn cmp(&self, _: &Self) -> std::cmp::Ordering {
        std::cmp::Ordering::Equal
    }
}

impl<T> Sample<T> {
    /// A sample of at most `n` items.
    pub fn new(n: usize) -> Self {
        Sample {
            n,
            heap: BinaryHeap::new(),
        }
    }

    /// Offer an item under its key; `seed` fixes which items win.
    pub fn offer(&mut self, seed: u64, key: &str, make: impl FnOnce() -> T) {
        if self.n == 0 {
            return;
        }
        let h = stable_hash(&[b"report sample", &seed.to_le_bytes(), key.as_bytes()]);
        if self.heap.len() == self.n {
            match self.heap.peek() {
                Some((top, k, _)) if (h, key) < (*top, k.as_str()) => {
                    self.heap.pop();
                }
                _ => return,
            }
        }
        self.heap.push((h, key.to_string(), Keep(make())));
    }

    /// The sampled items, ordered by key.
    pub fn into_sorted(self) -> Vec<(String, T)> {
        let mut v: Vec<(String, T)> = self.heap.into_iter().map(|(_, k, t)| (k, t.0)).collect();
        v.sort_by(|a, b| a.0.cmp(&b.0));
        v
    }

    /// Items held.
    pub fn len(&self) -> usize {
        self.heap.len()
    }

    /// Nothing held.
    pub fn is_empty(&self) -> bool {
        self.heap.is_empty()
    }
}

/// Figures of one recipe step over all takes.
#[derive(Debug, Clone, Default)]
pub struct StepStats {
    /// The step's name (from the first take that lists it).
    pub name: String,
    /// Takes that list the step.
    pub listed: u64,
    /// Takes it ran in.
    pub ran: u64,
    /// Histograms of numeric values, keyed `drawn.KEY` or `measured.KEY` (a list of
    /// `[a, b]` spans gives `KEY width`, the span lengths).
    pub values: BTreeMap<String, Hist>,
    /// Counts of text and yes/no values, keyed like `values`, then by value.
    pub labels: BTreeMap<String, BTreeMap<String, u64>>,
    /// Why the step was due but left the take alone (`note`), with the takes.
    pub notes: BTreeMap<String, Tally>,
}

/// Drawn against measured for one [`Pair`].
#[derive(Debug, Clone)]
pub struct PairStats {
    /// Which pair.
    pub pair: Pair,
    /// Takes with both values.
    pub count: u64,
    /// Of those, inside the tolerance.
    pub inside: u64,
    /// Takes outside, first ids.
    pub outside: Tally,
    /// A seeded sample of (drawn, measured) points.
    pub points: Sample<(f64, f64)>,
}

/// A take picked for the gallery (its manifest record) and why.
#[derive(Debug, Clone)]
pub struct Picked {
    /// The take's record.
    pub clip: Clip,
    /// Asked for by id (else drawn by the seeded sample).
    pub asked: bool,
}

/// Everything the streaming pass found.
#[derive(Debug)]
pub struct Aggregates {
    /// Manifest lines read.
    pub lines: u64,
    /// Lines that did not parse as a take: (line, message), first few.
    pub unreadable: Tally,
    /// Takes.
    pub takes: u64,
    /// Source clips with takes (those with a take 0).
    pub clips: u64,
    /// Seconds of source audio (the source end of each take 0's time map).
    pub seconds_in: f64,
    /// Seconds of take audio.
    pub seconds_out: f64,
    /// Per recipe step, in order.
    pub steps: Vec<StepStats>,
    /// Drawn against measured.
    pub pairs: Vec<PairStats>,
    /// Takes whose every timing is valid.
    pub valid_takes: u64,
    /// Problems in takes whose timings are not, by field kind and message.
    pub invalid: BTreeMap<String, Tally>,
    /// Words in all takes.
    pub words: u64,
    /// Lines in all takes.
    pub lines_timed: u64,
    /// `obscured` of every word with some of it hidden.
    pub obscured: Hist,
    /// Words that lost more than a quarter.
    pub obscured_quarter: Tally,
    /// Words that lost more than half.
    pub obscured_half: Tally,
    /// Percent change of word length (take against source, through the time map), by the
    /// time-moving steps that ran (`none` when none did).
    pub word_change: BTreeMap<String, Hist>,
    /// Words flagged, by why (shrunk to no length, no single source time).
    pub flagged_words: BTreeMap<String, Tally>,
    /// The seeded gallery sample (takes other than take 0, or any when there are only 0s).
    pub sample: Sample<Clip>,
    /// Takes asked for by id.
    pub asked: Vec<Clip>,
}

/// What the pass is asked to keep.
#[derive(Debug, Clone)]
pub struct GatherSpec<'a> {
    /// Seed of the gallery and scatter samples.
    pub seed: u64,
    /// Takes drawn for the gallery.
    pub sample: usize,
    /// Take ids or source ids asked for by name.
    pub show: &'a [String],
    /// Most takes shown for the ids asked for.
    pub show_limit: usize,
}

impl Aggregates {
    fn new(spec: &GatherSpec<'_>) -> Self {
        Aggregates {
            lines: 0,
            unreadable: Tally::default(),
            takes: 0,
            clips: 0,
            seconds_in: 0.0,
            seconds_out: 0.0,
            steps: Vec::new(),
            pairs: PAIRS
                .iter()
                .map(|&pair| PairStats {
                    pair,
                    count: 0,
                    inside: 0,
                    outside: Tally::default(),
                    points: Sample::new(SCATTER_POINTS),
                })
                .collect(),
            valid_takes: 0,
            invalid: BTreeMap::new(),
            words: 0,
            lines_timed: 0,
            obscured: Hist::default(),
            obscured_quarter: Tally::default(),
            obscured_half: Tally::default(),
            word_change: BTreeMap::new(),
            flagged_words: BTreeMap::new(),
            sample: Sample::new(spec.sample),
            asked: Vec::new(),
        }
    }
}

/// Read a manifest line by line and gather every figure.
///
/// # Errors
/// Reading the file.
pub fn gather(reader: impl BufRead, spec: &GatherSpec<'_>) -> std::io::Result<Aggregates> {
    let mut agg = Aggregates::new(spec);
    let mut first_take0_only = true;
    let mut zeros: Sample<Clip> = Sample::new(spec.sample);
    for (i, line) in reader.lines().enumerate() {
        let line = line?;
        agg.lines += 1;
        let text = if i == 0 {
            line.trim_start_matches('\u{feff}')
        } else {
            &line
        };
        let clip = match parse_clip(text) {
            Ok(c) if c.origin.is_some() => c,
            Ok(c) => {
                agg.unreadable
                    .add(&format!("line {}: {} has no origin", i + 1, c.id));
                continue;
            }
            Err((field, msg)) => {
                agg.unreadable
                    .add(&format!("line {}: {field} {msg}", i + 1));
                continue;
            }
        };
        take_in(&mut agg, &clip, spec.seed);
        let take = clip.origin.as_ref().map_or(0, |o| o.take);
        let source = clip.origin.as_ref().map_or("", |o| o.source.as_str());
        if spec.show.iter().any(|s| *s == clip.id || *s == source)
            && agg.asked.len() < spec.show_limit
        {
            agg.asked.push(clip.clone());
        }
        if take > 0 {
            first_take0_only = false;
            agg.sample.offer(spec.seed, &clip.id, || clip.clone());
        } else if first_take0_only {
            zeros.offer(spec.seed, &clip.id, || clip.clone());
        }
    }
    if first_take0_only {
        agg.sample = zeros;
    }
    Ok(agg)
}

fn take_in(agg: &mut Aggregates, clip: &Clip, seed: u64) {
    let Some(origin) = &clip.origin else { return };
    agg.takes += 1;
    let duration = clip.duration.unwrap_or(origin.time_map.range().1);
    agg.seconds_out += duration;
    if origin.take == 0 {
        agg.clips += 1;
        agg.seconds_in += origin.time_map.domain().1 - origin.time_map.domain().0;
    }
    for (i, rec) in origin.steps.iter().enumerate() {
        if agg.steps.len() <= i {
            agg.steps.resize_with(i + 1, StepStats::default);
        }
        let st = &mut agg.steps[i];
        if st.name.is_empty() {
            st.name = rec.step.clone();
        }
        st.listed += 1;
        if let Some(note) = &rec.note {
            st.notes.entry(note.clone()).or_default().add(&clip.id);
        }
        if !rec.ran {
            continue;
        }
        st.ran += 1;
        for (part, map) in [("drawn", &rec.drawn), ("measured", &rec.measured)] {
            for (k, v) in map {
                value_in(st, &format!("{part}.{k}"), v);
            }
        }
        for p in agg.pairs.iter_mut().filter(|p| p.pair.step == rec.step) {
            let d = rec.drawn.get(p.pair.drawn).and_then(Value::as_f64);
            let m = rec.measured.get(p.pair.measured).and_then(Value::as_f64);
            if let (Some(d), Some(m)) = (d, m) {
                p.count += 1;
                if (m - d).abs() <= p.pair.tolerance.half_width(d) {
                    p.inside += 1;
                } else {
                    p.outside.add(&clip.id);
                }
                p.points.offer(seed, &clip.id, || (d, m));
            }
        }
    }
    labels_in(agg, clip, origin, duration);
}

fn value_in(st: &mut StepStats, key: &str, v: &Value) {
    match v {
        Value::Number(n) => {
            if let Some(x) = n.as_f64() {
                st.values.entry(key.to_string()).or_default().add(x);
            }
        }
        Value::String(s) => label_in(st, key, s),
        Value::Bool(b) => label_in(st, key, if *b { "yes" } else { "no" }),
        Value::Array(items) => {
            for item in items {
                if let Some([a, b]) = item.as_array().map(Vec::as_slice)
                    && let (Some(a), Some(b)) = (a.as_f64(), b.as_f64())
                {
                    st.values
                        .entry(format!("{key} width"))
                        .or_default()
                        .add(b - a);
                }
            }
        }
        _ => {}
    }
}

/// Text values: counted per value, the rarer ones past a dozen together as "other".
fn label_in(st: &mut StepStats, key: &str, s: &str) {
    let counts = st.labels.entry(key.to_string()).or_default();
    if counts.contains_key(s) || counts.len() < 12 {
        *counts.entry(s.to_string()).or_default() += 1;
    } else {
        *counts.entry("(other)".to_string()).or_default() += 1;
    }
}

fn labels_in(agg: &mut Aggregates, clip: &Clip, origin: &crate::transcript::Origin, d: f64) {
    let problems = validate(clip, Some(d));
    if problems.is_empty() {
        agg.valid_takes += 1;
    } else {
        for (field, msg) in problems {
            agg.invalid
                .entry(format!("{}: {msg}", field_kind(&field)))
                .or_default()
                .add(&clip.id);
        }
    }
    let moved: Vec<&str> = origin
        .steps
        .iter()
        .filter(|s| s.ran && TIME_STEPS.contains(&s.step.as_str()))
        .map(|s| s.step.as_str())
        .collect();
    let group = if moved.is_empty() {
        "none".to_string()
    } else {
        moved.join(" + ")
    };
    let knots = origin.time_map.knots();
    for line in clip.lines.iter().flatten() {
        agg.lines_timed += 1;
        for w in &line.words {
            agg.words += 1;
            let obscured = w
                .extra
                .get("obscured")
                .and_then(Value::as_f64)
                .unwrap_or(0.0);
            if obscured > 0.0 {
                agg.obscured.add(obscured);
            }
            if obscured > 0.25 {
                agg.obscured_quarter.add(&clip.id);
            }
            if obscured > 0.5 {
                agg.obscured_half.add(&clip.id);
            }
            if w.end <= w.start {
                agg.flagged_words
                    .entry("shrunk to no length (clamped at the take's end)".into())
                    .or_default()
                    .add(&clip.id);
                continue;
            }
            let source_len = source_time(knots, w.end) - source_time(knots, w.start);
            if source_len <= 0.0 {
                agg.flagged_words
                    .entry("no source length (the word lies where the time map is flat)".into())
                    .or_default()
                    .add(&clip.id);
            } else {
                // Rounded to 1e-9 %: far below anything shown, and it makes a 1-ulp
                // difference in how a reader computes the same change land in the same bin
                // (a word left alone reads exactly 0, not ±1e-14).
                let change = ((w.end - w.start) / source_len - 1.0) * 100.0;
                let change = (change * 1e9).round() / 1e9;
                agg.word_change
                    .entry(group.clone())
                    .or_default()
                    .add(change);
            }
        }
    }
}

/// The source time a take time `y` came from: on the first rising piece of the map that
/// reaches `y` (a flat piece, such as the last sample lost to rounding a rate, has no single
/// source time, so it is passed over); before or past the map, its end.
pub fn source_time(knots: &[(f64, f64)], y: f64) -> f64 {
    for pair in knots.windows(2) {
        let ((x0, y0), (x1, y1)) = (pair[0], pair[1]);
        if y1 > y0 && y >= y0 && y <= y1 {
            return x0 + (y - y0) / (y1 - y0) * (x1 - x0);
        }
    }
    match knots.first() {
        Some(&(x, y0)) if y < y0 => x,
        _ => knots.last().map_or(0.0, |k| k.0),
    }
}

/// `lines[3].words[0].end` → `lines[].words[].end`: problems of one kind group together.
fn field_kind(field: &str) -> String {
    let mut out = String::with_capacity(field.len());
    let mut in_index = false;
    for c in field.chars() {
        match c {
            '[' => {
                in_index = true;
                out.push('[');
            }
            ']' => {
                in_index = false;
                out.push(']');
            }
            _ if in_index => {}
            _ => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_sample_does_not_depend_on_order() {
        let ids: Vec<String> = (0..200).map(|i| format!("c{i}")).collect();
        let mut a = Sample::new(7);
        let mut b = Sample::new(7);
        for id in &ids {
            a.offer(3, id, || ());
        }
        for id in ids.iter().rev() {
            b.offer(3, id, || ());
        }
        let ka: Vec<String> = a.into_sorted().into_iter().map(|x| x.0).collect();
        let kb: Vec<String> = b.into_sorted().into_iter().map(|x| x.0).collect();
        assert_eq!(ka.len(), 7);
        assert_eq!(ka, kb);
    }

    #[test]
    fn source_times_pass_over_a_flat_end() {
        let k = [(0.0, 0.0), (8.29, 9.21), (8.3, 9.21)];
        assert!((source_time(&k, 9.21 / 2.0) - 4.145).abs() < 1e-12);
        assert_eq!(source_time(&k, 9.21), 8.29);
        assert_eq!(source_time(&k, 10.0), 8.3);
        assert_eq!(source_time(&k, -1.0), 0.0);
    }

    #[test]
    fn field_kinds_drop_indices() {
        assert_eq!(field_kind("lines[3].words[10].end"), "lines[].words[].end");
    }
}
