//! Noise banks: folders of site recordings, decoded and brought to the run's rate once, then
//! shared read-only by every thread. First-level subfolders are categories (files directly
//! in the bank folder form the category `"."`). A stable hash of each file's path relative
//! to the bank splits the bank into a training part and a held-out part.

use std::path::PathBuf;

mod bank;
pub mod describe;

pub use bank::{BankCache, load_bank};

/// One usable noise recording, at the bank's rate.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseFile {
    /// Path relative to the bank folder, with `/` separators (what the manifest records).
    pub rel_path: String,
    /// The category: the first-level subfolder, or `"."` for files at the top.
    pub category: String,
    /// Mono samples at the bank's rate; never empty.
    pub samples: Vec<f32>,
    /// In the held-out part (see [`is_held_out`]).
    pub held_out: bool,
}

/// A decoded bank.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseBank {
    /// The bank folder.
    pub root: PathBuf,
    /// Sample rate of every file's samples.
    pub rate: u32,
    /// Usable files, sorted by `rel_path`.
    pub files: Vec<NoiseFile>,
    /// Files left out, with the reason (undecodable, empty, ...), sorted by path.
    pub skipped: Vec<(String, String)>,
}

/// Why a bank cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum BankError {
    /// The folder does not exist or is not a folder.
    #[error("{0}: no such folder")]
    Missing(PathBuf),
    /// The folder holds no files at all.
    #[error("{0}: the noise bank holds no files")]
    Empty(PathBuf),
    /// Files were found but none could be used.
    #[error("{path}: none of the {count} files can be used (first: {first})")]
    NothingUsable {
        /// The bank folder.
        path: PathBuf,
        /// Files found.
        count: usize,
        /// The first file's problem.
        first: String,
    },
    /// The folder could not be read.
    #[error("{path}: {source}")]
    Io {
        /// The folder or file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
}

/// Whether the file at `rel_path` belongs to the held-out part for a held-out `fraction`
/// in [0, 1]: a stable hash of the path, read as a number in [0, 1), below the fraction.
/// The same file is in the same part in every run, on every machine.
pub fn is_held_out(rel_path: &str, fraction: f64) -> bool {
    let h = crate::seed::stable_hash(&[b"noise-split", rel_path.as_bytes()]);
    ((h >> 11) as f64 / (1u64 << 53) as f64) < fraction
}

impl NoiseBank {
    /// Indices of the usable files of one part (`held_out` true: the held-out part).
    pub fn part(&self, held_out: bool) -> Vec<usize> {
        (0..self.files.len())
            .filter(|&i| self.files[i].held_out == held_out)
            .collect()
    }

    /// Every file of the bank folder that was read, usable or skipped (a skipped file that
    /// becomes usable changes the bank).
    pub fn paths(&self) -> Vec<PathBuf> {
        let skipped = self.skipped.iter().map(|(rel, _)| rel);
        let rels = self.files.iter().map(|f| &f.rel_path).chain(skipped);
        rels.map(|rel| self.root.join(rel)).collect()
    }

    /// Category names in sorted order.
    pub fn categories(&self) -> Vec<&str> {
        let mut c: Vec<&str> = self.files.iter().map(|f| f.category.as_str()).collect();
        c.sort_unstable();
        c.dedup();
        c
    }
}
