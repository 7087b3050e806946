//! The commands that look before anything is made: `plan` checks a recipe and prints what it
//! will do while writing nothing; `steps` lists every step and its keys from the registry;
//! `completions` and `manual` are generated from the same command-line definition.

mod common;

use std::path::Path;
use std::process::Command;

use retake::steps::REGISTRY;

fn retake_in(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_retake"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

fn files_under(dir: &Path) -> Vec<std::path::PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(files_under(&p));
        } else {
            out.push(p);
        }
    }
    out.sort();
    out
}

#[test]
fn plan_prints_every_step_with_its_chance_and_writes_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let recipe = common::demo().join("recipe.toml");
    std::fs::copy(&recipe, tmp.path().join("recipe.toml")).unwrap();
    // The recipe names a bank folder relative to itself; plan reads it like run does.
    let before = {
        let status = Command::new("cp")
            .args(["-r"])
            .arg(common::demo().join("noise"))
            .arg(tmp.path())
            .status()
            .unwrap();
        assert!(status.success());
        files_under(tmp.path())
    };
    let o = retake_in(tmp.path(), &["plan", "recipe.toml"]);
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{stdout}{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert_eq!(files_under(tmp.path()), before, "plan wrote something");

    // One printed row per [[step]] of the recipe, in order, with the chance it gives.
    let text = std::fs::read_to_string(&recipe).unwrap();
    let table: toml::Table = text.parse().unwrap();
    let steps = table["step"].as_array().unwrap();
    let rows: Vec<&str> = stdout.lines().filter(|l| l.starts_with("step ")).collect();
    assert_eq!(rows.len(), steps.len(), "{stdout}");
    for (i, (row, step)) in rows.iter().zip(steps).enumerate() {
        let name = step["do"].as_str().unwrap();
        assert!(
            row.starts_with(&format!("step {}  {name} ", i + 1)),
            "{row}"
        );
        match step.get("chance").and_then(toml::Value::as_float) {
            Some(c) => assert!(row.contains(&format!("chance {c}")), "{row}"),
            None => assert!(row.contains("every take"), "{row}"),
        }
        for key in step
            .as_table()
            .unwrap()
            .keys()
            .filter(|k| *k != "do" && *k != "chance")
        {
            assert!(
                row.contains(&format!("{key} = ")),
                "{key} missing from {row}"
            );
        }
    }
    assert!(stdout.contains("seed 2026"), "{stdout}");
}

#[test]
fn plan_refuses_a_wrong_recipe_with_exit_2() {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(
        tmp.path().join("r.toml"),
        "takes = 2\n[[step]]\ndo = \"sped\"\n",
    )
    .unwrap();
    let o = retake_in(tmp.path(), &["plan", "r.toml"]);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("r.toml line 3"), "{stderr}");
    assert!(stderr.contains("did you mean `speed`"), "{stderr}");
}

#[test]
fn steps_lists_every_registered_step_and_its_keys() {
    let o = common::retake(&["steps"]);
    assert_eq!(o.status.code(), Some(0));
    let stdout = String::from_utf8_lossy(&o.stdout);
    for kind in REGISTRY {
        let at = stdout
            .lines()
            .position(|l| l.starts_with(&format!("{}  ", kind.name)))
            .unwrap_or_else(|| panic!("{} not listed:\n{stdout}", kind.name));
        let keys = stdout.lines().nth(at + 1).unwrap();
        assert_eq!(keys, format!("    keys: {}, chance", kind.keys.join(", ")));
    }
}

#[test]
fn completions_and_manual_name_every_command() {
    let bash = common::retake(&["completions", "bash"]);
    assert_eq!(bash.status.code(), Some(0));
    let man = common::retake(&["manual"]);
    assert_eq!(man.status.code(), Some(0));
    let (bash, man) = (
        String::from_utf8_lossy(&bash.stdout),
        String::from_utf8_lossy(&man.stdout),
    );
    assert!(
        man.starts_with(".ie") || man.contains(".TH retake 1"),
        "{man}"
    );
    for command in [
        "run", "check", "slice", "plan", "steps", "remap", "export", "import",
    ] {
        assert!(bash.contains(command), "completion lacks {command}");
        assert!(man.contains(command), "manual lacks {command}");
    }
}
