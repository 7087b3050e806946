//! The key reader the step parsers use: one `[[step]]` table's keys, each read once, checked
//! against its range and located on its line, plus the draws and the located error they make.
//! It lives apart from [`crate::recipe`] so the steps can read their keys without importing
//! the module that knows the whole recipe (and imports the steps).

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use toml::Spanned;
use toml::de::{DeTable, DeValue};

use crate::seed::TakeRng;

/// A recipe problem, located in the file.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}{}: {message}", path.display(), line.map(|l| format!(" line {l}")).unwrap_or_default())]
pub struct RecipeError {
    /// The recipe file.
    pub path: PathBuf,
    /// 1-based line of the offending key or value, when known.
    pub line: Option<usize>,
    /// The key at fault as the recipe writes it (`takes`, `db`, `do`), or empty when the
    /// problem is the file itself (unreadable, not TOML).
    pub field: String,
    /// The 1-based step number when the key is inside a `[[step]]` table.
    pub step: Option<usize>,
    /// What is wrong, starting with where in the recipe (`step 2 (gain): db: ...`).
    pub message: String,
}

impl RecipeError {
    /// The same error, placed inside step `n` (1-based).
    pub(crate) fn in_step(mut self, n: usize) -> Self {
        self.step = Some(n);
        self
    }
}

/// How one step parameter is chosen per take.
#[derive(Debug, Clone, PartialEq)]
pub enum Draw {
    /// Always this value.
    Fixed(f64),
    /// One of these, each equally likely.
    Pick(Vec<f64>),
    /// Uniform between `low` and `high` (inclusive).
    Uniform {
        /// Lowest value.
        low: f64,
        /// Highest value.
        high: f64,
    },
}

impl Draw {
    /// One value for one take.
    pub fn sample(&self, rng: &mut TakeRng) -> f64 {
        match self {
            Draw::Fixed(v) => *v,
            Draw::Pick(vs) => vs[rng.index(vs.len())],
            Draw::Uniform { low, high } => rng.uniform(*low, *high),
        }
    }

    /// Every value the draw can give lies in `[lo, hi]`.
    pub fn within(&self, lo: f64, hi: f64) -> bool {
        let (a, b) = self.bounds();
        a >= lo && b <= hi
    }

    /// Smallest and largest value the draw can give.
    pub fn bounds(&self) -> (f64, f64) {
        match self {
            Draw::Fixed(v) => (*v, *v),
            Draw::Pick(vs) => vs
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                    (a.min(v), b.max(v))
                }),
            Draw::Uniform { low, high } => (*low, *high),
        }
    }
}

/// Parameters of one `[[step]]` table, handed to the step's parser. Each key is taken once;
/// [`Params::finish`] then reports any key nobody took, so a misspelt key is an error.
pub struct Params<'a> {
    pub(crate) ctx: &'a Ctx<'a>,
    pub(crate) label: String,
    /// The step's 1-based number, for errors.
    pub(crate) step: usize,
    pub(crate) table: &'a DeTable<'a>,
    pub(crate) table_line: usize,
    /// The keys this kind of step reads, from the step registry.
    pub(crate) keys: &'static [&'static str],
    pub(crate) taken: BTreeSet<String>,
    pub(crate) warnings: Vec<String>,
}

pub(crate) struct Ctx<'a> {
    pub(crate) path: &'a Path,
    pub(crate) text: &'a str,
}

impl Ctx<'_> {
    pub(crate) fn line_of(&self, offset: usize) -> usize {
        self.text[..offset.min(self.text.len())]
            .matches('\n')
            .count()
            + 1
    }

    pub(crate) fn err(&self, line: Option<usize>, field: &str, message: String) -> RecipeError {
        RecipeError {
            path: self.path.to_path_buf(),
            line,
            field: field.to_string(),
            step: None,
            message,
        }
    }
}

impl<'a> Params<'a> {
    /// A located error about `key` (or about the step when the key is absent).
    pub fn error(&self, key: &str, message: impl std::fmt::Display) -> RecipeError {
        let line = self
            .find(key)
            .map(|(k, _)| self.ctx.line_of(k.span().start));
        self.ctx
            .err(
                Some(line.unwrap_or(self.table_line)),
                key,
                format!("{}: {key}: {message}", self.label),
            )
            .in_step(self.step)
    }

    pub(crate) fn find(
        &self,
        key: &str,
    ) -> Option<(
        &'a Spanned<toml::de::DeString<'a>>,
        &'a Spanned<DeValue<'a>>,
    )> {
        self.table.iter().find(|(k, _)| k.get_ref() == key)
    }

    fn take(&mut self, key: &'static str) -> Option<&'a Spanned<DeValue<'a>>> {
        debug_assert!(
            key == "chance" || self.keys.contains(&key),
            "{}: the parser reads `{key}`, which the step registry does not list",
            self.label
        );
        let found = self.find(key).map(|(_, v)| v);
        if found.is_some() {
            self.taken.insert(key.to_string());
        }
        found
    }

    /// Whether the step's table has `key` (without taking it).
    pub fn has(&mut self, key: &'static str) -> bool {
        debug_assert!(
            self.keys.contains(&key),
            "{}: the parser reads `{key}`, which the step registry does not list",
            self.label
        );
        self.find(key).is_some()
    }

    /// A draw under `key`, or `default` when the key is absent.
    ///
    /// # Errors
    /// A value that is not a number, a list of numbers or `{ low, high }` with low <= high.
    pub fn draw(&mut self, key: &'static str, default: Option<Draw>) -> Result<Draw, RecipeError> {
        match self.take(key) {
            None => default.ok_or_else(|| self.missing(key)),
            Some(v) => parse_draw(v.get_ref()).map_err(|m| self.error(key, m)),
        }
    }

    /// A draw under `key` (or `default`) whose every possible value lies in `[lo, hi]`;
    /// `unit` (e.g. "dB", "Hz", or "") is used in the message.
    ///
    /// # Errors
    /// As [`Params::draw`], or a draw that can give a value outside the limits.
    pub fn draw_within(
        &mut self,
        key: &'static str,
        default: Option<Draw>,
        (lo, hi): (f64, f64),
        unit: &str,
    ) -> Result<Draw, RecipeError> {
        let draw = self.draw(key, default)?;
        if draw.within(lo, hi) {
            return Ok(draw);
        }
        let unit = if unit.is_empty() {
            String::new()
        } else {
            format!(" {unit}")
        };
        let (a, b) = draw.bounds();
        let can = if a == b {
            format!("{a}{unit} can be drawn")
        } else {
            format!("values from {a} to {b}{unit} can be drawn")
        };
        Err(self.error(
            key,
            format!("{can}; every value must lie in [{lo}, {hi}]{unit}"),
        ))
    }

    /// The error for a required `key` that is absent: when the table holds an unknown key
    /// close to it (`factr` for `factor`), the error is about that key, on its line.
    fn missing(&self, key: &'static str) -> RecipeError {
        let unknown = self
            .table
            .iter()
            .map(|(k, _)| k.get_ref().as_ref())
            .filter(|name: &&str| !self.keys.contains(name) && *name != "do" && *name != "chance");
        match nearest(key, unknown) {
            Some(name) => self
                .ctx
                .err(
                    self.find(name)
                        .map(|(k, _)| self.ctx.line_of(k.span().start)),
                    name,
                    format!(
                        "{}: unknown key `{name}`; did you mean `{key}`? (this step needs `{key}`)",
                        self.label
                    ),
                )
                .in_step(self.step),
            None => self.error(key, "missing; this step needs it"),
        }
    }

    /// A whole number under `key` (or `default`) in `[lo, hi]`; `unit` names what it counts.
    ///
    /// # Errors
    /// A value that is not a number, has a fractional part, or lies outside the limits.
    pub fn whole(
        &mut self,
        key: &'static str,
        default: usize,
        (lo, hi): (usize, usize),
        unit: &str,
    ) -> Result<usize, RecipeError> {
        #[allow(clippy::cast_precision_loss)]
        let v = self.number(key, default as f64)?;
        if v.fract() != 0.0 {
            return Err(self.error(key, format!("{v} is not a whole number of {unit}")));
        }
        #[allow(clippy::cast_precision_loss)]
        if v < lo as f64 || v > hi as f64 {
            return Err(self.error(key, format!("{v} is outside [{lo}, {hi}] {unit}")));
        }
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        Ok(v as usize)
    }

    /// A single number under `key`, or `default` when absent.
    ///
    /// # Errors
    /// A value that is not a finite number.
    pub fn number(&mut self, key: &'static str, default: f64) -> Result<f64, RecipeError> {
        match self.take(key) {
            None => Ok(default),
            Some(v) => number(v.get_ref()).map_err(|m| self.error(key, m)),
        }
    }

    /// A string under `key`, if present.
    ///
    /// # Errors
    /// A value that is not a string.
    pub fn text(&mut self, key: &'static str) -> Result<Option<String>, RecipeError> {
        match self.take(key) {
            None => Ok(None),
            Some(v) => match v.get_ref().as_str() {
                Some(t) => Ok(Some(t.to_string())),
                None => Err(self.error(
                    key,
                    format!("expected a string, found a {}", v.get_ref().type_str()),
                )),
            },
        }
    }

    /// One of `allowed` under `key`, or `default` when absent.
    ///
    /// # Errors
    /// A value that is not one of `allowed`.
    pub fn choice(
        &mut self,
        key: &'static str,
        allowed: &[&'static str],
        default: &'static str,
    ) -> Result<&'static str, RecipeError> {
        let Some(given) = self.text(key)? else {
            return Ok(default);
        };
        allowed
            .iter()
            .find(|a| **a == given)
            .copied()
            .ok_or_else(|| {
                let list: Vec<String> = allowed.iter().map(|a| format!("\"{a}\"")).collect();
                self.error(
                    key,
                    format!("\"{given}\" is not one of {}", list.join(", ")),
                )
            })
    }

    /// A boolean under `key`, or `default` when absent.
    ///
    /// # Errors
    /// A value that is not `true` or `false`.
    pub fn flag(&mut self, key: &'static str, default: bool) -> Result<bool, RecipeError> {
        match self.take(key) {
            None => Ok(default),
            Some(v) => v
                .get_ref()
                .as_bool()
                .ok_or_else(|| self.error(key, "expected true or false")),
        }
    }

    /// A table of positive weights under `key` (`{ name = weight, ... }`), in file order.
    ///
    /// # Errors
    /// A value that is not a table of numbers, or a weight that is zero or negative.
    pub fn weights(
        &mut self,
        key: &'static str,
    ) -> Result<Option<Vec<(String, f64)>>, RecipeError> {
        let Some(v) = self.take(key) else {
            return Ok(None);
        };
        let Some(table) = v.get_ref().as_table() else {
            return Err(self.error(key, "expected a table like { name = 2.0, other = 1.0 }"));
        };
        let mut out = Vec::new();
        for (k, x) in table.iter() {
            let name = k.get_ref().to_string();
            let w = number(x.get_ref()).map_err(|m| self.error(key, format!("{name}: {m}")))?;
            if w <= 0.0 {
                return Err(self.error(
                    key,
                    format!(
                        "{name}: weight {w} must be above 0 (leave the entry out to not use it)"
                    ),
                ));
            }
            out.push((name, w));
        }
        if out.is_empty() {
            return Err(self.error(key, "an empty table gives nothing to choose from"));
        }
        Ok(Some(out))
    }

    /// Note something worth knowing that does not stop the run.
    pub fn warn(&mut self, key: &str, message: impl std::fmt::Display) {
        let e = self.error(key, message);
        self.warnings.push(e.to_string());
    }

    /// Report keys that no parser took.
    ///
    /// # Errors
    /// The first unknown key, with the keys this step does know.
    pub fn finish(self) -> Result<(), RecipeError> {
        for (k, _) in self.table.iter() {
            let name = k.get_ref().as_ref();
            if name != "do" && name != "chance" && !self.taken.contains(name) {
                let mut known: Vec<&str> = self.keys.to_vec();
                known.extend(["do", "chance"]);
                let unwritten = known.iter().copied().filter(|k| !self.taken.contains(*k));
                let hint = nearest(name, unwritten)
                    .map(|k| format!("; did you mean `{k}`?"))
                    .unwrap_or_default();
                return Err(self
                    .ctx
                    .err(
                        Some(self.ctx.line_of(k.span().start)),
                        name,
                        format!(
                            "{}: unknown key `{name}`{hint} (this step reads: {})",
                            self.label,
                            known.join(", ")
                        ),
                    )
                    .in_step(self.step));
            }
        }
        Ok(())
    }
}

/// The TOML parser's message in the user's terms: a duplicate key is named.
pub(crate) fn syntax_message(message: &str, at: Option<&str>) -> String {
    match at {
        Some(key) if message.starts_with("duplicate key") && !key.trim().is_empty() => {
            format!(
                "duplicate key `{}`: each key may be given once per table",
                key.trim().trim_matches('"')
            )
        }
        _ => message.to_string(),
    }
}

/// Whether a misspelt key `given` is close enough to `known` to suggest it: at most two
/// edits, and fewer than a third of the longer name (so `db` does not suggest `bits`).
pub(crate) fn close(given: &str, known: &str) -> bool {
    let d = strsim::levenshtein(given, known);
    d <= 2 && 3 * d < given.len().max(known.len())
}

/// The candidate closest to a misspelt `given`, if any is [`close`] enough to suggest.
pub(crate) fn nearest<'k>(
    given: &str,
    candidates: impl IntoIterator<Item = &'k str>,
) -> Option<&'k str> {
    candidates
        .into_iter()
        .filter(|k| close(given, k))
        .min_by_key(|k| strsim::levenshtein(given, k))
}

pub(crate) fn number(v: &DeValue<'_>) -> Result<f64, String> {
    let parsed = match v {
        DeValue::Integer(i) => {
            let s = i.as_str().replace('_', "");
            i64::from_str_radix(
                s.trim_start_matches("0x")
                    .trim_start_matches("0o")
                    .trim_start_matches("0b"),
                i.radix(),
            )
            .map(|n| n as f64)
            .map_err(|e| format!("`{}` is not an integer: {e}", i.as_str()))?
        }
        DeValue::Float(f) => f
            .as_str()
            .replace('_', "")
            .parse::<f64>()
            .map_err(|e| format!("`{}` is not a number: {e}", f.as_str()))?,
        other => return Err(format!("expected a number, found a {}", other.type_str())),
    };
    if parsed.is_finite() {
        Ok(parsed)
    } else {
        Err(format!("{parsed} is not a finite number"))
    }
}

fn parse_draw(v: &DeValue<'_>) -> Result<Draw, String> {
    match v {
        DeValue::Integer(_) | DeValue::Float(_) => Ok(Draw::Fixed(number(v)?)),
        DeValue::Array(items) => {
            let values = items
                .iter()
                .enumerate()
                .map(|(i, x)| number(x.get_ref()).map_err(|m| format!("list item {}: {m}", i + 1)))
                .collect::<Result<Vec<f64>, String>>()?;
            if values.is_empty() {
                return Err("an empty list has nothing to pick from".into());
            }
            Ok(Draw::Pick(values))
        }
        DeValue::Table(t) => {
            let mut low = None;
            let mut high = None;
            for (k, x) in t.iter() {
                match k.get_ref().as_ref() {
                    "low" => low = Some(number(x.get_ref()).map_err(|m| format!("low: {m}"))?),
                    "high" => high = Some(number(x.get_ref()).map_err(|m| format!("high: {m}"))?),
                    other => {
                        return Err(format!(
                            "unknown key `{other}` in a range (use low and high)"
                        ));
                    }
                }
            }
            match (low, high) {
                (Some(low), Some(high)) if low <= high => Ok(Draw::Uniform { low, high }),
                (Some(low), Some(high)) => Err(format!("range low {low} is above high {high}")),
                _ => Err("a range needs both low and high".into()),
            }
        }
        other => Err(format!(
            "expected a number, a list of numbers or {{ low, high }}, found a {}",
            other.type_str()
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn draws_of_each_shape() {
        let v = DeValue::parse("[0.9, 1, 1.1]").unwrap();
        assert_eq!(parse_draw(v.get_ref()), Ok(Draw::Pick(vec![0.9, 1.0, 1.1])));
        let v = DeValue::parse("{ low = -3, high = 2.5 }").unwrap();
        assert_eq!(
            parse_draw(v.get_ref()),
            Ok(Draw::Uniform {
                low: -3.0,
                high: 2.5
            })
        );
        let v = DeValue::parse("1_000").unwrap();
        assert_eq!(parse_draw(v.get_ref()), Ok(Draw::Fixed(1000.0)));
        let v = DeValue::parse("{ low = 3, high = 2 }").unwrap();
        assert!(
            parse_draw(v.get_ref())
                .unwrap_err()
                .contains("low 3 is above high 2")
        );
        let v = DeValue::parse("\"fast\"").unwrap();
        assert!(parse_draw(v.get_ref()).is_err());
        let v = DeValue::parse("nan").unwrap();
        assert!(parse_draw(v.get_ref()).is_err());
    }
}
