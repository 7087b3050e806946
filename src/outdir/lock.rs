//! An exclusive advisory lock on an output folder, held for a whole run, so two runs into one
//! folder never rename each other's files. The lock file holds the holder's process id, so
//! the refusal can name it.

use std::fs::{File, OpenOptions, TryLockError};
use std::io::{Read, Seek, Write};
use std::path::{Path, PathBuf};

/// Name of the lock file inside a locked folder. It stays after the run (removing it would
/// let a third run lock a new file while a second still holds the old one).
pub const LOCK_NAME: &str = ".retake.lock";

/// Why a folder could not be locked.
#[derive(Debug, thiserror::Error)]
pub enum LockError {
    /// Another process holds the lock.
    #[error(
        "{}: another retake process ({}) is writing into this folder; wait for it to finish \
         or choose another output folder",
        path.display(),
        holder(*pid)
    )]
    Held {
        /// The lock file.
        path: PathBuf,
        /// The holder's process id, when it had written it.
        pid: Option<u32>,
    },
    /// The folder or the lock file could not be made or opened.
    #[error("{}: cannot lock: {source}", path.display())]
    Io {
        /// The folder or lock file.
        path: PathBuf,
        /// Why.
        source: std::io::Error,
    },
}

fn holder(pid: Option<u32>) -> String {
    pid.map_or_else(
        || "process id not written yet".into(),
        |p| format!("process id {p}"),
    )
}

/// A held lock; dropping it empties the lock file and releases the lock, so a finished
/// run leaves the same (empty) file whichever process ran it.
#[derive(Debug)]
pub struct FolderLock {
    file: File,
    path: PathBuf,
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        let _ = self.file.set_len(0);
    }
}

impl FolderLock {
    /// Create `dir` if needed and lock it, without waiting: a folder already locked by
    /// another process (or by another lock in this one) is refused at once.
    ///
    /// # Errors
    /// [`LockError::Held`] when another holder has it, [`LockError::Io`] otherwise.
    pub fn acquire(dir: &Path) -> Result<Self, LockError> {
        let io = |path: &Path| {
            let path = path.to_path_buf();
            move |source| LockError::Io { path, source }
        };
        std::fs::create_dir_all(dir).map_err(io(dir))?;
        let path = dir.join(LOCK_NAME);
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(io(&path))?;
        match file.try_lock() {
            Ok(()) => {}
            Err(TryLockError::WouldBlock) => {
                let mut text = String::new();
                let _ = file.read_to_string(&mut text);
                return Err(LockError::Held {
                    pid: text.trim().parse().ok(),
                    path,
                });
            }
            Err(TryLockError::Error(source)) => return Err(LockError::Io { path, source }),
        }
        file.set_len(0)
            .and_then(|()| file.rewind())
            .and_then(|()| writeln!(file, "{}", std::process::id()))
            .map_err(io(&path))?;
        Ok(FolderLock { file, path })
    }

    /// The lock file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_second_lock_is_refused_and_names_the_holder() {
        let dir = tempfile::tempdir().expect("temp dir");
        let out = dir.path().join("out");
        let first = FolderLock::acquire(&out).expect("first lock");
        let second = FolderLock::acquire(&out).expect_err("second lock must fail");
        match &second {
            LockError::Held { pid, .. } => assert_eq!(*pid, Some(std::process::id())),
            other => panic!("{other}"),
        }
        assert!(
            second
                .to_string()
                .contains(&format!("process id {}", std::process::id())),
            "{second}"
        );
        drop(first);
        assert_eq!(
            std::fs::read(out.join(LOCK_NAME)).expect("lock file").len(),
            0
        );
        FolderLock::acquire(&out).expect("free again after the first is dropped");
    }
}
