//! Steps: one file per operation behind the [`Step`] trait, found by name in [`REGISTRY`].
//!
//! A step takes the take's audio and its own seeded stream, and returns the new audio, the
//! [`TimeMap`] it applied and the values it drew and measured. Steps never touch labels:
//! the runner composes the maps and rewrites every timing once.
//!
//! To add a step: write `src/steps/<name>.rs` with a struct implementing [`Step`] and a
//! `parse` function reading its keys from [`Params`], then add one row to [`REGISTRY`].

use serde_json::{Map, Value};

use crate::audio::Audio;
use crate::keys::{Params, RecipeError};
use crate::seed::TakeRng;
use crate::timemap::TimeMap;

pub mod channel;
pub mod gain;
pub mod level;
pub mod mask;
pub mod noise;
pub mod pitch;
pub mod resample;
pub mod room;
pub mod speed;
pub mod stretch;
pub mod warp;

/// What a step did to one take.
#[derive(Debug, Clone)]
pub struct StepOutput {
    /// The new audio.
    pub audio: Audio,
    /// Source-to-output time map of this step alone (domain: the input's duration).
    pub map: TimeMap,
    /// Values drawn for this take, by parameter name.
    pub drawn: Map<String, Value>,
    /// Values measured on the result (what was actually achieved), by name.
    pub measured: Map<String, Value>,
    /// Extra signals to write next to the take (name, audio), e.g. the clean and noise
    /// stems of a mix, so anyone can recompute what the step measured.
    pub stems: Vec<(&'static str, Audio)>,
    /// Set when the step left the take unchanged on purpose: the reason, recorded.
    pub skipped: Option<String>,
    /// Stretches of the output, in seconds, whose content the step hid (time masks): the
    /// runner carries them through later steps' maps and records on every word the
    /// fraction of it they cover (`obscured`).
    pub hidden: Vec<(f64, f64)>,
}

impl StepOutput {
    /// A step's result with nothing recorded yet.
    pub fn new(audio: Audio, map: TimeMap) -> Self {
        StepOutput {
            audio,
            map,
            drawn: Map::new(),
            measured: Map::new(),
            stems: Vec::new(),
            skipped: None,
            hidden: Vec::new(),
        }
    }
}

/// A step could not process a take; the clip goes to the rejects with this reason.
#[derive(Debug, Clone, thiserror::Error)]
#[error("{step}: {reason}")]
pub struct StepError {
    /// Step name.
    pub step: &'static str,
    /// What went wrong.
    pub reason: String,
}

/// What a step may know about the take besides its audio.
#[derive(Debug, Clone, Copy, Default)]
pub struct TakeContext<'a> {
    /// The timed lines as `(start, end)` in the take's current timeline (all earlier steps'
    /// maps applied), in seconds; empty for an untimed clip.
    pub lines: &'a [(f64, f64)],
    /// The timed words, likewise; empty when the clip has no word timings.
    pub words: &'a [(f64, f64)],
}

/// Facts about the run that step parsers may need to check their parameters.
#[derive(Debug)]
pub struct PlanContext<'a> {
    /// The output sample rate in Hz; every step receives and returns audio at this rate.
    pub rate: u32,
    /// The recipe's folder: relative paths in a recipe are relative to it.
    pub recipe_dir: &'a std::path::Path,
    /// Noise banks loaded so far by this recipe, so two steps naming one bank share it.
    pub banks: &'a crate::noise::BankCache,
}

/// One operation of a recipe.
pub trait Step: Send + Sync + std::fmt::Debug {
    /// The name used in recipes (`do = "..."`) and in take records.
    fn name(&self) -> &'static str;

    /// Whether the step can hide stretches of time (then every word of every take gets an
    /// `obscured` figure, 0 where nothing was hidden).
    fn hides_time(&self) -> bool {
        false
    }

    /// The files the step read when the recipe was loaded (noise bank files, measured
    /// responses), so a change to any of them makes finished work stale.
    fn inputs(&self) -> Vec<std::path::PathBuf> {
        Vec::new()
    }

    /// Process one take. `audio` is at the plan's rate and so must the result be; it is
    /// never empty when called through [`run_step`].
    ///
    /// # Errors
    /// When the take cannot be processed; the clip is rejected with the reason.
    fn apply(
        &self,
        audio: Audio,
        take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError>;
}

/// Run one step on a take. The one place that refuses an empty take (no time map can
/// describe a take of zero length) or one holding a NaN or infinite sample (no filter,
/// resampler or level can work on it), so steps need not check; and the one place that
/// checks every result (audio and stems) for NaN and infinite samples, so a reject names
/// the step that made them.
///
/// # Errors
/// An empty or non-finite take, the step's own error, or a result (audio or stem) holding
/// a sample that is not finite.
pub fn run_step(
    step: &dyn Step,
    audio: Audio,
    take: &TakeContext<'_>,
    rng: &mut TakeRng,
) -> Result<StepOutput, StepError> {
    let fail = |reason: String| StepError {
        step: step.name(),
        reason,
    };
    if audio.samples.is_empty() {
        return Err(fail("the take is empty".into()));
    }
    if let Some(i) = audio.first_non_finite() {
        return Err(fail(format!(
            "sample {i} of the take is not finite before this step"
        )));
    }
    let out = step.apply(audio, take, rng)?;
    let signals = std::iter::once(("", &out.audio)).chain(out.stems.iter().map(|(n, a)| (*n, a)));
    for (stem, signal) in signals {
        if let Some(i) = signal.first_non_finite() {
            let what = if stem.is_empty() {
                String::from("its result")
            } else {
                format!("its {stem} stem")
            };
            return Err(fail(format!(
                "sample {i} (at {:.4} s) of {what} is not finite ({})",
                i as f64 / f64::from(signal.rate),
                signal.samples[i]
            )));
        }
    }
    Ok(out)
}

/// Reads a step's keys from its `[[step]]` table.
pub type ParseFn = fn(&mut Params<'_>, &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError>;

/// One kind of step a recipe can name: its name, what it does, the keys its table may hold
/// (besides `do` and `chance`), and its parser. The `steps` command, the docs test and the
/// unknown-key messages all read this one table.
#[derive(Debug, Clone, Copy)]
pub struct StepKind {
    /// The value of `do`.
    pub name: &'static str,
    /// One line on what the step does.
    pub summary: &'static str,
    /// Every key the parser reads, in the order the docs list them.
    pub keys: &'static [&'static str],
    /// Reads the step's table.
    pub parse: ParseFn,
}

/// Every step a recipe can name.
pub const REGISTRY: &[StepKind] = &[
    StepKind {
        name: "speed",
        summary: "speed perturbation: tempo and pitch together, timings scaled",
        keys: &["factor"],
        parse: speed::parse,
    },
    StepKind {
        name: "resample",
        summary: "pass through another sample rate and back (band limit)",
        keys: &["via_rate"],
        parse: resample::parse,
    },
    StepKind {
        name: "gain",
        summary: "level change in dB with a peak ceiling",
        keys: &["db", "ceiling_db"],
        parse: gain::parse,
    },
    StepKind {
        name: "noise",
        summary: "site noise from a bank mixed at a drawn SNR",
        keys: &[
            "bank",
            "snr_db",
            "snr_over",
            "weights",
            "held_out",
            "part",
            "crossfade_ms",
            "silent_speech",
            "stems",
        ],
        parse: noise::parse,
    },
    StepKind {
        name: "room",
        summary: "reverberation from a simulated room or measured responses",
        keys: &[
            "irs",
            "width_m",
            "length_m",
            "height_m",
            "absorption",
            "rt60_s",
            "rt60_formula",
            "wall_gap_m",
            "normalise",
            "align",
            "tail",
            "drr_db",
            "max_ir_s",
        ],
        parse: room::parse,
    },
    StepKind {
        name: "mask",
        summary: "frequency and time masks (SpecAugment on the waveform), `obscured` per word",
        keys: &[
            "preset",
            "window",
            "hop",
            "fft",
            "freq_masks",
            "freq_width_hz",
            "freq_width_mel",
            "mel_scale",
            "time_masks",
            "time_width_s",
            "time_cap",
            "fill",
            "ramp_ms",
            "max_obscured",
            "only_gaps",
        ],
        parse: mask::parse,
    },
    StepKind {
        name: "warp",
        summary: "time warp around an anchor, timings exact",
        keys: &["anchor", "shift_s", "max_shift_s", "preset"],
        parse: warp::parse,
    },
    StepKind {
        name: "stretch",
        summary: "tempo change without pitch change (WSOLA)",
        keys: &["factor"],
        parse: stretch::parse,
    },
    StepKind {
        name: "pitch",
        summary: "pitch shift in semitones, timings kept",
        keys: &["semitones"],
        parse: pitch::parse,
    },
    StepKind {
        name: "level",
        summary: "loudness (BS.1770) or peak normalisation",
        keys: &["lufs", "peak_dbfs", "ceiling_db"],
        parse: level::parse,
    },
    StepKind {
        name: "channel",
        summary: "microphone and link: band, tilt, G.711, clipping, bit depth",
        keys: &[
            "band",
            "band_hz",
            "order",
            "tilt_db_per_octave",
            "tilt_pivot_hz",
            "codec",
            "clip",
            "clip_dbfs",
            "bits",
        ],
        parse: channel::parse,
    },
];

/// The registry row for a step name.
pub fn kind(name: &str) -> Option<&'static StepKind> {
    REGISTRY.iter().find(|k| k.name == name)
}

/// All step names, in registry order.
pub fn names() -> Vec<&'static str> {
    REGISTRY.iter().map(|k| k.name).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A step that turns one sample into NaN, as a broken model would.
    #[derive(Debug)]
    struct Broken;

    impl Step for Broken {
        fn name(&self) -> &'static str {
            "broken"
        }

        fn apply(
            &self,
            mut audio: Audio,
            _take: &TakeContext<'_>,
            _rng: &mut TakeRng,
        ) -> Result<StepOutput, StepError> {
            let d = audio.duration();
            audio.samples[3] = f32::NAN;
            Ok(StepOutput::new(audio, TimeMap::identity(d)))
        }
    }

    #[test]
    fn a_non_finite_result_names_the_step_and_the_sample() {
        let audio = Audio {
            rate: 8_000,
            samples: vec![0.25; 10],
        };
        let e = run_step(
            &Broken,
            audio,
            &TakeContext::default(),
            &mut TakeRng::new(1),
        )
        .unwrap_err();
        assert_eq!(e.step, "broken");
        assert!(
            e.reason.contains("sample 3 (at ") && e.reason.contains("of its result is not finite"),
            "{e}"
        );
    }
}
