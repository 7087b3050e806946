//! The `pitch` step: pitch shift in semitones, durations and timings kept. The take is first
//! made `r` times longer by WSOLA (tempo only), then played `r` times faster by resampling
//! (which shortens it back and raises every frequency by `r`), with `r = 2^(semitones/12)`.
//! The time map is the WSOLA positions composed with the speed change, so timings follow
//! the audio exactly (they move by at most a few milliseconds).

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::resample::speed;
use crate::dsp::wsola::{WsolaConfig, stretch_by};
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::stretch::{anchors_map, too_short};
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// The largest shift a recipe may draw, in semitones either way (an octave).
pub const MAX_SEMITONES: f64 = 12.0;

/// Pitch shift by a drawn number of semitones.
#[derive(Debug)]
pub struct Pitch {
    semitones: Draw,
}

/// Read the step's keys: `semitones` (a draw, required, every value in [-12, 12]).
///
/// # Errors
/// A missing shift, or one outside an octave either way.
pub fn parse(
    params: &mut Params<'_>,
    _ctx: &PlanContext<'_>,
) -> Result<Box<dyn Step>, RecipeError> {
    let semitones = params.draw_within(
        "semitones",
        None,
        (-MAX_SEMITONES, MAX_SEMITONES),
        "semitones",
    )?;
    Ok(Box::new(Pitch { semitones }))
}

impl Step for Pitch {
    fn name(&self) -> &'static str {
        "pitch"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let semitones = self.semitones.sample(rng);
        let ratio = 2f64.powf(semitones / 12.0);
        let rate = audio.rate;
        let d = audio.duration();
        let cfg = WsolaConfig::for_rate(rate);
        let mut out = StepOutput::new(audio, TimeMap::identity(d));
        out.drawn.insert("semitones".into(), Value::from(semitones));
        if semitones == 0.0 {
            return Ok(out);
        }
        if let Some(reason) = too_short(out.audio.samples.len(), &cfg, rate) {
            out.skipped = Some(reason);
            return Ok(out);
        }
        // Tempo slowed by `ratio` (longer), then played `ratio` times faster.
        let longer = stretch_by(&out.audio.samples, rate, &cfg, 1.0 / ratio);
        let stretched = anchors_map("pitch", longer.anchors)?;
        let d_long = longer.samples.len() as f64 / f64::from(rate);
        let samples = speed(&longer.samples, ratio);
        out.map = stretched.then(&TimeMap::linear(d_long, d_long / ratio));
        out.measured.insert("ratio".into(), Value::from(ratio));
        out.measured.insert(
            "duration_s".into(),
            Value::from(samples.len() as f64 / f64::from(rate)),
        );
        out.audio.samples = samples;
        Ok(out)
    }
}
