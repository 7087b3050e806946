//! Monotone piecewise-linear maps from source time to take time, in seconds.
//!
//! Every step returns one of these; the runner composes them in step order and rewrites
//! each word and line once through the result. Seconds rather than samples, so a map
//! survives rate changes: samples are only counted when audio is written.

use serde::{Deserialize, Serialize};

/// Two knots closer than this (in seconds) are the same knot.
const KNOT_EPS: f64 = 1e-12;

/// A monotone piecewise-linear map through knots `(source_s, take_s)`.
///
/// Invariants: at least two knots, source times strictly increasing, take times
/// non-decreasing (a flat piece means that stretch of source was cut out of the take), all
/// values finite. Outside its first and last knot the map holds its end values: a source
/// time before the domain maps to the first take time, after it to the last.
///
/// In JSON it is two number lists of equal length, `{"source": [...], "take": [...]}`: a
/// column of source times and a column of take times, which table readers (pyarrow,
/// Hugging Face `datasets`, pandas) turn into plain float arrays. A list of `[source, take]`
/// pairs, as older runs wrote, is still read.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(try_from = "Written", into = "Columns")]
pub struct TimeMap {
    knots: Vec<(f64, f64)>,
}

/// Why a list of knots is not a time map.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TimeMapError {
    /// Fewer than two knots.
    #[error("a time map needs at least two knots, got {0}")]
    TooFewKnots(usize),
    /// A NaN or infinite knot.
    #[error("knot {0} is not finite")]
    NotFinite(usize),
    /// Source times must strictly increase.
    #[error("knot {0}: source time does not increase")]
    SourceNotIncreasing(usize),
    /// Take times must not decrease.
    #[error("knot {0}: take time decreases")]
    TakeDecreasing(usize),
    /// The `source` and `take` lists of the JSON form differ in length.
    #[error("`source` has {0} times but `take` has {1}; they pair up one to one")]
    ColumnLengths(usize, usize),
}

impl TimeMap {
    /// A map through the given knots, checked against the invariants.
    ///
    /// # Errors
    /// When there are fewer than two knots, a value is not finite, source times do not
    /// strictly increase or take times decrease.
    pub fn from_knots(knots: Vec<(f64, f64)>) -> Result<Self, TimeMapError> {
        if knots.len() < 2 {
            return Err(TimeMapError::TooFewKnots(knots.len()));
        }
        for (i, &(x, y)) in knots.iter().enumerate() {
            if !x.is_finite() || !y.is_finite() {
                return Err(TimeMapError::NotFinite(i));
            }
            if i > 0 {
                let (px, py) = knots[i - 1];
                if x <= px {
                    return Err(TimeMapError::SourceNotIncreasing(i));
                }
                if y < py {
                    return Err(TimeMapError::TakeDecreasing(i));
                }
            }
        }
        Ok(Self { knots })
    }

    /// The identity on `[0, duration]`.
    pub fn identity(duration: f64) -> Self {
        Self::linear(duration, duration)
    }

    /// The straight line from `(0, 0)` to `(source_duration, take_duration)`: what a speed
    /// change or a resample does to time.
    ///
    /// # Panics
    /// When `source_duration` is not positive and finite or `take_duration` is negative.
    pub fn linear(source_duration: f64, take_duration: f64) -> Self {
        assert!(
            source_duration > 0.0 && source_duration.is_finite() && take_duration >= 0.0,
            "linear map needs a positive source duration, got {source_duration} -> {take_duration}"
        );
        Self {
            knots: vec![(0.0, 0.0), (source_duration, take_duration)],
        }
    }

    /// The knots, in order.
    pub fn knots(&self) -> &[(f64, f64)] {
        &self.knots
    }

    /// First and last source time the map is defined on.
    pub fn domain(&self) -> (f64, f64) {
        (self.knots[0].0, self.knots[self.knots.len() - 1].0)
    }

    /// First and last take time the map reaches.
    pub fn range(&self) -> (f64, f64) {
        (self.knots[0].1, self.knots[self.knots.len() - 1].1)
    }

    /// Take time of source time `t` (held at the end values outside the domain).
    pub fn apply(&self, t: f64) -> f64 {
        let k = &self.knots;
        if t <= k[0].0 {
            return k[0].1;
        }
        let last = k[k.len() - 1];
        if t >= last.0 {
            return last.1;
        }
        // First knot whose source time is > t; t lies in the piece before it.
        let i = k.partition_point(|&(x, _)| x <= t);
        let (x0, y0) = k[i - 1];
        let (x1, y1) = k[i];
        // Slope form: an identity piece (slope exactly 1) gives back `t` exactly.
        let y = y0 + (t - x0) * ((y1 - y0) / (x1 - x0));
        y.clamp(y0, y1)
    }

    /// Take time of source time `t`, kept inside a take of `duration` seconds: the one
    /// clamping rule every label rewrite uses (take, remap, slice), so a timing can never
    /// land outside the audio it labels.
    pub fn apply_within(&self, t: f64, duration: f64) -> f64 {
        self.apply(t).clamp(0.0, duration)
    }

    /// A source span `[start, end]` in take time. Order is kept: `start <= end` in, so out.
    pub fn apply_span(&self, start: f64, end: f64) -> (f64, f64) {
        (self.apply(start), self.apply(end))
    }

    /// `then ∘ self`: first this map, then `then`.
    pub fn then(&self, then: &TimeMap) -> TimeMap {
        let mut xs: Vec<f64> = self.knots.iter().map(|&(x, _)| x).collect();
        // Where this map crosses a knot of `then`, the composition bends.
        for &(u, _) in &then.knots {
            for w in self.knots.windows(2) {
                let ((x0, y0), (x1, y1)) = (w[0], w[1]);
                if y0 < u && u < y1 {
                    xs.push(x0 + (x1 - x0) * (u - y0) / (y1 - y0));
                }
            }
        }
        xs.sort_by(f64::total_cmp);
        xs.dedup_by(|a, b| (*a - *b).abs() <= KNOT_EPS);
        let mut knots: Vec<(f64, f64)> = xs
            .into_iter()
            .map(|x| (x, then.apply(self.apply(x))))
            .collect();
        // Rounding can make a take time dip by an ulp; hold it level instead.
        for i in 1..knots.len() {
            if knots[i].1 < knots[i - 1].1 {
                knots[i].1 = knots[i - 1].1;
            }
        }
        TimeMap { knots }.simplified()
    }

    /// The map from take time back to source time.
    ///
    /// Returns `None` when a piece is flat (a stretch of source was cut out, so some take
    /// times have no single source time).
    pub fn inverse(&self) -> Option<TimeMap> {
        let knots: Vec<(f64, f64)> = self.knots.iter().map(|&(x, y)| (y, x)).collect();
        TimeMap::from_knots(knots).ok()
    }

    /// The same map with knots that lie on a straight line through their neighbours removed.
    fn simplified(mut self) -> TimeMap {
        if self.knots.len() <= 2 {
            return self;
        }
        let mut out = Vec::with_capacity(self.knots.len());
        out.push(self.knots[0]);
        for i in 1..self.knots.len() - 1 {
            let (x0, y0) = *out.last().unwrap_or(&self.knots[0]);
            let (x1, y1) = self.knots[i];
            let (x2, y2) = self.knots[i + 1];
            let predicted = y0 + (y2 - y0) * (x1 - x0) / (x2 - x0);
            let scale = 1.0 + y0.abs().max(y2.abs());
            if (predicted - y1).abs() > 1e-12 * scale {
                out.push((x1, y1));
            }
        }
        out.push(self.knots[self.knots.len() - 1]);
        self.knots = out;
        self
    }
}

/// The JSON form: knot source times and take times as two columns.
#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct Columns {
    source: Vec<f64>,
    take: Vec<f64>,
}

/// What a manifest may hold: the columns (a JSON object), or the pairs earlier versions
/// wrote (a JSON array). Told apart by the JSON type alone, so a two-knot list of pairs is
/// never taken for two columns.
enum Written {
    Columns(Columns),
    Pairs(Vec<[f64; 2]>),
}

impl<'de> Deserialize<'de> for Written {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct Shape;
        impl<'de> serde::de::Visitor<'de> for Shape {
            type Value = Written;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(r#"a time map: {"source": [seconds...], "take": [seconds...]}"#)
            }
            fn visit_map<A: serde::de::MapAccess<'de>>(self, map: A) -> Result<Written, A::Error> {
                Columns::deserialize(serde::de::value::MapAccessDeserializer::new(map))
                    .map(Written::Columns)
            }
            fn visit_seq<A: serde::de::SeqAccess<'de>>(self, seq: A) -> Result<Written, A::Error> {
                Vec::<[f64; 2]>::deserialize(serde::de::value::SeqAccessDeserializer::new(seq))
                    .map(Written::Pairs)
            }
        }
        d.deserialize_any(Shape)
    }
}

impl TryFrom<Written> for TimeMap {
    type Error = TimeMapError;
    fn try_from(w: Written) -> Result<Self, Self::Error> {
        let knots = match w {
            Written::Columns(Columns { source, take }) => {
                if source.len() != take.len() {
                    return Err(TimeMapError::ColumnLengths(source.len(), take.len()));
                }
                source.into_iter().zip(take).collect()
            }
            Written::Pairs(pairs) => pairs.into_iter().map(|[x, y]| (x, y)).collect(),
        };
        TimeMap::from_knots(knots)
    }
}

impl From<TimeMap> for Columns {
    fn from(m: TimeMap) -> Self {
        let (source, take) = m.knots.into_iter().unzip();
        Columns { source, take }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn speed_map_divides_times_by_the_factor() {
        // Speed perturbation by f plays the take f times faster: t -> t / f (physics).
        let m = TimeMap::linear(2.2, 2.0);
        assert!((m.apply(1.1) - 1.0).abs() < 1e-12);
        assert_eq!(m.apply_span(0.0, 2.2), (0.0, 2.0));
    }

    #[test]
    fn identity_gives_back_the_same_time_exactly() {
        let m = TimeMap::identity(8.926_812_5);
        for t in [0.237_875, 1.324_999_999_999_999_7, 7.802_688, 8.926_812_5] {
            assert_eq!(m.apply(t), t);
        }
    }

    #[test]
    fn composing_two_speeds_multiplies_factors() {
        let a = TimeMap::linear(1.0, 1.0 / 0.9);
        let b = TimeMap::linear(1.0 / 0.9, 1.0 / 0.9 / 1.1);
        let c = a.then(&b);
        assert_eq!(c.knots().len(), 2);
        assert!((c.apply(0.5) - 0.5 / 0.99).abs() < 1e-12);
    }

    #[test]
    fn flat_piece_has_no_inverse_and_holds_level() {
        // A 0.1 s direct-path delay trimmed off the front.
        let m = TimeMap::from_knots(vec![(0.0, 0.0), (0.1, 0.0), (1.0, 0.9)]).unwrap();
        assert_eq!(m.apply(0.05), 0.0);
        assert!(m.inverse().is_none());
        assert!((m.apply(0.6) - 0.5).abs() < 1e-12);
    }

    #[test]
    fn rejects_bad_knots() {
        assert_eq!(
            TimeMap::from_knots(vec![(0.0, 0.0)]),
            Err(TimeMapError::TooFewKnots(1))
        );
        assert_eq!(
            TimeMap::from_knots(vec![(0.0, 0.0), (0.0, 1.0)]),
            Err(TimeMapError::SourceNotIncreasing(1))
        );
        assert_eq!(
            TimeMap::from_knots(vec![(0.0, 1.0), (1.0, 0.5)]),
            Err(TimeMapError::TakeDecreasing(1))
        );
        assert_eq!(
            TimeMap::from_knots(vec![(0.0, 0.0), (f64::NAN, 1.0)]),
            Err(TimeMapError::NotFinite(1))
        );
    }

    #[test]
    fn serialises_as_two_columns_and_reads_old_pairs() {
        let m = TimeMap::from_knots(vec![(0.0, 0.1), (1.0, 1.1), (2.0, 1.6)]).unwrap();
        let s = serde_json::to_string(&m).unwrap();
        assert_eq!(s, r#"{"source":[0.0,1.0,2.0],"take":[0.1,1.1,1.6]}"#);
        let back: TimeMap = serde_json::from_str(&s).unwrap();
        assert_eq!(back, m);
        let old: TimeMap = serde_json::from_str("[[0.0,0.1],[1.0,1.1],[2.0,1.6]]").unwrap();
        assert_eq!(old, m);
        // Two pairs are two knots, never two columns.
        let two: TimeMap = serde_json::from_str("[[0.0,1.0],[2.0,3.0]]").unwrap();
        assert_eq!(two.knots(), [(0.0, 1.0), (2.0, 3.0)]);
        assert!(serde_json::from_str::<TimeMap>("[[0.0,0.0]]").is_err());
        assert!(serde_json::from_str::<TimeMap>(r#"{"source":[0.0,1.0],"take":[0.0]}"#).is_err());
        assert!(
            serde_json::from_str::<TimeMap>(r#"{"source":[1.0,0.0],"take":[0.0,1.0]}"#).is_err()
        );
    }
}
