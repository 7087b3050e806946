//! Simulated rooms: impulse responses of shoebox (rectangular) rooms by the image-source
//! method (Allen & Berkley, J. Acoust. Soc. Am. 65(4), 1979) with a diffuse late field, the
//! RT60 formulas of Sabine and Eyring with their inverses, placement of a source and a
//! microphone from six uniform numbers, and a bounded thread-safe cache of responses.
//!
//! Eyring's and Sabine's formulas assume a diffuse field, which a shoebox with specular walls
//! is not: its pure image-source response decays more slowly than Eyring predicts. Real
//! rooms scatter sound and their late field is close to diffuse, so by default a response
//! is exact images up to a transition time and seeded noise decaying at Eyring's rate after
//! it ([`LateField::Diffuse`], see [`late`]); its measured RT60 is Eyring's, so a room made
//! with [`absorption::alpha_for_rt60_eyring`] shows the RT60 asked for. The pure image
//! response stays available ([`LateField::Images`]); for it, take the absorption from
//! [`absorption::alpha_for_rt60_image_source`].
//!
//! Pure library code: no I/O, no printing. Lengths are metres, times seconds, rates Hz; every
//! field and argument carries its unit in its name.
//!
//! ```
//! use retake::room::{Placement, Shoebox, direct_delay_s, impulse_response};
//!
//! let room = Shoebox { dims_m: [6.0, 4.0, 3.0], absorption: 0.3 };
//! let at = Placement { source_m: [2.0, 2.0, 1.5], mic_m: [3.0, 2.0, 1.5] };
//! let h = impulse_response(&room, &at, 16_000, 0.25, 343.0)?;
//! assert_eq!(h.len(), 4_000);
//! // The direct path is 1 m long: it arrives after 1/343 s, i.e. at sample 46.65.
//! let peak = (0..h.len()).max_by(|&a, &b| h[a].abs().total_cmp(&h[b].abs())).unwrap();
//! assert_eq!(peak, (direct_delay_s(&at, 343.0) * 16_000.0).round() as usize);
//! # Ok::<(), retake::room::RoomError>(())
//! ```

pub mod absorption;
mod cache;
pub mod ism;
pub mod late;

pub use cache::RoomCache;
pub use ism::{
    FD_HALF_WIDTH, HIGHPASS_HZ, IrParams, LateField, direct_delay_s, impulse_response,
    impulse_response_with,
};

/// The speed of sound used when a caller has no better figure: 343 m/s (dry air near 20 °C).
pub const SPEED_OF_SOUND_M_S: f64 = 343.0;

/// Source and microphone closer than this (metres) count as the same point: the direct
/// path's amplitude 1/(4πr) has no finite value there.
pub const MIN_DISTANCE_M: f64 = 1e-3;

/// A rectangular room whose six surfaces share one absorption coefficient.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shoebox {
    /// Lengths along x, y and z in metres; each finite and > 0.
    pub dims_m: [f64; 3],
    /// Energy absorption coefficient alpha in (0, 1], the same on all six surfaces. The
    /// pressure reflection coefficient of a wall is sqrt(1 - alpha).
    pub absorption: f64,
}

/// Where the source and the microphone stand, in metres from the room's corner at the
/// origin (0 <= x <= width and so on).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placement {
    /// The source (talker's mouth).
    pub source_m: [f64; 3],
    /// The microphone.
    pub mic_m: [f64; 3],
}

/// Why a room, a placement or an RT60 cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RoomError {
    /// A room dimension is not a finite length above zero.
    #[error("room dimension {axis} is {value} m: every dimension must be a finite length > 0")]
    Dimension {
        /// `x`, `y` or `z`.
        axis: char,
        /// The value given.
        value: f64,
    },
    /// The absorption coefficient is outside (0, 1].
    #[error("absorption coefficient {0} is outside (0, 1]")]
    Absorption(f64),
    /// A position lies outside the room (or is not finite).
    #[error("{what} at {axis} = {position} m is outside the room (0 to {length} m along {axis})")]
    Outside {
        /// `source` or `microphone`.
        what: &'static str,
        /// `x`, `y` or `z`.
        axis: char,
        /// The coordinate given.
        position: f64,
        /// The room's length along that axis.
        length: f64,
    },
    /// A position is inside the room but nearer a wall than the required gap.
    #[error("{what} is {distance} m from a wall along {axis}; at least {gap} m is required")]
    TooCloseToWall {
        /// `source` or `microphone`.
        what: &'static str,
        /// `x`, `y` or `z`.
        axis: char,
        /// Its distance to the nearer of the two walls across that axis.
        distance: f64,
        /// The gap asked for.
        gap: f64,
    },
    /// The room is too small to keep the wall gap on both sides.
    #[error("the room is {length} m along {axis}: too small to keep {gap} m from both walls")]
    RoomTooSmall {
        /// `x`, `y` or `z`.
        axis: char,
        /// The room's length along that axis.
        length: f64,
        /// The gap asked for.
        gap: f64,
    },
    /// Source and microphone (nearly) coincide.
    #[error(
        "source and microphone are {distance} m apart: they must be at least {MIN_DISTANCE_M} m \
         apart (the direct path 1/(4πr) is unbounded at r = 0)"
    )]
    Coincident {
        /// Their distance.
        distance: f64,
    },
    /// No absorption coefficient in (0, 1] gives the requested RT60 by the named formula.
    #[error("no absorption in (0, 1] gives RT60 {t60_s} s by {formula}: {reason}")]
    Rt60Unreachable {
        /// `Sabine's formula`, `Eyring's formula` or `the image-source decay`.
        formula: &'static str,
        /// The RT60 asked for.
        t60_s: f64,
        /// Why, with the bound that applies.
        reason: String,
    },
    /// The response would need more images than [`ism::MAX_IMAGES`] (a long pure-image
    /// response in a small, barely absorbing room).
    #[error(
        "the response needs about {images:.1e} images, more than the limit of {limit:.0e}: \
         shorten the response or raise the absorption"
    )]
    TooManyImages {
        /// Images needed, estimated as 4π R³ / (3 V) for the response's reach R.
        images: f64,
        /// [`ism::MAX_IMAGES`].
        limit: f64,
    },
    /// A numeric parameter is out of its range.
    #[error("{name} = {value}: expected {expected}")]
    Parameter {
        /// The parameter's name.
        name: &'static str,
        /// The value given.
        value: f64,
        /// What was expected.
        expected: &'static str,
    },
}

const AXES: [char; 3] = ['x', 'y', 'z'];

impl Shoebox {
    /// Volume in cubic metres.
    pub fn volume_m3(&self) -> f64 {
        volume_m3(self.dims_m)
    }

    /// Total surface of the six walls in square metres.
    pub fn surface_m2(&self) -> f64 {
        surface_m2(self.dims_m)
    }

    /// The pressure reflection coefficient of every wall, sqrt(1 - alpha).
    pub fn reflection(&self) -> f64 {
        (1.0 - self.absorption).max(0.0).sqrt()
    }

    /// Checks the dimensions and the absorption coefficient.
    ///
    /// # Errors
    /// [`RoomError::Dimension`] or [`RoomError::Absorption`].
    pub fn check(&self) -> Result<(), RoomError> {
        check_dims(self.dims_m)?;
        if !(self.absorption > 0.0 && self.absorption <= 1.0) {
            return Err(RoomError::Absorption(self.absorption));
        }
        Ok(())
    }
}

pub(crate) fn volume_m3(dims_m: [f64; 3]) -> f64 {
    dims_m[0] * dims_m[1] * dims_m[2]
}

pub(crate) fn surface_m2(dims_m: [f64; 3]) -> f64 {
    let [a, b, c] = dims_m;
    2.0 * (a * b + b * c + a * c)
}

pub(crate) fn check_dims(dims_m: [f64; 3]) -> Result<(), RoomError> {
    for (axis, &value) in AXES.iter().zip(&dims_m) {
        if !(value.is_finite() && value > 0.0) {
            return Err(RoomError::Dimension { axis: *axis, value });
        }
    }
    Ok(())
}

/// Checks that source and microphone are inside `room`, each at least `gap_m` from every
/// wall (a gap of 0 allows a point on a wall), and at least [`MIN_DISTANCE_M`] apart.
///
/// # Errors
/// [`RoomError::Dimension`] for a bad room, [`RoomError::Parameter`] for a negative gap,
/// [`RoomError::Outside`], [`RoomError::TooCloseToWall`] or [`RoomError::Coincident`].
pub fn check_placement(room: &Shoebox, at: &Placement, gap_m: f64) -> Result<(), RoomError> {
    check_dims(room.dims_m)?;
    if !(gap_m.is_finite() && gap_m >= 0.0) {
        return Err(RoomError::Parameter {
            name: "gap_m",
            value: gap_m,
            expected: "a finite distance >= 0 m",
        });
    }
    for (what, p) in [("source", at.source_m), ("microphone", at.mic_m)] {
        for k in 0..3 {
            let (position, length, axis) = (p[k], room.dims_m[k], AXES[k]);
            if !(position.is_finite() && (0.0..=length).contains(&position)) {
                return Err(RoomError::Outside {
                    what,
                    axis,
                    position,
                    length,
                });
            }
            let distance = position.min(length - position);
            if distance < gap_m {
                return Err(RoomError::TooCloseToWall {
                    what,
                    axis,
                    distance,
                    gap: gap_m,
                });
            }
        }
    }
    let distance = distance_m(at);
    if distance < MIN_DISTANCE_M {
        return Err(RoomError::Coincident { distance });
    }
    Ok(())
}

/// Straight-line distance from source to microphone in metres.
pub fn distance_m(at: &Placement) -> f64 {
    let d: [f64; 3] = std::array::from_fn(|k| at.source_m[k] - at.mic_m[k]);
    (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt()
}

/// Maps six uniform numbers in [0, 1) to a placement: `u[0..3]` place the source and
/// `u[3..6]` the microphone, each coordinate `gap_m + u · (length - 2 gap_m)`, so both stand
/// at least `gap_m` from every wall. The caller draws `u` from its own seeded stream; the
/// same `u` always gives the same placement.
///
/// # Errors
/// [`RoomError::Dimension`] for a bad room; [`RoomError::Parameter`] for a negative gap or a
/// `u` outside [0, 1); [`RoomError::RoomTooSmall`] when a dimension is not more than twice
/// the gap; [`RoomError::Coincident`] if the two points fall together.
pub fn place(room: &Shoebox, gap_m: f64, u: [f64; 6]) -> Result<Placement, RoomError> {
    check_dims(room.dims_m)?;
    if !(gap_m.is_finite() && gap_m >= 0.0) {
        return Err(RoomError::Parameter {
            name: "gap_m",
            value: gap_m,
            expected: "a finite distance >= 0 m",
        });
    }
    for (k, &length) in room.dims_m.iter().enumerate() {
        if length <= 2.0 * gap_m {
            return Err(RoomError::RoomTooSmall {
                axis: AXES[k],
                length,
                gap: gap_m,
            });
        }
    }
    if let Some(&bad) = u.iter().find(|v| !(0.0..1.0).contains(*v)) {
        return Err(RoomError::Parameter {
            name: "placement draw u",
            value: bad,
            expected: "a number in [0, 1)",
        });
    }
    let at_u = |k: usize, v: f64| gap_m + v * (room.dims_m[k] - 2.0 * gap_m);
    let at = Placement {
        source_m: std::array::from_fn(|k| at_u(k, u[k])),
        mic_m: std::array::from_fn(|k| at_u(k, u[k + 3])),
    };
    let distance = distance_m(&at);
    if distance < MIN_DISTANCE_M {
        return Err(RoomError::Coincident { distance });
    }
    Ok(at)
}
