//! docs/recipe.md lists, for every step, exactly the keys the step registry says the step
//! reads; the parsers themselves are held to the registry by a debug assertion in the key
//! reader, so code, `retake steps` and docs cannot drift apart.

mod common;

use std::collections::BTreeSet;

use retake::steps::REGISTRY;

/// The keys named in the first column of the tables under each `### \`step\`` heading.
fn documented() -> Vec<(String, BTreeSet<String>)> {
    let text = std::fs::read_to_string(common::root().join("docs/recipe.md")).unwrap();
    let mut out: Vec<(String, BTreeSet<String>)> = Vec::new();
    for line in text.lines() {
        if let Some(head) = line.strip_prefix("### `") {
            let name = head.split('`').next().unwrap().to_string();
            out.push((name, BTreeSet::new()));
        } else if line.starts_with("## ") {
            out.push((String::new(), BTreeSet::new()));
        } else if let (Some(first), Some((_, keys))) = (
            line.strip_prefix("| `")
                .map(|_| line.split('|').nth(1).unwrap_or("")),
            out.last_mut(),
        ) {
            for (i, part) in first.split('`').enumerate() {
                if i % 2 == 1 {
                    keys.insert(part.to_string());
                }
            }
        }
    }
    out.retain(|(n, _)| !n.is_empty());
    out
}

#[test]
fn every_step_documents_exactly_the_keys_it_reads() {
    let docs = documented();
    let names: Vec<&str> = docs.iter().map(|(n, _)| n.as_str()).collect();
    let registered: Vec<&str> = REGISTRY.iter().map(|k| k.name).collect();
    assert_eq!(
        names.iter().copied().collect::<BTreeSet<_>>(),
        registered.iter().copied().collect::<BTreeSet<_>>(),
        "steps with a docs section vs steps in the registry"
    );
    for kind in REGISTRY {
        let (_, keys) = docs.iter().find(|(n, _)| n == kind.name).unwrap();
        let want: BTreeSet<String> = kind.keys.iter().map(|k| (*k).to_string()).collect();
        assert_eq!(keys, &want, "docs/recipe.md keys of `{}`", kind.name);
    }
}
