//! The memory model (`retake::memory`) against the real peak: one clip of 600 s at 16 kHz,
//! one step per recipe (and a FLAC writer), `retake run --threads 1`, peak resident memory
//! from GNU time (`/usr/bin/time -f %M`, Debian package `time`). Also the clip-count
//! table: 1,000 / 10,000 / 100,000 short clips, peak memory and wall time per clip.
//! Run with `cargo bench --bench memory` (`-- --long-only` or `-- --counts-only` for one
//! table); it prints, asserts nothing.
//!
//! Baseline of each ratio: the model's prediction (`predicted`), and for the clip-count
//! table the 1,000-clip run.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

const SECONDS: usize = 600;
const RATE: u32 = 16_000;

/// (name, step table or "" for none, output format)
const CASES: &[(&str, &str, &str)] = &[
    ("none", "", "pcm16"),
    ("speed", "do = \"speed\"\nfactor = 0.9", "pcm16"),
    ("resample", "do = \"resample\"\nvia_rate = 8000", "pcm16"),
    ("gain", "do = \"gain\"\ndb = 3.0", "pcm16"),
    ("level", "do = \"level\"\nlufs = -23.0", "pcm16"),
    (
        "noise",
        "do = \"noise\"\nbank = \"NOISE\"\nsnr_db = 10.0",
        "pcm16",
    ),
    (
        "room",
        "do = \"room\"\nwidth_m = 5.0\nlength_m = 20.0\nheight_m = 6.0\nrt60_s = 0.8\ndrr_db = 5.0",
        "pcm16",
    ),
    (
        "mask",
        "do = \"mask\"\nfreq_masks = 1\nfreq_width_mel = 300.0\ntime_masks = 1\ntime_width_s = 0.2",
        "pcm16",
    ),
    ("warp", "do = \"warp\"", "pcm16"),
    ("stretch", "do = \"stretch\"\nfactor = 0.9", "pcm16"),
    ("pitch", "do = \"pitch\"\nsemitones = 2.0", "pcm16"),
    (
        "channel",
        "do = \"channel\"\nband = \"narrow\"\ncodec = \"mulaw\"",
        "pcm16",
    ),
    ("gain, flac16", "do = \"gain\"\ndb = 3.0", "flac16"),
];

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Peak resident memory (bytes), wall seconds and CPU seconds (user + system) of one
/// `retake run`. CPU time resists a shared machine's load better than wall time.
fn peak(args: &[&str]) -> (u64, f64, f64) {
    let dir = tempfile::tempdir().unwrap();
    let report = dir.path().join("time.txt");
    let started = Instant::now();
    let status = Command::new("/usr/bin/time")
        .args(["-f", "%M %U %S", "-o", report.to_str().unwrap()])
        .arg(env!("CARGO_BIN_EXE_retake"))
        .args(args)
        .output()
        .expect("/usr/bin/time (apt-get install time)");
    let wall = started.elapsed().as_secs_f64();
    assert!(
        matches!(status.status.code(), Some(0 | 3)),
        "{}",
        String::from_utf8_lossy(&status.stderr)
    );
    let text = std::fs::read_to_string(&report).unwrap();
    let fields: Vec<&str> = text.lines().last().unwrap().split_whitespace().collect();
    let kib: u64 = fields[0].parse().unwrap();
    let cpu = fields[1].parse::<f64>().unwrap() + fields[2].parse::<f64>().unwrap();
    (kib * 1024, wall, cpu)
}

fn write_clip(path: &Path, seconds: f64, seed: u32) {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: RATE,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    let n = (seconds * f64::from(RATE)) as usize;
    let mut state = 0x9E37_79B9u32 ^ seed;
    for i in 0..n {
        state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        let t = i as f64 / f64::from(RATE);
        let tone = if t % 1.0 < 0.6 {
            0.3 * (2.0 * std::f64::consts::PI * 220.0 * t).sin()
        } else {
            0.0
        };
        let noise = (f64::from(state >> 8) / f64::from(1u32 << 24) - 0.5) * 0.02;
        w.write_sample(((tone + noise) * 32767.0) as i16).unwrap();
    }
    w.finalize().unwrap();
}

fn long_clip_table(dir: &Path) {
    write_clip(&dir.join("long.wav"), SECONDS as f64, 1);
    let lines: Vec<String> = (0..SECONDS - 1)
        .step_by(10)
        .map(|s| format!("{{\"start\":{}.05,\"end\":{}.55,\"text\":\"word\"}}", s, s))
        .collect();
    let manifest = dir.join("long.jsonl");
    std::fs::write(
        &manifest,
        format!(
            "{{\"id\":\"long\",\"audio\":\"long.wav\",\"lines\":[{}]}}\n",
            lines.join(",")
        ),
    )
    .unwrap();
    println!("long clip: {SECONDS} s at {RATE} Hz, one worker");
    println!(
        "{:<14} {:>10} {:>10} {:>8}",
        "step", "measured", "predicted", "ratio"
    );
    let noise = root().join("demo_audio/noise");
    for (name, step, format) in CASES {
        let body = step.replace("NOISE", &noise.display().to_string());
        let text = if body.is_empty() {
            format!("takes = 1\nkeep_source = true\nrate = {RATE}\nformat = \"{format}\"\n")
        } else {
            format!("takes = 1\nrate = {RATE}\nformat = \"{format}\"\n[[step]]\n{body}\n")
        };
        let recipe = dir.join("r.toml");
        std::fs::write(&recipe, &text).unwrap();
        let plan = retake::recipe::load(&recipe).unwrap();
        let predicted = retake::memory::process_bytes(
            &plan,
            SECONDS as f64,
            1,
            retake::memory::input_bytes(&plan),
        );
        let out = dir.join("out");
        let _ = std::fs::remove_dir_all(&out);
        let (measured, _, _) = peak(&[
            "run",
            recipe.to_str().unwrap(),
            "-i",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "-j",
            "1",
        ]);
        println!(
            "{name:<14} {:>7.1} MB {:>7.1} MB {:>8.2}",
            measured as f64 / 1e6,
            predicted as f64 / 1e6,
            measured as f64 / predicted as f64
        );
    }
}

fn clip_count_table(dir: &Path) {
    // 20 distinct 0.5 s clips, named many times over.
    for i in 0..20 {
        write_clip(&dir.join(format!("c{i}.wav")), 0.5, i);
    }
    let recipe = dir.join("count.toml");
    std::fs::write(&recipe, "takes = 1\n[[step]]\ndo = \"gain\"\ndb = 1.0\n").unwrap();
    println!("\nshort clips (0.5 s, gain, one take), all cores");
    println!(
        "{:>8} {:>10} {:>8} {:>10} {:>12} {:>10} {:>16}",
        "clips", "peak", "ratio", "wall s", "ms per clip", "CPU s", "CPU ms per clip"
    );
    let mut base: Option<(u64, f64, f64)> = None;
    for n in [1_000usize, 10_000, 100_000] {
        let manifest = dir.join(format!("n{n}.jsonl"));
        let text: String = (0..n)
            .map(|i| {
                format!(
                    "{{\"id\":\"k{i:06}\",\"audio\":\"c{}.wav\",\"text\":\"word\"}}\n",
                    i % 20
                )
            })
            .collect();
        std::fs::write(&manifest, text).unwrap();
        let out = dir.join(format!("out{n}"));
        let (rss, wall, cpu) = peak(&[
            "run",
            recipe.to_str().unwrap(),
            "-i",
            manifest.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ]);
        let _ = std::fs::remove_dir_all(&out);
        let (b_rss, b_wall, b_cpu) = *base.get_or_insert((rss, wall, cpu));
        println!(
            "{n:>8} {:>7.1} MB {:>8.2} {:>10.2} {:>12.3} {:>10.2} {:>16.3}  \
             (per clip vs 1,000: wall {:.2}, CPU {:.2})",
            rss as f64 / 1e6,
            rss as f64 / b_rss as f64,
            wall,
            1000.0 * wall / n as f64,
            cpu,
            1000.0 * cpu / n as f64,
            (wall / n as f64) / (b_wall / 1000.0),
            (cpu / n as f64) / (b_cpu / 1000.0)
        );
    }
}

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let asked = |flag: &str| std::env::args().any(|a| a == flag);
    if !asked("--counts-only") {
        long_clip_table(dir.path());
    }
    if asked("--long-only") {
        return;
    }
    clip_count_table(dir.path());
}
