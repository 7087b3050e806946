//! The mel scale: conversions between frequency in Hz and pitch in mels, in the two
//! published forms.
//!
//! - **HTK**: `mel = 2595 log10(1 + hz / 700)`, inverse `hz = 700 (10^(mel / 2595) - 1)`.
//!   Roughly 1000 mel at 1000 Hz (999.99); logarithmic throughout.
//! - **Slaney**: linear below 1 kHz at `200 / 3` Hz per mel (so 1000 Hz is 15 mels), and
//!   logarithmic above, at a step of `ln(6.4) / 27` in natural-log frequency per mel (so
//!   every 27 mels above 15 multiply the frequency by 6.4: 6400 Hz is 42 mels). The two
//!   pieces meet at 1000 Hz with the same value, though not the same slope.
//!
//! Both are defined for frequencies from 0 Hz up; the Slaney form's linear part also
//! extends to negative values, the HTK form's log to frequencies above -700 Hz.
//!
//! ```
//! use retake::dsp::mel::MelScale;
//! assert!((MelScale::Htk.hz_to_mel(6300.0) - 2595.0).abs() < 1e-9);
//! assert!((MelScale::Slaney.hz_to_mel(1000.0) - 15.0).abs() < 1e-12);
//! assert!((MelScale::Slaney.mel_to_hz(42.0) - 6400.0).abs() < 1e-9);
//! ```

/// HTK: the factor in front of the logarithm (mels per decade of `1 + hz / 700`).
pub const HTK_FACTOR: f64 = 2595.0;
/// HTK: the corner frequency in Hz.
pub const HTK_CORNER_HZ: f64 = 700.0;
/// Slaney: Hz per mel on the linear part, below [`SLANEY_BREAK_HZ`].
pub const SLANEY_HZ_PER_MEL: f64 = 200.0 / 3.0;
/// Slaney: where the linear part ends and the logarithmic one starts, in Hz.
pub const SLANEY_BREAK_HZ: f64 = 1000.0;
/// Slaney: the mel value at [`SLANEY_BREAK_HZ`] (`1000 / (200 / 3)` = 15).
pub const SLANEY_BREAK_MEL: f64 = 15.0;

/// Slaney: natural-log frequency step per mel above the break, `ln(6.4) / 27`.
pub fn slaney_log_step() -> f64 {
    6.4_f64.ln() / 27.0
}

/// Which mel formula.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum MelScale {
    /// `2595 log10(1 + hz / 700)`.
    #[default]
    Htk,
    /// Linear below 1 kHz (15 mels there), logarithmic above.
    Slaney,
}

impl MelScale {
    /// `hz` in mels on this scale.
    pub fn hz_to_mel(self, hz: f64) -> f64 {
        match self {
            MelScale::Htk => htk_hz_to_mel(hz),
            MelScale::Slaney => slaney_hz_to_mel(hz),
        }
    }

    /// `mel` in Hz on this scale: the inverse of [`MelScale::hz_to_mel`].
    pub fn mel_to_hz(self, mel: f64) -> f64 {
        match self {
            MelScale::Htk => htk_mel_to_hz(mel),
            MelScale::Slaney => slaney_mel_to_hz(mel),
        }
    }
}

/// HTK mels: `2595 log10(1 + hz / 700)`.
pub fn htk_hz_to_mel(hz: f64) -> f64 {
    HTK_FACTOR * (hz / HTK_CORNER_HZ).ln_1p() / std::f64::consts::LN_10
}

/// The inverse of [`htk_hz_to_mel`]: `700 (10^(mel / 2595) - 1)`.
pub fn htk_mel_to_hz(mel: f64) -> f64 {
    HTK_CORNER_HZ * (mel / HTK_FACTOR * std::f64::consts::LN_10).exp_m1()
}

/// Slaney mels: `hz / (200 / 3)` below 1000 Hz, `15 + ln(hz / 1000) / (ln(6.4) / 27)` from
/// 1000 Hz up.
pub fn slaney_hz_to_mel(hz: f64) -> f64 {
    if hz < SLANEY_BREAK_HZ {
        // hz * 3 / 200 rather than hz / (200 / 3): exact for whole multiples.
        hz * 3.0 / 200.0
    } else {
        SLANEY_BREAK_MEL + (hz / SLANEY_BREAK_HZ).ln() / slaney_log_step()
    }
}

/// The inverse of [`slaney_hz_to_mel`]: `mel * 200 / 3` below 15 mels,
/// `1000 exp((mel - 15) ln(6.4) / 27)` from 15 up.
pub fn slaney_mel_to_hz(mel: f64) -> f64 {
    if mel < SLANEY_BREAK_MEL {
        mel * 200.0 / 3.0
    } else {
        SLANEY_BREAK_HZ * ((mel - SLANEY_BREAK_MEL) * slaney_log_step()).exp()
    }
}
