//! Files the user hands in (manifests, transcripts, audio) are opened only when they are
//! regular files, after following links: reading a FIFO, a terminal or a device would wait
//! forever or never end, and a folder cannot be read at all.

use std::fs::File;
use std::io::{Error, ErrorKind};
use std::path::Path;

/// Fails unless `path` is a regular file (links followed).
///
/// # Errors
/// The file's metadata cannot be read (it does not exist, ...), or it is a folder, FIFO,
/// socket or device: kind [`ErrorKind::InvalidInput`], the message says which.
pub fn regular(path: &Path) -> std::io::Result<()> {
    let kind = std::fs::metadata(path)?.file_type();
    if kind.is_file() {
        return Ok(());
    }
    let what = if kind.is_dir() {
        "a folder"
    } else {
        kind_name(&kind)
    };
    Err(Error::new(
        ErrorKind::InvalidInput,
        format!("is {what}, not a regular file (only regular files are read)"),
    ))
}

#[cfg(unix)]
fn kind_name(kind: &std::fs::FileType) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    if kind.is_fifo() {
        "a FIFO (named pipe)"
    } else if kind.is_socket() {
        "a socket"
    } else if kind.is_char_device() || kind.is_block_device() {
        "a device"
    } else {
        "a special file"
    }
}

#[cfg(not(unix))]
fn kind_name(_: &std::fs::FileType) -> &'static str {
    "a special file"
}

/// [`File::open`] for regular files only.
///
/// # Errors
/// As [`regular`], or the open itself.
pub fn open(path: &Path) -> std::io::Result<File> {
    regular(path)?;
    File::open(path)
}

/// [`std::fs::read`] for regular files only.
///
/// # Errors
/// As [`regular`], or the read itself.
pub fn read(path: &Path) -> std::io::Result<Vec<u8>> {
    regular(path)?;
    std::fs::read(path)
}

/// [`std::fs::read_to_string`] for regular files only.
///
/// # Errors
/// As [`regular`], or the read itself (not UTF-8 among them).
pub fn read_to_string(path: &Path) -> std::io::Result<String> {
    regular(path)?;
    std::fs::read_to_string(path)
}
