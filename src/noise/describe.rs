//! Describing a bank: a few figures per file that say whether it is fit to mix under speech
//! (how long, how loud, how bright, how steady), and warnings about files that look wrong.
//!
//! Conventions, used by every figure here:
//! - Levels are dBFS RMS: `10 * log10(mean of x²)` with full scale 1.0, computed in f64.
//!   A full-scale sine reads -3.01 dBFS, a full-scale square wave 0 dBFS, digital silence
//!   minus infinity.
//! - Frames for level over time are [`FRAME_SECONDS`] long, back to back from the first
//!   sample; a last partial frame is left out (a file shorter than one frame is one frame).
//! - The spectral centroid is the power-weighted mean frequency of the averaged power
//!   spectrum: frames of [`FFT_LEN`] samples every [`FFT_HOP`] samples, each multiplied by a
//!   periodic Hann window `0.5 - 0.5 cos(2 pi n / N)`, power `|X_k|²` averaged over frames
//!   and made one-sided (bins `0 < k < N/2` doubled, as they also stand for the negative
//!   frequencies), then `sum(f_k P_k) / sum(P_k)` over bins `k = 0 ..= N/2` with
//!   `f_k = k * rate / N`.
//!   A file shorter than one FFT frame is one zero-padded frame; samples after the last
//!   whole frame are left out (fewer than [`FFT_HOP`]).

use std::fmt;
use std::sync::Arc;

use rayon::prelude::*;
use realfft::num_complex::Complex;
use realfft::{RealFftPlanner, RealToComplex};

use super::NoiseBank;
use crate::dsp::level::power;

/// Length of a level frame in seconds (rounded to whole samples, at least one).
pub const FRAME_SECONDS: f64 = 0.1;
/// A level frame below this many dBFS counts as quiet.
pub const QUIET_DBFS: f64 = -60.0;
/// Frame levels are floored here before their spread is taken, so digital silence counts
/// as very quiet instead of minus infinity. It is about the quantisation noise of 16-bit
/// PCM: `20 log10(2^-15 / sqrt(12))` = -101.1 dBFS (textbook formula).
pub const FRAME_FLOOR_DBFS: f64 = -100.0;
/// A file more than half of whose frames are quiet is flagged as mostly silent.
pub const MOSTLY_SILENT_FRACTION: f64 = 0.5;
/// A file this many dB above the median file level is flagged as much louder than the rest.
pub const LOUDER_THAN_MEDIAN_DB: f64 = 10.0;
/// FFT length for the spectral centroid.
pub const FFT_LEN: usize = 1024;
/// Hop between FFT frames (half the length).
pub const FFT_HOP: usize = FFT_LEN / 2;

/// The figures of one usable file.
#[derive(Debug, Clone, PartialEq)]
pub struct FileFigures {
    /// Path relative to the bank folder, `/`-separated.
    pub rel_path: String,
    /// Category (first-level subfolder, or `"."`).
    pub category: String,
    /// In the held-out part.
    pub held_out: bool,
    /// Length in seconds at the bank's rate.
    pub duration_s: f64,
    /// Level over the whole file, dBFS RMS (minus infinity for digital silence).
    pub level_dbfs: f64,
    /// Spectral centroid in Hz; `None` when the file holds no power at all.
    pub centroid_hz: Option<f64>,
    /// How unsteady the file is: the population standard deviation, in dB, of its frame
    /// levels (frames of [`FRAME_SECONDS`], floored at [`FRAME_FLOOR_DBFS`]). A steady hum
    /// or fan reads well under 1 dB; a beeper switching on and off reads tens of dB.
    pub level_spread_db: f64,
    /// Fraction of frames below [`QUIET_DBFS`], in [0, 1].
    pub quiet_fraction: f64,
}

/// Something in a bank that deserves a look before it is mixed under speech.
#[derive(Debug, Clone, PartialEq)]
pub enum Warning {
    /// More than [`MOSTLY_SILENT_FRACTION`] of the file's frames are below [`QUIET_DBFS`].
    MostlySilent {
        /// The file.
        rel_path: String,
        /// Fraction of quiet frames.
        quiet_fraction: f64,
    },
    /// The file is more than [`LOUDER_THAN_MEDIAN_DB`] above the bank's median file level.
    MuchLouder {
        /// The file.
        rel_path: String,
        /// Its level, dBFS.
        level_dbfs: f64,
        /// The median it is compared with, dBFS.
        median_dbfs: f64,
    },
    /// The file could not be used (see [`NoiseBank::skipped`]).
    Skipped {
        /// The file.
        rel_path: String,
        /// Why.
        reason: String,
    },
}

impl Warning {
    /// The file the warning is about.
    pub fn rel_path(&self) -> &str {
        match self {
            Warning::MostlySilent { rel_path, .. }
            | Warning::MuchLouder { rel_path, .. }
            | Warning::Skipped { rel_path, .. } => rel_path,
        }
    }
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Warning::MostlySilent {
                rel_path,
                quiet_fraction,
            } => write!(
                f,
                "{rel_path}: mostly silent ({:.0} % of {:.0} ms frames below {QUIET_DBFS} dBFS)",
                quiet_fraction * 100.0,
                FRAME_SECONDS * 1000.0
            ),
            Warning::MuchLouder {
                rel_path,
                level_dbfs,
                median_dbfs,
            } => write!(
                f,
                "{rel_path}: much louder than the rest ({level_dbfs:.1} dBFS, {:.1} dB above \
                 the median file level {median_dbfs:.1} dBFS)",
                level_dbfs - median_dbfs
            ),
            Warning::Skipped { rel_path, reason } => write!(f, "{rel_path}: skipped: {reason}"),
        }
    }
}

/// Totals over one part of the bank.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PartTotals {
    /// Usable files.
    pub files: usize,
    /// Their length in seconds.
    pub seconds: f64,
}

/// A description of a whole bank.
#[derive(Debug, Clone, PartialEq)]
pub struct BankReport {
    /// Sample rate of the bank.
    pub rate: u32,
    /// One entry per usable file, in the bank's order (sorted by path).
    pub files: Vec<FileFigures>,
    /// The bank's skipped files with their reasons.
    pub skipped: Vec<(String, String)>,
    /// The median file level in dBFS over the files that are not mostly silent (a silent
    /// file says nothing about how loud the site is); `None` when every file is.
    pub median_level_dbfs: Option<f64>,
    /// Warnings: per file in file order (mostly silent, then much louder), then one per
    /// skipped file.
    pub warnings: Vec<Warning>,
    /// The training part.
    pub train: PartTotals,
    /// The held-out part.
    pub held_out: PartTotals,
    /// Number of categories among usable files.
    pub categories: usize,
}

/// Measure every file of `bank` (in parallel; the result does not depend on the thread
/// count) and collect warnings. See the module documentation for the conventions.
pub fn describe(bank: &NoiseBank) -> BankReport {
    let fft = RealFftPlanner::<f64>::new().plan_fft_forward(FFT_LEN);
    let window: Vec<f64> = (0..FFT_LEN)
        .map(|n| 0.5 - 0.5 * (2.0 * std::f64::consts::PI * n as f64 / FFT_LEN as f64).cos())
        .collect();
    let files: Vec<FileFigures> = bank
        .files
        .par_iter()
        .map_init(
            || Spectrum::new(Arc::clone(&fft)),
            |spec, f| {
                let (level_spread_db, quiet_fraction) = frame_levels(&f.samples, bank.rate);
                FileFigures {
                    rel_path: f.rel_path.clone(),
                    category: f.category.clone(),
                    held_out: f.held_out,
                    duration_s: f.samples.len() as f64 / f64::from(bank.rate),
                    level_dbfs: 10.0 * power(&f.samples).log10(),
                    centroid_hz: spec.centroid(&f.samples, &window, bank.rate),
                    level_spread_db,
                    quiet_fraction,
                }
            },
        )
        .collect();

    let mostly_silent = |f: &FileFigures| f.quiet_fraction > MOSTLY_SILENT_FRACTION;
    let mut levels: Vec<f64> = files
        .iter()
        .filter(|f| !mostly_silent(f))
        .map(|f| f.level_dbfs)
        .collect();
    levels.sort_by(f64::total_cmp);
    let median_level_dbfs = match levels.len() {
        0 => None,
        n if n % 2 == 1 => Some(levels[n / 2]),
        n => Some((levels[n / 2 - 1] + levels[n / 2]) / 2.0),
    };

    let mut warnings = Vec::new();
    let mut train = PartTotals::default();
    let mut held_out = PartTotals::default();
    for f in &files {
        let part = if f.held_out {
            &mut held_out
        } else {
            &mut train
        };
        part.files += 1;
        part.seconds += f.duration_s;
        if mostly_silent(f) {
            warnings.push(Warning::MostlySilent {
                rel_path: f.rel_path.clone(),
                quiet_fraction: f.quiet_fraction,
            });
        } else if let Some(m) =
            median_level_dbfs.filter(|m| f.level_dbfs > m + LOUDER_THAN_MEDIAN_DB)
        {
            warnings.push(Warning::MuchLouder {
                rel_path: f.rel_path.clone(),
                level_dbfs: f.level_dbfs,
                median_dbfs: m,
            });
        }
    }
    for (rel_path, reason) in &bank.skipped {
        warnings.push(Warning::Skipped {
            rel_path: rel_path.clone(),
            reason: reason.clone(),
        });
    }
    BankReport {
        rate: bank.rate,
        categories: bank.categories().len(),
        files,
        skipped: bank.skipped.clone(),
        median_level_dbfs,
        warnings,
        train,
        held_out,
    }
}

/// `(population standard deviation of floored frame levels in dB, fraction of quiet frames)`.
fn frame_levels(samples: &[f32], rate: u32) -> (f64, f64) {
    let len = ((FRAME_SECONDS * f64::from(rate)).round() as usize).max(1);
    let levels: Vec<f64> = if samples.len() < len {
        vec![10.0 * power(samples).log10()]
    } else {
        samples
            .chunks_exact(len)
            .map(|c| 10.0 * power(c).log10())
            .collect()
    };
    let n = levels.len() as f64;
    let quiet = levels.iter().filter(|&&l| l < QUIET_DBFS).count() as f64 / n;
    let floored: Vec<f64> = levels.iter().map(|l| l.max(FRAME_FLOOR_DBFS)).collect();
    let mean = floored.iter().sum::<f64>() / n;
    let var = floored.iter().map(|l| (l - mean) * (l - mean)).sum::<f64>() / n;
    (var.sqrt(), quiet)
}

/// One worker's FFT buffers around the shared plan.
struct Spectrum {
    fft: Arc<dyn RealToComplex<f64>>,
    input: Vec<f64>,
    output: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
    power: Vec<f64>,
}

impl Spectrum {
    fn new(fft: Arc<dyn RealToComplex<f64>>) -> Self {
        Spectrum {
            input: fft.make_input_vec(),
            output: fft.make_output_vec(),
            scratch: fft.make_scratch_vec(),
            power: vec![0.0; FFT_LEN / 2 + 1],
            fft,
        }
    }

    /// Spectral centroid in Hz (see the module documentation), `None` with no power.
    fn centroid(&mut self, samples: &[f32], window: &[f64], rate: u32) -> Option<f64> {
        self.power.fill(0.0);
        let mut start = 0;
        loop {
            let frame = &samples[start..samples.len().min(start + FFT_LEN)];
            for (i, x) in self.input.iter_mut().enumerate() {
                *x = frame.get(i).map_or(0.0, |&s| f64::from(s)) * window[i];
            }
            self.fft
                .process_with_scratch(&mut self.input, &mut self.output, &mut self.scratch)
                .expect("buffers made by the plan have the plan's lengths");
            for (p, c) in self.power.iter_mut().zip(&self.output) {
                *p += c.norm_sqr();
            }
            start += FFT_HOP;
            if start + FFT_LEN > samples.len() {
                break;
            }
        }
        // One-sided: every bin but DC and Nyquist also holds its negative frequency.
        // Averaging over frames scales numerator and denominator alike: the sums suffice.
        for p in &mut self.power[1..FFT_LEN / 2] {
            *p *= 2.0;
        }
        let total: f64 = self.power.iter().sum();
        if total <= 0.0 || !total.is_finite() {
            return None;
        }
        let bin_hz = f64::from(rate) / FFT_LEN as f64;
        let weighted: f64 = self
            .power
            .iter()
            .enumerate()
            .map(|(k, p)| k as f64 * bin_hz * p)
            .sum();
        Some(weighted / total)
    }
}
