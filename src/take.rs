//! The one pure function that makes take k of a clip: audio and labels in, take audio,
//! rewritten labels and origin out, nothing written. The batch engine ([`crate::run`]) calls
//! it for every take, so an embedder calling it gets exactly what `retake run` writes.

use serde_json::Value;

use std::path::Path;

use crate::audio::{self, Audio, SampleFormat};
use crate::dsp::resample::resample;
use crate::recipe::Plan;
use crate::run::TAKES_DIR;
use crate::seed::{TakeRng, step_seed, take_seed};
use crate::steps::{TakeContext, run_step};
use crate::timemap::TimeMap;
use crate::transcript::{self, Clip, Origin, StepRecord, mark_obscured, remap_lines};

/// One take of a clip, made in memory: nothing is written.
#[derive(Debug, Clone)]
pub struct Take {
    /// The take's audio at the plan's rate.
    pub audio: Audio,
    /// The clip with its labels rewritten through the take's time map, `duration`, `text`
    /// and `origin` set; `id` and `audio` are still the source clip's.
    pub clip: Clip,
    /// Extra signals a step asked for: (path relative to an output folder, audio).
    pub stems: Vec<(String, Audio)>,
}

/// Where take `k` of the clip whose file stem is `stem` is written inside an output folder,
/// its extension from the output-format table.
pub fn take_file(stem: &str, k: u32, format: SampleFormat) -> String {
    format!("{TAKES_DIR}/{stem}.t{k}.{}", format.extension())
}

impl Take {
    /// The take's manifest line as `retake run` writes it: id `<clip id>.t<k>`, audio at
    /// [`take_file`], its duration, labels and origin.
    pub fn record(&self, k: u32, stem: &str, format: SampleFormat) -> Clip {
        Clip {
            id: format!("{}.t{k}", self.clip.id),
            audio: take_file(stem, k, format),
            duration: Some(self.audio.duration()),
            ..self.clip.clone()
        }
    }
}

/// What kind of problem stopped a clip: its labels, its audio, a step, or the finished take.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ClipErrorKind {
    /// A label is invalid, or does not fit the audio.
    Labels,
    /// The audio cannot be decoded, or holds nothing a step can work on.
    Audio,
    /// A step failed or made a non-finite sample.
    Step,
    /// The finished take is unusable (non-finite, or its rewritten labels invalid).
    Take,
}

/// Why no take (or no further take) of a clip can be made, in the user's terms: the one
/// per-clip error of the library. The batch engine turns it into a line of `rejects.jsonl`,
/// the Python package into a `ClipError` exception.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{}{reason}", if field.is_empty() { String::new() } else { format!("{field}: ") })]
pub struct ClipError {
    /// What kind of problem it is.
    pub kind: ClipErrorKind,
    /// The field at fault, such as `lines[0].end`, `audio`, or a step (`step 2 (room)`), or
    /// empty when the whole clip is.
    pub field: String,
    /// What went wrong.
    pub reason: String,
}

fn fail(kind: ClipErrorKind, field: impl Into<String>, reason: String) -> ClipError {
    ClipError {
        kind,
        field: field.into(),
        reason,
    }
}

/// A clip's source as every take of it starts: decoded, checked, at the plan's rate.
#[derive(Debug, Clone)]
pub struct Source {
    /// The source at the plan's rate (see [`at_plan_rate`]).
    pub base: Audio,
    /// The rate it was recorded at, which `origin` records.
    pub rate: u32,
    /// Its length in seconds before resampling.
    pub seconds: f64,
}

/// Decode `path` as the plan says (its channel policy), refuse what no step can work on
/// (empty, non-finite, see [`crate::audio::usable`]), check the clip's labels against the
/// audio's length and bring it to the plan's rate. The batch engine and embedders both start
/// every take here, so the same file gives the same takes.
///
/// # Errors
/// Undecodable or unusable audio (field `audio`) or a label that does not fit it.
pub fn load_source(plan: &Plan, clip: &Clip, path: &Path) -> Result<Source, ClipError> {
    check_labels(clip, None)?;
    let source = audio::decode(path, plan.channels)
        .map_err(|e| fail(ClipErrorKind::Audio, "audio", e.to_string()))?;
    source_of(plan, clip, source, path)
}

/// [`load_source`] for audio already in memory (an embedder's array): the same checks, with
/// `name` standing for the file in messages.
///
/// # Errors
/// As [`load_source`].
pub fn source_of(
    plan: &Plan,
    clip: &Clip,
    source: Audio,
    name: &Path,
) -> Result<Source, ClipError> {
    audio::usable(name, &audio::Scan::of(&source), Some(plan.rate))
        .map_err(|e| fail(ClipErrorKind::Audio, "audio", e.to_string()))?;
    check_labels(clip, Some(source.duration()))?;
    Ok(Source {
        seconds: source.duration(),
        rate: source.rate,
        base: at_plan_rate(source, plan),
    })
}

/// The clip's labels, valid and (given a length) inside the audio.
fn check_labels(clip: &Clip, duration: Option<f64>) -> Result<(), ClipError> {
    match transcript::validate(clip, duration).into_iter().next() {
        Some((field, reason)) => Err(fail(ClipErrorKind::Labels, field, reason)),
        None => Ok(()),
    }
}

/// A decoded source brought to the plan's rate, as every take starts from it.
pub fn at_plan_rate(source: Audio, plan: &Plan) -> Audio {
    if source.rate == plan.rate {
        source
    } else {
        Audio {
            rate: plan.rate,
            samples: resample(&source.samples, source.rate, plan.rate),
        }
    }
}

/// Take `k` of `clip`: run the plan's steps on `base` (the source at the plan's rate, see
/// [`at_plan_rate`]) with the take's own seeded streams, compose their time maps and rewrite
/// the labels once. Pure: the same arguments give the same take, whoever calls it (the
/// batch engine, an embedder). `source_rate` is recorded in `origin`; `stem` (see
/// [`crate::files::file_stem`]) names stem files.
///
/// # Errors
/// A step that fails or makes a non-finite sample, or a rewritten label that is invalid.
pub fn make_take(
    plan: &Plan,
    clip: &Clip,
    base: &Audio,
    k: u32,
    source_rate: u32,
    stem: &str,
) -> Result<Take, ClipError> {
    let seed = take_seed(plan.seed, &clip.id, k);
    let mut audio = base.clone();
    let mut map = TimeMap::identity(base.duration());
    let mut records = Vec::with_capacity(plan.steps.len());
    let untouched = plan.keep_source && k == 0;
    let source_lines: Vec<(f64, f64)> = clip
        .lines
        .iter()
        .flatten()
        .map(|l| (l.start, l.end))
        .collect();
    let source_words: Vec<(f64, f64)> = clip
        .lines
        .iter()
        .flatten()
        .flat_map(|l| l.words.iter().map(|w| (w.start, w.end)))
        .collect();
    let (mut lines_now, mut words_now) = (source_lines.clone(), source_words.clone());
    // Stretches hidden by masking steps, in the take's current timeline.
    let mut hidden: Vec<(f64, f64)> = Vec::new();
    let mut stems = Vec::new();
    for (i, planned) in plan.steps.iter().enumerate() {
        let mut rng = TakeRng::new(step_seed(seed, i));
        let mut record = StepRecord {
            step: planned.step.name().to_string(),
            ran: false,
            drawn: Default::default(),
            measured: Default::default(),
            note: None,
            stems: Default::default(),
        };
        if !untouched && rng.chance(planned.chance) {
            let take = TakeContext {
                lines: &lines_now,
                words: &words_now,
            };
            let done = run_step(planned.step.as_ref(), audio, &take, &mut rng).map_err(|e| {
                fail(
                    ClipErrorKind::Step,
                    format!("step {} ({})", i + 1, e.step),
                    e.reason,
                )
            })?;
            audio = done.audio;
            map = map.then(&done.map);
            let end = audio.duration();
            let now = |spans: &[(f64, f64)]| -> Vec<(f64, f64)> {
                spans
                    .iter()
                    .map(|&(a, b)| (map.apply_within(a, end), map.apply_within(b, end)))
                    .collect()
            };
            lines_now = now(&source_lines);
            words_now = now(&source_words);
            hidden = hidden
                .iter()
                .map(|&(a, b)| done.map.apply_span(a, b))
                .chain(done.hidden.iter().copied())
                .collect();
            record.ran = done.skipped.is_none();
            record.note = done.skipped;
            record.drawn = done.drawn;
            record.measured = done.measured;
            for (name, signal) in done.stems {
                let ext = crate::audio::STEM_FORMAT.extension();
                let rel = format!("{TAKES_DIR}/{stem}.t{k}.s{}-{name}.{ext}", i + 1);
                record
                    .stems
                    .insert(name.to_string(), Value::from(rel.clone()));
                stems.push((rel, signal));
            }
        }
        records.push(record);
    }
    if let Some(i) = audio.first_non_finite() {
        return Err(fail(
            ClipErrorKind::Take,
            "",
            format!("take {k}: sample {i} is not finite after the steps"),
        ));
    }
    let duration = audio.duration();
    let masks = plan.steps.iter().any(|p| p.step.hides_time());
    let lines = clip.lines.as_ref().map(|lines| {
        let mut lines = remap_lines(lines, &map, duration);
        if masks {
            mark_obscured(&mut lines, &hidden);
        }
        lines
    });
    let mut out = Clip {
        lines,
        origin: Some(Origin {
            source: clip.id.clone(),
            take: k,
            seed,
            source_rate,
            steps: records,
            time_map: map,
        }),
        ..clip.clone()
    };
    out.duration = Some(duration);
    out.derive_text();
    if let Some((field, reason)) = transcript::validate(&out, Some(duration))
        .into_iter()
        .next()
    {
        return Err(fail(
            ClipErrorKind::Take,
            field,
            format!("take {k}: rewritten label is invalid: {reason}"),
        ));
    }
    Ok(Take {
        audio,
        clip: out,
        stems,
    })
}
