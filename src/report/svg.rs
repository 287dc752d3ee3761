//! Plots as standalone SVG files, written by hand: no plotting crate, no fonts needed to build
//! or to write them (the viewer renders the text).
//!
//! Two shapes cover what copyloop draws: an x–y chart (lines, markers, vertical interval bars,
//! linear or log₁₀ axes) and a heat map over a grid of two swept values.

use std::fmt::Write;

const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 480.0;
const LEFT: f64 = 80.0;
const RIGHT: f64 = 170.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 60.0;
const COLOURS: [&str; 8] = [
    "#1f5fa8", "#c0392b", "#2e8b57", "#8e44ad", "#d35400", "#16a085", "#7f8c8d", "#b7950b",
];

/// How a series is drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Style {
    Line,
    Markers,
    /// A dashed reference line.
    Dashed,
}

/// One point, with an optional interval [low, high] drawn as a vertical bar.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Point {
    pub x: f64,
    pub y: f64,
    pub interval: Option<(f64, f64)>,
}

#[derive(Clone, Debug)]
pub struct Series {
    pub name: String,
    pub style: Style,
    pub points: Vec<Point>,
}

/// An x–y chart.
#[derive(Clone, Debug, Default)]
pub struct Chart {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub x_log: bool,
    pub y_log: bool,
    pub series: Vec<Series>,
    /// Category names for the x positions 0, 1, 2, … (instead of numeric ticks).
    pub x_categories: Vec<String>,
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Axis mapping from data to pixels.
struct Axis {
    lo: f64,
    hi: f64,
    log: bool,
    p0: f64,
    p1: f64,
}

impl Axis {
    fn new(values: impl Iterator<Item = f64>, log: bool, p0: f64, p1: f64) -> Axis {
        let t = |v: f64| if log { v.log10() } else { v };
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in values.filter(|v| v.is_finite() && (!log || *v > 0.0)) {
            lo = lo.min(t(v));
            hi = hi.max(t(v));
        }
        if !lo.is_finite() {
            (lo, hi) = (0.0, 1.0);
        }
        if hi - lo < 1e-12 * hi.abs().max(1.0) {
            let pad = if log { 0.5 } else { hi.abs().max(1.0) * 0.1 };
            (lo, hi) = (lo - pad, hi + pad);
        } else {
            let pad = (hi - lo) * 0.05;
            (lo, hi) = (lo - pad, hi + pad);
        }
        Axis {
            lo,
            hi,
            log,
            p0,
            p1,
        }
    }

    fn map(&self, v: f64) -> Option<f64> {
        let t = if self.log {
            if v <= 0.0 {
                return None;
            }
            v.log10()
        } else {
            v
        };
        t.is_finite()
            .then(|| self.p0 + (t - self.lo) / (self.hi - self.lo) * (self.p1 - self.p0))
    }

    /// Tick positions in data units with their labels.
    fn ticks(&self) -> Vec<(f64, String)> {
        if self.log {
            let (a, b) = (self.lo.ceil() as i32, self.hi.floor() as i32);
            let step = ((b - a) / 8).max(1);
            return (a..=b)
                .step_by(step as usize)
                .map(|e| (10f64.powi(e), format!("1e{e}")))
                .collect();
        }
        let span = self.hi - self.lo;
        let raw = span / 6.0;
        let mag = 10f64.powf(raw.log10().floor());
        let step = [1.0, 2.0, 5.0, 10.0]
            .iter()
            .map(|m| m * mag)
            .find(|s| *s >= raw)
            .unwrap_or(10.0 * mag);
        let mut v = (self.lo / step).ceil() * step;
        let mut out = Vec::new();
        while v <= self.hi + 1e-9 * step {
            out.push((v, super::num(if v.abs() < 1e-12 * step { 0.0 } else { v })));
            v += step;
        }
        out
    }
}

impl Chart {
    /// The chart as an SVG document.
    pub fn render(&self) -> String {
        let (x0, x1) = (LEFT, WIDTH - RIGHT);
        let (y0, y1) = (HEIGHT - BOTTOM, TOP);
        let pts = || self.series.iter().flat_map(|s| s.points.iter());
        let xa = Axis::new(pts().map(|p| p.x), self.x_log, x0, x1);
        let ya = Axis::new(
            pts().flat_map(|p| {
                let (lo, hi) = p.interval.unwrap_or((p.y, p.y));
                [p.y, lo, hi]
            }),
            self.y_log,
            y0,
            y1,
        );
        let mut s = header(&self.title);
        let _ = write!(
            s,
            r##"<rect x="{x0}" y="{y1}" width="{}" height="{}" fill="none" stroke="#444"/>"##,
            x1 - x0,
            y0 - y1
        );
        if self.x_categories.is_empty() {
            for (v, label) in xa.ticks() {
                if let Some(px) = xa.map(v) {
                    let _ = write!(
                        s,
                        r##"<line x1="{px:.1}" y1="{y0}" x2="{px:.1}" y2="{}" stroke="#444"/><text x="{px:.1}" y="{}" text-anchor="middle" font-size="12">{}</text>"##,
                        y0 + 5.0,
                        y0 + 20.0,
                        esc(&label)
                    );
                }
            }
        } else {
            for (k, label) in self.x_categories.iter().enumerate() {
                if let Some(px) = xa.map(k as f64) {
                    let _ = write!(
                        s,
                        r##"<text x="{px:.1}" y="{}" text-anchor="middle" font-size="12">{}</text>"##,
                        y0 + 20.0,
                        esc(label)
                    );
                }
            }
        }
        for (v, label) in ya.ticks() {
            if let Some(py) = ya.map(v) {
                let _ = write!(
                    s,
                    r##"<line x1="{}" y1="{py:.1}" x2="{x0}" y2="{py:.1}" stroke="#444"/><line x1="{x0}" y1="{py:.1}" x2="{x1}" y2="{py:.1}" stroke="#ddd"/><text x="{}" y="{:.1}" text-anchor="end" font-size="12">{}</text>"##,
                    x0 - 5.0,
                    x0 - 8.0,
                    py + 4.0,
                    esc(&label)
                );
            }
        }
        let _ = write!(
            s,
            r#"<text x="{:.1}" y="{}" text-anchor="middle" font-size="14">{}</text>"#,
            (x0 + x1) / 2.0,
            HEIGHT - 15.0,
            esc(&self.x_label)
        );
        let _ = write!(
            s,
            r#"<text transform="translate(20 {:.1}) rotate(-90)" text-anchor="middle" font-size="14">{}</text>"#,
            (y0 + y1) / 2.0,
            esc(&self.y_label)
        );
        for (k, series) in self.series.iter().enumerate() {
            let colour = COLOURS[k % COLOURS.len()];
            let mapped: Vec<(f64, f64, &Point)> = series
                .points
                .iter()
                .filter_map(|p| Some((xa.map(p.x)?, ya.map(p.y)?, p)))
                .collect();
            if series.style != Style::Markers && mapped.len() > 1 {
                let path: Vec<String> = mapped
                    .iter()
                    .map(|(x, y, _)| format!("{x:.1},{y:.1}"))
                    .collect();
                let dash = if series.style == Style::Dashed {
                    r#" stroke-dasharray="6 4""#
                } else {
                    ""
                };
                let _ = write!(
                    s,
                    r#"<polyline points="{}" fill="none" stroke="{colour}" stroke-width="2"{dash}/>"#,
                    path.join(" ")
                );
            }
            for (px, py, p) in &mapped {
                if let Some((lo, hi)) = p.interval {
                    if let (Some(a), Some(b)) = (ya.map(lo), ya.map(hi)) {
                        let _ = write!(
                            s,
                            r#"<line x1="{px:.1}" y1="{a:.1}" x2="{px:.1}" y2="{b:.1}" stroke="{colour}" stroke-width="1.5"/>"#
                        );
                    }
                }
                if series.style == Style::Markers {
                    let _ = write!(
                        s,
                        r#"<circle cx="{px:.1}" cy="{py:.1}" r="3.5" fill="{colour}"/>"#
                    );
                }
            }
            let ly = TOP + 10.0 + 20.0 * k as f64;
            let _ = write!(
                s,
                r#"<rect x="{}" y="{:.1}" width="14" height="4" fill="{colour}"/><text x="{}" y="{:.1}" font-size="12">{}</text>"#,
                x1 + 12.0,
                ly - 4.0,
                x1 + 32.0,
                ly + 1.0,
                esc(&series.name)
            );
        }
        s.push_str("</svg>\n");
        s
    }
}

fn header(title: &str) -> String {
    format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif"><rect width="100%" height="100%" fill="white"/><text x="{}" y="24" text-anchor="middle" font-size="16">{}</text>"#,
        WIDTH / 2.0,
        esc(title)
    )
}

/// A heat map of `values[row][col]` (row = y value, col = x value), with a colour bar.
pub fn heat_map(
    title: &str,
    x_label: &str,
    x_values: &[String],
    y_label: &str,
    y_values: &[String],
    values: &[Vec<f64>],
) -> String {
    let (x0, x1) = (LEFT + 20.0, WIDTH - RIGHT);
    let (y0, y1) = (HEIGHT - BOTTOM, TOP);
    let finite = values.iter().flatten().copied().filter(|v| v.is_finite());
    let (lo, hi) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let (lo, hi) = if lo.is_finite() { (lo, hi) } else { (0.0, 1.0) };
    let colour = |v: f64| {
        if !v.is_finite() {
            return "#cccccc".to_string();
        }
        let t = if hi > lo { (v - lo) / (hi - lo) } else { 0.5 };
        // white → blue ramp
        let r = (255.0 * (1.0 - 0.85 * t)) as u8;
        let g = (255.0 * (1.0 - 0.6 * t)) as u8;
        let b = (255.0 * (1.0 - 0.25 * t)) as u8;
        format!("#{r:02x}{g:02x}{b:02x}")
    };
    let nx = x_values.len().max(1) as f64;
    let ny = y_values.len().max(1) as f64;
    let (cw, ch) = ((x1 - x0) / nx, (y0 - y1) / ny);
    let mut s = header(title);
    for (r, row) in values.iter().enumerate() {
        for (c, &v) in row.iter().enumerate() {
            let _ = write!(
                s,
                r#"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="{}"><title>{}</title></rect>"#,
                x0 + c as f64 * cw,
                y0 - (r + 1) as f64 * ch,
                cw + 0.5,
                ch + 0.5,
                colour(v),
                super::num(v)
            );
        }
    }
    let every = |n: usize| (n / 10).max(1);
    for (c, label) in x_values.iter().enumerate().step_by(every(x_values.len())) {
        let _ = write!(
            s,
            r#"<text x="{:.1}" y="{}" text-anchor="middle" font-size="11">{}</text>"#,
            x0 + (c as f64 + 0.5) * cw,
            y0 + 18.0,
            esc(label)
        );
    }
    for (r, label) in y_values.iter().enumerate().step_by(every(y_values.len())) {
        let _ = write!(
            s,
            r#"<text x="{}" y="{:.1}" text-anchor="end" font-size="11">{}</text>"#,
            x0 - 6.0,
            y0 - (r as f64 + 0.5) * ch + 4.0,
            esc(label)
        );
    }
    let _ = write!(
        s,
        r#"<text x="{:.1}" y="{}" text-anchor="middle" font-size="14">{}</text><text transform="translate(20 {:.1}) rotate(-90)" text-anchor="middle" font-size="14">{}</text>"#,
        (x0 + x1) / 2.0,
        HEIGHT - 15.0,
        esc(x_label),
        (y0 + y1) / 2.0,
        esc(y_label)
    );
    for k in 0..=10 {
        let t = k as f64 / 10.0;
        let v = lo + t * (hi - lo);
        let _ = write!(
            s,
            r#"<rect x="{}" y="{:.1}" width="18" height="{:.1}" fill="{}"/>"#,
            x1 + 20.0,
            y0 - (k + 1) as f64 * (y0 - y1) / 11.0,
            (y0 - y1) / 11.0 + 0.5,
            colour(v)
        );
        if k % 5 == 0 {
            let _ = write!(
                s,
                r#"<text x="{}" y="{:.1}" font-size="11">{}</text>"#,
                x1 + 44.0,
                y0 - (k as f64 + 0.5) * (y0 - y1) / 11.0 + 4.0,
                super::num(v)
            );
        }
    }
    s.push_str("</svg>\n");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chart_is_well_formed_and_maps_log_axes() {
        let chart = Chart {
            title: "CV against copy number".into(),
            x_label: "mean (molecules)".into(),
            y_label: "CV".into(),
            x_log: true,
            y_log: true,
            series: vec![
                Series {
                    name: "ensemble".into(),
                    style: Style::Markers,
                    points: vec![
                        Point {
                            x: 10.0,
                            y: 0.3,
                            interval: Some((0.28, 0.33)),
                        },
                        Point {
                            x: 1000.0,
                            y: 0.03,
                            interval: None,
                        },
                    ],
                },
                Series {
                    name: "1/√N".into(),
                    style: Style::Dashed,
                    points: vec![
                        Point {
                            x: 10.0,
                            y: 0.316,
                            interval: None,
                        },
                        Point {
                            x: 1000.0,
                            y: 0.0316,
                            interval: None,
                        },
                    ],
                },
            ],
            x_categories: vec![],
        };
        let svg = chart.render();
        assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
        assert_eq!(svg.matches("<circle").count(), 2);
        assert!(svg.contains("1e1") && svg.contains("1e3"));
        assert!(svg.contains("1/√N"));
        let axis = Axis::new([10.0, 1000.0].into_iter(), true, 0.0, 100.0);
        let mid = axis.map(100.0).unwrap();
        assert!(
            (mid - 50.0).abs() < 1e-9,
            "log axis puts 100 midway between 10 and 1000"
        );
    }

    #[test]
    fn heat_map_has_a_cell_per_value() {
        let svg = heat_map(
            "flux",
            "kon",
            &["1".into(), "2".into(), "3".into()],
            "koff",
            &["a".into(), "b".into()],
            &[vec![1.0, 2.0, 3.0], vec![4.0, f64::NAN, 6.0]],
        );
        assert_eq!(svg.matches("<title>").count(), 6);
        assert!(svg.contains("#cccccc"));
    }
}
