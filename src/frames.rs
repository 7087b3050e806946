//! Frame-level targets from a clip's timed labels: for every analysis frame, which line and
//! which word it falls in and how obscured that word is. Keyword spotters and aligners
//! train on these, and computing them from the rewritten labels of a take keeps them aligned
//! with the take's audio.

use crate::transcript::Clip;

/// Per-frame targets at one hop. Frame `f` covers `[f·hop, (f+1)·hop)` and is assigned by its
/// centre `(f + ½)·hop`: to the line and word whose `[start, end)` holds it.
#[derive(Debug, Clone, PartialEq)]
pub struct FrameTargets {
    /// The hop in seconds.
    pub hop_s: f64,
    /// Index of the line each frame falls in (lines counted in order from 0), or −1.
    pub line: Vec<i32>,
    /// Index of the word each frame falls in (words counted across all lines in order from
    /// 0, as they appear in the manifest), or −1.
    pub word: Vec<i32>,
    /// The `obscured` fraction of that word (0 for a word without one, or for a frame in no
    /// word).
    pub obscured: Vec<f32>,
}

/// Frames of `hop_s` seconds over `duration` seconds: `ceil(duration / hop_s)` of them, so
/// the last partial frame is counted.
pub fn frame_count(duration: f64, hop_s: f64) -> usize {
    if duration <= 0.0 || hop_s <= 0.0 {
        return 0;
    }
    // A duration that is a whole number of hops up to rounding gives that number.
    (duration / hop_s - 1e-9).ceil().max(0.0) as usize
}

/// The targets of `clip` (usually a take, with labels rewritten) over `duration` seconds.
/// An untimed clip gives −1 everywhere.
///
/// # Panics
/// When `hop_s` is not a positive finite number.
pub fn frame_targets(clip: &Clip, duration: f64, hop_s: f64) -> FrameTargets {
    assert!(
        hop_s.is_finite() && hop_s > 0.0,
        "hop must be a positive number of seconds, not {hop_s}"
    );
    let n = frame_count(duration, hop_s);
    let mut out = FrameTargets {
        hop_s,
        line: vec![-1; n],
        word: vec![-1; n],
        obscured: vec![0.0; n],
    };
    // Frames whose centre lies in [start, end).
    let frames_in = |start: f64, end: f64| {
        let first = ((start / hop_s) - 0.5).ceil().max(0.0) as usize;
        let last = ((end / hop_s) - 0.5).ceil().max(0.0) as usize;
        first.min(n)..last.min(n)
    };
    let mut word_index = 0i32;
    for (li, line) in clip.lines.iter().flatten().enumerate() {
        for f in frames_in(line.start, line.end) {
            out.line[f] = li as i32;
        }
        for w in &line.words {
            let obscured = w
                .extra
                .get("obscured")
                .and_then(|v| v.as_f64())
                .unwrap_or(0.0) as f32;
            for f in frames_in(w.start, w.end) {
                out.word[f] = word_index;
                out.obscured[f] = obscured;
            }
            word_index += 1;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn clip(json: &str) -> Clip {
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn frames_are_assigned_by_their_centre() {
        let c = clip(
            r#"{"id":"a","audio":"a.wav","lines":[{"start":0.1,"end":0.5,"text":"left bay",
            "words":[{"start":0.1,"end":0.25,"text":"left","obscured":0.5},
                     {"start":0.3,"end":0.5,"text":"bay"}]}]}"#,
        );
        let t = frame_targets(&c, 0.6, 0.1);
        assert_eq!(t.line, vec![-1, 0, 0, 0, 0, -1]);
        // The centre 0.25 is the end of "left", so frame 2 is in no word: ends are open.
        assert_eq!(t.word, vec![-1, 0, -1, 1, 1, -1]);
        assert_eq!(t.obscured, vec![0.0, 0.5, 0.0, 0.0, 0.0, 0.0]);
    }

    #[test]
    fn the_last_partial_frame_counts_and_exact_multiples_do_not_add_one() {
        assert_eq!(frame_count(1.0, 0.01), 100);
        assert_eq!(frame_count(1.005, 0.01), 101);
        assert_eq!(frame_count(0.0, 0.01), 0);
    }
}
