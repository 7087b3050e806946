//! One source clip through `slice`: check, measure its length, plan, then decode front to back
//! while slicing and writing, so memory holds about one slice of audio at a time.

use super::labels::lines_of;
use super::plan::{LeftOut, PlannedSlice, Reason, plan};
use super::units::{Units, find_units};
use super::window::{Window, frame_count};
use super::{LeftOutRecord, SLICES_DIR, SliceSpec};
use crate::audio::Audio;
use crate::files::file_stem;
use crate::files::write_audio_atomically;
use crate::run::{Failure, Reject, write_failure};
use crate::seed::take_seed;
use crate::timemap::TimeMap;
use crate::transcript::{Clip, Entry, Origin, StepRecord, validate};
use std::path::Path;

/// What one source clip gave.
#[derive(Debug, Default)]
pub(crate) struct ClipOutcome {
    /// Output manifest records, in order.
    pub slices: Vec<Clip>,
    /// Stretches that could not be sliced within the limits.
    pub left_out: Vec<LeftOutRecord>,
    /// Seconds of audio written.
    pub seconds_out: f64,
    /// Seconds of speech inside the slices (an untimed clip counts whole).
    pub speech_kept: f64,
    /// Seconds of speech left out.
    pub speech_left_out: f64,
}

/// Slice one clip; a clip that cannot be processed is a reject, and none of its slices remain;
/// a write the file system refuses stops the whole run.
pub(super) fn slice_clip(
    spec: &SliceSpec<'_>,
    base: &Path,
    entry: &Entry,
) -> Result<ClipOutcome, Failure> {
    let clip = &entry.clip;
    let reject = |field: &str, reason: String| {
        Failure::Reject(Reject::of_clip(
            spec.input, entry.line, &clip.id, field, reason,
        ))
    };
    if let Some((field, reason)) = validate(clip, None).into_iter().next() {
        return Err(reject(&field, reason));
    }
    let path = base.join(&clip.audio);
    let audio_err = |e: crate::audio::AudioError| reject("audio", e.to_string());
    let (total, sample_rate) = frame_count(&path, spec.channels).map_err(audio_err)?;
    if total == 0 {
        return Err(reject("audio", format!("{}: no samples", path.display())));
    }
    let seconds = total as f64 / f64::from(sample_rate);
    if let Some((field, reason)) = validate(clip, Some(seconds)).into_iter().next() {
        return Err(reject(&field, reason));
    }

    let rate = f64::from(sample_rate);
    let mut outcome = ClipOutcome::default();
    let (slices, units) = match &clip.lines {
        Some(lines) => {
            let units = find_units(lines, sample_rate, total);
            let p = plan(&units, total, sample_rate, &spec.plan(), &clip.id);
            for l in &p.left_out {
                let record = left_out_record(spec, entry, &units, l, rate);
                outcome.speech_left_out += record.1;
                outcome.left_out.push(record.0);
            }
            (p.slices, Some(units))
        }
        None => match untimed(spec, entry, total, sample_rate) {
            Ok(whole) => (vec![whole], None),
            Err(left) => {
                outcome.speech_left_out += left.end;
                outcome.left_out.push(left);
                (Vec::new(), None)
            }
        },
    };

    let stem = file_stem(&clip.id);
    let mut written = Vec::new();
    let mut window = Window::open(&path, spec.channels).map_err(audio_err)?;
    let result = slices.iter().enumerate().try_for_each(|(k, c)| {
        let rel = slice_file(&stem, k, spec.format);
        let at = SliceAt {
            k,
            rel: &rel,
            rate,
            total,
            seed: spec.seed,
        };
        let record = slice_record(clip, units.as_ref(), c, &at);
        if let Some((field, reason)) = validate(&record, record.duration).into_iter().next() {
            return Err(reject(
                &field,
                format!("slice {k}: label would be invalid: {reason}"),
            ));
        }
        let signal = Audio {
            rate: sample_rate,
            samples: window
                .take(c.start, c.end)
                .map_err(|e| reject("audio", e))?,
        };
        let dest = write_audio_atomically(spec.out, &rel, &signal, spec.format)
            .map_err(|e| write_failure(e, |m| reject("", m)))?;
        written.push(dest);
        outcome.seconds_out += signal.duration();
        outcome.speech_kept += match &units {
            Some(u) => {
                u.units[c.units.clone()]
                    .iter()
                    .map(|u| u.len())
                    .sum::<u64>() as f64
                    / rate
            }
            None => signal.duration(),
        };
        outcome.slices.push(record);
        Ok(())
    });
    // The whole file is read even after the last slice, so a recording shorter than its
    // header says is a reject, as `run` would make it.
    let result = result.and_then(|()| window.finish().map_err(|e| reject("audio", e)));
    if let Err(r) = result {
        for f in written {
            let _ = std::fs::remove_file(f);
        }
        return Err(r);
    }
    Ok(outcome)
}

/// Where slice `k` of the clip with file stem `stem` is written, relative to the output
/// folder; the extension comes from the output-format table.
pub fn slice_file(stem: &str, k: usize, format: crate::audio::SampleFormat) -> String {
    format!("{SLICES_DIR}/{stem}.c{k}.{}", format.extension())
}

/// Where slice `k` goes and what it is cut from.
struct SliceAt<'a> {
    k: usize,
    rel: &'a str,
    rate: f64,
    /// Frames in the whole source.
    total: u64,
    /// The slicing run's seed.
    seed: u64,
}

/// The manifest record of slice `k`: labels on the slice's timeline, the source's extra
/// fields, where in the source it was taken from, and an `origin` with the time map from the
/// source onto the slice, as every take has, so `remap` carries other annotations of the
/// source onto slices too.
fn slice_record(clip: &Clip, units: Option<&Units>, c: &PlannedSlice, at: &SliceAt<'_>) -> Clip {
    let (k, rel, rate) = (at.k, at.rel, at.rate);
    let (start, end) = (c.start as f64 / rate, c.end as f64 / rate);
    let duration = (c.end - c.start) as f64 / rate;
    let lines = match (&clip.lines, units) {
        (Some(lines), Some(u)) => Some(lines_of(lines, &u.units[c.units.clone()], start, duration)),
        _ => None,
    };
    let mut extra = clip.extra.clone();
    extra.insert(
        "slice".into(),
        serde_json::json!({
            "source": clip.id,
            "audio": clip.audio,
            "start": start,
            "end": end,
        }),
    );
    let mut record = Clip {
        id: format!("{}.c{k}", clip.id),
        audio: rel.to_string(),
        text: clip.text.clone(),
        lines,
        duration: Some(duration),
        origin: Some(Origin {
            source: clip.id.clone(),
            take: k as u32,
            seed: take_seed(at.seed, &clip.id, k as u32),
            source_rate: rate as u32,
            steps: vec![StepRecord {
                step: "slice".into(),
                ran: true,
                drawn: [("start", start), ("end", end)]
                    .into_iter()
                    .map(|(name, v)| (name.to_string(), serde_json::Value::from(v)))
                    .collect(),
                measured: Default::default(),
                note: None,
                stems: Default::default(),
            }],
            time_map: slice_map(start, duration, at.total as f64 / rate),
        }),
        extra,
    };
    record.derive_text();
    record
}

/// Source time onto the slice that starts at `start` and lasts `duration`: the slice's
/// stretch moves to 0, time before it holds at 0 and time after it at the slice's end.
/// The domain is the whole source, as for any take.
fn slice_map(start: f64, duration: f64, source_end: f64) -> TimeMap {
    let end = start + duration;
    let mut knots = vec![(0.0, 0.0)];
    if start > 0.0 {
        knots.push((start, 0.0));
    }
    knots.push((end, duration));
    if source_end > end {
        knots.push((source_end, duration));
    }
    TimeMap::from_knots(knots).expect("a slice lies inside its source and is not empty")
}

/// A left-out stretch as reported, and its seconds of speech.
fn left_out_record(
    spec: &SliceSpec<'_>,
    entry: &Entry,
    units: &Units,
    l: &LeftOut,
    rate: f64,
) -> (LeftOutRecord, f64) {
    let clip = &entry.clip;
    let lines = lines_of(
        clip.lines.as_deref().unwrap_or_default(),
        &units.units[l.units.clone()],
        0.0,
        f64::INFINITY,
    );
    let speech = units.units[l.units.clone()]
        .iter()
        .map(|u| u.len())
        .sum::<u64>() as f64
        / rate;
    let detail = match l.reason {
        Reason::TooLong => format!(
            "{speech:.3} s of speech with no gap of silence is longer than the longest slice ({} s)",
            spec.limits.longest
        ),
        Reason::TooShort => format!(
            "{speech:.3} s of speech cannot reach the shortest slice ({} s) with the silence \
             around it, nor join a neighbour within the longest ({} s)",
            spec.limits.shortest, spec.limits.longest
        ),
    };
    let record = LeftOutRecord {
        source: clip.id.clone(),
        line: entry.line,
        start: lines.iter().map(|l| l.start).fold(f64::INFINITY, f64::min),
        end: lines
            .iter()
            .map(|l| l.end)
            .fold(f64::NEG_INFINITY, f64::max),
        text: lines
            .iter()
            .map(|l| l.text.as_str())
            .collect::<Vec<_>>()
            .join(" "),
        reason: l.reason,
        detail,
    };
    (record, speech)
}

/// A clip without timings: one whole slice when its length is within the limits, else the
/// whole clip left out.
fn untimed(
    spec: &SliceSpec<'_>,
    entry: &Entry,
    total: u64,
    rate: u32,
) -> Result<PlannedSlice, LeftOutRecord> {
    let (min, max) = spec.limits.in_samples(rate);
    if (min..=max).contains(&total) {
        return Ok(PlannedSlice {
            units: 0..0,
            start: 0,
            end: total,
        });
    }
    let seconds = total as f64 / f64::from(rate);
    let reason = if total > max {
        Reason::TooLong
    } else {
        Reason::TooShort
    };
    let detail = match reason {
        Reason::TooLong => format!(
            "untimed clip of {seconds:.3} s is longer than the longest slice ({} s) and has no \
             timings to slice at",
            spec.limits.longest
        ),
        Reason::TooShort => format!(
            "untimed clip of {seconds:.3} s is shorter than the shortest slice ({} s)",
            spec.limits.shortest
        ),
    };
    Err(LeftOutRecord {
        source: entry.clip.id.clone(),
        line: entry.line,
        start: 0.0,
        end: seconds,
        text: entry.clip.text.clone().unwrap_or_default(),
        reason,
        detail,
    })
}
