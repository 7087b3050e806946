//! The recipe: a TOML file turned into a validated [`Plan`] before any audio is touched.
//!
//! Every error names the file, the line and the key:
//! `recipe.toml line 12: step 2 (gain): db: range low 6 is above high -6`.
//!
//! ```toml
//! seed = 2026            # the run's seed; with the clip id and take index it fixes each take
//! takes = 4              # takes per clip (take 0 included)
//! keep_source = true     # take 0 is the source, only resampled to `rate`
//! rate = 16000           # output sample rate, Hz
//! format = "pcm16"       # or "pcm24", "float32", "flac16", "flac24"
//! channels = "mix"       # or a channel number counted from 0
//!
//! [[step]]
//! do = "speed"
//! factor = [0.9, 1.0, 1.1]   # a list: one value picked per take
//!
//! [[step]]
//! do = "gain"
//! db = { low = -6.0, high = 6.0 }   # a range: uniform per take
//! chance = 0.5                      # the step runs in half the takes
//! ```

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use toml::Spanned;
use toml::de::{DeTable, DeValue};

use crate::audio::{ChannelPolicy, SampleFormat};
use crate::seed::TakeRng;
use crate::steps::{self, Step};

/// A recipe problem, located in the file.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}{}: {message}", path.display(), line.map(|l| format!(" line {l}")).unwrap_or_default())]
pub struct RecipeError {
    /// The recipe file.
    pub path: PathBuf,
    /// 1-based line of the offending key or value, when known.
    pub line: Option<usize>,
    /// What is wrong, starting with where in the recipe (`step 2 (gain): db: ...`).
    pub message: String,
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

/// One step of the plan with the chance that it runs in a take.
#[derive(Debug)]
pub struct PlannedStep {
    /// The step, with its draws.
    pub step: Box<dyn Step>,
    /// Probability in [0, 1] that the step runs in a given take.
    pub chance: f64,
    /// The step's keys and values as the recipe writes them (`do` left out), by key name.
    pub written: Vec<(String, String)>,
}

/// A recipe, fully checked.
#[derive(Debug)]
pub struct Plan {
    /// The run's seed.
    pub seed: u64,
    /// Takes per clip, take 0 included.
    pub takes: u32,
    /// Take 0 is the source, only resampled.
    pub keep_source: bool,
    /// Output sample rate in Hz.
    pub rate: u32,
    /// Output sample format.
    pub format: SampleFormat,
    /// How multichannel input becomes mono.
    pub channels: ChannelPolicy,
    /// The steps, in order.
    pub steps: Vec<PlannedStep>,
    /// Things worth knowing that do not stop the run (e.g. noise files left out), each
    /// starting with the file and line.
    pub warnings: Vec<String>,
    /// A stable hash of the recipe text; with the fields above it tells whether finished
    /// work in an output folder was made by this same plan (see [`Plan::fingerprint`]).
    pub text_hash: u64,
}

impl Plan {
    /// A stable hash of everything that decides the output: the recipe text and the
    /// top-level fields (which a caller may have overridden after parsing).
    pub fn fingerprint(&self) -> u64 {
        let fields = format!(
            "{}|{}|{}|{}|{:?}|{:?}|{}",
            self.seed,
            self.takes,
            self.keep_source,
            self.rate,
            self.format,
            self.channels,
            env!("CARGO_PKG_VERSION")
        );
        crate::seed::stable_hash(&[&self.text_hash.to_le_bytes(), fields.as_bytes()])
    }
}

impl Plan {
    /// Every file the plan's steps read when it was loaded (noise banks, measured
    /// responses), in step order, each once.
    pub fn inputs(&self) -> Vec<PathBuf> {
        let mut seen = BTreeSet::new();
        let all = self.steps.iter().flat_map(|p| p.step.inputs());
        all.filter(|p| seen.insert(p.clone())).collect()
    }
}

/// Parameters of one `[[step]]` table, handed to the step's parser. Each key is taken once;
/// [`Params::finish`] then reports any key nobody took, so a misspelt key is an error.
pub struct Params<'a> {
    ctx: &'a Ctx<'a>,
    label: String,
    table: &'a DeTable<'a>,
    table_line: usize,
    /// The keys this kind of step reads, from the step registry.
    keys: &'static [&'static str],
    taken: BTreeSet<String>,
    warnings: Vec<String>,
}

struct Ctx<'a> {
    path: &'a Path,
    text: &'a str,
}

impl Ctx<'_> {
    fn line_of(&self, offset: usize) -> usize {
        self.text[..offset.min(self.text.len())]
            .matches('\n')
            .count()
            + 1
    }

    fn err(&self, line: Option<usize>, message: String) -> RecipeError {
        RecipeError {
            path: self.path.to_path_buf(),
            line,
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
        self.ctx.err(
            Some(line.unwrap_or(self.table_line)),
            format!("{}: {key}: {message}", self.label),
        )
    }

    fn find(
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
            Some(name) => self.ctx.err(
                self.find(name)
                    .map(|(k, _)| self.ctx.line_of(k.span().start)),
                format!(
                    "{}: unknown key `{name}`; did you mean `{key}`? (this step needs `{key}`)",
                    self.label
                ),
            ),
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
                return Err(self.ctx.err(
                    Some(self.ctx.line_of(k.span().start)),
                    format!(
                        "{}: unknown key `{name}`{hint} (this step reads: {})",
                        self.label,
                        known.join(", ")
                    ),
                ));
            }
        }
        Ok(())
    }
}

/// The TOML parser's message in the user's terms: a duplicate key is named.
fn syntax_message(message: &str, at: Option<&str>) -> String {
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
fn close(given: &str, known: &str) -> bool {
    let d = strsim::levenshtein(given, known);
    d <= 2 && 3 * d < given.len().max(known.len())
}

/// The candidate closest to a misspelt `given`, if any is [`close`] enough to suggest.
fn nearest<'k>(given: &str, candidates: impl IntoIterator<Item = &'k str>) -> Option<&'k str> {
    candidates
        .into_iter()
        .filter(|k| close(given, k))
        .min_by_key(|k| strsim::levenshtein(given, k))
}

fn number(v: &DeValue<'_>) -> Result<f64, String> {
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

const TOP_KEYS: &[&str] = &[
    "seed",
    "takes",
    "keep_source",
    "rate",
    "format",
    "channels",
    "step",
];

/// Read and check a recipe file.
///
/// # Errors
/// An unreadable file, TOML syntax, an unknown key, a missing or impossible value: the
/// first problem found, with its line.
pub fn load(path: &Path) -> Result<Plan, RecipeError> {
    let text = crate::input_file::read_to_string(path).map_err(|e| RecipeError {
        path: path.to_path_buf(),
        line: None,
        message: format!("cannot read: {e}"),
    })?;
    parse(path, &text)
}

/// Check a recipe given as text; `path` is only used in messages.
///
/// # Errors
/// As [`load`].
pub fn parse(path: &Path, text: &str) -> Result<Plan, RecipeError> {
    let ctx = Ctx { path, text };
    let doc = DeTable::parse(text).map_err(|e| {
        let line = e.span().map(|s| ctx.line_of(s.start));
        ctx.err(
            line,
            syntax_message(e.message(), e.span().map(|s| &text[s])),
        )
    })?;
    let doc = doc.get_ref();
    let at = |key: &str| -> Option<(usize, &Spanned<DeValue<'_>>)> {
        doc.iter()
            .find(|(k, _)| k.get_ref() == key)
            .map(|(k, v)| (ctx.line_of(k.span().start), v))
    };
    for (k, _) in doc.iter() {
        if !TOP_KEYS.contains(&k.get_ref().as_ref()) {
            return Err(ctx.err(
                Some(ctx.line_of(k.span().start)),
                format!(
                    "unknown key `{}` (a recipe reads: {})",
                    k.get_ref(),
                    TOP_KEYS.join(", ")
                ),
            ));
        }
    }
    let whole = |key: &str, default: Option<u64>, min: u64, max: u64| -> Result<u64, RecipeError> {
        match at(key) {
            None => default.ok_or_else(|| ctx.err(None, format!("{key}: missing"))),
            Some((line, v)) => {
                let n =
                    number(v.get_ref()).map_err(|m| ctx.err(Some(line), format!("{key}: {m}")))?;
                if n.fract() != 0.0 || n < min as f64 || n > max as f64 {
                    return Err(ctx.err(
                        Some(line),
                        format!("{key}: {n} is not a whole number in {min}..={max}"),
                    ));
                }
                Ok(n as u64)
            }
        }
    };
    let seed = whole("seed", Some(0), 0, i64::MAX as u64)?;
    let takes = whole("takes", None, 1, 10_000)? as u32;
    let rate = whole("rate", Some(16_000), 1_000, 384_000)? as u32;
    let keep_source = match at("keep_source") {
        None => false,
        Some((line, v)) => v
            .get_ref()
            .as_bool()
            .ok_or_else(|| ctx.err(Some(line), "keep_source: expected true or false".into()))?,
    };
    let format = match at("format") {
        None => SampleFormat::default(),
        Some((line, v)) => match v.get_ref().as_str().and_then(SampleFormat::from_name) {
            Some(f) => f,
            None => {
                let names: Vec<String> = SampleFormat::names()
                    .iter()
                    .map(|n| format!("\"{n}\""))
                    .collect();
                return Err(ctx.err(
                    Some(line),
                    format!("format: expected one of {}", names.join(", ")),
                ));
            }
        },
    };
    let channels = match at("channels") {
        None => ChannelPolicy::default(),
        Some((line, v)) => match v.get_ref() {
            DeValue::String(s) if s == "mix" => ChannelPolicy::Mix,
            DeValue::Integer(_) => {
                let n = number(v.get_ref())
                    .map_err(|m| ctx.err(Some(line), format!("channels: {m}")))?;
                if n < 0.0 {
                    return Err(ctx.err(Some(line), format!("channels: channel {n} is negative")));
                }
                ChannelPolicy::Pick(n as usize)
            }
            _ => {
                return Err(ctx.err(
                    Some(line),
                    "channels: expected \"mix\" or a channel number counted from 0".into(),
                ));
            }
        },
    };
    let mut planned = Vec::new();
    let mut warnings = Vec::new();
    let recipe_dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let banks = crate::steps::noise::BankCache::default();
    if let Some((line, v)) = at("step") {
        let Some(items) = v.get_ref().as_array() else {
            return Err(ctx.err(Some(line), "step: expected [[step]] tables".into()));
        };
        for (i, item) in items.iter().enumerate() {
            let item_line = ctx.line_of(item.span().start);
            let Some(table) = item.get_ref().as_table() else {
                return Err(ctx.err(Some(item_line), format!("step {}: expected a table", i + 1)));
            };
            let kind = table
                .iter()
                .find(|(k, _)| k.get_ref() == "do")
                .map(|(_, v)| v);
            let Some(kind) = kind else {
                return Err(ctx.err(
                    Some(item_line),
                    format!(
                        "step {}: missing `do` (one of: {})",
                        i + 1,
                        steps::names().join(", ")
                    ),
                ));
            };
            let kind_line = ctx.line_of(kind.span().start);
            let Some(name) = kind.get_ref().as_str() else {
                return Err(ctx.err(
                    Some(kind_line),
                    format!("step {}: do: expected a step name", i + 1),
                ));
            };
            let Some(kind_row) = steps::kind(name) else {
                let hint = nearest(name, steps::names())
                    .map(|n| format!("; did you mean `{n}`?"))
                    .unwrap_or_default();
                return Err(ctx.err(
                    Some(kind_line),
                    format!(
                        "step {}: do: unknown step `{name}`{hint} (one of: {})",
                        i + 1,
                        steps::names().join(", ")
                    ),
                ));
            };
            let mut params = Params {
                ctx: &ctx,
                label: format!("step {} ({name})", i + 1),
                table,
                table_line: item_line,
                keys: kind_row.keys,
                taken: BTreeSet::new(),
                warnings: Vec::new(),
            };
            let chance = match params.find("chance") {
                None => 1.0,
                Some(_) => {
                    let c = params.number("chance", 1.0)?;
                    if !(0.0..=1.0).contains(&c) {
                        return Err(params.error("chance", format!("{c} is not in [0, 1]")));
                    }
                    c
                }
            };
            let written = table
                .iter()
                .filter(|(k, _)| k.get_ref() != "do")
                .map(|(k, v)| {
                    let value = text.get(v.span()).unwrap_or("").trim().to_string();
                    (k.get_ref().to_string(), value)
                })
                .collect();
            let step = (kind_row.parse)(
                &mut params,
                &steps::PlanContext {
                    rate,
                    recipe_dir: &recipe_dir,
                    banks: &banks,
                },
            )?;
            warnings.append(&mut params.warnings);
            params.finish()?;
            planned.push(PlannedStep {
                step,
                chance,
                written,
            });
        }
    }
    Ok(Plan {
        seed,
        takes,
        keep_source,
        rate,
        format,
        channels,
        steps: planned,
        text_hash: crate::seed::stable_hash(&[text.as_bytes()]),
        warnings,
    })
}

/// Test support: a plan with one step of kind `kind` whose keys are `body`; the step's
/// table starts on line 4, so its first key is on line 5.
#[cfg(test)]
pub(crate) fn one_step_plan(kind: &str, body: &str) -> Result<Plan, RecipeError> {
    parse(
        Path::new("r.toml"),
        &format!("takes = 2\n\n[[step]]\ndo = \"{kind}\"\n{body}\n"),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse_str(text: &str) -> Result<Plan, RecipeError> {
        parse(Path::new("r.toml"), text)
    }

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

    #[test]
    fn unknown_top_key_names_its_line() {
        let e = parse_str("takes = 2\n\nsed = 4\n").unwrap_err();
        assert_eq!(e.line, Some(3));
        assert!(e.message.contains("unknown key `sed`"), "{}", e.message);
    }

    #[test]
    fn missing_takes_is_an_error() {
        let e = parse_str("seed = 1\n").unwrap_err();
        assert!(e.message.contains("takes: missing"), "{}", e.message);
    }

    #[test]
    fn syntax_error_has_a_line() {
        let e = parse_str("takes = 2\nrate = = 3\n").unwrap_err();
        assert_eq!(e.line, Some(2), "{e}");
    }
}
