//! The `speed` step: speed perturbation. The take is played `factor` times faster, so it
//! lasts `d / factor` and its pitch moves with it (a resample that keeps the rate).

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::resample;
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Smallest and largest factor a recipe may draw: half and double speed.
pub const FACTOR_LIMITS: (f64, f64) = (0.5, 2.0);

/// Speed perturbation by a drawn factor.
#[derive(Debug, Clone, PartialEq)]
pub struct Speed {
    /// The factor: above 1 faster and shorter, below 1 slower and longer.
    pub factor: Draw,
}

/// Read the step's keys: `factor` (a draw, required, every value in [0.5, 2.0]).
///
/// # Errors
/// A missing factor, or one that can draw a value outside the limits.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let _ = ctx;
    let factor = params.draw_within("factor", None, FACTOR_LIMITS, "")?;
    Ok(Box::new(Speed { factor }))
}

impl Step for Speed {
    fn name(&self) -> &'static str {
        "speed"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let factor = self.factor.sample(rng);
        let d_in = audio.duration();
        let audio = if factor == 1.0 {
            audio
        } else {
            Audio {
                rate: audio.rate,
                samples: resample::speed(&audio.samples, factor),
            }
        };
        // The written samples fix the take's duration (the output length is rounded to a
        // whole sample); the content itself moves exactly t -> t / factor, and that is the map.
        let d_out = audio.duration();
        let mut out = StepOutput::new(audio, TimeMap::linear(d_in, d_in / factor));
        out.drawn.insert("factor".into(), Value::from(factor));
        out.measured.insert("duration_s".into(), Value::from(d_out));
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recipe::{Plan, one_step_plan};

    fn recipe(step: &str) -> Result<Plan, RecipeError> {
        one_step_plan("speed", step)
    }

    #[test]
    fn factor_outside_the_limits_names_key_and_line() {
        for bad in [
            "factor = 0",
            "factor = -1.1",
            "factor = [0.9, 1.0, 2.5]",
            "factor = { low = 0.4, high = 1.1 }",
        ] {
            let e = recipe(bad).unwrap_err();
            assert_eq!(e.line, Some(5), "{bad}: {e}");
            assert!(e.message.contains("step 1 (speed): factor:"), "{bad}: {e}");
            assert!(e.message.contains("[0.5, 2]"), "{bad}: {e}");
        }
    }

    #[test]
    fn missing_factor_is_an_error() {
        let e = recipe("").unwrap_err();
        assert!(e.message.contains("factor: missing"), "{e}");
    }

    #[test]
    fn factor_limits_are_inclusive() {
        assert!(recipe("factor = [0.5, 2.0]").is_ok());
    }

    #[test]
    fn speeds_up_and_maps_time() {
        let plan = recipe("factor = 1.25").unwrap();
        let audio = Audio {
            rate: 16_000,
            samples: vec![0.0; 16_000],
        };
        let out = plan.steps[0]
            .step
            .apply(audio, &TakeContext::default(), &mut TakeRng::new(1))
            .unwrap();
        // 1 s played 1.25 times faster lasts 0.8 s (physics).
        assert_eq!(out.audio.samples.len(), 12_800);
        assert_eq!(out.map.range(), (0.0, 0.8));
        assert!((out.map.apply(0.5) - 0.4).abs() < 1e-12);
        assert_eq!(out.drawn["factor"], 1.25);
        assert_eq!(out.measured["duration_s"], 0.8);
    }

    #[test]
    fn factor_one_is_untouched() {
        let plan = recipe("factor = 1").unwrap();
        let samples: Vec<f32> = (0..1000).map(|i| (i as f32 * 0.01).sin()).collect();
        let audio = Audio {
            rate: 8_000,
            samples: samples.clone(),
        };
        let out = plan.steps[0]
            .step
            .apply(audio, &TakeContext::default(), &mut TakeRng::new(1))
            .unwrap();
        assert_eq!(out.audio.samples, samples);
        assert_eq!(out.map, TimeMap::identity(0.125));
    }

    #[test]
    fn empty_take_is_refused() {
        let plan = recipe("factor = 1.1").unwrap();
        let audio = Audio {
            rate: 16_000,
            samples: vec![],
        };
        let e = crate::steps::run_step(
            plan.steps[0].step.as_ref(),
            audio,
            &TakeContext::default(),
            &mut TakeRng::new(1),
        )
        .unwrap_err();
        assert_eq!((e.step, e.reason.as_str()), ("speed", "the take is empty"));
    }
}
