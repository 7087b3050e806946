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
        || {
            "no process id written: shard runs (their ids are in parts/*.lock), or one starting"
                .into()
        },
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
        Self::acquire_file(dir, LOCK_NAME)
    }

    /// Create `dir` if needed and lock the file `name` in it exclusively, without waiting,
    /// writing this process's id into it: the lock of one shard's parts
    /// (`parts/<k>-of-<n>.lock`) as much as the folder's.
    ///
    /// # Errors
    /// [`LockError::Held`] when another holder has it, [`LockError::Io`] otherwise.
    pub fn acquire_file(dir: &Path, name: &str) -> Result<Self, LockError> {
        let (mut file, path) = open_lock(dir, name)?;
        match file.try_lock() {
            Ok(()) => {}
            Err(TryLockError::WouldBlock) => return Err(held(&mut file, path)),
            Err(TryLockError::Error(source)) => return Err(LockError::Io { path, source }),
        }
        file.set_len(0)
            .and_then(|()| file.rewind())
            .and_then(|()| writeln!(file, "{}", std::process::id()))
            .map_err(|source| LockError::Io {
                path: path.clone(),
                source,
            })?;
        Ok(FolderLock { file, path })
    }

    /// The lock file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

/// A shared hold on a folder's lock ([`LOCK_NAME`]): any number of shard runs hold it
/// together, while a whole run or a join (which lock it exclusively) is refused, and a shard
/// is refused while one of those holds it. The file is left as it is (no process id: each
/// shard writes its own into its part lock).
#[derive(Debug)]
pub struct SharedFolderLock {
    _file: File,
}

impl SharedFolderLock {
    /// Create `dir` if needed and take a shared hold on its lock, without waiting.
    ///
    /// # Errors
    /// [`LockError::Held`] when a whole run or a join holds the folder, [`LockError::Io`]
    /// otherwise.
    pub fn acquire(dir: &Path) -> Result<Self, LockError> {
        let (mut file, path) = open_lock(dir, LOCK_NAME)?;
        match file.try_lock_shared() {
            Ok(()) => Ok(SharedFolderLock { _file: file }),
            Err(TryLockError::WouldBlock) => Err(held(&mut file, path)),
            Err(TryLockError::Error(source)) => Err(LockError::Io { path, source }),
        }
    }
}

/// Open (creating) the lock file `name` in `dir`.
fn open_lock(dir: &Path, name: &str) -> Result<(File, PathBuf), LockError> {
    let io = |path: &Path| {
        let path = path.to_path_buf();
        move |source| LockError::Io { path, source }
    };
    std::fs::create_dir_all(dir).map_err(io(dir))?;
    let path = dir.join(name);
    let file = OpenOptions::new()
        .read(true)
        .write(true)
        .create(true)
        .truncate(false)
        .open(&path)
        .map_err(io(&path))?;
    Ok((file, path))
}

/// The refusal of a lock someone else holds, naming the process id written in it.
fn held(file: &mut File, path: PathBuf) -> LockError {
    let mut text = String::new();
    let _ = file.read_to_string(&mut text);
    LockError::Held {
        pid: text.trim().parse().ok(),
        path,
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

    #[test]
    fn shared_holds_coexist_and_keep_the_exclusive_lock_out() {
        let dir = tempfile::tempdir().expect("temp dir");
        let out = dir.path().join("out");
        let a = SharedFolderLock::acquire(&out).expect("first shard");
        let b = SharedFolderLock::acquire(&out).expect("second shard beside it");
        let e = FolderLock::acquire(&out).expect_err("a whole run while shards hold it");
        assert!(e.to_string().contains("shard runs"), "{e}");
        drop((a, b));
        let whole = FolderLock::acquire(&out).expect("free once the shards are done");
        let e = SharedFolderLock::acquire(&out).expect_err("a shard while a whole run holds it");
        assert!(
            e.to_string()
                .contains(&format!("process id {}", std::process::id())),
            "{e}"
        );
        drop(whole);
    }
}
