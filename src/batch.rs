//! The one batch engine of every command that works through a manifest clip by clip (`run`,
//! `slice`): check the manifest and every input against the output folder in a first pass,
//! then read it again as a stream, do each clip's work in parallel a bounded window at a
//! time, and hand the outcomes back in input order. Memory holds one window whatever the
//! clip count, and the output does not depend on the thread count.
//!
//! What a clip's work is, and where its outcome goes, is the caller's: the engine knows only
//! lines, entries, rejects and the stop of a failed output.

use std::collections::HashSet;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use rayon::prelude::*;

use crate::outdir::{Targets, refuse_overwrite};
use crate::run::{Failure, Reject, RunError};
use crate::shard::Unit;
use crate::transcript::stream::ManifestStream;
use crate::transcript::{Entry, audio_base, read_manifest};

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

/// Clips in the reorder window per worker thread: enough that a slow clip rarely leaves a
/// worker idle at the end of a window, few enough that a window's outcomes stay small.
const WINDOW_PER_THREAD: usize = 64;

/// The worker pool of a batch; `None` for one thread per core.
///
/// # Errors
/// When the threads cannot be started.
pub(crate) fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool, RunError> {
    let threads = threads.unwrap_or(0);
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| RunError::Threads {
            threads,
            reason: e.to_string(),
        })
}

/// What the first pass over a manifest found.
pub(crate) struct Survey {
    /// Lines that are clips (bad lines and duplicate ids not counted).
    pub clips: usize,
    /// One unit per line, when asked for (to balance shards).
    pub units: Vec<Unit>,
    /// Hashes of the ids that may be duplicates, for the later pass
    /// ([`ManifestStream::watching`]).
    pub suspects: Arc<HashSet<u32>>,
}

/// The first pass over `input`: a file that is no manifest at all is refused as such, then
/// every clip's audio (and each of `named`: the manifest, a recipe, the files it reads) is
/// refused when the output folder would overwrite it, and the clips are counted. With
/// `units`, a unit per line is kept.
///
/// Duplicate ids are found in a pass that keeps 4 bytes a clip; only when one came up is
/// the manifest read once more to count exactly.
///
/// # Errors
/// An unreadable manifest, an input the output would overwrite.
pub(crate) fn survey(
    input: &Path,
    targets: &Targets,
    named: impl IntoIterator<Item = (String, PathBuf)>,
    units: bool,
) -> Result<Survey, RunError> {
    let manifest_err = |source| RunError::Manifest {
        path: input.to_path_buf(),
        source,
    };
    refuse_not_a_manifest(input).map_err(manifest_err)?;
    refuse_overwrite(targets, named)?;
    let base = audio_base(input);
    let pass =
        |mut stream: ManifestStream| -> Result<(usize, Vec<Unit>, ManifestStream), RunError> {
            let (mut clips, mut kept) = (0, Vec::new());
            while let Some(item) = stream.next_item().map_err(manifest_err)? {
                match item {
                    Err(_) if units => kept.push(Unit::Bad),
                    Err(_) => {}
                    Ok(entry) => {
                        clips += 1;
                        if units {
                            kept.push(Unit::Clip(entry.clip.duration));
                        }
                        let what =
                            format!("audio of clip `{}` (line {})", entry.clip.id, entry.line);
                        refuse_overwrite(targets, [(what, base.join(&entry.clip.audio))])?;
                    }
                }
            }
            Ok((clips, kept, stream))
        };
    let (clips, kept, first) = pass(ManifestStream::collecting(input).map_err(manifest_err)?)?;
    let suspects = Arc::new(first.suspects());
    let (clips, units) = if suspects.is_empty() {
        (clips, kept)
    } else {
        drop(kept);
        let again = ManifestStream::watching(input, suspects.clone()).map_err(manifest_err)?;
        let (clips, kept, _) = pass(again)?;
        (clips, kept)
    };
    Ok(Survey {
        clips,
        units,
        suspects,
    })
}

/// A file none of whose first lines is a clip is checked whole ([`read_manifest`]), so a
/// recipe or a JSON document given as the manifest is refused as such, not line by line.
fn refuse_not_a_manifest(input: &Path) -> std::io::Result<()> {
    let mut stream = ManifestStream::open(input)?;
    for _ in 0..64 {
        match stream.next_item()? {
            None => break,
            Some(Ok(_)) => return Ok(()),
            Some(Err(_)) => {}
        }
    }
    read_manifest(input).map(|_| ())
}

/// One batch over a surveyed manifest.
pub(crate) struct Batch<'a> {
    /// The input manifest.
    pub input: &'a Path,
    /// Its survey.
    pub survey: &'a Survey,
    /// Clips the batch will work on (for [`Event::Started`]).
    pub clips: usize,
    /// The workers.
    pub pool: &'a rayon::ThreadPool,
    /// Told when work starts and as each clip finishes.
    pub on_event: &'a (dyn Fn(Event) + Sync),
}

impl Batch<'_> {
    /// Do `work` on every clip of the manifest whose line `mine` accepts, and give `sink`
    /// each outcome in input order: the work's result, or the reject of a clip that failed
    /// or of a line that is no clip. Returns the lines taken (clips and bad lines).
    ///
    /// # Errors
    /// The manifest cannot be read; a [`Failure::Stop`] of the work, or an error of the
    /// sink, stops the batch at once.
    pub(crate) fn for_each_clip<D: Send>(
        &self,
        mine: &dyn Fn(usize) -> bool,
        work: &(dyn Fn(&Entry) -> Result<D, Failure> + Sync),
        sink: &mut dyn FnMut(Result<D, Reject>) -> Result<(), RunError>,
    ) -> Result<usize, RunError> {
        let manifest_err = |source| RunError::Manifest {
            path: self.input.to_path_buf(),
            source,
        };
        let mut stream = ManifestStream::watching(self.input, self.survey.suspects.clone())
            .map_err(manifest_err)?;
        (self.on_event)(Event::Started { clips: self.clips });
        let window = WINDOW_PER_THREAD * self.pool.current_num_threads().max(1);
        let mut taken = 0;
        loop {
            let mut entries = Vec::with_capacity(window);
            let mut outcomes: Vec<(usize, Result<D, Reject>)> = Vec::new();
            while entries.len() + outcomes.len() < window {
                let Some(item) = stream.next_item().map_err(manifest_err)? else {
                    break;
                };
                let line = match &item {
                    Ok(e) => e.line,
                    Err(p) => p.line,
                };
                if !mine(line) {
                    continue;
                }
                taken += 1;
                match item {
                    Ok(e) => entries.push(e),
                    Err(p) => outcomes.push((line, Err(Reject::from(p)))),
                }
            }
            if entries.is_empty() && outcomes.is_empty() {
                break;
            }
            let done: Vec<(usize, Result<D, Reject>)> = self.pool.install(|| {
                entries
                    .par_iter()
                    .map(|entry| {
                        let outcome = match work(entry) {
                            Ok(d) => Ok(d),
                            Err(Failure::Reject(r)) => Err(r),
                            Err(Failure::Stop(e)) => return Err(e),
                        };
                        (self.on_event)(Event::ClipDone {
                            ok: outcome.is_ok(),
                        });
                        Ok((entry.line, outcome))
                    })
                    .collect::<Result<_, RunError>>()
            })?;
            outcomes.extend(done);
            outcomes.sort_by_key(|(line, _)| *line);
            for (_, outcome) in outcomes {
                sink(outcome)?;
            }
        }
        Ok(taken)
    }
}

/// A JSON Lines output of a batch, under a temporary name until it is committed.
pub(crate) struct JsonLines {
    file: crate::files::AtomicFile,
    path: PathBuf,
}

impl JsonLines {
    /// Start writing `path`.
    ///
    /// # Errors
    /// The temporary file cannot be made.
    pub(crate) fn create(path: PathBuf) -> Result<Self, RunError> {
        let file = crate::files::AtomicFile::create(&path).map_err(RunError::output(&path))?;
        Ok(JsonLines { file, path })
    }

    /// Write one record as a line.
    ///
    /// # Errors
    /// Writing fails.
    pub(crate) fn write<T: serde::Serialize>(&mut self, record: &T) -> Result<(), RunError> {
        use std::io::Write;
        let w = self.file.writer();
        serde_json::to_writer(&mut *w, record)
            .map_err(std::io::Error::from)
            .and_then(|()| w.write_all(b"\n"))
            .map_err(RunError::output(&self.path))
    }

    /// Write every record, a line each.
    ///
    /// # Errors
    /// Writing fails.
    pub(crate) fn write_all<'r, T: serde::Serialize + 'r>(
        &mut self,
        records: impl IntoIterator<Item = &'r T>,
    ) -> Result<(), RunError> {
        records.into_iter().try_for_each(|r| self.write(r))
    }

    /// Flush to disk and rename into place.
    ///
    /// # Errors
    /// Flushing or renaming fails.
    pub(crate) fn commit(self) -> Result<(), RunError> {
        let path = self.path;
        self.file.commit().map_err(RunError::output(&path))
    }
}
