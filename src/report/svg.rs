//! Charts written directly as SVG: a histogram with the recipe's range marked, and drawn
//! against measured with the tolerance band. Written by hand rather than through a plotting
//! crate because the page needs exact, documented coordinates (the browser test reads them
//! back) and small files; each chart also carries its numbers as `data-` attributes.

use std::fmt::Write;

use super::gather::{PairStats, Tolerance};
use super::hist::Hist;

/// Colours from the Okabe–Ito palette (Okabe & Ito 2008, chosen to stay distinct under
/// every common kind of colour-vision deficiency).
pub mod palette {
    /// Blue: bars and points.
    pub const BLUE: &str = "#0072B2";
    /// Orange: the recipe's range and tolerance bands.
    pub const ORANGE: &str = "#E69F00";
    /// Vermillion: values outside what was asked.
    pub const VERMILLION: &str = "#D55E00";
    /// Bluish green: the identity line.
    pub const GREEN: &str = "#009E73";
    /// Sky blue: word boxes on dark pictures.
    pub const SKY: &str = "#56B4E9";
    /// Yellow: masked stretches on dark pictures.
    pub const YELLOW: &str = "#F0E442";
}

/// Text safe inside XML (element text and attribute values).
pub fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            _ => o.push(c),
        }
    }
    o
}

/// A number for people: 3 significant digits, no exponent for everyday sizes.
pub fn num(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-4..6).contains(&mag) {
        return format!("{x:.2e}");
    }
    let decimals = (2 - mag).max(0) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A list of numbers as JSON, each printed so it reads back exactly.
fn json_list<T: serde::Serialize>(v: &[T]) -> String {
    esc(&serde_json::to_string(v).unwrap_or_default())
}

/// A linear map from a domain to pixels.
#[derive(Debug, Clone, Copy)]
struct Axis {
    d0: f64,
    d1: f64,
    p0: f64,
    p1: f64,
}

impl Axis {
    fn new(d0: f64, d1: f64, p0: f64, p1: f64) -> Axis {
        let (d0, d1) = if d1 > d0 {
            (d0, d1)
        } else {
            let pad = if d0 == 0.0 { 0.5 } else { d0.abs() * 0.05 };
            (d0 - pad, d0 + pad)
        };
        Axis { d0, d1, p0, p1 }
    }
    fn at(&self, x: f64) -> f64 {
        self.p0 + (x - self.d0) / (self.d1 - self.d0) * (self.p1 - self.p0)
    }
    fn padded(lo: f64, hi: f64, p0: f64, p1: f64) -> Axis {
        let pad = if hi > lo { (hi - lo) * 0.04 } else { 0.0 };
        Axis::new(lo - pad, hi + pad, p0, p1)
    }
}

const HW: f64 = 360.0;
const HH: f64 = 150.0;

/// A histogram of one value set; `range` is the recipe's `[low, high]` for that key.
pub fn histogram(id: &str, title: &str, h: &Hist, range: Option<(f64, f64)>) -> String {
    let mut s = String::new();
    let distinct = h.distinct();
    let (edges, counts) = h.bins();
    let (mut lo, mut hi) = (h.min, h.max);
    if distinct.is_none() && !edges.is_empty() {
        lo = edges[0];
        hi = edges[edges.len() - 1];
    }
    if let Some((a, b)) = range {
        lo = lo.min(a);
        hi = hi.max(b);
    }
    let x = Axis::padded(lo, hi, 44.0, HW - 10.0);
    let top = match &distinct {
        Some(d) => d.iter().map(|p| p.1).max().unwrap_or(1),
        None => counts.iter().copied().max().unwrap_or(1),
    }
    .max(1);
    let y = Axis::new(0.0, top as f64, 112.0, 14.0);
    let data = match &distinct {
        Some(d) => format!(
            r#"data-kind="values" data-values="{}" data-counts="{}""#,
            json_list(&d.iter().map(|p| p.0).collect::<Vec<_>>()),
            json_list(&d.iter().map(|p| p.1).collect::<Vec<_>>())
        ),
        None => format!(
            r#"data-kind="bins" data-edges="{}" data-counts="{}""#,
            json_list(&edges),
            json_list(&counts)
        ),
    };
    let alt = format!(
        "Histogram of {title}: {} values from {} to {}{}",
        h.count,
        num(h.min),
        num(h.max),
        range.map_or(String::new(), |(a, b)| format!(
            "; the recipe asks for {} to {}",
            num(a),
            num(b)
        ))
    );
    let _ = write!(
        s,
        r#"<svg class="chart hist" id="{}" viewBox="0 0 {HW} {HH}" role="img" aria-label="{}" data-key="{}" {data}><title>{}</title>"#,
        esc(id),
        esc(&alt),
        esc(title),
        esc(&alt)
    );
    if let Some((a, b)) = range {
        let (xa, xb) = (x.at(a), x.at(b));
        let _ = write!(
            s,
            r#"<rect class="asked" x="{:.2}" y="10" width="{:.2}" height="102" fill="{}" fill-opacity="0.18"/><line x1="{xa:.2}" x2="{xa:.2}" y1="8" y2="114" class="asked-edge" stroke="{}"/><line x1="{xb:.2}" x2="{xb:.2}" y1="8" y2="114" class="asked-edge" stroke="{}"/>"#,
            xa,
            (xb - xa).max(1.5),
            palette::ORANGE,
            palette::ORANGE,
            palette::ORANGE
        );
    }
    let bar = |s: &mut String, x0: f64, x1: f64, n: u64, label: String| {
        let (yt, yb) = (y.at(n as f64), y.at(0.0));
        let _ = write!(
            s,
            r#"<rect class="bar" data-count="{n}" x="{:.2}" y="{yt:.2}" width="{:.2}" height="{:.2}" fill="{}"><title>{}</title></rect>"#,
            x0,
            (x1 - x0).max(1.0),
            yb - yt,
            palette::BLUE,
            esc(&label)
        );
    };
    match &distinct {
        Some(d) => {
            let w = ((x.p1 - x.p0) / (d.len() as f64 * 3.0)).clamp(3.0, 18.0);
            for &(v, n) in d {
                let c = x.at(v);
                bar(
                    &mut s,
                    c - w / 2.0,
                    c + w / 2.0,
                    n,
                    format!("{}: {n}", num(v)),
                );
            }
        }
        None => {
            for (i, &n) in counts.iter().enumerate() {
                if n > 0 {
                    let label = format!("{} to {}: {n}", num(edges[i]), num(edges[i + 1]));
                    bar(&mut s, x.at(edges[i]), x.at(edges[i + 1]), n, label);
                }
            }
        }
    }
    let _ = write!(
        s,
        r#"<line x1="{:.1}" x2="{:.1}" y1="112.5" y2="112.5" class="axis"/><text x="{:.1}" y="128" class="tick" text-anchor="start">{}</text><text x="{:.1}" y="128" class="tick" text-anchor="end">{}</text><text x="40" y="18" class="tick" text-anchor="end">{top}</text><text x="{:.1}" y="144" class="tick" text-anchor="middle">{}</text></svg>"#,
        x.p0,
        x.p1,
        x.p0,
        num(x.d0),
        x.p1,
        num(x.d1),
        (x.p0 + x.p1) / 2.0,
        esc(title)
    );
    s
}

const SW: f64 = 340.0;
const SH: f64 = 330.0;

/// Drawn against measured (top), and measured minus drawn (below), with the tolerance band.
pub fn scatter(id: &str, p: &PairStats, points: &[(f64, f64)]) -> String {
    let mut s = String::new();
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    let mut worst: f64 = 0.0;
    for &(d, m) in points {
        lo = lo.min(d).min(m);
        hi = hi.max(d).max(m);
        worst = worst.max((m - d).abs());
    }
    let tol_at = |d: f64| p.pair.tolerance.half_width(d);
    let band_max = tol_at(lo).max(tol_at(hi));
    let r_lim = worst.max(band_max) * 1.25;
    let x = Axis::padded(lo, hi, 48.0, SW - 10.0);
    let y = Axis::padded(lo, hi, 210.0, 12.0);
    let ry = Axis::new(-r_lim, r_lim, 300.0, 236.0);
    let what = format!("{} {} drawn against measured", p.pair.step, p.pair.drawn);
    let alt = format!(
        "{what}: {} of {} takes within the tolerance ({}); {} points shown",
        p.inside,
        p.count,
        p.pair.source,
        points.len()
    );
    let _ = write!(
        s,
        r#"<svg class="chart pair" id="{}" viewBox="0 0 {SW} {SH}" role="img" aria-label="{}" data-count="{}" data-inside="{}"><title>{}</title>"#,
        esc(id),
        esc(&alt),
        p.count,
        p.inside,
        esc(&alt)
    );
    // The band around the identity line, and around zero below.
    let steps = 24;
    let along: Vec<f64> = (0..=steps)
        .map(|i| x.d0 + (x.d1 - x.d0) * i as f64 / steps as f64)
        .collect();
    let mut upper = String::new();
    let mut lower = String::new();
    let mut r_up = String::new();
    let mut r_down = String::new();
    for &d in &along {
        let _ = write!(upper, "{:.2},{:.2} ", x.at(d), y.at(d + tol_at(d)));
        let _ = write!(r_up, "{:.2},{:.2} ", x.at(d), ry.at(tol_at(d)));
    }
    for &d in along.iter().rev() {
        let _ = write!(lower, "{:.2},{:.2} ", x.at(d), y.at(d - tol_at(d)));
        let _ = write!(r_down, "{:.2},{:.2} ", x.at(d), ry.at(-tol_at(d)));
    }
    let _ = write!(
        s,
        r#"<polygon class="band" points="{upper}{lower}" fill="{o}" fill-opacity="0.35" stroke="{o}" stroke-width="0.8"/><line x1="{:.2}" y1="{:.2}" x2="{:.2}" y2="{:.2}" stroke="{}" stroke-dasharray="4 3"/>"#,
        x.at(x.d0),
        y.at(x.d0),
        x.at(x.d1),
        y.at(x.d1),
        palette::GREEN,
        o = palette::ORANGE
    );
    let _ = write!(
        s,
        r#"<polygon class="band" points="{r_up}{r_down}" fill="{o}" fill-opacity="0.35" stroke="{o}" stroke-width="0.8"/><line x1="{:.1}" x2="{:.1}" y1="{:.2}" y2="{:.2}" stroke="{}" stroke-dasharray="4 3"/>"#,
        x.p0,
        x.p1,
        ry.at(0.0),
        ry.at(0.0),
        palette::GREEN,
        o = palette::ORANGE
    );
    for &(d, m) in points {
        let out = (m - d).abs() > tol_at(d);
        let (fill, shape) = if out {
            (palette::VERMILLION, "out")
        } else {
            (palette::BLUE, "in")
        };
        if out {
            // Outside the band: a square, so it is told apart without colour too.
            let _ = write!(
                s,
                r#"<rect class="pt {shape}" x="{:.2}" y="{:.2}" width="5" height="5" fill="{fill}"/><rect class="pt {shape}" x="{:.2}" y="{:.2}" width="5" height="5" fill="{fill}"/>"#,
                x.at(d) - 2.5,
                y.at(m) - 2.5,
                x.at(d) - 2.5,
                ry.at((m - d).clamp(-r_lim, r_lim)) - 2.5
            );
        } else {
            let _ = write!(
                s,
                r#"<circle class="pt {shape}" cx="{:.2}" cy="{:.2}" r="2.4" fill="{fill}" fill-opacity="0.75"/><circle class="pt {shape}" cx="{:.2}" cy="{:.2}" r="2" fill="{fill}" fill-opacity="0.75"/>"#,
                x.at(d),
                y.at(m),
                x.at(d),
                ry.at(m - d)
            );
        }
    }
    let unit_note = match p.pair.tolerance {
        Tolerance::Absolute(t) => format!("±{}", num(t)),
        Tolerance::Relative(t) => format!("±{} %", num(t * 100.0)),
    };
    let _ = write!(
        s,
        r#"<line x1="{x0:.1}" x2="{x1:.1}" y1="210.5" y2="210.5" class="axis"/><line x1="{x0:.1}" x2="{x0:.1}" y1="12" y2="210.5" class="axis"/><text x="{x0:.1}" y="222" class="tick">{}</text><text x="{x1:.1}" y="222" class="tick" text-anchor="end">{}</text><text x="44" y="20" class="tick" text-anchor="end">{}</text><text x="44" y="210" class="tick" text-anchor="end">{}</text><text x="52" y="24" class="tick">measured ↑  drawn →</text><text x="44" y="{:.1}" class="tick" text-anchor="end">{}</text><text x="44" y="{:.1}" class="tick" text-anchor="end">−{}</text><text x="52" y="246" class="tick">measured − drawn (band {unit_note})</text><line x1="{x0:.1}" x2="{x1:.1}" y1="300.5" y2="300.5" class="axis"/><text x="{:.1}" y="320" class="tick" text-anchor="middle">{}</text></svg>"#,
        num(x.d0),
        num(x.d1),
        num(y.d1),
        num(y.d0),
        ry.at(r_lim) + 8.0,
        num(r_lim),
        ry.at(-r_lim),
        num(r_lim),
        (x.p0 + x.p1) / 2.0,
        esc(&what),
        x0 = x.p0,
        x1 = x.p1,
    );
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_for_people() {
        assert_eq!(num(12.3456), "12.3");
        assert_eq!(num(0.0452), "0.0452");
        assert_eq!(num(1500.0), "1500");
        assert_eq!(num(2.0), "2");
        assert_eq!(esc("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
