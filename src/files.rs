//! Output files: names made from clip ids, and writes (text or WAV) that never leave half a
//! file, even on power loss.
//!
//! Every file is written under a temporary name unique to this process
//! (`<name>.<pid>.<n>.part`), flushed to disk (`fsync`), then renamed into place; the folder
//! is flushed after the rename, so a rename that was reported done survives a power cut.
//! Only files with that temporary pattern are ever removed as leftovers
//! ([`remove_stale_temp_files`]), and only while the folder's lock is held.

use std::ffi::OsString;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use sha2::{Digest, Sha256};

use crate::audio::{self, Audio, AudioError, SampleFormat};

/// Longest stem [`file_stem`] returns, in bytes. With the longest suffix the tool adds
/// (`.t9999.s999-noise.wav`, then `.<pid>.<n>.part` while writing: under 60 bytes) a name
/// stays well below the 255-byte limit of common file systems.
pub const MAX_STEM_BYTES: usize = 160;

/// Starts an escaped byte in a stem (`%2F`). Plain ids never contain it, so an id kept as it
/// is can never equal another id's escaped form.
const ESCAPE: char = '%';
/// Starts the hash of an id too long to keep whole. Neither plain ids nor escaped forms
/// contain it.
const HASHED: char = '~';
/// Hex digits of the hash of a long id: 128 bits of SHA-256.
const HASH_HEX: usize = 32;

/// A file name for a clip id, the same on every machine, and different for any two
/// different ids:
///
/// - a plain id (ASCII letters, digits, `-`, `_`, `.`; not starting with `.`; at most
///   [`MAX_STEM_BYTES`]) is kept as it is: `dock-01` → `dock-01`;
/// - any other id is percent-escaped byte by byte (`north/dock 1` → `north%2Fdock%201`),
///   which is reversible, so two ids never share an escaped form, and every escaped form
///   holds `%`, which no plain id does;
/// - an id whose escaped form is longer than [`MAX_STEM_BYTES`] (or empty) keeps a readable
///   start of it plus `~` and 128 bits of its SHA-256: the only case where two ids could
///   share a name, which would take a SHA-256 collision.
///
/// On a file system that ignores case, ids that differ only in case still share a name.
pub fn file_stem(id: &str) -> String {
    let plain = !id.is_empty()
        && !id.starts_with('.')
        && id.len() <= MAX_STEM_BYTES
        && id.bytes().all(is_plain_byte);
    if plain {
        return id.to_string();
    }
    let mut escaped = String::with_capacity(id.len() + 8);
    for (i, b) in id.bytes().enumerate() {
        if is_plain_byte(b) && !(i == 0 && b == b'.') {
            escaped.push(char::from(b));
        } else {
            escaped.push(ESCAPE);
            escaped.push_str(&format!("{b:02X}"));
        }
    }
    if !escaped.is_empty() && escaped.len() <= MAX_STEM_BYTES {
        return escaped;
    }
    let keep = MAX_STEM_BYTES - HASH_HEX - 1;
    let mut cut = keep.min(escaped.len());
    // Do not end the readable part in the middle of an escape.
    if let Some(p) = escaped[cut.saturating_sub(2)..cut].find(ESCAPE) {
        cut = cut.saturating_sub(2) + p;
    }
    let digest = Sha256::digest(id.as_bytes());
    let hex: String = digest
        .iter()
        .take(HASH_HEX / 2)
        .map(|b| format!("{b:02x}"))
        .collect();
    format!("{}{HASHED}{hex}", &escaped[..cut])
}

fn is_plain_byte(b: u8) -> bool {
    b.is_ascii_alphanumeric() || b == b'-' || b == b'_' || b == b'.'
}

/// Temporary files written by this process so far (part of each temporary name).
static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// The temporary name a file is written under before it is renamed to `path`: unique to this
/// process and this write (`<name>.<pid>.<n>.part`), so two processes or two threads never
/// write into one temporary file.
pub fn temp_path(path: &Path) -> PathBuf {
    let n = TEMP_COUNTER.fetch_add(1, Ordering::Relaxed);
    let mut name: OsString = path.file_name().unwrap_or_default().to_os_string();
    name.push(format!(".{}.{n}.part", std::process::id()));
    path.with_file_name(name)
}

/// Whether `name` has the pattern of [`temp_path`]: `<name>.<digits>.<digits>.part`.
pub fn is_temp_name(name: &str) -> bool {
    let Some(rest) = name.strip_suffix(".part") else {
        return false;
    };
    let mut parts = rest.rsplitn(3, '.');
    let digits =
        |s: Option<&str>| s.is_some_and(|s| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit()));
    digits(parts.next()) && digits(parts.next()) && parts.next().is_some_and(|s| !s.is_empty())
}

/// Remove the temporary files ([`is_temp_name`]) an interrupted run left in `dir`: regular
/// files only, nothing else. Call it only while holding the folder's lock, so no other run
/// is writing them. Returns how many were removed.
///
/// # Errors
/// Reading the folder or removing a file.
pub fn remove_stale_temp_files(dir: &Path) -> std::io::Result<usize> {
    let mut removed = 0;
    for entry in std::fs::read_dir(dir)? {
        let entry = entry?;
        let stale =
            entry.file_type()?.is_file() && entry.file_name().to_str().is_some_and(is_temp_name);
        if stale {
            std::fs::remove_file(entry.path())?;
            removed += 1;
        }
    }
    Ok(removed)
}

/// Flush a folder's entries (renames, removals) to disk.
///
/// # Errors
/// Opening or syncing the folder.
pub fn sync_dir(dir: &Path) -> std::io::Result<()> {
    let dir = if dir.as_os_str().is_empty() {
        Path::new(".")
    } else {
        dir
    };
    std::fs::File::open(dir)?.sync_all()
}

/// A file being written under its temporary name ([`temp_path`]): filled as a stream, then
/// [`AtomicFile::commit`] flushes it to disk, renames it into place and flushes the folder,
/// so a crash or power cut leaves either the old file or the whole new one. Dropped without
/// a commit, it removes its temporary file.
#[derive(Debug)]
pub struct AtomicFile {
    path: PathBuf,
    tmp: PathBuf,
    writer: Option<std::io::BufWriter<std::fs::File>>,
}

impl AtomicFile {
    /// Start writing `path` (nothing is at `path` until the commit).
    ///
    /// # Errors
    /// Creating the temporary file.
    pub fn create(path: &Path) -> std::io::Result<Self> {
        let tmp = temp_path(path);
        let file = std::fs::File::create(&tmp)?;
        Ok(AtomicFile {
            path: path.to_path_buf(),
            tmp,
            writer: Some(std::io::BufWriter::new(file)),
        })
    }

    /// Where to write.
    pub fn writer(&mut self) -> &mut std::io::BufWriter<std::fs::File> {
        self.writer
            .as_mut()
            .expect("an AtomicFile has its writer until it is committed")
    }

    /// Flush to disk, rename into place, flush the folder.
    ///
    /// # Errors
    /// Flushing, syncing or renaming; the temporary file is removed.
    pub fn commit(mut self) -> std::io::Result<()> {
        let result = (|| {
            let mut w = self.writer.take().expect("committed once");
            w.flush()?;
            w.get_ref().sync_all()?;
            drop(w);
            std::fs::rename(&self.tmp, &self.path)
        })();
        if result.is_err() {
            let _ = std::fs::remove_file(&self.tmp);
        }
        result?;
        sync_dir(self.path.parent().unwrap_or(Path::new(".")))
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.writer.take().is_some() {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Write a file under a temporary name ([`temp_path`]), flush it to disk, rename it into
/// place and flush the folder, so a crash or power cut leaves either the old file or the
/// whole new one ([`AtomicFile`] for a file written as a stream).
///
/// # Errors
/// Creating, filling, flushing or renaming the file; the temporary file is removed.
pub fn write_atomically(
    path: &Path,
    fill: impl FnOnce(&mut std::io::BufWriter<std::fs::File>) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let mut file = AtomicFile::create(path)?;
    fill(file.writer())?;
    file.commit()
}

/// A file that could not be written, with the system's reason when there is one.
#[derive(Debug, thiserror::Error)]
#[error("{}: cannot write: {source}", path.display())]
pub struct WriteError {
    /// The file.
    pub path: PathBuf,
    /// Why (an encoder's refusal is an [`std::io::ErrorKind::Other`]).
    pub source: std::io::Error,
}

impl WriteError {
    /// The disk (or the quota, or the file-size limit) is full: no later write will fare
    /// better, so the run must stop rather than reject clip after clip.
    pub fn is_out_of_space(&self) -> bool {
        is_out_of_space(&self.source)
    }
}

/// Whether an I/O error means there is no room left to write (`ENOSPC`, `EDQUOT`, `EFBIG`).
pub fn is_out_of_space(e: &std::io::Error) -> bool {
    use std::io::ErrorKind;
    matches!(
        e.kind(),
        ErrorKind::StorageFull | ErrorKind::FileTooLarge | ErrorKind::QuotaExceeded
    )
}

/// Write `signal` to `out/rel` in `format` (WAV or FLAC, as its row of the output-format
/// table says) under a temporary name, flush it to disk and rename it into place. The folder is not flushed here: the caller calls [`sync_dir`] once for a batch of
/// files, before anything that counts on them (a completion record, a manifest) is written.
///
/// # Errors
/// Encoding, writing, flushing or renaming; the temporary file is removed.
pub fn write_audio_atomically(
    out: &Path,
    rel: &str,
    signal: &Audio,
    format: SampleFormat,
) -> Result<PathBuf, WriteError> {
    let dest = out.join(rel);
    let tmp = temp_path(&dest);
    let result = audio::write_audio(&tmp, signal, format)
        .map_err(|e| match e {
            AudioError::Io { source, .. } => source,
            other => std::io::Error::other(other.to_string()),
        })
        .and_then(|()| std::fs::File::open(&tmp)?.sync_all())
        .and_then(|()| std::fs::rename(&tmp, &dest));
    result.map_err(|source| {
        let _ = std::fs::remove_file(&tmp);
        WriteError {
            path: dest.clone(),
            source,
        }
    })?;
    Ok(dest)
}

/// Rate and frames of an audio file this tool wrote, when it is whole: a WAV whose RIFF
/// length matches the file's length (so it was finished and not cut short since), or a
/// FLAC file whose last bytes are the whole last frame its STREAMINFO calls for
/// ([`crate::audio::flac_tail`]). `None` for a missing, unreadable, unfinished or truncated
/// file.
pub fn whole_audio_frames(path: &Path) -> Option<(u32, u64)> {
    use std::io::Read;
    let mut file = std::fs::File::open(path).ok()?;
    let len = file.metadata().ok()?.len();
    let mut head = [0u8; 8];
    file.read_exact(&mut head).ok()?;
    if &head[..4] == b"fLaC" {
        return flac_frames(&head, &mut file, len);
    }
    let riff = u32::from_le_bytes([head[4], head[5], head[6], head[7]]);
    if &head[..4] != b"RIFF" || u64::from(riff) + 8 != len {
        return None;
    }
    let reader = hound::WavReader::open(path).ok()?;
    let spec = reader.spec();
    let frames = u64::from(reader.duration());
    let data = frames * u64::from(spec.bits_per_sample / 8) * u64::from(spec.channels);
    (data <= len).then_some((spec.sample_rate, frames))
}

/// Rate and total samples of a FLAC file from its STREAMINFO block (the first metadata
/// block, 34 bytes), when the file ends with the whole last frame it calls for.
fn flac_frames(head: &[u8; 8], file: &mut std::fs::File, len: u64) -> Option<(u32, u64)> {
    use std::io::{Read, Seek, SeekFrom};
    // Block header: type 0 (STREAMINFO) in the low 7 bits, length 34.
    if head[4] & 0x7F != 0 || head[5..8] != [0, 0, 34] {
        return None;
    }
    let mut info = [0u8; 34];
    file.read_exact(&mut info).ok()?;
    let info = crate::audio::flac_tail::StreamInfo::parse(&info)?;
    // The last frame lies within its largest size (or a generous bound when unknown).
    let span = match info.max_frame_bytes {
        0 => 1 << 20,
        n => u64::from(n) + 2,
    }
    .min(len.saturating_sub(42));
    file.seek(SeekFrom::Start(len - span)).ok()?;
    let mut tail = vec![0u8; span as usize];
    file.read_exact(&mut tail).ok()?;
    crate::audio::flac_tail::ends_with_last_frame(&tail, &info)
        .then_some((info.rate, info.total_samples))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_ids_are_kept_and_others_escaped() {
        assert_eq!(file_stem("dock-01"), "dock-01");
        assert_eq!(file_stem("aisle_3.v2"), "aisle_3.v2");
        assert_eq!(file_stem("north/dock 1"), "north%2Fdock%201");
        assert_eq!(file_stem(".hidden"), "%2Ehidden");
        assert_eq!(file_stem("../x"), "%2E.%2Fx");
        // The pair that shared `takes/north_dock_1-bfc812e8.t0.wav` before.
        assert_ne!(
            file_stem("north/dock 1"),
            file_stem("north_dock_1-bfc812e8")
        );
        assert_eq!(file_stem("north_dock_1-bfc812e8"), "north_dock_1-bfc812e8");
    }

    #[test]
    fn long_ids_are_cut_and_hashed() {
        let long = "a".repeat(300);
        let s = file_stem(&long);
        assert_eq!(s.len(), MAX_STEM_BYTES);
        assert!(s.starts_with("aaaa") && s.contains('~'), "{s}");
        assert_ne!(s, file_stem(&"a".repeat(301)));
        // An escape is never split at the cut.
        let s = file_stem(&"é".repeat(200));
        let readable = s.split('~').next().unwrap_or_default();
        assert!(readable.len().is_multiple_of(6), "{s}");
        assert_eq!(file_stem("").len(), HASH_HEX + 1);
    }

    #[test]
    fn temp_names_are_unique_and_recognised() {
        let a = temp_path(Path::new("out/takes/x.t0.wav"));
        let b = temp_path(Path::new("out/takes/x.t0.wav"));
        assert_ne!(a, b);
        let name = a.file_name().and_then(|n| n.to_str()).unwrap_or_default();
        assert!(
            name.starts_with(&format!("x.t0.wav.{}.", std::process::id())),
            "{name}"
        );
        assert!(is_temp_name(name));
        for not_ours in [
            "x.part",
            "x.wav.part",
            "notes.1.part",
            ".1.2.part",
            "x.1.a.part",
            "x.1.2",
        ] {
            assert!(!is_temp_name(not_ours), "{not_ours}");
        }
    }
}
