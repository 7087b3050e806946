//! The `level` step: normalise a take to a drawn loudness (ITU-R BS.1770-4 integrated
//! loudness, K-weighted and gated) or to a drawn peak level, never past a ceiling. Plain
//! gain draws are the `gain` step. Timings do not move.

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::level::{amplitude_db, db_to_amplitude, peak, scale_under};
use crate::dsp::loudness::integrated_loudness;
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// What the level is set by.
#[derive(Debug)]
enum Target {
    /// Integrated loudness in LUFS.
    Loudness(Draw),
    /// Peak level in dBFS.
    Peak(Draw),
}

/// Loudness or peak normalisation.
#[derive(Debug)]
pub struct Level {
    target: Target,
    ceiling_db: f64,
}

/// Read the step's keys: `lufs` (draw, every value in [-70, 0]) or `peak_dbfs` (draw,
/// every value in [-60, 0]), and `ceiling_db` (default -1, at most 0).
///
/// # Errors
/// Neither or both targets, a target out of range, a ceiling above full scale.
pub fn parse(
    params: &mut Params<'_>,
    _ctx: &PlanContext<'_>,
) -> Result<Box<dyn Step>, RecipeError> {
    let target = match (params.has("lufs"), params.has("peak_dbfs")) {
        (true, true) => return Err(params.error("peak_dbfs", "give lufs or peak_dbfs, not both")),
        (false, false) => {
            return Err(params.error(
                "lufs",
                "missing: give a loudness target (lufs) or a peak target (peak_dbfs)",
            ));
        }
        (true, false) => {
            Target::Loudness(params.draw_within("lufs", None, (-70.0, 0.0), "LUFS")?)
        }
        (false, true) => {
            Target::Peak(params.draw_within("peak_dbfs", None, (-60.0, 0.0), "dBFS")?)
        }
    };
    let ceiling_db = crate::steps::gain::ceiling_db(params)?;
    Ok(Box::new(Level { target, ceiling_db }))
}

impl Step for Level {
    fn name(&self) -> &'static str {
        "level"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let d = audio.duration();
        let rate = audio.rate;
        let before_peak = peak(&audio.samples);
        let mut out = StepOutput::new(audio, TimeMap::identity(d));
        let wanted_db = match &self.target {
            Target::Loudness(draw) => {
                let lufs = draw.sample(rng);
                out.drawn.insert("lufs".into(), Value::from(lufs));
                let Some(now) = integrated_loudness(&out.audio.samples, rate) else {
                    out.skipped = Some("loudness is undefined: the take is silent or shorter than one 400 ms block".into());
                    return Ok(out);
                };
                out.measured.insert("lufs_before".into(), Value::from(now));
                lufs - now
            }
            Target::Peak(draw) => {
                let target = draw.sample(rng);
                out.drawn.insert("peak_dbfs".into(), Value::from(target));
                if before_peak == 0.0 {
                    out.skipped = Some("the take is silent: it has no peak to set".into());
                    return Ok(out);
                }
                target - amplitude_db(before_peak)
            }
        };
        let source = std::mem::take(&mut out.audio.samples);
        let ceiling = db_to_amplitude(self.ceiling_db);
        let (samples, k) = scale_under(&source, db_to_amplitude(wanted_db), ceiling);
        out.measured
            .insert("applied_db".into(), Value::from(amplitude_db(k)));
        out.measured.insert(
            "peak_dbfs".into(),
            Value::from(amplitude_db(peak(&samples))),
        );
        if let Target::Loudness(_) = self.target {
            // Measured on the samples the step outputs.
            out.measured.insert(
                "lufs".into(),
                integrated_loudness(&samples, rate).map_or(Value::Null, Value::from),
            );
        }
        out.audio.samples = samples;
        Ok(out)
    }
}
