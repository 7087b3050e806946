//! Slice audio on disk is written under a temporary name and renamed
//! ([`crate::files::write_wav_atomically`]), so an interrupted run leaves whole files or
//! `.part` files; the `.part` files are cleared at the next start.

use std::path::Path;

/// Remove `*.part` files an interrupted run left in `dir`.
pub(super) fn remove_partial_files(dir: &Path) -> std::io::Result<()> {
    for entry in std::fs::read_dir(dir)? {
        let path = entry?.path();
        if path.extension().is_some_and(|e| e == "part") {
            std::fs::remove_file(&path)?;
        }
    }
    Ok(())
}
