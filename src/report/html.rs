//! The page: sections in reading order, each figure also kept in a `data-` attribute so a
//! test (or a script) can read the numbers back without parsing prose.

use std::fmt::Write;
use std::path::Path;

use super::RunFacts;
use super::gather::{Aggregates, Tally};
use super::ranges::RecipeRanges;
use super::rejects::Grouped;
use super::svg::{esc, histogram, num, scatter};

/// The style sheet's file name beside the page.
pub const CSS_NAME: &str = "report.css";
/// The style sheet (our own; no framework).
pub const CSS: &str = include_str!("report.css");

/// Everything the page shows.
pub struct Page<'a> {
    pub out: &'a Path,
    pub facts: Option<&'a RunFacts>,
    pub recipe_text: Option<&'a str>,
    pub ranges: &'a RecipeRanges,
    pub agg: &'a Aggregates,
    pub rejects: &'a Option<Grouped>,
    pub left_out: &'a Option<Grouped>,
    pub cards: &'a [String],
    pub sample_seed: u64,
    pub sample_size: usize,
    pub not_found: &'a [String],
}

fn tile(s: &mut String, key: &str, value: &str, exact: &str, label: &str) {
    let _ = write!(
        s,
        r#"<div class="tile" data-figure="{key}" data-value="{}"><span class="figure">{}</span><span class="label">{}</span></div>"#,
        esc(exact),
        esc(value),
        esc(label)
    );
}

fn ids(t: &Tally) -> String {
    if t.count == 0 {
        return "none".into();
    }
    let mut s = t
        .first
        .iter()
        .map(|i| format!("<code>{}</code>", esc(i)))
        .collect::<Vec<_>>()
        .join(", ");
    if t.count as usize > t.first.len() {
        s.push_str(" …");
    }
    s
}

/// A table of reasons: why, how many, the first ids. `attrs` go on the table element.
fn reasons_table(
    s: &mut String,
    attrs: &str,
    caption: &str,
    noun: &str,
    rows: &std::collections::BTreeMap<String, Tally>,
) {
    let _ = write!(
        s,
        r#"<table class="reasons"{attrs}><caption>{caption}</caption><thead><tr><th scope="col">why</th><th scope="col">{noun}</th><th scope="col">first</th></tr></thead><tbody>"#
    );
    for (why, t) in rows {
        let _ = write!(
            s,
            r#"<tr><td>{}</td><td data-count="{}">{}</td><td>{}</td></tr>"#,
            esc(why),
            t.count,
            t.count,
            ids(t)
        );
    }
    s.push_str("</tbody></table>");
}

fn pct(n: u64, of: u64) -> String {
    if of == 0 {
        "–".into()
    } else {
        format!("{} %", num(100.0 * n as f64 / of as f64))
    }
}

/// The whole page.
pub fn page(p: &Page<'_>) -> String {
    let agg = p.agg;
    let mut s = String::new();
    let _ = write!(
        s,
        r##"<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1"><title>retake report · {}</title><link rel="stylesheet" href="{CSS_NAME}"></head><body><a class="skip" href="#gallery">Skip to the gallery</a><header class="masthead"><p class="kicker">retake report</p><h1>What this run made</h1><p class="where">{}</p><nav aria-label="sections"><a href="#glance">at a glance</a><a href="#steps">steps</a><a href="#labels">labels</a><a href="#rejects">rejects</a><a href="#gallery">gallery</a></nav></header><main>"##,
        esc(&p.out.display().to_string()),
        esc(&p.out.display().to_string())
    );
    glance(&mut s, p);
    steps(&mut s, p);
    labels(&mut s, agg);
    rejects(&mut s, p);
    gallery(&mut s, p);
    let _ = write!(
        s,
        r#"</main><footer><p>Written by retake {} from <code>manifest.jsonl</code> in one pass; figures are exact counts over every take, the gallery and the scatter points a seeded sample.</p></footer></body></html>"#,
        env!("CARGO_PKG_VERSION")
    );
    s
}

fn glance(s: &mut String, p: &Page<'_>) {
    let agg = p.agg;
    s.push_str(r#"<section id="glance" aria-labelledby="glance-h"><h2 id="glance-h">At a glance</h2><div class="tiles">"#);
    let rejected = p.rejects.as_ref().map_or(0, |g| g.total);
    let left_out = p.left_out.as_ref().map_or(0, |g| g.total);
    let clips_in = p.facts.map_or(agg.clips + rejected, |f| f.clips_in as u64);
    tile(
        s,
        "clips-in",
        &clips_in.to_string(),
        &clips_in.to_string(),
        "clips in",
    );
    tile(
        s,
        "clips-with-takes",
        &agg.clips.to_string(),
        &agg.clips.to_string(),
        "clips with takes",
    );
    tile(
        s,
        "takes-out",
        &agg.takes.to_string(),
        &agg.takes.to_string(),
        "takes out",
    );
    let h_in = agg.seconds_in / 3600.0;
    let h_out = agg.seconds_out / 3600.0;
    tile(
        s,
        "hours-in",
        &format!("{h_in:.3}"),
        &h_in.to_string(),
        "hours in",
    );
    tile(
        s,
        "hours-out",
        &format!("{h_out:.3}"),
        &h_out.to_string(),
        "hours out",
    );
    if agg.seconds_in > 0.0 {
        let g = agg.seconds_out / agg.seconds_in;
        tile(
            s,
            "growth",
            &format!("{g:.1}×"),
            &g.to_string(),
            "audio grown",
        );
    }
    tile(
        s,
        "rejects",
        &rejected.to_string(),
        &rejected.to_string(),
        "rejected clips",
    );
    tile(
        s,
        "left-out",
        &left_out.to_string(),
        &left_out.to_string(),
        "left-out stretches",
    );
    match p.facts {
        Some(f) => {
            tile(
                s,
                "wall-time",
                &format!("{:.2} s", f.wall_seconds),
                &f.wall_seconds.to_string(),
                "wall time",
            );
            let x = if f.wall_seconds > 0.0 {
                f.seconds_made / f.wall_seconds
            } else {
                0.0
            };
            tile(
                s,
                "throughput",
                &format!("{x:.0}×"),
                &x.to_string(),
                "real time (audio made per wall second)",
            );
            tile(
                s,
                "version",
                &f.version,
                &f.version,
                "retake version of the run",
            );
        }
        None => {
            tile(
                s,
                "wall-time",
                "not recorded",
                "",
                "wall time (run with --report to keep it)",
            );
            tile(
                s,
                "version",
                env!("CARGO_PKG_VERSION"),
                env!("CARGO_PKG_VERSION"),
                "retake version of this report",
            );
        }
    }
    let seed = p
        .ranges
        .seed
        .map_or("not given".to_string(), |v| v.to_string());
    tile(s, "seed", &seed, &seed, "recipe seed");
    s.push_str("</div>");
    if agg.unreadable.count > 0 {
        let _ = write!(
            s,
            r#"<p class="warn" data-figure="unreadable" data-value="{}">{} manifest lines are not takes and were skipped: {}</p>"#,
            agg.unreadable.count,
            agg.unreadable.count,
            ids(&agg.unreadable)
        );
    }
    match p.recipe_text {
        Some(text) => {
            let _ = write!(
                s,
                r#"<details class="recipe" open><summary>Recipe as written{}</summary><pre><code>{}</code></pre></details>"#,
                p.facts
                    .map_or(String::new(), |f| format!(" · <code>{}</code>", esc(&f.recipe_path))),
                esc(text)
            );
        }
        None => s.push_str(r#"<p class="note">No recipe given: run <code>retake report OUT --recipe RECIPE.toml</code> to show it and mark its ranges.</p>"#),
    }
    s.push_str("</section>");
}

fn steps(s: &mut String, p: &Page<'_>) {
    let agg = p.agg;
    s.push_str(r#"<section id="steps" aria-labelledby="steps-h"><h2 id="steps-h">Steps</h2><p class="lede">For every step: in how many takes it ran, and each value it drew or measured. The shaded stripe on a histogram is the range the recipe asked for.</p>"#);
    for (i, st) in agg.steps.iter().enumerate() {
        let ranges = p.ranges.steps.get(i);
        let share = if st.listed > 0 {
            st.ran as f64 / st.listed as f64
        } else {
            0.0
        };
        let _ = write!(
            s,
            r#"<article class="step" id="step-{}" data-step="{}" data-ran="{}" data-listed="{}"><h3><span class="step-no">{}</span> {}</h3><p class="ran">ran in <strong>{}</strong> of {} takes ({})</p><div class="meter" role="img" aria-label="ran in {} of {} takes"><span style="width:{:.2}%"></span></div>"#,
            i + 1,
            esc(&st.name),
            st.ran,
            st.listed,
            i + 1,
            esc(&st.name),
            st.ran,
            st.listed,
            pct(st.ran, st.listed),
            st.ran,
            st.listed,
            share * 100.0
        );
        if !st.notes.is_empty() {
            reasons_table(s, "", "Due but left the take alone", "takes", &st.notes);
        }
        s.push_str(r#"<div class="charts">"#);
        for pair in agg
            .pairs
            .iter()
            .filter(|pp| pp.pair.step == st.name && pp.count > 0)
        {
            let points: Vec<(f64, f64)> = pair
                .points
                .clone()
                .into_sorted()
                .into_iter()
                .map(|x| x.1)
                .collect();
            let _ = write!(
                s,
                r#"<figure class="chart-box wide">{}<figcaption><strong>{}</strong> of {} within the tolerance{}. {}.</figcaption></figure>"#,
                scatter(
                    &format!("pair-{}-{}", i + 1, pair.pair.drawn),
                    pair,
                    &points
                ),
                pair.inside,
                pair.count,
                if pair.outside.count > 0 {
                    format!("; outside: {}", ids(&pair.outside))
                } else {
                    String::new()
                },
                esc(pair.pair.source)
            );
        }
        for (key, h) in &st.values {
            let bare = key.split_once('.').map_or(key.as_str(), |(_, k)| k);
            let range = key
                .starts_with("drawn.")
                .then(|| ranges.and_then(|r| r.get(bare)).copied())
                .flatten();
            let title = format!("{} {key}", st.name);
            let outside = range.map(|(a, b)| (h.min < a) || (h.max > b));
            let _ = write!(
                s,
                r#"<figure class="chart-box" data-step="{i}" data-field="{}">{}<figcaption>{} values, {} to {}, mean {}{}</figcaption></figure>"#,
                esc(key),
                histogram(
                    &format!("hist-{}-{}", i + 1, key.replace(['.', ' '], "-")),
                    &title,
                    h,
                    range
                ),
                h.count,
                num(h.min),
                num(h.max),
                num(h.mean()),
                match outside {
                    Some(true) =>
                        r#"; <span class="warn">some values lie outside the recipe's range</span>"#,
                    Some(false) => "; all inside the recipe's range",
                    None => "",
                }
            );
        }
        s.push_str("</div>");
        for (key, counts) in &st.labels {
            let total: u64 = counts.values().sum();
            let _ = write!(
                s,
                r#"<table class="counts" data-key="{}"><caption>{} {}</caption><tbody>"#,
                esc(key),
                esc(&st.name),
                esc(key)
            );
            for (v, n) in counts {
                let _ = write!(
                    s,
                    r#"<tr><td>{}</td><td data-count="{n}">{n}</td><td>{}</td></tr>"#,
                    esc(v),
                    pct(*n, total)
                );
            }
            s.push_str("</tbody></table>");
        }
        s.push_str("</article>");
    }
    s.push_str("</section>");
}

fn labels(s: &mut String, agg: &Aggregates) {
    let _ = write!(
        s,
        r#"<section id="labels" aria-labelledby="labels-h"><h2 id="labels-h">Label health</h2><div class="tiles"><div class="tile" data-figure="valid-takes" data-value="{}"><span class="figure">{}</span><span class="label">of {} takes with every timing valid ({})</span></div><div class="tile" data-figure="words" data-value="{}"><span class="figure">{}</span><span class="label">words in {} timed lines</span></div><div class="tile" data-figure="obscured-quarter" data-value="{}"><span class="figure">{}</span><span class="label">words lost more than a quarter to masks</span></div><div class="tile" data-figure="obscured-half" data-value="{}"><span class="figure">{}</span><span class="label">words lost more than half</span></div></div>"#,
        agg.valid_takes,
        agg.valid_takes,
        agg.takes,
        pct(agg.valid_takes, agg.takes),
        agg.words,
        agg.words,
        agg.lines_timed,
        agg.obscured_quarter.count,
        agg.obscured_quarter.count,
        agg.obscured_half.count,
        agg.obscured_half.count
    );
    if !agg.invalid.is_empty() {
        reasons_table(s, "", "Timing problems in the takes", "takes", &agg.invalid);
    }
    s.push_str(r#"<p class="lede">Word length in the take against the same word in the source (through the take's time map), by the steps that moved time in that take.</p><div class="charts">"#);
    for (group, h) in &agg.word_change {
        let _ = write!(
            s,
            r#"<figure class="chart-box" data-field="word-change" data-group="{}">{}<figcaption>{} words, change {} % to {} %</figcaption></figure>"#,
            esc(group),
            histogram(
                &format!("change-{}", group.replace([' ', '+'], "")),
                &format!("word length change % · {group}"),
                h,
                None
            ),
            h.count,
            num(h.min),
            num(h.max)
        );
    }
    if agg.obscured.count > 0 {
        let _ = write!(
            s,
            r#"<figure class="chart-box" data-field="obscured">{}<figcaption>{} words partly hidden by masks (of {}); more than a quarter: {}; more than half: {}</figcaption></figure>"#,
            histogram(
                "obscured",
                "obscured (fraction of the word hidden)",
                &agg.obscured,
                Some((0.0, 1.0))
            ),
            agg.obscured.count,
            agg.words,
            ids(&agg.obscured_quarter),
            ids(&agg.obscured_half)
        );
    }
    s.push_str("</div>");
    if agg.flagged_words.is_empty() {
        s.push_str(r#"<p class="ok" data-figure="flagged-words" data-value="0">No word was flagged: every word keeps a length and a source time.</p>"#);
    } else {
        reasons_table(
            s,
            r#" data-figure="flagged-words""#,
            "Words flagged",
            "words",
            &agg.flagged_words,
        );
    }
    s.push_str(r#"<p class="note">A label that could not stay valid makes its clip a reject (below), so no take carries one.</p></section>"#);
}

fn grouped_table(s: &mut String, title: &str, key: &str, g: &Option<Grouped>) {
    match g {
        None => {
            let _ = write!(
                s,
                r#"<p class="note" data-figure="{key}" data-value="0">{title}: no file.</p>"#
            );
        }
        Some(g) if g.total == 0 => {
            let _ = write!(
                s,
                r#"<p class="ok" data-figure="{key}" data-value="0">{title}: none.</p>"#
            );
        }
        Some(g) => reasons_table(
            s,
            &format!(r#" data-figure="{key}" data-value="{}""#, g.total),
            &format!("{title}: {} by reason", g.total),
            "count",
            &g.by_reason,
        ),
    }
}

fn rejects(s: &mut String, p: &Page<'_>) {
    s.push_str(r#"<section id="rejects" aria-labelledby="rejects-h"><h2 id="rejects-h">Rejects and left-out records</h2>"#);
    grouped_table(
        s,
        "Rejected clips (rejects.jsonl)",
        "rejects-table",
        p.rejects,
    );
    grouped_table(
        s,
        "Left-out stretches (left_out.jsonl)",
        "left-out-table",
        p.left_out,
    );
    s.push_str("</section>");
}

fn gallery(s: &mut String, p: &Page<'_>) {
    let _ = write!(
        s,
        r#"<section id="gallery" aria-labelledby="gallery-h"><h2 id="gallery-h">Gallery</h2><p class="lede">{} takes: a seeded sample of {} (seed {}) and any asked for with <code>--show ID</code>. Each shows the source above the take on one time scale; the lines between them follow the time map from each source word to the same word in the take. Boxes are the label timings; hatching marks what a mask hid.</p>"#,
        p.cards.len(),
        p.sample_size,
        p.sample_seed
    );
    if !p.not_found.is_empty() {
        let _ = write!(
            s,
            r#"<p class="warn">No take has these ids: {}</p>"#,
            p.not_found
                .iter()
                .map(|i| format!("<code>{}</code>", esc(i)))
                .collect::<Vec<_>>()
                .join(", ")
        );
    }
    for c in p.cards {
        s.push_str(c);
    }
    s.push_str("</section>");
}
