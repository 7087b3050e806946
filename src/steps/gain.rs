//! The `gain` step: a level change with a peak guard. The drawn gain is applied unless the
//! take's peak would pass the ceiling; then the gain is lowered so the peak sits at the
//! ceiling. Timings do not move.

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::level::{amplitude_db, db_to_amplitude, peak, scale_under};
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Lowest and highest gain, in dB, a recipe may draw.
pub const DB_LIMITS: (f64, f64) = (-60.0, 40.0);

/// The ceiling when a recipe names none, in dBFS.
pub const DEFAULT_CEILING_DB: f64 = -1.0;

/// A drawn gain with a peak ceiling.
#[derive(Debug, Clone, PartialEq)]
pub struct Gain {
    /// The gain in dB.
    pub db: Draw,
    /// The highest peak the result may have, in dBFS (at most 0).
    pub ceiling_db: f64,
}

/// Read the step's keys: `db` (a draw, required, every value in [-60, 40]) and
/// `ceiling_db` (a number, default -1, at most 0).
///
/// # Errors
/// A missing gain, a gain that can be drawn outside the limits, a ceiling above 0 dBFS.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let _ = ctx;
    let db = params.draw_within("db", None, DB_LIMITS, "dB")?;
    let ceiling_db = ceiling_db(params)?;
    Ok(Box::new(Gain { db, ceiling_db }))
}

/// The `ceiling_db` key shared by the level-setting steps: a number, default
/// [`DEFAULT_CEILING_DB`], at most 0 dBFS.
///
/// # Errors
/// A value that is not a number or is above full scale.
pub fn ceiling_db(params: &mut Params<'_>) -> Result<f64, RecipeError> {
    let ceiling_db = params.number("ceiling_db", DEFAULT_CEILING_DB)?;
    if ceiling_db > 0.0 {
        return Err(params.error(
            "ceiling_db",
            format!("{ceiling_db} dBFS is above full scale; the ceiling must be at most 0"),
        ));
    }
    Ok(ceiling_db)
}

impl Step for Gain {
    fn name(&self) -> &'static str {
        "gain"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let db = self.db.sample(rng);
        let duration = audio.duration();
        let (samples, factor) = scale_under(
            &audio.samples,
            db_to_amplitude(db),
            db_to_amplitude(self.ceiling_db),
        );
        let after = peak(&samples);
        let mut out = StepOutput::new(
            Audio {
                rate: audio.rate,
                samples,
            },
            TimeMap::identity(duration),
        );
        out.drawn.insert("db".into(), Value::from(db));
        out.measured
            .insert("applied_db".into(), Value::from(amplitude_db(factor)));
        // A silent take has no peak level: recorded as null.
        out.measured
            .insert("peak_dbfs".into(), Value::from(amplitude_db(after)));
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recipe::{Plan, one_step_plan};

    fn recipe(step: &str) -> Result<Plan, RecipeError> {
        one_step_plan("gain", step)
    }

    #[test]
    fn bad_keys_name_key_and_line() {
        let e = recipe("db = { low = -80, high = 0 }").unwrap_err();
        assert_eq!(e.line, Some(5), "{e}");
        assert!(e.message.contains("step 1 (gain): db:"), "{e}");
        assert!(e.message.contains("[-60, 40]"), "{e}");
        let e = recipe("db = 3\nceiling_db = 0.5").unwrap_err();
        assert_eq!(e.line, Some(6), "{e}");
        assert!(e.message.contains("ceiling_db: 0.5 dBFS"), "{e}");
        assert!(recipe("").unwrap_err().message.contains("db: missing"));
    }

    #[test]
    fn silent_take_records_no_peak() {
        let plan = recipe("db = 6").unwrap();
        let audio = Audio {
            rate: 16_000,
            samples: vec![0.0; 100],
        };
        let out = plan.steps[0]
            .step
            .apply(audio, &TakeContext::default(), &mut TakeRng::new(1))
            .unwrap();
        assert_eq!(out.measured["peak_dbfs"], Value::Null);
        assert_eq!(out.drawn["db"], 6.0);
        assert!((out.measured["applied_db"].as_f64().unwrap() - 6.0).abs() < 1e-12);
    }
}
