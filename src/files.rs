//! Output files: names made from clip ids, and writes (text or WAV) that never leave half a
//! file.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::audio::{self, Audio, SampleFormat};

use crate::seed::take_seed;

/// A file name for a clip id: the id itself when it is plain, else a cleaned id plus a
/// short hash of the original so two ids never share a file.
pub fn file_stem(id: &str) -> String {
    let clean: String = id
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.' {
                c
            } else {
                '_'
            }
        })
        .collect();
    if clean == id && !id.starts_with('.') {
        clean
    } else {
        format!(
            "{}-{:08x}",
            clean.trim_start_matches('.'),
            take_seed(0, id, 0) as u32
        )
    }
}

/// Write a file under a temporary name (`<name>.part`), then rename it into place, so a crash
/// leaves either the old file or the whole new one.
///
/// # Errors
/// Creating, filling, flushing or renaming the file.
pub fn write_atomically(
    path: &Path,
    fill: impl FnOnce(&mut std::io::BufWriter<std::fs::File>) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let mut name = path.file_name().unwrap_or_default().to_os_string();
    name.push(".part");
    let tmp = path.with_file_name(name);
    let result = (|| {
        let file = std::fs::File::create(&tmp)?;
        let mut w = std::io::BufWriter::new(file);
        fill(&mut w)?;
        w.flush()?;
        drop(w);
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Write `signal` to `out/rel` as `out/rel.part`, then rename it into place. The error names
/// the file.
///
/// # Errors
/// Encoding or renaming; the `.part` file is removed.
pub fn write_wav_atomically(
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stems_are_safe_and_distinct() {
        assert_eq!(file_stem("dock-01"), "dock-01");
        let a = file_stem("north/dock 1");
        let b = file_stem("north_dock_1");
        assert!(a.starts_with("north_dock_1-"), "{a}");
        assert_ne!(a, b);
        assert!(!file_stem("../x").contains('/'));
    }
}
