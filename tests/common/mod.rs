//! Shared helpers for integration tests: the reference Python (numpy, scipy, soundfile from
//! PyPI, pinned in `tests/reference/requirements.txt`) and signal exchange with it.
#![allow(dead_code)]

pub mod session;

use std::path::{Path, PathBuf};
use std::process::Command;

/// The repository root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The Python interpreter of the reference venv: `$RETAKE_PYTHON`, else `.venv/bin/python`.
///
/// # Panics
/// When neither exists: reference checks must not be skipped silently.
pub fn python() -> PathBuf {
    if let Ok(p) = std::env::var("RETAKE_PYTHON") {
        return PathBuf::from(p);
    }
    let venv = root().join(".venv/bin/python");
    assert!(
        venv.exists(),
        "reference checks need the Python venv: run `dev/test` (it creates .venv), or set \
         RETAKE_PYTHON to a python with tests/reference/requirements.txt installed"
    );
    venv
}

/// Run `code` with the reference Python and the given arguments; return its stdout.
///
/// # Panics
/// When Python fails; its stderr is shown.
pub fn run_python(code: &str, args: &[&str]) -> String {
    let out = Command::new(python())
        .arg("-c")
        .arg(code)
        .args(args)
        .output()
        .expect("start the reference python");
    assert!(
        out.status.success(),
        "reference python failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).expect("utf-8 from python")
}

/// Write samples as little-endian f64 (numpy: `np.fromfile(path, '<f8')`).
pub fn write_f64(path: &Path, x: &[f64]) {
    let bytes: Vec<u8> = x.iter().flat_map(|v| v.to_le_bytes()).collect();
    std::fs::write(path, bytes).expect("write f64 file");
}

/// Read little-endian f64 samples (numpy: `arr.astype('<f8').tofile(path)`).
pub fn read_f64(path: &Path) -> Vec<f64> {
    let bytes = std::fs::read(path).expect("read f64 file");
    bytes
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes")))
        .collect()
}

/// A sine of `freq` Hz, `secs` long, amplitude `amp`, at `rate` Hz.
pub fn sine(freq: f64, secs: f64, rate: u32, amp: f64) -> Vec<f32> {
    let n = (secs * f64::from(rate)).round() as usize;
    (0..n)
        .map(|i| {
            (amp * (2.0 * std::f64::consts::PI * freq * i as f64 / f64::from(rate)).sin()) as f32
        })
        .collect()
}

/// The demo folder.
pub fn demo() -> PathBuf {
    root().join("demo_audio")
}

/// Run the real `retake` binary.
pub fn retake(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_retake"))
        .args(args)
        .output()
        .expect("run retake")
}

/// Write `recipe` to `dir/recipe.toml` and run it over `manifest` into a fresh `dir/out`.
/// Returns the exit code, stderr and the output manifest's records (empty when none).
pub fn run_recipe(
    dir: &Path,
    recipe: &str,
    manifest: &Path,
) -> (Option<i32>, String, Vec<serde_json::Value>) {
    let r = dir.join("recipe.toml");
    std::fs::write(&r, recipe).expect("write recipe");
    let out = dir.join("out");
    let _ = std::fs::remove_dir_all(&out);
    let o = retake(&[
        "run",
        r.to_str().unwrap(),
        "-i",
        manifest.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    let takes = if out.join("manifest.jsonl").exists() {
        read_jsonl(&out.join("manifest.jsonl"))
    } else {
        Vec::new()
    };
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stderr).to_string(),
        takes,
    )
}

/// Every line of a JSON Lines file.
pub fn read_jsonl(path: &Path) -> Vec<serde_json::Value> {
    std::fs::read_to_string(path)
        .expect("read jsonl")
        .lines()
        .map(|l| serde_json::from_str(l).expect("json line"))
        .collect()
}

/// A mono 16-bit WAV of `samples` (rounded, x · 32768 clamped: the scale the decoder reads
/// with, so a sample on the 16-bit grid reads back exactly).
pub fn write_wav_pcm16(path: &Path, rate: u32, samples: &[f32]) {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: rate,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).expect("create wav");
    for &s in samples {
        w.write_sample((s * 32768.0).round() as i16)
            .expect("write sample");
    }
    w.finalize().expect("finish wav");
}

/// A mono 32-bit float WAV of `samples`.
pub fn write_wav_float(path: &Path, rate: u32, samples: &[f32]) {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: rate,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(path, spec).expect("create wav");
    for &s in samples {
        w.write_sample(s).expect("write sample");
    }
    w.finalize().expect("finish wav");
}

/// A fixed pseudo-random signal in [-1, 1) (64-bit LCG, Knuth's MMIX constants).
pub fn noise(n: usize, seed: u64) -> Vec<f32> {
    let mut state = seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) | 1;
    (0..n)
        .map(|_| {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (state >> 40) as f32 / (1u64 << 23) as f32 - 1.0
        })
        .collect()
}

/// A plan with the one step `step` (its `[[step]]` keys, `do` included).
///
/// # Panics
/// When the recipe is refused.
pub fn one_step(step: &str) -> retake::recipe::Plan {
    retake::recipe::parse(
        Path::new("test.toml"),
        &format!("takes = 1\n[[step]]\n{step}\n"),
    )
    .unwrap_or_else(|e| panic!("{e}"))
}

/// Run the one step `step` on `samples` at `rate`, with `words` as both the line and word
/// spans of the take, from the stream of `seed`.
///
/// # Panics
/// When the recipe is refused or the step fails.
pub fn apply_step(
    step: &str,
    rate: u32,
    samples: &[f32],
    words: &[(f64, f64)],
    seed: u64,
) -> retake::steps::StepOutput {
    let plan = one_step(step);
    let take = retake::steps::TakeContext {
        lines: words,
        words,
    };
    let audio = retake::audio::Audio {
        rate,
        samples: samples.to_vec(),
    };
    retake::steps::run_step(
        plan.steps[0].step.as_ref(),
        audio,
        &take,
        &mut retake::seed::TakeRng::new(seed),
    )
    .unwrap_or_else(|e| panic!("{e}"))
}

/// The bodies of the fenced code blocks of one language (```` ```toml ````, ```` ```sh ````)
/// in a Markdown text, each with the 1-based line of its opening fence.
pub fn fenced_blocks(text: &str, lang: &str) -> Vec<(usize, String)> {
    let fence = format!("```{lang}");
    let mut out = Vec::new();
    let mut current: Option<(usize, String)> = None;
    for (i, line) in text.lines().enumerate() {
        match (&mut current, line.trim_start()) {
            (None, l) if l == fence => current = Some((i + 1, String::new())),
            (Some(_), l) if l.starts_with("```") => out.push(current.take().unwrap()),
            (Some((_, body)), _) => {
                body.push_str(line);
                body.push('\n');
            }
            _ => {}
        }
    }
    out
}

/// The onset near `t` s: the first sample within ±20 ms of it whose magnitude reaches
/// `fraction` of the largest magnitude in that window.
pub fn onset_near(y: &[f32], rate: u32, t: f64, fraction: f32) -> f64 {
    let w = (0.02 * f64::from(rate)) as usize;
    let c = (t * f64::from(rate)).round() as usize;
    let (a, b) = (c.saturating_sub(w), (c + w).min(y.len()));
    let max = y[a..b].iter().fold(0.0f32, |m, s| m.max(s.abs()));
    let i = (a..b).find(|&i| y[i].abs() >= fraction * max).unwrap();
    i as f64 / f64::from(rate)
}

/// Mean power of `x` over [a, b) seconds (clipped to the audio).
pub fn power(x: &[f32], rate: u32, a: f64, b: f64) -> f64 {
    let i = ((a * f64::from(rate)).round().max(0.0) as usize).min(x.len());
    let j = ((b * f64::from(rate)).round().max(0.0) as usize).min(x.len());
    if j <= i {
        return 0.0;
    }
    x[i..j].iter().map(|&s| f64::from(s).powi(2)).sum::<f64>() / (j - i) as f64
}

/// For each word: how much quieter (dB) the 40 ms just outside it is than the word itself.
/// The margins stop at the neighbouring words so they only cover the gaps.
pub fn outside_minus_inside_db(x: &[f32], rate: u32, words: &[(f64, f64)]) -> Vec<f64> {
    const MARGIN: f64 = 0.04;
    words
        .iter()
        .enumerate()
        .map(|(i, &(s, e))| {
            let before_from = if i > 0 {
                (s - MARGIN).max(words[i - 1].1)
            } else {
                s - MARGIN
            };
            let after_to = if i + 1 < words.len() {
                (e + MARGIN).min(words[i + 1].0)
            } else {
                e + MARGIN
            };
            let inside = power(x, rate, s, e);
            let outside = power(x, rate, before_from, s).max(power(x, rate, e, after_to));
            10.0 * (outside.max(1e-12) / inside).log10()
        })
        .collect()
}

/// A plan at `rate` Hz with the one step `step` (its `[[step]]` keys, `do` included),
/// through the recipe loader; paths in the step are relative to `dir`.
///
/// # Panics
/// When the recipe is refused.
pub fn one_step_at(dir: &Path, rate: u32, step: &str) -> retake::recipe::Plan {
    retake::recipe::parse(
        &dir.join("test.toml"),
        &format!("takes = 1\nrate = {rate}\n[[step]]\n{step}\n"),
    )
    .unwrap_or_else(|e| panic!("{e}"))
}

/// Every file under `dir` (recursively) as (path relative to `dir`, bytes), sorted by path.
pub fn files_under(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let name = p.strip_prefix(dir).unwrap().display().to_string();
                out.push((name, std::fs::read(&p).unwrap()));
            }
        }
    }
    out.sort();
    out
}
/// Python's `audioop` (standard library, deprecated but present in 3.11) set up on every
/// 16-bit value: `data` holds -32768..=32767 as little-endian int16 bytes. A reference
/// script appends what it computes from it.
pub const AUDIOOP_EVERY_PCM16: &str = r#"
import array, sys, warnings
warnings.simplefilter("ignore")
import audioop
pcm = array.array("h", range(-32768, 32768))
if sys.byteorder != "little":
    pcm.byteswap()
data = pcm.tobytes()
"#;

/// Every file of `whole` (a run on one machine) is in `sharded` with the same bytes, and
/// `sharded` holds nothing else but its `parts/` folder. Returns how many files compared.
pub fn assert_same_output_but_parts(whole: &Path, sharded: &Path) -> usize {
    let a = files_under(whole);
    let b: Vec<_> = files_under(sharded)
        .into_iter()
        .filter(|(name, _)| !name.starts_with("parts/"))
        .collect();
    let names = |v: &[(String, Vec<u8>)]| v.iter().map(|f| f.0.clone()).collect::<Vec<_>>();
    assert_eq!(names(&a), names(&b));
    for ((name, x), (_, y)) in a.iter().zip(&b) {
        assert!(x == y, "{name} differs from the one-machine run");
    }
    a.len()
}

/// Run every ```sh block of `docs/<page>`, command by command and in order, from `dir`
/// with the built `retake` first on the PATH; each command must exit 0 (the failure names
/// the page, the block's line and the command, with its output).
pub fn run_doc_commands(page: &str, dir: &Path) {
    let doc = root().join("docs").join(page);
    let text = std::fs::read_to_string(&doc).unwrap();
    let blocks = fenced_blocks(&text, "sh");
    assert!(!blocks.is_empty(), "no sh examples in {}", doc.display());
    let bin = Path::new(env!("CARGO_BIN_EXE_retake")).parent().unwrap();
    let path = format!(
        "{}:{}",
        bin.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    for (line, body) in blocks {
        for command in body.lines().filter(|l| !l.trim().is_empty()) {
            let o = Command::new("bash")
                .args(["-euo", "pipefail", "-c", command])
                .current_dir(dir)
                .env("PATH", &path)
                .output()
                .unwrap();
            assert!(
                o.status.success(),
                "docs/{page} block at line {line}: `{command}` exited {:?}\n{}{}",
                o.status.code(),
                String::from_utf8_lossy(&o.stdout),
                String::from_utf8_lossy(&o.stderr)
            );
        }
    }
}
