//! What the bench binaries share: the synthetic clips they run on, one-core timing by the
//! thread's own CPU clock, and whole steps built from a recipe table.
//!
//! Each bench binary includes this file as a module (`mod common;`), so not every binary
//! uses every item.
#![allow(dead_code)]

use std::path::Path;

use retake::audio::Audio;
use retake::recipe::Plan;
use retake::seed::TakeRng;
use retake::steps::{TakeContext, run_step};

/// Length of every clip, seconds.
pub const SECONDS: f64 = 5.0;
/// Distinct clips: enough that the working set does not sit in cache.
pub const DISTINCT: usize = 20;

/// `DISTINCT` clips of noise at `rate` (a fixed LCG, so every run measures the same data).
pub fn clips(rate: u32) -> Vec<Vec<f32>> {
    let n = (SECONDS * f64::from(rate)) as usize;
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    (0..DISTINCT)
        .map(|_| {
            (0..n)
                .map(|_| {
                    state = state
                        .wrapping_mul(6_364_136_223_846_793_005)
                        .wrapping_add(1_442_695_040_888_963_407);
                    ((state >> 40) as f32 / (1u64 << 24) as f32 - 0.5) * 0.5
                })
                .collect()
        })
        .collect()
}

/// A factor drawn per take from [0.9, 1.1], as `factor = { low = 0.9, high = 1.1 }` does:
/// not a simple fraction, so it runs on the free-ratio engine.
pub fn drawn(i: usize) -> f64 {
    0.9 + 0.2 * ((i * 7919) % 1000) as f64 / 1000.0 + 1.234_567e-7
}

/// CPU seconds this thread has used: resists the load of a shared machine far better than
/// wall time, and counts only the thread doing the work.
pub fn thread_cpu_seconds() -> f64 {
    let mut t = libc::timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: clock_gettime writes one timespec through a valid pointer.
    let rc = unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, &mut t) };
    assert_eq!(rc, 0, "clock_gettime(CLOCK_THREAD_CPUTIME_ID)");
    t.tv_sec as f64 + t.tv_nsec as f64 * 1e-9
}

/// Median seconds of audio per CPU second of `work` on this thread: `passes` passes, each
/// over `calls` calls cycling through `clips`, after one warm-up pass (plans and buffers
/// built, caches warm).
pub fn one_core_rate(
    clips: &[Vec<f32>],
    calls: usize,
    passes: usize,
    mut work: impl FnMut(usize, &[f32]),
) -> f64 {
    let pass = |work: &mut dyn FnMut(usize, &[f32])| {
        for i in 0..calls {
            work(i, &clips[i % clips.len()]);
        }
    };
    pass(&mut work);
    let mut rates: Vec<f64> = (0..passes)
        .map(|_| {
            let cpu = thread_cpu_seconds();
            pass(&mut work);
            calls as f64 * SECONDS / (thread_cpu_seconds() - cpu).max(1e-9)
        })
        .collect();
    rates.sort_by(f64::total_cmp);
    rates[passes / 2]
}

/// A one-step plan at 16 kHz from a `[[step]]` table's body (paths relative to the
/// checkout).
pub fn step_plan(step: &str) -> Plan {
    retake::recipe::parse(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("bench.toml"),
        &format!("takes = 1\n[[step]]\n{step}\n"),
    )
    .unwrap_or_else(|e| panic!("bench recipe {step:?}: {e}"))
}

/// Run the plan's one step on a 16 kHz clip as a take does (one line over most of the
/// clip, values drawn from take `i`'s own stream), through the same checks as a real run.
pub fn run_plan_step(plan: &Plan, i: usize, x: &[f32]) {
    let lines = [(0.2, SECONDS - 0.2)];
    let take = TakeContext {
        lines: &lines,
        words: &lines,
    };
    let audio = Audio {
        rate: 16_000,
        samples: x.to_vec(),
    };
    let out = run_step(
        plan.steps[0].step.as_ref(),
        audio,
        &take,
        &mut TakeRng::new(i as u64),
    );
    std::hint::black_box(out.expect("step"));
}
