//! A real demo run's output manifest read the way training code reads it: Hugging Face
//! `datasets` (PyPI, `load_dataset("json", ...)` then `with_format("numpy")` and, where torch
//! is installed, `with_format("torch")`), pyarrow's and pandas' JSON readers, and doubles as
//! JavaScript holds numbers. Only the audio paths are resolved; nothing else is changed.

mod common;

use std::path::{Path, PathBuf};

use common::{read_jsonl, retake, run_python};
use serde_json::Value;

/// Run `retake demo` into a fresh folder under `dir`; return the output manifest's path.
fn demo_run(dir: &Path) -> PathBuf {
    let out = dir.join("demo");
    let o = retake(&["demo", "--out", out.to_str().unwrap(), "-j", "2"]);
    assert!(
        o.status.success(),
        "demo failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    out.join("manifest.jsonl")
}

#[test]
fn every_take_seed_is_exact_as_a_double() {
    let dir = tempfile::tempdir().unwrap();
    let takes = read_jsonl(&demo_run(dir.path()));
    assert_eq!(takes.len(), 40);
    for t in &takes {
        let seed = &t["origin"]["seed"];
        let exact = seed.as_u64().expect("seed is a whole number");
        // JavaScript and pyarrow-backed readers hold JSON numbers as IEEE 754 doubles or
        // signed 64-bit integers; doubles are exact for integers up to 2^53 - 1 (ECMA-262
        // Number.MAX_SAFE_INTEGER).
        assert!(exact < 1 << 53, "{}: seed {exact}", t["id"]);
        let as_double: f64 = serde_json::from_str(&seed.to_string()).unwrap();
        assert_eq!(as_double as u64, exact, "{}", t["id"]);
    }
}

#[test]
fn every_take_has_its_lines_joined_as_text() {
    let dir = tempfile::tempdir().unwrap();
    let takes = read_jsonl(&demo_run(dir.path()));
    for t in &takes {
        let text = t["text"]
            .as_str()
            .unwrap_or_else(|| panic!("{}: no text", t["id"]));
        match t["lines"].as_array() {
            Some(lines) => {
                let joined: Vec<&str> = lines.iter().map(|l| l["text"].as_str().unwrap()).collect();
                assert_eq!(text, joined.join(" "), "{}", t["id"]);
            }
            // The demo's untimed clip keeps its own text.
            None => assert_eq!(t["origin"]["source"], "dock-003", "{}", t["id"]),
        }
    }
    // The output is still a valid input: `check` accepts it as it stands.
    let manifest = dir.path().join("demo/manifest.jsonl");
    let o = retake(&["check", manifest.to_str().unwrap()]);
    assert!(
        o.status.success(),
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
}

/// The loader script: argv[1] the manifest, argv[2] "1" when torch must be there. Prints one
/// line per check it made, so the Rust side can see nothing was left out.
const LOAD: &str = r#"
import json, os, sys
import numpy as np
import datasets, pyarrow.json, pandas

path, need_torch = sys.argv[1], sys.argv[2] == "1"
base = os.path.dirname(os.path.abspath(path))
rows = [json.loads(l) for l in open(path)]  # Python ints are exact: the reference values

# pyarrow (and pandas over it) read the seeds as int64, exactly.
table = pyarrow.json.read_json(path)
assert table.column("origin").combine_chunks().field("seed").to_pylist() == [r["origin"]["seed"] for r in rows]
frame = pandas.read_json(path, lines=True)
assert [o["seed"] for o in frame["origin"]] == [r["origin"]["seed"] for r in rows]
print("pyarrow pandas seeds")

ds = datasets.load_dataset("json", data_files=path, split="train")
# The one change a loader makes: audio paths relative to the manifest become absolute.
ds = ds.map(lambda r: {"audio": os.path.join(base, r["audio"])})
assert all(os.path.isfile(a) for a in ds["audio"])

def close(got, want, dtype):
    # datasets re-encodes a JSON Lines batch with pandas' ujson_dumps when an object list
    # has differing keys (origin.steps does), which writes numbers with 10 decimals (pandas'
    # default double_precision=10): values come back within 5e-11 of the file's. A float32
    # tensor adds at most one float32 spacing.
    got = np.asarray(got, dtype=np.float64)
    want = np.asarray(want, dtype=np.float64)
    tol = 5e-11 + 1e-15 if dtype == np.float64 else np.spacing(np.abs(want).astype(np.float32)).astype(np.float64)
    return got.shape == want.shape and bool(np.all(np.abs(got - want) <= tol))

def check(fmt, as_array, dtype):
    view = ds.with_format(fmt)
    for i in [0, 5, 17, len(rows) - 1]:
        got, want = view[i], rows[i]
        assert got["text"] == want["text"], (i, got["text"])
        assert int(got["origin"]["seed"]) == want["origin"]["seed"], i
        tm = got["origin"]["time_map"]
        for key in ["source", "take"]:
            assert close(as_array(tm[key]), want["origin"]["time_map"][key], dtype), (i, key, tm[key])
        got_lines = [] if got["lines"] is None else list(got["lines"])
        assert len(got_lines) == len(want.get("lines") or []), i
        for gl, wl in zip(got_lines, want.get("lines") or []):
            assert len(gl["words"]) == len(wl["words"]), i
            for gw, ww in zip(gl["words"], wl["words"]):
                assert close(as_array(gw["start"]), ww["start"], dtype), (i, ww)
                assert close(as_array(gw["end"]), ww["end"], dtype), (i, ww)
    # A batch of rows too, as a DataLoader collates them.
    batch = view[0:4]
    assert len(batch["origin"]) == 4
    print(fmt, "rows", "time_map", "words")

check("numpy", np.asarray, np.float64)
try:
    import torch
except ImportError:
    torch = None
if torch is None:
    assert not need_torch, "torch is not installed but CI=true requires it (tests/reference/requirements-torch.txt)"
    print("torch skipped: not installed (pip install -r tests/reference/requirements-torch.txt)")
else:
    # datasets' torch formatter makes float32 tensors by default.
    check("torch", lambda t: t.numpy(), np.float32)
"#;

#[test]
fn the_output_manifest_loads_into_hugging_face_datasets() {
    // Hugging Face `datasets` (PyPI, tests/reference/requirements.txt): before time maps were
    // written as two columns, `[[source, take], ...]` made both `with_format("numpy")` and
    // `with_format("torch")` fail with "The truth value of an array with more than one
    // element is ambiguous" while decoding the nested list.
    let dir = tempfile::tempdir().unwrap();
    let manifest = demo_run(dir.path());
    let need_torch = std::env::var("CI").is_ok_and(|v| v == "true");
    let said = run_python(
        LOAD,
        &[
            manifest.to_str().unwrap(),
            if need_torch { "1" } else { "0" },
        ],
    );
    eprint!("{said}");
    assert!(said.contains("pyarrow pandas seeds"), "{said}");
    assert!(said.contains("numpy rows time_map words"), "{said}");
    assert!(
        said.contains("torch rows time_map words")
            || (!need_torch && said.contains("torch skipped")),
        "{said}"
    );
    // The run's records are what was read: one per take, each with a time map.
    let takes: Vec<Value> = read_jsonl(&manifest);
    assert!(
        takes
            .iter()
            .all(|t| t["origin"]["time_map"]["source"].is_array())
    );
}
