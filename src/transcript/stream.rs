//! A manifest read as a stream, one line at a time, so a run's memory does not grow with
//! the number of clips: the same lines, clips and problems as [`super::read_manifest`], in
//! the same order, holding only the ids seen so far (as 64-bit hashes, to name the first
//! line of a duplicate).

use std::collections::HashMap;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};

use super::{Entry, Problem, not_utf8, parse_clip};

/// The lines of a manifest as they are read.
#[derive(Debug)]
pub struct ManifestStream {
    path: PathBuf,
    reader: BufReader<std::fs::File>,
    line: usize,
    buf: Vec<u8>,
    /// Hash of each id seen → its line.
    seen: HashMap<u64, usize>,
}

/// One line: a clip, or the problem that makes it none.
pub type Item = Result<Entry, Problem>;

impl ManifestStream {
    /// Open a manifest (a regular file).
    ///
    /// # Errors
    /// When it cannot be opened or is not a regular file.
    pub fn open(path: &Path) -> std::io::Result<Self> {
        Ok(ManifestStream {
            path: path.to_path_buf(),
            reader: BufReader::with_capacity(1 << 16, crate::input_file::open(path)?),
            line: 0,
            buf: Vec::new(),
            seen: HashMap::new(),
        })
    }

    /// The folder audio paths are relative to.
    pub fn base(&self) -> &Path {
        self.path.parent().unwrap_or(Path::new("."))
    }

    /// The next line, `None` at the end.
    ///
    /// # Errors
    /// When reading fails.
    pub fn next_item(&mut self) -> std::io::Result<Option<Item>> {
        self.buf.clear();
        if self.reader.read_until(b'\n', &mut self.buf)? == 0 {
            return Ok(None);
        }
        self.line += 1;
        let line = self.line;
        let mut raw: &[u8] = &self.buf;
        if line == 1 {
            raw = raw.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(raw);
        }
        let raw = raw.strip_suffix(b"\n").unwrap_or(raw);
        let raw = raw.strip_suffix(b"\r").unwrap_or(raw);
        let problem = |field: String, message: String| Problem {
            file: self.path.clone(),
            line,
            field,
            message,
        };
        let parsed = match std::str::from_utf8(raw) {
            Ok(text) => parse_clip(text),
            Err(e) => Err((String::new(), not_utf8(raw, &e))),
        };
        let item = match parsed {
            Err((field, message)) => Err(problem(field, message)),
            Ok(clip) => {
                let key = crate::seed::stable_hash(&[clip.id.as_bytes()]);
                match self.seen.get(&key) {
                    Some(first) => Err(problem(
                        "id".into(),
                        format!("`{}` already used on line {first}", clip.id),
                    )),
                    None => {
                        self.seen.insert(key, line);
                        Ok(Entry { line, clip })
                    }
                }
            }
        };
        Ok(Some(item))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_stream_reads_what_the_whole_reader_reads() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("m.jsonl");
        let text = "\u{feff}{\"id\":\"a\",\"audio\":\"a.wav\",\"text\":\"x\"}\r\n\n{bad\n\
                    {\"id\":\"a\",\"audio\":\"b.wav\",\"text\":\"y\"}\n\
                    {\"id\":\"c\",\"audio\":\"c.wav\",\"text\":\"z\"}";
        let mut bytes = text.as_bytes().to_vec();
        bytes.extend_from_slice(b"\n\xff\xfe\n");
        std::fs::write(&path, &bytes).unwrap();
        let whole = super::super::read_manifest(&path).unwrap();
        let mut stream = ManifestStream::open(&path).unwrap();
        let (mut entries, mut problems) = (Vec::new(), Vec::new());
        while let Some(item) = stream.next_item().unwrap() {
            match item {
                Ok(e) => entries.push((e.line, e.clip)),
                Err(p) => problems.push(p),
            }
        }
        let want: Vec<_> = whole
            .entries
            .iter()
            .map(|e| (e.line, e.clip.clone()))
            .collect();
        assert_eq!(entries, want);
        assert_eq!(problems, whole.problems);
        assert_eq!(problems.len(), 4, "{problems:?}");
    }
}
