//! `slice`: long recordings into training clips, slice only in the silence between words.
//!
//! Per clip: check the labels, decode, check them against the audio's length, find the
//! stretches no slice may split ([`units`]), choose the slices ([`plan`], whose doc states the
//! rule), then slice the audio at whole samples, at the source's own rate, and move the
//! labels to each slice's timeline ([`labels`]). A clip without timings (bare `text`) becomes
//! one slice when its length is within the limits.
//!
//! Clips run in parallel on the batch engine `run` uses, and every pad is drawn from a
//! stream fixed by (seed, clip id, gap), so the output is byte-identical for any thread
//! count. Files are written under a
//! temporary name and renamed. Speech that cannot be sliced within the limits goes to
//! `left_out.jsonl`; a clip that cannot be processed at all goes to `rejects.jsonl`, and
//! the run goes on. A recording is decoded front to back as its slices need it
//! ([`window`]), so a worker holds about one slice of audio, however long the recording.

mod clip;
pub mod labels;
pub mod plan;
pub mod units;
mod window;

use std::collections::HashSet;
use std::path::Path;
use std::time::Instant;

use serde::Serialize;

use crate::audio::{ChannelPolicy, SampleFormat};
use crate::batch::{self, Batch, JsonLines};
use crate::files::{remove_stale_temp_files, sync_dir};
use crate::outdir::earlier::JOURNAL_NAME;
use crate::outdir::{Earlier, FolderLock, LOCK_NAME, Targets};
use crate::run::{Event, MANIFEST_NAME, REJECTS_NAME, RunError};
use crate::transcript::audio_base;
use plan::{Limits, PadRange, PlanSpec, Reason};

/// Folder for slice audio inside the output folder.
pub const SLICES_DIR: &str = "slices";
/// Name of the left-out report inside the output folder.
pub const LEFT_OUT_NAME: &str = "left_out.jsonl";

/// What to slice and how.
#[derive(Debug, Clone)]
pub struct SliceSpec<'a> {
    /// Input manifest.
    pub input: &'a Path,
    /// Output folder (created if needed).
    pub out: &'a Path,
    /// Shortest and longest slice, padding included.
    pub limits: Limits,
    /// Padding drawn per side.
    pub pad: PadRange,
    /// Seed of the pad draws.
    pub seed: u64,
    /// Sample format of the written slices.
    pub format: SampleFormat,
    /// How a multichannel source becomes one channel.
    pub channels: ChannelPolicy,
    /// Worker threads; `None` for one per core.
    pub threads: Option<usize>,
}

impl SliceSpec<'_> {
    fn plan(&self) -> PlanSpec {
        PlanSpec {
            limits: self.limits,
            pad: self.pad,
            seed: self.seed,
        }
    }
}

/// One line of `left_out.jsonl`: a stretch of a source that no slice holds.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct LeftOutRecord {
    /// Source clip id.
    pub source: String,
    /// Line of the input manifest.
    pub line: usize,
    /// Start in the source, seconds (the labels' own times).
    pub start: f64,
    /// End in the source, seconds.
    pub end: f64,
    /// What was said there: the texts of the lines, or parts of lines, it holds.
    pub text: String,
    /// `too_long` or `too_short`.
    pub reason: Reason,
    /// The reason in words, with the lengths involved.
    pub detail: String,
}

/// Figures for the closing summary.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SliceSummary {
    /// Manifest lines read.
    pub clips_in: usize,
    /// Clips processed (possibly into no slices).
    pub clips_sliced: usize,
    /// Clips (and unreadable lines) in `rejects.jsonl`.
    pub rejected: usize,
    /// Slices written.
    pub slices: usize,
    /// Seconds of audio written.
    pub seconds_out: f64,
    /// Seconds of speech inside the slices: the union of the label spans, widened to whole
    /// samples; an untimed clip counts whole.
    pub speech_kept: f64,
    /// Stretches in `left_out.jsonl`.
    pub left_out: usize,
    /// Seconds of speech in them.
    pub speech_left_out: f64,
    /// Wall-clock seconds.
    pub wall_seconds: f64,
}

/// Slice every clip of a manifest, through the batch engine `run` uses: the manifest is
/// read as a stream, clips are sliced in parallel a bounded window at a time, and the
/// manifest, left-out stretches and rejects are written in input order as each window
/// finishes, so memory does not grow with the number of clips.
///
/// # Errors
/// Only run-wide failures (manifest unreadable, output not writable, no threads); a bad
/// clip is a reject and a stretch that does not fit is left out, neither is an error.
pub fn slice(
    spec: &SliceSpec<'_>,
    on_event: &(dyn Fn(Event) + Sync),
) -> Result<SliceSummary, RunError> {
    let started = Instant::now();
    let targets = Targets::new(
        spec.out,
        &[
            MANIFEST_NAME,
            REJECTS_NAME,
            LEFT_OUT_NAME,
            LOCK_NAME,
            JOURNAL_NAME,
        ],
        &[SLICES_DIR],
    );
    let named = [("input manifest".to_string(), spec.input.to_path_buf())];
    let survey = batch::survey(spec.input, &targets, named, false)?;
    let _lock = FolderLock::acquire(spec.out)?;
    let dir = spec.out.join(SLICES_DIR);
    std::fs::create_dir_all(&dir).map_err(RunError::output(&dir))?;
    for d in [spec.out, &dir] {
        remove_stale_temp_files(d).map_err(RunError::output(d))?;
    }
    // Slices an earlier run wrote here (with other limits, say) that this run does not make
    // again are removed once the new manifest is in place, even after a kill in between.
    let mut earlier = Earlier::begin(
        spec.out,
        &[SLICES_DIR],
        MANIFEST_NAME,
        &[REJECTS_NAME, LEFT_OUT_NAME],
        // Only slice records (with their `slice` field) name files a slicing run wrote.
        |c| {
            if c.extra.contains_key("slice") {
                vec![c.audio.clone()]
            } else {
                Vec::new()
            }
        },
    )
    .map_err(RunError::output(spec.out))?;
    let pool = batch::thread_pool(spec.threads)?;
    let mut slices_out = JsonLines::create(spec.out.join(MANIFEST_NAME))?;
    let mut left_out_out = JsonLines::create(spec.out.join(LEFT_OUT_NAME))?;
    let mut rejects_out = JsonLines::create(spec.out.join(REJECTS_NAME))?;
    let base = audio_base(spec.input);
    let mut summary = SliceSummary::default();
    let engine = Batch {
        input: spec.input,
        survey: &survey,
        clips: survey.clips,
        pool: &pool,
        on_event,
    };
    summary.clips_in = engine.for_each_clip(
        &|_| true,
        &|entry| clip::slice_clip(spec, base, entry),
        &mut |outcome| {
            match outcome {
                Ok(done) => {
                    summary.add(&done);
                    for c in &done.slices {
                        earlier.keep(&c.audio);
                    }
                    slices_out.write_all(&done.slices)?;
                    left_out_out.write_all(&done.left_out)?;
                }
                Err(reject) => {
                    summary.rejected += 1;
                    rejects_out.write(&reject)?;
                }
            }
            Ok(())
        },
    )?;
    sync_dir(&dir).map_err(RunError::output(&dir))?;
    slices_out.commit()?;
    left_out_out.commit()?;
    rejects_out.commit()?;
    earlier
        .finish(&HashSet::new())
        .map_err(RunError::output(spec.out))?;
    summary.wall_seconds = started.elapsed().as_secs_f64();
    Ok(summary)
}

impl SliceSummary {
    /// Count a sliced clip.
    fn add(&mut self, done: &clip::ClipOutcome) {
        self.clips_sliced += 1;
        self.slices += done.slices.len();
        self.seconds_out += done.seconds_out;
        self.speech_kept += done.speech_kept;
        self.speech_left_out += done.speech_left_out;
        self.left_out += done.left_out.len();
    }
}
