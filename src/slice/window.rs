//! A recording read front to back for slicing: frames are decoded as the next slice needs
//! them and dropped once passed, so memory holds about one slice, not the whole recording.

use crate::audio::{AudioError, ChannelPolicy, Stream};
use std::path::{Path, PathBuf};

/// The recording's length in frames and its rate: from the header when it is exact (the
/// slicing pass checks it at the end), else by one decoding pass.
///
/// # Errors
/// Opening or decoding the file.
pub fn frame_count(path: &Path, channels: ChannelPolicy) -> Result<(u64, u32), AudioError> {
    let stream = Stream::open(path, channels)?;
    if let Some(n) = stream.declared_frames() {
        return Ok((n, stream.rate()?));
    }
    let scan = crate::audio::scan(path, channels)?;
    Ok((scan.frames, scan.rate))
}

/// Decoded frames `[start, start + buf.len())` of a stream, moving forward only.
#[derive(Debug)]
pub struct Window {
    path: PathBuf,
    stream: Stream,
    buf: Vec<f32>,
    start: u64,
}

impl Window {
    /// Start at the first frame of the recording at `path`.
    ///
    /// # Errors
    /// Opening the file.
    pub fn open(path: &Path, channels: ChannelPolicy) -> Result<Self, AudioError> {
        Ok(Window {
            path: path.to_path_buf(),
            stream: Stream::open(path, channels)?,
            buf: Vec::new(),
            start: 0,
        })
    }

    /// Frames `[a, b)`; `a` must not be before the previous call's `a`.
    ///
    /// # Errors
    /// Decoding, or a recording that ends before `b` (each message names the file).
    pub fn take(&mut self, a: u64, b: u64) -> Result<Vec<f32>, String> {
        debug_assert!(a >= self.start && b >= a);
        loop {
            let drop = (a.saturating_sub(self.start) as usize).min(self.buf.len());
            self.buf.drain(..drop);
            self.start += drop as u64;
            if self.start + self.buf.len() as u64 >= b {
                let (i, j) = ((a - self.start) as usize, (b - self.start) as usize);
                return Ok(self.buf[i..j].to_vec());
            }
            if !self
                .stream
                .read_into(&mut self.buf)
                .map_err(|e| e.to_string())?
            {
                return Err(format!(
                    "{}: the audio ends at frame {} before the slice's end at frame {b}",
                    self.path.display(),
                    self.start + self.buf.len() as u64
                ));
            }
        }
    }

    /// Read the rest, so the stream's length is checked against its header.
    ///
    /// # Errors
    /// Decoding, or a recording shorter than its header says (the message names the file).
    pub fn finish(mut self) -> Result<(), String> {
        self.buf.clear();
        while self
            .stream
            .read_into(&mut self.buf)
            .map_err(|e| e.to_string())?
        {
            self.buf.clear();
        }
        Ok(())
    }
}
