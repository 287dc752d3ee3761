//! The SVG document being written: one element per call, every coordinate checked finite
//! (an element with a non-finite coordinate is left out rather than written broken), every
//! text escaped, and a `class` on each element that says what it is (see the module docs of
//! [`super`]).

use super::text::esc;
use std::fmt::Write;

/// Horizontal anchor of a text.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Anchor {
    Start,
    Middle,
    End,
}

impl Anchor {
    fn as_str(self) -> &'static str {
        match self {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        }
    }
}

/// How a shape is painted.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Paint<'a> {
    pub fill: Option<&'a str>,
    pub fill_opacity: Option<f64>,
    pub stroke: Option<&'a str>,
    pub stroke_width: f64,
    /// A dash pattern such as `6 4`.
    pub dash: Option<&'a str>,
}

impl<'a> Paint<'a> {
    pub fn fill(colour: &'a str) -> Paint<'a> {
        Paint {
            fill: Some(colour),
            fill_opacity: None,
            stroke: None,
            stroke_width: 0.0,
            dash: None,
        }
    }

    pub fn stroke(colour: &'a str, width: f64) -> Paint<'a> {
        Paint {
            fill: None,
            fill_opacity: None,
            stroke: Some(colour),
            stroke_width: width,
            dash: None,
        }
    }

    fn attributes(&self) -> String {
        let mut s = format!(r#" fill="{}""#, self.fill.unwrap_or("none"));
        if let Some(o) = self.fill_opacity {
            let _ = write!(s, r#" fill-opacity="{o}""#);
        }
        if let Some(c) = self.stroke {
            let _ = write!(s, r#" stroke="{c}" stroke-width="{}""#, self.stroke_width);
        }
        if let Some(d) = self.dash {
            let _ = write!(s, r#" stroke-dasharray="{d}""#);
        }
        s
    }
}

/// Two decimals are a hundredth of a pixel: finer than any screen or print.
fn c(v: f64) -> String {
    let r = (v * 100.0).round() / 100.0;
    format!("{}", if r == 0.0 { 0.0 } else { r })
}

fn finite(vs: &[f64]) -> bool {
    vs.iter().all(|v| v.is_finite())
}

/// An SVG document of a fixed size.
pub struct Canvas {
    out: String,
    pub width: f64,
    pub height: f64,
}

impl Canvas {
    /// A white page of `width` × `height` pixels.
    pub fn new(width: f64, height: f64) -> Canvas {
        let mut out = String::new();
        let _ = writeln!(
            out,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="sans-serif" font-size="12">"#,
            w = c(width),
            h = c(height)
        );
        let _ = writeln!(
            out,
            r#"<rect class="background" x="0" y="0" width="{}" height="{}" fill="white"/>"#,
            c(width),
            c(height)
        );
        Canvas { out, width, height }
    }

    /// Opens a group `<g class="…">`; close it with [`Canvas::close`].
    pub fn open(&mut self, class: &str) {
        let _ = writeln!(self.out, r#"<g class="{}">"#, esc(class));
    }

    /// Opens a group whose shapes are drawn with crisp edges (tiles that must meet without
    /// seams).
    pub fn open_crisp(&mut self, class: &str) {
        let _ = writeln!(
            self.out,
            r#"<g class="{}" shape-rendering="crispEdges">"#,
            esc(class)
        );
    }

    pub fn close(&mut self) {
        self.out.push_str("</g>\n");
    }

    /// A straight line.
    pub fn line(&mut self, class: &str, a: (f64, f64), b: (f64, f64), paint: Paint) {
        if !finite(&[a.0, a.1, b.0, b.1]) {
            return;
        }
        let _ = writeln!(
            self.out,
            r#"<line class="{}" x1="{}" y1="{}" x2="{}" y2="{}"{}/>"#,
            esc(class),
            c(a.0),
            c(a.1),
            c(b.0),
            c(b.1),
            paint.attributes()
        );
    }

    /// A rectangle, with an optional tooltip (`<title>`); one of no area is left out (it
    /// would draw nothing, and renderers reject it).
    pub fn rect(
        &mut self,
        class: &str,
        at: (f64, f64),
        size: (f64, f64),
        paint: Paint,
        tip: Option<&str>,
    ) {
        if !finite(&[at.0, at.1, size.0, size.1]) || size.0 <= 0.0 || size.1 <= 0.0 {
            return;
        }
        let head = format!(
            r#"<rect class="{}" x="{}" y="{}" width="{}" height="{}"{}"#,
            esc(class),
            c(at.0),
            c(at.1),
            c(size.0),
            c(size.1),
            paint.attributes()
        );
        self.finish_shape(&head, "rect", tip);
    }

    /// A circle, with an optional tooltip.
    pub fn circle(
        &mut self,
        class: &str,
        centre: (f64, f64),
        r: f64,
        paint: Paint,
        tip: Option<&str>,
    ) {
        if !finite(&[centre.0, centre.1, r]) {
            return;
        }
        let head = format!(
            r#"<circle class="{}" cx="{}" cy="{}" r="{}"{}"#,
            esc(class),
            c(centre.0),
            c(centre.1),
            c(r),
            paint.attributes()
        );
        self.finish_shape(&head, "circle", tip);
    }

    /// A path of sub-paths (`runs`) in absolute coordinates: `M` starts each, `L` joins the
    /// rest, `closed` closes each. A run with a non-finite point is left out.
    pub fn path(&mut self, class: &str, runs: &[Vec<(f64, f64)>], closed: bool, paint: Paint) {
        let mut d = String::new();
        for run in runs {
            if run.is_empty() || !run.iter().all(|p| finite(&[p.0, p.1])) {
                continue;
            }
            for (k, p) in run.iter().enumerate() {
                let _ = write!(
                    d,
                    "{}{},{} ",
                    if k == 0 { "M" } else { "L" },
                    c(p.0),
                    c(p.1)
                );
            }
            if closed {
                d.push_str("Z ");
            }
        }
        if d.is_empty() {
            return;
        }
        let _ = writeln!(
            self.out,
            r#"<path class="{}" d="{}"{}/>"#,
            esc(class),
            d.trim_end(),
            paint.attributes()
        );
    }

    /// A text at (x, y) (the baseline), optionally turned a quarter to read upwards.
    pub fn text(
        &mut self,
        class: &str,
        at: (f64, f64),
        text: &str,
        size: f64,
        anchor: Anchor,
        upright: bool,
    ) {
        if !finite(&[at.0, at.1]) {
            return;
        }
        let turn = if upright {
            format!(r#" transform="rotate(-90 {} {})""#, c(at.0), c(at.1))
        } else {
            String::new()
        };
        let _ = writeln!(
            self.out,
            r#"<text class="{}" x="{}" y="{}" font-size="{}" text-anchor="{}"{turn}>{}</text>"#,
            esc(class),
            c(at.0),
            c(at.1),
            c(size),
            anchor.as_str(),
            esc(text)
        );
    }

    /// A vertical linear gradient from `stops` (offset 0 at the bottom), to fill with
    /// `url(#id)`.
    pub fn vertical_gradient(&mut self, id: &str, stops: &[(f64, String)]) {
        let _ = write!(
            self.out,
            r#"<defs><linearGradient id="{}" x1="0" y1="1" x2="0" y2="0">"#,
            esc(id)
        );
        for (t, colour) in stops {
            let _ = write!(
                self.out,
                r#"<stop offset="{}" stop-color="{colour}"/>"#,
                c(*t)
            );
        }
        self.out.push_str("</linearGradient></defs>\n");
    }

    fn finish_shape(&mut self, head: &str, tag: &str, tip: Option<&str>) {
        match tip {
            Some(t) => {
                let _ = writeln!(self.out, "{head}><title>{}</title></{tag}>", esc(t));
            }
            None => {
                let _ = writeln!(self.out, "{head}/>");
            }
        }
    }

    /// The finished document.
    pub fn finish(mut self) -> String {
        self.out.push_str("</svg>\n");
        self.out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn non_finite_shapes_are_left_out_and_the_rest_parses() {
        let mut k = Canvas::new(100.0, 50.0);
        k.line("a", (0.0, f64::NAN), (1.0, 1.0), Paint::stroke("#000", 1.0));
        k.circle("b", (f64::INFINITY, 1.0), 2.0, Paint::fill("#000"), None);
        k.rect("c", (1.0, 1.0), (-2.0, 3.0), Paint::fill("#000"), None);
        k.path(
            "d",
            &[vec![(0.0, 0.0), (f64::NAN, 1.0)]],
            false,
            Paint::stroke("#000", 1.0),
        );
        k.text("e", (f64::NAN, 1.0), "x", 12.0, Anchor::Start, false);
        k.circle(
            "kept",
            (10.0, 10.0),
            2.0,
            Paint::fill("#000"),
            Some("a < b"),
        );
        k.text("kept", (5.0, 5.0), "H & G", 12.0, Anchor::Middle, true);
        let svg = k.finish();
        let doc = roxmltree::Document::parse(&svg).expect("well-formed");
        let classes: Vec<&str> = doc
            .descendants()
            .filter_map(|n| n.attribute("class"))
            .collect();
        assert_eq!(classes, ["background", "kept", "kept"]);
        assert!(svg.contains(r#"transform="rotate(-90 5 5)""#));
    }

    #[test]
    fn coordinates_have_two_decimals_and_no_negative_zero() {
        assert_eq!(c(1.23456), "1.23");
        assert_eq!(c(-0.001), "0");
        assert_eq!(c(720.0), "720");
    }
}
