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
//! bytes = d × rate × 4 × (HELD + max(max over the plan's steps of its factor, writer factor))
//! ```
//!
//! where 4 is the bytes of one `f32` sample, [`HELD`] counts the buffers every take holds
//! and [`step_factor`] the extra buffers of one step (or [`writer_factor`] those of the
//! file writer, which runs after the steps), in the same unit: one mono `f32` buffer the
//! length of the clip at the plan's rate, 64 kB per second at 16 kHz. The factors are
//! measured (peak resident memory of `retake run --threads 1` on a 300 s and a 600 s clip
//! per step, the slope between the two; `benches/memory.rs` measures them again against
//! this model), then rounded up to the next half buffer.

use crate::audio::{Container, SampleFormat};
use crate::recipe::Plan;

/// Buffers every take holds, in clip-length mono `f32` buffers at the plan's rate: the clip
/// at the plan's rate and the take (measured: 2.0, a run with no step).
pub const HELD: f64 = 2.0;

/// Memory a process needs besides its workers' clips: code, thread stacks, the reorder
/// window's records (measured: 7 MB; noise banks are counted apart).
pub const FIXED_BYTES: u64 = 16 << 20;

/// The default clip-memory limit per worker (`retake run --max-clip-memory`): 4 GiB, about
/// what a cluster node has per core. At 16 kHz that is 2 h 48 min of clip under speed and
/// gain, 1 h 33 min under a mask.
pub const DEFAULT_LIMIT_BYTES: u64 = 4 << 30;

/// Extra clip-length buffers a step needs while it runs (measured beside each: the slope
/// of peak memory from a 300 s to a 600 s clip at 16 kHz, less [`HELD`]), rounded up; a step
/// not listed needs [`UNLISTED`].
const STEP_FACTORS: &[(&str, f64)] = &[
    ("speed", 1.5),    // 1.1
    ("resample", 2.0), // 1.5
    ("gain", 1.0),     // 1.0
    ("level", 1.0),    // 1.0
    ("noise", 3.0),    // 3.0
    ("room", 2.5),     // 2.0
    ("mask", 7.0),     // 6.8 (STFT of the take)
    ("warp", 6.5),     // 6.0
    ("stretch", 7.0),  // 6.4
    ("pitch", 7.0),    // 6.4
    ("channel", 2.5),  // 2.0
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

/// Extra clip-length buffers the writer of `format` needs: WAV is written in chunks (0);
/// FLAC holds the integer codes twice (ours and the encoder's copy) and the encoded stream
/// (measured 3.2 with a gain step, 600 s at 16 kHz).
pub fn writer_factor(format: SampleFormat) -> f64 {
    match format.spec().container {
        Container::Wav => 0.0,
        Container::Flac => 3.5,
    }
}

/// Bytes one worker needs per second of clip under `plan`.
pub fn bytes_per_second(plan: &Plan) -> f64 {
    let step = plan
        .steps
        .iter()
        .map(|s| step_factor(s.step.name()))
        .fold(writer_factor(plan.format), f64::max);
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

/// Why a clip is not made: the memory the model predicts for it passes the limit.
pub fn over_limit(plan: &Plan, seconds: f64, limit: u64) -> Option<String> {
    let need = clip_bytes(plan, seconds);
    (need > limit).then(|| {
        format!(
            "{seconds:.0} s of audio needs about {} MiB per worker under this recipe (memory \
             model: {:.0} kB per second), over the limit of {} MiB (--max-clip-memory); cut it \
             into shorter clips with `retake slice` (between words, labels kept), or raise \
             the limit",
            need.div_ceil(1 << 20),
            bytes_per_second(plan) / 1000.0,
            limit >> 20
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plan(steps: &str, format: &str) -> Plan {
        crate::recipe::parse(
            std::path::Path::new("m.toml"),
            &format!("takes = 2\nformat = \"{format}\"\n{steps}"),
        )
        .unwrap()
    }

    #[test]
    fn the_largest_step_or_the_writer_sets_the_rate_of_memory() {
        let gain = plan("[[step]]\ndo = \"gain\"\ndb = 1.0\n", "pcm16");
        // 16 kHz × 4 B × (2 held + 1 for gain).
        assert_eq!(bytes_per_second(&gain), 192_000.0);
        let masked = plan(
            "[[step]]\ndo = \"gain\"\ndb = 1.0\n[[step]]\ndo = \"mask\"\ntime_masks = 1\ntime_width_s = 0.1\n",
            "pcm16",
        );
        assert_eq!(bytes_per_second(&masked), 64_000.0 * 9.0);
        let flac = plan("[[step]]\ndo = \"gain\"\ndb = 1.0\n", "flac16");
        assert_eq!(bytes_per_second(&flac), 64_000.0 * 5.5);
        // Two hours under speed and gain: the issue's 1.3 GB measured, 1.6 GB predicted.
        let speed = plan(
            "[[step]]\ndo = \"speed\"\nfactor = 0.9\n[[step]]\ndo = \"gain\"\ndb = 1.0\n",
            "pcm16",
        );
        assert_eq!(clip_bytes(&speed, 7200.0), 1_612_800_000);
    }

    #[test]
    fn a_clip_over_the_limit_is_named_with_the_way_out() {
        let gain = plan("[[step]]\ndo = \"gain\"\ndb = 1.0\n", "pcm16");
        assert!(over_limit(&gain, 5.0, 1 << 20).is_none());
        let why = over_limit(&gain, 6.0, 1 << 20).unwrap();
        assert!(
            why.contains("retake slice") && why.contains("limit of 1 MiB"),
            "{why}"
        );
        assert!((longest_clip(&gain, 1 << 20) - 5.461).abs() < 1e-3);
    }
}
