//! The `resample` step: the take passes through another sample rate and back, losing
//! everything above half that rate (as through a narrow-band link). Timings do not move.

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::resample::resample;
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Lowest and highest rate, in Hz, a take may pass through.
pub const VIA_RATE_LIMITS: (u32, u32) = (4_000, 192_000);

/// A round trip through a drawn sample rate.
#[derive(Debug, Clone, PartialEq)]
pub struct Resample {
    /// The rate passed through, in Hz (a range draw is rounded to whole Hz).
    pub via_rate: Draw,
}

/// Read the step's keys: `via_rate` (a draw, required, whole Hz in [4000, 192000]).
///
/// # Errors
/// A missing rate, a rate that is not a whole number or one outside the limits.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let _ = ctx;
    let (lo, hi) = VIA_RATE_LIMITS;
    let via_rate = params.draw_within("via_rate", None, (f64::from(lo), f64::from(hi)), "Hz")?;
    let whole: Vec<f64> = match &via_rate {
        Draw::Fixed(v) => vec![*v],
        Draw::Pick(vs) => vs.clone(),
        Draw::Uniform { low, high } => vec![*low, *high],
    };
    if let Some(v) = whole.iter().find(|v| v.fract() != 0.0) {
        return Err(params.error("via_rate", format!("{v} is not a whole number of Hz")));
    }
    Ok(Box::new(Resample { via_rate }))
}

impl Step for Resample {
    fn name(&self) -> &'static str {
        "resample"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let via = self.via_rate.sample(rng).round() as u32;
        let duration = audio.duration();
        let audio = if via == audio.rate {
            audio
        } else {
            let down = resample(&audio.samples, audio.rate, via);
            let mut back = resample(&down, via, audio.rate);
            // Two roundings of the length can leave it one sample off; the take keeps its
            // length so the identity map stays exact.
            back.resize(audio.samples.len(), 0.0);
            Audio {
                rate: audio.rate,
                samples: back,
            }
        };
        let mut out = StepOutput::new(audio, TimeMap::identity(duration));
        out.drawn.insert("via_rate".into(), Value::from(via));
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recipe::{Plan, one_step_plan};

    fn recipe(step: &str) -> Result<Plan, RecipeError> {
        one_step_plan("resample", step)
    }

    #[test]
    fn bad_rates_name_key_and_line() {
        for (bad, says) in [
            ("via_rate = 8000.5", "not a whole number"),
            ("via_rate = [8000, 2000]", "[4000, 192000]"),
            ("via_rate = { low = 8000, high = 200000 }", "[4000, 192000]"),
            ("via_rate = 0", "[4000, 192000]"),
        ] {
            let e = recipe(bad).unwrap_err();
            assert_eq!(e.line, Some(5), "{bad}: {e}");
            assert!(
                e.message.contains("step 1 (resample): via_rate:"),
                "{bad}: {e}"
            );
            assert!(e.message.contains(says), "{bad}: {e}");
        }
        assert!(
            recipe("")
                .unwrap_err()
                .message
                .contains("via_rate: missing")
        );
    }

    #[test]
    fn same_rate_is_untouched_and_length_is_kept() {
        let samples: Vec<f32> = (0..16_001).map(|i| (i as f32 * 0.05).sin() * 0.5).collect();
        let plan = recipe("via_rate = 16000").unwrap();
        let audio = Audio {
            rate: 16_000,
            samples: samples.clone(),
        };
        let out = plan.steps[0]
            .step
            .apply(audio.clone(), &TakeContext::default(), &mut TakeRng::new(1))
            .unwrap();
        assert_eq!(out.audio, audio);

        let plan = recipe("via_rate = { low = 7000, high = 9000 }").unwrap();
        let out = plan.steps[0]
            .step
            .apply(audio, &TakeContext::default(), &mut TakeRng::new(1))
            .unwrap();
        assert_eq!(out.audio.samples.len(), samples.len());
        assert_eq!(out.map, TimeMap::identity(16_001.0 / 16_000.0));
        let via = out.drawn["via_rate"].as_u64().unwrap();
        assert!((7000..=9000).contains(&via), "{via}");
    }
}
