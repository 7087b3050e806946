//! What one shard leaves in the shared output folder, under `parts/`: its manifest part,
//! rejects part, lock, journal and, once it has finished, its record. Shards share `takes/`
//! and `.done/` (files there are per clip, and each clip belongs to one shard), never a part.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::shard::Shard;

/// Folder of the shards' parts inside the output folder.
pub const PARTS_DIR: &str = "parts";

/// The files of one shard, relative to the output folder.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PartNames {
    /// `parts/<k>-of-<n>`: what every name below starts with.
    pub stem: String,
}

impl PartNames {
    /// The names of shard `shard`'s files.
    pub fn of(shard: Shard) -> Self {
        PartNames {
            stem: format!("{PARTS_DIR}/{}-of-{}", shard.index, shard.count),
        }
    }

    /// Its takes, in input order, one manifest record per line.
    pub fn manifest(&self) -> String {
        format!("{}.manifest.jsonl", self.stem)
    }

    /// Its rejects, in input order.
    pub fn rejects(&self) -> String {
        format!("{}.rejects.jsonl", self.stem)
    }

    /// Its lock (the shard's process id while it runs; it stays, empty, after).
    pub fn lock(&self) -> String {
        format!("{}.lock", self.stem)
    }

    /// Its journal of files an earlier run of this shard wrote.
    pub fn journal(&self) -> String {
        format!("{}.earlier.jsonl", self.stem)
    }

    /// Its record, written last: present only for a finished shard.
    pub fn record(&self) -> String {
        format!("{}.json", self.stem)
    }
}

/// A shard's file name in `parts/` read back: (k, n, what follows `<k>-of-<n>`).
pub fn parse_part_name(name: &str) -> Option<(usize, usize, &str)> {
    let (k, rest) = name.split_once("-of-")?;
    let end = rest.find('.')?;
    let (n, tail) = rest.split_at(end);
    let k = k.parse().ok()?;
    let n = n.parse().ok()?;
    (k < n).then_some((k, n, tail))
}

/// The record of a finished shard: what it was made from and what it holds, in order, so
/// the join can merge the parts without reading the input again.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PartRecord {
    /// The shard's index, from 0.
    pub shard: usize,
    /// How many shards the run was split into.
    pub shards: usize,
    /// Fingerprint of the plan and the files it reads (hex).
    pub recipe: String,
    /// Fingerprint of the input manifest's bytes (hex).
    pub input: String,
    /// Per clip done, in input order: its manifest line, the take records it has in the
    /// manifest part and its completion record (relative to the output folder).
    pub clips: Vec<(usize, usize, String)>,
    /// The manifest lines of its rejects, in order (one line of the rejects part each).
    pub rejects: Vec<usize>,
}

/// A moved-aside joined manifest: `parts/earlier-<hash>.jsonl`. A shard starting in a folder
/// that holds a joined `manifest.jsonl` moves it here (named by its content, so shards
/// starting together write the same file), so no manifest lists audio being remade; the
/// join removes the files it lists that were not made again, then the file.
pub fn earlier_manifest_name(content: &[u8]) -> String {
    let h = crate::seed::stable_hash(&[content]);
    format!("{PARTS_DIR}/earlier-{h:016x}.jsonl")
}

/// The moved-aside manifests in `parts/` ([`earlier_manifest_name`]).
pub fn earlier_manifests(out: &Path) -> Vec<PathBuf> {
    let Ok(entries) = std::fs::read_dir(out.join(PARTS_DIR)) else {
        return Vec::new();
    };
    let mut found: Vec<PathBuf> = entries
        .filter_map(Result::ok)
        .filter(|e| {
            e.file_name().to_str().is_some_and(|n| {
                n.strip_prefix("earlier-")
                    .and_then(|n| n.strip_suffix(".jsonl"))
                    .is_some_and(|h| h.len() == 16 && h.bytes().all(|b| b.is_ascii_hexdigit()))
            })
        })
        .map(|e| e.path())
        .collect();
    found.sort();
    found
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn part_names_read_back() {
        let names = PartNames::of(Shard { index: 3, count: 7 });
        assert_eq!(names.manifest(), "parts/3-of-7.manifest.jsonl");
        assert_eq!(
            parse_part_name("3-of-7.manifest.jsonl"),
            Some((3, 7, ".manifest.jsonl"))
        );
        assert_eq!(parse_part_name("3-of-7.json"), Some((3, 7, ".json")));
        assert_eq!(parse_part_name("7-of-7.json"), None);
        assert_eq!(parse_part_name("earlier-00ff.jsonl"), None);
        assert_eq!(parse_part_name("x-of-2.json"), None);
    }
}
