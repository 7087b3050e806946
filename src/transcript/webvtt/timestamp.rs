//! WebVTT timestamps: the specification's syntax read strictly, and written rounded to the
//! millisecond of the exact binary value.

/// `hh:mm:ss.mmm` (hours two or more digits), rounded to the nearest millisecond of the exact
/// value of `t` (halves up); negative and NaN give `00:00:00.000`.
pub fn format_timestamp(t: f64) -> String {
    let ms = round_ms(t);
    let (h, rest) = (ms / 3_600_000, ms % 3_600_000);
    format!(
        "{h:02}:{:02}:{:02}.{:03}",
        rest / 60_000,
        rest / 1000 % 60,
        rest % 1000
    )
}

/// Whole milliseconds nearest to the exact value of `t`: the candidate from `round` is
/// checked against the half-way points with a fused multiply-add, whose sign is exact, so
/// 1.0005 (stored as 1.00049999999999994...) gives 1000, not 1001.
fn round_ms(t: f64) -> u64 {
    if t.is_nan() || t <= 0.0 {
        return 0;
    }
    let k = (t * 1000.0).round();
    if k >= 2f64.powi(52) {
        return k as u64; // saturates; halves are not representable up there anyway
    }
    if t.mul_add(1000.0, -(k + 0.5)) >= 0.0 {
        k as u64 + 1
    } else if t.mul_add(1000.0, -(k - 0.5)) < 0.0 {
        k as u64 - 1
    } else {
        k as u64
    }
}

/// The specification's timestamp syntax: optional hours (two or more digits) and `:`,
/// minutes `00`-`59`, `:`, seconds `00`-`59`, `.`, exactly three digits. Seconds, or `None`.
pub fn parse_timestamp(s: &str) -> Option<f64> {
    read_timestamp(s).ok()
}

/// [`parse_timestamp`] with the reason when `s` is not a timestamp.
pub(super) fn read_timestamp(s: &str) -> Result<f64, String> {
    let bad = |why: &str| {
        Err(format!(
            "`{s}` is not a WebVTT timestamp ([hh:]mm:ss.ttt): {why}"
        ))
    };
    let digits = |x: &str| !x.is_empty() && x.bytes().all(|b| b.is_ascii_digit());
    if s.is_empty() {
        return Err("timestamp is missing".into());
    }
    let Some((clock, frac)) = s.rsplit_once('.') else {
        if s.contains(',') {
            return bad("the milliseconds follow a '.', not a ',' as in SRT");
        }
        return bad("no '.' before the milliseconds");
    };
    if frac.len() != 3 || !digits(frac) {
        return bad("the milliseconds need exactly three digits");
    }
    let parts: Vec<&str> = clock.split(':').collect();
    let (hours, minutes, seconds) = match parts.as_slice() {
        [m, s] => ("0", *m, *s),
        [h, m, s] => {
            if h.len() < 2 || !digits(h) {
                return bad("hours need two or more digits");
            }
            (*h, *m, *s)
        }
        _ => return bad("expected mm:ss.ttt or hh:mm:ss.ttt"),
    };
    for (name, v) in [("minutes", minutes), ("seconds", seconds)] {
        if v.len() != 2 || !digits(v) {
            return bad(&format!("{name} need exactly two digits"));
        }
        if v > "59" {
            return bad(&format!("{name} must be 00-59"));
        }
    }
    let n = |x: &str| x.parse::<u64>().ok();
    let total = n(hours)
        .and_then(|h| h.checked_mul(3_600_000))
        .and_then(|h| h.checked_add(n(minutes)? * 60_000 + n(seconds)? * 1000 + n(frac)?));
    match total {
        Some(ms) => Ok(ms as f64 / 1000.0),
        None => bad("hours too large"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timestamps_follow_the_spec_syntax() {
        // W3C WebVTT §"WebVTT timestamp": [hours (2+ digits):]mm:ss.ttt, mm and ss 00-59.
        assert_eq!(parse_timestamp("00:11.000"), Some(11.0));
        assert_eq!(parse_timestamp("04:05.001"), Some(245.001));
        assert_eq!(parse_timestamp("01:02:03.004"), Some(3723.004));
        assert_eq!(parse_timestamp("123:00:00.000"), Some(442_800.0));
        for bad in [
            "1:02.000",     // minutes need two digits
            "1:02:03.000",  // hours need two or more digits
            "00:61.000",    // seconds 00-59
            "60:00.000",    // without hours, the first field is minutes
            "00:01.00",     // exactly three fraction digits
            "00:01.0000",   //
            "00:01",        // fraction required
            "00:00:01,000", // SRT's comma
            " 00:01.000",   // no surrounding space
            "00:01.000 ",   //
            "+0:01.000",    //
            "00:0１.000",   // fullwidth digit is not an ASCII digit
            "",
        ] {
            assert_eq!(parse_timestamp(bad), None, "{bad:?}");
        }
        let why = read_timestamp("00:00:01,000").unwrap_err();
        assert!(why.contains("SRT"), "{why}");
    }

    #[test]
    fn format_rounds_to_the_nearest_millisecond_of_the_exact_value() {
        assert_eq!(format_timestamp(0.0), "00:00:00.000");
        assert_eq!(format_timestamp(-3.2), "00:00:00.000");
        assert_eq!(format_timestamp(f64::NAN), "00:00:00.000");
        assert_eq!(format_timestamp(3723.004), "01:02:03.004");
        assert_eq!(format_timestamp(360_000.0), "100:00:00.000");
        // 1.0005 is stored as 1.00049999999999994..., 2.0005 as 2.00050000000000017...
        assert_eq!(format_timestamp(1.0005), "00:00:01.000");
        assert_eq!(format_timestamp(2.0005), "00:00:02.001");
        // 0.0625 is exactly 62.5 ms: halves go up.
        assert_eq!(format_timestamp(0.0625), "00:00:00.063");
        assert_eq!(format_timestamp(59.9996), "00:01:00.000");
    }
}
