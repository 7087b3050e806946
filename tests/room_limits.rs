//! Simulated rooms at the limits of the recipe's ranges (docs/recipe.md: every dimension in
//! [0.5, 200] m, `rt60_s` in [0.05, 10] s, `max_ir_s` up to 20 s): long corridors, thin
//! tubes, flat plates, the largest and the smallest room. Every placement must give a
//! finite response whose direct path is where the geometry puts it, and the measured RT60
//! (Schroeder integration with an ISO 3382-1 T30 fit, `retake::dsp::rt60`) must be the one
//! asked for wherever the diffuse tail carries the decay. A take whose direct path does
//! not fit in `max_ir_s` is a reject naming that key.

mod common;

use std::f64::consts::PI;

use common::{run_recipe, write_wav_float};
use retake::dsp::rt60::decay_times;
use retake::room::absorption::alpha_for_rt60_eyring;
use retake::room::late::transition_s;
use retake::room::{Shoebox, direct_delay_s, distance_m, impulse_response, place};

const C: f64 = 343.0;
const RATE: u32 = 16_000;

/// The criterion of tests/room_step.rs for measured RT60s: within 10 % of the figure.
const RT60_TOLERANCE: f64 = 0.10;

#[test]
fn a_long_corridor_gives_a_finite_take_every_time() {
    // The reported case: a 3 × 30 × 3 m aisle, rt60_s = 0.6. Before the fix about half the
    // takes were rejected ("sample 0 is not finite") whenever source and microphone stood
    // more than 50 ms of travel (17 m) apart. Now every take is made, its direct path is
    // trimmed by the delay the geometry gives, and its RT60 is the one asked for.
    let tmp = tempfile::tempdir().unwrap();
    let n = RATE as usize;
    let x: Vec<f32> = (0..n)
        .map(|i| if i % 4000 == 100 { 0.5 } else { 0.0 })
        .collect();
    write_wav_float(&tmp.path().join("clicks.wav"), RATE, &x);
    let m = tmp.path().join("in.jsonl");
    std::fs::write(
        &m,
        r#"{"id": "aisle", "audio": "clicks.wav", "lines": [{"start": 0.1, "end": 0.9, "text": "four clicks"}]}"#
            .to_string()
            + "\n",
    )
    .unwrap();
    let recipe = "takes = 24\nseed = 11\n[[step]]\ndo = \"room\"\nwidth_m = 3\nlength_m = 30\n\
                  height_m = 3\nrt60_s = 0.6\n";
    let (code, err, takes) = run_recipe(tmp.path(), recipe, &m);
    assert_eq!(code, Some(0), "{err}");
    assert_eq!(takes.len(), 24, "{err}");
    let (mut far, mut measured) = (0, 0);
    for take in takes
        .iter()
        .filter(|t| t["origin"]["take"].as_u64() != Some(0))
    {
        let rec = &take["origin"]["steps"][0];
        let s: Vec<f64> = serde_json::from_value(rec["drawn"]["source_m"].clone()).unwrap();
        let mic: Vec<f64> = serde_json::from_value(rec["drawn"]["mic_m"].clone()).unwrap();
        let d = (0..3).map(|k| (s[k] - mic[k]).powi(2)).sum::<f64>().sqrt();
        far += usize::from(d / C > 0.050);
        // The direct path is trimmed at the sample nearest its geometric delay d / c (the
        // largest sample can be a pile of grazing reflections tens of ms later).
        let delay = rec["measured"]["direct_delay_s"].as_f64().unwrap();
        assert!((delay - d / C).abs() <= 0.5 / f64::from(RATE), "{rec}");
        // RT60 within 10 % (tests/room_step.rs's criterion) wherever ISO 3382-1 would
        // measure it: at least d_min = 2 sqrt(V / (c T)) = 2.3 m from the source (the
        // standard's minimum source-receiver distance, from memory), so the direct sound
        // does not swamp the decay curve.
        let t60 = rec["measured"]["rt60_s"].as_f64().unwrap();
        if d >= 2.0 * (270.0 / (C * 0.6)).sqrt() {
            assert!((t60 / 0.6 - 1.0).abs() < RT60_TOLERANCE, "{rec}");
            measured += 1;
        }
    }
    assert!(measured >= 12, "{measured}");
    // The draw covered the case that failed.
    assert!(far >= 2, "only {far} far placements");
}

/// (dims m, RT60 asked s, wall gap m) at the limits of the documented ranges.
const GRID: &[([f64; 3], f64, f64)] = &[
    ([3.0, 30.0, 3.0], 0.6, 0.5),
    ([3.0, 200.0, 3.0], 0.6, 0.5),
    ([3.0, 200.0, 3.0], 3.0, 0.5),
    ([0.5, 200.0, 0.5], 0.3, 0.1),
    ([0.5, 200.0, 0.5], 2.0, 0.1),
    ([0.5, 200.0, 0.5], 10.0, 0.1),
    ([200.0, 0.5, 0.5], 10.0, 0.1),
    ([200.0, 200.0, 0.5], 0.5, 0.1),
    ([200.0, 200.0, 0.5], 10.0, 0.1),
    ([200.0, 0.5, 200.0], 1.0, 0.1),
    ([200.0, 200.0, 3.0], 1.0, 0.5),
    ([200.0, 200.0, 200.0], 3.0, 0.5),
    ([200.0, 200.0, 200.0], 10.0, 0.5),
    ([0.5, 0.5, 0.5], 0.05, 0.1),
    ([0.5, 0.5, 0.5], 10.0, 0.1),
    ([10.0, 8.0, 4.0], 0.8, 0.5),
];

/// Placement draws: opposite corners (the longest direct path), the middle, two others.
const DRAWS: [[f64; 6]; 4] = [
    [0.0, 0.0, 0.0, 0.999_999, 0.999_999, 0.999_999],
    [0.5, 0.5, 0.5, 0.5, 0.6, 0.4],
    [0.2, 0.1, 0.7, 0.9, 0.8, 0.3],
    [0.9, 0.35, 0.2, 0.6, 0.45, 0.8],
];

#[test]
fn rooms_at_the_limits_give_finite_responses_with_the_asked_rt60() {
    // For every room and placement:
    // - every sample is finite and the response is not silent;
    // - the direct path is there: the response summed over ±1 ms around its delay d/c is
    //   at least 0.6 of its amplitude 1/(4π d). Every image adds a positive pulse whose
    //   kernel sums to 1 (within 2 % over ±1 ms), nothing arrives before the direct path,
    //   and the 40 Hz high-pass keeps 0.675 of a pulse's sum 1 ms after it (the step
    //   response of a 2nd-order Butterworth high-pass, e^(-at)(cos at - sin at) with
    //   a = 2π·40 Hz/√2). A sum, not the nearest sample: in a long
    //   corridor many grazing reflections arrive within a sample of the direct path, and
    //   their band-limited pulses can pull any single sample down;
    // - where the Schroeder curve is still above -5 dB at the transition t_x (so the whole
    //   T30 range, -5 to -35 dB, lies in the diffuse tail, which decays at Eyring's rate),
    //   the measured T30 is within 10 % of the RT60 asked for (the criterion of
    //   tests/room_step.rs). Where it is not, the early exact images carry the decay and
    //   their geometry decides it (a tube or a pair of plates guides the sound, which
    //   Eyring's diffuse-field formula does not describe); those are listed, not checked.
    let mut table = String::from(
        "dims m, RT60 asked s, distance m, t_x s, EDC at t_x dB, T30 s, T20 s, checked\n",
    );
    let (mut failures, mut checked) = (Vec::new(), 0);
    for &(dims, t60, gap) in GRID {
        let alpha = alpha_for_rt60_eyring(dims, t60, C).unwrap();
        let room = Shoebox {
            dims_m: dims,
            absorption: alpha,
        };
        for u in DRAWS {
            let at = place(&room, gap, u).unwrap();
            let d = distance_m(&at);
            let delay = direct_delay_s(&at, C);
            let len_s = (delay + 1.6 * t60 + 0.1).min(20.0);
            let h = impulse_response(&room, &at, RATE, len_s, C).unwrap();
            let label = format!("{dims:?} T {t60} at {d:.2} m");
            if let Some(i) = h.iter().position(|v| !v.is_finite()) {
                failures.push(format!("{label}: sample {i} is {}", h[i]));
                continue;
            }
            let centre = (delay * f64::from(RATE)).round() as usize;
            let at_direct: f64 = h[centre.saturating_sub(16)..(centre + 17).min(h.len())]
                .iter()
                .map(|&v| f64::from(v))
                .sum();
            let want = 1.0 / (4.0 * PI * d);
            if at_direct < 0.6 * want {
                failures.push(format!("{label}: direct path {at_direct:e}, want {want:e}"));
            }
            let mut edc = vec![0.0f64; h.len() + 1];
            for i in (0..h.len()).rev() {
                edc[i] = edc[i + 1] + f64::from(h[i]).powi(2);
            }
            let peak = (delay * f64::from(RATE)).round() as usize;
            let tx = transition_s(dims, delay);
            let tx_i = ((tx * f64::from(RATE)).round() as usize).min(h.len());
            let edc_tx_db = 10.0 * (edc[tx_i] / edc[peak.saturating_sub(16)]).log10();
            let fit = decay_times(&h, RATE);
            let check = edc_tx_db > -5.0;
            table += &format!(
                "{dims:?}, {t60}, {d:.2}, {tx:.3}, {edc_tx_db:.1}, {:?}, {:?}, {check}\n",
                fit.t30_s.map(|t| (t * 1e3).round() / 1e3),
                fit.t20_s.map(|t| (t * 1e3).round() / 1e3)
            );
            if check {
                checked += 1;
                match fit.t30_s {
                    Some(m) if (m / t60 - 1.0).abs() < RT60_TOLERANCE => {}
                    other => failures.push(format!("{label}: T30 {other:?}, asked {t60}")),
                }
            }
        }
    }
    println!("{table}");
    assert!(failures.is_empty(), "{failures:#?}\n{table}");
    // The condition is not vacuous: most of the grid is checked.
    assert!(
        checked >= GRID.len() * DRAWS.len() / 3,
        "{checked}\n{table}"
    );
    println!("{checked} of {} checked", GRID.len() * DRAWS.len());
}

#[test]
fn a_direct_path_longer_than_max_ir_s_is_a_reject_naming_the_key() {
    // A 200 m hall with a 0.1 s response: source and microphone drawn more than 34.3 m
    // apart cannot be simulated; the reject says which key limits it.
    let tmp = tempfile::tempdir().unwrap();
    write_wav_float(
        &tmp.path().join("a.wav"),
        RATE,
        &vec![0.1f32; RATE as usize],
    );
    let m = tmp.path().join("in.jsonl");
    std::fs::write(
        &m,
        "{\"id\": \"hall\", \"audio\": \"a.wav\", \"text\": \"a hall\"}\n",
    )
    .unwrap();
    let recipe = "takes = 3\nseed = 2\n[[step]]\ndo = \"room\"\nwidth_m = 200\nlength_m = 200\n\
                  height_m = 10\nabsorption = 0.5\nmax_ir_s = 0.1\n";
    let (code, err, takes) = run_recipe(tmp.path(), recipe, &m);
    assert_eq!(code, Some(3), "{err}");
    assert!(takes.is_empty());
    let rejects = common::read_jsonl(&tmp.path().join("out").join("rejects.jsonl"));
    assert_eq!(rejects.len(), 1, "{rejects:?}");
    let reason = rejects[0].to_string();
    assert!(
        reason.contains("max_ir_s = 0.1") && reason.contains("direct path"),
        "{reason}"
    );
}
