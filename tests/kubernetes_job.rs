//! The Kubernetes job files of `retake jobs --for kubernetes` are valid Kubernetes objects:
//! checked against the Kubernetes API's JSON schemas (the strict variant, which refuses
//! unknown fields) as shipped by the PyPI package `kubernetes-validate` 1.37.0, validated by
//! the PyPI package `jsonschema` (Draft 2020-12). No cluster is needed.

mod common;

use common::{demo, retake, run_python};
use serde_json::Value;

/// Validate each file with kubernetes_validate (Kubernetes 1.30 schemas, strict), and show
/// that the same check refuses a misspelt field, so it is not a check that cannot fail.
const VALIDATE: &str = r#"
import json, sys, copy
import kubernetes_validate as kv
for path in sys.argv[1:]:
    job = json.load(open(path))
    print(path, "valid for Kubernetes", kv.validate(job, "1.30", strict=True))
    bad = copy.deepcopy(job)
    bad["spec"]["completionMod"] = bad["spec"].pop("completionMode", "Indexed")
    try:
        kv.validate(bad, "1.30", strict=True)
        print(path, "MISSPELT FIELD ACCEPTED")
    except kv.ValidationError as e:
        print(path, "misspelt field refused")
"#;

#[test]
fn job_files_validate_against_the_kubernetes_schema() {
    let tmp = tempfile::tempdir().unwrap();
    let data = tmp.path().join("data");
    std::fs::create_dir_all(&data).unwrap();
    std::fs::copy(demo().join("manifest.jsonl"), data.join("manifest.jsonl")).unwrap();
    std::os::unix::fs::symlink(demo().join("clips"), data.join("clips")).unwrap();
    std::os::unix::fs::symlink(demo().join("noise"), data.join("noise")).unwrap();
    std::fs::copy(demo().join("recipe.toml"), data.join("recipe.toml")).unwrap();
    let jobs = tmp.path().join("jobs");
    let o = retake(&[
        "jobs",
        data.join("recipe.toml").to_str().unwrap(),
        "-i",
        data.join("manifest.jsonl").to_str().unwrap(),
        "-o",
        data.join("out").to_str().unwrap(),
        "--for",
        "kubernetes",
        "--shards",
        "7",
        "--threads",
        "3",
        "--image",
        "registry.example/retake:0.1",
        "--claim",
        "site-audio",
        "--mount",
        data.to_str().unwrap(),
        "--name",
        "coldstore",
        "--to",
        jobs.to_str().unwrap(),
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let shards = jobs.join("coldstore-shards.job.json");
    let join = jobs.join("coldstore-join.job.json");
    let said = run_python(
        VALIDATE,
        &[shards.to_str().unwrap(), join.to_str().unwrap()],
    );
    assert_eq!(
        said.matches("valid for Kubernetes 1.30").count(),
        2,
        "{said}"
    );
    assert_eq!(said.matches("misspelt field refused").count(), 2, "{said}");

    // What the schema cannot say: one completion per shard, the index as the shard.
    let job: Value = serde_json::from_str(&std::fs::read_to_string(&shards).unwrap()).unwrap();
    assert_eq!(job["spec"]["completionMode"], "Indexed");
    assert_eq!(job["spec"]["completions"], 7);
    let pod = &job["spec"]["template"]["spec"];
    let script = pod["containers"][0]["command"][2].as_str().unwrap();
    assert!(script.contains("--shard env/7 --threads 3"), "{script}");
    assert_eq!(pod["containers"][0]["resources"]["requests"]["cpu"], "3");
    assert_eq!(
        pod["volumes"][0]["persistentVolumeClaim"]["claimName"],
        "site-audio"
    );
}

#[test]
fn paths_outside_the_mount_are_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let o = retake(&[
        "jobs",
        demo().join("recipe.toml").to_str().unwrap(),
        "-i",
        demo().join("manifest.jsonl").to_str().unwrap(),
        "-o",
        "/elsewhere/out",
        "--for",
        "kubernetes",
        "--shards",
        "2",
        "--image",
        "x",
        "--claim",
        "c",
        "--mount",
        "/mnt/shared",
        "--to",
        tmp.path().to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("is not under --mount /mnt/shared"));
}
