//! Loading a bank: find the files, decode and resample them in parallel, split off the
//! held-out part.

use std::cell::RefCell;
use std::fs;
use std::io::ErrorKind;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use rayon::prelude::*;

use super::{BankError, NoiseBank, NoiseFile, is_held_out};
use crate::audio::{self, ChannelPolicy};
use crate::dsp::resample::resample;

/// Find every file under `root` (recursively; hidden files and folders skipped), decode each
/// to mono (mean of channels), bring it to `rate`, and mark the held-out part by
/// `held_out_fraction`. Files that cannot be decoded or hold no samples are listed in
/// `skipped`, not fatal, unless no file is usable. Decoding runs in parallel; the result
/// does not depend on the thread count.
///
/// Every regular file counts, whatever its extension: a stray text file is decoded, fails,
/// and is listed in `skipped` with the decoder's reason, so nothing is ignored silently.
/// Names starting with `.` (files and folders) are left out. Symbolic links to files are
/// followed; symbolic links to folders are not (so a link cannot make the walk loop).
///
/// A file is skipped when it does not decode, holds no samples, is so short that it holds
/// no samples at `rate`, or holds a sample that is not finite (which would spread into
/// every take it is mixed into). The reason is the decoder's message without the file's
/// path (the path is the first element of the pair).
///
/// # Errors
/// A missing or unreadable folder, a folder with no files, or no usable file.
///
/// # Panics
/// When `rate` is zero.
pub fn load_bank(root: &Path, rate: u32, held_out_fraction: f64) -> Result<NoiseBank, BankError> {
    assert!(rate > 0, "noise bank rate must be positive");
    match fs::metadata(root) {
        Ok(m) if m.is_dir() => {}
        Ok(_) => return Err(BankError::Missing(root.to_path_buf())),
        Err(e) if e.kind() == ErrorKind::NotFound => {
            return Err(BankError::Missing(root.to_path_buf()));
        }
        Err(source) => {
            return Err(BankError::Io {
                path: root.to_path_buf(),
                source,
            });
        }
    }

    let mut found = Vec::new();
    walk(root, &mut Vec::new(), &mut found)?;
    if found.is_empty() {
        return Err(BankError::Empty(root.to_path_buf()));
    }
    found.sort_by(|a, b| a.0.cmp(&b.0));

    // `collect` on an indexed parallel iterator keeps the input order.
    let loaded: Vec<Result<Vec<f32>, String>> = found
        .par_iter()
        .map(|(_, path)| load_one(path, rate))
        .collect();

    let count = found.len();
    let mut files = Vec::new();
    let mut skipped = Vec::new();
    for ((rel_path, _), result) in found.into_iter().zip(loaded) {
        match result {
            Ok(samples) => {
                let category = match rel_path.split_once('/') {
                    Some((first, _)) => first.to_string(),
                    None => ".".to_string(),
                };
                let held_out = is_held_out(&rel_path, held_out_fraction);
                files.push(NoiseFile {
                    rel_path,
                    category,
                    samples,
                    held_out,
                });
            }
            Err(reason) => skipped.push((rel_path, reason)),
        }
    }
    if files.is_empty() {
        let (p, why) = &skipped[0];
        return Err(BankError::NothingUsable {
            path: root.to_path_buf(),
            count,
            first: format!("{p}: {why}"),
        });
    }
    Ok(NoiseBank {
        root: root.to_path_buf(),
        rate,
        files,
        skipped,
    })
}

/// Collect `(relative path with '/' separators, full path)` of every visible file under
/// `dir`; `rel` holds the components from the bank folder down to `dir`.
fn walk(
    dir: &Path,
    rel: &mut Vec<String>,
    found: &mut Vec<(String, PathBuf)>,
) -> Result<(), BankError> {
    let io_err = |path: &Path| {
        let path = path.to_path_buf();
        move |source| BankError::Io { path, source }
    };
    for entry in fs::read_dir(dir).map_err(io_err(dir))? {
        let entry = entry.map_err(io_err(dir))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        if name.starts_with('.') {
            continue;
        }
        let path = entry.path();
        let kind = entry.file_type().map_err(io_err(&path))?;
        let is_file = if kind.is_symlink() {
            // A dangling link is listed as a file so that its decode error is reported.
            fs::metadata(&path).map(|m| m.is_file()).unwrap_or(true)
        } else {
            kind.is_file()
        };
        if kind.is_dir() {
            rel.push(name);
            walk(&path, rel, found)?;
            rel.pop();
        } else if is_file {
            let mut parts = rel.clone();
            parts.push(name);
            found.push((parts.join("/"), path));
        }
    }
    Ok(())
}

/// Decode one file and bring it to `rate`, or say why it cannot be used.
fn load_one(path: &Path, rate: u32) -> Result<Vec<f32>, String> {
    let audio = audio::decode(path, ChannelPolicy::Mix).map_err(|e| {
        let text = e.to_string();
        let prefix = format!("{}: ", path.display());
        text.strip_prefix(&prefix)
            .map(str::to_string)
            .unwrap_or(text)
    })?;
    if audio.samples.is_empty() {
        return Err("holds no samples".to_string());
    }
    if let Some(i) = audio.first_non_finite() {
        return Err(format!("sample {i} is not finite"));
    }
    let samples = resample(&audio.samples, audio.rate, rate);
    if samples.is_empty() {
        return Err(format!(
            "too short: {} samples at {} Hz are none at {rate} Hz",
            audio.samples.len(),
            audio.rate
        ));
    }
    Ok(samples)
}

/// Banks loaded while one recipe is parsed, so two layers naming the same bank (with the
/// same held-out fraction) decode it once.
#[derive(Debug, Default)]
pub struct BankCache(RefCell<Vec<CachedBank>>);

#[derive(Debug)]
struct CachedBank {
    root: PathBuf,
    held_out_bits: u64,
    rate: u32,
    bank: Arc<NoiseBank>,
}

impl BankCache {
    /// The bank under `root` at `rate` with `held_out` of its files set aside, decoded on
    /// first use.
    ///
    /// # Errors
    /// As [`load_bank`].
    pub fn get(&self, root: &Path, rate: u32, held_out: f64) -> Result<Arc<NoiseBank>, BankError> {
        let held_out_bits = held_out.to_bits();
        let hit = self
            .0
            .borrow()
            .iter()
            .find(|c| c.root == root && c.held_out_bits == held_out_bits && c.rate == rate)
            .map(|c| c.bank.clone());
        if let Some(bank) = hit {
            return Ok(bank);
        }
        let bank = Arc::new(load_bank(root, rate, held_out)?);
        self.0.borrow_mut().push(CachedBank {
            root: root.to_path_buf(),
            held_out_bits,
            rate,
            bank: bank.clone(),
        });
        Ok(bank)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn held_out_split_is_stable_and_near_the_fraction() {
        let paths: Vec<String> = (0..1000)
            .map(|i| format!("cat{}/take-{i:04}.wav", i % 7))
            .collect();
        for fraction in [0.1, 0.25, 0.5] {
            let held: Vec<bool> = paths.iter().map(|p| is_held_out(p, fraction)).collect();
            let again: Vec<bool> = paths.iter().map(|p| is_held_out(p, fraction)).collect();
            assert_eq!(held, again);
            let n = held.iter().filter(|&&h| h).count() as f64;
            // Binomial(1000, f): standard deviation sqrt(1000 f (1 - f)) <= 15.8 (textbook
            // formula); 4 standard deviations of slack.
            let sd = (1000.0 * fraction * (1.0 - fraction)).sqrt();
            assert!(
                (n - 1000.0 * fraction).abs() < 4.0 * sd,
                "fraction {fraction}: {n} of 1000 held out"
            );
        }
        // Nested: a larger fraction keeps every file a smaller one held out.
        for p in &paths {
            if is_held_out(p, 0.1) {
                assert!(is_held_out(p, 0.3), "{p}");
            }
        }
        assert!(paths.iter().all(|p| !is_held_out(p, 0.0)));
        assert!(paths.iter().all(|p| is_held_out(p, 1.0)));
    }

    #[test]
    fn held_out_depends_on_the_path_only() {
        // The same name in two categories is two files: they need not share a part, and
        // over many names they do not always.
        let differ = (0..200)
            .filter(|i| {
                let name = format!("n{i}.wav");
                is_held_out(&format!("a/{name}"), 0.5) != is_held_out(&format!("b/{name}"), 0.5)
            })
            .count();
        assert!((60..140).contains(&differ), "{differ} of 200 differ");
    }
}
