//! `slice`: long recordings into training clips, slice only in the silence between words.
//!
//! Per clip: check the labels, decode, check them against the audio's length, find the
//! stretches no slice may split ([`units`]), choose the slices ([`plan`], whose doc states the
//! rule), then slice the audio at whole samples, at the source's own rate, and move the
//! labels to each slice's timeline ([`labels`]). A clip without timings (bare `text`) becomes
//! one slice when its length is within the limits.
//!
//! Clips run in parallel, and every pad is drawn from a stream fixed by (seed, clip id,
//! gap), so the output is byte-identical for any thread count. Files are written under a
//! temporary name and renamed. Speech that cannot be sliced within the limits goes to
//! `left_out.jsonl`; a clip that cannot be processed at all goes to `rejects.jsonl`, and
//! the run goes on. A recording is decoded front to back as its slices need it
//! ([`window`]), so a worker holds about one slice of audio, however long the recording.

mod clip;
pub mod labels;
pub mod plan;
pub mod units;
mod window;

use std::path::{Path, PathBuf};
use std::time::Instant;

use rayon::prelude::*;
use serde::Serialize;

use crate::audio::{ChannelPolicy, SampleFormat};
use crate::files::{remove_stale_temp_files, sync_dir};
use crate::outdir::earlier::JOURNAL_NAME;
use crate::outdir::{Earlier, FolderLock, LOCK_NAME, Targets, refuse_overwrite};
use crate::run::{Failure, MANIFEST_NAME, REJECTS_NAME, Reject, RunError, write_atomically};
use crate::transcript::{read_manifest, write_manifest};
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

/// Slice every clip of a manifest.
///
/// # Errors
/// Only run-wide failures (manifest unreadable, output not writable, no threads); a bad
/// clip is a reject and a stretch that does not fit is left out, neither is an error.
pub fn slice(spec: &SliceSpec<'_>) -> Result<SliceSummary, RunError> {
    let started = Instant::now();
    let manifest = read_manifest(spec.input).map_err(|source| RunError::Manifest {
        path: spec.input.to_path_buf(),
        source,
    })?;
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
    let audio: Vec<(String, PathBuf)> = manifest
        .entries
        .iter()
        .map(|e| {
            (
                format!("audio of clip `{}`", e.clip.id),
                manifest.base().join(&e.clip.audio),
            )
        })
        .collect();
    let inputs = audio.iter().map(|(w, p)| (w.clone(), p.as_path()));
    refuse_overwrite(
        &targets,
        [("input manifest".to_string(), spec.input)]
            .into_iter()
            .chain(inputs),
    )?;
    let _lock = FolderLock::acquire(spec.out)?;
    let dir = spec.out.join(SLICES_DIR);
    std::fs::create_dir_all(&dir).map_err(RunError::output(&dir))?;
    for d in [spec.out, &dir] {
        remove_stale_temp_files(d).map_err(RunError::output(d))?;
    }
    // Slices an earlier run wrote here (with other limits, say) that this run does not make
    // again are removed once the new manifest is in place, even after a kill in between.
    let earlier = Earlier::begin(
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
    let threads = spec.threads.unwrap_or(0);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| RunError::Threads {
            threads,
            reason: e.to_string(),
        })?;
    let results: Vec<_> = pool.install(|| {
        manifest
            .entries
            .par_iter()
            .map(|entry| match clip::slice_clip(spec, &manifest, entry) {
                Ok(done) => Ok(Ok(done)),
                Err(Failure::Reject(r)) => Ok(Err(r)),
                Err(Failure::Stop(e)) => Err(e),
            })
            .collect::<Result<Vec<_>, RunError>>()
    })?;

    let mut summary = SliceSummary {
        clips_in: manifest.entries.len() + manifest.problems.len(),
        ..SliceSummary::default()
    };
    let mut rejects: Vec<Reject> = manifest
        .problems
        .iter()
        .cloned()
        .map(Reject::from)
        .collect();
    let (mut slices, mut left_out) = (Vec::new(), Vec::new());
    for result in results {
        match result {
            Ok(done) => {
                summary.clips_sliced += 1;
                summary.slices += done.slices.len();
                summary.seconds_out += done.seconds_out;
                summary.speech_kept += done.speech_kept;
                summary.speech_left_out += done.speech_left_out;
                slices.extend(done.slices);
                left_out.extend(done.left_out);
            }
            Err(r) => rejects.push(r),
        }
    }
    rejects.sort_by_key(|r| r.line);
    summary.rejected = rejects.len();
    summary.left_out = left_out.len();
    sync_dir(&dir).map_err(RunError::output(&dir))?;
    write_atomically(&spec.out.join(MANIFEST_NAME), |w| {
        write_manifest(w, &slices)
    })?;
    write_jsonl(&spec.out.join(LEFT_OUT_NAME), &left_out)?;
    write_jsonl(&spec.out.join(REJECTS_NAME), &rejects)?;
    let kept: std::collections::HashSet<&str> = slices.iter().map(|c| c.audio.as_str()).collect();
    earlier.finish(&kept).map_err(RunError::output(spec.out))?;
    summary.wall_seconds = started.elapsed().as_secs_f64();
    Ok(summary)
}

fn write_jsonl<T: Serialize>(path: &Path, records: &[T]) -> Result<(), RunError> {
    use std::io::Write;
    write_atomically(path, |w| {
        for r in records {
            serde_json::to_writer(&mut *w, r)?;
            w.write_all(b"\n")?;
        }
        Ok(())
    })
}
