//! A manifest read as a stream, one line at a time, so a run's memory does not grow with
//! the number of clips: the same lines, clips and problems as [`super::read_manifest`], in
//! the same order.
//!
//! Naming a duplicate id's first line needs the ids seen so far. [`ManifestStream::open`]
//! keeps every id (as a 64-bit hash); a batch, which reads its manifest twice anyway, keeps
//! almost none: its first pass ([`ManifestStream::collecting`]) holds 4 bytes per clip and
//! flags nothing, and the ids whose 32-bit hash came up twice are the only ones a later
//! pass ([`ManifestStream::watching`]) tracks, by their text. Every real duplicate is among
//! them, so the later pass finds exactly what `open` finds.

use std::collections::{HashMap, HashSet};
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::{Entry, Problem, not_utf8, parse_clip};

/// The lines of a manifest as they are read.
#[derive(Debug)]
pub struct ManifestStream {
    path: PathBuf,
    reader: BufReader<std::fs::File>,
    line: usize,
    buf: Vec<u8>,
    ids: Ledger,
}

/// How a stream tells a duplicate id.
#[derive(Debug)]
enum Ledger {
    /// Hash of every id seen → its line.
    Every(HashMap<u64, usize>),
    /// No id is flagged; the 32-bit hash of each is kept, to find the suspects.
    Collect(Vec<u32>),
    /// Only ids whose 32-bit hash is a suspect are tracked (id → its line).
    Watch {
        suspects: Arc<HashSet<u32>>,
        seen: HashMap<String, usize>,
    },
}

/// The 32-bit hash a first pass keeps of an id.
fn short_hash(id: &str) -> u32 {
    crate::seed::stable_hash(&[id.as_bytes()]) as u32
}

/// One line: a clip, or the problem that makes it none.
pub type Item = Result<Entry, Problem>;

impl ManifestStream {
    /// Open a manifest (a regular file).
    ///
    /// # Errors
    /// When it cannot be opened or is not a regular file.
    pub fn open(path: &Path) -> std::io::Result<Self> {
        Self::with_ledger(path, Ledger::Every(HashMap::new()))
    }

    /// Open a manifest for a first pass that flags no duplicate id (every clip is an
    /// entry) and keeps 4 bytes per clip, for [`ManifestStream::suspects`].
    ///
    /// # Errors
    /// As [`ManifestStream::open`].
    pub fn collecting(path: &Path) -> std::io::Result<Self> {
        Self::with_ledger(path, Ledger::Collect(Vec::new()))
    }

    /// Open a manifest whose possible duplicate ids a first pass found: the lines, clips and
    /// problems are those of [`ManifestStream::open`], holding only the suspects' ids.
    ///
    /// # Errors
    /// As [`ManifestStream::open`].
    pub fn watching(path: &Path, suspects: Arc<HashSet<u32>>) -> std::io::Result<Self> {
        Self::with_ledger(
            path,
            Ledger::Watch {
                suspects,
                seen: HashMap::new(),
            },
        )
    }

    fn with_ledger(path: &Path, ids: Ledger) -> std::io::Result<Self> {
        Ok(ManifestStream {
            path: path.to_path_buf(),
            reader: BufReader::with_capacity(1 << 16, crate::input_file::open(path)?),
            line: 0,
            buf: Vec::new(),
            ids,
        })
    }

    /// After a [`ManifestStream::collecting`] pass: the 32-bit id hashes that came up more
    /// than once (every duplicate id among them, and the odd collision). Empty for a stream
    /// opened otherwise.
    pub fn suspects(self) -> HashSet<u32> {
        let Ledger::Collect(mut hashes) = self.ids else {
            return HashSet::new();
        };
        hashes.sort_unstable();
        hashes
            .windows(2)
            .filter(|w| w[0] == w[1])
            .map(|w| w[0])
            .collect()
    }

    /// The folder audio paths are relative to.
    pub fn base(&self) -> &Path {
        super::audio_base(&self.path)
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
            Ok(clip) => match self.ids.first_line(&clip.id, line) {
                Some(first) => Err(problem(
                    "id".into(),
                    format!("`{}` already used on line {first}", clip.id),
                )),
                None => Ok(Entry { line, clip }),
            },
        };
        Ok(Some(item))
    }
}

impl Ledger {
    /// The line `id` was first used on when it is a duplicate; otherwise it is recorded as
    /// seen on `line`.
    fn first_line(&mut self, id: &str, line: usize) -> Option<usize> {
        match self {
            Ledger::Every(seen) => {
                let key = crate::seed::stable_hash(&[id.as_bytes()]);
                match seen.get(&key) {
                    Some(&first) => Some(first),
                    None => {
                        seen.insert(key, line);
                        None
                    }
                }
            }
            Ledger::Collect(hashes) => {
                hashes.push(short_hash(id));
                None
            }
            Ledger::Watch { suspects, seen } => {
                if !suspects.contains(&short_hash(id)) {
                    return None;
                }
                match seen.get(id) {
                    Some(&first) => Some(first),
                    None => {
                        seen.insert(id.to_string(), line);
                        None
                    }
                }
            }
        }
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

    /// Every item of a stream, clips as (line, id) and problems whole.
    fn items(mut stream: ManifestStream) -> Vec<Result<(usize, String), Problem>> {
        let mut out = Vec::new();
        while let Some(item) = stream.next_item().unwrap() {
            out.push(item.map(|e| (e.line, e.clip.id)));
        }
        out
    }

    proptest::proptest! {
        /// The two passes of a batch (collect, then watch the suspects) give the lines,
        /// clips and problems of the exact stream, whatever the duplicates.
        #[test]
        fn watching_the_suspects_reads_what_the_exact_stream_reads(
            ids in proptest::collection::vec(0u32..60, 0..200),
        ) {
            let dir = tempfile::tempdir().unwrap();
            let path = dir.path().join("m.jsonl");
            let text: String = ids
                .iter()
                .map(|i| format!("{{\"id\":\"c{i}\",\"audio\":\"a.wav\",\"text\":\"x\"}}\n"))
                .collect();
            std::fs::write(&path, text).unwrap();
            let mut first = ManifestStream::collecting(&path).unwrap();
            let mut clips = 0;
            while let Some(item) = first.next_item().unwrap() {
                proptest::prop_assert!(item.is_ok(), "a first pass flags nothing");
                clips += 1;
            }
            proptest::prop_assert_eq!(clips, ids.len());
            let suspects = Arc::new(first.suspects());
            let distinct: HashSet<u32> = ids.iter().copied().collect();
            proptest::prop_assert!(suspects.len() <= ids.len() - distinct.len());
            let exact = items(ManifestStream::open(&path).unwrap());
            let watched = items(ManifestStream::watching(&path, suspects).unwrap());
            proptest::prop_assert_eq!(watched, exact);
        }
    }
}
