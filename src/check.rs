//! `check`: a manifest and its audio, validated line by line.
//!
//! Every problem is reported (not only the first), each naming the manifest line and the
//! field, so a user can fix a whole file in one pass.

use std::path::Path;

use rayon::prelude::*;

use crate::audio::{self, ChannelPolicy};
use crate::transcript::{Entry, Manifest, Problem, read_manifest, validate};

/// How far a clip's `duration` field may be from its audio's real length (seconds): one
/// millisecond, more than a sample at any rate we write.
pub const DURATION_TOLERANCE_S: f64 = 1e-3;

/// The outcome of a check.
#[derive(Debug, Default)]
pub struct CheckReport {
    /// Manifest lines read (good and bad).
    pub lines: usize,
    /// Seconds of audio decoded.
    pub seconds: f64,
    /// Every problem found, in line order.
    pub problems: Vec<Problem>,
}

/// Check a manifest: every line parses, every audio file exists and decodes to finite
/// samples, and every timing is inside its audio, ordered and nested.
///
/// # Errors
/// Only when the manifest itself cannot be read.
pub fn check_manifest(path: &Path) -> std::io::Result<CheckReport> {
    let manifest = read_manifest(path)?;
    let per_clip: Vec<(f64, Vec<Problem>)> = manifest
        .entries
        .par_iter()
        .map(|entry| check_entry(&manifest, entry))
        .collect();
    let mut problems = manifest.problems.clone();
    let mut seconds = 0.0;
    for (s, p) in per_clip {
        seconds += s;
        problems.extend(p);
    }
    problems.sort_by_key(|p| p.line);
    Ok(CheckReport {
        lines: manifest.entries.len() + manifest.problems.len(),
        seconds,
        problems,
    })
}

fn check_entry(manifest: &Manifest, entry: &Entry) -> (f64, Vec<Problem>) {
    let problem = |field: &str, message: String| Problem {
        file: manifest.path.clone(),
        line: entry.line,
        field: field.to_string(),
        message,
    };
    let clip = &entry.clip;
    // One pass without keeping the samples: a long session costs no more memory than a clip.
    let path = manifest.base().join(&clip.audio);
    let scanned = audio::scan(&path, ChannelPolicy::Mix);
    let (duration, mut problems) = match scanned {
        Err(e) => (None, vec![problem("audio", e.to_string())]),
        Ok(a) => {
            let mut ps = Vec::new();
            if let Err(e) = audio::usable(&path, &a, None) {
                ps.push(problem("audio", e.to_string()));
            }
            if let Some(d) = clip.duration
                && (d - a.duration()).abs() > DURATION_TOLERANCE_S
            {
                ps.push(problem(
                    "duration",
                    format!("{d} s, but the audio lasts {:.4} s", a.duration()),
                ));
            }
            (Some(a.duration()), ps)
        }
    };
    problems.extend(
        validate(clip, duration)
            .into_iter()
            .map(|(f, m)| problem(&f, m)),
    );
    (duration.unwrap_or(0.0), problems)
}
