//! One gallery entry: the source clip above the take, both as spectrograms on one time and
//! frequency scale, their line and word boxes at the label timings, the time map drawn
//! between them (each word's start in the source joined to its start in the take), masked
//! stretches and bands hatched, the take's step values, and a player for each.

use std::fmt::Write;
use std::path::Path;

use serde_json::Value;

use super::gather::TIME_STEPS;
use super::spectrogram::{LogMel, ROWS, log_mel, mel_y, png_bytes};
use super::svg::{esc, num, palette};
use crate::audio::{Audio, ChannelPolicy, decode};
use crate::timemap::TimeMap;
use crate::transcript::{Clip, Line};

/// Pixels (SVG units) per second of audio, for source and take alike.
pub const PX_PER_S: f64 = 150.0;
/// Left margin for the frequency labels.
const LEFT: f64 = 58.0;
const RIGHT: f64 = 12.0;
const PIC_H: f64 = ROWS as f64;

/// The source of a gallery take, found in the input manifest or as the untouched take 0.
#[derive(Debug, Clone)]
pub struct SourceClip {
    /// Its record.
    pub clip: Clip,
    /// Its audio file.
    pub audio: std::path::PathBuf,
}

/// What an entry needs from outside: where its files go and how the page links to them.
#[derive(Debug, Clone)]
pub struct Entry<'a> {
    /// Position in the gallery, from 0 (names the files).
    pub index: usize,
    /// The take's record.
    pub take: &'a Clip,
    /// The take's audio file.
    pub take_audio: &'a Path,
    /// The page's link to the take's audio.
    pub take_href: String,
    /// The source, when found.
    pub source: Option<&'a SourceClip>,
    /// Asked for by id.
    pub asked: bool,
}

/// Files an entry writes, relative to the report folder, with their bytes.
pub type Files = Vec<(String, Vec<u8>)>;

/// The entry's HTML and the files it needs written. A take whose audio cannot be read
/// still gets an entry that says why.
pub fn entry(e: &Entry<'_>, caution: bool) -> (String, Files) {
    let mut files = Files::new();
    let take_audio = match decode(e.take_audio, ChannelPolicy::Mix) {
        Ok(a) => a,
        Err(err) => {
            let html = format!(
                r#"<article class="take-card"><h3>{}</h3><p class="warn">The take's audio cannot be read: {}</p></article>"#,
                esc(&e.take.id),
                esc(&err.to_string())
            );
            return (html, files);
        }
    };
    let source_audio = e
        .source
        .and_then(|s| decode(&s.audio, ChannelPolicy::Mix).ok());
    let top_hz = f64::from(take_audio.rate / 2).min(
        source_audio
            .as_ref()
            .map_or(f64::INFINITY, |a| f64::from(a.rate) / 2.0),
    );
    let take_pic = log_mel(&take_audio.samples, take_audio.rate, top_hz).ok();
    let source_pic = source_audio
        .as_ref()
        .and_then(|a| log_mel(&a.samples, a.rate, top_hz).ok());
    let peak = take_pic
        .iter()
        .chain(source_pic.iter())
        .map(LogMel::peak_db)
        .fold(f32::NEG_INFINITY, f32::max);
    let mut png_name = |which: &str, pic: Option<&LogMel>| -> Option<String> {
        let bytes = png_bytes(pic?, peak).ok()?;
        let name = format!("img/{:03}-{which}.png", e.index);
        files.push((name.clone(), bytes));
        Some(name)
    };
    let take_png = png_name("take", take_pic.as_ref()).zip(take_pic.as_ref());
    let source_png = png_name("source", source_pic.as_ref()).zip(source_pic.as_ref());
    let origin = e.take.origin.as_ref();
    let map = origin.map(|o| o.time_map.clone());
    let take_d = take_audio.duration();
    let source_d = source_audio.as_ref().map_or(0.0, Audio::duration);
    let span = take_d.max(source_d).max(0.1);
    let width = LEFT + span * PX_PER_S + RIGHT;
    let id = format!("g{}", e.index);

    let mut svg = String::new();
    let mut y = 0.0;
    let alt = alt_text(e, source_d, take_d);
    let height = if e.source.is_some() { 400.0 } else { 200.0 };
    let _ = write!(
        svg,
        r#"<svg class="pair-view" id="{id}" viewBox="0 0 {width:.1} {height}" style="max-width:{width:.0}px" role="img" aria-label="{}" data-px-per-s="{PX_PER_S}"><title>{}</title><defs><pattern id="{id}-hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="6" height="6" fill="{}" fill-opacity="0.12"/><line x1="0" y1="0" x2="0" y2="6" stroke="{}" stroke-width="2.2" stroke-opacity="0.8"/></pattern></defs>"#,
        esc(&alt),
        esc(&alt),
        palette::YELLOW,
        palette::YELLOW
    );
    if let (Some(src), Some(src_audio)) = (e.source, source_audio.as_ref()) {
        let none = Vec::new();
        panel(
            &mut svg,
            &PanelSpec {
                id: &id,
                which: "source",
                caption: &format!("source {} · {} s", src.clip.id, num(src_audio.duration())),
                y,
                duration: src_audio.duration(),
                png: source_png.as_ref(),
                lines: src.clip.lines.as_deref().unwrap_or(&[]),
                masks: &none,
                bands: &none,
                top_hz,
            },
        );
        y += 180.0;
        if let Some(map) = &map {
            map_strip(&mut svg, y, &src.clip, e.take, map);
        }
        y += 40.0;
    }
    let (masks, bands, mask_note) = masked(e.take);
    panel(
        &mut svg,
        &PanelSpec {
            id: &id,
            which: "take",
            caption: &format!("take {} · {} s", e.take.id, num(take_d)),
            y,
            duration: take_d,
            png: take_png.as_ref(),
            lines: e.take.lines.as_deref().unwrap_or(&[]),
            masks: &masks,
            bands: &bands,
            top_hz,
        },
    );
    svg.push_str("</svg>");

    let mut html = String::new();
    let _ = write!(
        html,
        r#"<article class="take-card" id="take-{}" data-take="{}"><h3><span class="take-id">{}</span>{}</h3><div class="view">{svg}</div>"#,
        e.index,
        esc(&e.take.id),
        esc(&e.take.id),
        if e.asked {
            r#" <span class="chip">asked for</span>"#
        } else {
            ""
        }
    );
    if let Some(note) = mask_note {
        let _ = write!(html, r#"<p class="note">{}</p>"#, esc(&note));
    }
    if e.source.is_none() {
        html.push_str(r#"<p class="note">The source clip was not found (give the input manifest with <code>--input</code>, or keep take 0 as the source with <code>keep_source = true</code>), so the take is shown alone.</p>"#);
    }
    html.push_str(r#"<div class="players">"#);
    if caution {
        html.push_str(r#"<p class="caution" role="note"><strong>Caution — listening.</strong> Takes can be louder than their source (gain steps, noise) and site noise can be loud. Start playback at a low volume, especially on headphones.</p>"#);
    }
    if let Some(src) = e.source {
        let href = format!("media/{:03}-source.{}", e.index, extension(&src.audio));
        if let Ok(bytes) = std::fs::read(&src.audio) {
            files.push((href.clone(), bytes));
        }
        let _ = write!(
            html,
            r#"<label class="player">source <audio controls preload="metadata" src="{}" aria-label="play source {}"></audio></label>"#,
            esc(&href),
            esc(&src.clip.id)
        );
    }
    let _ = write!(
        html,
        r#"<label class="player">take <audio controls preload="metadata" src="{}" aria-label="play take {}"></audio></label></div>"#,
        esc(&e.take_href),
        esc(&e.take.id)
    );
    html.push_str(&step_table(e.take));
    html.push_str("</article>");
    (html, files)
}

fn extension(p: &Path) -> String {
    p.extension()
        .and_then(|x| x.to_str())
        .filter(|x| x.chars().all(|c| c.is_ascii_alphanumeric()))
        .unwrap_or("audio")
        .to_ascii_lowercase()
}

fn alt_text(e: &Entry<'_>, source_d: f64, take_d: f64) -> String {
    let words: Vec<&str> = e
        .take
        .lines
        .iter()
        .flatten()
        .flat_map(|l| l.words.iter().map(|w| w.text.as_str()))
        .collect();
    let head = match e.source {
        Some(s) => format!(
            "Spectrogram of source {} ({} s) above the spectrogram of take {} ({} s), on one time scale",
            s.clip.id,
            num(source_d),
            e.take.id,
            num(take_d)
        ),
        None => format!("Spectrogram of take {} ({} s)", e.take.id, num(take_d)),
    };
    format!("{head}; word boxes for: {}", words.join(" "))
}

struct PanelSpec<'a> {
    id: &'a str,
    which: &'a str,
    caption: &'a str,
    y: f64,
    duration: f64,
    png: Option<&'a (String, &'a LogMel)>,
    lines: &'a [Line],
    masks: &'a [(f64, f64)],
    bands: &'a [(f64, f64)],
    top_hz: f64,
}

fn x_at(t: f64) -> f64 {
    LEFT + t * PX_PER_S
}

/// Caption, line band, picture with word boxes, time axis: 176 units tall.
fn panel(svg: &mut String, p: &PanelSpec<'_>) {
    let (y0, lines_y, pic_y) = (p.y, p.y + 16.0, p.y + 32.0);
    let x1 = x_at(p.duration);
    let _ = write!(
        svg,
        r#"<g class="panel" data-panel="{}"><text x="{LEFT}" y="{:.1}" class="caption">{}</text>"#,
        p.which,
        y0 + 11.0,
        esc(p.caption)
    );
    let _ = write!(
        svg,
        r#"<rect x="{LEFT}" y="{pic_y}" width="{:.2}" height="{PIC_H}" class="pic-frame"/>"#,
        x1 - LEFT
    );
    if let Some((href, pic)) = p.png {
        // Column c is centred on c * hop: the picture starts half a column early.
        let x = LEFT - pic.hop_s * PX_PER_S / 2.0;
        let _ = write!(
            svg,
            r#"<clipPath id="{}-{}-clip"><rect x="{LEFT}" y="{pic_y}" width="{:.2}" height="{PIC_H}"/></clipPath><image class="spectrogram" href="{}" x="{x:.3}" y="{pic_y}" width="{:.3}" height="{PIC_H}" preserveAspectRatio="none" clip-path="url(#{}-{}-clip)"><title>log-magnitude mel spectrogram of the {}</title></image>"#,
            p.id,
            p.which,
            x1 - LEFT,
            esc(href),
            pic.columns as f64 * pic.hop_s * PX_PER_S,
            p.id,
            p.which,
            p.which
        );
    }
    for &(lo, hi) in p.bands {
        let (ya, yb) = (
            pic_y + mel_y(hi, p.top_hz, PIC_H),
            pic_y + mel_y(lo, p.top_hz, PIC_H),
        );
        let _ = write!(
            svg,
            r#"<rect class="masked band" data-low-hz="{lo}" data-high-hz="{hi}" x="{LEFT}" y="{ya:.2}" width="{:.2}" height="{:.2}" fill="url(#{}-hatch)"><title>frequency band masked: {} to {} Hz</title></rect>"#,
            x1 - LEFT,
            (yb - ya).max(1.0),
            p.id,
            num(lo),
            num(hi)
        );
    }
    for &(a, b) in p.masks {
        let _ = write!(
            svg,
            r#"<rect class="masked span" data-start="{a}" data-end="{b}" x="{:.3}" y="{pic_y}" width="{:.3}" height="{PIC_H}" fill="url(#{}-hatch)"><title>time masked: {} to {} s</title></rect>"#,
            x_at(a),
            ((b - a) * PX_PER_S).max(1.0),
            p.id,
            num(a),
            num(b)
        );
    }
    // Frequency labels (kHz) at fixed heights of the mel axis.
    for khz in [0.5, 1.0, 2.0, 4.0, 8.0, 16.0] {
        if khz * 1000.0 < p.top_hz {
            let yy = pic_y + mel_y(khz * 1000.0, p.top_hz, PIC_H);
            let _ = write!(
                svg,
                r#"<text x="{:.1}" y="{:.1}" class="tick" text-anchor="end">{} k</text>"#,
                LEFT - 4.0,
                yy + 3.0,
                num(khz)
            );
        }
    }
    for (li, line) in p.lines.iter().enumerate() {
        let _ = write!(
            svg,
            r#"<g class="line-box" data-line="{li}"><rect class="line" data-start="{}" data-end="{}" x="{:.3}" y="{lines_y}" width="{:.3}" height="13"><title>{}</title></rect><text x="{:.2}" y="{:.1}" class="line-text">{}</text></g>"#,
            line.start,
            line.end,
            x_at(line.start),
            ((line.end - line.start) * PX_PER_S).max(0.5),
            esc(&line.text),
            x_at(line.start) + 2.0,
            lines_y + 10.0,
            esc(&line.text)
        );
        for (wi, w) in line.words.iter().enumerate() {
            let obscured = w.extra.get("obscured").and_then(Value::as_f64);
            let _ = write!(
                svg,
                r#"<g class="word-box"><rect class="word" data-line="{li}" data-word="{wi}" data-start="{}" data-end="{}" data-text="{}" x="{:.3}" y="{pic_y}" width="{:.3}" height="{PIC_H}"><title>{} · {} to {} s{}</title></rect><text class="word-text" x="{:.2}" y="{:.1}">{}</text></g>"#,
                w.start,
                w.end,
                esc(&w.text),
                x_at(w.start),
                ((w.end - w.start) * PX_PER_S).max(0.5),
                esc(&w.text),
                num(w.start),
                num(w.end),
                obscured
                    .filter(|o| *o > 0.0)
                    .map_or(String::new(), |o| format!(
                        " · {} % obscured",
                        num(o * 100.0)
                    )),
                x_at(w.start) + 1.5,
                pic_y + 11.0 + 11.0 * (wi % 2) as f64,
                esc(&w.text)
            );
        }
    }
    // The time axis: `data-t0`/`data-t1` at its two ends (the browser test maps word boxes
    // through it).
    let axis_y = pic_y + PIC_H;
    let _ = write!(
        svg,
        r#"<rect class="time-axis" data-t0="0" data-t1="{}" x="{LEFT}" y="{axis_y}" width="{:.3}" height="1"/>"#,
        p.duration,
        x1 - LEFT
    );
    let step = if p.duration > 20.0 { 5.0 } else { 1.0 };
    let mut t = 0.0;
    while t <= p.duration + 1e-9 {
        let _ = write!(
            svg,
            r#"<line x1="{x:.2}" x2="{x:.2}" y1="{axis_y}" y2="{:.1}" class="axis"/><text x="{x:.2}" y="{:.1}" class="tick" text-anchor="middle">{} s</text>"#,
            axis_y + 4.0,
            axis_y + 14.0,
            num(t),
            x = x_at(t)
        );
        t += step;
    }
    svg.push_str("</g>");
}

/// The time map between the panels: each source word's start joined to the same word's
/// start in the take (`map` applied to the source start, which is where the labels went).
fn map_strip(svg: &mut String, y: f64, source: &Clip, take: &Clip, map: &TimeMap) {
    let _ = write!(svg, r#"<g class="time-map">"#);
    let starts = |c: &Clip| -> Vec<f64> {
        c.lines
            .iter()
            .flatten()
            .flat_map(|l| std::iter::once(l.start).chain(l.words.iter().map(|w| w.start)))
            .collect()
    };
    let take_d = take.duration.unwrap_or(map.range().1);
    for s in starts(source) {
        let t = map.apply_within(s, take_d);
        let _ = write!(
            svg,
            r#"<line x1="{:.2}" y1="{:.1}" x2="{:.2}" y2="{:.1}" class="map-line" data-source="{s}" data-take="{t}"/>"#,
            x_at(s),
            y - 4.0,
            x_at(t),
            y + 44.0
        );
    }
    let _ = write!(
        svg,
        r#"<text x="{:.1}" y="{:.1}" class="tick" text-anchor="end">time map</text></g>"#,
        LEFT - 4.0,
        y + 22.0
    );
    let _ = starts(take);
}

/// Time masks and frequency bands of the take's mask steps, in take time; when a step that
/// moves time ran after a mask, its spans are not in take time any more and are listed
/// instead of drawn.
/// Spans in seconds or bands in Hz: (from, to).
type Spans = Vec<(f64, f64)>;

fn masked(take: &Clip) -> (Spans, Spans, Option<String>) {
    let (mut spans, mut bands, mut note) = (Vec::new(), Vec::new(), None);
    let Some(origin) = &take.origin else {
        return (spans, bands, note);
    };
    let pairs = |v: Option<&Value>| -> Vec<(f64, f64)> {
        v.and_then(Value::as_array)
            .map(|a| {
                a.iter()
                    .filter_map(|p| Some((p.get(0)?.as_f64()?, p.get(1)?.as_f64()?)))
                    .collect()
            })
            .unwrap_or_default()
    };
    for (i, rec) in origin.steps.iter().enumerate() {
        if !rec.ran || rec.step != "mask" {
            continue;
        }
        bands.extend(pairs(rec.drawn.get("freq_bands_hz")));
        let these = pairs(rec.drawn.get("time_spans_s"));
        let later_mover = origin.steps[i + 1..]
            .iter()
            .find(|s| s.ran && TIME_STEPS.contains(&s.step.as_str()));
        match later_mover {
            Some(m) if !these.is_empty() => {
                note = Some(format!(
                    "Time masks of step {} are in the timeline before the {} step that follows it, so they are not drawn: {}",
                    i + 1,
                    m.step,
                    these
                        .iter()
                        .map(|(a, b)| format!("{}–{} s", num(*a), num(*b)))
                        .collect::<Vec<_>>()
                        .join(", ")
                ));
            }
            _ => spans.extend(these),
        }
    }
    (spans, bands, note)
}

fn value_text(v: &Value) -> String {
    match v {
        Value::Number(n) => n.as_f64().map_or(n.to_string(), num),
        Value::String(s) => s.clone(),
        Value::Array(a) => format!(
            "[{}]",
            a.iter().map(value_text).collect::<Vec<_>>().join(", ")
        ),
        other => other.to_string(),
    }
}

fn step_table(take: &Clip) -> String {
    let Some(origin) = &take.origin else {
        return String::new();
    };
    let mut s = String::from(
        r#"<table class="values"><caption>Steps of this take</caption><thead><tr><th scope="col">step</th><th scope="col">drawn</th><th scope="col">measured</th></tr></thead><tbody>"#,
    );
    for (i, rec) in origin.steps.iter().enumerate() {
        let kv = |m: &serde_json::Map<String, Value>| {
            m.iter()
                .map(|(k, v)| format!("{} = {}", esc(k), esc(&value_text(v))))
                .collect::<Vec<_>>()
                .join("<br>")
        };
        let (drawn, measured) = if rec.ran {
            (kv(&rec.drawn), kv(&rec.measured))
        } else {
            (
                format!(
                    r#"<span class="off">did not run{}</span>"#,
                    rec.note
                        .as_ref()
                        .map_or(String::new(), |n| format!(": {}", esc(n)))
                ),
                String::new(),
            )
        };
        let _ = write!(
            s,
            r#"<tr{}><th scope="row">{} {}</th><td>{drawn}</td><td>{measured}</td></tr>"#,
            if rec.ran { "" } else { r#" class="idle""# },
            i + 1,
            esc(&rec.step)
        );
    }
    let _ = write!(
        s,
        "</tbody></table><p class=\"seed\">take seed {}</p>",
        origin.seed
    );
    s
}
