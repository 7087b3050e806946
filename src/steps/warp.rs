//! The `warp` step: the SpecAugment time warp, done on the waveform. A point of the take
//! (the anchor) moves by a drawn shift; the stretch before it and the stretch after it are
//! time-scaled to meet it, by WSOLA so pitch stays. The take keeps its length. The time map
//! is the list of positions WSOLA actually used, so every timing follows the audio exactly.

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::wsola::{WsolaConfig, stretch};
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::mask::preset;
use crate::steps::stretch::anchors_map;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// A piecewise-linear time warp around a drawn anchor.
#[derive(Debug)]
pub struct Warp {
    anchor: Draw,
    shift_s: Draw,
}

/// Read the step's keys: `anchor` (draw of the anchor's place as a fraction of the take,
/// inside (0, 1); default uniform 0.1..0.9), `shift_s` (draw of the shift in seconds,
/// default uniform ±`max_shift_s`), `max_shift_s` or `preset` (a SpecAugment policy's W).
///
/// # Errors
/// An anchor that cannot fit the clip (not strictly inside it), an unknown preset, bad draws.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let from_preset = match params.text("preset")? {
        None => None,
        Some(name) => Some(
            preset(&name, ctx.rate)
                .ok_or_else(|| {
                    params.error(
                        "preset",
                        format!("unknown preset `{name}` (LB, LD, SM, SS)"),
                    )
                })?
                .0,
        ),
    };
    let max_shift = params.number("max_shift_s", from_preset.unwrap_or(0.08))?;
    if !(0.0..=5.0).contains(&max_shift) {
        return Err(params.error("max_shift_s", format!("{max_shift} s is not in [0, 5]")));
    }
    let shift_s = params.draw_within(
        "shift_s",
        Some(Draw::Uniform {
            low: -max_shift,
            high: max_shift,
        }),
        (-5.0, 5.0),
        "s",
    )?;
    let anchor = params.draw(
        "anchor",
        Some(Draw::Uniform {
            low: 0.1,
            high: 0.9,
        }),
    )?;
    let (lo, hi) = anchor.bounds();
    if lo <= 0.0 || hi >= 1.0 {
        return Err(params.error(
            "anchor",
            format!("anchors from {lo} to {hi} of the take can be drawn, which cannot fit the take: an anchor must lie strictly inside it (0 < anchor < 1)"),
        ));
    }
    Ok(Box::new(Warp { anchor, shift_s }))
}

impl Step for Warp {
    fn name(&self) -> &'static str {
        "warp"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let d = audio.duration();
        let a = self.anchor.sample(rng) * d;
        let s = self.shift_s.sample(rng);
        let rate = audio.rate;
        let mut out = StepOutput::new(audio, TimeMap::identity(d));
        out.drawn.insert("anchor_s".into(), Value::from(a));
        out.drawn.insert("shift_s".into(), Value::from(s));
        let cfg = WsolaConfig::for_rate(rate);
        let frame = cfg.frame_len as f64 / f64::from(rate);
        // Both sides must keep at least a frame, or the warp cannot be done.
        if a + s < frame || d - a - s < frame || out.audio.samples.len() < 2 * cfg.frame_len {
            out.skipped = Some(format!(
                "anchor {a:.3} s moved by {s:.3} s leaves less than one {:.0} ms frame on a side of a {d:.3} s take",
                frame * 1000.0
            ));
            return Ok(out);
        }
        // Speed before the anchor maps [0, a] onto [0, a + s]; after it, [a, d] onto [a + s, d].
        let (before, after) = (a / (a + s), (d - a) / (d - a - s));
        let done = stretch(&out.audio.samples, rate, &cfg, |t| {
            if t < a { before } else { after }
        });
        out.map = anchors_map("warp", done.anchors)?;

        out.measured.insert(
            "duration_s".into(),
            Value::from(done.samples.len() as f64 / f64::from(rate)),
        );
        out.audio.samples = done.samples;
        Ok(out)
    }
}
