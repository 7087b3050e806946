//! The batch engine: clips in, takes out, labels rewritten, nothing half-written.
//!
//! Clips are processed in parallel (rayon); each take is fixed by its seed alone, so the
//! output is byte-identical whatever the thread count. Audio is written under a temporary
//! name and renamed; a clip that fails has its finished takes removed and goes to
//! `rejects.jsonl` with the reason, and the run goes on. The manifest and rejects are
//! written in input order at the end, also by rename.

use std::collections::HashSet;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Instant;

use rayon::prelude::*;
use serde::Serialize;

use crate::audio::SampleFormat;
use crate::files::{self, WriteError, file_stem, write_wav_atomically};
use crate::outdir::earlier::JOURNAL_NAME;
use crate::outdir::{
    Earlier, FolderLock, LOCK_NAME, LockError, Overwrite, Targets, refuse_overwrite,
};
use crate::recipe::Plan;
use crate::take::{load_source, make_take, take_file};
use crate::transcript::{Clip, Entry, Manifest, Problem, read_manifest, validate, write_manifest};
use serde_json::Value;

/// Name of the output manifest inside the output folder.
pub const MANIFEST_NAME: &str = "manifest.jsonl";
/// Name of the rejects file inside the output folder.
pub const REJECTS_NAME: &str = "rejects.jsonl";
/// Folder for take audio inside the output folder.
pub const TAKES_DIR: &str = "takes";
/// Folder of per-clip completion records inside the output folder: what lets a rerun of
/// the same command skip the clips an interrupted run already finished.
pub const DONE_DIR: &str = ".done";

/// What the engine tells its caller while it works (the caller decides how to show it).
#[derive(Debug, Clone, Copy)]
pub enum Event {
    /// Work is about to start on this many clips.
    Started {
        /// Clips that will be processed.
        clips: usize,
    },
    /// One clip is finished (written or rejected).
    ClipDone {
        /// Whether it was written.
        ok: bool,
    },
}

/// Figures for the closing summary.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Summary {
    /// Manifest lines read.
    pub clips_in: usize,
    /// Clips whose takes were all written (this run or an earlier one).
    pub clips_done: usize,
    /// Of those, clips found finished by an earlier run of the same plan and kept.
    pub clips_resumed: usize,
    /// Clips (and unreadable lines) in `rejects.jsonl`.
    pub rejected: usize,
    /// Takes in the manifest (made now or kept).
    pub takes: usize,
    /// Of those, takes kept from an earlier run.
    pub takes_kept: usize,
    /// Seconds of source audio in the clips done.
    pub seconds_in: f64,
    /// Of those, seconds in the clips kept.
    pub seconds_in_kept: f64,
    /// Seconds of take audio in the manifest.
    pub seconds_out: f64,
    /// Of those, seconds in the takes kept.
    pub seconds_out_kept: f64,
    /// Files of earlier runs into this folder that this run did not make again, removed.
    pub removed: usize,
    /// Wall-clock seconds of the run.
    pub wall_seconds: f64,
}

impl Summary {
    /// Takes made by this run.
    pub fn takes_made(&self) -> usize {
        self.takes - self.takes_kept
    }

    /// Seconds of take audio made by this run.
    pub fn seconds_out_made(&self) -> f64 {
        self.seconds_out - self.seconds_out_kept
    }

    /// Take audio made per wall-clock second (kept takes cost no work and are not
    /// counted); 0 for a run that took no time.
    pub fn made_per_second(&self) -> f64 {
        if self.wall_seconds > 0.0 {
            self.seconds_out_made() / self.wall_seconds
        } else {
            0.0
        }
    }
}

/// A failure that stops the whole run (per-clip failures never do).
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    /// The input manifest cannot be read at all.
    #[error("{path}: cannot read manifest: {source}")]
    Manifest {
        /// The manifest.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// The output folder or a file in it cannot be written (a full disk among others).
    #[error("{path}: cannot write: {source}")]
    Output {
        /// The file or folder.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// Another process is writing into the output folder.
    #[error(transparent)]
    Locked(#[from] LockError),
    /// The output folder would overwrite one of the run's inputs; nothing was written.
    #[error(transparent)]
    WouldOverwrite(#[from] Overwrite),
    /// The thread pool could not be built.
    #[error("cannot start {threads} threads: {reason}")]
    Threads {
        /// Threads asked for.
        threads: usize,
        /// Why.
        reason: String,
    },
}

impl RunError {
    /// An error of writing into the output folder.
    pub(crate) fn output(path: &Path) -> impl FnOnce(std::io::Error) -> RunError {
        let path = path.to_path_buf();
        move |source| RunError::Output { path, source }
    }
}

/// Where a run reads and writes.
#[derive(Debug, Clone)]
pub struct RunSpec<'a> {
    /// The checked recipe.
    pub plan: &'a Plan,
    /// The recipe file the plan was read from, when there is one (never overwritten).
    pub recipe: Option<&'a Path>,
    /// Input manifest.
    pub input: &'a Path,
    /// Output folder (created if needed).
    pub out: &'a Path,
    /// Worker threads; `None` for one per core.
    pub threads: Option<usize>,
}

/// One line of `rejects.jsonl`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Reject {
    /// Line of the input manifest.
    pub line: usize,
    /// Clip id, when the line got that far.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub id: Option<String>,
    /// The field at fault, when one is.
    #[serde(skip_serializing_if = "String::is_empty")]
    pub field: String,
    /// What went wrong.
    pub reason: String,
}

impl From<Problem> for Reject {
    fn from(p: Problem) -> Self {
        Reject {
            line: p.line,
            id: None,
            field: p.field,
            reason: p.message,
        }
    }
}

/// Run a plan over a manifest.
///
/// Before anything is written: the output folder is refused when it would overwrite an input
/// (the manifest, its audio, the recipe, the files the recipe reads), and locked
/// ([`FolderLock`]) for the whole run, so a second run into it is refused at once. Then the
/// earlier manifest is set aside ([`Earlier`]), clips run, the new manifest and rejects are
/// written, and files of earlier runs that this run did not make again are removed. Every
/// file is flushed to disk before it is renamed into place.
///
/// # Errors
/// Only run-wide failures; a bad clip is a reject, not an error. A write that fails for lack
/// of space (or any other failure of the file system) stops the run: the clips finished so
/// far are kept for the next run of the same command.
pub fn run(spec: &RunSpec<'_>, on_event: &(dyn Fn(Event) + Sync)) -> Result<Summary, RunError> {
    let started = Instant::now();
    let manifest = read_manifest(spec.input).map_err(|source| RunError::Manifest {
        path: spec.input.to_path_buf(),
        source,
    })?;
    let plan_inputs = spec.plan.inputs();
    let targets = Targets::new(
        spec.out,
        &[MANIFEST_NAME, REJECTS_NAME, LOCK_NAME, JOURNAL_NAME],
        &[TAKES_DIR, DONE_DIR],
    );
    let audio: Vec<(String, PathBuf)> = manifest
        .entries
        .iter()
        .map(|e| {
            let what = format!("audio of clip `{}` (line {})", e.clip.id, e.line);
            (what, manifest.base().join(&e.clip.audio))
        })
        .collect();
    let named = [("input manifest".to_string(), spec.input)]
        .into_iter()
        .chain(spec.recipe.map(|r| ("recipe".to_string(), r)))
        .chain(
            plan_inputs
                .iter()
                .map(|p| ("file the recipe reads".into(), p.as_path())),
        )
        .chain(audio.iter().map(|(w, p)| (w.clone(), p.as_path())));
    refuse_overwrite(&targets, named)?;
    let _lock = FolderLock::acquire(spec.out)?;

    let takes_dir = spec.out.join(TAKES_DIR);
    let done_dir = spec.out.join(DONE_DIR);
    for dir in [&takes_dir, &done_dir] {
        std::fs::create_dir_all(dir).map_err(RunError::output(dir))?;
    }
    for dir in [spec.out, &takes_dir, &done_dir] {
        files::remove_stale_temp_files(dir).map_err(RunError::output(dir))?;
    }
    let mut earlier = Earlier::begin(
        spec.out,
        &[TAKES_DIR, DONE_DIR],
        MANIFEST_NAME,
        &[REJECTS_NAME],
        // Only take records (with an `origin`) name files a run wrote.
        |c| match c.origin {
            Some(_) => take_files(c).map(str::to_string).collect(),
            None => Vec::new(),
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
    on_event(Event::Started {
        clips: manifest.entries.len(),
    });
    let ctx = ClipContext {
        plan: spec.plan,
        manifest: &manifest,
        out: spec.out,
        plan_key: plan_key(spec.plan, &plan_inputs),
    };
    let results: Vec<Result<ClipResult, Reject>> = pool.install(|| {
        manifest
            .entries
            .par_iter()
            .map(|entry| {
                let r = match process_clip(&ctx, entry) {
                    Ok(done) => Ok(Ok(done)),
                    Err(Failure::Reject(r)) => Ok(Err(r)),
                    Err(Failure::Stop(e)) => Err(e),
                };
                if let Ok(r) = &r {
                    on_event(Event::ClipDone { ok: r.is_ok() });
                }
                r
            })
            .collect::<Result<_, RunError>>()
    })?;

    let mut summary = Summary {
        clips_in: manifest.entries.len() + manifest.problems.len(),
        ..Summary::default()
    };
    let mut takes = Vec::new();
    let mut records = Vec::new();
    let mut rejects: Vec<Reject> = manifest
        .problems
        .iter()
        .cloned()
        .map(Reject::from)
        .collect();
    for result in results {
        match result {
            Ok(done) => {
                let seconds: f64 = done.takes.iter().filter_map(|c| c.duration).sum();
                summary.clips_done += 1;
                summary.seconds_in += done.seconds_in;
                summary.takes += done.takes.len();
                summary.seconds_out += seconds;
                if done.resumed {
                    summary.clips_resumed += 1;
                    summary.takes_kept += done.takes.len();
                    summary.seconds_in_kept += done.seconds_in;
                    summary.seconds_out_kept += seconds;
                }
                records.push(done.record);
                takes.extend(done.takes);
            }
            Err(reject) => rejects.push(reject),
        }
    }
    rejects.sort_by_key(|r| r.line);
    summary.rejected = rejects.len();
    files::sync_dir(&done_dir).map_err(RunError::output(&done_dir))?;
    write_atomically(&spec.out.join(MANIFEST_NAME), |w| write_manifest(w, &takes))?;
    write_atomically(&spec.out.join(REJECTS_NAME), |w| {
        for r in &rejects {
            serde_json::to_writer(&mut *w, r)?;
            w.write_all(b"\n")?;
        }
        Ok(())
    })?;
    // Records of clips not done now (dropped from the input, rejected, made by another
    // plan) and the takes they list are earlier files too.
    for (rel, record) in earlier_records(&done_dir) {
        earlier.add(rel);
        for f in record.takes.iter().flat_map(take_files) {
            earlier.add(f.to_string());
        }
    }
    let keep: HashSet<&str> = takes
        .iter()
        .flat_map(take_files)
        .chain(records.iter().map(String::as_str))
        .collect();
    summary.removed = earlier.finish(&keep).map_err(RunError::output(spec.out))?;
    summary.wall_seconds = started.elapsed().as_secs_f64();
    Ok(summary)
}

/// Why a clip did not finish: a reject (the run goes on) or a failure of the output that
/// stops the run.
pub(crate) enum Failure<R = Reject> {
    /// The clip goes to the rejects.
    Reject(R),
    /// The run stops.
    Stop(RunError),
}

/// A failed write: a stop when the file system failed (no space, no permission...), which
/// every later clip would meet too; a reject when only this file could not be encoded.
pub(crate) fn write_failure<R>(
    e: WriteError,
    reject: impl FnOnce(String) -> Failure<R>,
) -> Failure<R> {
    if e.source.kind() == std::io::ErrorKind::Other && !e.is_out_of_space() {
        reject(e.to_string())
    } else {
        Failure::Stop(RunError::Output {
            path: e.path,
            source: e.source,
        })
    }
}

/// What every clip of a run shares.
struct ClipContext<'a> {
    plan: &'a Plan,
    manifest: &'a Manifest,
    out: &'a Path,
    /// [`plan_key`] of the run.
    plan_key: u64,
}

/// The files of a take record, relative to the output folder: its audio and its stems.
fn take_files(take: &Clip) -> impl Iterator<Item = &str> {
    let stems = take
        .origin
        .iter()
        .flat_map(|o| &o.steps)
        .flat_map(|s| s.stems.values())
        .filter_map(Value::as_str);
    std::iter::once(take.audio.as_str()).chain(stems)
}

/// Completion records in `.done/` (relative path, content); files there that do not read
/// as one are not ours and are left alone.
fn earlier_records(done_dir: &Path) -> Vec<(String, ClipResult)> {
    let Ok(entries) = std::fs::read_dir(done_dir) else {
        return Vec::new();
    };
    entries
        .filter_map(Result::ok)
        .filter_map(|e| {
            let name = e.file_name().into_string().ok()?;
            if !name.ends_with(".json") {
                return None;
            }
            let text = std::fs::read_to_string(e.path()).ok()?;
            let record: ClipResult = serde_json::from_str(&text).ok()?;
            Some((format!("{DONE_DIR}/{name}"), record))
        })
        .collect()
}

/// The plan's fingerprint with the size and modification time of every file its steps
/// read: a noise file or response changed, added or removed makes every record stale.
fn plan_key(plan: &Plan, inputs: &[PathBuf]) -> u64 {
    let stamps: Vec<String> = inputs
        .iter()
        .map(|p| format!("{}|{}", p.display(), file_stamp(p)))
        .collect();
    crate::seed::stable_hash(&[
        &plan.fingerprint().to_le_bytes(),
        stamps.join("\n").as_bytes(),
    ])
}

/// A file's size and modification time (nanoseconds), or empty when it cannot be read.
fn file_stamp(path: &Path) -> String {
    std::fs::metadata(path)
        .map(|m| {
            let modified = m
                .modified()
                .ok()
                .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
                .map_or(0, |d| d.as_nanos());
            format!("{}|{modified}", m.len())
        })
        .unwrap_or_default()
}

/// A finished clip: its takes as manifest records. Also the content of its completion
/// record in [`DONE_DIR`].
#[derive(Debug, Serialize, serde::Deserialize)]
struct ClipResult {
    /// [`clip_fingerprint`] of the work this result is for.
    fingerprint: String,
    seconds_in: f64,
    takes: Vec<Clip>,
    #[serde(skip)]
    resumed: bool,
    /// The record's path relative to the output folder.
    #[serde(skip)]
    record: String,
}

/// What decides a clip's takes: the plan and the files it reads ([`plan_key`]), the clip's
/// manifest record and its audio file's size and modification time. A completion record
/// with another fingerprint is stale.
fn clip_fingerprint(plan_key: u64, clip: &Clip, audio_path: &Path) -> String {
    let record = serde_json::to_string(clip).unwrap_or_default();
    let h = crate::seed::stable_hash(&[
        &plan_key.to_le_bytes(),
        record.as_bytes(),
        file_stamp(audio_path).as_bytes(),
    ]);
    format!("{h:016x}")
}

/// The clip's earlier result, when an earlier run of the same plan finished it and every
/// take file is still there and whole: a take's WAV holds the frames its record's duration
/// says, at the plan's rate, and a stem is a finished WAV at that rate.
fn finished_earlier(record: &Path, fingerprint: &str, out: &Path, rate: u32) -> Option<ClipResult> {
    let text = std::fs::read_to_string(record).ok()?;
    let mut done: ClipResult = serde_json::from_str(&text).ok()?;
    if done.fingerprint != fingerprint {
        return None;
    }
    for take in &done.takes {
        let frames = (take.duration? * f64::from(rate)).round() as u64;
        if files::whole_wav_frames(&out.join(&take.audio)) != Some((rate, frames)) {
            return None;
        }
        for stem in take_files(take).skip(1) {
            if files::whole_wav_frames(&out.join(stem)).is_none_or(|(r, _)| r != rate) {
                return None;
            }
        }
    }
    done.resumed = true;
    Some(done)
}

fn process_clip(ctx: &ClipContext<'_>, entry: &Entry) -> Result<ClipResult, Failure> {
    let (plan, manifest, out) = (ctx.plan, ctx.manifest, ctx.out);
    let clip = &entry.clip;
    let reject = |field: &str, reason: String| {
        Failure::Reject(Reject {
            line: entry.line,
            id: Some(clip.id.clone()),
            field: field.to_string(),
            reason,
        })
    };
    if let Some((field, reason)) = validate(clip, None).into_iter().next() {
        return Err(reject(&field, reason));
    }
    let path = manifest.base().join(&clip.audio);
    let stem = file_stem(&clip.id);
    let record_rel = format!("{DONE_DIR}/{stem}.json");
    let record = out.join(&record_rel);
    let fingerprint = clip_fingerprint(ctx.plan_key, clip, &path);
    if let Some(mut done) = finished_earlier(&record, &fingerprint, out, plan.rate) {
        done.record = record_rel;
        return Ok(done);
    }
    let source = load_source(plan, clip, &path).map_err(|e| reject(&e.field, e.reason))?;
    let (seconds_in, source_rate, base) = (source.seconds, source.rate, source.base);

    let mut written: Vec<PathBuf> = Vec::new();
    let mut takes = Vec::with_capacity(plan.takes as usize);
    let outcome = (0..plan.takes).try_for_each(|k| {
        let take = make_take(plan, clip, &base, k, source_rate, &stem)
            .map_err(|e| reject(&e.field, e.reason))?;
        // Stems are float so that levels recomputed from them match what was measured.
        let rel = take_file(&stem, k);
        let files = std::iter::once((&rel, &take.audio, plan.format)).chain(
            take.stems
                .iter()
                .map(|(r, a)| (r, a, SampleFormat::Float32)),
        );
        for (rel, signal, format) in files {
            let dest = write_wav_atomically(out, rel, signal, format)
                .map_err(|e| write_failure(e, |m| reject("", m)))?;
            written.push(dest);
        }
        takes.push(take.record(k, &stem));
        Ok(())
    });
    let done = ClipResult {
        fingerprint,
        seconds_in,
        takes,
        resumed: false,
        record: record_rel,
    };
    // The takes' names are flushed before the record that counts on them.
    let takes_dir = out.join(TAKES_DIR);
    let outcome = outcome.and_then(|()| {
        files::sync_dir(&takes_dir)
            .and_then(|()| {
                files::write_atomically(&record, |w| {
                    serde_json::to_writer(&mut *w, &done)?;
                    Ok(())
                })
            })
            .map_err(|source| {
                let path = record.clone();
                write_failure(WriteError { path, source }, |m| reject("", m))
            })
    });
    if let Err(r) = outcome {
        for f in written {
            let _ = std::fs::remove_file(f);
        }
        return Err(r);
    }
    Ok(done)
}

/// [`files::write_atomically`] with the output error of a run.
pub(crate) fn write_atomically(
    path: &Path,
    fill: impl FnOnce(&mut std::io::BufWriter<std::fs::File>) -> std::io::Result<()>,
) -> Result<(), RunError> {
    files::write_atomically(path, fill).map_err(|source| RunError::Output {
        path: path.to_path_buf(),
        source,
    })
}
