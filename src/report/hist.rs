//! A histogram filled in one pass in fixed memory, whatever the number of values.
//!
//! Bins are `[k w, (k + 1) w)` for integers `k`, with `w` a power of two. Both the bin of a
//! value (`floor(v / w)`) and every edge (`k w`) are exact in floating point, so a reader
//! who bins the same values against the printed edges (numpy's `histogram`) gets the same
//! counts. When the values span more than [`MAX_BINS`] bins, `w` doubles and neighbouring
//! bins merge, which needs none of the values again. While a value set has at most
//! [`MAX_DISTINCT`] distinct values (a list draw, a fixed value), each value's count is
//! kept too, and the page shows bars per value instead of bins.

use std::collections::BTreeMap;

/// Most bins a histogram holds before it coarsens.
pub const MAX_BINS: i64 = 24;
/// Most distinct values counted one by one.
pub const MAX_DISTINCT: usize = 12;
/// The finest bin width, 2^-30 (about 1e-9): finer than any value a step records.
const FINEST_EXP: i32 = -30;

/// One value set, binned on the fly.
#[derive(Debug, Clone)]
pub struct Hist {
    exp: i32,
    bins: BTreeMap<i64, u64>,
    distinct: Option<BTreeMap<u64, u64>>,
    /// Values added (finite ones).
    pub count: u64,
    /// Non-finite values seen and left out.
    pub non_finite: u64,
    /// Smallest value added.
    pub min: f64,
    /// Largest value added.
    pub max: f64,
    sum: f64,
}

impl Default for Hist {
    fn default() -> Self {
        Hist {
            exp: FINEST_EXP,
            bins: BTreeMap::new(),
            distinct: Some(BTreeMap::new()),
            count: 0,
            non_finite: 0,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            sum: 0.0,
        }
    }
}

impl Hist {
    /// Count one value.
    pub fn add(&mut self, v: f64) {
        if !v.is_finite() {
            self.non_finite += 1;
            return;
        }
        // -0 and 0 are one value (adding 0 turns -0 into 0).
        let v = v + 0.0;
        self.count += 1;
        self.sum += v;
        self.min = self.min.min(v);
        self.max = self.max.max(v);
        if let Some(d) = &mut self.distinct {
            *d.entry(v.to_bits()).or_default() += 1;
            if d.len() > MAX_DISTINCT {
                self.distinct = None;
            }
        }
        // Bins far wider than the values would overflow i64 only for |v| > 2^83: clamp the
        // exponent up first so `k` stays small.
        while (v / self.width()).abs() > 1e15 {
            self.coarsen();
        }
        *self.bins.entry(self.bin_of(v)).or_default() += 1;
        while self.span() > MAX_BINS {
            self.coarsen();
        }
    }

    fn width(&self) -> f64 {
        2f64.powi(self.exp)
    }

    fn bin_of(&self, v: f64) -> i64 {
        (v / self.width()).floor() as i64
    }

    fn span(&self) -> i64 {
        match (self.bins.first_key_value(), self.bins.last_key_value()) {
            (Some((lo, _)), Some((hi, _))) => hi - lo + 1,
            _ => 0,
        }
    }

    fn coarsen(&mut self) {
        self.exp += 1;
        let old = std::mem::take(&mut self.bins);
        for (k, n) in old {
            *self.bins.entry(k.div_euclid(2)).or_default() += n;
        }
    }

    /// Mean of the values (NaN when there are none).
    pub fn mean(&self) -> f64 {
        self.sum / self.count as f64
    }

    /// Counts per distinct value, ascending, while there are at most [`MAX_DISTINCT`].
    pub fn distinct(&self) -> Option<Vec<(f64, u64)>> {
        self.distinct.as_ref().map(|d| {
            let mut v: Vec<(f64, u64)> = d.iter().map(|(b, n)| (f64::from_bits(*b), *n)).collect();
            v.sort_by(|a, b| a.0.total_cmp(&b.0));
            v
        })
    }

    /// The bins from the first to the last that holds a value, empty ones included:
    /// (edges, counts), with `edges.len() == counts.len() + 1`.
    pub fn bins(&self) -> (Vec<f64>, Vec<u64>) {
        let (Some((&lo, _)), Some((&hi, _))) =
            (self.bins.first_key_value(), self.bins.last_key_value())
        else {
            return (Vec::new(), Vec::new());
        };
        let w = self.width();
        let edges = (lo..=hi + 1).map(|k| k as f64 * w).collect();
        let counts = (lo..=hi)
            .map(|k| self.bins.get(&k).copied().unwrap_or(0))
            .collect();
        (edges, counts)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Counts against the edges, computed the slow way (every value against every edge).
    fn slow(values: &[f64], edges: &[f64]) -> Vec<u64> {
        (0..edges.len() - 1)
            .map(|i| {
                values
                    .iter()
                    .filter(|&&v| v >= edges[i] && v < edges[i + 1])
                    .count() as u64
            })
            .collect()
    }

    #[test]
    fn bins_agree_with_a_direct_count_and_stay_bounded() {
        let mut h = Hist::default();
        let values: Vec<f64> = (0..5000)
            .map(|i| ((i * 7919) % 1000) as f64 * 0.0203 - 4.0)
            .collect();
        for &v in &values {
            h.add(v);
        }
        let (edges, counts) = h.bins();
        assert!(
            counts.len() as i64 <= MAX_BINS && counts.len() >= 8,
            "{}",
            counts.len()
        );
        assert_eq!(counts, slow(&values, &edges));
        assert_eq!(counts.iter().sum::<u64>(), 5000);
        assert!(h.distinct().is_none());
    }

    #[test]
    fn a_list_draw_is_counted_per_value() {
        let mut h = Hist::default();
        for v in [0.9, 1.0, 1.1, 1.0, 0.9, 1.0, 0.0, -0.0] {
            h.add(v);
        }
        assert_eq!(
            h.distinct().unwrap(),
            vec![(0.0, 2), (0.9, 2), (1.0, 3), (1.1, 1)]
        );
        let (edges, counts) = h.bins();
        assert_eq!(counts.iter().sum::<u64>(), 8);
        assert_eq!(
            counts,
            slow(&[0.9, 1.0, 1.1, 1.0, 0.9, 1.0, 0.0, 0.0], &edges)
        );
    }

    #[test]
    fn negative_and_huge_values_and_nan() {
        let mut h = Hist::default();
        for v in [-1e12, 3.0, f64::NAN, 5e11] {
            h.add(v);
        }
        assert_eq!((h.count, h.non_finite), (3, 1));
        let (edges, counts) = h.bins();
        assert_eq!(counts, slow(&[-1e12, 3.0, 5e11], &edges));
    }
}
