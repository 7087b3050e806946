//! The `stretch` step: tempo change without pitch change, by WSOLA (Verhelst & Roelands,
//! 1993). Timings are rewritten through the frame-by-frame positions WSOLA actually used,
//! not the nominal factor, so a word keeps its true place where the local rate varied.

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::wsola::{WsolaConfig, stretch_by};
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Slowest and fastest tempo a recipe may draw (half and double).
pub const FACTOR_LIMITS: (f64, f64) = (0.5, 2.0);

/// Tempo change by a drawn factor (above 1 faster and shorter).
#[derive(Debug)]
pub struct Stretch {
    factor: Draw,
}

/// Read the step's keys: `factor` (a draw, required, every value in [0.5, 2]).
///
/// # Errors
/// A missing factor, or one that can be zero, negative or outside the limits.
pub fn parse(
    params: &mut Params<'_>,
    _ctx: &PlanContext<'_>,
) -> Result<Box<dyn Step>, RecipeError> {
    let factor = params.draw_within("factor", None, FACTOR_LIMITS, "")?;
    Ok(Box::new(Stretch { factor }))
}

/// The map of a WSOLA run, from the positions it used.
pub(crate) fn anchors_map(
    step: &'static str,
    anchors: Vec<(f64, f64)>,
) -> Result<TimeMap, StepError> {
    TimeMap::from_knots(anchors).map_err(|e| StepError {
        step,
        reason: format!("the stretch gave an unusable time map: {e}"),
    })
}

/// Why a take cannot go through WSOLA, if it is shorter than one frame.
pub(crate) fn too_short(samples: usize, cfg: &WsolaConfig, rate: u32) -> Option<String> {
    (samples < cfg.frame_len).then(|| {
        format!(
            "take is shorter than one {} ms WSOLA frame",
            cfg.frame_len * 1000 / rate as usize
        )
    })
}

impl Step for Stretch {
    fn name(&self) -> &'static str {
        "stretch"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let factor = self.factor.sample(rng);
        let rate = audio.rate;
        let d = audio.duration();
        let cfg = WsolaConfig::for_rate(rate);
        let mut out = StepOutput::new(audio, TimeMap::identity(d));
        out.drawn.insert("factor".into(), Value::from(factor));
        if let Some(reason) = too_short(out.audio.samples.len(), &cfg, rate) {
            out.skipped = Some(reason);
            return Ok(out);
        }
        let done = stretch_by(&out.audio.samples, rate, &cfg, factor);
        out.map = anchors_map("stretch", done.anchors)?;
        let d_out = done.samples.len() as f64 / f64::from(rate);
        out.measured.insert("duration_s".into(), Value::from(d_out));
        out.measured
            .insert("mean_factor".into(), Value::from(d / d_out));
        out.audio.samples = done.samples;
        Ok(out)
    }
}
