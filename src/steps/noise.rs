//! The `noise` step: site noise from a bank, mixed at a drawn signal-to-noise ratio.
//!
//! The SNR is hit exactly on the samples the step outputs: speech power and noise power are
//! measured over the same spans (the take's timed lines or words, the whole take, or the
//! speech's active level after ITU-T P.56), the noise is scaled to the drawn ratio, and
//! when the mix would pass full scale, speech and noise are scaled down together so the
//! ratio is kept. Several `noise` steps make several layers; each measures its SNR against
//! the take as it enters that step.

use std::sync::Arc;

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::active_level::active_speech_level;
use crate::dsp::level::peak;
use crate::dsp::mix::{excerpt, power_over, spans_to_samples};
use crate::keys::{Draw, Params, RecipeError};
use crate::noise::NoiseBank;
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Lowest and highest SNR, in dB, a recipe may draw.
pub const SNR_LIMITS: (f64, f64) = (-30.0, 100.0);
/// Crossfade at loop seams when the recipe names none, in milliseconds.
pub const DEFAULT_CROSSFADE_MS: f64 = 50.0;
/// Offsets tried before a take is left without noise because the excerpt is silent where
/// the speech is.
const OFFSET_TRIES: usize = 8;
/// The mix never passes this peak (full scale).
const FULL_SCALE: f64 = 1.0;

/// Which stretch of the take the speech power is measured over.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Over {
    /// The timed lines (the default): silence between lines does not lower the level.
    Lines,
    /// The timed words only.
    Words,
    /// The whole take.
    Clip,
    /// The active speech level of the whole take (ITU-T P.56 method B); noise over the whole take.
    Active,
}

impl Over {
    fn name(self) -> &'static str {
        match self {
            Over::Lines => "lines",
            Over::Words => "words",
            Over::Clip => "clip",
            Over::Active => "active",
        }
    }
}

/// One category of the bank with its weight and the files of the chosen part.
#[derive(Debug, Clone)]
struct Category {
    name: String,
    weight: f64,
    files: Vec<usize>,
}

/// Site noise at a drawn SNR.
pub struct Noise {
    bank: Arc<NoiseBank>,
    bank_label: String,
    categories: Vec<Category>,
    snr_db: Draw,
    over: Over,
    crossfade_s: f64,
    reject_silent: bool,
    stems: bool,
}

impl std::fmt::Debug for Noise {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Noise")
            .field("bank", &self.bank_label)
            .field("files", &self.bank.files.len())
            .field("categories", &self.categories)
            .field("snr_db", &self.snr_db)
            .field("over", &self.over)
            .field("crossfade_s", &self.crossfade_s)
            .field("reject_silent", &self.reject_silent)
            .field("stems", &self.stems)
            .finish()
    }
}

/// Read the step's keys (see docs/recipe.md): `bank` (folder, relative to the recipe),
/// `snr_db` (draw), `weights`, `snr_over`, `held_out`, `part`, `crossfade_ms`,
/// `silent_speech`, `stems`.
///
/// # Errors
/// A missing or unusable bank, a bad draw, an unknown category, a weight of zero or less,
/// an empty part.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let Some(bank_label) = params.text("bank")? else {
        return Err(params.error(
            "bank",
            "missing; name the folder of noise recordings (relative to the recipe)",
        ));
    };
    let snr_db = params.draw_within("snr_db", None, SNR_LIMITS, "dB")?;
    let over = match params.choice("snr_over", &["lines", "words", "clip", "active"], "lines")? {
        "words" => Over::Words,
        "clip" => Over::Clip,
        "active" => Over::Active,
        _ => Over::Lines,
    };
    let held_out = params.number("held_out", 0.0)?;
    if !(0.0..=1.0).contains(&held_out) {
        return Err(params.error(
            "held_out",
            format!("{held_out} is not a fraction in [0, 1]"),
        ));
    }
    let use_held_out = params.choice("part", &["train", "held_out"], "train")? == "held_out";
    let crossfade_ms = params.number("crossfade_ms", DEFAULT_CROSSFADE_MS)?;
    if !(0.0..=1000.0).contains(&crossfade_ms) {
        return Err(params.error(
            "crossfade_ms",
            format!("{crossfade_ms} ms is not in [0, 1000]"),
        ));
    }
    let reject_silent = params.choice("silent_speech", &["skip", "reject"], "skip")? == "reject";
    let stems = params.flag("stems", false)?;
    let weights = params.weights("weights")?;

    let root = ctx.recipe_dir.join(&bank_label);
    let bank = ctx
        .banks
        .get(&root, ctx.rate, held_out)
        .map_err(|e| params.error("bank", e))?;
    for (file, reason) in &bank.skipped {
        params.warn("bank", format!("{file} left out: {reason}"));
    }
    let part = bank.part(use_held_out);
    let part_name = if use_held_out { "held-out" } else { "training" };
    let available = bank.categories();
    let wanted: Vec<(String, f64)> = match weights {
        Some(w) => {
            for (name, _) in &w {
                if !available.contains(&name.as_str()) {
                    return Err(params.error(
                        "weights",
                        format!(
                            "no category `{name}` in {} (it has: {})",
                            root.display(),
                            available.join(", ")
                        ),
                    ));
                }
            }
            w
        }
        None => available.iter().map(|c| (c.to_string(), 1.0)).collect(),
    };
    let mut categories = Vec::new();
    for (name, weight) in wanted {
        let files: Vec<usize> = part
            .iter()
            .copied()
            .filter(|&i| bank.files[i].category == name)
            .collect();
        if files.is_empty() {
            params.warn(
                "weights",
                format!("category `{name}` has no file in the {part_name} part; it is not used"),
            );
        } else {
            categories.push(Category {
                name,
                weight,
                files,
            });
        }
    }
    if categories.is_empty() {
        let key = if use_held_out { "part" } else { "held_out" };
        return Err(params.error(
            key,
            format!(
                "the {part_name} part of {} has no file (held_out = {held_out})",
                root.display()
            ),
        ));
    }
    Ok(Box::new(Noise {
        bank,
        bank_label,
        categories,
        snr_db,
        over,
        crossfade_s: crossfade_ms / 1000.0,
        reject_silent,
        stems,
    }))
}

/// Mean power of the speech over the chosen stretch (the power of its P.56 active level for
/// `Active`).
fn speech_power(over: Over, speech: &[f32], ranges: &[(usize, usize)], rate: u32) -> f64 {
    if over == Over::Active {
        active_speech_level(speech, rate).map_or(0.0, |a| 10f64.powf(a.level_db / 10.0))
    } else {
        power_over(speech, ranges).0
    }
}

/// Mean power of the noise over the same stretch as the speech (the whole take for `Active`).
fn noise_power(over: Over, noise: &[f32], ranges: &[(usize, usize)]) -> f64 {
    if over == Over::Active {
        power_over(noise, &[(0, noise.len())]).0
    } else {
        power_over(noise, ranges).0
    }
}

fn add(a: &[f32], b: &[f32]) -> Vec<f32> {
    a.iter().zip(b).map(|(x, y)| x + y).collect()
}

fn scaled(x: &[f32], k: f64) -> Vec<f32> {
    x.iter().map(|&s| (f64::from(s) * k) as f32).collect()
}

impl Step for Noise {
    fn name(&self) -> &'static str {
        "noise"
    }

    fn inputs(&self) -> Vec<std::path::PathBuf> {
        self.bank.paths()
    }

    fn apply(
        &self,
        audio: Audio,
        take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let snr_db = self.snr_db.sample(rng);
        let total: f64 = self.categories.iter().map(|c| c.weight).sum();
        let mut u = rng.unit() * total;
        let category = self
            .categories
            .iter()
            .find(|c| {
                u -= c.weight;
                u < 0.0
            })
            .unwrap_or(&self.categories[self.categories.len() - 1]);
        let file = &self.bank.files[category.files[rng.index(category.files.len())]];
        let n = audio.samples.len();
        let rate = audio.rate;

        // The stretch the SNR is defined over; an untimed clip falls back to the whole take.
        let (over, ranges) = match self.over {
            Over::Lines if !take.lines.is_empty() => {
                (Over::Lines, spans_to_samples(take.lines, rate, n))
            }
            Over::Words if !take.words.is_empty() => {
                (Over::Words, spans_to_samples(take.words, rate, n))
            }
            Over::Active => (Over::Active, vec![(0, n)]),
            _ => (Over::Clip, vec![(0, n)]),
        };
        let ranges = if ranges.is_empty() {
            vec![(0, n)]
        } else {
            ranges
        };

        let duration = audio.duration();
        let mut out = StepOutput::new(audio, TimeMap::identity(duration));
        out.drawn.insert("snr_db".into(), Value::from(snr_db));
        out.drawn
            .insert("bank".into(), Value::from(self.bank_label.clone()));
        out.drawn
            .insert("category".into(), Value::from(category.name.clone()));
        out.drawn
            .insert("file".into(), Value::from(file.rel_path.clone()));

        let fade = (self.crossfade_s * f64::from(rate)).round() as usize;
        let len = file.samples.len();
        // Speech power does not depend on the excerpt: measured once.
        let ps = speech_power(over, &out.audio.samples, &ranges, rate);
        if ps == 0.0 {
            let reason = format!("speech is silent over its {}: SNR undefined", over.name());
            if self.reject_silent {
                return Err(StepError {
                    step: "noise",
                    reason,
                });
            }
            out.skipped = Some(reason);
            return Ok(out);
        }
        let mut chosen = None;
        for _ in 0..OFFSET_TRIES {
            let u = rng.unit();
            let offset = if len >= n {
                (u * (len - n + 1) as f64) as usize
            } else {
                (u * len as f64) as usize
            };
            let noise = excerpt(&file.samples, offset, n, fade);
            let pn = noise_power(over, &noise, &ranges);
            if pn > 0.0 {
                chosen = Some((offset, noise, pn));
                break;
            }
        }
        let Some((offset, noise, pn)) = chosen else {
            out.skipped = Some(format!(
                "{} is silent over the speech at {OFFSET_TRIES} offsets",
                file.rel_path
            ));
            return Ok(out);
        };
        out.drawn.insert(
            "offset_s".into(),
            Value::from(offset as f64 / f64::from(rate)),
        );

        let gain = (ps / (pn * 10f64.powf(snr_db / 10.0))).sqrt();
        let mut speech = std::mem::take(&mut out.audio.samples);
        let mut noise = scaled(&noise, gain);
        let mut mix = add(&speech, &noise);
        // Clipping guard: speech and noise scaled together, so the ratio stays.
        let mut k = 1.0;
        let p = peak(&mix);
        if p > FULL_SCALE {
            k = FULL_SCALE / p;
            let (s0, n0) = (speech.clone(), noise.clone());
            loop {
                speech = scaled(&s0, k);
                noise = scaled(&n0, k);
                mix = add(&speech, &noise);
                if peak(&mix) <= FULL_SCALE {
                    break;
                }
                k *= 1.0 - f64::from(f32::EPSILON);
            }
        }
        // Measured on the samples the step outputs, in f64.
        let (ps, pn) = (
            speech_power(over, &speech, &ranges, rate),
            noise_power(over, &noise, &ranges),
        );
        out.measured
            .insert("snr_db".into(), Value::from(10.0 * (ps / pn).log10()));
        out.measured
            .insert("snr_over".into(), Value::from(over.name()));
        out.measured
            .insert("speech_db".into(), Value::from(10.0 * ps.log10()));
        out.measured
            .insert("noise_db".into(), Value::from(10.0 * pn.log10()));
        out.measured
            .insert("scaled_db".into(), Value::from(20.0 * k.log10()));
        out.measured
            .insert("looped".into(), Value::from(offset + n > len));
        out.audio = Audio { rate, samples: mix };
        if self.stems {
            out.stems = vec![
                (
                    "clean",
                    Audio {
                        rate,
                        samples: speech,
                    },
                ),
                (
                    "noise",
                    Audio {
                        rate,
                        samples: noise,
                    },
                ),
            ];
        }
        Ok(out)
    }
}
