//! The recipes shown in the docs are real: every ```toml block with `takes =` in README.md
//! and docs/*.md parses, and the demo recipe parses.

use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn toml_blocks(text: &str) -> Vec<(usize, String)> {
    let mut out = Vec::new();
    let mut current: Option<(usize, String)> = None;
    for (i, line) in text.lines().enumerate() {
        match (&mut current, line.trim_start()) {
            (None, l) if l.starts_with("```toml") => current = Some((i + 1, String::new())),
            (Some(_), l) if l.starts_with("```") => out.push(current.take().unwrap()),
            (Some((_, body)), _) => {
                body.push_str(line);
                body.push('\n');
            }
            _ => {}
        }
    }
    out
}

#[test]
fn documented_recipes_parse() {
    let mut docs = vec![root().join("README.md")];
    for e in std::fs::read_dir(root().join("docs")).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_some_and(|x| x == "md") {
            docs.push(p);
        }
    }
    let mut parsed = 0;
    for doc in docs {
        let text = std::fs::read_to_string(&doc).unwrap();
        for (line, body) in toml_blocks(&text) {
            if body.contains("takes =") {
                if let Err(e) = retake::recipe::parse(Path::new("example.toml"), &body) {
                    panic!(
                        "{} line {line}: documented recipe does not parse: {e}",
                        doc.display()
                    );
                }
                parsed += 1;
            }
        }
    }
    assert!(parsed >= 1, "no documented recipe found");
    retake::recipe::load(&root().join("demo_audio/recipe.toml")).expect("demo recipe parses");
}
