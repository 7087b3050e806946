//! Every registered step on hostile audio: non-finite samples, empty and one-sample takes,
//! full-scale squares, silence, at more than one rate. Whatever comes in, a step returns
//! either a clean take (finite samples, a time map from the input's duration onto the
//! output's) or a typed error; it never panics.

mod common;

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::Path;

use retake::audio::Audio;
use retake::seed::TakeRng;
use retake::steps::{REGISTRY, TakeContext, run_step};

/// One or more `[[step]]` bodies per registered step, covering its main variants.
fn configurations(noise_bank: &Path) -> Vec<(&'static str, String)> {
    let bank = noise_bank.display();
    vec![
        ("speed", "do = \"speed\"\nfactor = [0.5, 0.9, 2.0]".into()),
        ("resample", "do = \"resample\"\nvia_rate = [4000, 11025, 48000]".into()),
        ("gain", "do = \"gain\"\ndb = { low = -60.0, high = 40.0 }".into()),
        ("noise", format!("do = \"noise\"\nbank = \"{bank}\"\nsnr_db = [-30.0, 10.0]")),
        (
            "noise",
            format!(
                "do = \"noise\"\nbank = \"{bank}\"\nsnr_db = 5.0\nsnr_over = \"active\"\n\
                 silent_speech = \"reject\"\nstems = true"
            ),
        ),
        ("noise", format!("do = \"noise\"\nbank = \"{bank}\"\nsnr_db = 5.0\nsnr_over = \"words\"")),
        (
            "room",
            "do = \"room\"\nwidth_m = 4.0\nlength_m = 6.0\nheight_m = 3.0\nrt60_s = 0.4".into(),
        ),
        (
            "room",
            "do = \"room\"\nwidth_m = 3.0\nlength_m = 5.0\nheight_m = 2.5\nabsorption = 0.3\n\
             align = \"shift\"\ntail = \"keep\"\nnormalise = \"energy\"\ndrr_db = -10.0\n\
             max_ir_s = 0.3"
                .into(),
        ),
        (
            "mask",
            "do = \"mask\"\nfreq_masks = 2\nfreq_width_hz = 300.0\ntime_masks = 2\n\
             time_width_s = 0.05\nfill = \"floor\"\nmax_obscured = 0.5"
                .into(),
        ),
        ("mask", "do = \"mask\"\npreset = \"LD\"\nfill = \"mean\"\nonly_gaps = true".into()),
        ("warp", "do = \"warp\"".into()),
        ("warp", "do = \"warp\"\nanchor = 0.5\nshift_s = 0.2".into()),
        ("stretch", "do = \"stretch\"\nfactor = [0.5, 2.0]".into()),
        ("pitch", "do = \"pitch\"\nsemitones = [-12.0, 12.0]".into()),
        ("level", "do = \"level\"\nlufs = -23.0".into()),
        ("level", "do = \"level\"\npeak_dbfs = -3.0".into()),
        (
            "channel",
            "do = \"channel\"\nband = \"narrow\"\ntilt_db_per_octave = 6.0\ncodec = \"mulaw\"\n\
             clip = \"soft\"\nclip_dbfs = -6.0\nbits = 4"
                .into(),
        ),
        ("channel", "do = \"channel\"\nband_hz = [100.0, 3000.0]\ncodec = \"alaw\"\nclip = \"hard\"\nclip_dbfs = 0.0".into()),
    ]
}

/// The hostile inputs at `rate`, by name.
fn inputs(rate: u32) -> Vec<(&'static str, Vec<f32>)> {
    let n = (rate / 2) as usize;
    let tone = common::sine(440.0, 0.5, rate, 0.5);
    let with = |at: usize, v: f32| {
        let mut x = tone.clone();
        x[at] = v;
        x
    };
    let square: Vec<f32> = (0..n)
        .map(|i| {
            if (i / (rate as usize / 200)).is_multiple_of(2) {
                1.0
            } else {
                -1.0
            }
        })
        .collect();
    vec![
        ("empty", Vec::new()),
        ("one sample", vec![0.5]),
        ("one full-scale sample", vec![-1.0]),
        ("two samples", vec![1.0, -1.0]),
        ("ten samples", square[..10].to_vec()),
        ("NaN in the middle", with(n / 2, f32::NAN)),
        ("NaN first", with(0, f32::NAN)),
        ("+Inf", with(n / 3, f32::INFINITY)),
        ("-Inf last", with(n - 1, f32::NEG_INFINITY)),
        ("full-scale square", square.clone()),
        (
            "full-scale square, 20 ms",
            square[..(rate / 50) as usize].to_vec(),
        ),
        ("silence", vec![0.0; n]),
    ]
}

/// What one step did with one input, when it is not acceptable.
fn fault(
    step: &str,
    input: &[f32],
    rate: u32,
    seed: u64,
    plan: &retake::recipe::Plan,
    plan_keeps_tail: bool,
) -> Option<String> {
    let d = input.len() as f64 / f64::from(rate);
    let spans = if input.is_empty() {
        vec![]
    } else {
        vec![(0.0, d)]
    };
    let words = if input.is_empty() {
        vec![]
    } else {
        vec![(0.0, d / 2.0), (d / 2.0, d)]
    };
    let take = TakeContext {
        lines: &spans,
        words: &words,
    };
    let audio = Audio {
        rate,
        samples: input.to_vec(),
    };
    let result = catch_unwind(AssertUnwindSafe(|| {
        run_step(
            plan.steps[0].step.as_ref(),
            audio,
            &take,
            &mut TakeRng::new(seed),
        )
    }));
    let out = match result {
        Err(panic) => {
            let what = panic
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| panic.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default();
            return Some(format!("{step}: panicked: {what}"));
        }
        Ok(Err(e)) => {
            assert!(!e.reason.is_empty(), "{step}: an error without a reason");
            return None;
        }
        Ok(Ok(out)) => out,
    };
    if out.audio.rate != rate {
        return Some(format!(
            "{step}: returned rate {} for {rate}",
            out.audio.rate
        ));
    }
    if let Some(i) = out.audio.samples.iter().position(|s| !s.is_finite()) {
        return Some(format!(
            "{step}: output sample {i} is {}",
            out.audio.samples[i]
        ));
    }
    // The map is the exact time relation; the output is whole samples, so its length may
    // differ from the map's end by up to half a sample. A kept reverberant tail lies past
    // the map's end (no source time maps there).
    let tol = 1e-9;
    let half = 0.5 / f64::from(rate) + tol;
    let (a, b) = out.map.domain();
    let (y0, y) = out.map.range();
    let d_out = out.audio.duration();
    let tail = plan_keeps_tail;
    let end_ok = if tail {
        y <= d_out + half
    } else {
        (y - d_out).abs() <= half
    };
    if a.abs() > tol || (b - d).abs() > tol || y0 < -tol || !end_ok {
        return Some(format!(
            "{step}: map domain {a}..{b} range ..{y} for input {d} s, output {d_out} s"
        ));
    }
    let knots = out.map.knots();
    if knots.windows(2).any(|w| w[1].0 < w[0].0 || w[1].1 < w[0].1) {
        return Some(format!("{step}: the time map is not monotone: {knots:?}"));
    }
    for (_, s) in &out.stems {
        if s.samples.iter().any(|x| !x.is_finite()) {
            return Some(format!("{step}: a stem is not finite"));
        }
    }
    None
}

#[test]
fn every_step_survives_every_hostile_input() {
    let bank = common::demo().join("noise");
    let dir = tempfile::tempdir().unwrap();
    let configs = configurations(&bank);
    // Every registered step is covered, so a new step cannot skip this test.
    for name in REGISTRY.iter().map(|k| k.name) {
        assert!(
            configs.iter().any(|(n, _)| *n == name),
            "no configuration for step `{name}`"
        );
    }
    let rates = [8_000, 16_000];
    let plans: Vec<Vec<_>> = rates
        .iter()
        .map(|&rate| {
            configs
                .iter()
                .map(|(_, body)| common::one_step_at(dir.path(), rate, body))
                .collect()
        })
        .collect();
    // Panics are collected, not printed one by one.
    let hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    let mut faults = Vec::new();
    let mut runs = 0;
    for (rate, plans) in rates.into_iter().zip(&plans) {
        let ins = inputs(rate);
        for ((name, body), plan) in configs.iter().zip(plans) {
            for (input, samples) in &ins {
                for seed in 0..3 {
                    runs += 1;
                    if let Some(f) = fault(
                        name,
                        samples,
                        rate,
                        seed,
                        plan,
                        body.contains("tail = \"keep\""),
                    ) {
                        faults.push(format!(
                            "{rate} Hz, {input}, seed {seed}: {f} [{}]",
                            body.replace('\n', "; ")
                        ));
                    }
                }
            }
        }
    }
    std::panic::set_hook(hook);
    assert!(
        faults.is_empty(),
        "{} of {runs} runs failed:\n{}",
        faults.len(),
        faults.join("\n")
    );
}

/// Speech-like input: a gliding tone with a little noise, `seconds` long at `rate`.
fn signal(rate: u32, seconds: f64, seed: u64) -> Vec<f32> {
    let tone = common::sine(220.0 + 40.0 * seed as f64, seconds, rate, 0.4);
    let noise = common::noise(tone.len(), seed + 1);
    tone.iter().zip(noise).map(|(t, n)| t + 0.02 * n).collect()
}

/// The conformance matrix: every configuration of every registered step, at three rates,
/// two lengths and three seeds, keeps its time map's domain on the input and its range on
/// the output, monotone, with finite output. A new step is covered by its row in
/// [`configurations`] (the test above refuses a registry row without one).
#[test]
fn every_step_keeps_its_map_over_rates_lengths_and_seeds() {
    let bank = common::demo().join("noise");
    let dir = tempfile::tempdir().unwrap();
    let configs = configurations(&bank);
    let mut faults = Vec::new();
    let mut runs = 0;
    for rate in [8_000, 16_000, 44_100] {
        for (name, body) in &configs {
            let plan = common::one_step_at(dir.path(), rate, body);
            for seconds in [0.2, 1.0] {
                for seed in 0..3 {
                    runs += 1;
                    let x = signal(rate, seconds, seed);
                    let keeps_tail = body.contains("tail = \"keep\"");
                    if let Some(f) = fault(name, &x, rate, seed, &plan, keeps_tail) {
                        faults.push(format!("{rate} Hz, {seconds} s, seed {seed}: {f}"));
                    }
                }
            }
        }
    }
    assert!(
        faults.is_empty(),
        "{} of {runs} runs failed:\n{}",
        faults.len(),
        faults.join("\n")
    );
}

/// Every configuration of every step, run as a whole batch by the engine, writes the same
/// bytes on one thread and on two.
#[test]
fn every_step_writes_the_same_bytes_on_one_and_two_threads() {
    let bank = common::demo().join("noise");
    let dir = tempfile::tempdir().unwrap();
    let clips = dir.path().join("clips");
    std::fs::create_dir_all(&clips).unwrap();
    let mut manifest = String::new();
    for (i, seconds) in [0.6, 1.3, 0.9].into_iter().enumerate() {
        let name = format!("c{i}.wav");
        common::write_wav_pcm16(
            &clips.join(&name),
            16_000,
            &signal(16_000, seconds, i as u64),
        );
        manifest += &format!(
            "{{\"id\":\"c{i}\",\"audio\":\"clips/{name}\",\"lines\":[{{\"start\":0.1,\"end\":0.5,\
             \"text\":\"bay two\",\"words\":[{{\"start\":0.1,\"end\":0.3,\"text\":\"bay\"}},\
             {{\"start\":0.3,\"end\":0.5,\"text\":\"two\"}}]}}]}}\n"
        );
    }
    let input = dir.path().join("manifest.jsonl");
    std::fs::write(&input, manifest).unwrap();
    let mut differ = Vec::new();
    for (c, (name, body)) in configurations(&bank).iter().enumerate() {
        let path = dir.path().join(format!("r{c}.toml"));
        let text = format!("seed = {c}\ntakes = 3\nrate = 16000\n[[step]]\n{body}\n");
        std::fs::write(&path, &text).unwrap();
        let plan = retake::recipe::load(&path).unwrap_or_else(|e| panic!("{e}"));
        let outs: Vec<_> = [1, 2]
            .into_iter()
            .map(|threads| {
                let out = dir.path().join(format!("out{c}-{threads}"));
                let spec = retake::run::RunSpec {
                    plan: &plan,
                    recipe: Some(&path),
                    input: &input,
                    out: &out,
                    threads: Some(threads),
                    shard: None,
                    clip_memory_limit: retake::memory::DEFAULT_LIMIT_BYTES,
                };
                let summary = retake::run::run(&spec, &|_| {}).unwrap();
                assert_eq!(summary.clips_in, 3, "{name}");
                common::files_under(&out)
            })
            .collect();
        if outs[0] != outs[1] {
            differ.push(format!("{name} [{}]", body.replace('\n', "; ")));
        }
    }
    assert!(
        differ.is_empty(),
        "1 and 2 threads differ for:\n{}",
        differ.join("\n")
    );
}

/// The resampler every clip goes through when its rate is not the recipe's, on inputs of a
/// few samples at common and awkward rate pairs (fixed-ratio and free-ratio engines).
#[test]
fn resampling_a_few_samples_never_panics() {
    use retake::dsp::resample::{output_len, resample};
    let pairs = [
        (48_000, 16_000),
        (44_100, 16_000),
        (8_000, 16_000),
        (16_000, 44_100),
        (22_050, 16_000),
        (96_000, 8_000),
        (11_025, 48_000),
        (44_100, 16_001),
        (1_000, 384_000),
        (384_000, 1_000),
    ];
    let mut faults = Vec::new();
    for (from, to) in pairs {
        for len in 0..12 {
            let x: Vec<f32> = (0..len)
                .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
                .collect();
            match catch_unwind(|| resample(&x, from, to)) {
                Err(_) => faults.push(format!("{len} samples {from} -> {to} Hz: panicked")),
                Ok(y) if y.len() != output_len(len, from, to) => faults.push(format!(
                    "{len} samples {from} -> {to} Hz: {} out, expected {}",
                    y.len(),
                    output_len(len, from, to)
                )),
                Ok(y) if y.iter().any(|s| !s.is_finite()) => {
                    faults.push(format!("{len} samples {from} -> {to} Hz: not finite"));
                }
                Ok(_) => {}
            }
        }
    }
    assert!(faults.is_empty(), "{}", faults.join("\n"));
}
