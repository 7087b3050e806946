//! A long session made from the demo: the 16 kHz demo clips one after another, round after
//! round, with room tone of varied length between them and every label shifted to its
//! place. The words keep the demo's ground-truth timings (see demo_audio/make_demo.py).

use std::path::{Path, PathBuf};

use retake::audio::{self, ChannelPolicy};
use retake::transcript::{Clip, Line, read_manifest};
use serde_json::Value;

/// Sample rate of the session: the rate the picked demo clips share.
pub const RATE: u32 = 16_000;

/// Room tone between clips, seconds, used in turn: short pauses, a long one, a walk away.
const GAPS_S: [f64; 8] = [0.35, 1.8, 0.6, 4.5, 0.9, 2.7, 0.45, 7.0];

/// Room-tone amplitude: uniform noise at this peak is about -51 dBFS RMS, below the demo
/// clips' own tone (about -45 dBFS).
const TONE_PEAK: f32 = 0.005;

/// A session on disk.
pub struct Session {
    /// Its one-clip manifest.
    pub manifest: PathBuf,
    /// Its audio: 32-bit float WAV, so samples survive a write and a read exactly.
    pub audio: PathBuf,
    /// The clip as written to the manifest.
    pub clip: Clip,
    /// Samples in the audio.
    pub samples: usize,
}

impl Session {
    /// Every word as (start, end, text), in order.
    pub fn words(&self) -> Vec<(f64, f64, String)> {
        self.clip
            .lines
            .iter()
            .flatten()
            .flat_map(|l| l.words.iter().map(|w| (w.start, w.end, w.text.clone())))
            .collect()
    }
}

/// Build a session of at least `min_seconds` in `dir` as `session.wav` and `session.jsonl`
/// (clip id `fjellvik-night-shift`, with the extra fields `site` and `shift`; each line
/// carries `from`, the demo clip it came from, and `round`).
pub fn build(dir: &Path, min_seconds: f64) -> Session {
    let demo = read_manifest(&super::demo().join("manifest.jsonl")).expect("demo manifest");
    let mut sources: Vec<(Clip, Vec<f32>)> = Vec::new();
    for e in demo.entries {
        // Untimed clips have nothing to place; other rates would need resampling.
        if e.clip.lines.is_none() {
            continue;
        }
        let a = audio::decode(&super::demo().join(&e.clip.audio), ChannelPolicy::Mix)
            .expect("decode demo clip");
        if a.rate == RATE {
            sources.push((e.clip, a.samples));
        }
    }
    assert!(
        sources.len() >= 5,
        "only {} demo clips at 16 kHz",
        sources.len()
    );

    let mut samples: Vec<f32> = Vec::new();
    let mut lines: Vec<Line> = Vec::new();
    let mut tone_seed = 1;
    let mut add_tone = |samples: &mut Vec<f32>, secs: f64| {
        let n = (secs * f64::from(RATE)).round() as usize;
        samples.extend(super::noise(n, tone_seed).iter().map(|x| x * TONE_PEAK));
        tone_seed += 1;
    };
    add_tone(&mut samples, 1.2);
    let mut k = 0;
    while (samples.len() as f64) < min_seconds * f64::from(RATE) {
        let (clip, audio) = &sources[k % sources.len()];
        let offset = samples.len() as f64 / f64::from(RATE);
        for line in clip.lines.as_ref().unwrap() {
            let mut l = line.clone();
            l.start += offset;
            l.end += offset;
            for w in &mut l.words {
                w.start += offset;
                w.end += offset;
            }
            l.extra.insert("from".into(), Value::from(clip.id.clone()));
            l.extra
                .insert("round".into(), Value::from(k / sources.len() + 1));
            lines.push(l);
        }
        samples.extend_from_slice(audio);
        add_tone(&mut samples, GAPS_S[k % GAPS_S.len()]);
        k += 1;
    }

    let audio = dir.join("session.wav");
    super::write_wav_float(&audio, RATE, &samples);
    let mut extra = serde_json::Map::new();
    extra.insert("site".into(), Value::from("fjellvik-cold-store"));
    extra.insert("shift".into(), Value::from("night"));
    let clip = Clip {
        id: "fjellvik-night-shift".into(),
        audio: "session.wav".into(),
        lines: Some(lines),
        text: None,
        duration: None,
        origin: None,
        extra,
    };
    let manifest = dir.join("session.jsonl");
    std::fs::write(
        &manifest,
        serde_json::to_string(&clip).expect("json") + "\n",
    )
    .expect("write session manifest");
    Session {
        manifest,
        audio,
        clip,
        samples: samples.len(),
    }
}
