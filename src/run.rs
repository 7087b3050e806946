//! The batch engine: clips in, takes out, labels rewritten, nothing half-written.
//!
//! Clips are processed in parallel (rayon); each take is fixed by its seed alone, so the
//! output is byte-identical whatever the thread count. Audio is written under a temporary
//! name and renamed; a clip that fails has its finished takes removed and goes to
//! `rejects.jsonl` with the reason, and the run goes on. The manifest is read as a stream
//! and clips are made a bounded window at a time; the manifest and rejects are written in
//! input order as each window finishes, under temporary names renamed at the end, so
//! memory does not grow with the number of clips.
//!
//! A shard run ([`RunSpec::shard`]) makes only its share of the clips ([`crate::shard`]) and
//! writes its manifest and rejects as parts under `parts/` ([`crate::parts`]), beside the
//! other shards in the same folder; [`crate::join`] puts the parts together.

use std::collections::HashSet;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Instant;

use serde::Serialize;

use crate::audio::STEM_FORMAT;
use crate::batch::{self, Batch, JsonLines};
use crate::files::{self, WriteError, file_stem, write_audio_atomically};
use crate::outdir::SharedFolderLock;
use crate::outdir::earlier::JOURNAL_NAME;
use crate::outdir::{Earlier, FolderLock, LOCK_NAME, LockError, Overwrite, Targets};
use crate::parts::{PARTS_DIR, PartNames, PartRecord, earlier_manifest_name};
use crate::recipe::Plan;
use crate::shard::{Shard, Unit, assign};
use crate::take::{load_source, make_take, take_file};
use crate::transcript::{Clip, Entry, Problem, audio_base, validate};
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

pub use crate::batch::Event;

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
    /// Make only this shard of the clips, into parts (`None`: all of them, into
    /// `manifest.jsonl` and `rejects.jsonl`).
    pub shard: Option<Shard>,
    /// Memory one worker may need for one clip, bytes, as [`crate::memory`] predicts it
    /// before decoding; a clip over it is a reject pointing at `retake slice`.
    pub clip_memory_limit: u64,
}

/// One line of `rejects.jsonl`, the one reject format of every command that reads a
/// manifest clip by clip (`run`, `slice`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Reject {
    /// The input manifest.
    pub file: String,
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
            file: p.file.display().to_string(),
            line: p.line,
            id: None,
            field: p.field,
            reason: p.message,
        }
    }
}

impl Reject {
    /// The reject of the clip on `line` of manifest `file`.
    pub fn of_clip(file: &Path, line: usize, id: &str, field: &str, reason: String) -> Self {
        Reject {
            file: file.display().to_string(),
            line,
            id: Some(id.to_string()),
            field: field.to_string(),
            reason,
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
    let manifest_err = |source| RunError::Manifest {
        path: spec.input.to_path_buf(),
        source,
    };
    let plan_inputs = spec.plan.inputs();
    let targets = Targets::new(
        spec.out,
        &[MANIFEST_NAME, REJECTS_NAME, LOCK_NAME, JOURNAL_NAME],
        &[TAKES_DIR, DONE_DIR, PARTS_DIR],
    );
    // First pass over the manifest, as a stream: every audio file against the output
    // folder, the lines' shards; and the input's fingerprint.
    let named = [("input manifest".to_string(), spec.input.to_path_buf())]
        .into_iter()
        .chain(spec.recipe.map(|r| ("recipe".to_string(), r.to_path_buf())))
        .chain(
            plan_inputs
                .iter()
                .map(|p| ("file the recipe reads".into(), p.clone())),
        );
    let survey = batch::survey(spec.input, &targets, named, spec.shard.is_some())?;
    let input_key = input_key(spec.input).map_err(manifest_err)?;
    let owner = Owner::of(&survey, spec.shard);
    let part = spec.shard.map(PartNames::of);
    let _lock = match &part {
        None => (Some(FolderLock::acquire(spec.out)?), None, None),
        Some(names) => {
            let shared = SharedFolderLock::acquire(spec.out)?;
            let own = FolderLock::acquire_file(&spec.out.join(PARTS_DIR), &lock_name(names))?;
            (None, Some(shared), Some(own))
        }
    };

    let takes_dir = spec.out.join(TAKES_DIR);
    let done_dir = spec.out.join(DONE_DIR);
    for dir in [&takes_dir, &done_dir] {
        std::fs::create_dir_all(dir).map_err(RunError::output(dir))?;
    }
    // Other shards may be writing into takes/ and .done/ now: their temporary files are
    // left for the join, which holds the folder alone.
    if part.is_none() {
        for dir in [spec.out, &takes_dir, &done_dir] {
            files::remove_stale_temp_files(dir).map_err(RunError::output(dir))?;
        }
        // A whole run remakes takes that shards' parts may list: those parts can no longer
        // be joined (their records go; the join then calls those shards unfinished).
        retire_part_records(spec.out).map_err(RunError::output(spec.out))?;
    }
    let mut earlier = match &part {
        None => Earlier::begin(
            spec.out,
            &[TAKES_DIR, DONE_DIR],
            MANIFEST_NAME,
            &[REJECTS_NAME],
            earlier_files,
        ),
        Some(names) => set_joined_aside(spec.out)
            .and_then(|()| remove_if_there(&spec.out.join(names.record())))
            .and_then(|()| {
                Earlier::begin_journal(
                    spec.out,
                    &names.journal(),
                    &[TAKES_DIR, DONE_DIR],
                    &names.manifest(),
                    &[&names.rejects()],
                    earlier_files,
                )
            }),
    }
    .map_err(RunError::output(spec.out))?;
    if part.is_none() {
        // Every completion record already here is an earlier file until this run makes or
        // keeps its clip; a shard leaves them to the join: they may be another shard's.
        for rel in record_names(&done_dir) {
            earlier.add(rel);
        }
    }
    let pool = batch::thread_pool(spec.threads)?;
    let (manifest_name, rejects_name) = match &part {
        None => (MANIFEST_NAME.to_string(), REJECTS_NAME.to_string()),
        Some(names) => (names.manifest(), names.rejects()),
    };
    let mut takes_out = JsonLines::create(spec.out.join(manifest_name))?;
    let mut rejects_out = JsonLines::create(spec.out.join(rejects_name))?;
    let ctx = ClipContext {
        plan: spec.plan,
        manifest: spec.input,
        base: audio_base(spec.input),
        out: spec.out,
        plan_key: plan_key(spec.plan, &plan_inputs),
        clip_memory_limit: spec.clip_memory_limit,
    };

    let mut summary = Summary::default();
    // Per clip done, for a shard's record: (line, takes, completion record).
    let mut order = Vec::new();
    let mut reject_lines = Vec::new();
    let engine = Batch {
        input: spec.input,
        survey: &survey,
        clips: owner.clips,
        pool: &pool,
        on_event,
    };
    summary.clips_in = engine.for_each_clip(
        &|line| owner.mine(line),
        &|entry| process_clip(&ctx, entry),
        &mut |outcome| {
            match outcome {
                Ok(done) => {
                    summary.add(&done);
                    for f in done.takes.iter().flat_map(take_files) {
                        earlier.keep(f);
                    }
                    earlier.keep(&done.record);
                    takes_out.write_all(&done.takes)?;
                    if part.is_some() {
                        order.push((done.line, done.takes.len(), done.record));
                    }
                }
                Err(reject) => {
                    summary.rejected += 1;
                    rejects_out.write(&reject)?;
                    if part.is_some() {
                        reject_lines.push(reject.line);
                    }
                }
            }
            Ok(())
        },
    )?;
    files::sync_dir(&done_dir).map_err(RunError::output(&done_dir))?;
    takes_out.commit()?;
    rejects_out.commit()?;
    if let (Some(names), Some(shard)) = (&part, spec.shard) {
        // Written last: its presence says the shard finished.
        let record = PartRecord {
            shard: shard.index,
            shards: shard.count,
            recipe: format!("{:016x}", ctx.plan_key),
            input: format!("{input_key:016x}"),
            clips: order,
            rejects: reject_lines,
        };
        write_atomically(&spec.out.join(names.record()), |w| {
            serde_json::to_writer(&mut *w, &record)?;
            w.write_all(b"\n")
        })?;
    } else {
        // Records of clips not done now (dropped from the input, rejected, made by another
        // plan) are still earlier files: the takes they list are too.
        add_takes_of_records(&mut earlier, spec.out);
    }
    summary.removed = earlier
        .finish(&HashSet::new())
        .map_err(RunError::output(spec.out))?;
    summary.wall_seconds = started.elapsed().as_secs_f64();
    Ok(summary)
}

impl Summary {
    /// Count a finished clip.
    fn add(&mut self, done: &ClipResult) {
        let seconds: f64 = done.takes.iter().filter_map(|c| c.duration).sum();
        self.clips_done += 1;
        self.seconds_in += done.seconds_in;
        self.takes += done.takes.len();
        self.seconds_out += seconds;
        if done.resumed {
            self.clips_resumed += 1;
            self.takes_kept += done.takes.len();
            self.seconds_in_kept += done.seconds_in;
            self.seconds_out_kept += seconds;
        }
    }
}

/// Which lines a run makes: all, or a shard's share.
struct Owner {
    /// The shard of every line and this run's shard, for a shard run.
    shards: Option<(Vec<u32>, usize)>,
    /// Clips this run makes (bad lines not counted).
    clips: usize,
}

impl Owner {
    /// The owner of every line of a surveyed manifest (with its units) for `shard`.
    fn of(survey: &batch::Survey, shard: Option<Shard>) -> Self {
        let Some(shard) = shard else {
            return Owner {
                shards: None,
                clips: survey.clips,
            };
        };
        let owner: Vec<u32> = assign(&survey.units, shard.count)
            .into_iter()
            .map(|s| s as u32)
            .collect();
        let clips = owner
            .iter()
            .zip(&survey.units)
            .filter(|(o, u)| **o as usize == shard.index && matches!(u, Unit::Clip(_)))
            .count();
        Owner {
            shards: Some((owner, shard.index)),
            clips,
        }
    }

    /// Whether line `line` (from 1) is this run's.
    fn mine(&self, line: usize) -> bool {
        match &self.shards {
            None => true,
            Some((owner, index)) => {
                line.checked_sub(1)
                    .and_then(|i| owner.get(i))
                    .map(|&o| o as usize)
                    == Some(*index)
            }
        }
    }
}

/// Why a clip did not finish: a reject (the run goes on) or a failure of the output that
/// stops the run.
pub(crate) enum Failure {
    /// The clip goes to the rejects.
    Reject(Reject),
    /// The run stops.
    Stop(RunError),
}

/// A failed write: a stop when the file system failed (no space, no permission...), which
/// every later clip would meet too; a reject when only this file could not be encoded.
pub(crate) fn write_failure(e: WriteError, reject: impl FnOnce(String) -> Failure) -> Failure {
    if e.source.kind() == std::io::ErrorKind::Other && !e.is_out_of_space() {
        reject(e.to_string())
    } else {
        Failure::Stop(RunError::Output {
            path: e.path,
            source: e.source,
        })
    }
}

/// The fingerprint of the input manifest's bytes, which every shard of one run shares
/// (the first 64 bits of their SHA-256, read as a stream).
pub(crate) fn input_key(input: &Path) -> std::io::Result<u64> {
    use sha2::Digest;
    use std::io::Read;
    let mut file = crate::input_file::open(input)?;
    let mut hash = sha2::Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = file.read(&mut buf)?;
        if n == 0 {
            break;
        }
        hash.update(&buf[..n]);
    }
    let digest = hash.finalize();
    let mut first = [0u8; 8];
    first.copy_from_slice(&digest[..8]);
    Ok(u64::from_le_bytes(first))
}

/// The lock file's name inside `parts/`.
fn lock_name(names: &PartNames) -> String {
    names
        .lock()
        .trim_start_matches(&format!("{PARTS_DIR}/"))
        .to_string()
}

/// The files a manifest record names that a run wrote: only take records (with an
/// `origin`) name any.
pub(crate) fn earlier_files(c: &Clip) -> Vec<String> {
    match c.origin {
        Some(_) => take_files(c).map(str::to_string).collect(),
        None => Vec::new(),
    }
}

/// The completion records still set for removal (their clips were not made or kept now)
/// and the takes they list, as earlier files: removed at the end. Records are read one at a
/// time; a file there that does not read as one is not ours and is left alone.
pub(crate) fn add_takes_of_records(earlier: &mut Earlier, out: &Path) {
    for rel in earlier.pending_in(DONE_DIR) {
        let record = std::fs::read_to_string(out.join(&rel))
            .ok()
            .and_then(|text| serde_json::from_str::<ClipResult>(&text).ok());
        match record {
            Some(record) => {
                for f in record.takes.iter().flat_map(take_files) {
                    earlier.add(f.to_string());
                }
            }
            None => earlier.keep(&rel),
        }
    }
}

/// The names (relative to the output folder) of the completion records in `done_dir`.
pub(crate) fn record_names(done_dir: &Path) -> impl Iterator<Item = String> {
    std::fs::read_dir(done_dir)
        .into_iter()
        .flatten()
        .filter_map(Result::ok)
        .filter_map(|e| e.file_name().into_string().ok())
        .filter(|name| name.ends_with(".json"))
        .map(|name| format!("{DONE_DIR}/{name}"))
}

/// A shard starting in a folder with a joined manifest: move it to `parts/` under a name
/// from its content ([`earlier_manifest_name`]) and remove the joined rejects, so no
/// manifest lists audio being remade. Shards starting together all write the same file.
fn set_joined_aside(out: &Path) -> std::io::Result<()> {
    let joined = out.join(MANIFEST_NAME);
    match std::fs::read(&joined) {
        Ok(content) => {
            let aside = out.join(earlier_manifest_name(&content));
            std::fs::create_dir_all(out.join(PARTS_DIR))?;
            files::write_atomically(&aside, |w| w.write_all(&content))?;
            remove_if_there(&joined)?;
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
        Err(e) => return Err(e),
    }
    remove_if_there(&out.join(REJECTS_NAME))?;
    files::sync_dir(out)
}

/// Remove the shards' records (`parts/<k>-of-<n>.json`), nothing else.
fn retire_part_records(out: &Path) -> std::io::Result<()> {
    let Ok(entries) = std::fs::read_dir(out.join(PARTS_DIR)) else {
        return Ok(());
    };
    for e in entries.filter_map(Result::ok) {
        let is_record = e
            .file_name()
            .to_str()
            .and_then(crate::parts::parse_part_name)
            .is_some_and(|(_, _, tail)| tail == ".json");
        if is_record {
            remove_if_there(&e.path())?;
        }
    }
    Ok(())
}

/// Remove a file; one already gone is fine.
pub(crate) fn remove_if_there(path: &Path) -> std::io::Result<()> {
    match std::fs::remove_file(path) {
        Err(e) if e.kind() != std::io::ErrorKind::NotFound => Err(e),
        _ => Ok(()),
    }
}

/// What every clip of a run shares.
struct ClipContext<'a> {
    plan: &'a Plan,
    /// The input manifest, named in rejects.
    manifest: &'a Path,
    /// The folder the manifest's audio paths are relative to.
    base: &'a Path,
    out: &'a Path,
    /// [`plan_key`] of the run.
    plan_key: u64,
    /// [`RunSpec::clip_memory_limit`].
    clip_memory_limit: u64,
}

/// The files of a take record, relative to the output folder: its audio and its stems.
pub(crate) fn take_files(take: &Clip) -> impl Iterator<Item = &str> {
    let stems = take
        .origin
        .iter()
        .flat_map(|o| &o.steps)
        .flat_map(|s| s.stems.values())
        .filter_map(Value::as_str);
    std::iter::once(take.audio.as_str()).chain(stems)
}

/// The plan's fingerprint with the size and modification time of every file its steps
/// read: a noise file or response changed, added or removed makes every record stale.
pub(crate) fn plan_key(plan: &Plan, inputs: &[PathBuf]) -> u64 {
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
pub(crate) struct ClipResult {
    /// [`clip_fingerprint`] of the work this result is for.
    fingerprint: String,
    seconds_in: f64,
    pub(crate) takes: Vec<Clip>,
    #[serde(skip)]
    resumed: bool,
    /// The record's path relative to the output folder.
    #[serde(skip)]
    record: String,
    /// The clip's line in the input manifest.
    #[serde(skip)]
    line: usize,
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
        if files::whole_audio_frames(&out.join(&take.audio)) != Some((rate, frames)) {
            return None;
        }
        for stem in take_files(take).skip(1) {
            if files::whole_audio_frames(&out.join(stem)).is_none_or(|(r, _)| r != rate) {
                return None;
            }
        }
    }
    done.resumed = true;
    Some(done)
}

fn process_clip(ctx: &ClipContext<'_>, entry: &Entry) -> Result<ClipResult, Failure> {
    let (plan, out) = (ctx.plan, ctx.out);
    let clip = &entry.clip;
    let reject = |field: &str, reason: String| {
        Failure::Reject(Reject::of_clip(
            ctx.manifest,
            entry.line,
            &clip.id,
            field,
            reason,
        ))
    };
    if let Some((field, reason)) = validate(clip, None).into_iter().next() {
        return Err(reject(&field, reason));
    }
    let path = ctx.base.join(&clip.audio);
    // Before anything is decoded: a clip the memory model says will not fit is a reject.
    if let Some(why) = crate::memory::clip_seconds(clip.duration, &path)
        .and_then(|secs| crate::memory::over_limit(plan, secs, ctx.clip_memory_limit))
    {
        return Err(reject("audio", why));
    }
    let stem = file_stem(&clip.id);
    let record_rel = format!("{DONE_DIR}/{stem}.json");
    let record = out.join(&record_rel);
    let fingerprint = clip_fingerprint(ctx.plan_key, clip, &path);
    if let Some(mut done) = finished_earlier(&record, &fingerprint, out, plan.rate) {
        done.record = record_rel;
        done.line = entry.line;
        return Ok(done);
    }
    let source = load_source(plan, clip, &path).map_err(|e| reject(&e.field, e.reason))?;
    let (seconds_in, source_rate, base) = (source.seconds, source.rate, source.base);
    // A clip whose header did not say its length is measured now, before any step runs.
    if let Some(why) = crate::memory::over_limit(plan, seconds_in, ctx.clip_memory_limit) {
        return Err(reject("audio", why));
    }

    let mut written: Vec<PathBuf> = Vec::new();
    let mut takes = Vec::with_capacity(plan.takes as usize);
    let outcome = (0..plan.takes).try_for_each(|k| {
        let take = make_take(plan, clip, &base, k, source_rate, &stem)
            .map_err(|e| reject(&e.field, e.reason))?;
        let rel = take_file(&stem, k, plan.format);
        let files = std::iter::once((&rel, &take.audio, plan.format))
            .chain(take.stems.iter().map(|(r, a)| (r, a, STEM_FORMAT)));
        for (rel, signal, format) in files {
            let dest = write_audio_atomically(out, rel, signal, format)
                .map_err(|e| write_failure(e, |m| reject("", m)))?;
            written.push(dest);
        }
        takes.push(take.record(k, &stem, plan.format));
        Ok(())
    });
    let done = ClipResult {
        fingerprint,
        seconds_in,
        takes,
        resumed: false,
        record: record_rel,
        line: entry.line,
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
