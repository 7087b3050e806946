//! The recipes shown in the docs are real: every ```toml block with `takes =` in README.md
//! and docs/*.md parses, and the demo recipe parses.

mod common;

use std::path::Path;

use common::root;

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
        for (line, body) in common::fenced_blocks(&text, "toml") {
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
