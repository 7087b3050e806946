//! What the recipe asked for, read from the recipe as written: the seed and, per step, the
//! range each key's draw covers. The page marks these ranges on the histograms of the
//! values of the same name, so a reader sees at once whether the takes stay inside.

use std::collections::BTreeMap;

/// One step's keys that hold numbers, as `[low, high]` (a fixed value has low = high).
pub type StepRanges = BTreeMap<String, (f64, f64)>;

/// The recipe's seed and step ranges, in step order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RecipeRanges {
    /// The recipe's `seed`, when it has one.
    pub seed: Option<i64>,
    /// Per `[[step]]`, in order.
    pub steps: Vec<StepRanges>,
}

/// Read the ranges from the recipe's text. A text that is not TOML gives no ranges (the page
/// still shows the text as written).
pub fn recipe_ranges(text: &str) -> RecipeRanges {
    let Ok(table) = text.parse::<toml::Table>() else {
        return RecipeRanges::default();
    };
    let seed = table.get("seed").and_then(toml::Value::as_integer);
    let steps = table
        .get("step")
        .and_then(toml::Value::as_array)
        .map(|steps| {
            steps
                .iter()
                .map(|s| {
                    s.as_table()
                        .map(|t| {
                            t.iter()
                                .filter_map(|(k, v)| Some((k.clone(), range_of(v)?)))
                                .collect()
                        })
                        .unwrap_or_default()
                })
                .collect()
        })
        .unwrap_or_default();
    RecipeRanges { seed, steps }
}

fn number(v: &toml::Value) -> Option<f64> {
    v.as_float().or_else(|| v.as_integer().map(|i| i as f64))
}

/// A number, a list of numbers or a `{ low, high }` table.
fn range_of(v: &toml::Value) -> Option<(f64, f64)> {
    if let Some(x) = number(v) {
        return Some((x, x));
    }
    if let Some(list) = v.as_array() {
        let xs: Option<Vec<f64>> = list.iter().map(number).collect();
        let xs = xs.filter(|xs| !xs.is_empty())?;
        let lo = xs.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = xs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        return Some((lo, hi));
    }
    let t = v.as_table()?;
    Some((number(t.get("low")?)?, number(t.get("high")?)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_of_each_draw_form() {
        let r = recipe_ranges(
            "seed = 7\n[[step]]\ndo = \"speed\"\nfactor = [0.9, 1.1, 1.0]\n\
             [[step]]\ndo = \"noise\"\nsnr_db = { low = 5.0, high = 25 }\nchance = 0.5\n",
        );
        assert_eq!(r.seed, Some(7));
        assert_eq!(r.steps[0]["factor"], (0.9, 1.1));
        assert_eq!(r.steps[1]["snr_db"], (5.0, 25.0));
        assert_eq!(r.steps[1]["chance"], (0.5, 0.5));
        assert!(!r.steps[1].contains_key("do"));
        assert_eq!(recipe_ranges("not = [toml"), RecipeRanges::default());
    }
}
