//! Throughput of resampling, speed perturbation, convolution and whole steps (noise,
//! mask, warp, simulated room), in seconds of audio per second of wall
//! time, on one core and on all cores. Run with `cargo bench --bench throughput`.
//!
//! Each figure is the median of seven passes over 200 clips of 5 s (20 distinct clips of
//! noise, each used 10 times, so the working set does not sit in cache), after one warm-up
//! pass that lets every worker build its resamplers. Audio seconds are counted at the
//! input.

mod common;

use std::time::Instant;

use common::{SECONDS, clips, drawn, run_plan_step, step_plan};
use rayon::prelude::*;
use retake::dsp::resample::{resample, speed};

const CLIPS: usize = 200;
const PASSES: usize = 7;

/// The work done on one clip (its index and samples).
type Work<'a> = dyn Fn(usize, &[f32]) + Sync + 'a;

/// Median audio seconds per wall second of `work` over every clip, in `pool`.
fn measure(pool: &rayon::ThreadPool, clips: &[Vec<f32>], work: &Work<'_>) -> f64 {
    let run = || {
        pool.install(|| {
            (0..CLIPS)
                .into_par_iter()
                .for_each(|i| work(i, &clips[i % clips.len()]))
        })
    };
    run();
    let mut rates: Vec<f64> = (0..PASSES)
        .map(|_| {
            let t = Instant::now();
            run();
            CLIPS as f64 * SECONDS / t.elapsed().as_secs_f64()
        })
        .collect();
    rates.sort_by(f64::total_cmp);
    rates[PASSES / 2]
}

fn main() {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let pools = [
        ("1 thread".to_string(), 1),
        (format!("{cores} threads"), cores),
    ]
    .map(|(label, n)| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .expect("thread pool");
        (label, pool)
    });
    let at_44k = clips(44_100);
    let at_16k = clips(16_000);
    // Whole steps as a recipe makes them (the noise bank decoded once, a line over most of
    // each clip, values drawn per take from the take's own stream).
    let step_plans: Vec<(&str, retake::recipe::Plan)> = [
        ("noise at a drawn SNR over lines", "do = \"noise\"\nbank = \"demo_audio/noise\"\nsnr_db = { low = 0, high = 20 }"),
        ("mask, preset LD (2 bands, 2 spans)", "do = \"mask\"\npreset = \"LD\""),
        ("warp by up to 80 ms (WSOLA)", "do = \"warp\"\nmax_shift_s = 0.08"),
        ("stretch by a factor drawn from [0.8, 1.25] (WSOLA)", "do = \"stretch\"\nfactor = { low = 0.8, high = 1.25 }"),
        ("channel: narrow band, mu-law, soft clip", "do = \"channel\"\nband = \"narrow\"\ncodec = \"mulaw\"\nclip = \"soft\"\nclip_dbfs = -6"),
        ("room, simulated, drawn size, RT60 0.3-0.8 s", "do = \"room\"\nwidth_m = { low = 3, high = 8 }\nlength_m = { low = 4, high = 10 }\nheight_m = 3\nrt60_s = { low = 0.3, high = 0.8 }\nmax_ir_s = 1.0"),
    ]
    .into_iter()
    .map(|(name, step)| (name, step_plan(step)))
    .collect();
    for (name, plan) in &step_plans {
        for (label, pool) in &pools {
            let rate = measure(pool, &at_16k, &|i, x| run_plan_step(plan, i, x));
            println!("{name}, {label}: {rate:.0} s of audio per second");
        }
    }
    let cases: [(&str, &[Vec<f32>], &Work<'_>); 4] = [
        ("resample 44.1 kHz -> 16 kHz", &at_44k, &|_, x| {
            std::hint::black_box(resample(x, 44_100, 16_000));
        }),
        ("speed 0.9", &at_16k, &|_, x| {
            std::hint::black_box(speed(x, 0.9));
        }),
        ("speed 1.1", &at_16k, &|_, x| {
            std::hint::black_box(speed(x, 1.1));
        }),
        ("speed drawn from [0.9, 1.1]", &at_16k, &|i, x| {
            std::hint::black_box(speed(x, drawn(i)));
        }),
    ];
    for (name, data, work) in cases {
        for (label, pool) in &pools {
            let rate = measure(pool, data, work);
            println!("{name}, {label}: {rate:.0} s of audio per second");
        }
    }

    // Convolution of each 16 kHz clip with a room response: noise under an envelope that
    // falls 60 dB over the response's length, from its own fixed LCG.
    let response = |secs: f64| -> Vec<f32> {
        let n = (secs * 16_000.0) as usize;
        let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
        (0..n)
            .map(|i| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                let u = (state >> 40) as f32 / (1u64 << 24) as f32 - 0.5;
                u * (-6.907_755 * i as f32 / n as f32).exp()
            })
            .collect()
    };
    let (short_room, long_room) = (response(0.3), response(1.0));
    use retake::dsp::convolve::convolve;
    let convolution: [(&str, &[Vec<f32>], &Work<'_>); 2] = [
        ("convolve with a 0.3 s response", &at_16k, &|_, x| {
            std::hint::black_box(convolve(x, &short_room));
        }),
        ("convolve with a 1.0 s response", &at_16k, &|_, x| {
            std::hint::black_box(convolve(x, &long_room));
        }),
    ];
    for (name, data, work) in convolution {
        for (label, pool) in &pools {
            let rate = measure(pool, data, work);
            println!("{name}, {label}: {rate:.0} s of audio per second");
        }
    }
}
