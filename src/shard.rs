//! Splitting a run across machines: which clips shard K of N makes, and where K and N come
//! from when a cluster engine starts the shards.
//!
//! Every shard reads the whole input manifest and computes the same assignment, so no shard
//! needs to talk to another: the assignment depends only on the manifest's lines and N.
//! Clips are balanced by audio duration where the manifest gives it (`duration`), by count
//! otherwise, with the greedy longest-first rule: clips in order of decreasing length (ties:
//! earlier line first) each go to the shard with the least audio so far (ties: the lowest
//! shard). A line that is not a clip (a reject) goes to shard `(line - 1) mod N`.

use std::fmt;

use crate::transcript::Manifest;

/// One shard of a run: index `index` (from 0) of `count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// Which shard, from 0.
    pub index: usize,
    /// How many shards in all (at least 1).
    pub count: usize,
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// Why a shard could not be worked out.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum ShardError {
    /// `K/N` did not parse or K is not below N.
    #[error("--shard `{given}`: {reason}")]
    Syntax {
        /// What was given.
        given: String,
        /// What is wrong.
        reason: String,
    },
    /// `--shard env` without any engine variable set.
    #[error(
        "--shard {given}: neither SLURM_ARRAY_TASK_ID (a Slurm job array) nor \
         JOB_COMPLETION_INDEX (a Kubernetes Indexed Job) is set; outside a job give the shard \
         as K/N"
    )]
    NoEngine {
        /// What was given (`env` or `env/N`).
        given: String,
    },
    /// The engine's variables are missing a part or disagree.
    #[error("--shard {given}: {reason}")]
    Inconsistent {
        /// What was given.
        given: String,
        /// Which variables and how they disagree.
        reason: String,
    },
}

/// What `--shard` was given: a fixed shard, or "ask the engine" with or without a count.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ShardArg {
    /// `K/N`.
    Fixed(Shard),
    /// `env` (count from the engine) or `env/N`.
    FromEngine(Option<usize>),
}

/// Parse `K/N`, `env` or `env/N`.
///
/// # Errors
/// [`ShardError::Syntax`] naming what is wrong.
pub fn parse_arg(given: &str) -> Result<ShardArg, ShardError> {
    let syntax = |reason: &str| ShardError::Syntax {
        given: given.to_string(),
        reason: reason.to_string(),
    };
    let usage = "expected K/N (shard K of N, K counted from 0), `env` or `env/N`";
    let count = |n: &str| match n.parse::<usize>() {
        Ok(n) if n >= 1 => Ok(n),
        _ => Err(syntax(&format!(
            "`{n}` is not a shard count of 1 or more; {usage}"
        ))),
    };
    if given == "env" {
        return Ok(ShardArg::FromEngine(None));
    }
    let Some((k, n)) = given.split_once('/') else {
        return Err(syntax(usage));
    };
    if k == "env" {
        return Ok(ShardArg::FromEngine(Some(count(n)?)));
    }
    let count = count(n)?;
    let index = k
        .parse::<usize>()
        .map_err(|_| syntax(&format!("`{k}` is not a shard index; {usage}")))?;
    if index >= count {
        return Err(syntax(&format!(
            "shard {index} does not exist among {count} (shards are counted from 0 to {})",
            count - 1
        )));
    }
    Ok(ShardArg::Fixed(Shard { index, count }))
}

/// The shard an argument means, reading the engine's variables through `var` (the CLI
/// passes `std::env::var`; tests pass a table).
///
/// Slurm job array, `env`: K = `SLURM_ARRAY_TASK_ID` − `SLURM_ARRAY_TASK_MIN`, N =
/// `SLURM_ARRAY_TASK_COUNT` (or `MAX` − `MIN` + 1); the array must be a plain range
/// (`--array=0-(N-1)`, any `%` limit), so the two counts must agree. Slurm with `env/N`:
/// K = `SLURM_ARRAY_TASK_ID` itself, below N, so one task resubmitted alone
/// (`sbatch --array=2 ...`) is still shard 2. Kubernetes Indexed Job: K =
/// `JOB_COMPLETION_INDEX`, N given as `env/N` (the Job's `completions`).
///
/// # Errors
/// [`ShardError::NoEngine`] when neither engine's index is set, [`ShardError::Inconsistent`]
/// when variables are missing, not numbers, or disagree.
pub fn resolve(arg: ShardArg, var: impl Fn(&str) -> Option<String>) -> Result<Shard, ShardError> {
    let given = match arg {
        ShardArg::Fixed(s) => return Ok(s),
        ShardArg::FromEngine(None) => "env".to_string(),
        ShardArg::FromEngine(Some(n)) => format!("env/{n}"),
    };
    let bad = |reason: String| ShardError::Inconsistent {
        given: given.clone(),
        reason,
    };
    let number = |name: &str| -> Result<Option<usize>, ShardError> {
        match var(name) {
            None => Ok(None),
            Some(v) => v
                .trim()
                .parse::<usize>()
                .map(Some)
                .map_err(|_| bad(format!("{name}=`{v}` is not a whole number"))),
        }
    };
    let given_count = match arg {
        ShardArg::FromEngine(n) => n,
        ShardArg::Fixed(_) => None,
    };
    let slurm = number("SLURM_ARRAY_TASK_ID")?;
    let k8s = number("JOB_COMPLETION_INDEX")?;
    let shard = match (slurm, k8s) {
        (None, None) => return Err(ShardError::NoEngine { given }),
        (Some(id), Some(index)) => {
            return Err(bad(format!(
                "both SLURM_ARRAY_TASK_ID={id} and JOB_COMPLETION_INDEX={index} are set; \
                 run under one engine, or give the shard as K/N"
            )));
        }
        (Some(id), None) if given_count.is_some() => {
            let count = given_count.unwrap_or(1);
            if id >= count {
                return Err(bad(format!(
                    "SLURM_ARRAY_TASK_ID={id} is not below the {count} shards given (with \
                     env/N the array index is the shard: submit with --array=0-{})",
                    count - 1
                )));
            }
            Shard { index: id, count }
        }
        (Some(id), None) => {
            let min = number("SLURM_ARRAY_TASK_MIN")?;
            let max = number("SLURM_ARRAY_TASK_MAX")?;
            let listed = number("SLURM_ARRAY_TASK_COUNT")?;
            let Some(min) = min else {
                return Err(bad(format!(
                    "SLURM_ARRAY_TASK_ID={id} is set but SLURM_ARRAY_TASK_MIN is not"
                )));
            };
            let span = match max {
                Some(max) if max < min => {
                    return Err(bad(format!(
                        "SLURM_ARRAY_TASK_MAX={max} is below SLURM_ARRAY_TASK_MIN={min}"
                    )));
                }
                Some(max) => Some(max - min + 1),
                None => None,
            };
            let count = match (span, listed) {
                (Some(s), Some(c)) if s != c => {
                    return Err(bad(format!(
                        "the array is not a plain range: SLURM_ARRAY_TASK_MIN..MAX spans {s} \
                         tasks but SLURM_ARRAY_TASK_COUNT={c}; submit with --array=0-{}",
                        c.max(1) - 1
                    )));
                }
                (Some(n), _) | (None, Some(n)) => n,
                (None, None) => {
                    return Err(bad(format!(
                        "SLURM_ARRAY_TASK_ID={id} is set but neither SLURM_ARRAY_TASK_MAX nor \
                         SLURM_ARRAY_TASK_COUNT is"
                    )));
                }
            };
            if id < min || id - min >= count {
                return Err(bad(format!(
                    "SLURM_ARRAY_TASK_ID={id} lies outside the array ({min} to {})",
                    min + count - 1
                )));
            }
            Shard {
                index: id - min,
                count,
            }
        }
        (None, Some(index)) => {
            let Some(count) = given_count else {
                return Err(bad(format!(
                    "JOB_COMPLETION_INDEX={index} is set but Kubernetes does not say how many \
                     shards there are; give --shard env/N with N the Job's completions"
                )));
            };
            if index >= count {
                return Err(bad(format!(
                    "JOB_COMPLETION_INDEX={index} is not below the {count} shards given"
                )));
            }
            Shard { index, count }
        }
    };
    Ok(shard)
}

/// One manifest line as the assignment sees it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Unit {
    /// A clip, with its duration when the manifest gives one.
    Clip(Option<f64>),
    /// A line that is not a clip (it becomes a reject).
    Bad,
}

/// The shard of every line, in line order: `assign(units, n)[i]` is the shard of line `i + 1`.
///
/// Clips weigh their duration when the manifest gives one (finite and not negative); a clip
/// without one weighs the mean of those given (1 when none is). Heaviest first, each goes to
/// the lightest shard so far; ties go to the earlier line and the lower shard, so the result
/// is the same on every machine.
pub fn assign(units: &[Unit], count: usize) -> Vec<usize> {
    let count = count.max(1);
    let given: Vec<f64> = units
        .iter()
        .filter_map(|u| match u {
            Unit::Clip(Some(d)) if d.is_finite() && *d >= 0.0 => Some(*d),
            _ => None,
        })
        .collect();
    let fallback = if given.is_empty() {
        1.0
    } else {
        given.iter().sum::<f64>() / given.len() as f64
    };
    let mut out = vec![0; units.len()];
    let mut clips: Vec<(usize, f64)> = Vec::new();
    for (i, u) in units.iter().enumerate() {
        match u {
            Unit::Bad => out[i] = i % count,
            Unit::Clip(d) => {
                let w = d.filter(|d| d.is_finite() && *d >= 0.0).unwrap_or(fallback);
                clips.push((i, w));
            }
        }
    }
    clips.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    let mut load = vec![0.0f64; count];
    for (i, w) in clips {
        let lightest = (0..count)
            .min_by(|&a, &b| load[a].total_cmp(&load[b]).then(a.cmp(&b)))
            .unwrap_or(0);
        load[lightest] += w;
        out[i] = lightest;
    }
    out
}

/// Keep only the lines of `manifest` that belong to `shard`: [`assign`] over every line,
/// clips (weighed by their `duration`) and bad lines alike.
pub fn keep(manifest: &mut Manifest, shard: Shard) {
    let lines = manifest.entries.len() + manifest.problems.len();
    let mut units = vec![Unit::Bad; lines];
    for e in &manifest.entries {
        if let Some(u) = e.line.checked_sub(1).and_then(|i| units.get_mut(i)) {
            *u = Unit::Clip(e.clip.duration);
        }
    }
    let owner = assign(&units, shard.count);
    let mine = |line: usize| line.checked_sub(1).and_then(|i| owner.get(i)) == Some(&shard.index);
    manifest.entries.retain(|e| mine(e.line));
    manifest.problems.retain(|p| mine(p.line));
}

#[cfg(test)]
mod tests {
    use super::*;

    fn env(pairs: &[(&str, &str)]) -> impl Fn(&str) -> Option<String> {
        let pairs: Vec<(String, String)> = pairs
            .iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect();
        move |k| pairs.iter().find(|(n, _)| n == k).map(|(_, v)| v.clone())
    }

    #[test]
    fn fixed_shards_parse_and_out_of_range_ones_do_not() {
        assert_eq!(
            parse_arg("2/7"),
            Ok(ShardArg::Fixed(Shard { index: 2, count: 7 }))
        );
        assert_eq!(parse_arg("env"), Ok(ShardArg::FromEngine(None)));
        assert_eq!(parse_arg("env/4"), Ok(ShardArg::FromEngine(Some(4))));
        for bad in ["7/7", "1/0", "x/3", "3", "env/0", "-1/3", ""] {
            assert!(parse_arg(bad).is_err(), "{bad}");
        }
        let e = parse_arg("7/7").unwrap_err().to_string();
        assert!(e.contains("counted from 0 to 6"), "{e}");
    }

    #[test]
    fn slurm_arrays_give_index_from_min_and_count() {
        let vars = env(&[
            ("SLURM_ARRAY_TASK_ID", "12"),
            ("SLURM_ARRAY_TASK_MIN", "10"),
            ("SLURM_ARRAY_TASK_MAX", "13"),
            ("SLURM_ARRAY_TASK_COUNT", "4"),
        ]);
        let got = resolve(ShardArg::FromEngine(None), &vars).unwrap();
        assert_eq!(got, Shard { index: 2, count: 4 });
        // With the count given the index is the shard: index 12 of 4 is refused.
        let e = resolve(ShardArg::FromEngine(Some(4)), &vars).unwrap_err();
        assert!(e.to_string().contains("not below the 4 shards"), "{e}");
        // One task of a 4-shard array resubmitted alone (--array=2): still shard 2 of 4.
        let again = env(&[
            ("SLURM_ARRAY_TASK_ID", "2"),
            ("SLURM_ARRAY_TASK_MIN", "2"),
            ("SLURM_ARRAY_TASK_MAX", "2"),
            ("SLURM_ARRAY_TASK_COUNT", "1"),
        ]);
        assert_eq!(
            resolve(ShardArg::FromEngine(Some(4)), &again),
            Ok(Shard { index: 2, count: 4 })
        );
        assert_eq!(
            resolve(ShardArg::FromEngine(None), &again),
            Ok(Shard { index: 0, count: 1 })
        );
        // Count only, MAX only: both enough.
        let count_only = env(&[
            ("SLURM_ARRAY_TASK_ID", "0"),
            ("SLURM_ARRAY_TASK_MIN", "0"),
            ("SLURM_ARRAY_TASK_COUNT", "3"),
        ]);
        assert_eq!(
            resolve(ShardArg::FromEngine(None), count_only),
            Ok(Shard { index: 0, count: 3 })
        );
    }

    #[test]
    fn inconsistent_or_missing_engine_variables_are_named() {
        let cases: &[(&[(&str, &str)], &str)] = &[
            (&[], "neither SLURM_ARRAY_TASK_ID"),
            (
                &[("SLURM_ARRAY_TASK_ID", "1")],
                "SLURM_ARRAY_TASK_MIN is not",
            ),
            (
                &[("SLURM_ARRAY_TASK_ID", "1"), ("SLURM_ARRAY_TASK_MIN", "0")],
                "neither SLURM_ARRAY_TASK_MAX nor SLURM_ARRAY_TASK_COUNT",
            ),
            (
                // --array=0-9:2 : five tasks spread over ten indices.
                &[
                    ("SLURM_ARRAY_TASK_ID", "2"),
                    ("SLURM_ARRAY_TASK_MIN", "0"),
                    ("SLURM_ARRAY_TASK_MAX", "8"),
                    ("SLURM_ARRAY_TASK_COUNT", "5"),
                ],
                "not a plain range",
            ),
            (
                &[("SLURM_ARRAY_TASK_ID", "x"), ("SLURM_ARRAY_TASK_MIN", "0")],
                "SLURM_ARRAY_TASK_ID=`x` is not a whole number",
            ),
            (
                &[("JOB_COMPLETION_INDEX", "3")],
                "give --shard env/N with N the Job's completions",
            ),
            (
                &[("JOB_COMPLETION_INDEX", "3"), ("SLURM_ARRAY_TASK_ID", "3")],
                "both SLURM_ARRAY_TASK_ID=3 and JOB_COMPLETION_INDEX=3",
            ),
        ];
        for (vars, want) in cases {
            let e = resolve(ShardArg::FromEngine(None), env(vars)).unwrap_err();
            assert!(e.to_string().contains(want), "{vars:?}: {e}");
        }
        let e = resolve(
            ShardArg::FromEngine(Some(3)),
            env(&[("JOB_COMPLETION_INDEX", "3")]),
        )
        .unwrap_err();
        assert!(e.to_string().contains("not below the 3 shards"), "{e}");
        assert_eq!(
            resolve(
                ShardArg::FromEngine(Some(4)),
                env(&[("JOB_COMPLETION_INDEX", "3")])
            ),
            Ok(Shard { index: 3, count: 4 })
        );
    }

    #[test]
    fn a_thousand_mixed_clips_balance_within_ten_percent_of_the_mean() {
        // Lengths from 0.5 s to 30 s, a few 5-minute outliers; a fixed portable generator.
        let mut rng = crate::seed::TakeRng::new(7);
        let units: Vec<Unit> = (0..1000)
            .map(|i| {
                let u = rng.unit();
                let d = if i % 97 == 0 {
                    300.0
                } else {
                    0.5 + 29.5 * u * u
                };
                Unit::Clip(Some(d))
            })
            .collect();
        for n in [2, 3, 7, 16] {
            let shards = assign(&units, n);
            let mut load = vec![0.0; n];
            for (u, &s) in units.iter().zip(&shards) {
                if let Unit::Clip(Some(d)) = u {
                    load[s] += d;
                }
            }
            let mean = load.iter().sum::<f64>() / n as f64;
            let max = load.iter().cloned().fold(0.0, f64::max);
            assert!(
                max <= 1.1 * mean,
                "N={n}: largest {max:.1} s vs mean {mean:.1} s"
            );
        }
    }

    #[test]
    fn without_durations_shards_differ_by_at_most_one_clip() {
        let units = vec![Unit::Clip(None); 23];
        let shards = assign(&units, 7);
        let mut counts = [0usize; 7];
        for s in shards {
            counts[s] += 1;
        }
        assert_eq!(counts, [4, 4, 3, 3, 3, 3, 3]);
    }
}
