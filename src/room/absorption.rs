//! RT60 of a shoebox room with uniform absorption, by Sabine's and Eyring's formulas, and
//! their inverses (the absorption coefficient that gives a wanted RT60).
//!
//! With volume `V`, wall surface `S`, absorption `α` and speed of sound `c`:
//! - Sabine: `T = K V / (S α)`;
//! - Eyring: `T = K V / (-S ln(1 - α))`;
//!
//! where `K = 24 ln(10) / c` s/m (the time for a diffuse field to lose 60 dB, i.e. a factor
//! 10⁶ in energy). At c = 343 m/s, `K` = 0.1611, the familiar "0.161". These functions use
//! `24 ln(10) / c` exactly for the `c` they are given.
//!
//! The two formulas behave differently at the ends of (0, 1]:
//! - Sabine's `T` falls as `1/α` and is smallest at `α = 1`, where it is still
//!   `T_min = K V / S > 0`: no absorption gives an RT60 below `T_min`.
//! - Eyring's `T` falls to 0 as `α → 1` (`-ln(1 - α) → ∞`; a room with fully absorbing
//!   walls has no reverberation): every RT60 > 0 has an absorption in (0, 1), namely
//!   `α = 1 - exp(-K V / (S T))`.
//!
//! Both grow without bound as `α → 0`, so any long RT60 is reachable.
//!
//! Both formulas assume a diffuse sound field. An image-source simulation of a shoebox with
//! specular walls is not diffuse: its decay starts at Eyring's rate and then slows, so its
//! measured T30 runs 10 to 65 % longer than Eyring's figure, the more the more unequal the
//! room's sides. [`image_source_rt60`] predicts what a pure image-source simulation
//! ([`super::LateField::Images`]) shows, and [`alpha_for_rt60_image_source`] is the inverse
//! to use when such a room must show a wanted RT60. The default simulation
//! ([`super::LateField::Diffuse`]) replaces the late images by a tail decaying at Eyring's
//! rate, so its measured RT60 is Eyring's and [`alpha_for_rt60_eyring`] is its inverse.

use super::{RoomError, check_dims, surface_m2, volume_m3};

/// `K = 24 ln(10) / c` in s/m: Sabine's constant for the speed of sound `c_m_s`.
pub fn sabine_constant(c_m_s: f64) -> f64 {
    24.0 * std::f64::consts::LN_10 / c_m_s
}

fn check_c(c_m_s: f64) -> Result<(), RoomError> {
    if c_m_s.is_finite() && c_m_s > 0.0 {
        Ok(())
    } else {
        Err(RoomError::Parameter {
            name: "c_m_s",
            value: c_m_s,
            expected: "a finite speed of sound > 0 m/s",
        })
    }
}

fn check_alpha(alpha: f64) -> Result<(), RoomError> {
    if alpha > 0.0 && alpha <= 1.0 {
        Ok(())
    } else {
        Err(RoomError::Absorption(alpha))
    }
}

/// `K V / S` in seconds: Sabine's RT60 at `α = 1` for the room `dims_m`.
fn kv_over_s(dims_m: [f64; 3], c_m_s: f64) -> Result<f64, RoomError> {
    check_dims(dims_m)?;
    check_c(c_m_s)?;
    Ok(sabine_constant(c_m_s) * volume_m3(dims_m) / surface_m2(dims_m))
}

/// Sabine's RT60 in seconds, `24 ln(10) V / (c S α)`.
///
/// # Errors
/// [`RoomError::Dimension`], [`RoomError::Absorption`] or [`RoomError::Parameter`] (c).
pub fn sabine_rt60(dims_m: [f64; 3], alpha: f64, c_m_s: f64) -> Result<f64, RoomError> {
    check_alpha(alpha)?;
    Ok(kv_over_s(dims_m, c_m_s)? / alpha)
}

/// Eyring's RT60 in seconds, `24 ln(10) V / (-c S ln(1 - α))`; 0 at `α = 1`.
///
/// # Errors
/// [`RoomError::Dimension`], [`RoomError::Absorption`] or [`RoomError::Parameter`] (c).
pub fn eyring_rt60(dims_m: [f64; 3], alpha: f64, c_m_s: f64) -> Result<f64, RoomError> {
    check_alpha(alpha)?;
    // -ln(1 - α) computed as -ln_1p(-α), accurate for small α; +inf at α = 1 gives 0.
    Ok(kv_over_s(dims_m, c_m_s)? / -(-alpha).ln_1p())
}

fn check_t60(formula: &'static str, t60_s: f64) -> Result<(), RoomError> {
    if t60_s.is_finite() && t60_s > 0.0 {
        Ok(())
    } else {
        Err(RoomError::Rt60Unreachable {
            formula,
            t60_s,
            reason: "an RT60 must be a finite time > 0 s".into(),
        })
    }
}

/// The absorption coefficient that gives `t60_s` by Sabine's formula:
/// `α = 24 ln(10) V / (c S T)`.
///
/// # Errors
/// [`RoomError::Rt60Unreachable`] when `t60_s` is not a finite time > 0, or is shorter than
/// Sabine's floor `24 ln(10) V / (c S)` (the RT60 at `α = 1`, which the message gives);
/// [`RoomError::Dimension`] or [`RoomError::Parameter`] (c) for bad input.
pub fn alpha_for_rt60_sabine(dims_m: [f64; 3], t60_s: f64, c_m_s: f64) -> Result<f64, RoomError> {
    let floor = kv_over_s(dims_m, c_m_s)?;
    check_t60("Sabine's formula", t60_s)?;
    let alpha = floor / t60_s;
    if alpha > 1.0 {
        return Err(RoomError::Rt60Unreachable {
            formula: "Sabine's formula",
            t60_s,
            reason: format!(
                "even fully absorbing walls (alpha = 1) give {floor:.4} s in this {:.1} m³ room",
                volume_m3(dims_m)
            ),
        });
    }
    Ok(alpha)
}

/// The absorption coefficient that gives `t60_s` by Eyring's formula:
/// `α = 1 - exp(-24 ln(10) V / (c S T))`, in (0, 1) for every `T > 0`.
///
/// # Errors
/// [`RoomError::Rt60Unreachable`] when `t60_s` is not a finite time > 0, or so long that
/// the absorption rounds to 0; [`RoomError::Dimension`] or [`RoomError::Parameter`] (c).
pub fn alpha_for_rt60_eyring(dims_m: [f64; 3], t60_s: f64, c_m_s: f64) -> Result<f64, RoomError> {
    let kvs = kv_over_s(dims_m, c_m_s)?;
    check_t60("Eyring's formula", t60_s)?;
    let alpha = -(-kvs / t60_s).exp_m1();
    if alpha <= 0.0 {
        return Err(RoomError::Rt60Unreachable {
            formula: "Eyring's formula",
            t60_s,
            reason: "so long that the absorption coefficient rounds to 0".into(),
        });
    }
    Ok(alpha)
}

/// How far (in metres) sound travels, times `-ln(1 - α)`, while the image-source decay of a
/// room shaped `dims_m` falls by 60 dB, measured as T30 (see [`image_source_rt60`]).
///
/// In the image-source model every image of the room's mirror lattice stands in its own cell
/// of volume `V`, so images at distance `d..d + dd` number `4π d² dd / V`; each carries
/// energy `(1 - α)ⁿ / (4π d)²`, and an image in direction `u` has crossed
/// `n ≈ d Σ |u_i| / L_i` walls. The energy arriving per metre of travel is then
/// `(1 / 4πV) · mean over directions of exp(-κ w(u) d)`, `κ = -ln(1 - α)`,
/// `w(u) = Σ |u_i| / L_i`, and the Schroeder decay curve from time `t` is
/// `EDC(t) ∝ mean_u exp(-κ c w t) / w`. Its initial rate `mean(w) = S / 4V` is Eyring's;
/// later, directions that cross few walls (along the longest dimension) take over and the
/// decay slows, so the T30 exceeds Eyring's figure: by 11 % in a cube-like room, by 60 % in
/// a hall much wider than high. (Lehmann & Johansson, JASA 124(1), 2008, analyse the same
/// effect and predict the decay curve of image-source responses in closed form; the
/// quadrature below is ours.) `EDC` depends on `κ c t` only, so the T30 is this length
/// divided by `κ c`.
fn t30_travel_m(dims_m: [f64; 3]) -> f64 {
    const N: usize = 64; // 64 × 64 directions over one octant (the integrand is symmetric)
    const STEPS: usize = 512;
    let mut w = Vec::with_capacity(N * N);
    for i in 0..N {
        let uz = (i as f64 + 0.5) / N as f64; // uniform in [0, 1]: uniform on the sphere
        let r = (1.0 - uz * uz).sqrt();
        for j in 0..N {
            let phi = (j as f64 + 0.5) / N as f64 * std::f64::consts::FRAC_PI_2;
            w.push(r * phi.cos() / dims_m[0] + r * phi.sin() / dims_m[1] + uz / dims_m[2]);
        }
    }
    // Every w is at least 1 / L_max (Σ|u_i| >= 1), so the curve is below -35 dB by
    // x = 3.5 ln(10) L_max.
    let l_max = dims_m.iter().copied().fold(0.0, f64::max);
    let dx = 1.05 * 3.5 * std::f64::consts::LN_10 * l_max / STEPS as f64;
    let step: Vec<f64> = w.iter().map(|&w| (-w * dx).exp()).collect();
    let mut term: Vec<f64> = w.iter().map(|&w| 1.0 / w).collect();
    let start: f64 = term.iter().sum();
    let (mut n, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for k in 0..=STEPS {
        let db = 10.0 * (term.iter().sum::<f64>() / start).log10();
        if (-35.0..=-5.0).contains(&db) {
            let x = k as f64 * dx;
            (n, sx, sy, sxx, sxy) = (n + 1.0, sx + x, sy + db, sxx + x * x, sxy + x * db);
        }
        for (t, s) in term.iter_mut().zip(&step) {
            *t *= s;
        }
    }
    let slope = (n * sxy - sx * sy) / (n * sxx - sx * sx); // dB per metre
    -60.0 / slope
}

/// The RT60 (as T30: the -5 to -35 dB part of the Schroeder decay curve, ISO 3382-1) that an
/// image-source simulation of this room actually shows, in seconds: Eyring's figure times
/// a factor of the room's shape alone, 1.1 to 1.7 for ordinary rooms (see the derivation
/// on the private helper in the source). It ignores the direct sound, which moves the
/// measured -5 dB point a little later and lengthens a measured T30 by a few per cent.
///
/// # Errors
/// [`RoomError::Dimension`], [`RoomError::Absorption`] or [`RoomError::Parameter`] (c).
pub fn image_source_rt60(dims_m: [f64; 3], alpha: f64, c_m_s: f64) -> Result<f64, RoomError> {
    check_alpha(alpha)?;
    check_dims(dims_m)?;
    check_c(c_m_s)?;
    Ok(t30_travel_m(dims_m) / (c_m_s * -(-alpha).ln_1p()))
}

/// The absorption coefficient whose image-source simulation decays with T30 = `t60_s`
/// (the inverse of [`image_source_rt60`]): `α = 1 - exp(-X / (c T))` with `X` the room
/// shape's decay length. Use this, not the Eyring inverse, when a simulated room should
/// show the RT60 asked for. Every `T > 0` is reachable, as with Eyring.
///
/// # Errors
/// [`RoomError::Rt60Unreachable`] when `t60_s` is not a finite time > 0 or so long that
/// the absorption rounds to 0; [`RoomError::Dimension`] or [`RoomError::Parameter`] (c).
pub fn alpha_for_rt60_image_source(
    dims_m: [f64; 3],
    t60_s: f64,
    c_m_s: f64,
) -> Result<f64, RoomError> {
    check_dims(dims_m)?;
    check_c(c_m_s)?;
    check_t60("the image-source decay", t60_s)?;
    let alpha = -(-t30_travel_m(dims_m) / (c_m_s * t60_s)).exp_m1();
    if alpha <= 0.0 {
        return Err(RoomError::Rt60Unreachable {
            formula: "the image-source decay",
            t60_s,
            reason: "so long that the absorption coefficient rounds to 0".into(),
        });
    }
    Ok(alpha)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn image_source_decay_is_never_faster_than_eyring() {
        // The Schroeder curve's rate is a weighted harmonic mean of the direction rates w,
        // weighted towards small w, so it is at most their plain mean, Eyring's rate: the
        // factor is >= 1, and grows with the room's disproportion.
        let factor = |d: [f64; 3]| {
            image_source_rt60(d, 0.3, 343.0).unwrap() / eyring_rt60(d, 0.3, 343.0).unwrap()
        };
        let (cube, hall) = (factor([4.0, 4.0, 4.0]), factor([20.0, 15.0, 6.0]));
        assert!((1.0..1.2).contains(&cube), "{cube}");
        assert!(hall > cube + 0.3, "{hall}");
        let a = alpha_for_rt60_image_source([6.0, 4.0, 3.0], 0.6, 343.0).unwrap();
        assert!((image_source_rt60([6.0, 4.0, 3.0], a, 343.0).unwrap() - 0.6).abs() < 1e-12);
    }

    #[test]
    fn constant_is_the_familiar_0_161_at_343() {
        // 24 ln 10 / 343 = 55.262 / 343 = 0.16111 (the textbook Sabine constant 0.161 s/m).
        assert!((sabine_constant(343.0) - 0.16111).abs() < 1e-5);
    }

    #[test]
    fn eyring_is_zero_with_fully_absorbing_walls_and_sabine_is_not() {
        let d = [5.0, 4.0, 3.0];
        assert_eq!(eyring_rt60(d, 1.0, 343.0).unwrap(), 0.0);
        // V/S = 60/94: Sabine at α = 1 is 0.16111·60/94 = 0.10284 s.
        assert!((sabine_rt60(d, 1.0, 343.0).unwrap() - 0.10284).abs() < 1e-5);
    }
}
