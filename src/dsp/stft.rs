//! Short-time Fourier transform (STFT) and its inverse by weighted overlap-add.
//!
//! # Framing
//! Frames are centred: frame `t` is centred on sample `t * hop` and covers samples
//! `t * hop - window_len / 2 .. t * hop - window_len / 2 + window_len`. A signal of `n > 0`
//! samples has `ceil(n / hop) + 1` frames, so the first frame is centred on the first sample
//! and the last one on or after the last sample: every sample lies between two frame
//! centres. Where a frame reaches past either end of the signal the missing samples are
//! made up by [`Edge`]: a mirror image without repeating the end sample ([`Edge::Reflect`],
//! as numpy's `pad(mode="reflect")`) or zeros ([`Edge::Zero`]). The framing and the frame
//! count are those of `scipy.signal.stft` with `boundary="zeros", padded=True`.
//!
//! # Scaling
//! Each frame's windowed samples fill the first `window_len` points of the FFT input and
//! zeros the rest; its spectrum is the plain, unscaled DFT of that: `X[t][k] = sum_m w[m]
//! x[t * hop - window_len / 2 + m] exp(-2 pi i k m / fft_len)`, for the `fft_len / 2 + 1`
//! non-negative frequencies. A sine of amplitude `A` centred on bin `k` so shows a
//! magnitude of `A * sum(w) / 2` there (`A * window_len / 4` for the Hann window).
//! `scipy.signal.stft` (default `scaling="spectrum"`) returns these values divided by
//! `sum(w)`.
//!
//! # Inverse
//! [`Stft::synthesise`] transforms each frame back, multiplies it by the same window and
//! overlap-adds, then divides every sample by the sum of the squared windows that cover it
//! (window-square normalisation), and keeps the original `n` samples. For an unmodified
//! spectrogram this gives the signal back to float rounding; for a modified one (a mask) it
//! is the signal whose STFT is nearest the modified one in the least-squares sense.
//! [`StftConfig::validate`] refuses hops for which the squared windows overlap-add to too
//! little somewhere, which would make that division unstable.
//!
//! # Plans and buffers
//! An [`Stft`] plans its forward and inverse FFTs once and owns their scratch and frame
//! buffers: keep one per thread (it is `Send` and cheaply `Clone`, sharing the plans) and
//! reuse it. [`Stft::analyse_into`] and [`Stft::synthesise_into`] reuse the caller's
//! spectrogram and output buffers; neither allocates once they have grown to size.
//!
//! # Examples
//! ```
//! use retake::dsp::stft::{Stft, StftConfig};
//!
//! let mut stft = Stft::new(StftConfig::default())?;
//! let x: Vec<f32> = (0..16_000).map(|i| (0.05 * i as f32).sin()).collect();
//! let mut spec = stft.analyse(&x);
//! assert_eq!((spec.frames(), spec.bins()), (101, 257));
//!
//! // Silence 0.50 s to 0.60 s (frame centres) at 16 kHz, then resynthesise.
//! let frames = spec.frames_within(0.5, 0.6, 16_000);
//! assert_eq!(frames, 50..60);
//! for t in frames {
//!     spec.frame_mut(t).fill(Default::default());
//! }
//! let y = stft.synthesise(&spec);
//! assert_eq!(y.len(), x.len());
//! assert!(y[8_400..9_200].iter().all(|v| v.abs() < 1e-3));
//! # Ok::<(), retake::dsp::stft::StftError>(())
//! ```

use std::fmt;
use std::ops::Range;
use std::sync::Arc;

use realfft::num_complex::Complex;
use realfft::{ComplexToReal, FftError, RealFftPlanner, RealToComplex};

/// The least fraction of their largest value that the overlap-added squared windows may
/// fall to anywhere. The inverse divides by that sum, so rounding errors grow by up to
/// the inverse square root of this fraction where the sum is smallest. For periodic Hann
/// windows the fraction is 1 (a constant sum) when the hop divides the window into three
/// or more equal parts, 0.84 at the default 400/160, 0.5 at half the window, and falls
/// below this bound past about 0.69 of the window (274 samples for 400).
pub const MIN_OVERLAP_FLOOR: f64 = 0.1;

/// The analysis (and synthesis) window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[non_exhaustive]
pub enum Window {
    /// The periodic Hann window `w[m] = 0.5 - 0.5 cos(2 pi m / window_len)`, `m` in
    /// `0..window_len` (one period of a raised cosine; `w[0] = 0`, peak 1 at the middle).
    #[default]
    Hann,
}

impl Window {
    /// The window's `len` coefficients.
    pub fn coefficients(self, len: usize) -> Vec<f32> {
        match self {
            Window::Hann => (0..len)
                .map(|m| {
                    let phase = 2.0 * std::f64::consts::PI * m as f64 / len as f64;
                    (0.5 - 0.5 * phase.cos()) as f32
                })
                .collect(),
        }
    }
}

/// How a frame is filled where it reaches past either end of the signal.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Edge {
    /// The signal mirrored about its end sample, which is not repeated: `x[-i] = x[i]` and
    /// `x[n - 1 + i] = x[n - 1 - i]` (numpy's `pad(mode="reflect")`; a signal shorter than
    /// the padding is mirrored back and forth, a one-sample signal repeated). The edge
    /// frames then show the signal's own spectrum rather than a step into silence.
    #[default]
    Reflect,
    /// Zeros (`scipy.signal.stft`'s `boundary="zeros"`).
    Zero,
}

/// The framing of an STFT, in samples.
///
/// The default suits 16 kHz speech: a 400-sample (25 ms) Hann window every 160 samples
/// (10 ms), zero-padded to a 512-point FFT (257 bins 31.25 Hz apart), reflected edges.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct StftConfig {
    /// Window length in samples (at least 1).
    pub window_len: usize,
    /// Frame step in samples (at least 1, and small enough that the squared windows
    /// overlap-add to at least [`MIN_OVERLAP_FLOOR`] of their peak everywhere).
    pub hop: usize,
    /// FFT length in samples, at least `window_len`; the frame is zero-padded to it.
    pub fft_len: usize,
    /// The window.
    pub window: Window,
    /// How frames are filled beyond the signal's ends.
    pub edge: Edge,
}

impl Default for StftConfig {
    fn default() -> Self {
        StftConfig {
            window_len: 400,
            hop: 160,
            fft_len: 512,
            window: Window::Hann,
            edge: Edge::Reflect,
        }
    }
}

/// Why an [`StftConfig`] cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StftError {
    /// A size is zero.
    #[error("STFT {field} is 0: window_len, hop and fft_len must each be at least 1")]
    ZeroSize {
        /// `window_len`, `hop` or `fft_len`.
        field: &'static str,
    },
    /// The hop is longer than the window: some samples would lie in no frame.
    #[error(
        "STFT hop {hop} is longer than the window ({window_len} samples): the samples between \
         windows would lie in no frame; use a hop of at most half the window"
    )]
    HopLongerThanWindow {
        /// The hop given.
        hop: usize,
        /// The window length given.
        window_len: usize,
    },
    /// The FFT is shorter than the window.
    #[error(
        "STFT fft_len {fft_len} is shorter than the window ({window_len} samples): a frame's \
         FFT must be at least as long as its window"
    )]
    FftShorterThanWindow {
        /// The FFT length given.
        fft_len: usize,
        /// The window length given.
        window_len: usize,
    },
    /// The windows overlap too little for a stable inverse.
    #[error(
        "STFT hop {hop} is too long for a {window_len}-sample {window:?} window: the squared \
         windows overlap-add to as little as {floor:.3} of their peak (at least {MIN_OVERLAP_FLOOR} \
         is needed to invert stably); use a hop of at most {max_hop}"
    )]
    SparseOverlap {
        /// The hop given.
        hop: usize,
        /// The window length given.
        window_len: usize,
        /// The window given.
        window: Window,
        /// The smallest overlap-added squared window over the largest.
        floor: f64,
        /// The longest hop that would be accepted for this window.
        max_hop: usize,
    },
}

impl StftConfig {
    /// Check that the configuration can be planned and inverted.
    ///
    /// # Errors
    /// A zero size ([`StftError::ZeroSize`]); a hop longer than the window
    /// ([`StftError::HopLongerThanWindow`]); an FFT shorter than the window
    /// ([`StftError::FftShorterThanWindow`]); a hop at which the squared windows
    /// overlap-add to less than [`MIN_OVERLAP_FLOOR`] of their peak somewhere
    /// ([`StftError::SparseOverlap`]; e.g. a hop equal to the window, where Hann windows
    /// meet at zero).
    pub fn validate(&self) -> Result<(), StftError> {
        for (field, value) in [
            ("window_len", self.window_len),
            ("hop", self.hop),
            ("fft_len", self.fft_len),
        ] {
            if value == 0 {
                return Err(StftError::ZeroSize { field });
            }
        }
        if self.hop > self.window_len {
            return Err(StftError::HopLongerThanWindow {
                hop: self.hop,
                window_len: self.window_len,
            });
        }
        if self.fft_len < self.window_len {
            return Err(StftError::FftShorterThanWindow {
                fft_len: self.fft_len,
                window_len: self.window_len,
            });
        }
        let squares = squared(&self.window.coefficients(self.window_len));
        let floor = overlap_floor(&squares, self.hop);
        if floor < MIN_OVERLAP_FLOOR {
            let max_hop = (1..self.hop)
                .rev()
                .find(|&h| overlap_floor(&squares, h) >= MIN_OVERLAP_FLOOR)
                .unwrap_or(1);
            return Err(StftError::SparseOverlap {
                hop: self.hop,
                window_len: self.window_len,
                window: self.window,
                floor,
                max_hop,
            });
        }
        Ok(())
    }

    /// Bins per frame: `fft_len / 2 + 1`, from 0 Hz up to the Nyquist frequency (for an
    /// even `fft_len`).
    pub fn bins(&self) -> usize {
        self.fft_len / 2 + 1
    }

    /// Frames for a signal of `signal_len` samples: `ceil(signal_len / hop) + 1`, or 0 for
    /// an empty signal.
    pub fn frames_for(&self, signal_len: usize) -> usize {
        if signal_len == 0 {
            0
        } else {
            signal_len.div_ceil(self.hop) + 1
        }
    }

    /// The time of frame `frame`'s centre in seconds, at `rate` Hz: `frame * hop / rate`.
    pub fn frame_secs(&self, frame: usize, rate: u32) -> f64 {
        (frame * self.hop) as f64 / f64::from(rate)
    }

    /// The frequency of bin `bin` in Hz, at `rate` Hz: `bin * rate / fft_len`.
    pub fn bin_hz(&self, bin: usize, rate: u32) -> f64 {
        bin as f64 * f64::from(rate) / self.fft_len as f64
    }
}

/// Squares of the window coefficients, in f64.
fn squared(window: &[f32]) -> Vec<f64> {
    window
        .iter()
        .map(|&w| f64::from(w) * f64::from(w))
        .collect()
}

/// The smallest over the largest value of the squared windows overlap-added at step
/// `hop`, away from the signal's ends: position `p` (mod `hop`) gets
/// `sum_j squares[p + j hop]`.
fn overlap_floor(squares: &[f64], hop: usize) -> f64 {
    let (mut low, mut high) = (f64::INFINITY, 0.0_f64);
    for p in 0..hop.min(squares.len()) {
        let sum: f64 = squares[p..].iter().step_by(hop).sum();
        low = low.min(sum);
        high = high.max(sum);
    }
    if hop > squares.len() {
        low = 0.0;
    }
    if high > 0.0 { low / high } else { 0.0 }
}

/// The index a position `i` (possibly outside `0..n`) reads under [`Edge::Reflect`]:
/// mirrored about the end samples, periodically with period `2 (n - 1)`.
fn reflect(i: isize, n: usize) -> usize {
    if n == 1 {
        return 0;
    }
    let period = 2 * (n as isize - 1);
    let m = i.rem_euclid(period) as usize;
    if m < n { m } else { period as usize - m }
}

/// The spectra of a signal's frames: `frames × bins` complex values, row-major, with the
/// framing they were made with and the length of the signal they came from.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Spectrogram {
    data: Vec<Complex<f32>>,
    frames: usize,
    bins: usize,
    signal_len: usize,
    config: StftConfig,
}

impl Spectrogram {
    /// Number of frames.
    pub fn frames(&self) -> usize {
        self.frames
    }

    /// Bins per frame.
    pub fn bins(&self) -> usize {
        self.bins
    }

    /// Length of the analysed signal in samples; [`Stft::synthesise`] returns this many.
    pub fn signal_len(&self) -> usize {
        self.signal_len
    }

    /// The framing the spectrogram was made with.
    pub fn config(&self) -> &StftConfig {
        &self.config
    }

    /// All values, frame after frame (`data[t * bins + k]` is bin `k` of frame `t`).
    pub fn data(&self) -> &[Complex<f32>] {
        &self.data
    }

    /// All values, mutable; the layout is that of [`Spectrogram::data`].
    pub fn data_mut(&mut self) -> &mut [Complex<f32>] {
        &mut self.data
    }

    /// The bins of frame `t`.
    ///
    /// # Panics
    /// When `t >= frames()`.
    pub fn frame(&self, t: usize) -> &[Complex<f32>] {
        assert!(t < self.frames, "frame {t} of {}", self.frames);
        &self.data[t * self.bins..(t + 1) * self.bins]
    }

    /// The bins of frame `t`, mutable.
    ///
    /// # Panics
    /// When `t >= frames()`.
    pub fn frame_mut(&mut self, t: usize) -> &mut [Complex<f32>] {
        assert!(t < self.frames, "frame {t} of {}", self.frames);
        &mut self.data[t * self.bins..(t + 1) * self.bins]
    }

    /// The frames whose centres lie in `[start_secs, end_secs)` at `rate` Hz, clipped to
    /// the frames there are (empty when the span is empty or outside the signal).
    /// Positions within a nanosample of a frame centre count as on it.
    pub fn frames_within(&self, start_secs: f64, end_secs: f64, rate: u32) -> Range<usize> {
        let per_frame = self.config.hop as f64 / f64::from(rate);
        index_range(start_secs / per_frame, end_secs / per_frame, self.frames)
    }

    /// The bins whose frequencies lie in `[low_hz, high_hz)` at `rate` Hz, clipped to the
    /// bins there are. Frequencies within a billionth of a bin of a bin's own count as on
    /// it.
    pub fn bins_within(&self, low_hz: f64, high_hz: f64, rate: u32) -> Range<usize> {
        let per_bin = f64::from(rate) / self.config.fft_len as f64;
        index_range(low_hz / per_bin, high_hz / per_bin, self.bins)
    }
}

/// The integers in `[low, high)` (positions in index units), clipped to `0..count`, with a
/// tolerance of 1e-9 so that a position computed as 3.0000000000000004 includes index 3.
fn index_range(low: f64, high: f64, count: usize) -> Range<usize> {
    let first = |x: f64| {
        let c = (x - 1e-9).ceil();
        if c.is_nan() || c <= 0.0 {
            0
        } else {
            (c.min(count as f64)) as usize
        }
    };
    let (a, b) = (first(low), first(high));
    a..b.max(a)
}

/// A planned STFT and its inverse for one [`StftConfig`], with the buffers they reuse.
#[derive(Clone)]
pub struct Stft {
    config: StftConfig,
    window: Vec<f32>,
    /// The window divided by `fft_len` (the inverse FFT's unnormalised gain).
    synthesis_window: Vec<f32>,
    forward: Arc<dyn RealToComplex<f32>>,
    inverse: Arc<dyn ComplexToReal<f32>>,
    frame: Vec<f32>,
    spectrum: Vec<Complex<f32>>,
    scratch: Vec<Complex<f32>>,
    norm: Vec<f32>,
}

impl fmt::Debug for Stft {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Stft")
            .field("config", &self.config)
            .finish_non_exhaustive()
    }
}

impl Stft {
    /// Plan the transforms for `config`.
    ///
    /// # Errors
    /// When `config` fails [`StftConfig::validate`].
    pub fn new(config: StftConfig) -> Result<Self, StftError> {
        config.validate()?;
        let mut planner = RealFftPlanner::<f32>::new();
        let forward = planner.plan_fft_forward(config.fft_len);
        let inverse = planner.plan_fft_inverse(config.fft_len);
        let window = config.window.coefficients(config.window_len);
        let gain = 1.0 / config.fft_len as f32;
        let synthesis_window = window.iter().map(|w| w * gain).collect();
        let scratch_len = forward.get_scratch_len().max(inverse.get_scratch_len());
        Ok(Stft {
            config,
            window,
            synthesis_window,
            forward,
            inverse,
            frame: vec![0.0; config.fft_len],
            spectrum: vec![Complex::default(); config.bins()],
            scratch: vec![Complex::default(); scratch_len],
            norm: Vec::new(),
        })
    }

    /// The configuration this was planned for.
    pub fn config(&self) -> &StftConfig {
        &self.config
    }

    /// The STFT of `x` (see the module documentation for framing and scaling).
    pub fn analyse(&mut self, x: &[f32]) -> Spectrogram {
        let mut spec = Spectrogram::default();
        self.analyse_into(x, &mut spec);
        spec
    }

    /// [`Stft::analyse`] into a spectrogram the caller keeps; its buffer is reused (grown
    /// only when `x` needs more frames than it has held before).
    pub fn analyse_into(&mut self, x: &[f32], spec: &mut Spectrogram) {
        let config = self.config;
        let (frames, bins) = (config.frames_for(x.len()), config.bins());
        spec.data.clear();
        spec.data.resize(frames * bins, Complex::default());
        spec.frames = frames;
        spec.bins = bins;
        spec.signal_len = x.len();
        spec.config = config;

        let (n, len, half) = (x.len() as isize, config.window_len, config.window_len / 2);
        for (t, out) in spec.data.chunks_exact_mut(bins).enumerate() {
            let start = (t * config.hop) as isize - half as isize;
            let (frame, tail) = self.frame.split_at_mut(len);
            if start >= 0 && start + len as isize <= n {
                let segment = &x[start as usize..start as usize + len];
                for ((f, &s), &w) in frame.iter_mut().zip(segment).zip(&self.window) {
                    *f = s * w;
                }
            } else {
                for (m, (f, &w)) in frame.iter_mut().zip(&self.window).enumerate() {
                    let i = start + m as isize;
                    let s = if (0..n).contains(&i) {
                        x[i as usize]
                    } else {
                        match config.edge {
                            Edge::Reflect => x[reflect(i, x.len())],
                            Edge::Zero => 0.0,
                        }
                    };
                    *f = s * w;
                }
            }
            tail.fill(0.0);
            if let Err(e) =
                self.forward
                    .process_with_scratch(&mut self.frame, out, &mut self.scratch)
            {
                panic!("realfft refused buffers sized by its own plan: {e}");
            }
        }
    }

    /// The signal whose STFT `spec` is (or is nearest, if `spec` was modified), of
    /// `spec.signal_len()` samples: weighted overlap-add with window-square
    /// normalisation. The imaginary parts of the 0 Hz bin (and of the Nyquist bin for an
    /// even `fft_len`) are taken as zero, as a real signal's are.
    ///
    /// # Panics
    /// When `spec` was made with a different [`StftConfig`].
    pub fn synthesise(&mut self, spec: &Spectrogram) -> Vec<f32> {
        let mut out = vec![0.0; spec.signal_len];
        self.synthesise_into(spec, &mut out);
        out
    }

    /// [`Stft::synthesise`] into a buffer the caller owns, of exactly
    /// `spec.signal_len()` samples; its previous contents are overwritten.
    ///
    /// # Panics
    /// When `spec` was made with a different [`StftConfig`], or `out` has the wrong length.
    pub fn synthesise_into(&mut self, spec: &Spectrogram, out: &mut [f32]) {
        assert_eq!(
            spec.config, self.config,
            "spectrogram made with a different STFT configuration"
        );
        assert_eq!(
            out.len(),
            spec.signal_len,
            "output buffer length differs from the analysed signal's"
        );
        let (n, len) = (spec.signal_len as isize, self.config.window_len);
        let half = (len / 2) as isize;
        out.fill(0.0);
        self.norm.clear();
        self.norm.resize(out.len(), 0.0);
        for t in 0..spec.frames {
            self.spectrum.copy_from_slice(spec.frame(t));
            match self.inverse.process_with_scratch(
                &mut self.spectrum,
                &mut self.frame,
                &mut self.scratch,
            ) {
                Ok(()) | Err(FftError::InputValues(..)) => {}
                Err(e) => panic!("realfft refused buffers sized by its own plan: {e}"),
            }
            // The part of the frame that lies inside the signal: window offsets m_lo..m_hi.
            let start = (t * self.config.hop) as isize - half;
            let m_lo = (-start).max(0) as usize;
            let m_hi = (n - start).clamp(0, len as isize) as usize;
            if m_lo >= m_hi {
                continue;
            }
            let at = (start + m_lo as isize) as usize;
            let span = at..at + (m_hi - m_lo);
            let frame = &self.frame[m_lo..m_hi];
            for ((o, &y), &ws) in out[span.clone()]
                .iter_mut()
                .zip(frame)
                .zip(&self.synthesis_window[m_lo..m_hi])
            {
                *o += y * ws;
            }
            for (q, &w) in self.norm[span].iter_mut().zip(&self.window[m_lo..m_hi]) {
                *q += w * w;
            }
        }
        for (o, &q) in out.iter_mut().zip(&self.norm) {
            *o /= q;
        }
    }
}
