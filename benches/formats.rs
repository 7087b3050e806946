//! Cost and size of each output format on the demo clips: every demo clip decoded at
//! 16 kHz, written in each format of the output-format table (median of five passes),
//! as seconds of audio per second and as ratios to 16-bit WAV (the baseline).
//! Run with `cargo bench --bench formats`; it prints, asserts nothing.

use std::time::Instant;

use retake::audio::{Audio, ChannelPolicy, OUTPUT_FORMATS, SampleFormat, decode, write_audio};

const PASSES: usize = 5;

fn main() {
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo_audio/clips");
    let mut clips: Vec<Audio> = std::fs::read_dir(&demo)
        .unwrap()
        .map(|e| e.unwrap().path())
        .map(|p| decode(&p, ChannelPolicy::Mix).unwrap())
        .map(|a| Audio {
            samples: retake::dsp::resample::resample(&a.samples, a.rate, 16_000),
            rate: 16_000,
        })
        .collect();
    clips.sort_by_key(|a| a.samples.len());
    let seconds: f64 = clips.iter().map(Audio::duration).sum();
    let dir = tempfile::tempdir().unwrap();
    println!(
        "demo clips: {} clips, {seconds:.1} s at 16 kHz",
        clips.len()
    );
    println!(
        "{:<8} {:>12} {:>10} {:>12} {:>11}",
        "format", "audio s/s", "cost/WAV", "bytes", "size/WAV"
    );
    let mut baseline: Option<(f64, u64)> = None;
    for row in OUTPUT_FORMATS {
        let mut times = Vec::new();
        let mut bytes = 0;
        for _ in 0..PASSES {
            let started = Instant::now();
            bytes = 0;
            for (i, clip) in clips.iter().enumerate() {
                let path = dir.path().join(format!("c{i}.{}", row.extension));
                write_audio(&path, clip, row.format).unwrap();
                bytes += std::fs::metadata(&path).unwrap().len();
            }
            times.push(started.elapsed().as_secs_f64());
        }
        times.sort_by(f64::total_cmp);
        let t = times[PASSES / 2];
        if row.format == SampleFormat::Pcm16 {
            baseline = Some((t, bytes));
        }
        let (bt, bb) = baseline.unwrap_or((t, bytes));
        println!(
            "{:<8} {:>12.0} {:>10.2} {:>12} {:>11.3}",
            row.name,
            seconds / t,
            t / bt,
            bytes,
            bytes as f64 / bb as f64
        );
    }
}
