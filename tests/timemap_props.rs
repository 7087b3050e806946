//! Property tests for time maps: composition is associative, order is kept, every mapped
//! span lies inside the output duration, and inverse undoes a strictly increasing map.

use proptest::prelude::*;
use retake::timemap::TimeMap;

/// A random monotone map on [0, d_in] with some flat pieces (cut-out stretches).
fn arb_map(d_in: f64) -> impl Strategy<Value = TimeMap> {
    (prop::collection::vec(
        (0.001f64..1.0, 0.0f64..3.0, prop::bool::weighted(0.15)),
        1..8,
    ),)
        .prop_map(move |(pieces,)| {
            let total: f64 = pieces.iter().map(|p| p.0).sum();
            let mut knots = vec![(0.0, 0.0)];
            let (mut x, mut y) = (0.0, 0.0);
            for (w, slope, flat) in pieces {
                let dx = d_in * w / total;
                x += dx;
                y += if flat { 0.0 } else { dx * slope.max(0.05) };
                knots.push((x, y));
            }
            knots.last_mut().unwrap().0 = d_in;
            TimeMap::from_knots(knots).unwrap()
        })
}

/// Three maps that chain: each one's domain is the previous one's range.
fn arb_chain() -> impl Strategy<Value = (TimeMap, TimeMap, TimeMap)> {
    (0.5f64..30.0)
        .prop_flat_map(arb_map)
        .prop_flat_map(|a| {
            let d = a.range().1.max(1e-3);
            (Just(a), arb_map(d))
        })
        .prop_flat_map(|(a, b)| {
            let d = b.range().1.max(1e-3);
            (Just(a), Just(b), arb_map(d))
        })
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * (1.0 + a.abs().max(b.abs()))
}

proptest! {
    #[test]
    fn composition_is_associative((a, b, c) in arb_chain(), ts in prop::collection::vec(0.0f64..1.0, 1..20)) {
        let left = a.then(&b).then(&c);
        let right = a.then(&b.then(&c));
        let d = a.domain().1;
        for u in ts {
            let t = u * d;
            prop_assert!(close(left.apply(t), right.apply(t)), "t={t}: {} vs {}", left.apply(t), right.apply(t));
            // And both equal applying the maps one after another.
            prop_assert!(close(left.apply(t), c.apply(b.apply(a.apply(t)))));
        }
    }

    #[test]
    fn word_order_is_kept((a, b, _c) in arb_chain(), mut ts in prop::collection::vec(0.0f64..1.0, 2..40)) {
        let m = a.then(&b);
        ts.sort_by(f64::total_cmp);
        let d = a.domain().1;
        let mapped: Vec<f64> = ts.iter().map(|u| m.apply(u * d)).collect();
        for w in mapped.windows(2) {
            prop_assert!(w[0] <= w[1], "{} > {}", w[0], w[1]);
        }
    }

    #[test]
    fn mapped_spans_lie_inside_the_output((a, b, _c) in arb_chain(), s in -1.0f64..2.0, len in 0.0f64..2.0) {
        let m = a.then(&b);
        let d_in = a.domain().1;
        let d_out = m.range().1;
        let (start, end) = m.apply_span(s * d_in, (s + len) * d_in);
        prop_assert!(start >= 0.0 && end <= d_out + 1e-12 && start <= end, "{start}..{end} in {d_out}");
    }

    #[test]
    fn inverse_undoes_a_strictly_increasing_map(d in 0.5f64..20.0, slopes in prop::collection::vec(0.2f64..3.0, 1..6), u in 0.0f64..1.0) {
        let n = slopes.len();
        let mut knots = vec![(0.0, 0.0)];
        for (i, s) in slopes.iter().enumerate() {
            let (x0, y0) = *knots.last().unwrap();
            let x = d * (i + 1) as f64 / n as f64;
            knots.push((x, y0 + (x - x0) * s));
        }
        let m = TimeMap::from_knots(knots).unwrap();
        let inv = m.inverse().unwrap();
        let t = u * d;
        prop_assert!(close(inv.apply(m.apply(t)), t));
    }
}

proptest! {
    /// The manifest form (two columns) reads back bit for bit, and the older list of pairs
    /// reads as the same map; columns of different lengths never read.
    #[test]
    fn json_columns_round_trip_and_pairs_read_the_same(
        m in (0.5f64..30.0).prop_flat_map(arb_map),
        drop in 0usize..2,
    ) {
        let text = serde_json::to_string(&m).unwrap();
        let value: serde_json::Value = serde_json::from_str(&text).unwrap();
        let (source, take) = (value["source"].as_array().unwrap(), value["take"].as_array().unwrap());
        prop_assert_eq!(source.len(), m.knots().len());
        prop_assert_eq!(take.len(), m.knots().len());
        let back: TimeMap = serde_json::from_str(&text).unwrap();
        prop_assert_eq!(&back, &m);
        let pairs: Vec<[f64; 2]> = m.knots().iter().map(|&(x, y)| [x, y]).collect();
        let old: TimeMap = serde_json::from_str(&serde_json::to_string(&pairs).unwrap()).unwrap();
        prop_assert_eq!(&old, &m);
        let mut short = value.clone();
        let key = if drop == 0 { "source" } else { "take" };
        short[key].as_array_mut().unwrap().pop();
        prop_assert!(serde_json::from_value::<TimeMap>(short).is_err());
    }

    /// The one clamping rule: any source time, inside or far outside the domain, lands in
    /// [0, duration], and order is kept (a span stays a span). A take shorter than the map's
    /// range (a cut tail) clamps at its end.
    #[test]
    fn apply_within_stays_in_the_take_and_keeps_order(
        map in (0.5f64..10.0).prop_flat_map(arb_map),
        cut in 0.1f64..1.0,
        ts in prop::collection::vec(-5.0f64..20.0, 2..20),
    ) {
        let duration = map.range().1 * cut;
        let mut ts = ts;
        ts.sort_by(f64::total_cmp);
        let out: Vec<f64> = ts.iter().map(|&t| map.apply_within(t, duration)).collect();
        for (t, y) in ts.iter().zip(&out) {
            prop_assert!((0.0..=duration).contains(y), "t={t} -> {y} outside [0, {duration}]");
        }
        prop_assert!(out.windows(2).all(|w| w[0] <= w[1]), "{out:?}");
    }
}
