//! Every step beside its floor: the time of the arithmetic the step cannot avoid, run on
//! the same clips on the same core, as seconds of audio per CPU second of one thread.
//! Run with `cargo bench --bench floors`; it prints, asserts nothing.
//!
//! A floor is measured, not estimated: the same FFT library (realfft) at the sizes the step
//! uses, its multiply-adds in a plain loop the compiler vectorises, one read and one write of
//! the samples, with plans and buffers made before timing. What each floor counts is said
//! beside it. `ratio` is the floor's throughput over the step's: how many times slower the
//! step is than its own arithmetic (1.0 would be the floor itself).
//!
//! Clips: 20 distinct 5 s clips of noise at 16 kHz (44.1 kHz for the resampling row), each
//! row over 40 calls a pass, median of 5 passes after a warm-up pass.

mod common;

use std::sync::Arc;

use common::{
    DISTINCT, SECONDS, clips, drawn, one_core_rate, run_plan_step, step_plan, thread_cpu_seconds,
};
use realfft::num_complex::Complex;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use retake::dsp::convolve::{Method, method};
use retake::dsp::wsola::WsolaConfig;

const RATE: u32 = 16_000;
const CALLS: usize = 40;
const PASSES: usize = 5;

/// FIR length for `atten_db` of stop-band attenuation and a transition band `transition`
/// wide (a fraction of the rate the filter runs at): Kaiser's estimate
/// `N = (A - 7.95) / (14.36 * df)` (J. F. Kaiser, 1974; as given in Oppenheim & Schafer,
/// Discrete-Time Signal Processing, Kaiser-window design, from memory).
fn kaiser_taps(atten_db: f64, transition: f64) -> usize {
    ((atten_db - 7.95) / (14.36 * transition)).ceil() as usize
}

/// The resampler's filter for a 60 dB stop band (the rejection the resampling tests ask
/// for), with a transition band 5 % of the lower rate wide (common practice, no source).
fn resampling_taps(from: u32, to: u32) -> usize {
    kaiser_taps(60.0, 0.05 * f64::from(from.min(to)) / f64::from(from))
}

/// A dot product in eight lanes: the inner loop of every FIR floor.
fn dot(a: &[f32], b: &[f32]) -> f32 {
    let mut acc = [0.0f32; 8];
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f32 = ca
        .remainder()
        .iter()
        .zip(cb.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ca.zip(cb) {
        for k in 0..8 {
            acc[k] += x[k] * y[k];
        }
    }
    acc.iter().sum::<f32>() + tail
}

/// A polyphase resampler's unavoidable work: one dot product of `taps` per output sample,
/// the input advancing `step` samples per output (a table holding every phase needs no
/// interpolation between phases, so none is counted).
struct Fir {
    taps: Vec<f32>,
    out: Vec<f32>,
}

impl Fir {
    fn new(len: usize) -> Self {
        Fir {
            taps: (0..len)
                .map(|i| ((i as f32) * 0.1).sin() / len as f32)
                .collect(),
            out: Vec::new(),
        }
    }

    fn run(&mut self, x: &[f32], step: f64) -> &[f32] {
        let k = self.taps.len();
        let outputs = (x.len().saturating_sub(k) as f64 / step) as usize;
        self.out.clear();
        let taps = &self.taps;
        self.out.extend((0..outputs).map(|j| {
            let p = (j as f64 * step) as usize;
            dot(&x[p..p + k], taps)
        }));
        &self.out
    }
}

/// One real FFT size, planned once, with its buffers.
struct Fft {
    forward: Arc<dyn RealToComplex<f32>>,
    inverse: Arc<dyn ComplexToReal<f32>>,
    time: Vec<f32>,
    spectrum: Vec<Complex<f32>>,
    scratch: Vec<Complex<f32>>,
}

impl Fft {
    fn new(planner: &mut RealFftPlanner<f32>, n: usize) -> Self {
        let forward = planner.plan_fft_forward(n);
        let inverse = planner.plan_fft_inverse(n);
        let scratch =
            vec![Complex::default(); forward.get_scratch_len().max(inverse.get_scratch_len())];
        Fft {
            time: forward.make_input_vec(),
            spectrum: forward.make_output_vec(),
            forward,
            inverse,
            scratch,
        }
    }

    /// Transform `x` (zero-padded to the size) into `self.spectrum`.
    fn forward(&mut self, x: &[f32]) {
        self.time[..x.len()].copy_from_slice(x);
        self.time[x.len()..].fill(0.0);
        self.forward
            .process_with_scratch(&mut self.time, &mut self.spectrum, &mut self.scratch)
            .expect("forward FFT");
    }

    /// Transform `self.spectrum` back into `self.time`.
    fn inverse(&mut self) {
        self.inverse
            .process_with_scratch(&mut self.spectrum, &mut self.time, &mut self.scratch)
            .expect("inverse FFT");
    }
}

/// FFT overlap-add convolution at the sizes `convolve` picks for these lengths: one
/// forward transform of the response, then per block a forward transform, the spectral
/// product, an inverse transform and the add into the output.
struct Convolution {
    fft: Fft,
    response: Vec<Complex<f32>>,
    out: Vec<f32>,
    block: usize,
}

impl Convolution {
    fn new(planner: &mut RealFftPlanner<f32>, clip_len: usize, response: &[f32]) -> Self {
        let m = response.len();
        let n = match method(clip_len, m) {
            Method::OverlapAdd { fft_len } => fft_len,
            Method::Direct => panic!("a room response long enough for an FFT"),
        };
        let mut fft = Fft::new(planner, n);
        fft.forward(response);
        Convolution {
            response: fft.spectrum.clone(),
            fft,
            out: vec![0.0; clip_len + m - 1],
            block: n - m + 1,
        }
    }

    fn run(&mut self, x: &[f32], response: &[f32]) {
        // The response's own transform is part of every take's work.
        self.fft.forward(response);
        self.response.copy_from_slice(&self.fft.spectrum);
        self.out.fill(0.0);
        for (b, chunk) in x.chunks(self.block).enumerate() {
            self.fft.forward(chunk);
            for (s, r) in self.fft.spectrum.iter_mut().zip(&self.response) {
                *s *= r;
            }
            self.fft.inverse();
            let at = b * self.block;
            let end = (at + self.fft.time.len()).min(self.out.len());
            for (o, t) in self.out[at..end].iter_mut().zip(&self.fft.time) {
                *o += t;
            }
        }
    }
}

/// WSOLA's overlap-add: per output hop one frame read, windowed and added into the output
/// (a Hann window at 50 % overlap sums to one, so no division is counted). The similarity search is not counted: this floor is
/// what any search strategy leaves.
struct OverlapAdd {
    cfg: WsolaConfig,
    window: Vec<f32>,
    out: Vec<f32>,
}

impl OverlapAdd {
    fn new() -> Self {
        let cfg = WsolaConfig::for_rate(RATE);
        let n = cfg.frame_len;
        OverlapAdd {
            window: (0..n)
                .map(|i| 0.5 - 0.5 * (std::f32::consts::TAU * i as f32 / n as f32).cos())
                .collect(),
            cfg,
            out: Vec::new(),
        }
    }

    fn run(&mut self, x: &[f32], factor: f64) -> &[f32] {
        let (frame, hop) = (self.cfg.frame_len, self.cfg.hop_out);
        let out_len = (x.len() as f64 / factor) as usize;
        self.out.clear();
        self.out.resize(out_len + frame, 0.0);
        let mut k = 0;
        while k * hop + frame <= out_len {
            let at = ((k * hop) as f64 * factor) as usize;
            let at = at.min(x.len() - frame);
            let dst = &mut self.out[k * hop..k * hop + frame];
            for ((o, s), w) in dst.iter_mut().zip(&x[at..at + frame]).zip(&self.window) {
                *o += s * w;
            }
            k += 1;
        }
        &self.out
    }
}

/// The STFT masking floor: per frame a window, a forward and an inverse FFT of the same
/// size, a second window and the add into the output (the masking itself, zeroing bins,
/// is not counted).
fn stft_round_trip(fft: &mut Fft, window: &[f32], hop: usize, x: &[f32], out: &mut Vec<f32>) {
    let n = window.len();
    out.clear();
    out.resize(x.len() + n, 0.0);
    let mut at = 0;
    while at + n <= x.len() {
        for ((t, s), w) in fft.time.iter_mut().zip(&x[at..at + n]).zip(window) {
            *t = s * w;
        }
        fft.forward
            .process_with_scratch(&mut fft.time, &mut fft.spectrum, &mut fft.scratch)
            .expect("forward FFT");
        fft.inverse();
        for ((o, t), w) in out[at..at + n].iter_mut().zip(&fft.time).zip(window) {
            *o += t * w;
        }
        at += hop;
    }
}

/// A biquad cascade in direct form II transposed, `f64`, all sections per sample: the
/// channel's band filter, run once forward and once backward as a zero-phase filter must.
fn cascade_pass(sections: usize, x: &mut [f32], backward: bool) {
    let (b, a) = ([0.2, 0.4, 0.2], [-0.6, 0.2]);
    let mut state = vec![[0.0f64; 2]; sections];
    let mut tick = |v: &mut f32| {
        let mut s = f64::from(*v);
        for z in &mut state {
            let y = b[0] * s + z[0];
            z[0] = b[1] * s - a[0] * y + z[1];
            z[1] = b[2] * s - a[1] * y;
            s = y;
        }
        *v = s as f32;
    };
    if backward {
        x.iter_mut().rev().for_each(&mut tick);
    } else {
        x.iter_mut().for_each(&mut tick);
    }
}

/// What a room response must hold: its tail until it falls below 16-bit output's
/// quantisation, 96 dB below the direct sound, i.e. `RT60 * 96 / 60` seconds (a decay of 60
/// dB per RT60 by the definition of RT60; 96 dB is the dynamic range of 16 bits,
/// 20 log10(2^16)), capped at `max_ir_s`.
fn response_len(rt60_s: f64, max_ir_s: f64) -> usize {
    ((rt60_s * 96.0 / 60.0).min(max_ir_s) * f64::from(RATE)) as usize
}

/// A decaying noise response of `n` samples, 60 dB down at `rt60` samples: the synthesis a
/// simulated room cannot avoid is one random value and one multiply per sample.
fn synthesise(out: &mut [f32], rt60: usize, seed: u64) {
    let decay = (10f32).powf(-3.0 / rt60 as f32);
    let (mut env, mut state) = (1.0f32, seed | 1);
    for v in out {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        *v = ((state >> 40) as f32 / (1u64 << 24) as f32 - 0.5) * env;
        env *= decay;
    }
}

/// Measured responses written as WAV files for the measured-room step, and their samples.
fn measured_responses(dir: &std::path::Path) -> Vec<Vec<f32>> {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: RATE,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    (0..3)
        .map(|k| {
            let rt60 = 0.3 + 0.2 * k as f64;
            let mut h = vec![0.0f32; response_len(rt60, 1.0)];
            synthesise(&mut h, (rt60 * f64::from(RATE)) as usize, 17 + k as u64);
            h[0] = 1.0;
            let mut w = hound::WavWriter::create(dir.join(format!("room{k}.wav")), spec).unwrap();
            h.iter().for_each(|&s| w.write_sample(s).unwrap());
            w.finalize().unwrap();
            h
        })
        .collect()
}

struct Row {
    name: &'static str,
    step: f64,
    floor: f64,
    counts: &'static str,
}

fn main() {
    let at_16k = clips(RATE);
    let at_44k = clips(44_100);
    let n = at_16k[0].len();
    let mut planner = RealFftPlanner::<f32>::new();
    let dir = tempfile::tempdir().unwrap();
    let measured = measured_responses(dir.path());
    let mut rows = Vec::new();
    let mut sink = vec![0.0f32; n];
    let started = thread_cpu_seconds();

    let mut row = |name, step: &str, counts, floor: &mut dyn FnMut(usize, &[f32])| {
        let plan = step_plan(step);
        let step = one_core_rate(&at_16k, CALLS, PASSES, |i, x| run_plan_step(&plan, i, x));
        let floor = one_core_rate(&at_16k, CALLS, PASSES, floor);
        rows.push(Row {
            name,
            step,
            floor,
            counts,
        });
    };

    row(
        "gain",
        "do = \"gain\"\ndb = 3.0",
        "read, multiply, write",
        &mut |_, x| {
            sink.iter_mut().zip(x).for_each(|(o, s)| *o = s * 1.41);
            std::hint::black_box(&sink);
        },
    );

    let noise = clips(RATE);
    row(
        "noise, SNR 0-20 dB over the clip",
        "do = \"noise\"\nbank = \"demo_audio/noise\"\nsnr_db = { low = 0, high = 20 }\nsnr_over = \"clip\"",
        "both energies, then one multiply-add a sample",
        &mut |i, x| {
            let z = &noise[(i + 7) % DISTINCT];
            let (es, en) = x
                .iter()
                .zip(z)
                .fold((0.0f32, 0.0f32), |(a, b), (s, v)| (a + s * s, b + v * v));
            let g = (es / en.max(1e-9)).sqrt() * 0.3;
            sink.iter_mut()
                .zip(x.iter().zip(z))
                .for_each(|(o, (s, v))| *o = s + g * v);
            std::hint::black_box(&sink);
        },
    );

    let mut fir = Fir::new(resampling_taps(RATE, RATE));
    row(
        "speed 0.9",
        "do = \"speed\"\nfactor = 0.9",
        "a 60 dB FIR (Kaiser length) a sample",
        &mut |_, x| {
            std::hint::black_box(fir.run(x, 0.9));
        },
    );
    row(
        "speed drawn from [0.9, 1.1]",
        "do = \"speed\"\nfactor = { low = 0.9, high = 1.1 }",
        "a 60 dB FIR (Kaiser length) a sample",
        &mut |i, x| {
            std::hint::black_box(fir.run(x, drawn(i)));
        },
    );

    let mut fft512 = Fft::new(&mut planner, 512);
    let hann: Vec<f32> = (0..512)
        .map(|i| 0.5 - 0.5 * (std::f32::consts::TAU * i as f32 / 512.0).cos())
        .collect();
    let mut stft_out = Vec::new();
    row(
        "mask, 2 bands of 0-843.75 Hz, 2 spans of 0-0.4 s",
        "do = \"mask\"\nwindow = 512\nhop = 160\nfft = 512\nfreq_masks = 2\nfreq_width_hz = { low = 0, high = 843.75 }\ntime_masks = 2\ntime_width_s = { low = 0, high = 0.4 }",
        "512-point STFT out and back, hop 160",
        &mut |_, x| {
            stft_round_trip(&mut fft512, &hann, 160, x, &mut stft_out);
            std::hint::black_box(&stft_out);
        },
    );

    let mut ola = OverlapAdd::new();
    row(
        "stretch by a factor drawn from [0.8, 1.25] (WSOLA)",
        "do = \"stretch\"\nfactor = { low = 0.8, high = 1.25 }",
        "overlap-add of 25 ms frames (no search)",
        &mut |i, x| {
            std::hint::black_box(ola.run(x, 0.8 + 0.45 * (i % 10) as f64 / 10.0));
        },
    );
    row(
        "warp by up to 80 ms (WSOLA)",
        "do = \"warp\"\nmax_shift_s = 0.08",
        "overlap-add of 25 ms frames (no search)",
        &mut |_, x| {
            std::hint::black_box(ola.run(x, 1.0));
        },
    );
    row(
        "pitch by -2 to 2 semitones (WSOLA + speed)",
        "do = \"pitch\"\nsemitones = { low = -2, high = 2 }",
        "overlap-add (no search), then the FIR",
        &mut |i, x| {
            let r = 2f64.powf(((i % 5) as f64 - 2.0) / 12.0);
            let stretched = ola.run(x, 1.0 / r).to_vec();
            std::hint::black_box(fir.run(&stretched, r));
        },
    );

    let mut simulated = vec![0.0f32; response_len(0.55, 1.0)];
    let mut room_conv = Convolution::new(&mut planner, n, &simulated);
    row(
        "room, simulated, drawn size, RT60 0.3-0.8 s",
        "do = \"room\"\nwidth_m = { low = 3, high = 8 }\nlength_m = { low = 4, high = 10 }\nheight_m = 3\nrt60_s = { low = 0.3, high = 0.8 }\nmax_ir_s = 1.0",
        "noise response to -96 dB (mean RT60), FFT overlap-add",
        &mut |i, x| {
            synthesise(&mut simulated, (0.55 * f64::from(RATE)) as usize, i as u64);
            room_conv.run(x, &simulated);
            std::hint::black_box(&room_conv.out);
        },
    );
    let mut measured_conv: Vec<Convolution> = measured
        .iter()
        .map(|h| Convolution::new(&mut planner, n, h))
        .collect();
    row(
        "room from measured responses (0.5-1.1 s)",
        &format!(
            "do = \"room\"\nirs = \"{}\"\nnormalise = \"energy\"",
            dir.path().display()
        ),
        "FFT overlap-add with the response",
        &mut |i, x| {
            let k = i % measured.len();
            measured_conv[k].run(x, &measured[k]);
            std::hint::black_box(&measured_conv[k].out);
        },
    );

    let mut down = Fir::new(resampling_taps(RATE, 8_000));
    let mut up = Fir::new(resampling_taps(8_000, RATE));
    let codes: Vec<u8> = (0..=u16::MAX).map(|v| (v >> 8) as u8).collect();
    let decode: Vec<f32> = (0..256).map(|c| c as f32 / 256.0).collect();
    row(
        "channel: narrow band, mu-law, soft clip at -6 dBFS",
        "do = \"channel\"\nband = \"narrow\"\ncodec = \"mulaw\"\nclip = \"soft\"\nclip_dbfs = -6",
        "4 biquads both ways, 16->8->16 kHz FIRs, 2 lookups, a clamp",
        &mut |_, x| {
            sink.copy_from_slice(x);
            cascade_pass(4, &mut sink, false);
            cascade_pass(4, &mut sink, true);
            let mut low = down.run(&sink, 2.0).to_vec();
            for v in &mut low {
                let code = codes[(*v * 32767.0) as i16 as u16 as usize];
                *v = decode[usize::from(code)];
            }
            // Upsampling by 2: every output from the 8 kHz taps.
            let back = up.run(&low, 0.5);
            for (o, v) in sink.iter_mut().zip(back) {
                *o = v.clamp(-0.5, 0.5);
            }
            std::hint::black_box(&sink);
        },
    );

    let resample_taps = resampling_taps(44_100, RATE);
    let mut fir44 = Fir::new(resample_taps);
    let resample = one_core_rate(&at_44k, CALLS, PASSES, |_, x| {
        std::hint::black_box(retake::dsp::resample::resample(x, 44_100, RATE));
    });
    let resample_floor = one_core_rate(&at_44k, CALLS, PASSES, |_, x| {
        std::hint::black_box(fir44.run(x, 44_100.0 / f64::from(RATE)));
    });
    rows.push(Row {
        name: "resample 44.1 -> 16 kHz (on decoding)",
        step: resample,
        floor: resample_floor,
        counts: "a 60 dB FIR (Kaiser length) an output sample",
    });

    println!(
        "one core, seconds of audio per CPU second ({DISTINCT} clips of {SECONDS} s, median of {PASSES} passes)"
    );
    println!(
        "FIR lengths (Kaiser, 60 dB, 5 % transition): {} taps at 16 kHz, {} for 16 -> 8 kHz, {} for 44.1 -> 16 kHz\n",
        resampling_taps(RATE, RATE),
        resampling_taps(RATE, 8_000),
        resample_taps
    );
    println!(
        "{:<52} {:>9} {:>9} {:>7}  floor counts",
        "step", "step s/s", "floor s/s", "ratio"
    );
    for r in &rows {
        println!(
            "{:<52} {:>9.0} {:>9.0} {:>7.2}  {}",
            r.name,
            r.step,
            r.floor,
            r.floor / r.step,
            r.counts
        );
    }
    println!("\n({:.0} s of CPU in all)", thread_cpu_seconds() - started);
}
