//! Fuzzing by property: raw bytes, and mutations of the demo's own valid inputs, through the
//! manifest reader, the recipe loader and the WebVTT and TSV parsers. None may panic, and
//! every problem they report names a line that exists in the file (or 0 for the whole
//! file). A fixed number of cases per target keeps the run to seconds in CI.

mod common;

use std::path::Path;

use proptest::prelude::*;
use retake::transcript::{read_manifest, tsv, webvtt};

/// Cases per target: 16 000 cases in about 11 s for the whole file in a debug build on a
/// shared 2-core machine.
const CASES: u32 = 2000;

/// The highest line number a problem about `bytes` may name: its line count (a final line
/// without a line break counts; an empty file has one line, for a "file is empty" report).
fn last_line(bytes: &[u8]) -> usize {
    bytes.iter().filter(|&&b| b == b'\n').count() + 1
}

/// One edit of a byte string: overwrite, insert or delete around a position.
#[derive(Debug, Clone)]
enum Edit {
    Set(usize, u8),
    Insert(usize, Vec<u8>),
    Delete(usize, usize),
    /// Repeat a stretch in place (duplicated lines, doubled brackets).
    Repeat(usize, usize),
}

fn edits() -> impl Strategy<Value = Vec<Edit>> {
    let special = prop::sample::select(
        b"\n\r\t\"\\{}[],:=.-+0123456789eE \x00\xff\xef\xbb\xbf#'<>&".to_vec(),
    );
    let byte = prop_oneof![any::<u8>(), special];
    let edit = prop_oneof![
        (any::<usize>(), byte.clone()).prop_map(|(i, b)| Edit::Set(i, b)),
        (any::<usize>(), prop::collection::vec(byte, 1..6)).prop_map(|(i, b)| Edit::Insert(i, b)),
        (any::<usize>(), 1usize..40).prop_map(|(i, n)| Edit::Delete(i, n)),
        (any::<usize>(), 1usize..40).prop_map(|(i, n)| Edit::Repeat(i, n)),
    ];
    prop::collection::vec(edit, 1..8)
}

fn mutate(base: &[u8], edits: &[Edit]) -> Vec<u8> {
    let mut x = base.to_vec();
    for e in edits {
        let at = |i: usize, len: usize| if len == 0 { 0 } else { i % (len + 1) };
        match e {
            Edit::Set(i, b) if !x.is_empty() => {
                let i = *i % x.len();
                x[i] = *b;
            }
            Edit::Set(..) => {}
            Edit::Insert(i, b) => {
                let i = at(*i, x.len());
                x.splice(i..i, b.iter().copied());
            }
            Edit::Delete(i, n) => {
                let i = at(*i, x.len());
                let j = (i + n).min(x.len());
                x.drain(i..j);
            }
            Edit::Repeat(i, n) => {
                let i = at(*i, x.len());
                let j = (i + n).min(x.len());
                let copy = x[i..j].to_vec();
                x.splice(j..j, copy);
            }
        }
    }
    x
}

fn demo_manifest() -> Vec<u8> {
    std::fs::read(common::demo().join("manifest.jsonl")).unwrap()
}

fn demo_recipe() -> Vec<u8> {
    std::fs::read(common::demo().join("recipe.toml")).unwrap()
}

/// The demo's transcripts written as WebVTT and as TSV, the formats' own writers.
fn demo_transcripts() -> (Vec<u8>, Vec<u8>) {
    let m = read_manifest(&common::demo().join("manifest.jsonl")).unwrap();
    let lines = m.entries.iter().find_map(|e| e.clip.lines.clone()).unwrap();
    (
        webvtt::write_lines(&lines).into_bytes(),
        tsv::write_lines(&lines).into_bytes(),
    )
}

fn check_manifest(bytes: &[u8]) -> Result<(), TestCaseError> {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("in.jsonl");
    std::fs::write(&path, bytes).unwrap();
    // A file that is plainly no manifest is one error; anything else is read line by line.
    if let Ok(m) = read_manifest(&path) {
        let last = last_line(bytes);
        for p in &m.problems {
            prop_assert!(p.line >= 1 && p.line <= last, "{p} (file has {last} lines)");
            prop_assert!(!p.message.contains("EOF while parsing"), "{p}");
            prop_assert!(!p.message.contains("invalid type:"), "{p}");
        }
        for e in &m.entries {
            prop_assert!(e.line >= 1 && e.line <= last);
        }
    }
    Ok(())
}

fn check_recipe(bytes: &[u8]) -> Result<(), TestCaseError> {
    // Loaded from a folder without the demo's noise bank, so a `noise` step fails fast on
    // the missing folder instead of decoding the bank in every case.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("recipe.toml");
    std::fs::write(&path, bytes).unwrap();
    if let Err(e) = retake::recipe::load(&path) {
        let last = last_line(bytes);
        if let Some(line) = e.line {
            prop_assert!(line >= 1 && line <= last, "{e} (file has {last} lines)");
        }
        prop_assert!(!e.message.is_empty());
    }
    Ok(())
}

/// Lines as WebVTT counts them: a line ends at LF, CR or CR LF (W3C WebVTT, "collect a
/// WebVTT block": CR, LF and CRLF are line terminators).
fn last_webvtt_line(bytes: &[u8]) -> usize {
    let crlf = bytes.windows(2).filter(|w| w == b"\r\n").count();
    let breaks = bytes.iter().filter(|&&b| b == b'\n' || b == b'\r').count();
    breaks - crlf + 1
}

fn check_webvtt(bytes: &[u8]) -> Result<(), TestCaseError> {
    let text = String::from_utf8_lossy(bytes);
    let last = last_webvtt_line(bytes);
    if let Err(errors) = webvtt::parse(&text) {
        prop_assert!(!errors.is_empty());
        for e in &errors {
            prop_assert!(e.line >= 1 && e.line <= last, "{e} (file has {last} lines)");
        }
    }
    if let Err(problems) = webvtt::read_lines(Path::new("x.vtt"), &text) {
        for p in &problems {
            prop_assert!(p.line <= last, "{p} (file has {last} lines)");
        }
    }
    Ok(())
}

fn check_tsv(bytes: &[u8]) -> Result<(), TestCaseError> {
    let text = String::from_utf8_lossy(bytes);
    let last = last_line(bytes);
    let path = Path::new("x.tsv");
    match tsv::parse(path, &text) {
        Err(problems) => {
            for p in &problems {
                prop_assert!(p.line <= last, "{p} (file has {last} lines)");
            }
        }
        Ok(table) => {
            if let Err(problems) = tsv::lines_of(path, &table) {
                for p in &problems {
                    prop_assert!(p.line <= last, "{p} (file has {last} lines)");
                }
            }
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(CASES))]

    #[test]
    fn manifest_reader_takes_any_bytes(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        check_manifest(&bytes)?;
    }

    #[test]
    fn manifest_reader_takes_mutated_demo_manifests(e in edits()) {
        check_manifest(&mutate(&demo_manifest(), &e))?;
    }

    #[test]
    fn recipe_loader_takes_any_bytes(bytes in prop::collection::vec(any::<u8>(), 0..300)) {
        check_recipe(&bytes)?;
    }

    #[test]
    fn recipe_loader_takes_mutated_demo_recipes(e in edits()) {
        check_recipe(&mutate(&demo_recipe(), &e))?;
    }

    #[test]
    fn webvtt_parser_takes_any_bytes(bytes in prop::collection::vec(any::<u8>(), 0..300)) {
        check_webvtt(&bytes)?;
        // The same bytes behind a valid header reach the cue parser.
        check_webvtt(&[b"WEBVTT\n\n".as_slice(), &bytes].concat())?;
    }

    #[test]
    fn webvtt_parser_takes_mutated_demo_transcripts(e in edits()) {
        check_webvtt(&mutate(&demo_transcripts().0, &e))?;
    }

    #[test]
    fn tsv_parser_takes_any_bytes(bytes in prop::collection::vec(any::<u8>(), 0..300)) {
        check_tsv(&bytes)?;
    }

    #[test]
    fn tsv_parser_takes_mutated_demo_transcripts(e in edits()) {
        check_tsv(&mutate(&demo_transcripts().1, &e))?;
    }
}
