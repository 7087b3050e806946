//! The `room` step: reverberation by convolution with an impulse response, measured (a
//! folder of response files) or simulated (image-source method, shoebox rooms), with every
//! timing kept on the words.
//!
//! Convolution delays the speech by the direct-path delay. The step finds the direct path
//! (a measured response's largest peak; a simulated room's geometric delay, distance / c,
//! since in a long room grazing reflections can pile up higher than it) and either trims that delay from the output (`align =
//! "trim"`: timings do not move) or keeps it and shifts every timing by it (`align =
//! "shift"`). The reverberant tail past the input's end is cut (`tail = "cut"`, the default)
//! or kept (`tail = "keep"`); timings stay inside the audio either way.

use std::path::PathBuf;
use std::sync::Arc;

use serde_json::Value;

use crate::audio::Audio;
use crate::dsp::convolve::convolve;
use crate::dsp::level::{peak, scale_under};
use crate::dsp::rt60::rt60;
use crate::keys::{Draw, Params, RecipeError};
use crate::noise::load_bank;
use crate::room::absorption::{alpha_for_rt60_eyring, alpha_for_rt60_sabine};
use crate::room::{
    Placement, RoomCache, Shoebox, direct_delay_s, distance_m, impulse_response, place,
};
use crate::seed::TakeRng;
use crate::steps::{PlanContext, Step, StepError, StepOutput, TakeContext};
use crate::timemap::TimeMap;

/// Longest response a recipe may use when it names no `max_ir_s`, in seconds.
pub const DEFAULT_MAX_IR_S: f64 = 2.0;
/// Half-width of the window around the direct-path peak counted as direct sound when the
/// direct-to-reverberant ratio is measured or drawn: 2.5 ms (common practice in DRR
/// estimation; no single standard fixes it).
pub const DIRECT_WINDOW_S: f64 = 0.0025;
/// Speed of sound used for simulated rooms, m/s (dry air at about 20 °C; handbook value).
pub const SPEED_OF_SOUND: f64 = 343.0;
/// The output never passes full scale: a louder result is scaled down and the scaling recorded.
const FULL_SCALE: f64 = 1.0;

/// How a response is scaled before use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Normalise {
    /// Direct-path peak of magnitude 1: the dry sound keeps its level.
    Direct,
    /// Unit energy (sum of squares 1).
    Energy,
}

/// A measured response, ready to use.
#[derive(Debug)]
struct Measured {
    rel_path: String,
    /// The file it was read from (a completion fingerprint covers it).
    path: PathBuf,
    samples: Arc<Vec<f32>>,
    rt60_s: Option<f64>,
}

/// Where the responses come from.
enum Source {
    Measured(Vec<Measured>),
    Simulated(Box<Simulated>),
}

/// Draws of a simulated shoebox room.
#[derive(Debug)]
struct Simulated {
    dims_m: [Draw; 3],
    absorption: Absorption,
    wall_gap_m: f64,
    cache: RoomCache,
}

#[derive(Debug)]
enum Absorption {
    Alpha(Draw),
    Rt60 { seconds: Draw, eyring: bool },
}

/// Reverberation with a measured or simulated room.
pub struct Room {
    source: Source,
    folder: String,
    normalise: Normalise,
    shift: bool,
    keep_tail: bool,
    drr_db: Option<Draw>,
    max_ir_s: f64,
}

impl std::fmt::Debug for Room {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let source = match &self.source {
            Source::Measured(m) => format!("{} measured responses from {}", m.len(), self.folder),
            Source::Simulated(s) => format!("simulated {:?} {:?}", s.dims_m, s.absorption),
        };
        f.debug_struct("Room")
            .field("source", &source)
            .field("normalise", &self.normalise)
            .field("shift", &self.shift)
            .field("keep_tail", &self.keep_tail)
            .field("drr_db", &self.drr_db)
            .field("max_ir_s", &self.max_ir_s)
            .finish()
    }
}

/// Read the step's keys (see docs/recipe.md).
///
/// # Errors
/// A missing or unusable folder, a response that is empty, silent or too long, a room that
/// cannot exist (walls, gap, absorption, an RT60 no absorption gives), bad draws.
pub fn parse(params: &mut Params<'_>, ctx: &PlanContext<'_>) -> Result<Box<dyn Step>, RecipeError> {
    let normalise = match params.choice("normalise", &["direct", "energy"], "direct")? {
        "energy" => Normalise::Energy,
        _ => Normalise::Direct,
    };
    let shift = params.choice("align", &["trim", "shift"], "trim")? == "shift";
    let keep_tail = params.choice("tail", &["cut", "keep"], "cut")? == "keep";
    let drr_db = if params.has("drr_db") {
        Some(params.draw_within("drr_db", None, (-30.0, 40.0), "dB")?)
    } else {
        None
    };
    let max_ir_s = params.number("max_ir_s", DEFAULT_MAX_IR_S)?;
    if !(0.01..=20.0).contains(&max_ir_s) {
        return Err(params.error("max_ir_s", format!("{max_ir_s} s is not in [0.01, 20]")));
    }
    let irs = params.text("irs")?;
    let has_dims = ["width_m", "length_m", "height_m", "absorption", "rt60_s"]
        .iter()
        .any(|k| params.has(k));
    let (source, folder) = match (irs, has_dims) {
        (Some(_), true) => {
            return Err(params.error("irs", "give either a folder of measured responses (irs) or a simulated room (width_m, length_m, height_m, absorption or rt60_s), not both"));
        }
        (Some(folder), false) => (
            Source::Measured(load_measured(params, ctx, &folder, max_ir_s)?),
            folder,
        ),
        (None, _) => (
            Source::Simulated(Box::new(parse_simulated(params, max_ir_s)?)),
            String::new(),
        ),
    };
    Ok(Box::new(Room {
        source,
        folder,
        normalise,
        shift,
        keep_tail,
        drr_db,
        max_ir_s,
    }))
}

fn load_measured(
    params: &mut Params<'_>,
    ctx: &PlanContext<'_>,
    folder: &str,
    max_ir_s: f64,
) -> Result<Vec<Measured>, RecipeError> {
    let root: PathBuf = ctx.recipe_dir.join(folder);
    let bank = load_bank(&root, ctx.rate, 0.0).map_err(|e| params.error("irs", e))?;
    if let Some((file, reason)) = bank.skipped.first() {
        return Err(params.error("irs", format!("{}: {reason}", root.join(file).display())));
    }
    let mut out = Vec::with_capacity(bank.files.len());
    for f in &bank.files {
        let path = root.join(&f.rel_path);
        let secs = f.samples.len() as f64 / f64::from(ctx.rate);
        if secs > max_ir_s {
            return Err(params.error(
                "irs",
                format!(
                    "{}: response lasts {secs:.2} s, longer than max_ir_s = {max_ir_s} s",
                    path.display()
                ),
            ));
        }
        if peak(&f.samples) == 0.0 {
            return Err(params.error(
                "irs",
                format!("{}: the response is all zeros", path.display()),
            ));
        }
        out.push(Measured {
            rel_path: f.rel_path.clone(),
            path,
            samples: Arc::new(f.samples.clone()),
            rt60_s: rt60(&f.samples, ctx.rate),
        });
    }
    Ok(out)
}

fn parse_simulated(params: &mut Params<'_>, max_ir_s: f64) -> Result<Simulated, RecipeError> {
    let _ = max_ir_s;
    let mut dims = Vec::with_capacity(3);
    for key in ["width_m", "length_m", "height_m"] {
        dims.push(params.draw_within(key, None, (0.5, 200.0), "m")?);
    }
    let dims_m: [Draw; 3] = [dims[0].clone(), dims[1].clone(), dims[2].clone()];
    let wall_gap_m = params.number("wall_gap_m", 0.5)?;
    let smallest = dims_m
        .iter()
        .map(|d| d.bounds().0)
        .fold(f64::INFINITY, f64::min);
    if !(0.0..smallest / 2.0).contains(&wall_gap_m) {
        return Err(params.error("wall_gap_m", format!("{wall_gap_m} m leaves no room: the smallest dimension that can be drawn is {smallest} m, so the gap must be below {} m", smallest / 2.0)));
    }
    let absorption = match (params.has("absorption"), params.has("rt60_s")) {
        (true, true) => return Err(params.error("rt60_s", "give absorption or rt60_s, not both")),
        (false, false) => {
            return Err(params.error(
                "absorption",
                "missing: a simulated room needs absorption (0..1] or rt60_s",
            ));
        }
        (true, false) => {
            let a = params.draw("absorption", None)?;
            let (lo, hi) = a.bounds();
            if lo <= 0.0 || hi > 1.0 {
                return Err(params.error("absorption", format!("values from {lo} to {hi} can be drawn; an absorption coefficient lies in (0, 1]")));
            }
            Absorption::Alpha(a)
        }
        (false, true) => {
            let seconds = params.draw_within("rt60_s", None, (0.05, 10.0), "s")?;
            let eyring =
                params.choice("rt60_formula", &["eyring", "sabine"], "eyring")? == "eyring";
            // The hardest room to make short is the largest: check the largest dimensions
            // against the shortest RT60 (Sabine has a floor at absorption 1).
            let largest = [
                dims_m[0].bounds().1,
                dims_m[1].bounds().1,
                dims_m[2].bounds().1,
            ];
            let shortest = seconds.bounds().0;
            let check = if eyring {
                alpha_for_rt60_eyring(largest, shortest, SPEED_OF_SOUND)
            } else {
                alpha_for_rt60_sabine(largest, shortest, SPEED_OF_SOUND)
            };
            check.map_err(|e| params.error("rt60_s", e))?;
            Absorption::Rt60 { seconds, eyring }
        }
    };
    Ok(Simulated {
        dims_m,
        absorption,
        wall_gap_m,
        cache: RoomCache::default(),
    })
}

/// Energy within `DIRECT_WINDOW_S` of the peak, and the rest.
fn direct_and_reverberant(h: &[f32], peak_at: usize, rate: u32) -> (f64, f64) {
    let w = (DIRECT_WINDOW_S * f64::from(rate)).round() as usize;
    let (a, b) = (peak_at.saturating_sub(w), (peak_at + w + 1).min(h.len()));
    let e = |x: &[f32]| x.iter().map(|&s| f64::from(s) * f64::from(s)).sum::<f64>();
    (e(&h[a..b]), e(&h[..a]) + e(&h[b..]))
}

/// A take's response: its samples, its measured RT60 and its direct path.
type Response = (Arc<Vec<f32>>, Option<f64>, Direct);

/// Where the direct path of a response lies and how strong it is.
#[derive(Debug, Clone, Copy)]
struct Direct {
    /// Its sample: the largest sample of a measured response, the sample nearest the
    /// geometric delay of a simulated one.
    at: usize,
    /// Its amplitude: that sample's magnitude (measured), 1/(4π d) (simulated).
    amplitude: f64,
}

fn argmax_abs(h: &[f32]) -> usize {
    let mut best = 0;
    for (i, &s) in h.iter().enumerate() {
        if s.abs() > h[best].abs() {
            best = i;
        }
    }
    best
}

impl Room {
    /// A response shorter than its own direct path holds no sound: such a take is reported
    /// with the key that limits the length.
    fn check_direct_path(&self, at: &Placement) -> Result<(), StepError> {
        let delay_s = direct_delay_s(at, SPEED_OF_SOUND);
        if delay_s < self.max_ir_s {
            return Ok(());
        }
        Err(StepError {
            step: "room",
            reason: format!(
                "the direct path from source to microphone is {:.2} m ({delay_s:.3} s at \
                 {SPEED_OF_SOUND} m/s), not shorter than max_ir_s = {} s: raise max_ir_s \
                 or draw smaller rooms",
                distance_m(at),
                self.max_ir_s
            ),
        })
    }

    /// The response for this take, its RT60 and its direct path.
    fn response(
        &self,
        rng: &mut TakeRng,
        rate: u32,
        out: &mut StepOutput,
    ) -> Result<Response, StepError> {
        match &self.source {
            Source::Measured(irs) => {
                let ir = &irs[rng.index(irs.len())];
                out.drawn
                    .insert("irs".into(), Value::from(self.folder.clone()));
                out.drawn
                    .insert("file".into(), Value::from(ir.rel_path.clone()));
                let at = argmax_abs(&ir.samples);
                let amplitude = f64::from(ir.samples[at].abs());
                Ok((ir.samples.clone(), ir.rt60_s, Direct { at, amplitude }))
            }
            Source::Simulated(sim) => {
                let dims = [
                    sim.dims_m[0].sample(rng),
                    sim.dims_m[1].sample(rng),
                    sim.dims_m[2].sample(rng),
                ];
                let err = |e: crate::room::RoomError| StepError {
                    step: "room",
                    reason: e.to_string(),
                };
                let alpha = match &sim.absorption {
                    Absorption::Alpha(a) => a.sample(rng),
                    Absorption::Rt60 { seconds, eyring } => {
                        let t = seconds.sample(rng);
                        out.drawn.insert("rt60_s".into(), Value::from(t));
                        if *eyring {
                            alpha_for_rt60_eyring(dims, t, SPEED_OF_SOUND)
                        } else {
                            alpha_for_rt60_sabine(dims, t, SPEED_OF_SOUND)
                        }
                        .map_err(err)?
                    }
                };
                let room = Shoebox {
                    dims_m: dims,
                    absorption: alpha,
                };
                let u = [
                    rng.unit(),
                    rng.unit(),
                    rng.unit(),
                    rng.unit(),
                    rng.unit(),
                    rng.unit(),
                ];
                let at = place(&room, sim.wall_gap_m, u).map_err(err)?;
                self.check_direct_path(&at)?;
                out.drawn
                    .insert("dims_m".into(), Value::from(dims.to_vec()));
                out.drawn.insert("absorption".into(), Value::from(alpha));
                out.drawn
                    .insert("source_m".into(), Value::from(at.source_m.to_vec()));
                out.drawn
                    .insert("mic_m".into(), Value::from(at.mic_m.to_vec()));
                let h = sim
                    .cache
                    .get_or_make(&room, &at, rate, self.max_ir_s, SPEED_OF_SOUND, || {
                        impulse_response(&room, &at, rate, self.max_ir_s, SPEED_OF_SOUND)
                    })
                    .map_err(err)?;
                let t60 = rt60(&h, rate);
                // The geometry gives the direct path: its pulse is centred at d/c and has
                // amplitude 1/(4π d). (In a long room the largest sample can be a pile of
                // grazing reflections arriving tens of ms later.)
                let direct = Direct {
                    at: (direct_delay_s(&at, SPEED_OF_SOUND) * f64::from(rate)).round() as usize,
                    amplitude: 1.0 / (4.0 * std::f64::consts::PI * distance_m(&at)),
                };
                Ok((h, t60, direct))
            }
        }
    }
}

impl Step for Room {
    fn name(&self) -> &'static str {
        "room"
    }

    fn inputs(&self) -> Vec<PathBuf> {
        match &self.source {
            Source::Measured(m) => m.iter().map(|m| m.path.clone()).collect(),
            Source::Simulated(_) => Vec::new(),
        }
    }

    fn apply(
        &self,
        audio: Audio,
        _take: &TakeContext<'_>,
        rng: &mut TakeRng,
    ) -> Result<StepOutput, StepError> {
        let rate = audio.rate;
        let n = audio.samples.len();
        let d_in = audio.duration();
        let mut out = StepOutput::new(
            Audio {
                rate,
                samples: Vec::new(),
            },
            TimeMap::identity(d_in),
        );
        let drr_draw = self.drr_db.as_ref().map(|d| d.sample(rng));
        let (h, t60, direct) = self.response(rng, rate, &mut out)?;
        let mut h: Vec<f32> = h.as_ref().clone();
        let peak_at = direct.at;
        let (e_direct, e_reverb) = direct_and_reverberant(&h, peak_at, rate);
        if let Some(drr) = drr_draw {
            out.drawn.insert("drr_db".into(), Value::from(drr));
            if e_reverb > 0.0 && e_direct > 0.0 {
                let g = (e_direct / (e_reverb * 10f64.powf(drr / 10.0))).sqrt() as f32;
                let w = (DIRECT_WINDOW_S * f64::from(rate)).round() as usize;
                let (a, b) = (peak_at.saturating_sub(w), (peak_at + w + 1).min(h.len()));
                for (i, s) in h.iter_mut().enumerate() {
                    if i < a || i >= b {
                        *s *= g;
                    }
                }
            }
        }
        if !(direct.amplitude.is_finite() && direct.amplitude > 0.0) {
            return Err(StepError {
                step: "room",
                reason: format!(
                    "the response's direct path has amplitude {}",
                    direct.amplitude
                ),
            });
        }
        let scale = match self.normalise {
            Normalise::Direct => 1.0 / direct.amplitude,
            Normalise::Energy => {
                1.0 / h
                    .iter()
                    .map(|&s| f64::from(s) * f64::from(s))
                    .sum::<f64>()
                    .sqrt()
            }
        };
        for s in &mut h {
            *s = (f64::from(*s) * scale) as f32;
        }
        let (e_d, e_r) = direct_and_reverberant(&h, peak_at, rate);
        let wet = convolve(&audio.samples, &h);
        // Direct-path delay, trimmed or kept; the tail past the input cut or kept.
        let delay = peak_at;
        let (start, len) = match (self.shift, self.keep_tail) {
            (false, false) => (delay, n),
            (false, true) => (delay, wet.len() - delay),
            (true, false) => (0, n + delay),
            (true, true) => (0, wet.len()),
        };
        // Reverberation adds energy: never past full scale.
        let (samples, k) = scale_under(&wet[start..start + len], 1.0, FULL_SCALE);
        let scaled_db = 20.0 * k.log10();
        let delay_s = delay as f64 / f64::from(rate);
        let d_out = samples.len() as f64 / f64::from(rate);
        out.map = if self.shift {
            TimeMap::from_knots(vec![(0.0, delay_s), (d_in, d_in + delay_s)]).map_err(|e| {
                StepError {
                    step: "room",
                    reason: e.to_string(),
                }
            })?
        } else {
            TimeMap::identity(d_in)
        };
        out.audio = Audio { rate, samples };
        out.measured
            .insert("rt60_s".into(), t60.map_or(Value::Null, Value::from));
        out.measured.insert(
            "drr_db".into(),
            if e_r > 0.0 {
                Value::from(10.0 * (e_d / e_r).log10())
            } else {
                Value::Null
            },
        );
        out.measured
            .insert("direct_delay_s".into(), Value::from(delay_s));
        out.measured.insert(
            if self.shift {
                "shifted_by_s"
            } else {
                "trimmed_s"
            }
            .into(),
            Value::from(delay_s),
        );
        out.measured.insert("duration_s".into(), Value::from(d_out));
        out.measured
            .insert("scaled_db".into(), Value::from(scaled_db));
        Ok(out)
    }
}
