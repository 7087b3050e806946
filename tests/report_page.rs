//! The report page (`retake run --report`, `retake report`) checked in a real browser:
//! headless Chromium loads it from the file system through the DevTools protocol
//! (tests/reference/page_in_browser.py, with websocket-client from PyPI), and every figure
//! it shows is recomputed from the run's manifest by Python (json + numpy.histogram,
//! tests/reference/report_figures.py).
//!
//! Without Chromium the browser test says it skipped and why; with `CI=true` a missing
//! Chromium is a failure.

mod common;

use std::path::{Path, PathBuf};

use common::{python, read_jsonl, retake, root};
use serde_json::Value;

/// Chromium: `$RETAKE_CHROMIUM`, else `chromium` or `chromium-browser` on the PATH.
fn chromium() -> Option<PathBuf> {
    if let Ok(p) = std::env::var("RETAKE_CHROMIUM") {
        return Some(PathBuf::from(p));
    }
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .flat_map(|d| [d.join("chromium"), d.join("chromium-browser")])
        .find(|p| p.is_file())
}

fn ok(o: &std::process::Output) -> String {
    assert!(
        o.status.success(),
        "retake failed ({:?}):\n{}",
        o.status.code(),
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).to_string()
}

/// The demo set plus two clips that must be rejected (a line past the end of its audio,
/// audio that is not there), run with `--report` into `dir/run`.
fn demo_run_with_rejects(dir: &Path) -> (PathBuf, PathBuf) {
    ok(&retake(&[
        "demo",
        "--out",
        dir.join("demo").to_str().unwrap(),
    ]));
    let set = dir.join("demo/demo_audio");
    let manifest = set.join("manifest.jsonl");
    let mut text = std::fs::read_to_string(&manifest).unwrap();
    text.push_str(concat!(
        r#"{"id": "late-line", "audio": "clips/dock-001.wav", "lines": [{"start": 0.5, "end": 99.0, "text": "too long"}]}"#,
        "\n",
        r#"{"id": "no-audio", "audio": "clips/not-there.wav", "text": "nothing"}"#,
        "\n"
    ));
    std::fs::write(&manifest, text).unwrap();
    let out = dir.join("run");
    let o = retake(&[
        "run",
        set.join("recipe.toml").to_str().unwrap(),
        "--input",
        manifest.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--report",
    ]);
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    (out, set)
}

#[test]
fn the_page_loads_in_a_browser_and_shows_what_the_manifest_holds() {
    let Some(browser) = chromium() else {
        assert!(
            !std::env::var("CI").is_ok_and(|v| v == "true"),
            "CI=true: the report's browser test needs Chromium (Debian package `chromium`, \
             installed by .ci/run) on the PATH or in RETAKE_CHROMIUM"
        );
        eprintln!(
            "SKIPPED: no Chromium (install Debian's `chromium`, or set RETAKE_CHROMIUM): the \
             report page was not checked in a browser"
        );
        return;
    };
    let tmp = tempfile::tempdir().unwrap();
    let (out, _) = demo_run_with_rejects(tmp.path());
    assert!(out.join("report/index.html").is_file());
    // Ask for one source's takes by id, beside a seeded sample of three.
    let printed = ok(&retake(&[
        "report",
        out.to_str().unwrap(),
        "--show",
        "pick-a-001",
        "--sample",
        "3",
    ]));
    assert!(printed.contains("report/index.html"), "{printed}");
    let page_url = format!(
        "file://{}",
        out.join("report/index.html")
            .canonicalize()
            .unwrap()
            .display()
    );
    let shot = tmp.path().join("page.png");
    let o = std::process::Command::new(python())
        .arg(root().join("tests/reference/page_in_browser.py"))
        .args([
            browser.to_str().unwrap(),
            &page_url,
            shot.to_str().unwrap(),
            "1200",
        ])
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "browser check failed:\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let page_json = tmp.path().join("page.json");
    std::fs::write(&page_json, &o.stdout).unwrap();
    let page: Value = serde_json::from_slice(&o.stdout).unwrap();

    // The browser saw no error, and every picture and every recording resolved and decoded.
    assert_eq!(
        page["console_errors"],
        serde_json::json!([]),
        "{}",
        page["console_errors"]
    );
    assert_eq!(page["failed_requests"], serde_json::json!([]));
    let images = page["images"].as_array().unwrap();
    assert!(images.len() >= 2 * 4, "{} images", images.len());
    for im in images {
        assert_eq!(im["ok"], true, "image did not decode: {im}");
        assert!(
            im["alt"].as_str().is_some_and(|a| a.len() > 10),
            "no alt text: {im}"
        );
    }
    assert_eq!(page["missing_alt"], 0);
    let takes = read_jsonl(&out.join("manifest.jsonl"));
    let by_id = |id: &str| takes.iter().find(|t| t["id"] == id).unwrap();
    for a in page["audio"].as_array().unwrap() {
        assert_eq!(a["ok"], true, "audio did not decode: {a}");
        assert!(a["duration"].as_f64().unwrap() > 0.5, "{a}");
        assert_eq!(a["tabbable"], true, "player not reachable by keyboard: {a}");
    }
    // The listening caution: once, before the first player.
    let cautions = page["cautions"].as_array().unwrap();
    assert_eq!(cautions.len(), 1);
    assert_eq!(cautions[0]["before_first_player"], true);
    assert!(cautions[0]["text"].as_str().unwrap().contains("headphones"));

    // The gallery: the four takes asked for first, then the sample.
    let gallery = page["gallery"].as_array().unwrap();
    let ids: Vec<&str> = gallery
        .iter()
        .map(|g| g["take"].as_str().unwrap())
        .collect();
    assert_eq!(
        &ids[..4],
        [
            "pick-a-001.t0",
            "pick-a-001.t1",
            "pick-a-001.t2",
            "pick-a-001.t3"
        ]
    );
    assert!(ids.len() <= 4 + 3 && ids.len() >= 5, "{ids:?}");
    // Each audio player of a take plays that take: its length is the manifest's.
    for (g, card) in gallery
        .iter()
        .zip(page["audio"].as_array().unwrap().chunks(2))
    {
        let d = by_id(g["take"].as_str().unwrap())["duration"]
            .as_f64()
            .unwrap();
        assert!(
            (card[1]["duration"].as_f64().unwrap() - d).abs() < 0.01,
            "{g} {card:?}"
        );
    }
    // Word boxes sit where the manifest says, on the time axis's own mapping.
    let mut checked = 0;
    for g in gallery {
        let take = by_id(g["take"].as_str().unwrap());
        for (which, panel) in g["panels"].as_object().unwrap() {
            let axis = &panel["axis"];
            let (t0, t1) = (axis["t0"].as_f64().unwrap(), axis["t1"].as_f64().unwrap());
            let (left, width) = (
                axis["left"].as_f64().unwrap(),
                axis["width"].as_f64().unwrap(),
            );
            assert!(width > 100.0, "{axis}");
            if which == "take" {
                assert!((t1 - take["duration"].as_f64().unwrap()).abs() < 1e-6);
            }
            for w in panel["words"].as_array().unwrap() {
                let start = w["start"].as_f64().unwrap();
                if which == "take" {
                    let (l, k) = (
                        w["line"].as_u64().unwrap() as usize,
                        w["word"].as_u64().unwrap() as usize,
                    );
                    let want = &take["lines"][l]["words"][k];
                    assert_eq!(w["text"], want["text"]);
                    assert_eq!(start, want["start"].as_f64().unwrap(), "{w}");
                }
                let x = left + (start - t0) / (t1 - t0) * width;
                let got = w["left"].as_f64().unwrap();
                assert!(
                    (got - x).abs() <= 1.0,
                    "{which} word {w}: box at {got} px, axis maps it to {x}"
                );
                checked += 1;
            }
        }
    }
    assert!(checked > 50, "only {checked} word boxes");

    // The screenshot is not blank and shows the summary at the top.
    let (w, h, rgb) = decode_png(&shot);
    assert!(w == 1200 && h > 2000, "{w}x{h}");
    let glance_top = page["glance_top"].as_f64().unwrap();
    assert!(glance_top < 400.0, "the summary starts at {glance_top} px");
    for key in [
        "clips-in",
        "takes-out",
        "hours-in",
        "hours-out",
        "rejects",
        "wall-time",
        "seed",
    ] {
        let t = &page["tiles"][key];
        assert_eq!(t["visible"], true, "{key}");
        assert!(
            t["top"].as_f64().unwrap() < 900.0,
            "{key} is below the first screen: {t}"
        );
    }
    let band = |y0: usize, y1: usize| {
        let mut colours = std::collections::HashSet::new();
        for y in y0..y1.min(h) {
            for x in 0..w {
                let i = (y * w + x) * 3;
                colours.insert([rgb[i], rgb[i + 1], rgb[i + 2]]);
            }
        }
        colours.len()
    };
    assert!(
        band(glance_top as usize, glance_top as usize + 250) > 20,
        "the summary area is blank"
    );
    assert!(band(0, h) > 1000, "the page is nearly one colour");
    // Readable in a narrow window: nothing makes the page scroll sideways at 360 px.
    assert!(
        page["narrow_overflow_px"].as_f64().unwrap() <= 0.0,
        "{}",
        page["narrow_overflow_px"]
    );

    // The numbers on the page are the manifest's (Python's json and numpy.histogram).
    let expected: Value = serde_json::from_str(&common::run_python(
        &std::fs::read_to_string(root().join("tests/reference/report_figures.py")).unwrap(),
        &[
            page_json.to_str().unwrap(),
            out.join("manifest.jsonl").to_str().unwrap(),
            out.join("rejects.jsonl").to_str().unwrap(),
        ],
    ))
    .unwrap();
    let tiles = &page["tiles"];
    for (key, want) in expected["figures"].as_object().unwrap() {
        let got: f64 = tiles[key]["value"].as_str().unwrap().parse().unwrap();
        let want = want.as_f64().unwrap();
        assert!(
            (got - want).abs() <= 1e-9 * want.abs().max(1.0),
            "{key}: page {got}, manifest {want}"
        );
    }
    assert_eq!(expected["figures"]["rejects"], 2);
    assert_eq!(tiles["clips-in"]["value"], "12");
    assert_eq!(page["steps"], expected["steps"]);
    let charts = page["charts"].as_array().unwrap();
    let want_charts = expected["charts"].as_array().unwrap();
    assert_eq!(charts.len(), want_charts.len());
    assert!(charts.len() > 20, "{} histograms", charts.len());
    for (c, e) in charts.iter().zip(want_charts) {
        let got = counts(&c["counts"]);
        let want = counts(&e["counts"]);
        assert_eq!(
            got.iter().sum::<u64>(),
            e["total"].as_u64().unwrap(),
            "{}",
            c["label"]
        );
        // The bars drawn are the counts kept (empty bins draw no bar).
        let bars = counts(&c["bars"]);
        assert_eq!(
            bars,
            got.iter().copied().filter(|&n| n > 0).collect::<Vec<_>>()
        );
        let off: u64 = got.iter().zip(&want).map(|(a, b)| a.abs_diff(*b)).sum();
        let ambiguous = e["ambiguous"].as_u64().unwrap();
        assert!(
            off <= 2 * ambiguous,
            "{}: page {got:?}, numpy {want:?}",
            c["label"]
        );
    }
}

fn counts(v: &Value) -> Vec<u64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|n| n.as_u64().unwrap())
        .collect()
}

fn decode_png(path: &Path) -> (usize, usize, Vec<u8>) {
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let (w, h) = (info.width as usize, info.height as usize);
    let channels = info.color_type.samples();
    let rgb = buf[..info.buffer_size()]
        .chunks(channels)
        .flat_map(|p| [p[0], p[1], p[2]])
        .collect();
    (w, h, rgb)
}

#[test]
fn the_gallery_is_a_seeded_sample_and_rejects_are_grouped() {
    let tmp = tempfile::tempdir().unwrap();
    let (out, set) = demo_run_with_rejects(tmp.path());
    let gallery = |extra: &[&str]| -> Vec<String> {
        let mut args = vec!["report", out.to_str().unwrap(), "--sample", "5"];
        args.extend_from_slice(extra);
        ok(&retake(&args));
        let html = std::fs::read_to_string(out.join("report/index.html")).unwrap();
        html.split(r#"class="take-card" id="take-"#)
            .skip(1)
            .map(|s| {
                s.split("data-take=\"")
                    .nth(1)
                    .unwrap()
                    .split('"')
                    .next()
                    .unwrap()
                    .to_string()
            })
            .collect()
    };
    let a = gallery(&[]);
    let b = gallery(&[]);
    let c = gallery(&["--seed", "99"]);
    assert_eq!(a.len(), 5);
    assert_eq!(a, b, "the same seed draws the same takes");
    assert_ne!(a, c, "another seed draws others");
    // The seeded sample leaves take 0 (the untouched source) out.
    assert!(a.iter().all(|id| !id.ends_with(".t0")), "{a:?}");
    assert_eq!(
        std::fs::read_dir(out.join("report/img")).unwrap().count(),
        10,
        "two pictures per take, none left from earlier reports"
    );
    // The recipe as written, and the run's facts kept from `run --report`.
    let html = std::fs::read_to_string(out.join("report/index.html")).unwrap();
    assert!(html.contains("# The bundled demo recipe"));
    assert!(
        !html.contains("not recorded"),
        "the wall time kept by run --report is shown"
    );
    // Rejects by reason, with their ids.
    for (reason_part, id) in [("past the end", "late-line"), ("not-there", "no-audio")] {
        let row = html
            .split("<tr>")
            .find(|r| r.contains(&format!("<code>{id}</code>")))
            .unwrap_or_else(|| panic!("no reject row for {id}"));
        assert!(row.contains(r#"data-count="1""#), "{row}");
        let _ = reason_part;
    }
    let _ = set;
}

/// The shell examples in docs/report.md run as written, in order, from a scratch folder,
/// with `retake` on the PATH; each exits 0 and the pages they promise exist.
#[test]
fn report_examples_run_as_written() {
    let tmp = tempfile::tempdir().unwrap();
    common::run_doc_commands("report.md", tmp.path());
    for page in [
        "retake-demo/report/index.html",
        "retake-demo/again/report/index.html",
    ] {
        assert!(tmp.path().join(page).is_file(), "{page}");
    }
}
