//! Simulated rooms (image-source method with a diffuse late field by default) checked
//! against room acoustics: RT60 measured by Schroeder integration against Eyring (diffuse
//! tail) and against the image-source decay (pure images), the join between the two parts,
//! determinism, the direct path's time and level, the floor reflection's time,
//! Sabine/Eyring by hand, input errors and the DC left after the high-pass.

use std::f64::consts::PI;

use retake::room::absorption::{
    alpha_for_rt60_eyring, alpha_for_rt60_image_source, alpha_for_rt60_sabine, eyring_rt60,
    image_source_rt60, sabine_constant, sabine_rt60,
};
use retake::room::ism::highpass_coefficients;
use retake::room::late::{CROSSFADE_S, MATCH_WINDOW_S, transition_s};
use retake::room::{
    HIGHPASS_HZ, IrParams, LateField, Placement, RoomCache, RoomError, Shoebox, direct_delay_s,
    impulse_response, impulse_response_with, place,
};

const C: f64 = 343.0;
const RATE: u32 = 16_000;

/// Reverberation time from an impulse response: Schroeder's backward integration
/// (M. R. Schroeder, "New method of measuring reverberation time", JASA 37, 1965) gives the
/// energy decay curve EDC(t) = Σ_{τ >= t} h²(τ); a least-squares line through the part of
/// the EDC between -5 and -35 dB, extrapolated to -60 dB, is T30. This mirrors ISO 3382-1
/// (T30: the -5 to -35 dB range of the decay curve, slope times 60 dB).
fn t30(h: &[f32], rate: u32) -> f64 {
    decay_fit(h, rate, -35.0)
}

/// T20: the same over -5 to -25 dB (ISO 3382-1).
fn t20(h: &[f32], rate: u32) -> f64 {
    decay_fit(h, rate, -25.0)
}

fn decay_fit(h: &[f32], rate: u32, lower_db: f64) -> f64 {
    let mut edc = vec![0.0f64; h.len() + 1];
    for i in (0..h.len()).rev() {
        edc[i] = edc[i + 1] + f64::from(h[i]) * f64::from(h[i]);
    }
    let (mut n, mut st, mut sy, mut stt, mut sty) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (i, &e) in edc[..h.len()].iter().enumerate() {
        let db = 10.0 * (e / edc[0]).log10();
        if (lower_db..=-5.0).contains(&db) {
            let t = i as f64 / f64::from(rate);
            (n, st, sy, stt, sty) = (n + 1.0, st + t, sy + db, stt + t * t, sty + t * db);
        }
    }
    assert!(n > 10.0, "the decay curve never spans -5 to {lower_db} dB");
    let slope = (n * sty - st * sy) / (n * stt - st * st); // dB per second
    -60.0 / slope
}

fn argmax_abs(h: &[f32]) -> usize {
    (0..h.len())
        .max_by(|&a, &b| h[a].abs().total_cmp(&h[b].abs()))
        .unwrap()
}

/// One test room: (dims, alpha, source, mic), metres.
type Case = ([f64; 3], f64, [f64; 3], [f64; 3]);

const ROOMS: [Case; 6] = [
    ([3.0, 4.0, 2.5], 0.3, [1.0, 1.2, 1.4], [2.1, 2.9, 1.1]),
    ([6.0, 5.0, 3.0], 0.2, [1.5, 1.0, 1.6], [4.2, 3.3, 1.2]),
    ([10.0, 8.0, 4.0], 0.35, [2.5, 3.0, 1.7], [6.4, 5.1, 1.3]),
    ([4.0, 4.0, 3.0], 0.5, [1.1, 2.7, 1.5], [2.9, 1.3, 1.2]),
    ([20.0, 15.0, 6.0], 0.25, [4.0, 6.0, 1.8], [12.0, 9.5, 1.5]),
    ([6.0, 4.0, 3.0], 0.164, [2.0, 1.5, 1.7], [4.1, 2.8, 1.4]),
];

fn case(c: Case) -> (Shoebox, Placement) {
    let (dims, alpha, s, m) = c;
    (
        Shoebox {
            dims_m: dims,
            absorption: alpha,
        },
        Placement {
            source_m: s,
            mic_m: m,
        },
    )
}

fn images_only(rate: u32, max_len_s: f64) -> IrParams {
    IrParams {
        late: LateField::Images,
        ..IrParams::new(rate, max_len_s)
    }
}

#[test]
fn with_the_diffuse_tail_the_measured_rt60_is_eyrings() {
    // The product's criterion: the RT60 of a simulated room, measured by Schroeder
    // integration with an ISO 3382-1 fit, is within 15 % of Eyring's prediction (C. F.
    // Eyring, JASA 1, 1930), across rooms of different sizes and absorptions. Measured as
    // T30, the longer of the two ISO ranges: it spans 30 dB of the decay, most of it in the
    // diffuse tail, so it checks the tail's rate more strictly than T20, and these
    // simulated responses have no noise floor to limit the range (the decay runs to the
    // response's end, at least 1.5 Eyring RT60s). T20 must hold as well.
    //
    // Measured (16 kHz, response 1.5 × Eyring long; t_x the transition, counted from the
    // direct sound):
    //   room m, alpha        V m³   t_x ms  Eyring s  T30 s   T20 s   T30/Eyring  images T30/Eyring
    //   3 × 4 × 2.5, 0.30      30    50      0.230    0.229   0.229   1.00        1.22
    //   6 × 5 × 3, 0.20        90    50      0.516    0.516   0.514   1.00        1.27
    //   10 × 8 × 4, 0.35      320    54      0.394    0.392   0.391   1.00        1.42
    //   4 × 4 × 3, 0.50        48    50      0.139    0.137   0.139   0.98        1.18
    //   20 × 15 × 6, 0.25    1800   127      0.988    0.987   0.990   1.00        1.64
    //   6 × 4 × 3, 0.164       72    50      0.600    0.606   0.612   1.01        1.29
    // (images: the pure image-source response, see the next test.) All within 2 %; the
    // second bound, 5 %, guards that margin: a looser result means the tail's level or rate
    // has drifted.
    let mut table = String::from("dims m, alpha: Eyring s, T30 s, T20 s, T30/Eyring\n");
    let mut failures = Vec::new();
    for c in ROOMS {
        let (room, at) = case(c);
        let eyring = eyring_rt60(room.dims_m, room.absorption, C).unwrap();
        let h = impulse_response(&room, &at, RATE, 1.5 * eyring, C).unwrap();
        let (m30, m20) = (t30(&h, RATE), t20(&h, RATE));
        table += &format!(
            "{:?}, {}: {eyring:.3}, {m30:.3}, {m20:.3}, {:.2}\n",
            room.dims_m,
            room.absorption,
            m30 / eyring
        );
        let off = |m: f64| (m / eyring - 1.0).abs();
        if off(m30) > 0.15 || off(m20) > 0.15 || off(m30) > 0.05 || off(m20) > 0.05 {
            failures.push(room.dims_m);
        }
    }
    assert!(failures.is_empty(), "{failures:?}\n{table}");
    println!("{table}");
}

#[test]
fn pure_images_decay_slower_than_eyring_and_follow_the_image_source_decay() {
    // The pure image-source response (LateField::Images), kept to show what the diffuse
    // tail changes. Eyring's formula assumes a diffuse field; a shoebox with specular walls
    // is not diffuse: its decay starts at Eyring's rate and slows as the directions that
    // meet few walls take over (Lehmann & Johansson, JASA 124(1), 2008, from memory), so
    // the measured T30 runs 10-65 % over Eyring's figure and a 15 % band around Eyring
    // cannot hold for the hall. What must hold:
    // - T30 >= Eyring (the Schroeder curve's rate is a weighted harmonic mean of the
    //   direction rates, never above their plain mean, Eyring's rate; 2 % allowed for
    //   the fit);
    // - T30 within 10 % of the image-source prediction (lattice-of-images derivation on
    //   `absorption::image_source_rt60`; the direct sound, left out of the prediction,
    //   lengthens measured T30s by a few per cent).
    //
    // Measured (16 kHz, response 1.5 × the prediction long):
    //   room m, alpha        Eyring s  predicted s  T30 s   T30/Eyring
    //   3 × 4 × 2.5, 0.30     0.230     0.266        0.280   1.22
    //   6 × 5 × 3, 0.20       0.516     0.643        0.655   1.27
    //   10 × 8 × 4, 0.35      0.394     0.541        0.560   1.42
    //   4 × 4 × 3, 0.50       0.139     0.155        0.165   1.18
    //   20 × 15 × 6, 0.25     0.988     1.569        1.624   1.64
    //   6 × 4 × 3, 0.164      0.600     0.750        0.773   1.29
    let mut table = String::from("dims m, alpha: Eyring s, predicted s, T30 s, T30/Eyring\n");
    let mut failures = Vec::new();
    for c in ROOMS {
        let (room, at) = case(c);
        let (dims, alpha) = (room.dims_m, room.absorption);
        let eyring = eyring_rt60(dims, alpha, C).unwrap();
        let predicted = image_source_rt60(dims, alpha, C).unwrap();
        let h = impulse_response_with(&room, &at, &images_only(RATE, 1.5 * predicted)).unwrap();
        let measured = t30(&h, RATE);
        table += &format!(
            "{dims:?}, {alpha}: {eyring:.3}, {predicted:.3}, {measured:.3}, {:.2}\n",
            measured / eyring
        );
        if measured < 0.98 * eyring || (measured / predicted - 1.0).abs() > 0.10 {
            failures.push(dims);
        }
    }
    assert!(failures.is_empty(), "{failures:?}\n{table}");
    println!("{table}");
}

#[test]
fn a_room_made_for_an_rt60_measures_that_rt60() {
    // The inverses the room step needs, measured by T30 (Schroeder / ISO 3382-1 as above),
    // within 10 % of the RT60 asked for: alpha_for_rt60_eyring with the default diffuse
    // tail, alpha_for_rt60_image_source with pure images.
    for (dims, t60, s, m) in [
        ([6.0, 4.0, 3.0], 0.6, [2.0, 1.5, 1.7], [4.1, 2.8, 1.4]),
        ([3.0, 4.0, 2.5], 0.3, [1.0, 1.2, 1.4], [2.1, 2.9, 1.1]),
        ([20.0, 15.0, 6.0], 1.2, [4.0, 6.0, 1.8], [12.0, 9.5, 1.5]),
        ([8.0, 3.0, 2.7], 0.9, [1.0, 1.5, 1.5], [5.0, 2.0, 1.2]),
    ] {
        let at = Placement {
            source_m: s,
            mic_m: m,
        };
        let room = |alpha| Shoebox {
            dims_m: dims,
            absorption: alpha,
        };
        let alpha = alpha_for_rt60_eyring(dims, t60, C).unwrap();
        let h = impulse_response(&room(alpha), &at, RATE, 1.5 * t60, C).unwrap();
        let diffuse = t30(&h, RATE);
        let alpha_i = alpha_for_rt60_image_source(dims, t60, C).unwrap();
        let h = impulse_response_with(&room(alpha_i), &at, &images_only(RATE, 1.5 * t60)).unwrap();
        let images = t30(&h, RATE);
        for measured in [diffuse, images] {
            assert!(
                (measured / t60 - 1.0).abs() < 0.10,
                "{dims:?}: asked {t60}, measured {diffuse} (diffuse), {images} (images)"
            );
        }
        println!(
            "{dims:?}: asked {t60} s; diffuse alpha {alpha:.4}, T30 {diffuse:.3} s; \
             images alpha {alpha_i:.4}, T30 {images:.3} s"
        );
    }
}

#[test]
fn the_diffuse_tail_joins_the_images_without_a_step() {
    // The tail is scaled to the image sum's power over the 10 ms before the transition
    // t_x and decays at Eyring's rate. On the final (high-passed) response:
    // - Level: the tail's power over the 60 ms after the crossfade, brought back to t_x
    //   along Eyring's decay, is within 1 dB of the power in the 10 ms before t_x brought
    //   to t_x the same way (measured -0.3 to +0.5 dB; matching the image sum's raw power
    //   with its mean left in would put the tail 0.6 to 4.9 dB too loud in these rooms).
    // - Samples: the largest sample-to-sample difference from 2.5 ms before t_x to 2.5 ms
    //   after the crossfade is no larger than the largest in the 30 ms of image sum before
    //   that (which has decayed less): no click.
    let fs = f64::from(RATE);
    for c in ROOMS {
        let (room, at) = case(c);
        let eyring = eyring_rt60(room.dims_m, room.absorption, C).unwrap();
        let h = impulse_response(&room, &at, RATE, 0.5, C).unwrap();
        let x = (transition_s(room.dims_m, direct_delay_s(&at, C)) * fs).round() as usize;
        let (window, fade) = (
            (MATCH_WINDOW_S * fs).round() as usize,
            (CROSSFADE_S * fs).round() as usize,
        );
        // Power per sample falls by 10^-6 in Eyring's RT60.
        let rate = 6.0 * std::f64::consts::LN_10 / (eyring * fs);
        let at_tx = |from: usize, to: usize| {
            (from..to)
                .map(|i| f64::from(h[i]).powi(2) * (rate * (i as f64 - x as f64)).exp())
                .sum::<f64>()
                / (to - from) as f64
        };
        let before = at_tx(x - window, x);
        let after = at_tx(x + fade, x + fade + (0.060 * fs) as usize);
        let db = 10.0 * (after / before).log10();
        assert!(db.abs() < 1.0, "{:?}: tail {db:.2} dB off", room.dims_m);

        let largest_step = |from: usize, to: usize| {
            h[from..to]
                .windows(2)
                .map(|w| (w[1] - w[0]).abs())
                .fold(0.0f32, f32::max)
        };
        let margin = (0.0025 * fs) as usize;
        let join = largest_step(x - margin, x + fade + margin);
        let images = largest_step(x - margin - (0.030 * fs) as usize, x - margin);
        assert!(join <= images, "{:?}: {join} vs {images}", room.dims_m);
        println!(
            "{:?}: t_x {:.1} ms, tail {db:+.2} dB, largest step {:.2} of the images'",
            room.dims_m,
            x as f64 / fs * 1e3,
            join / images
        );
    }
}

#[test]
fn the_same_room_gives_the_same_response_on_every_run_and_thread() {
    let (room, at) = case(ROOMS[5]);
    let h = impulse_response(&room, &at, RATE, 1.0, C).unwrap();
    let x = (transition_s(room.dims_m, direct_delay_s(&at, C)) * f64::from(RATE)) as usize;
    assert!(h.len() == 16_000 && h[x..].iter().any(|&v| v != 0.0));
    // Identical samples, bit for bit, from four other threads.
    let others: Vec<Vec<f32>> = std::thread::scope(|s| {
        let handles: Vec<_> = (0..4)
            .map(|_| s.spawn(|| impulse_response(&room, &at, RATE, 1.0, C).unwrap()))
            .collect();
        handles.into_iter().map(|t| t.join().unwrap()).collect()
    });
    for o in &others {
        assert!(o.iter().zip(&h).all(|(a, b)| a.to_bits() == b.to_bits()));
    }
    // A shorter response is the longer one's beginning (the noise is drawn from the
    // transition on and the high-pass is causal).
    let short = impulse_response(&room, &at, RATE, 0.3, C).unwrap();
    assert_eq!(short[..], h[..short.len()]);
    // Another microphone position draws another tail: after the transition the two
    // responses are nearly uncorrelated (|r| < 0.1 over 0.1 to 0.5 s; for independent
    // noise over 6 400 samples its standard deviation is 1/80).
    let moved = Placement {
        mic_m: [4.1, 2.8, 1.45],
        ..at
    };
    let g = impulse_response(&room, &moved, RATE, 1.0, C).unwrap();
    let (a, b) = (&h[1600..8000], &g[1600..8000]);
    let dot = |p: &[f32], q: &[f32]| -> f64 {
        p.iter()
            .zip(q)
            .map(|(&u, &v)| f64::from(u) * f64::from(v))
            .sum()
    };
    let r = dot(a, b) / (dot(a, a) * dot(b, b)).sqrt();
    assert!(r.abs() < 0.1, "{r}");
}

#[test]
fn direct_path_arrives_at_its_delay_with_free_field_amplitude() {
    let room = Shoebox {
        dims_m: [6.0, 4.0, 3.0],
        absorption: 0.3,
    };
    // 0.5 m apart, every wall at least 1.5 m from either point: the first reflection comes
    // 2.5 m of path later (118 samples), clear of the 16-sample kernel.
    let at = Placement {
        source_m: [3.0, 2.0, 1.5],
        mic_m: [3.3, 2.4, 1.5],
    };
    let r = 0.5;
    // Spherical spreading: pressure of a unit point source at r is 1/(4π r) (free-field
    // Green's function, any acoustics textbook).
    let free_field = 1.0 / (4.0 * PI * r);

    // c = 320 m/s puts the direct path on a whole sample (25), where the windowed sinc is
    // a unit pulse. Without the high-pass the peak is exactly 1/(4π r).
    let mut p = IrParams {
        c_m_s: 320.0,
        highpass_hz: None,
        ..IrParams::new(RATE, 0.2)
    };
    assert!((direct_delay_s(&at, 320.0) * f64::from(RATE) - 25.0).abs() < 1e-9);
    let raw = impulse_response_with(&room, &at, &p).unwrap();
    assert_eq!(argmax_abs(&raw), 25);
    assert!(
        (f64::from(raw[25]) / free_field - 1.0).abs() < 1e-5,
        "{}",
        raw[25]
    );
    // With the high-pass (causal, nothing before the direct path) the peak is scaled by the
    // filter's first tap b0 = 1 / (1 + √2 K + K²), K = tan(π fc / fs) (bilinear-transform
    // Butterworth, textbook).
    p.highpass_hz = Some(HIGHPASS_HZ);
    let hp = impulse_response_with(&room, &at, &p).unwrap();
    let b0 = highpass_coefficients(HIGHPASS_HZ, f64::from(RATE))[0];
    assert!((0.98..0.99).contains(&b0));
    assert_eq!(argmax_abs(&hp), 25);
    assert!(
        (f64::from(hp[25]) / (b0 * free_field) - 1.0).abs() < 1e-5,
        "{}",
        hp[25]
    );

    // At c = 343 m/s the delay is 23.32 samples: the largest sample is the nearest whole
    // one, and the pulse's centroid sits at the fractional delay (a band-limited pulse's
    // samples keep its centre of mass: Poisson summation), so the image is not rounded.
    let at_s = direct_delay_s(&at, C) * f64::from(RATE);
    assert!((at_s - 23.3236).abs() < 1e-4);
    let p = IrParams {
        highpass_hz: None,
        ..IrParams::new(RATE, 0.2)
    };
    let h = impulse_response_with(&room, &at, &p).unwrap();
    assert!((argmax_abs(&h) as f64 - at_s).abs() <= 1.0);
    assert_eq!(argmax_abs(&h), at_s.round() as usize);
    let span = &h[8..40]; // 23.3 ± 16 samples
    let (m0, m1) = span
        .iter()
        .enumerate()
        .fold((0.0, 0.0), |(m0, m1), (i, &v)| {
            (m0 + f64::from(v), m1 + (i + 8) as f64 * f64::from(v))
        });
    assert!((m1 / m0 - at_s).abs() < 0.01, "centroid {}", m1 / m0);
    // Its area is the image's amplitude (the kernel passes DC with gain 1).
    assert!((m0 / free_field - 1.0).abs() < 0.01, "{m0}");
}

#[test]
fn the_floor_reflection_arrives_at_the_image_distance() {
    // Source and mic 1 m above the floor, 2 m apart, far from the other walls: the floor
    // image is at z = -1, so its path is sqrt(2² + 2²) = 2.828 m (mirror image geometry,
    // textbook); every other image is at least 8 m away. It carries one reflection:
    // amplitude beta / (4π d), beta = sqrt(1 - alpha).
    let alpha = 0.36;
    let room = Shoebox {
        dims_m: [8.0, 8.0, 6.0],
        absorption: alpha,
    };
    let at = Placement {
        source_m: [4.0, 3.0, 1.0],
        mic_m: [4.0, 5.0, 1.0],
    };
    let p = IrParams {
        highpass_hz: None,
        ..IrParams::new(RATE, 0.05)
    };
    let h = impulse_response_with(&room, &at, &p).unwrap();
    let fs = f64::from(RATE);
    let direct = 2.0 / C * fs; // 93.3
    let floor_d = 8f64.sqrt();
    let floor = floor_d / C * fs; // 131.9
    let next = 8.0 / C * fs; // 373.2
    let after_direct = direct.ceil() as usize + 17;
    let first = after_direct + argmax_abs(&h[after_direct..next as usize - 17]);
    assert!(
        (first as f64 - floor).abs() <= 0.5 + 1e-9,
        "{first} vs {floor}"
    );
    // Its centroid and area, as for the direct path.
    let k = floor.floor() as usize;
    let span = &h[k - 15..=k + 16];
    let m0: f64 = span.iter().map(|&v| f64::from(v)).sum();
    let m1: f64 = span
        .iter()
        .enumerate()
        .map(|(i, &v)| (k - 15 + i) as f64 * f64::from(v))
        .sum();
    assert!((m1 / m0 - floor).abs() < 0.01, "centroid {}", m1 / m0);
    let expected = (1.0 - alpha).sqrt() / (4.0 * PI * floor_d);
    assert!((m0 / expected - 1.0).abs() < 0.01, "{m0} vs {expected}");
    // Between the direct pulse and the floor pulse kernels the response is (almost) silent.
    let gap = &h[(direct as usize + 17)..(floor as usize - 16)];
    assert!(
        gap.iter().all(|v| v.abs() < 1e-3 * expected as f32),
        "{gap:?}"
    );
}

#[test]
fn sabine_and_eyring_by_hand_and_their_inverses() {
    // 10 × 8 × 3 m: V = 240 m³, S = 2 (80 + 24 + 30) = 268 m². K = 24 ln 10 / 343
    // = 55.2620 / 343 = 0.161114 s/m (Sabine's "0.161"). K V = 38.6673 s·m².
    // Sabine, alpha 0.2: 38.6673 / (268 · 0.2) = 0.72141 s.
    // Eyring, alpha 0.2: -ln 0.8 = 0.223144; 38.6673 / (268 · 0.223144) = 0.64658 s.
    let d = [10.0, 8.0, 3.0];
    assert!((sabine_constant(C) - 0.161114).abs() < 1e-6);
    assert!((sabine_rt60(d, 0.2, C).unwrap() - 0.72141).abs() < 1e-5);
    assert!((eyring_rt60(d, 0.2, C).unwrap() - 0.64658).abs() < 1e-5);
    // Inverses, by hand for 0.5 s: Sabine alpha = 38.6673 / (268 · 0.5) = 0.28856;
    // Eyring alpha = 1 - exp(-38.6673 / (268 · 0.5)) = 1 - exp(-0.288562) = 0.25066.
    assert!((alpha_for_rt60_sabine(d, 0.5, C).unwrap() - 0.28856).abs() < 1e-5);
    assert!((alpha_for_rt60_eyring(d, 0.5, C).unwrap() - 0.25066).abs() < 1e-5);
    // Round trips over a range of absorptions and rooms.
    for dims in [d, [3.0, 4.0, 2.5], [20.0, 15.0, 6.0]] {
        for alpha in [0.01, 0.1, 0.3, 0.7, 0.99] {
            let ts = sabine_rt60(dims, alpha, C).unwrap();
            let te = eyring_rt60(dims, alpha, C).unwrap();
            assert!((alpha_for_rt60_sabine(dims, ts, C).unwrap() - alpha).abs() < 1e-12);
            assert!((alpha_for_rt60_eyring(dims, te, C).unwrap() - alpha).abs() < 1e-12);
            // Eyring is always the shorter (-ln(1 - a) > a).
            assert!(te < ts);
        }
    }
    // Sabine's floor: alpha = 1 still gives K V / S = 0.14428 s here, so 0.1 s is
    // impossible, and the message says what the floor is.
    let e = alpha_for_rt60_sabine(d, 0.1, C).unwrap_err();
    assert!(matches!(e, RoomError::Rt60Unreachable { .. }));
    assert!(e.to_string().contains("0.1443 s"), "{e}");
    assert!(alpha_for_rt60_sabine(d, 0.14429, C).is_ok());
    // Eyring reaches every positive time (alpha -> 1 as T -> 0), but not 0 or below.
    let a = alpha_for_rt60_eyring(d, 0.01, C).unwrap();
    assert!(a > 0.99999 && a < 1.0);
    for t in [0.0, -1.0, f64::NAN, f64::INFINITY] {
        assert!(matches!(
            alpha_for_rt60_eyring(d, t, C),
            Err(RoomError::Rt60Unreachable { .. })
        ));
        assert!(alpha_for_rt60_sabine(d, t, C).is_err());
        assert!(alpha_for_rt60_image_source(d, t, C).is_err());
    }
}

#[test]
fn bad_input_is_refused_with_a_clear_error() {
    let room = Shoebox {
        dims_m: [5.0, 4.0, 3.0],
        absorption: 0.3,
    };
    let at = Placement {
        source_m: [1.0, 1.0, 1.0],
        mic_m: [2.0, 2.0, 1.5],
    };
    let ir = |room: &Shoebox, at: &Placement| impulse_response(room, at, RATE, 0.3, C);
    assert!(ir(&room, &at).is_ok());

    let outside = Placement {
        mic_m: [2.0, 4.5, 1.5],
        ..at
    };
    let e = ir(&room, &outside).unwrap_err();
    assert_eq!(
        e,
        RoomError::Outside {
            what: "microphone",
            axis: 'y',
            position: 4.5,
            length: 4.0
        }
    );
    assert_eq!(
        e.to_string(),
        "microphone at y = 4.5 m is outside the room (0 to 4 m along y)"
    );
    let below = Placement {
        source_m: [1.0, 1.0, -0.1],
        ..at
    };
    assert!(matches!(
        ir(&room, &below),
        Err(RoomError::Outside { what: "source", .. })
    ));

    for alpha in [0.0, 1.2, -0.1, f64::NAN] {
        let bad = Shoebox {
            absorption: alpha,
            ..room
        };
        assert!(
            matches!(ir(&bad, &at), Err(RoomError::Absorption(_))),
            "{alpha}"
        );
        assert!(eyring_rt60(room.dims_m, alpha, C).is_err());
    }
    assert_eq!(
        ir(
            &Shoebox {
                absorption: 1.2,
                ..room
            },
            &at
        )
        .unwrap_err()
        .to_string(),
        "absorption coefficient 1.2 is outside (0, 1]"
    );
    // Fully absorbing walls are allowed: only the direct path is left.
    let anechoic = ir(
        &Shoebox {
            absorption: 1.0,
            ..room
        },
        &at,
    )
    .unwrap();
    let e: f64 = anechoic.iter().map(|&v| f64::from(v) * f64::from(v)).sum();
    let r = (1.0f64 + 1.0 + 0.25).sqrt();
    assert!(
        (e.sqrt() * 4.0 * PI * r - 1.0).abs() < 0.03,
        "{}",
        e.sqrt() * 4.0 * PI * r
    );

    let e = ir(
        &Shoebox {
            dims_m: [5.0, -4.0, 3.0],
            ..room
        },
        &at,
    )
    .unwrap_err();
    assert_eq!(
        e,
        RoomError::Dimension {
            axis: 'y',
            value: -4.0
        }
    );
    assert!(e.to_string().contains("room dimension y is -4 m"));
    assert!(sabine_rt60([0.0, 4.0, 3.0], 0.3, C).is_err());

    let same = Placement {
        mic_m: at.source_m,
        ..at
    };
    assert!(matches!(
        ir(&room, &same),
        Err(RoomError::Coincident { .. })
    ));
    // A response shorter than the direct path would be silent.
    assert!(matches!(
        impulse_response(&room, &at, RATE, 0.001, C),
        Err(RoomError::Parameter {
            name: "max_len_s",
            ..
        })
    ));
    assert!(impulse_response(&room, &at, 0, 0.3, C).is_err());
    assert!(impulse_response(&room, &at, RATE, 0.3, 0.0).is_err());
    let p = IrParams {
        highpass_hz: Some(9000.0),
        ..IrParams::new(RATE, 0.3)
    };
    assert!(matches!(
        impulse_response_with(&room, &at, &p),
        Err(RoomError::Parameter {
            name: "highpass_hz",
            ..
        })
    ));

    // A long pure-image response in a tiny, barely absorbing room is refused, not left to
    // run: 2 s reach 686 m, 4π 686³ / (3 · 0.125) = 1.08e10 images.
    let closet = Shoebox {
        dims_m: [0.5; 3],
        absorption: 0.001,
    };
    let near = Placement {
        source_m: [0.1; 3],
        mic_m: [0.4; 3],
    };
    let e = impulse_response_with(&closet, &near, &images_only(RATE, 2.0)).unwrap_err();
    assert!(matches!(e, RoomError::TooManyImages { .. }), "{e}");
    assert!(e.to_string().contains("1.1e10 images"), "{e}");
    // With the diffuse tail only the first 55 ms are images (19.2 m of reach, 2.4e5
    // images), so the same response is made.
    let h = impulse_response(&closet, &near, RATE, 2.0, C).unwrap();
    assert_eq!(h.len(), 32_000);
    assert!(h.iter().all(|v| v.is_finite()));

    // The wall gap: 1.5 m from both walls leaves no room in 3 m of height.
    let e = place(&room, 1.5, [0.5; 6]).unwrap_err();
    assert_eq!(
        e,
        RoomError::RoomTooSmall {
            axis: 'z',
            length: 3.0,
            gap: 1.5
        }
    );
    assert!(
        e.to_string()
            .contains("too small to keep 1.5 m from both walls")
    );
    assert!(place(&room, -0.1, [0.5; 6]).is_err());
    assert!(place(&room, 0.5, [0.5, 0.5, 0.5, 0.5, 1.0, 0.5]).is_err());
    assert!(matches!(
        place(&room, 0.5, [0.5; 6]),
        Err(RoomError::Coincident { .. })
    ));
    let e = retake::room::check_placement(&room, &at, 1.2).unwrap_err();
    assert_eq!(
        e,
        RoomError::TooCloseToWall {
            what: "source",
            axis: 'x',
            distance: 1.0,
            gap: 1.2
        }
    );
}

#[test]
fn placements_keep_the_gap_and_follow_the_draws() {
    let room = Shoebox {
        dims_m: [6.0, 4.0, 3.0],
        absorption: 0.3,
    };
    let gap = 0.5;
    let p = place(&room, gap, [0.0, 0.0, 0.0, 0.999_999, 0.999_999, 0.999_999]).unwrap();
    assert_eq!(p.source_m, [0.5, 0.5, 0.5]);
    for k in 0..3 {
        assert!((p.mic_m[k] - (room.dims_m[k] - gap)).abs() < 1e-5);
    }
    let u = [0.1, 0.7, 0.3, 0.9, 0.2, 0.5];
    let p = place(&room, gap, u).unwrap();
    assert_eq!(p, place(&room, gap, u).unwrap());
    // gap + u (L - 2 gap): x of the source = 0.5 + 0.1 · 5 = 1.0.
    assert!((p.source_m[0] - 1.0).abs() < 1e-12);
    assert!((p.mic_m[1] - (0.5 + 0.2 * 3.0)).abs() < 1e-12);
    assert!(retake::room::check_placement(&room, &p, gap).is_ok());
}

#[test]
fn the_high_pass_removes_the_dc_build_up() {
    // Every image adds a positive pulse, so the raw response's sum (its gain at 0 Hz) is
    // large next to its broadband gain sqrt(Σh²) (Parseval: the mean of |H(f)|² over
    // frequency is Σh²); the diffuse tail carries that mean on. The high-pass has a double
    // zero at DC, so what is left of the sum is the filter's state when the response ends.
    // Bound: |Σh| below 1 % of sqrt(Σh²) (-40 dB), against more than 5 times sqrt(Σh²)
    // without the filter. Measured for 1 s responses: filtered at most 0.45 % (pure
    // images, the 20 m hall) and 0.006 % (diffuse tail); raw 12 to 64 times (images) and
    // 12 to 61 times (diffuse).
    let ratio = |h: &[f32]| {
        let sum: f64 = h.iter().map(|&v| f64::from(v)).sum();
        let energy: f64 = h.iter().map(|&v| f64::from(v) * f64::from(v)).sum();
        sum.abs() / energy.sqrt()
    };
    for c in ROOMS {
        let (room, at) = case(c);
        for late in [LateField::Diffuse, LateField::Images] {
            let p = IrParams {
                late,
                ..IrParams::new(RATE, 1.0)
            };
            let filtered = impulse_response_with(&room, &at, &p).unwrap();
            let p = IrParams {
                highpass_hz: None,
                ..p
            };
            let raw = impulse_response_with(&room, &at, &p).unwrap();
            let (f, r) = (ratio(&filtered), ratio(&raw));
            assert!(
                f < 0.01 && r > 5.0,
                "{:?} {late:?}: filtered {f}, raw {r}",
                room.dims_m
            );
            println!(
                "{:?} {late:?}: |sum| / sqrt(energy) filtered {f:.5}, raw {r:.1}",
                room.dims_m
            );
        }
    }
}

#[test]
fn the_response_ends_when_every_later_image_is_60_db_down() {
    // 4 × 4 × 3 m at alpha 0.5: an image d metres away has crossed at least d / 4 - 3
    // walls, so it is 60 dB down (0.5ⁿ <= 10⁻⁶) once d >= 4 (3 + 6 ln 10 / ln 2) = 91.73 m,
    // i.e. after 0.26743 s at 343 m/s: 4279 samples at 16 kHz, not the 1 s asked for.
    let room = Shoebox {
        dims_m: [4.0, 4.0, 3.0],
        absorption: 0.5,
    };
    let at = Placement {
        source_m: [1.1, 2.7, 1.5],
        mic_m: [2.9, 1.3, 1.2],
    };
    let h = impulse_response(&room, &at, RATE, 1.0, C).unwrap();
    assert_eq!(h.len(), 4279);
    // The same end with pure images: the rule is the images', whatever follows them. The
    // diffuse tail has by then fallen 60 dB × (0.267 - 0.050) / 0.139 = 94 dB below its
    // start (Eyring's RT60 here is 0.139 s).
    let images = impulse_response_with(&room, &at, &images_only(RATE, 1.0)).unwrap();
    assert_eq!(images.len(), 4279);
    let p = IrParams {
        floor_db: f64::INFINITY,
        ..IrParams::new(RATE, 1.0)
    };
    let full = impulse_response_with(&room, &at, &p).unwrap();
    assert_eq!(full.len(), 16_000);
    // What was cut is negligible: below -60 dB of the whole response's energy.
    let e = |x: &[f32]| x.iter().map(|&v| f64::from(v) * f64::from(v)).sum::<f64>();
    assert!(
        e(&full[4279..]) < 1e-6 * e(&full),
        "{}",
        e(&full[4279..]) / e(&full)
    );
}

#[test]
fn the_cache_returns_the_same_response() {
    let cache = RoomCache::default();
    let room = Shoebox {
        dims_m: [5.0, 4.0, 3.0],
        absorption: 0.4,
    };
    let at = Placement {
        source_m: [1.0, 1.0, 1.0],
        mic_m: [2.0, 2.0, 1.5],
    };
    let a = cache.get(&room, &at, RATE, 0.3, C).unwrap();
    let b = cache.get(&room, &at, RATE, 0.3, C).unwrap();
    assert!(std::sync::Arc::ptr_eq(&a, &b));
    assert_eq!(*a, impulse_response(&room, &at, RATE, 0.3, C).unwrap());
    let other = Shoebox {
        absorption: 0.41,
        ..room
    };
    let c = cache.get(&other, &at, RATE, 0.3, C).unwrap();
    assert!(!std::sync::Arc::ptr_eq(&a, &c));
    assert_eq!(cache.len(), 2);
}

/// Timing of one room (6 × 4 × 3 m, RT60 0.6 s by Eyring, 1 s at 16 kHz), diffuse tail
/// and pure images. Run with
/// `cargo test --release --test room_ism -- --ignored --nocapture`.
#[test]
#[ignore]
fn timing_one_room() {
    let dims = [6.0, 4.0, 3.0];
    let alpha = alpha_for_rt60_eyring(dims, 0.6, C).unwrap();
    let room = Shoebox {
        dims_m: dims,
        absorption: alpha,
    };
    let at = Placement {
        source_m: [2.0, 1.5, 1.7],
        mic_m: [4.1, 2.8, 1.4],
    };
    for late in [LateField::Diffuse, LateField::Images] {
        let p = IrParams {
            late,
            ..IrParams::new(RATE, 1.0)
        };
        let runs = 20;
        let t = std::time::Instant::now();
        let mut len = 0;
        for _ in 0..runs {
            len = impulse_response_with(&room, &at, &p).unwrap().len();
        }
        println!(
            "{late:?}, alpha {alpha:.4}: {len} samples in {:.2} ms per room",
            t.elapsed().as_secs_f64() / f64::from(runs) * 1e3
        );
    }
}
