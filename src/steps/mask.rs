//! The `mask` step: SpecAugment-style frequency and time masks applied to the waveform
//! through an STFT, with what each word loses recorded as `obscured`.
//!
//! Frequency masks blank a band of the spectrum for the whole take; time masks blank a
//! stretch of the take in every band. The take is analysed, the masked cells are faded to
//! the fill (zero, the take's own noise floor, or the band's mean level, with random
//! phase), edges ramped, and the take resynthesised by overlap-add: nothing moves in time,
//! so the time map is the identity. A masked word stays in the transcript; the fraction of
//! it under time masks is written on it by the runner.

use std::cell::RefCell;

use realfft::num_complex::Complex;
use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::mel::MelScale;
use crate::dsp::stft::{Stft, StftConfig};
use crate::keys::{Draw, Params, RecipeError};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Redraws of a time mask's place before it is dropped because it breaks the recipe's cap
/// on how much of a word may be hidden.
pub const MAX_REDRAWS: usize = 20;

/// Published SpecAugment policies: D. S. Park et al., "SpecAugment: A Simple Data
/// Augmentation Method for Automatic Speech Recognition", Interspeech 2019 (arXiv
/// 1904.08779), Table 1, "Augmentation parameters for policies": `(name, W, F, mF, T, p,
/// mT)` with `F` in channels of an 80-band log-mel filterbank, `T` and `W` in 10 ms frames,
/// `p` the largest fraction of the utterance one time mask may cover. Source status: the
/// paper's own text could not be opened from here; every value agrees with two
/// independent recollections of the table and with several public transcriptions of it
/// (SM and SS share W = 40, T = 70, p = 0.2 and differ only in F, 15 against 27).
pub const PRESETS: &[(&str, f64, f64, f64, f64, f64, f64)] = &[
    ("LB", 80.0, 27.0, 1.0, 100.0, 1.0, 1.0),
    ("LD", 80.0, 27.0, 2.0, 100.0, 1.0, 2.0),
    ("SM", 40.0, 15.0, 2.0, 70.0, 0.2, 2.0),
    ("SS", 40.0, 27.0, 2.0, 70.0, 0.2, 2.0),
];
/// Mel channels of the filterbank the presets' `F` counts in (Park et al. 2019).
pub const PRESET_MEL_CHANNELS: f64 = 80.0;
/// Frame step the presets' `T` and `W` count in, seconds (Park et al. 2019: 10 ms).
pub const PRESET_FRAME_S: f64 = 0.01;

/// A published policy converted to our units at `rate`: `(max_shift_s, freq masks,
/// freq width in mel (HTK), time masks, time width s, time cap)`. `F` channels of an
/// 80-channel filterbank spanning 0 Hz to Nyquist are `F / 81` of the mel range (80
/// triangular filters have 81 equal mel steps between their 82 edge points).
pub fn preset(name: &str, rate: u32) -> Option<(f64, f64, f64, f64, f64, f64)> {
    let &(_, w, f, mf, t, p, mt) = PRESETS.iter().find(|p| p.0 == name)?;
    let mel_top = MelScale::Htk.hz_to_mel(f64::from(rate) / 2.0);
    let mel_per_channel = mel_top / (PRESET_MEL_CHANNELS + 1.0);
    Some((
        w * PRESET_FRAME_S,
        mf,
        f * mel_per_channel,
        mt,
        t * PRESET_FRAME_S,
        p,
    ))
}

/// What masked cells become.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Fill {
    /// Silence.
    Zero,
    /// The take's own noise floor in that bin (10th percentile of its magnitude over the
    /// take), random phase.
    Floor,
    /// The bin's mean magnitude over the take, random phase.
    Mean,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Unit {
    Hz,
    Mel(MelScale),
}

/// SpecAugment-style masking.
#[derive(Debug)]
pub struct Mask {
    config: StftConfig,
    freq_count: Draw,
    freq_width: Draw,
    unit: Unit,
    time_count: Draw,
    time_width_s: Draw,
    time_cap: f64,
    fill: Fill,
    ramp_s: f64,
    max_obscured: Option<f64>,
    only_gaps: bool,
}

thread_local! {
    /// STFT plans per worker thread, one per framing, reused across takes.
    static PLANS: RefCell<Vec<Stft>> = const { RefCell::new(Vec::new()) };
}

fn with_stft<R>(config: StftConfig, f: impl FnOnce(&mut Stft) -> R) -> R {
    PLANS.with(|plans| {
        let mut plans = plans.borrow_mut();
        let i = match plans.iter().position(|s| *s.config() == config) {
            Some(i) => i,
            None => {
                plans.push(Stft::new(config).expect("framing checked when the recipe was read"));
                plans.len() - 1
            }
        };
        f(&mut plans[i])
    })
}

/// Window and FFT lengths a recipe may ask for, in samples: 1 ms at 16 kHz up to about
/// 1.4 s at 48 kHz, so a typo cannot ask for gigabytes before the first clip.
const FRAME_LIMITS: (usize, usize) = (16, 65_536);

fn count_draw(
    params: &mut Params<'_>,
    key: &'static str,
    default: f64,
) -> Result<Draw, RecipeError> {
    let d = params.draw_within(key, Some(Draw::Fixed(default)), (0.0, 50.0), "")?;
    let whole = match &d {
        Draw::Fixed(v) => v.fract() == 0.0,
        Draw::Pick(vs) => vs.iter().all(|v| v.fract() == 0.0),
        Draw::Uniform { low, high } => low.fract() == 0.0 && high.fract() == 0.0,
    };
    if !whole {
        return Err(params.error(key, "a count must be a whole number"));
    }
    Ok(d)
}

/// Read the step's keys (see docs/recipe.md).
///
/// # Errors
/// A bad framing (hop larger than the window, ...), a band wider than the spectrum, masks
/// that cannot fit, an unknown preset, bad draws.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let defaults = match params.text("preset")? {
        None => None,
        Some(name) => Some(preset(&name, ctx.rate).ok_or_else(|| {
            let names: Vec<&str> = PRESETS.iter().map(|p| p.0).collect();
            params.error(
                "preset",
                format!("unknown preset `{name}` (one of: {})", names.join(", ")),
            )
        })?),
    };
    let mut config = StftConfig::default();
    let scale = f64::from(ctx.rate) / 16_000.0;
    let default_window = (400.0 * scale).round() as usize;
    config.window_len = params.whole("window", default_window, FRAME_LIMITS, "samples")?;
    let default_hop = (160.0 * scale).round() as usize;
    config.hop = params.whole("hop", default_hop, (1, FRAME_LIMITS.1), "samples")?;
    let default_fft = config.window_len.next_power_of_two();
    config.fft_len = params.whole("fft", default_fft, FRAME_LIMITS, "samples")?;
    if config.hop > config.window_len {
        return Err(params.error(
            "hop",
            format!(
                "hop {} is larger than the window {}",
                config.hop, config.window_len
            ),
        ));
    }
    config.validate().map_err(|e| params.error("window", e))?;

    let (p_freq_count, p_freq_width, p_time_count, p_time_width, p_cap) = match defaults {
        Some((_, fc, fw, tc, tw, cap)) => (fc, Some(fw), tc, Some(tw), cap),
        None => (0.0, None, 0.0, None, 1.0),
    };
    let unit = match (
        params.has("freq_width_hz"),
        params.has("freq_width_mel"),
        defaults.is_some(),
    ) {
        (true, true, _) => {
            return Err(params.error(
                "freq_width_mel",
                "give freq_width_hz or freq_width_mel, not both",
            ));
        }
        (true, false, _) => Unit::Hz,
        (false, true, _) | (false, false, true) => Unit::Mel(
            match params.choice("mel_scale", &["htk", "slaney"], "htk")? {
                "slaney" => MelScale::Slaney,
                _ => MelScale::Htk,
            },
        ),
        (false, false, false) => Unit::Hz,
    };
    let nyquist = f64::from(ctx.rate) / 2.0;
    let (width_key, span) = match unit {
        Unit::Hz => ("freq_width_hz", nyquist),
        Unit::Mel(s) => ("freq_width_mel", s.hz_to_mel(nyquist)),
    };
    let freq_count = count_draw(params, "freq_masks", p_freq_count)?;
    let freq_width = params.draw(width_key, Some(Draw::Fixed(p_freq_width.unwrap_or(0.0))))?;
    let (wlo, whi) = freq_width.bounds();
    if wlo < 0.0 || whi > span {
        return Err(params.error(
            width_key,
            format!(
                "a band from {wlo} to {whi} wide can be drawn, but the spectrum is {span:.1} wide"
            ),
        ));
    }
    // Bands may overlap, but bands that could together cover the whole spectrum leave
    // nothing to hear: a recipe mistake, not an augmentation.
    if freq_count.bounds().1 * whi >= span {
        return Err(params.error(
            "freq_masks",
            format!(
                "{} bands up to {whi} wide cannot fit in a spectrum {span:.1} wide (they could blank all of it)",
                freq_count.bounds().1
            ),
        ));
    }
    let time_count = count_draw(params, "time_masks", p_time_count)?;
    let time_width_s = params.draw_within(
        "time_width_s",
        Some(Draw::Fixed(p_time_width.unwrap_or(0.0))),
        (0.0, 60.0),
        "s",
    )?;
    let time_cap = params.number("time_cap", p_cap)?;
    if !(0.0..=1.0).contains(&time_cap) {
        return Err(params.error(
            "time_cap",
            format!("{time_cap} is not a fraction in [0, 1]"),
        ));
    }
    let fill = match params.choice("fill", &["zero", "floor", "mean"], "zero")? {
        "floor" => Fill::Floor,
        "mean" => Fill::Mean,
        _ => Fill::Zero,
    };
    let ramp_s = params.number("ramp_ms", 5.0)? / 1000.0;
    if !(0.0..=0.1).contains(&ramp_s) {
        return Err(params.error("ramp_ms", "must be in [0, 100] ms"));
    }
    let max_obscured = if params.has("max_obscured") {
        let m = params.number("max_obscured", 1.0)?;
        if !(0.0..=1.0).contains(&m) {
            return Err(params.error("max_obscured", format!("{m} is not a fraction in [0, 1]")));
        }
        Some(m)
    } else {
        None
    };
    let only_gaps = params.flag("only_gaps", false)?;
    Ok(Box::new(Mask {
        config,
        freq_count,
        freq_width,
        unit,
        time_count,
        time_width_s,
        time_cap,
        fill,
        ramp_s,
        max_obscured,
        only_gaps,
    }))
}

/// Raised-cosine weight ramping up over `ramp` steps from `edge` (0 at the edge side).
fn ramp_weight(distance: f64, ramp: f64) -> f32 {
    if ramp <= 0.0 || distance >= ramp {
        1.0
    } else if distance <= 0.0 {
        0.0
    } else {
        (0.5 - 0.5 * (std::f64::consts::PI * distance / ramp).cos()) as f32
    }
}

/// Fraction of `[a, b)` covered by the union of `spans`.
fn covered(a: f64, b: f64, spans: &[(f64, f64)]) -> f64 {
    if b <= a {
        return 0.0;
    }
    let mut cuts: Vec<(f64, f64)> = spans
        .iter()
        .map(|&(s, e)| (s.max(a), e.min(b)))
        .filter(|(s, e)| e > s)
        .collect();
    cuts.sort_by(|x, y| x.0.total_cmp(&y.0));
    let (mut total, mut reach) = (0.0, a);
    for (s, e) in cuts {
        let s = s.max(reach);
        if e > s {
            total += e - s;
            reach = e;
        }
    }
    total / (b - a)
}

impl Mask {
    /// Whether adding `span` to `placed` keeps every word within the recipe's caps.
    fn allowed(&self, span: (f64, f64), placed: &[(f64, f64)], words: &[(f64, f64)]) -> bool {
        if self.only_gaps && words.iter().any(|&(a, b)| span.0 < b && a < span.1) {
            return false;
        }
        if let Some(cap) = self.max_obscured {
            let mut all = placed.to_vec();
            all.push(span);
            if words
                .iter()
                .any(|&(a, b)| covered(a, b, &all) > cap + 1e-12)
            {
                return false;
            }
        }
        true
    }
}

impl Step for Mask {
    fn name(&self) -> &'static str {
        "mask"
    }

    fn hides_time(&self) -> bool {
        self.time_count.bounds().1 > 0.0
    }

    fn apply(
        &self,
        audio: Audio,
        take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let rate = audio.rate;
        let d = audio.duration();
        let n_freq = self.freq_count.sample(rng).round() as usize;
        let n_time = self.time_count.sample(rng).round() as usize;
        let mut out = StepOutput::new(audio, TimeMap::identity(d));
        if out.audio.samples.len() < self.config.window_len {
            out.skipped = Some(format!(
                "take is shorter than one STFT window ({} samples)",
                self.config.window_len
            ));
            return Ok(out);
        }
        // Frequency bands, in Hz.
        let nyquist = f64::from(rate) / 2.0;
        let mut bands = Vec::with_capacity(n_freq);
        for _ in 0..n_freq {
            let w = self.freq_width.sample(rng);
            let (lo, hi) = match self.unit {
                Unit::Hz => {
                    let lo = rng.uniform(0.0, nyquist - w);
                    (lo, lo + w)
                }
                Unit::Mel(s) => {
                    let top = s.hz_to_mel(nyquist);
                    let lo = rng.uniform(0.0, top - w);
                    (s.mel_to_hz(lo), s.mel_to_hz(lo + w))
                }
            };
            bands.push((lo, hi));
        }
        // Time spans, in seconds, redrawn while they break the caps on words.
        let mut spans: Vec<(f64, f64)> = Vec::with_capacity(n_time);
        let (mut redraws, mut dropped) = (0usize, 0usize);
        for _ in 0..n_time {
            let mut placed = None;
            for attempt in 0..=MAX_REDRAWS {
                let w = self.time_width_s.sample(rng).min(self.time_cap * d);
                let start = rng.uniform(0.0, d - w);
                if self.allowed((start, start + w), &spans, take.words) {
                    placed = Some((start, start + w));
                    redraws += attempt;
                    break;
                }
            }
            match placed {
                Some(s) => spans.push(s),
                None => {
                    redraws += MAX_REDRAWS;
                    dropped += 1;
                }
            }
        }
        let phase_seed = rng.next_u64();

        let samples = with_stft(self.config, |stft| {
            let mut spec = stft.analyse(&out.audio.samples);
            let (frames, bins) = (spec.frames(), spec.bins());
            let hop_s = self.config.hop as f64 / f64::from(rate);
            let bin_hz = f64::from(rate) / self.config.fft_len as f64;
            // Per-bin fill magnitude.
            let fill_mag: Vec<f32> = match self.fill {
                Fill::Zero => vec![0.0; bins],
                Fill::Floor | Fill::Mean => (0..bins)
                    .map(|k| {
                        let mut mags: Vec<f32> = (0..frames)
                            .map(|t| spec.data()[t * bins + k].norm())
                            .collect();
                        if self.fill == Fill::Mean {
                            mags.iter().sum::<f32>() / frames as f32
                        } else {
                            mags.sort_by(f32::total_cmp);
                            mags[frames / 10]
                        }
                    })
                    .collect(),
            };
            // Mask weight per cell: 1 inside a mask, ramped at its edges, 0 outside.
            let mut weight = vec![0.0f32; frames * bins];
            let ramp_bins = (self.ramp_s * 200.0).max(1.0); // ~1 bin per 5 ms of ramp, at least 1
            for &(lo, hi) in &bands {
                for k in spec.bins_within(lo, hi, rate) {
                    let f = k as f64 * bin_hz;
                    let wk = ramp_weight(((f - lo) / bin_hz).min((hi - f) / bin_hz), ramp_bins);
                    for t in 0..frames {
                        let c = &mut weight[t * bins + k];
                        *c = c.max(wk);
                    }
                }
            }
            for &(a, b) in &spans {
                for t in spec.frames_within(a, b, rate) {
                    let tc = t as f64 * hop_s;
                    let wt = ramp_weight((tc - a).min(b - tc), self.ramp_s);
                    for k in 0..bins {
                        let c = &mut weight[t * bins + k];
                        *c = c.max(wt);
                    }
                }
            }
            let mut phase = TakeRng::new(phase_seed);
            for (cell, (&w, k)) in spec
                .data_mut()
                .iter_mut()
                .zip(weight.iter().zip((0..bins).cycle()))
            {
                if w > 0.0 {
                    let fill = if fill_mag[k] > 0.0 {
                        let theta = phase.uniform(0.0, std::f64::consts::TAU);
                        Complex::from_polar(fill_mag[k], theta as f32)
                    } else {
                        Complex::new(0.0, 0.0)
                    };
                    *cell = *cell * (1.0 - w) + fill * w;
                }
            }
            stft.synthesise(&spec)
        });
        out.audio.samples = samples;
        out.drawn.insert(
            "freq_bands_hz".into(),
            Value::from(bands.iter().map(|&(a, b)| vec![a, b]).collect::<Vec<_>>()),
        );
        out.drawn.insert(
            "time_spans_s".into(),
            Value::from(spans.iter().map(|&(a, b)| vec![a, b]).collect::<Vec<_>>()),
        );
        if self.max_obscured.is_some() || self.only_gaps {
            out.measured.insert("redraws".into(), Value::from(redraws));
            out.measured.insert("dropped".into(), Value::from(dropped));
        }
        out.hidden = spans;
        Ok(out)
    }
}
