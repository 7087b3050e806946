//! The image-source method for a shoebox room (Allen & Berkley 1979), with a diffuse late
//! field after a transition time by default ([`LateField`], [`super::late`]).
//!
//! Mirroring the source in the six walls, and the mirrors in the walls again, fills space
//! with image sources; the sound at the microphone is the sum of every image's spherical
//! wave. Along one axis of length `L`, with the source at `s`, the images stand at
//! `(1 - 2p)·s + 2mL` for `p` in {0, 1} and every integer `m`; reaching the microphone from
//! that image crosses the wall at 0 `|m - p|` times and the wall at `L` `|m|` times. An
//! image of the three axes together has `n = Σ (|m - p| + |m|)` reflections, distance `d`
//! to the microphone, and contributes `βⁿ / (4π d)` at delay `d / c`, with `β = sqrt(1 - α)`
//! the pressure reflection coefficient shared by all walls.
//!
//! Choices made here:
//! - **Fractional delay.** Each image is placed at its exact delay with a Hann-windowed sinc
//!   spanning ±[`FD_HALF_WIDTH`] samples ([`FD_HALF_WIDTH`]·2 taps, band edge at Nyquist),
//!   never rounded to a sample. The kernel is tabulated at 1/[`FD_STEPS`] sample and
//!   interpolated linearly between table rows (error below 2·10⁻⁶ of a tap).
//! - **Late field.** With [`LateField::Images`] every image whose delay falls inside the
//!   response (plus the kernel's half width) is included, whatever its order. With
//!   [`LateField::Diffuse`] (the default) only those up to the end of the crossfade after
//!   the transition time [`super::late::transition_s`] (counted from the direct sound);
//!   the diffuse tail follows. The
//!   diffuse tail is skipped, leaving pure images, when the transition does not fall
//!   inside the response or the walls absorb everything (alpha = 1: Eyring's RT60 is 0).
//! - **Length.** The response is `max_len_s` long, or shorter: it ends once every later
//!   image is at least `floor_db` (60 dB) weaker than the direct path. An image at distance `d` has at least `d / L_max - 3` reflections
//!   (`L_max` the longest dimension), so its energy relative to the direct path is at most
//!   `(1 - α)^(d / L_max - 3)`; that bound reaches `-floor_db` at
//!   `d = L_max (3 + floor_db·ln10 / (10·(-ln(1 - α))))`. This end is never earlier than
//!   1.5 times Eyring's RT60 (the mean free path 4V/S is at most 2·L_max/3). The same end
//!   holds with the diffuse tail, which has fallen by then at least 60 dB × (1.5 - t_x/T)
//!   below its start (`T` Eyring's RT60).
//! - **DC.** Every image adds a positive pulse, so the raw response has a large DC
//!   component (the "DC build-up"). A 2nd-order Butterworth high-pass (bilinear transform,
//!   pre-warped) with its -3 dB cutoff at [`HIGHPASS_HZ`] removes it; it is causal, so the
//!   direct path stays where it is, scaled by the filter's first tap `b0` (0.989 at 16 kHz).
//! - **Cost.** About `4π R³ / (3 V)` images lie within `R = c T` metres: 2.4
//!   million for 1 s in a 72 m³ room (0.1 s in release on one core). More than
//!   [`MAX_IMAGES`] is refused rather than left to run for minutes. With the diffuse tail
//!   the images stop after 55 ms in that room (about 400 of them) and the whole second
//!   takes under a millisecond, mostly the noise and the high-pass.
//! - **Scale.** Amplitudes are physical (1/(4π d) per unit source strength): a direct path
//!   of 1 m peaks near 0.08. Callers normalise as they need.

use std::f64::consts::PI;
use std::sync::OnceLock;

use super::{Placement, RoomError, Shoebox, check_placement, late};

/// Half width of the fractional-delay kernel in samples: each image is spread over the
/// `2·FD_HALF_WIDTH` samples nearest its exact arrival time.
pub const FD_HALF_WIDTH: usize = 16;

/// Rows of the tabulated fractional-delay kernel per sample of delay.
pub const FD_STEPS: usize = 1024;

/// Default -3 dB cutoff of the DC-removing high-pass, in Hz.
pub const HIGHPASS_HZ: f64 = 40.0;

/// Most images one response may take (about 15 s of work on one core); see
/// [`RoomError::TooManyImages`].
pub const MAX_IMAGES: f64 = 4e8;

/// Default end of the response: later images are all at least this many dB below the
/// direct path.
pub const FLOOR_DB: f64 = 60.0;

/// Everything that decides a simulated response besides the room and the placement.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IrParams {
    /// Sample rate in Hz (> 0).
    pub rate: u32,
    /// Longest response in seconds; it must reach past the direct path.
    pub max_len_s: f64,
    /// Speed of sound in m/s (343 in dry air near 20 °C).
    pub c_m_s: f64,
    /// Cutoff of the DC-removing high-pass in Hz, in (0, rate/2); `None` leaves the raw sum
    /// of images (with its DC build-up).
    pub highpass_hz: Option<f64>,
    /// The response ends once every later image is at least this many dB below the direct
    /// path (> 0); `f64::INFINITY` always fills `max_len_s`.
    pub floor_db: f64,
    /// What follows the early reflections: the image sum to the end, or a diffuse tail
    /// decaying at Eyring's rate.
    pub late: LateField,
}

/// The model of the late part of a response.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum LateField {
    /// Image sources to the end. Exact for a shoebox with specular walls, but such a room
    /// never becomes diffuse: its decay slows with time and its measured RT60 runs 10 to
    /// 65 % over Eyring's (see [`super::absorption::image_source_rt60`]).
    Images,
    /// Image sources up to [`super::late::transition_s`], then seeded noise whose energy
    /// decays at Eyring's rate, level-matched and crossfaded (see [`super::late`]). The
    /// measured RT60 follows Eyring's formula, as in a real room that scatters sound.
    #[default]
    Diffuse,
}

impl IrParams {
    /// The defaults: the given rate and length, c = 343 m/s, a high-pass at
    /// [`HIGHPASS_HZ`], the response ending [`FLOOR_DB`] below the direct path, and a
    /// diffuse late field ([`LateField::Diffuse`]).
    pub fn new(rate: u32, max_len_s: f64) -> Self {
        IrParams {
            rate,
            max_len_s,
            c_m_s: super::SPEED_OF_SOUND_M_S,
            highpass_hz: Some(HIGHPASS_HZ),
            floor_db: FLOOR_DB,
            late: LateField::Diffuse,
        }
    }
}

/// Time the direct path takes from source to microphone, in seconds: distance / c. The
/// response's direct-path pulse is centred at `direct_delay_s · rate` samples (a fractional
/// position), so its largest sample is at the rounded position.
pub fn direct_delay_s(at: &Placement, c_m_s: f64) -> f64 {
    super::distance_m(at) / c_m_s
}

/// The impulse response from source to microphone, with the defaults of [`IrParams::new`]
/// but for the speed of sound `c_m_s`. See [`impulse_response_with`].
///
/// # Errors
/// As [`impulse_response_with`].
pub fn impulse_response(
    room: &Shoebox,
    at: &Placement,
    rate: u32,
    max_len_s: f64,
    c_m_s: f64,
) -> Result<Vec<f32>, RoomError> {
    impulse_response_with(
        room,
        at,
        &IrParams {
            c_m_s,
            ..IrParams::new(rate, max_len_s)
        },
    )
}

/// The impulse response from source to microphone by the image-source method, at
/// `params.rate`: `ceil(T · rate)` samples, where `T` is `max_len_s` or the time after which
/// every image is `floor_db` below the direct path, whichever is shorter (see the module
/// notes). Sample `i` is time `i / rate` after the source fires. With
/// [`LateField::Diffuse`] the part after the transition time is a diffuse tail, the same
/// for the same parameters on every run and thread.
///
/// # Errors
/// [`RoomError::Dimension`] / [`RoomError::Absorption`] for a bad room;
/// [`RoomError::Outside`] / [`RoomError::Coincident`] for a bad placement;
/// [`RoomError::TooManyImages`] for a response beyond [`MAX_IMAGES`];
/// [`RoomError::Parameter`] for a zero rate, a speed of sound that is not finite and
/// positive, a high-pass cutoff outside (0, rate/2), a floor that is not positive, or a
/// `max_len_s` that does not reach past the direct path.
pub fn impulse_response_with(
    room: &Shoebox,
    at: &Placement,
    params: &IrParams,
) -> Result<Vec<f32>, RoomError> {
    room.check()?;
    check_placement(room, at, 0.0)?;
    let fs = f64::from(params.rate);
    let bad = |name, value, expected| {
        Err(RoomError::Parameter {
            name,
            value,
            expected,
        })
    };
    if params.rate == 0 {
        return bad("rate", 0.0, "a sample rate > 0 Hz");
    }
    if !(params.c_m_s.is_finite() && params.c_m_s > 0.0) {
        return bad("c_m_s", params.c_m_s, "a finite speed of sound > 0 m/s");
    }
    if let Some(fc) = params.highpass_hz
        && !(fc > 0.0 && fc < fs / 2.0)
    {
        return bad(
            "highpass_hz",
            fc,
            "a cutoff between 0 and half the sample rate",
        );
    }
    if params.floor_db.is_nan() || params.floor_db <= 0.0 {
        return bad("floor_db", params.floor_db, "a level > 0 dB");
    }
    let direct_s = direct_delay_s(at, params.c_m_s);
    if !(params.max_len_s.is_finite() && params.max_len_s > direct_s) {
        return bad(
            "max_len_s",
            params.max_len_s,
            "a finite length in seconds longer than the direct-path delay",
        );
    }

    let c = params.c_m_s;
    let l_max = room.dims_m.iter().copied().fold(0.0, f64::max);
    let kappa = -(1.0 - room.absorption).ln(); // +inf at alpha = 1
    let end_m = l_max * (3.0 + params.floor_db * std::f64::consts::LN_10 / (10.0 * kappa));
    let len_s = params.max_len_s.min(end_m / c);
    let len = ((len_s * fs).ceil() as usize).max(1);
    let mut out = vec![0.0f64; len];
    // The diffuse tail needs Eyring's RT60 > 0 (alpha < 1) and a join inside the response.
    let eyring_s = super::absorption::eyring_rt60(room.dims_m, room.absorption, c)?;
    let join = match params.late {
        LateField::Images => None,
        LateField::Diffuse if eyring_s > 0.0 => {
            late::Join::for_room(room.dims_m, direct_s, fs, len)
        }
        LateField::Diffuse => None,
    };
    // Images whose kernel still touches the last sample that needs them.
    let images_end = join.map_or(len, |j| j.images_end());
    let reach_m = (images_end - 1 + FD_HALF_WIDTH) as f64 / fs * c;
    // One image per room-sized cell of the mirror lattice.
    let images = 4.0 / 3.0 * PI * reach_m.powi(3) / room.volume_m3();
    if images > MAX_IMAGES {
        return Err(RoomError::TooManyImages {
            images,
            limit: MAX_IMAGES,
        });
    }
    add_images(room, at, c, fs, reach_m, &mut out);
    if let Some(join) = join {
        let seed = late::tail_seed(room, at, params.rate, c);
        late::add_diffuse_tail(&mut out, join, fs, eyring_s, seed);
    }
    if let Some(fc) = params.highpass_hz {
        highpass(&mut out, fc, fs);
    }
    Ok(out.into_iter().map(|v| v as f32).collect())
}

/// One axis's images: squared offset to the microphone and reflection count, sorted by
/// offset, all within `reach_m`.
fn axis_images(length: f64, src: f64, mic: f64, reach_m: f64) -> Vec<(f64, u32)> {
    let m_max = (reach_m / (2.0 * length)).ceil() as i64 + 1;
    let mut v = Vec::with_capacity((4 * m_max + 2) as usize);
    for m in -m_max..=m_max {
        for p in 0..=1i64 {
            let x = (1 - 2 * p) as f64 * src + 2.0 * m as f64 * length;
            let d = x - mic;
            if d.abs() <= reach_m {
                v.push((d * d, ((m - p).unsigned_abs() + m.unsigned_abs()) as u32));
            }
        }
    }
    v.sort_by(|a, b| a.0.total_cmp(&b.0));
    v
}

fn add_images(room: &Shoebox, at: &Placement, c: f64, fs: f64, reach_m: f64, out: &mut [f64]) {
    let [xs, ys, zs] =
        std::array::from_fn(|k| axis_images(room.dims_m[k], at.source_m[k], at.mic_m[k], reach_m));
    let max_n: u32 = [&xs, &ys, &zs]
        .iter()
        .map(|v| v.iter().map(|e| e.1).max().unwrap_or(0))
        .sum();
    let beta = room.reflection();
    let mut beta_pow = Vec::with_capacity(max_n as usize + 1);
    let mut b = 1.0f64;
    for _ in 0..=max_n {
        beta_pow.push(b);
        b *= beta;
    }
    let table = kernel_table();
    let width = 2 * FD_HALF_WIDTH;
    let samples_per_m = fs / c;
    let r2 = reach_m * reach_m;
    let len = out.len() as i64;
    for &(dx2, nx) in &xs {
        if dx2 > r2 {
            break;
        }
        for &(dy2, ny) in &ys {
            let dxy2 = dx2 + dy2;
            if dxy2 > r2 {
                break;
            }
            for &(dz2, nz) in &zs {
                let d2 = dxy2 + dz2;
                if d2 > r2 {
                    break;
                }
                let gain = beta_pow[(nx + ny + nz) as usize];
                if gain == 0.0 {
                    continue;
                }
                let d = d2.sqrt();
                let amp = gain / (4.0 * PI * d);
                // Kernel taps cover samples floor(t) - N + 1 ..= floor(t) + N.
                let t = d * samples_per_m;
                let whole = t.floor();
                let pos = (t - whole) * FD_STEPS as f64;
                let row = (pos as usize).min(FD_STEPS - 1);
                let w1 = pos - row as f64;
                let (a0, a1) = (amp * (1.0 - w1), amp * w1);
                let k0 = &table[row * width..(row + 1) * width];
                let k1 = &table[(row + 1) * width..(row + 2) * width];
                let first = whole as i64 - FD_HALF_WIDTH as i64 + 1;
                if first >= 0 && first + width as i64 <= len {
                    let dst = &mut out[first as usize..first as usize + width];
                    for ((o, &h0), &h1) in dst.iter_mut().zip(k0).zip(k1) {
                        *o += a0 * h0 + a1 * h1;
                    }
                } else {
                    for j in 0..width {
                        let i = first + j as i64;
                        if (0..len).contains(&i) {
                            out[i as usize] += a0 * k0[j] + a1 * k1[j];
                        }
                    }
                }
            }
        }
    }
}

/// The Hann-windowed sinc kernel for fractional delays `f = r / FD_STEPS`, `r` in
/// `0..=FD_STEPS`: row `r`, tap `j` is `sinc(x)·(1 + cos(πx/N))/2` at `x = j - N + 1 - f`,
/// `N` = [`FD_HALF_WIDTH`].
fn kernel_table() -> &'static [f64] {
    static TABLE: OnceLock<Vec<f64>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let n = FD_HALF_WIDTH as f64;
        let width = 2 * FD_HALF_WIDTH;
        let mut t = Vec::with_capacity((FD_STEPS + 1) * width);
        for r in 0..=FD_STEPS {
            let f = r as f64 / FD_STEPS as f64;
            for j in 0..width {
                let x = j as f64 - n + 1.0 - f;
                let sinc = if x == 0.0 {
                    1.0
                } else {
                    (PI * x).sin() / (PI * x)
                };
                let window = if x.abs() >= n {
                    0.0
                } else {
                    0.5 * (1.0 + (PI * x / n).cos())
                };
                t.push(sinc * window);
            }
        }
        t
    })
}

/// The 2nd-order Butterworth high-pass by the bilinear transform with the cutoff
/// pre-warped: `[b0, b1, b2, a1, a2]` of `y = b0 x + b1 x' + b2 x'' - a1 y' - a2 y''`.
pub fn highpass_coefficients(cutoff_hz: f64, rate_hz: f64) -> [f64; 5] {
    let k = (PI * cutoff_hz / rate_hz).tan();
    let q = std::f64::consts::SQRT_2;
    let norm = 1.0 / (1.0 + q * k + k * k);
    [
        norm,
        -2.0 * norm,
        norm,
        2.0 * (k * k - 1.0) * norm,
        (1.0 - q * k + k * k) * norm,
    ]
}

fn highpass(x: &mut [f64], cutoff_hz: f64, rate_hz: f64) {
    let [b0, b1, b2, a1, a2] = highpass_coefficients(cutoff_hz, rate_hz);
    let (mut x1, mut x2, mut y1, mut y2) = (0.0, 0.0, 0.0, 0.0);
    for v in x.iter_mut() {
        let x0 = *v;
        let y0 = b0 * x0 + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2;
        (x2, x1, y2, y1) = (x1, x0, y1, y0);
        *v = y0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kernel_rows_sum_to_one_and_peak_at_the_delay() {
        // A windowed sinc with its band edge at Nyquist passes DC with gain close to 1
        // (sum of sinc(k - f) over all k is exactly 1; the window costs a little).
        let t = kernel_table();
        let width = 2 * FD_HALF_WIDTH;
        for r in [0, 1, 256, 512, 900, FD_STEPS] {
            let row = &t[r * width..(r + 1) * width];
            let sum: f64 = row.iter().sum();
            assert!((sum - 1.0).abs() < 0.01, "row {r}: {sum}");
        }
        // f = 0: a unit pulse at tap N - 1 (x = 0), zeros elsewhere.
        let row0 = &t[..width];
        assert!((row0[FD_HALF_WIDTH - 1] - 1.0).abs() < 1e-12);
        assert!(
            row0.iter()
                .enumerate()
                .all(|(j, &v)| j == FD_HALF_WIDTH - 1 || v.abs() < 1e-12)
        );
    }

    #[test]
    fn highpass_has_zero_dc_and_half_power_at_cutoff() {
        // Butterworth: |H(fc)|² = 1/2 by design; H(1) = 0 since b0 + b1 + b2 = 0.
        let [b0, b1, b2, a1, a2] = highpass_coefficients(40.0, 16_000.0);
        assert!((b0 + b1 + b2).abs() < 1e-15);
        let w = 2.0 * PI * 40.0 / 16_000.0;
        let h = |b: [f64; 3], w: f64| {
            let (re, im) = (
                b[0] + b[1] * w.cos() + b[2] * (2.0 * w).cos(),
                -(b[1] * w.sin() + b[2] * (2.0 * w).sin()),
            );
            re * re + im * im
        };
        let gain2 = h([b0, b1, b2], w) / h([1.0, a1, a2], w);
        assert!((gain2 - 0.5).abs() < 1e-9, "{gain2}");
    }
}
