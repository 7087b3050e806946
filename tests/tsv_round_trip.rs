//! TSV transcripts: a manifest's lines written as TSV and read back keep every word time to
//! the microsecond, every text and every speaker (property test over random transcripts),
//! and the demo manifest survives the same trip.

use std::path::Path;

use proptest::prelude::*;
use retake::transcript::{Line, Word, read_manifest, tsv};

/// Word texts: single tokens, including characters TSV readers trip on.
fn token() -> impl Strategy<Value = String> {
    prop::sample::select(vec![
        "bay",
        "fourteen",
        "œil",
        "pallet#3",
        "\"quoted\"",
        "a&b",
        "ja",
        "ℓ",
        "x-12",
    ])
    .prop_map(str::to_string)
}

/// Random lines in time order: words with gaps, optional speakers with spaces.
fn arb_lines() -> impl Strategy<Value = Vec<Line>> {
    prop::collection::vec(
        (
            prop::collection::vec((0.0f64..0.8, 0.01f64..1.2, token()), 1..7),
            prop::option::of(prop::sample::select(vec!["astrid", "ruben k", "kalani"])),
            0.0f64..5.0,
        ),
        1..6,
    )
    .prop_map(|spec| {
        let mut t = 0.0;
        spec.into_iter()
            .map(|(words, speaker, gap)| {
                t += gap;
                let words: Vec<Word> = words
                    .into_iter()
                    .map(|(g, d, text)| {
                        t += g;
                        let w = Word {
                            start: t,
                            end: t + d,
                            text,
                            extra: Default::default(),
                        };
                        t += d;
                        w
                    })
                    .collect();
                Line {
                    start: words[0].start,
                    end: words[words.len() - 1].end,
                    text: words
                        .iter()
                        .map(|w| w.text.as_str())
                        .collect::<Vec<_>>()
                        .join(" "),
                    speaker: speaker.map(str::to_string),
                    words,
                    extra: Default::default(),
                }
            })
            .collect()
    })
}

fn assert_same(a: &[Line], b: &[Line], tol: f64) {
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(b) {
        assert!((x.start - y.start).abs() <= tol && (x.end - y.end).abs() <= tol);
        assert_eq!((&x.text, &x.speaker), (&y.text, &y.speaker));
        assert_eq!(x.words.len(), y.words.len());
        for (u, v) in x.words.iter().zip(&y.words) {
            assert!(
                (u.start - v.start).abs() <= tol && (u.end - v.end).abs() <= tol,
                "{u:?} vs {v:?}"
            );
            assert_eq!(u.text, v.text);
        }
    }
}

proptest! {
    #[test]
    fn lines_survive_tsv_to_the_microsecond(lines in arb_lines()) {
        let text = tsv::write_lines(&lines);
        let back = tsv::read_lines(Path::new("t.tsv"), &text).unwrap();
        // Six decimals are written: half a microsecond of rounding, plus float noise.
        assert_same(&lines, &back, 5.0e-7 + 1e-12);
    }
}

#[test]
fn demo_manifest_survives_tsv() {
    let manifest = read_manifest(&retake_root().join("demo_audio/manifest.jsonl")).unwrap();
    let mut timed = 0;
    for entry in &manifest.entries {
        let Some(lines) = &entry.clip.lines else {
            continue;
        };
        timed += 1;
        let back = tsv::read_lines(Path::new("demo.tsv"), &tsv::write_lines(lines)).unwrap();
        assert_same(lines, &back, 5.0e-7 + 1e-12);
    }
    assert!(timed >= 9, "the demo has nine timed clips, found {timed}");
}

fn retake_root() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}
