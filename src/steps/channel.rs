//! The `channel` step: what a deployment microphone or radio link does to the sound. In
//! order: a band limit (narrow-band telephone 300-3400 Hz, wide-band 50-7000 Hz, or any
//! band), a microphone tilt (spectral slope in dB per octave), a G.711 mu-law or A-law
//! round trip at 8 kHz, hard or soft clipping at a drawn level, and bit-depth reduction.
//!
//! Every part keeps time: the band filter runs forward then backward (zero phase, so its
//! attenuation in dB is twice that of one pass), the tilt is a linear-phase FIR with its
//! delay removed, and the 8 kHz round trip uses the delay-compensated resampler. The time
//! map is the identity.

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::channel::{bit_reduce, hard_clip, soft_clip};
use crate::dsp::filter::{Cascade, band_pass, tilt};
use crate::dsp::g711::{alaw_round_trip, ulaw_round_trip};
use crate::dsp::level::db_to_amplitude;
use crate::dsp::resample::resample;
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// The narrow-band telephone band, Hz (the 300-3400 Hz channel of ITU-T G.712-style links).
pub const NARROW_BAND_HZ: (f64, f64) = (300.0, 3400.0);
/// The wide-band telephone band, Hz (50-7000 Hz, as in wide-band speech coding).
pub const WIDE_BAND_HZ: (f64, f64) = (50.0, 7000.0);
/// The rate G.711 runs at, Hz.
pub const G711_RATE: u32 = 8_000;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Codec {
    MuLaw,
    ALaw,
}

#[derive(Debug)]
struct Clip {
    soft: bool,
    level_dbfs: Draw,
}

/// A deployment channel.
#[derive(Debug)]
pub struct Channel {
    band: Option<((f64, f64), usize)>,
    filter: Option<Cascade>,
    tilt_db_per_octave: Option<Draw>,
    tilt_pivot_hz: f64,
    codec: Option<Codec>,
    clip: Option<Clip>,
    bits: Option<Draw>,
}

/// Read the step's keys (see docs/recipe.md).
///
/// # Errors
/// A band whose low edge is not below its high edge or reaches Nyquist, a filter order out
/// of range, a clipping level above full scale, a bit depth outside 2..=16, a tilt beyond
/// ±12 dB per octave, G.711 at a recipe rate below 8 kHz.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let nyquist = f64::from(ctx.rate) / 2.0;
    let preset = params.choice("band", &["none", "narrow", "wide"], "none")?;
    let band = if params.has("band_hz") {
        let Draw::Pick(edges) = params.draw("band_hz", None)? else {
            return Err(params.error("band_hz", "expected [low, high] in Hz"));
        };
        if edges.len() != 2 {
            return Err(params.error("band_hz", "expected [low, high] in Hz"));
        }
        Some((edges[0], edges[1]))
    } else {
        match preset {
            "narrow" => Some(NARROW_BAND_HZ),
            "wide" => Some(WIDE_BAND_HZ),
            _ => None,
        }
    };
    let order = params.number("order", 4.0)?;
    if order.fract() != 0.0 || !(1.0..=16.0).contains(&order) {
        return Err(params.error(
            "order",
            format!("{order} is not a whole filter order in 1..=16"),
        ));
    }
    let key = if params.has("band_hz") {
        "band_hz"
    } else {
        "band"
    };
    if let Some((low, high)) = band {
        if !(low > 0.0 && low < high) {
            return Err(params.error(
                key,
                format!(
                    "the band's low edge {low} Hz must be above 0 and below its high edge {high} Hz"
                ),
            ));
        }
        if high >= nyquist {
            return Err(params.error(key, format!("the band's high edge {high} Hz is not below Nyquist ({nyquist} Hz at the recipe's rate)")));
        }
    }
    let filter = match band {
        Some((low, high)) => {
            Some(band_pass(low, high, order as usize, ctx.rate).map_err(|e| params.error(key, e))?)
        }
        None => None,
    };
    let tilt_db_per_octave = if params.has("tilt_db_per_octave") {
        Some(params.draw_within("tilt_db_per_octave", None, (-12.0, 12.0), "dB per octave")?)
    } else {
        None
    };
    let tilt_pivot_hz = params.number("tilt_pivot_hz", 1000.0)?;
    if !(50.0..nyquist).contains(&tilt_pivot_hz) {
        return Err(params.error(
            "tilt_pivot_hz",
            format!("{tilt_pivot_hz} Hz is not between 50 Hz and Nyquist"),
        ));
    }
    let codec = match params.choice("codec", &["none", "mulaw", "alaw"], "none")? {
        "mulaw" => Some(Codec::MuLaw),
        "alaw" => Some(Codec::ALaw),
        _ => None,
    };
    if codec.is_some() && ctx.rate < G711_RATE {
        return Err(params.error(
            "codec",
            format!(
                "G.711 runs at 8 kHz; the recipe's rate {} Hz is below it",
                ctx.rate
            ),
        ));
    }
    let clip = match params.choice("clip", &["none", "hard", "soft"], "none")? {
        "none" => None,
        kind => {
            let level_dbfs = params.draw("clip_dbfs", None)?;
            let (lo, hi) = level_dbfs.bounds();
            if hi > 0.0 {
                return Err(params.error(
                    "clip_dbfs",
                    format!("{hi} dBFS is above full scale; a clipping level is at most 0 dBFS"),
                ));
            }
            if lo < -60.0 {
                return Err(params.error("clip_dbfs", format!("{lo} dBFS is below -60 dBFS")));
            }
            Some(Clip {
                soft: kind == "soft",
                level_dbfs,
            })
        }
    };
    let bits = if params.has("bits") {
        let b = params.draw_within("bits", None, (2.0, 16.0), "bits")?;
        let (lo, hi) = b.bounds();
        if lo.fract() != 0.0
            || hi.fract() != 0.0
            || matches!(&b, Draw::Pick(v) if v.iter().any(|x| x.fract() != 0.0))
        {
            return Err(params.error("bits", "a bit depth is a whole number"));
        }
        Some(b)
    } else {
        None
    };
    Ok(Box::new(Channel {
        band: band.map(|b| (b, order as usize)),
        filter,
        tilt_db_per_octave,
        tilt_pivot_hz,
        codec,
        clip,
        bits,
    }))
}

/// Forward then backward through `filter`: zero phase, squared magnitude.
fn zero_phase(filter: &Cascade, x: &[f32]) -> Vec<f32> {
    let mut f = filter.clone();
    f.reset();
    let mut y = f.process(x);
    y.reverse();
    f.reset();
    let mut y = f.process(&y);
    y.reverse();
    y
}

impl Step for Channel {
    fn name(&self) -> &'static str {
        "channel"
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let rate = audio.rate;
        let n = audio.samples.len();
        let d = audio.duration();
        let tilt_db = self.tilt_db_per_octave.as_ref().map(|t| t.sample(rng));
        let clip_dbfs = self.clip.as_ref().map(|c| c.level_dbfs.sample(rng));
        let bits = self.bits.as_ref().map(|b| b.sample(rng).round() as u32);
        let mut out = StepOutput::new(audio, TimeMap::identity(d));
        let mut x = std::mem::take(&mut out.audio.samples);
        if let (Some(filter), Some(((low, high), order))) = (&self.filter, self.band) {
            x = zero_phase(filter, &x);
            out.drawn
                .insert("band_hz".into(), Value::from(vec![low, high]));
            out.drawn.insert("order".into(), Value::from(order));
        }
        if let Some(slope) = tilt_db {
            x = tilt(&x, rate, slope, self.tilt_pivot_hz).map_err(|e| StepError {
                step: "channel",
                reason: e.to_string(),
            })?;
            out.drawn
                .insert("tilt_db_per_octave".into(), Value::from(slope));
        }
        if let Some(codec) = self.codec {
            let low = resample(&x, rate, G711_RATE);
            let coded = match codec {
                Codec::MuLaw => ulaw_round_trip(&low),
                Codec::ALaw => alaw_round_trip(&low),
            };
            x = resample(&coded, G711_RATE, rate);
            x.resize(n, 0.0);
            out.drawn.insert(
                "codec".into(),
                Value::from(if codec == Codec::MuLaw {
                    "mulaw"
                } else {
                    "alaw"
                }),
            );
        }
        if let (Some(clip), Some(level_db)) = (&self.clip, clip_dbfs) {
            let level = db_to_amplitude(level_db) as f32;
            let before = x.iter().filter(|s| s.abs() > level).count();
            x = if clip.soft {
                soft_clip(&x, level)
            } else {
                hard_clip(&x, level)
            };
            out.drawn.insert(
                if clip.soft {
                    "soft_clip_dbfs"
                } else {
                    "hard_clip_dbfs"
                }
                .into(),
                Value::from(level_db),
            );
            out.measured.insert(
                "clipped_fraction".into(),
                Value::from(before as f64 / n.max(1) as f64),
            );
        }
        if let Some(b) = bits {
            x = bit_reduce(&x, b);
            out.drawn.insert("bits".into(), Value::from(b));
        }
        out.audio.samples = x;
        Ok(out)
    }
}
