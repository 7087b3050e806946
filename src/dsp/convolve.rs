//! Linear convolution of two signals (a clip with an impulse response), by FFT overlap-add.
//!
//! The shorter of the two operands is the filter; the longer one is cut into blocks of
//! `L = N - m + 1` samples (`m` the filter's length, `N` the FFT size), each block is
//! transformed, multiplied by the filter's spectrum, transformed back and added into the
//! output at its offset. The FFT size is chosen per call by a cost model ([`method`]) over
//! the powers of two from `m` up to the one that holds the whole result (a single block:
//! usually the cheapest when the response is about as long as the clip or longer). It
//! lands near `2 m` to `8 m` for a response much shorter than the clip, e.g. 1024 points
//! for 128 samples, 32768 for 4800. When the shorter operand has only a few samples a
//! direct sum is cheaper and is used instead.
//!
//! Transforms run in `f32` (realfft); the accumulated output stays within about `1e-6` of
//! the largest output sample, well inside what 16-bit or float WAV keeps. The direct sum
//! accumulates in `f64`.
//!
//! Plan once, process many: every thread keeps its own FFT planner (which keeps one plan
//! per size) and the block, spectrum and scratch buffers, reused from call to call; the
//! block loop allocates nothing.

use std::cell::RefCell;

use realfft::RealFftPlanner;
use realfft::num_complex::Complex;

/// Relative cost of one multiply-add in the direct sum, in the units of [`method`]'s cost
/// model (a real FFT of size `N` costs `N log2 N` units). Measured on an x86-64 machine
/// with AVX: a multiply-add about 0.22 ns, a unit about 0.09 ns (from 512-point to
/// 262144-point FFTs). The direct sum then wins only for filters of about 10 samples or
/// fewer.
const DIRECT_MAC_COST: f64 = 2.5;

/// The smallest FFT size considered: below this, per-block overhead dominates.
const MIN_FFT: usize = 64;

/// Per-thread state: the planner with its plans, and the buffers a call reuses.
struct Workspace {
    planner: RealFftPlanner<f32>,
    block: Vec<f32>,
    spectrum: Vec<Complex<f32>>,
    response: Vec<Complex<f32>>,
    scratch: Vec<Complex<f32>>,
    direct: Vec<f64>,
}

thread_local! {
    static WORKSPACE: RefCell<Workspace> = RefCell::new(Workspace {
        planner: RealFftPlanner::new(),
        block: Vec::new(),
        spectrum: Vec::new(),
        response: Vec::new(),
        scratch: Vec::new(),
        direct: Vec::new(),
    });
}

/// How a convolution is computed; chosen by [`method`] from the two lengths alone.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// The direct sum, accumulated in `f64`.
    Direct,
    /// Overlap-add with FFTs of this size (a power of two). When one block holds the
    /// whole result this is a single FFT convolution.
    OverlapAdd {
        /// The FFT size `N`.
        fft_len: usize,
    },
}

/// The length of the full linear convolution of signals of lengths `n` and `m`:
/// `n + m - 1`, or 0 if either is empty.
pub fn full_len(n: usize, m: usize) -> usize {
    if n == 0 || m == 0 { 0 } else { n + m - 1 }
}

/// Cost of one real FFT of size `n` in the cost model's units.
fn fft_cost(n: usize) -> f64 {
    n as f64 * (n as f64).log2()
}

/// The method [`convolve`] uses for operands of lengths `n` and `m` (in either order).
///
/// Overlap-add with FFT size `N` and filter length `m` (the shorter operand) costs one
/// forward FFT of the filter plus, per block of `N - m + 1` samples, a forward and an
/// inverse FFT and about `4 N` units of bookkeeping (the spectral product, copying,
/// adding). Every power of two from `max(m, 64)` to the one that holds `n + m - 1`
/// samples is priced, and the cheapest is taken unless the direct sum (`n m`
/// multiply-adds) is cheaper still, which happens only for very short filters.
///
/// # Panics
/// When either length is zero.
pub fn method(n: usize, m: usize) -> Method {
    assert!(n > 0 && m > 0, "no method for an empty operand");
    let (long, short) = if n >= m { (n, m) } else { (m, n) };
    let mut best = Method::Direct;
    let mut best_cost = DIRECT_MAC_COST * long as f64 * short as f64;
    let top = (long + short - 1).next_power_of_two().max(MIN_FFT);
    let mut fft_len = short.next_power_of_two().clamp(MIN_FFT, top);
    loop {
        let block = fft_len - short + 1;
        let blocks = long.div_ceil(block) as f64;
        let cost = fft_cost(fft_len) + blocks * (2.0 * fft_cost(fft_len) + 4.0 * fft_len as f64);
        if cost < best_cost {
            best = Method::OverlapAdd { fft_len };
            best_cost = cost;
        }
        if fft_len >= top {
            return best;
        }
        fft_len *= 2;
    }
}

/// The full linear convolution of `x` and `h`: `y[k] = sum_i x[i] h[k - i]`, of length
/// `x.len() + h.len() - 1` (empty when either is empty). The operands commute; which one
/// is the impulse response does not matter.
///
/// # Examples
/// ```
/// use retake::dsp::convolve::convolve;
/// let y = convolve(&[1.0, 2.0, 3.0], &[0.0, 1.0, 0.5]);
/// let want = [0.0, 1.0, 2.5, 4.0, 1.5];
/// assert!(y.iter().zip(want).all(|(a, b)| (a - b).abs() < 1e-6));
/// ```
pub fn convolve(x: &[f32], h: &[f32]) -> Vec<f32> {
    let mut out = vec![0.0; full_len(x.len(), h.len())];
    convolve_into(x, h, &mut out);
    out
}

/// [`convolve`] into a buffer the caller owns, of exactly [`full_len`] samples; its
/// previous contents are overwritten.
///
/// # Panics
/// When `out.len()` is not `full_len(x.len(), h.len())`.
pub fn convolve_into(x: &[f32], h: &[f32], out: &mut [f32]) {
    if x.is_empty() || h.is_empty() {
        return convolve_with(x, h, Method::Direct, out);
    }
    convolve_with(x, h, method(x.len(), h.len()), out);
}

/// [`convolve_into`] by a method the caller names instead of the one [`method`] picks:
/// for tests that check every path against a reference, and for measuring.
///
/// # Panics
/// When `out.len()` is not `full_len(x.len(), h.len())`, or when an overlap-add FFT size
/// is not a power of two at least as long as the shorter operand (and at least 2).
pub fn convolve_with(x: &[f32], h: &[f32], method: Method, out: &mut [f32]) {
    let len = full_len(x.len(), h.len());
    assert_eq!(
        out.len(),
        len,
        "convolution of {} and {} samples needs an output of {len}",
        x.len(),
        h.len()
    );
    if len == 0 {
        return;
    }
    let (long, short) = if x.len() >= h.len() { (x, h) } else { (h, x) };
    if let Method::OverlapAdd { fft_len } = method {
        assert!(
            fft_len.is_power_of_two() && fft_len >= short.len().max(2),
            "overlap-add FFT size {fft_len} must be a power of two of at least {}",
            short.len().max(2)
        );
    }
    WORKSPACE.with(|cell| {
        let work = &mut *cell.borrow_mut();
        match method {
            Method::Direct => direct(long, short, out, &mut work.direct),
            Method::OverlapAdd { fft_len } => overlap_add(long, short, fft_len, out, work),
        }
    });
}

/// The direct sum, accumulated in `f64`.
fn direct(long: &[f32], short: &[f32], out: &mut [f32], acc: &mut Vec<f64>) {
    acc.clear();
    acc.resize(out.len(), 0.0);
    for (j, &hj) in short.iter().enumerate() {
        let hj = f64::from(hj);
        for (a, &xi) in acc[j..j + long.len()].iter_mut().zip(long) {
            *a += hj * f64::from(xi);
        }
    }
    for (o, a) in out.iter_mut().zip(acc.iter()) {
        *o = *a as f32;
    }
}

/// Overlap-add with FFT size `fft_len`: blocks of `fft_len - short.len() + 1` samples of
/// `long`, each convolved with `short` by one forward and one inverse FFT.
fn overlap_add(long: &[f32], short: &[f32], fft_len: usize, out: &mut [f32], work: &mut Workspace) {
    let forward = work.planner.plan_fft_forward(fft_len);
    let inverse = work.planner.plan_fft_inverse(fft_len);
    let bins = fft_len / 2 + 1;
    let scratch_len = forward.get_scratch_len().max(inverse.get_scratch_len());
    let block = &mut work.block;
    let spectrum = &mut work.spectrum;
    let response = &mut work.response;
    let scratch = &mut work.scratch;
    block.resize(fft_len, 0.0);
    spectrum.resize(bins, Complex::default());
    response.resize(bins, Complex::default());
    if scratch.len() < scratch_len {
        scratch.resize(scratch_len, Complex::default());
    }
    let scratch = &mut scratch[..scratch_len];

    // The filter's spectrum, with the inverse transform's 1/N folded in.
    block[..short.len()].copy_from_slice(short);
    block[short.len()..].fill(0.0);
    forward
        .process_with_scratch(block, response, scratch)
        .expect("buffers sized for the plan");
    let scale = 1.0 / fft_len as f32;
    for r in response.iter_mut() {
        *r *= scale;
    }

    out.fill(0.0);
    let step = fft_len - short.len() + 1;
    for (b, chunk) in long.chunks(step).enumerate() {
        let start = b * step;
        block[..chunk.len()].copy_from_slice(chunk);
        block[chunk.len()..].fill(0.0);
        forward
            .process_with_scratch(block, spectrum, scratch)
            .expect("buffers sized for the plan");
        for (s, r) in spectrum.iter_mut().zip(response.iter()) {
            *s *= *r;
        }
        // The product of two real signals' spectra is real at DC and Nyquist; rounding
        // cannot make it otherwise, but the inverse transform insists, so say so.
        spectrum[0].im = 0.0;
        spectrum[bins - 1].im = 0.0;
        inverse
            .process_with_scratch(spectrum, block, scratch)
            .expect("buffers sized for the plan");
        let valid = chunk.len() + short.len() - 1;
        for (o, v) in out[start..start + valid].iter_mut().zip(&block[..valid]) {
            *o += *v;
        }
    }
}
