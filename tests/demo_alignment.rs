//! On speed-perturbed takes of the demo, each synthesized word's energy lies inside its
//! rewritten timing. Reference: the demo's word timings are exact ground truth from
//! synthesis (each word was synthesized alone and placed at a known sample), see
//! demo_audio/make_demo.py.

mod common;

use std::path::Path;

use common::{demo, outside_minus_inside_db};
use retake::audio::{self, ChannelPolicy};
use retake::recipe;
use retake::run::{self, RunSpec};
use retake::transcript::{Clip, read_manifest};

/// Words in order as (start, end) for a clip.
fn spans(clip: &Clip) -> Vec<(f64, f64)> {
    clip.lines
        .iter()
        .flatten()
        .flat_map(|l| l.words.iter().map(|w| (w.start, w.end)))
        .collect()
}

fn run_speed(factor: f64, out: &Path) -> Vec<Clip> {
    let text =
        format!("seed = 5\ntakes = 1\nrate = 16000\n[[step]]\ndo = \"speed\"\nfactor = {factor}\n");
    let plan = recipe::parse(Path::new("speed.toml"), &text).expect("recipe");
    let manifest = demo().join("manifest.jsonl");
    let spec = RunSpec {
        plan: &plan,
        recipe: None,
        input: &manifest,
        out,
        threads: None,
        shard: None,
        clip_memory_limit: retake::memory::DEFAULT_LIMIT_BYTES,
    };
    let summary = run::run(&spec, &|_| {}).expect("run");
    assert_eq!(summary.rejected, 0, "demo clips must all be accepted");
    read_manifest(&out.join("manifest.jsonl"))
        .unwrap()
        .entries
        .into_iter()
        .map(|e| e.clip)
        .collect()
}

#[test]
fn word_energy_lies_inside_rewritten_timings_after_speed_perturbation() {
    let sources = read_manifest(&demo().join("manifest.jsonl")).unwrap();
    // 0.9 and 1.1: the speed-perturbation factors of Ko et al., Interspeech 2015.
    for factor in [0.9, 1.1] {
        let tmp = tempfile::tempdir().unwrap();
        let takes = run_speed(factor, tmp.path());
        let mut checked = 0;
        let mut stale_failures = 0;
        for take in &takes {
            let words = spans(take);
            if words.is_empty() {
                continue;
            }
            let a = audio::decode(&tmp.path().join(&take.audio), ChannelPolicy::Mix).unwrap();
            // Ground truth: the word boundaries from synthesis, divided by the factor.
            let source = &sources
                .entries
                .iter()
                .find(|e| Some(&e.clip.id) == take.origin.as_ref().map(|o| &o.source))
                .unwrap()
                .clip;
            for (got, want) in words.iter().zip(spans(source)) {
                assert!(
                    (got.0 - want.0 / factor).abs() < 1e-4
                        && (got.1 - want.1 / factor).abs() < 1e-4
                );
            }
            for (i, db) in outside_minus_inside_db(&a.samples, a.rate, &words)
                .into_iter()
                .enumerate()
            {
                // A word is at least 12 dB above the gaps around it (synthesized speech over
                // room tone 25 dB or more below it; the threshold is ours, from the demo).
                assert!(
                    db < -12.0,
                    "{} word {i} at factor {factor}: outside is only {db:.1} dB below inside",
                    take.id
                );
                checked += 1;
            }
            // Control: the source timings, not rewritten, must fail on the same audio.
            let stale = spans(source);
            stale_failures += outside_minus_inside_db(&a.samples, a.rate, &stale)
                .into_iter()
                .filter(|&db| db >= -12.0)
                .count();
        }
        assert!(checked >= 40, "only {checked} words checked");
        assert!(
            stale_failures * 4 >= checked,
            "the check is too weak: stale timings failed only {stale_failures}/{checked}"
        );
    }
}
