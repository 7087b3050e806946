//! Output files: names made from clip ids, and writes that never leave half a file.

use std::io::Write;
use std::path::Path;

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
