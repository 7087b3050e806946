//! What an earlier run left in an output folder, and its removal once a new run has
//! finished: the rule that after a finished run every file in the output's own folders is
//! listed in its manifest, while nothing the tool did not write is ever deleted.
//!
//! At the start of a run the files named by the earlier manifest (and by the journal of an
//! earlier run that did not finish) are written to a journal ([`JOURNAL_NAME`]); then the
//! earlier manifest and reports are removed, so no manifest ever lists audio that the new
//! run is replacing. At the end, after the new manifest is in place, every journal file the
//! new run did not make again is removed, and then the journal. A run killed anywhere in
//! between leaves the journal, and the next run takes it over, so no file is orphaned.
//! Only names of the form `<folder>/<file>` in the command's own folders are ever removed.

use std::collections::{BTreeSet, HashSet};
use std::io::Write;
use std::path::{Component, Path, PathBuf};

use crate::files::{sync_dir, write_atomically};
use crate::transcript::{Clip, read_manifest};

/// The journal of files earlier runs wrote, inside the output folder.
pub const JOURNAL_NAME: &str = ".retake-earlier.jsonl";

/// Files earlier runs wrote into an output folder, to be removed unless made again.
#[derive(Debug)]
pub struct Earlier {
    out: PathBuf,
    /// The journal's name inside `out` ([`JOURNAL_NAME`], or a shard's own).
    journal: String,
    folders: Vec<&'static str>,
    files: BTreeSet<String>,
}

impl Earlier {
    /// Take over what earlier runs left in `out`: the journal, plus the files of every
    /// record in `out/<manifest>` (`files_of` names them, relative to `out`); keep them in
    /// the journal; then remove the manifest and `reports`. Call it while holding the
    /// folder's lock and before writing anything else.
    ///
    /// # Errors
    /// Writing the journal or removing the earlier manifest or reports.
    pub fn begin(
        out: &Path,
        folders: &[&'static str],
        manifest: &str,
        reports: &[&str],
        files_of: impl Fn(&Clip) -> Vec<String>,
    ) -> std::io::Result<Self> {
        Self::begin_journal(out, JOURNAL_NAME, folders, manifest, reports, files_of)
    }

    /// [`Earlier::begin`] with a journal of another name (relative to `out`): a shard keeps
    /// its own, so shards writing into one folder never take over each other's files.
    ///
    /// # Errors
    /// Writing the journal or removing the earlier manifest or reports.
    pub fn begin_journal(
        out: &Path,
        journal: &str,
        folders: &[&'static str],
        manifest: &str,
        reports: &[&str],
        files_of: impl Fn(&Clip) -> Vec<String>,
    ) -> std::io::Result<Self> {
        let mut earlier = Earlier {
            out: out.to_path_buf(),
            journal: journal.to_string(),
            folders: folders.to_vec(),
            files: BTreeSet::new(),
        };
        let journal = out.join(journal);
        if let Ok(text) = std::fs::read_to_string(&journal) {
            for line in text.lines() {
                if let Ok(rel) = serde_json::from_str::<String>(line) {
                    earlier.add(rel);
                }
            }
        }
        let manifest = out.join(manifest);
        if let Ok(m) = read_manifest(&manifest) {
            for e in &m.entries {
                for rel in files_of(&e.clip) {
                    earlier.add(rel);
                }
            }
        }
        if !earlier.files.is_empty() {
            earlier.write_journal()?;
        }
        for f in std::iter::once(manifest).chain(reports.iter().map(|r| out.join(r))) {
            match std::fs::remove_file(&f) {
                Err(e) if e.kind() != std::io::ErrorKind::NotFound => return Err(e),
                _ => {}
            }
        }
        sync_dir(out)?;
        Ok(earlier)
    }

    /// Add a file an earlier run wrote (relative to the output folder); names outside the
    /// command's own folders are ignored.
    pub fn add(&mut self, rel: String) {
        if self.owned(&rel) {
            self.files.insert(rel);
        }
    }

    /// A file the new run made again (relative to the output folder): it is not removed at
    /// the end. Calling this as files are made keeps memory to the earlier files alone.
    pub fn keep(&mut self, rel: &str) {
        self.files.remove(rel);
    }

    /// The files set for removal so far in folder `folder` (relative to the output folder).
    pub fn pending_in(&self, folder: &str) -> Vec<String> {
        self.files
            .iter()
            .filter(|f| Path::new(f).parent() == Some(Path::new(folder)))
            .cloned()
            .collect()
    }

    fn owned(&self, rel: &str) -> bool {
        let parts: Vec<Component<'_>> = Path::new(rel).components().collect();
        matches!(parts.as_slice(), [Component::Normal(dir), Component::Normal(_)]
            if self.folders.iter().any(|f| dir == f))
            && !rel.contains('\\')
    }

    fn write_journal(&self) -> std::io::Result<()> {
        write_atomically(&self.out.join(&self.journal), |w| {
            for f in &self.files {
                serde_json::to_writer(&mut *w, f)?;
                w.write_all(b"\n")?;
            }
            Ok(())
        })
    }

    /// After the new manifest is in place: remove every earlier file not in `keep`
    /// (relative paths), flush the folders, then remove the journal. Returns how many files
    /// were removed.
    ///
    /// # Errors
    /// Removing a file (one already gone is fine) or the journal.
    pub fn finish(self, keep: &HashSet<&str>) -> std::io::Result<usize> {
        let mut removed = 0;
        for rel in self.files.iter().filter(|f| !keep.contains(f.as_str())) {
            match std::fs::remove_file(self.out.join(rel)) {
                Ok(()) => removed += 1,
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
                Err(e) => return Err(e),
            }
        }
        for f in &self.folders {
            let dir = self.out.join(f);
            if dir.is_dir() {
                sync_dir(&dir)?;
            }
        }
        match std::fs::remove_file(self.out.join(&self.journal)) {
            Err(e) if e.kind() != std::io::ErrorKind::NotFound => return Err(e),
            _ => {}
        }
        sync_dir(&self.out)?;
        Ok(removed)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_names_in_own_folders_are_taken() {
        let mut e = Earlier {
            out: PathBuf::from("out"),
            journal: JOURNAL_NAME.into(),
            folders: vec!["takes", ".done"],
            files: BTreeSet::new(),
        };
        for rel in [
            "takes/a.wav",
            ".done/a.json",
            "../x.wav",
            "takes/../../x",
            "/etc/passwd",
            "takes",
            "other/a.wav",
            "takes/sub/a.wav",
            "manifest.jsonl",
        ] {
            e.add(rel.to_string());
        }
        let got: Vec<&str> = e.files.iter().map(String::as_str).collect();
        assert_eq!(got, [".done/a.json", "takes/a.wav"]);
    }
}
