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
use crate::steps::{self, Step};

use crate::keys::{Ctx, nearest, number, syntax_message};
pub use crate::keys::{Draw, Params, RecipeError};

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
        field: String::new(),
        step: None,
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
            "",
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
                k.get_ref().as_ref(),
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
            None => default.ok_or_else(|| ctx.err(None, key, format!("{key}: missing"))),
            Some((line, v)) => {
                let n = number(v.get_ref())
                    .map_err(|m| ctx.err(Some(line), key, format!("{key}: {m}")))?;
                if n.fract() != 0.0 || n < min as f64 || n > max as f64 {
                    return Err(ctx.err(
                        Some(line),
                        key,
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
        Some((line, v)) => v.get_ref().as_bool().ok_or_else(|| {
            ctx.err(
                Some(line),
                "keep_source",
                "keep_source: expected true or false".into(),
            )
        })?,
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
                    "format",
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
                    .map_err(|m| ctx.err(Some(line), "channels", format!("channels: {m}")))?;
                if n < 0.0 {
                    return Err(ctx.err(
                        Some(line),
                        "channels",
                        format!("channels: channel {n} is negative"),
                    ));
                }
                ChannelPolicy::Pick(n as usize)
            }
            _ => {
                return Err(ctx.err(
                    Some(line),
                    "channels",
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
    let banks = crate::noise::BankCache::default();
    if let Some((line, v)) = at("step") {
        let Some(items) = v.get_ref().as_array() else {
            return Err(ctx.err(Some(line), "step", "step: expected [[step]] tables".into()));
        };
        for (i, item) in items.iter().enumerate() {
            let item_line = ctx.line_of(item.span().start);
            let Some(table) = item.get_ref().as_table() else {
                return Err(ctx
                    .err(
                        Some(item_line),
                        "step",
                        format!("step {}: expected a table", i + 1),
                    )
                    .in_step(i + 1));
            };
            let kind = table
                .iter()
                .find(|(k, _)| k.get_ref() == "do")
                .map(|(_, v)| v);
            let Some(kind) = kind else {
                return Err(ctx
                    .err(
                        Some(item_line),
                        "do",
                        format!(
                            "step {}: missing `do` (one of: {})",
                            i + 1,
                            steps::names().join(", ")
                        ),
                    )
                    .in_step(i + 1));
            };
            let kind_line = ctx.line_of(kind.span().start);
            let Some(name) = kind.get_ref().as_str() else {
                return Err(ctx
                    .err(
                        Some(kind_line),
                        "do",
                        format!("step {}: do: expected a step name", i + 1),
                    )
                    .in_step(i + 1));
            };
            let Some(kind_row) = steps::kind(name) else {
                let hint = nearest(name, steps::names())
                    .map(|n| format!("; did you mean `{n}`?"))
                    .unwrap_or_default();
                return Err(ctx
                    .err(
                        Some(kind_line),
                        "do",
                        format!(
                            "step {}: do: unknown step `{name}`{hint} (one of: {})",
                            i + 1,
                            steps::names().join(", ")
                        ),
                    )
                    .in_step(i + 1));
            };
            let mut params = Params {
                ctx: &ctx,
                label: format!("step {} ({name})", i + 1),
                step: i + 1,
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

    #[test]
    fn errors_name_their_key_and_step() {
        let e = parse_str("seed = 1\ntakes = 0\n").unwrap_err();
        assert_eq!((e.line, e.field.as_str(), e.step), (Some(2), "takes", None));
        let e = parse_str("takes = 2\n\n[[step]]\ndo = \"gain\"\ndb = { low = 6, high = -6 }\n")
            .unwrap_err();
        assert_eq!((e.line, e.field.as_str(), e.step), (Some(5), "db", Some(1)));
        let e = parse_str("takes = 2\n[[step]]\ndo = \"gain\"\ndb = 1\n[[step]]\ndo = \"spede\"\n")
            .unwrap_err();
        assert_eq!((e.line, e.field.as_str(), e.step), (Some(6), "do", Some(2)));
        let e = parse_str("takes = 2\n[[step]]\ndo = \"speed\"\nfactr = 1.1\n").unwrap_err();
        assert_eq!(
            (e.line, e.field.as_str(), e.step),
            (Some(4), "factr", Some(1))
        );
    }
}
