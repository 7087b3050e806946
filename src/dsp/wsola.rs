//! Time-scale modification without a change of pitch, by WSOLA (waveform-similarity
//! overlap-add; Verhelst & Roelands, ICASSP 1993).
//!
//! The output is built from Hann-windowed frames of `frame_len` samples placed every
//! `hop_out` samples. Frame `k` is centred at output sample `c_k = k * hop_out`; its nominal
//! input centre `p_k` advances by `hop_out * speed` per frame, the speed read at the nominal
//! centre (`p_0 = 0`, `p_{k+1} = p_k + hop_out * speed_at(p_k / rate)`), so a stretch of
//! input of length `d` at speed `f` becomes `d / f` of output. The frame actually copied is
//! centred at `a_k`, chosen within `tolerance` samples of `p_k` as the candidate most like
//! the *natural continuation* of the previous frame (the input that followed it, centred at
//! `a_{k-1} + hop_out`): the one with the largest normalised cross-correlation
//! `<cont, cand> / |cand|` over the frame. The natural continuation itself scores highest
//! whenever it is a candidate (Cauchy–Schwarz), so a speed of 1 copies the input through
//! unchanged. Ties (silence) go to the candidate nearest the nominal centre.
//!
//! The frames are overlap-added and divided by the sum of the windows placed at each output
//! sample, so any `hop_out` up to half a frame gives unit gain. The input is read as if
//! padded with zeros on both sides: the first frame is centred on input sample 0 and the
//! last frames run past the input's end, so both edges are covered.
//!
//! **The time map.** [`Stretched::anchors`] lists `(a_k / rate, c_k / rate)` for every frame
//! whose centres lie inside the input and the output, between `(0, 0)` (frame 0, which is
//! never moved) and `(input duration, output duration)`. These are the positions the
//! algorithm used, not the nominal ones, so a timing mapped through them lands where its
//! audio went (within the spread of one frame's overlap).
//!
//! **Monotone anchors.** WSOLA's frames overlap in the input and the search may move a frame
//! back by up to `tolerance`, so a slow stretch could pick an input centre at or before the
//! previous one. The search window for frame `k` therefore starts one sample after
//! `a_{k-1}`: input centres strictly increase by construction, and the anchors are exactly
//! the positions used (nothing is fixed up afterwards). The natural continuation,
//! `a_{k-1} + hop_out`, always lies past that bound, so the constraint only removes
//! candidates that would replay input from before the previous frame's centre.
//!
//! Cost: the search is a direct correlation, `frame_len × (2 tolerance + 1)` multiply-adds
//! per frame, with candidate energies from a running sum. A call allocates its buffers once;
//! the frame loop allocates nothing.

/// The slowest speed a stretch uses: `speed_at` values below it are raised to it.
pub const MIN_SPEED: f64 = 0.1;

/// The fastest speed a stretch uses: `speed_at` values above it are lowered to it.
pub const MAX_SPEED: f64 = 10.0;

/// Frame length of [`WsolaConfig::for_rate`], in seconds (400 samples at 16 kHz): several
/// pitch periods of any voice, short enough that speech sounds are quasi-stationary in it.
pub const FRAME_SECONDS: f64 = 0.025;

/// Search radius of [`WsolaConfig::for_rate`], in seconds (160 samples at 16 kHz): more
/// than one pitch period down to 100 Hz, so a matching phase is always within reach.
pub const TOLERANCE_SECONDS: f64 = 0.010;

/// Frame, hop and search sizes of a stretch, in samples at the signal's rate.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct WsolaConfig {
    /// Length of each windowed frame, in samples; even, at least 4.
    pub frame_len: usize,
    /// Synthesis hop: output samples between consecutive frames; from 1 to `frame_len / 2`.
    pub hop_out: usize,
    /// Search radius around each frame's nominal input position, in samples (0 turns the
    /// search off: plain overlap-add).
    pub tolerance: usize,
}

/// Why a [`WsolaConfig`] cannot be used.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum WsolaConfigError {
    /// The frame is shorter than 4 samples or odd.
    #[error("frame_len {0} must be even and at least 4 samples")]
    BadFrame(usize),
    /// The hop is 0 or more than half a frame (the windows would leave gaps).
    #[error("hop_out {hop} must be from 1 to half of frame_len {frame}")]
    BadHop {
        /// The hop asked for.
        hop: usize,
        /// The frame length.
        frame: usize,
    },
}

impl WsolaConfig {
    /// The defaults scaled to `rate` Hz: [`FRAME_SECONDS`] frames (rounded to an even
    /// number of samples, at least 4), 50 % overlap, [`TOLERANCE_SECONDS`] search radius.
    /// At 16 kHz: 400-sample frames, a 200-sample hop, ±160 samples.
    pub fn for_rate(rate: u32) -> Self {
        let rate = f64::from(rate);
        let half = ((FRAME_SECONDS * rate / 2.0).round() as usize).max(2);
        Self {
            frame_len: 2 * half,
            hop_out: half,
            tolerance: (TOLERANCE_SECONDS * rate).round() as usize,
        }
    }

    /// Whether the sizes can be used.
    ///
    /// # Errors
    /// When the frame is odd or shorter than 4 samples, or the hop is 0 or longer than half
    /// a frame.
    pub fn check(&self) -> Result<(), WsolaConfigError> {
        if self.frame_len < 4 || !self.frame_len.is_multiple_of(2) {
            return Err(WsolaConfigError::BadFrame(self.frame_len));
        }
        if self.hop_out == 0 || self.hop_out > self.frame_len / 2 {
            return Err(WsolaConfigError::BadHop {
                hop: self.hop_out,
                frame: self.frame_len,
            });
        }
        Ok(())
    }
}

impl Default for WsolaConfig {
    /// [`WsolaConfig::for_rate`] at 16 kHz: 400 / 200 / 160 samples.
    fn default() -> Self {
        Self::for_rate(16_000)
    }
}

/// The result of a stretch: the audio and the time map it applied.
#[derive(Clone, Debug, PartialEq)]
pub struct Stretched {
    /// The stretched signal, at the input's rate.
    pub samples: Vec<f32>,
    /// `(input seconds, output seconds)` pairs the stretch used, from `(0, 0)` to
    /// `(input duration, output duration)`: input times strictly increase, output times do
    /// not decrease (see the module notes). A single `(0, 0)` for an empty input.
    pub anchors: Vec<(f64, f64)>,
}

/// Stretch `x` (at `rate` Hz) by a speed that may vary along it: `speed_at(t)` is the local
/// speed at input time `t` seconds (above 1 faster and shorter, below 1 slower and longer),
/// clamped to [[`MIN_SPEED`], [`MAX_SPEED`]]. The output lasts about
/// `∫ dt / speed_at(t)` over the input. Pitch is kept.
///
/// An input shorter than one frame is returned unchanged with the identity anchors.
///
/// # Panics
/// When `rate` is 0, `cfg` fails [`WsolaConfig::check`], or `speed_at` returns a value that
/// is not a positive finite number.
pub fn stretch(
    x: &[f32],
    rate: u32,
    cfg: &WsolaConfig,
    speed_at: impl Fn(f64) -> f64,
) -> Stretched {
    assert!(rate > 0, "wsola: sample rate must be positive");
    if let Err(e) = cfg.check() {
        panic!("wsola: {e}");
    }
    let fs = f64::from(rate);
    let n_in = x.len();
    if n_in < cfg.frame_len {
        let d = n_in as f64 / fs;
        let anchors = if n_in == 0 {
            vec![(0.0, 0.0)]
        } else {
            vec![(0.0, 0.0), (d, d)]
        };
        return Stretched {
            samples: x.to_vec(),
            anchors,
        };
    }

    let n = cfg.frame_len;
    let half = n / 2;
    let hop = cfg.hop_out;
    let tol = cfg.tolerance as i64;
    let speed = |p: f64| {
        let t = p.min(n_in as f64) / fs;
        let s = speed_at(t);
        assert!(
            s.is_finite() && s > 0.0,
            "wsola: speed_at({t}) returned {s}, not a positive finite speed"
        );
        s.clamp(MIN_SPEED, MAX_SPEED)
    };

    // Nominal input centres, up to the first one at or past the input's end; the output
    // length is where the nominal map reaches the end, interpolated within that hop.
    let mut nominal: Vec<f64> = vec![0.0];
    let mut p = 0.0;
    while p < n_in as f64 {
        p += hop as f64 * speed(p);
        nominal.push(p);
    }
    let k_end = nominal.len() - 1;
    let (p0, p1) = (nominal[k_end - 1], nominal[k_end]);
    let n_out = (((k_end - 1) as f64 + (n_in as f64 - p0) / (p1 - p0)) * hop as f64)
        .round()
        .max(1.0) as usize;
    // Frames run until their windows have covered the whole output; past the end of the
    // input everything read is zeros, so nominal centres stop half a frame beyond it.
    let limit = (n_in + half) as f64;
    let frames = (n_out + half).div_ceil(hop);
    while nominal.len() < frames {
        let p = *nominal.last().expect("one nominal position at least");
        nominal.push((p + hop as f64 * speed(p)).min(limit));
    }
    nominal.truncate(frames);

    // The input with zeros around it, and running energies over it.
    let pad_left = n;
    let mut xp = vec![0.0f32; pad_left + n_in + 2 * n];
    xp[pad_left..pad_left + n_in].copy_from_slice(x);
    let mut energy = Vec::with_capacity(xp.len() + 1);
    energy.push(0.0f64);
    let mut acc_e = 0.0f64;
    for &v in &xp {
        acc_e += f64::from(v) * f64::from(v);
        energy.push(acc_e);
    }
    // Start of the frame centred on input sample `c`, as an index into `xp`.
    let start = |c: i64| (pad_left as i64 + c - half as i64) as usize;

    let window: Vec<f32> = (0..n)
        .map(|i| (0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos()) as f32)
        .collect();
    // Output accumulators, offset by half a frame: frame `k` adds into
    // `[c_k, c_k + n)`, which is output `[c_k - half, c_k + half)`.
    let mut acc = vec![0.0f32; frames * hop + n];
    let mut wsum = vec![0.0f32; frames * hop + n];

    let mut anchors = Vec::with_capacity(frames + 1);
    let max_centre = limit as i64;
    let mut prev: i64 = 0;
    for (k, &p) in nominal.iter().enumerate() {
        let centre = if k == 0 {
            0
        } else {
            let nom = p.round() as i64;
            let lo = (nom - tol).max(prev + 1).min(max_centre);
            let hi = (nom + tol).max(lo).min(max_centre);
            let cont = &xp[start(prev + hop as i64)..][..n];
            let mut best = lo;
            let mut best_score = f64::NEG_INFINITY;
            for c in lo..=hi {
                let s = start(c);
                let e = (energy[s + n] - energy[s]).max(0.0);
                let score = f64::from(dot(cont, &xp[s..s + n])) / (e + 1e-30).sqrt();
                if score > best_score
                    || (score == best_score && (c - nom).abs() < (best - nom).abs())
                {
                    best = c;
                    best_score = score;
                }
            }
            best
        };
        prev = centre;

        let out_centre = k * hop;
        let seg = &xp[start(centre)..][..n];
        let a = &mut acc[out_centre..out_centre + n];
        let ws = &mut wsum[out_centre..out_centre + n];
        for i in 0..n {
            a[i] += window[i] * seg[i];
            ws[i] += window[i];
        }
        if out_centre < n_out && (centre as usize) < n_in {
            anchors.push((centre as f64 / fs, out_centre as f64 / fs));
        }
    }
    anchors.push((n_in as f64 / fs, n_out as f64 / fs));

    let samples = acc[half..half + n_out]
        .iter()
        .zip(&wsum[half..half + n_out])
        .map(|(&a, &w)| if w > 1e-6 { a / w } else { 0.0 })
        .collect();
    Stretched { samples, anchors }
}

/// [`stretch`] by one speed `factor` throughout: the output lasts `d / factor`.
///
/// # Panics
/// As [`stretch`]: when `rate` is 0, `cfg` is unusable or `factor` is not a positive finite
/// number.
pub fn stretch_by(x: &[f32], rate: u32, cfg: &WsolaConfig, factor: f64) -> Stretched {
    stretch(x, rate, cfg, |_| factor)
}

/// Dot product with eight partial sums, so the compiler can keep them in vector lanes.
fn dot(a: &[f32], b: &[f32]) -> f32 {
    let mut lanes = [0.0f32; 8];
    let (ac, bc) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f32 = ac
        .remainder()
        .iter()
        .zip(bc.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ac.zip(bc) {
        for i in 0..8 {
            lanes[i] += x[i] * y[i];
        }
    }
    lanes.iter().sum::<f32>() + tail
}
