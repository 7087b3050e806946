//! Refusing an output folder that would overwrite the command's own inputs (the manifest,
//! the audio it names, the recipe and the files the recipe reads), before anything is
//! written. Paths are compared after resolving links and `..`, so `--out .` next to the
//! input manifest is caught as surely as `--out /same/folder`.

use std::path::{Component, Path, PathBuf};

/// What a command writes in its output folder: whole files, and folders it fills.
#[derive(Debug, Clone)]
pub struct Targets {
    out: PathBuf,
    files: Vec<PathBuf>,
    folders: Vec<PathBuf>,
}

/// An input the output would overwrite.
#[derive(Debug, thiserror::Error)]
#[error(
    "{}: the {what} would be overwritten or removed by the output written to {}; choose \
     another output folder",
    input.display(),
    out.display()
)]
pub struct Overwrite {
    /// The input file, as it was named.
    pub input: PathBuf,
    /// What it is (`input manifest`, `audio of clip dock-01`, `recipe`, ...).
    pub what: String,
    /// The output folder.
    pub out: PathBuf,
}

impl Targets {
    /// The files `out/<file>` and everything under `out/<folder>/`.
    pub fn new(out: &Path, files: &[&str], folders: &[&str]) -> Self {
        let root = resolve(out);
        Targets {
            out: out.to_path_buf(),
            files: files.iter().map(|f| root.join(f)).collect(),
            folders: folders.iter().map(|f| root.join(f)).collect(),
        }
    }

    fn hits(&self, p: &Path) -> bool {
        self.files.iter().any(|f| f == p) || self.folders.iter().any(|d| p.starts_with(d))
    }
}

/// The first input (`(what, path)`) that an output in `targets` would overwrite, as an
/// error; `Ok` when none would.
///
/// # Errors
/// [`Overwrite`] naming the input.
pub fn refuse_overwrite<W: std::fmt::Display, P: AsRef<Path>>(
    targets: &Targets,
    inputs: impl IntoIterator<Item = (W, P)>,
) -> Result<(), Overwrite> {
    for (what, input) in inputs {
        let input = input.as_ref();
        // The file itself (links followed) and the name it has (its folder's links
        // followed): a link at an output's place is replaced, and the link is an input too.
        let named = match (input.parent(), input.file_name()) {
            (Some(dir), Some(name)) => resolve(dir).join(name),
            _ => resolve(input),
        };
        if targets.hits(&resolve(input)) || targets.hits(&named) {
            return Err(Overwrite {
                input: input.to_path_buf(),
                what: what.to_string(),
                out: targets.out.clone(),
            });
        }
    }
    Ok(())
}

/// An absolute path with links and `..` resolved as far as the path exists; the rest is
/// appended as written, `.` and `..` applied by name.
pub fn resolve(path: &Path) -> PathBuf {
    let abs = if path.is_absolute() {
        path.to_path_buf()
    } else {
        std::env::current_dir().unwrap_or_default().join(path)
    };
    let mut rest = Vec::new();
    let mut head = abs.as_path();
    loop {
        if let Ok(real) = head.canonicalize() {
            let mut out = real;
            for c in rest.iter().rev() {
                match c {
                    Component::ParentDir => {
                        out.pop();
                    }
                    Component::CurDir => {}
                    other => out.push(other),
                }
            }
            return out;
        }
        match (head.parent(), head.components().next_back()) {
            (Some(parent), Some(last)) => {
                rest.push(last);
                head = parent;
            }
            _ => return abs,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_input_at_an_output_place_is_refused() {
        let dir = tempfile::tempdir().expect("temp dir");
        let data = dir.path().join("data");
        std::fs::create_dir_all(data.join("takes")).expect("mkdir");
        let manifest = data.join("manifest.jsonl");
        std::fs::write(&manifest, "").expect("write");
        let audio = data.join("takes/a.wav");
        std::fs::write(&audio, "").expect("write");
        // `data/sub/..` is `data`.
        let t = Targets::new(&data.join("sub/.."), &["manifest.jsonl"], &["takes"]);
        let e =
            refuse_overwrite(&t, [("input manifest", manifest.as_path())]).expect_err("manifest");
        assert!(e.to_string().contains("input manifest"), "{e}");
        assert!(refuse_overwrite(&t, [("audio", audio.as_path())]).is_err());
        let t = Targets::new(&dir.path().join("out"), &["manifest.jsonl"], &["takes"]);
        assert!(refuse_overwrite(&t, [("m", manifest.as_path()), ("a", audio.as_path())]).is_ok());
    }
}
