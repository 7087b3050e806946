//! Putting the shards of a run back together: the parts under `parts/` become the one
//! `manifest.jsonl` and `rejects.jsonl` a run on one machine would have written, byte for
//! byte, and the files of earlier runs not made again are removed as a whole run removes
//! them.
//!
//! Nothing is written unless every shard of one split (the same N) is there, finished, and
//! made from the recipe and input given to the join; otherwise the refusal names each shard
//! at fault. The join holds the folder's lock alone, so it is refused while any shard runs.

use std::collections::{BTreeMap, HashSet};
use std::io::{BufRead, Write};
use std::path::{Path, PathBuf};

use crate::files;
use crate::outdir::{Earlier, FolderLock, LockError};
use crate::parts::{PARTS_DIR, PartNames, PartRecord, earlier_manifests, parse_part_name};
use crate::recipe::Plan;
use crate::run::{
    DONE_DIR, MANIFEST_NAME, REJECTS_NAME, TAKES_DIR, add_takes_of_records, earlier_files,
    input_key, plan_key, record_names, remove_if_there, take_files,
};
use crate::shard::Shard;
use crate::transcript::{parse_clip, read_manifest};

/// What the join is given: the same recipe, input and folder as the shard runs.
#[derive(Debug, Clone)]
pub struct JoinSpec<'a> {
    /// The checked recipe.
    pub plan: &'a Plan,
    /// Input manifest.
    pub input: &'a Path,
    /// The shared output folder.
    pub out: &'a Path,
}

/// What the join did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct JoinSummary {
    /// Shards joined.
    pub shards: usize,
    /// Clips done, over all shards.
    pub clips: usize,
    /// Take records in the joined manifest.
    pub takes: usize,
    /// Lines in the joined rejects.
    pub rejected: usize,
    /// Files of earlier runs not made again, removed.
    pub removed: usize,
}

/// One reason a shard cannot be joined.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum PartProblem {
    /// No trace of the shard.
    Missing(Shard),
    /// The shard started (its lock is there) but did not finish.
    Unfinished(Shard),
    /// Made from another recipe, or the files it reads have changed since.
    OtherRecipe(Shard),
    /// Made from another input manifest.
    OtherInput(Shard),
    /// A part of another split (another N) lies beside the one joined.
    OtherSplit {
        /// The split being joined.
        joined: usize,
        /// A file of another split.
        file: String,
    },
    /// The record or the parts do not agree (edited, truncated).
    Damaged {
        /// The file.
        file: String,
        /// What is wrong.
        reason: String,
    },
}

impl std::fmt::Display for PartProblem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let rec = |s: &Shard| PartNames::of(*s).record();
        match self {
            PartProblem::Missing(s) => write!(
                f,
                "shard {s} is missing: nothing of it in {PARTS_DIR}/ (run it with --shard {s})"
            ),
            PartProblem::Unfinished(s) => write!(
                f,
                "shard {s} did not finish ({} is not there); run it again with --shard {s}: \
                 it keeps the clips it finished",
                rec(s)
            ),
            PartProblem::OtherRecipe(s) => write!(
                f,
                "shard {s} was made with another recipe (or the files it reads changed since): \
                 {}",
                rec(s)
            ),
            PartProblem::OtherInput(s) => {
                write!(
                    f,
                    "shard {s} was made from another input manifest: {}",
                    rec(s)
                )
            }
            PartProblem::OtherSplit { joined, file } => write!(
                f,
                "{file} belongs to a split into another number of shards than the {joined} \
                 joined; remove the parts of the split you do not want"
            ),
            PartProblem::Damaged { file, reason } => write!(f, "{file}: {reason}"),
        }
    }
}

/// A failure of the join; nothing of the joined output was written.
#[derive(Debug, thiserror::Error)]
pub enum JoinError {
    /// The input manifest cannot be read.
    #[error("{}: cannot read manifest: {source}", path.display())]
    Input {
        /// The manifest.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// No shard has written anything into the folder.
    #[error(
        "{}: no shard parts here; run `retake run ... --shard K/N` for every K first",
        path.display()
    )]
    NoParts {
        /// The parts folder.
        path: PathBuf,
    },
    /// Shards are missing, unfinished or foreign.
    #[error("cannot join {}:\n  {}", out.display(), list(problems))]
    Refused {
        /// The output folder.
        out: PathBuf,
        /// Every shard at fault.
        problems: Vec<PartProblem>,
    },
    /// A shard is still running, or another command holds the folder.
    #[error(transparent)]
    Locked(#[from] LockError),
    /// Reading the parts or writing the joined files failed.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
}

fn list(problems: &[PartProblem]) -> String {
    problems
        .iter()
        .map(ToString::to_string)
        .collect::<Vec<_>>()
        .join("\n  ")
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> JoinError {
    let path = path.to_path_buf();
    move |source| JoinError::Io { path, source }
}

/// Join the shards of a run in `spec.out` into `manifest.jsonl` and `rejects.jsonl`.
///
/// # Errors
/// [`JoinError::Refused`] naming every missing, unfinished or foreign shard (nothing is
/// written); [`JoinError::Locked`] while a shard runs; others when files cannot be read or
/// written.
pub fn join(spec: &JoinSpec<'_>) -> Result<JoinSummary, JoinError> {
    let input = |source| JoinError::Input {
        path: spec.input.to_path_buf(),
        source,
    };
    let input_key = format!("{:016x}", input_key(spec.input).map_err(input)?);
    let recipe_key = format!("{:016x}", plan_key(spec.plan, &spec.plan.inputs()));
    let _lock = FolderLock::acquire(spec.out)?;
    let parts_dir = spec.out.join(PARTS_DIR);
    let records = check_parts(spec.out, &recipe_key, &input_key)?;

    for dir in [
        spec.out,
        &spec.out.join(TAKES_DIR),
        &spec.out.join(DONE_DIR),
        &parts_dir,
    ] {
        if dir.is_dir() {
            files::remove_stale_temp_files(dir).map_err(io(dir))?;
        }
    }
    let mut earlier = Earlier::begin(
        spec.out,
        &[TAKES_DIR, DONE_DIR],
        MANIFEST_NAME,
        &[REJECTS_NAME],
        earlier_files,
    )
    .map_err(io(spec.out))?;
    // Every completion record here is an earlier file until a shard's part lists it.
    for rel in record_names(&spec.out.join(DONE_DIR)) {
        earlier.add(rel);
    }
    let set_aside = earlier_manifests(spec.out);
    for m in &set_aside {
        if let Ok(m) = read_manifest(m) {
            for e in &m.entries {
                earlier_files(&e.clip)
                    .into_iter()
                    .for_each(|f| earlier.add(f));
            }
        }
    }

    let mut summary = JoinSummary {
        shards: records.len(),
        ..JoinSummary::default()
    };
    // (line, shard, takes) for every clip done, and (line, shard) for every reject.
    let mut clips: Vec<(usize, usize, usize)> = Vec::new();
    let mut rejects: Vec<(usize, usize)> = Vec::new();
    for r in &records {
        for (line, takes, record) in &r.clips {
            clips.push((*line, r.shard, *takes));
            earlier.keep(record);
        }
        rejects.extend(r.rejects.iter().map(|&l| (l, r.shard)));
    }
    clips.sort_unstable();
    rejects.sort_unstable();
    summary.clips = clips.len();
    summary.rejected = rejects.len();

    let shard_of = |r: &PartRecord| Shard {
        index: r.shard,
        count: r.shards,
    };
    let mut take_readers = open_parts(spec.out, &records, |n| n.manifest())?;
    let manifest_path = spec.out.join(MANIFEST_NAME);
    let mut damaged = Vec::new();
    files::write_atomically(&manifest_path, |w| {
        for &(_, shard, takes) in &clips {
            let reader = &mut take_readers[shard];
            for _ in 0..takes {
                let Some(line) = reader.next_line()? else {
                    damaged.push(reader.short(shard_of(&records[shard])));
                    return Ok(());
                };
                if let Ok(clip) = parse_clip(&line) {
                    take_files(&clip).for_each(|f| earlier.keep(f));
                }
                summary.takes += 1;
                w.write_all(line.as_bytes())?;
                w.write_all(b"\n")?;
            }
        }
        Ok(())
    })
    .map_err(io(&manifest_path))?;
    let mut reject_readers = open_parts(spec.out, &records, |n| n.rejects())?;
    let rejects_path = spec.out.join(REJECTS_NAME);
    files::write_atomically(&rejects_path, |w| {
        for &(_, shard) in &rejects {
            let reader = &mut reject_readers[shard];
            let Some(line) = reader.next_line()? else {
                damaged.push(reader.short(shard_of(&records[shard])));
                return Ok(());
            };
            w.write_all(line.as_bytes())?;
            w.write_all(b"\n")?;
        }
        Ok(())
    })
    .map_err(io(&rejects_path))?;
    let leftover = take_readers
        .iter_mut()
        .chain(reject_readers.iter_mut())
        .enumerate()
        .filter_map(|(i, r)| match r.next_line() {
            Ok(Some(_)) => Some(r.long(shard_of(&records[i % records.len()]))),
            _ => None,
        })
        .collect::<Vec<_>>();
    damaged.extend(leftover);
    if !damaged.is_empty() {
        // Never leave a joined manifest made from parts that do not add up.
        let _ = remove_if_there(&manifest_path);
        let _ = remove_if_there(&rejects_path);
        return Err(JoinError::Refused {
            out: spec.out.to_path_buf(),
            problems: damaged,
        });
    }

    add_takes_of_records(&mut earlier, spec.out);
    summary.removed = earlier.finish(&HashSet::new()).map_err(io(spec.out))?;
    for m in set_aside {
        remove_if_there(&m).map_err(io(&m))?;
    }
    Ok(summary)
}

/// The records of every shard of the one split in `parts/`, in shard order, after checking
/// that each is there, finished and made from this recipe and input.
fn check_parts(out: &Path, recipe: &str, input: &str) -> Result<Vec<PartRecord>, JoinError> {
    let parts_dir = out.join(PARTS_DIR);
    let names: Vec<String> = match std::fs::read_dir(&parts_dir) {
        Ok(entries) => entries
            .filter_map(Result::ok)
            .filter_map(|e| e.file_name().into_string().ok())
            .collect(),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Vec::new(),
        Err(e) => return Err(io(&parts_dir)(e)),
    };
    // Per split (N): per shard, which of its files are there.
    let mut splits: BTreeMap<usize, BTreeMap<usize, Vec<String>>> = BTreeMap::new();
    for name in &names {
        if let Some((k, n, tail)) = parse_part_name(name)
            && !files::is_temp_name(name)
        {
            splits
                .entry(n)
                .or_default()
                .entry(k)
                .or_default()
                .push(tail.to_string());
        }
    }
    if splits.is_empty() {
        return Err(JoinError::NoParts { path: parts_dir });
    }
    // The split joined: the one with finished records (the most of them; ties: larger N).
    let finished = |m: &BTreeMap<usize, Vec<String>>| {
        m.values()
            .filter(|t| t.iter().any(|t| t == ".json"))
            .count()
    };
    let count = splits
        .iter()
        .max_by_key(|(n, m)| (finished(m), **n))
        .map(|(n, _)| *n)
        .unwrap_or(1);
    let mut problems = Vec::new();
    for (&n, shards) in &splits {
        if n != count {
            for (&k, tails) in shards {
                for t in tails {
                    problems.push(PartProblem::OtherSplit {
                        joined: count,
                        file: format!("{PARTS_DIR}/{k}-of-{n}{t}"),
                    });
                }
            }
        }
    }
    let mut records = Vec::new();
    for index in 0..count {
        let shard = Shard { index, count };
        let names = PartNames::of(shard);
        let path = out.join(names.record());
        let text = match std::fs::read_to_string(&path) {
            Ok(t) => t,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                let started = splits[&count].contains_key(&index);
                problems.push(if started {
                    PartProblem::Unfinished(shard)
                } else {
                    PartProblem::Missing(shard)
                });
                continue;
            }
            Err(e) => return Err(io(&path)(e)),
        };
        let record: PartRecord = match serde_json::from_str(&text) {
            Ok(r) => r,
            Err(e) => {
                problems.push(PartProblem::Damaged {
                    file: names.record(),
                    reason: format!("not a shard record: {e}"),
                });
                continue;
            }
        };
        if (record.shard, record.shards) != (index, count) {
            problems.push(PartProblem::Damaged {
                file: names.record(),
                reason: format!(
                    "says it is shard {}/{}, not {shard}",
                    record.shard, record.shards
                ),
            });
        } else if record.recipe != recipe {
            problems.push(PartProblem::OtherRecipe(shard));
        } else if record.input != input {
            problems.push(PartProblem::OtherInput(shard));
        } else {
            records.push(record);
        }
    }
    if problems.is_empty() {
        Ok(records)
    } else {
        Err(JoinError::Refused {
            out: out.to_path_buf(),
            problems,
        })
    }
}

/// A part file read line by line, with what is needed to say it is short or long.
struct PartReader {
    lines: std::io::Lines<std::io::BufReader<std::fs::File>>,
    file: String,
}

impl PartReader {
    fn next_line(&mut self) -> std::io::Result<Option<String>> {
        self.lines.next().transpose()
    }

    fn short(&self, shard: Shard) -> PartProblem {
        PartProblem::Damaged {
            file: self.file.clone(),
            reason: format!("holds fewer lines than the record of shard {shard} lists"),
        }
    }

    fn long(&self, shard: Shard) -> PartProblem {
        PartProblem::Damaged {
            file: self.file.clone(),
            reason: format!("holds more lines than the record of shard {shard} lists"),
        }
    }
}

fn open_parts(
    out: &Path,
    records: &[PartRecord],
    name: impl Fn(&PartNames) -> String,
) -> Result<Vec<PartReader>, JoinError> {
    records
        .iter()
        .map(|r| {
            let file = name(&PartNames::of(Shard {
                index: r.shard,
                count: r.shards,
            }));
            let path = out.join(&file);
            let f = std::fs::File::open(&path).map_err(io(&path))?;
            Ok(PartReader {
                lines: std::io::BufReader::new(f).lines(),
                file,
            })
        })
        .collect()
}
