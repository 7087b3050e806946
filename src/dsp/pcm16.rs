//! The one 16-bit PCM scale, both ways: code `k` is the float `k / 32768`, and a float `x`
//! becomes `round(x · 32768)` clamped to [-32768, 32767].
//!
//! Why one scale: the decoder (symphonia) reads 16-bit PCM as `k / 32768`, the convention
//! of libsndfile's reader too, so writing with the same factor makes an untouched 16-bit
//! take come back bit for bit, and a codec working on 16-bit codes (G.711) sees exactly
//! the codes it was given. (Writing with 32767 instead moved about half of all codes by
//! one step.) Full scale is asymmetric, as the code range is: -1.0 is -32768, and +1.0
//! clips to 32767 (= 1 - 2⁻¹⁵).
//!
//! Rounding is to the nearest code, halves away from zero. libsndfile 1.2.2's writer (as
//! called by python-soundfile, with clipping on) rounds toward negative infinity instead
//! (measured: 0.6 / 32768 → 0, -0.4 / 32768 → -1), so the two writers agree on every value
//! on the 16-bit grid and may differ by one code between grid points; ours has half the
//! worst-case error and no bias.

/// Code `k` as a float: `k / 32768`, exact in `f32`.
pub fn to_f32(k: i16) -> f32 {
    f32::from(k) / 32768.0
}

/// A float as a 16-bit code: `round(x · 32768)` (halves away from zero), clamped to
/// [-32768, 32767]; NaN becomes 0.
pub fn to_i16(x: f32) -> i16 {
    // x · 32768 is exact in f32 (a power-of-two scale); `as` saturates at the i16 bounds,
    // which is the clamp, and maps NaN to 0.
    (x * 32768.0).round() as i16
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_code_survives_the_round_trip() {
        for k in i16::MIN..=i16::MAX {
            assert_eq!(to_i16(to_f32(k)), k);
        }
    }

    #[test]
    fn rounds_to_the_nearest_code_and_clamps() {
        let lsb = 1.0 / 32768.0;
        assert_eq!(to_i16(1.0), 32767);
        assert_eq!(to_i16(-1.0), -32768);
        assert_eq!(to_i16(2.0), 32767);
        assert_eq!(to_i16(-2.0), -32768);
        assert_eq!(to_i16(f32::NAN), 0);
        assert_eq!(to_i16(0.6 * lsb), 1);
        assert_eq!(to_i16(0.4 * lsb), 0);
        assert_eq!(to_i16(-1.6 * lsb), -2);
        assert_eq!(to_i16(-1.4 * lsb), -1);
        assert_eq!(to_i16(0.5 * lsb), 1);
        assert_eq!(to_i16(-0.5 * lsb), -1);
    }

    #[test]
    fn sixteen_bit_reduction_is_the_same_grid_and_rounding() {
        // The channel step's `bits = 16` and the 16-bit writer must quantise alike.
        let x: Vec<f32> = (-40_000..=40_000)
            .map(|i| i as f32 * 0.3 / 32768.0)
            .collect();
        let reduced = crate::dsp::channel::bit_reduce(&x, 16);
        for (&a, &b) in x.iter().zip(&reduced) {
            assert_eq!(b, to_f32(to_i16(a)), "{a}");
        }
    }
}
