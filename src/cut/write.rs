//! Cut audio on disk: written under a temporary name and renamed, so an interrupted run
//! leaves whole files or `.part` files, and the `.part` files are cleared at the next start.

use std::path::{Path, PathBuf};

use crate::audio::{self, Audio, SampleFormat};

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

/// Write `signal` to `out/rel` as `out/rel.part`, then rename it into place.
pub(super) fn write_wav_atomically(
    out: &Path,
    rel: &str,
    signal: &Audio,
    format: SampleFormat,
) -> Result<PathBuf, String> {
    let dest = out.join(rel);
    let tmp = out.join(format!("{rel}.part"));
    audio::write_wav(&tmp, signal, format).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        e.to_string()
    })?;
    std::fs::rename(&tmp, &dest).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        format!("{}: {e}", dest.display())
    })?;
    Ok(dest)
}
