//! How much memory one worker needs for one clip, predicted from the plan before any audio
//! is decoded: the model behind the clip-length limit (a clip that would pass it is a
//! reject pointing at `retake slice`, never an out-of-memory kill) and behind the memory
//! request of the job files.
//!
//! A worker holds one clip at a time: the decoded source, the clip at the plan's rate, the
//! take being made and what the step running now needs besides (steps run one after
//! another, each dropping its input when it is done). So a clip of `d` seconds costs
//!
//! ```text
//! bytes = d × rate × 4 × (HELD + max over the plan's steps of its factor)
//! ```
//!
//! where 4 is the bytes of one `f32` sample, [`HELD`] counts the buffers every take holds
//! and [`step_factor`] the extra buffers of one step, in the same unit (one mono `f32`
//! buffer the length of the clip). The factors are measured (peak resident memory of
//! `retake run --threads 1` on one long clip per step, `benches/memory.rs`), rounded up.

use crate::recipe::Plan;

/// Buffers every take holds, in clip-length mono `f32` buffers at the plan's rate: the
/// source, the clip at the plan's rate, the take, and the written copy's encoder buffer.
pub const HELD: f64 = 4.0;

/// Memory a process needs besides its workers' clips (code, noise banks are counted apart).
pub const FIXED_BYTES: u64 = 64 << 20;

/// The default clip-memory limit per worker when neither the recipe (`max_clip_memory_mb`)
/// nor the command line sets one: 4 GiB, under the memory of a small cluster node per core.
pub const DEFAULT_LIMIT_BYTES: u64 = 4 << 30;

/// Extra clip-length buffers a step needs while it runs, measured; a step not listed needs
/// [`UNLISTED`].
const STEP_FACTORS: &[(&str, f64)] = &[
    ("speed", 2.0),
    ("resample", 2.0),
    ("gain", 0.0),
    ("level", 1.0),
    ("noise", 2.0),
    ("room", 6.0),
    ("mask", 8.0),
    ("warp", 4.0),
    ("stretch", 4.0),
    ("pitch", 6.0),
    ("channel", 2.0),
];

/// A step this table does not know: the largest factor, to stay on the safe side.
const UNLISTED: f64 = 8.0;

/// The extra clip-length buffers step `name` needs while it runs.
pub fn step_factor(name: &str) -> f64 {
    STEP_FACTORS
        .iter()
        .find(|(n, _)| *n == name)
        .map_or(UNLISTED, |(_, f)| *f)
}

/// Bytes one worker needs per second of clip under `plan`.
pub fn bytes_per_second(plan: &Plan) -> f64 {
    let step = plan
        .steps
        .iter()
        .map(|s| step_factor(s.step.name()))
        .fold(0.0, f64::max);
    f64::from(plan.rate) * 4.0 * (HELD + step)
}

/// Predicted peak bytes of one worker on a clip of `seconds`.
pub fn clip_bytes(plan: &Plan, seconds: f64) -> u64 {
    (seconds.max(0.0) * bytes_per_second(plan)).ceil() as u64
}

/// Predicted peak bytes of a process with `workers` workers each on a clip of `seconds`
/// (the longest), plus [`FIXED_BYTES`] and the noise banks the plan holds (`bank_bytes`).
pub fn process_bytes(plan: &Plan, seconds: f64, workers: usize, bank_bytes: u64) -> u64 {
    FIXED_BYTES + bank_bytes + clip_bytes(plan, seconds) * workers.max(1) as u64
}

/// The longest clip a worker may take under `limit` bytes, in seconds.
pub fn longest_clip(plan: &Plan, limit: u64) -> f64 {
    limit as f64 / bytes_per_second(plan)
}

/// A clip's length in seconds without decoding it: the manifest's `duration` when given,
/// else the frames its audio file's header declares (`None` when neither says).
pub fn clip_seconds(duration: Option<f64>, audio: &std::path::Path) -> Option<f64> {
    if let Some(d) = duration.filter(|d| d.is_finite() && *d >= 0.0) {
        return Some(d);
    }
    let stream = crate::audio::Stream::open(audio, crate::audio::ChannelPolicy::Mix).ok()?;
    let frames = stream.declared_frames()?;
    let rate = stream.rate().ok()?;
    (rate > 0).then(|| frames as f64 / f64::from(rate))
}

/// Bytes the plan's noise banks and measured responses hold once decoded, estimated from
/// the files' sizes (a 16-bit file doubles as `f32`; compressed files are underestimated).
pub fn input_bytes(plan: &Plan) -> u64 {
    plan.inputs()
        .iter()
        .filter_map(|p| std::fs::metadata(p).ok())
        .map(|m| 2 * m.len())
        .sum()
}
