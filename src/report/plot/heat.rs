//! The heat map: a value over two axes, as cells of a grid or dots of a scattered design,
//! coloured on the perceptually ordered ramp, with a colour bar named with the value shown.

use super::axis::{label, nice_ticks, AxisSpec, Scale};
use super::canvas::{Anchor, Canvas, Paint};
use super::frame::{self, LABEL_SIZE, WIDTH};
use super::ramp::{hex, ramp, MISSING, RAMP};
use super::text::{fit, width};

/// A rectangle of the grid, in data units, with its value (`None`: no value there).
#[derive(Clone, Debug, PartialEq)]
pub struct Cell {
    pub x: [f64; 2],
    pub y: [f64; 2],
    pub value: Option<f64>,
    /// Shown by viewers on hovering.
    pub tip: String,
}

/// A point of a scattered design (a Latin hypercube), with its value.
#[derive(Clone, Debug, PartialEq)]
pub struct Dot {
    pub x: f64,
    pub y: f64,
    pub value: Option<f64>,
    pub tip: String,
}

/// A heat map.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct HeatMap {
    pub title: String,
    pub x: AxisSpec,
    pub y: AxisSpec,
    pub cells: Vec<Cell>,
    pub dots: Vec<Dot>,
    /// The name of the value, with its unit where known: the colour bar's title.
    pub bar_label: String,
    pub notes: Vec<String>,
}

const HEIGHT: f64 = 480.0;
const TOP: f64 = 48.0;
const TICK_SIZE: f64 = 11.0;
const BAR_W: f64 = 18.0;

impl HeatMap {
    /// The finite values' range; (0, 1) when there is none.
    fn range(&self) -> (f64, f64) {
        let values = self
            .cells
            .iter()
            .map(|c| c.value)
            .chain(self.dots.iter().map(|d| d.value))
            .flatten()
            .filter(|v| v.is_finite());
        let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
        if lo.is_finite() {
            (lo, hi)
        } else {
            (0.0, 1.0)
        }
    }

    /// The fill of a value: its place between the smallest and largest value on the ramp.
    fn fill(&self, v: Option<f64>) -> String {
        let (lo, hi) = self.range();
        match v {
            Some(v) if v.is_finite() => hex(ramp(if hi > lo { (v - lo) / (hi - lo) } else { 0.5 })),
            _ => MISSING.to_string(),
        }
    }

    /// The colour bar's ticks and the scale placing them.
    fn bar_ticks(&self, bottom: f64) -> (Scale, Vec<f64>) {
        let (lo, hi) = self.range();
        if hi > lo {
            let s = Scale {
                lo,
                hi,
                log: false,
                from: bottom,
                to: TOP,
            };
            (s, nice_ticks(lo, hi, 5))
        } else {
            let s = Scale {
                lo: lo - 1.0,
                hi: lo + 1.0,
                log: false,
                from: bottom,
                to: TOP,
            };
            (s, vec![lo])
        }
    }

    /// The heat map as an SVG document.
    pub fn render(&self) -> String {
        let bottom = HEIGHT - 64.0 - 15.0 * self.notes.len() as f64;
        let (bar, bar_ticks) = self.bar_ticks(bottom);
        let bar_tick_w = bar_ticks
            .iter()
            .map(|&t| width(&label(t), TICK_SIZE))
            .fold(0.0, f64::max);
        let right = WIDTH - 30.0 - bar_tick_w - 12.0 - BAR_W - 24.0;
        let pad = if self.dots.is_empty() { 0.0 } else { 0.04 };
        let xs = self
            .cells
            .iter()
            .flat_map(|c| c.x)
            .chain(self.dots.iter().map(|d| d.x));
        let ys = self
            .cells
            .iter()
            .flat_map(|c| c.y)
            .chain(self.dots.iter().map(|d| d.y));
        let y = Scale::fit(&self.y, ys, pad, bottom, TOP);
        let tick_w = y
            .ticks()
            .iter()
            .map(|&t| width(&label(t), TICK_SIZE))
            .fold(0.0, f64::max);
        let left = 28.0 + tick_w + 10.0;
        let x = Scale::fit(&self.x, xs, pad, left, right);
        let mut k = Canvas::new(WIDTH, HEIGHT);
        frame::title(&mut k, &self.title);
        k.open_crisp("cells");
        for c in &self.cells {
            let (Some(xa), Some(xb), Some(ya), Some(yb)) =
                (x.px(c.x[0]), x.px(c.x[1]), y.px(c.y[1]), y.px(c.y[0]))
            else {
                continue;
            };
            let fill = self.fill(c.value);
            k.rect(
                "cell",
                (xa.min(xb), ya.min(yb)),
                ((xb - xa).abs(), (yb - ya).abs()),
                Paint::fill(&fill),
                Some(&c.tip),
            );
        }
        for d in &self.dots {
            let (Some(px), Some(py)) = (x.px(d.x), y.px(d.y)) else {
                continue;
            };
            let fill = self.fill(d.value);
            let paint = Paint {
                stroke: Some("#555555"),
                stroke_width: 0.5,
                ..Paint::fill(&fill)
            };
            k.circle("dot", (px, py), 5.0, paint, Some(&d.tip));
        }
        k.close();
        self.axes(&mut k, &x, &y, (left, right, bottom));
        self.colour_bar(&mut k, &bar, &bar_ticks, right + 24.0, bottom);
        k.finish()
    }

    fn axes(&self, k: &mut Canvas, x: &Scale, y: &Scale, (left, right, bottom): (f64, f64, f64)) {
        let ink = Paint::stroke("#333333", 1.0);
        for t in x.ticks() {
            let Some(px) = x.px(t) else { continue };
            k.line("tick", (px, bottom), (px, bottom + 5.0), ink);
            k.text(
                "x-tick",
                (px, bottom + 18.0),
                &label(t),
                TICK_SIZE,
                Anchor::Middle,
                false,
            );
        }
        for t in y.ticks() {
            let Some(py) = y.px(t) else { continue };
            k.line("tick", (left - 5.0, py), (left, py), ink);
            k.text(
                "y-tick",
                (left - 8.0, py + 4.0),
                &label(t),
                TICK_SIZE,
                Anchor::End,
                false,
            );
        }
        frame::labels(
            k,
            (left, TOP, right, bottom),
            bottom + 40.0,
            (&self.x.label, &self.y.label),
            &self.notes,
        );
    }

    fn colour_bar(&self, k: &mut Canvas, s: &Scale, ticks: &[f64], x: f64, bottom: f64) {
        k.open("colour-bar");
        let stops: Vec<(f64, String)> = RAMP
            .iter()
            .enumerate()
            .map(|(i, &c)| (i as f64 / (RAMP.len() - 1) as f64, hex(c)))
            .collect();
        k.vertical_gradient("ramp", &stops);
        let paint = Paint {
            stroke: Some("#333333"),
            stroke_width: 1.0,
            ..Paint::fill("url(#ramp)")
        };
        k.rect("bar", (x, TOP), (BAR_W, bottom - TOP), paint, None);
        let ink = Paint::stroke("#333333", 1.0);
        for &t in ticks {
            let Some(py) = s.px(t) else { continue };
            k.line("tick", (x + BAR_W, py), (x + BAR_W + 4.0, py), ink);
            k.text(
                "bar-tick",
                (x + BAR_W + 7.0, py + 4.0),
                &label(t),
                TICK_SIZE,
                Anchor::Start,
                false,
            );
        }
        let missing = self
            .cells
            .iter()
            .map(|c| c.value)
            .chain(self.dots.iter().map(|d| d.value))
            .any(|v| !v.is_some_and(f64::is_finite));
        if missing {
            k.rect(
                "missing-key",
                (x, bottom + 10.0),
                (BAR_W, 10.0),
                Paint::fill(MISSING),
                None,
            );
            k.text(
                "missing-label",
                (x + BAR_W + 6.0, bottom + 19.0),
                "no value",
                TICK_SIZE,
                Anchor::Start,
                false,
            );
        }
        let size = fit(&self.bar_label, LABEL_SIZE, bottom - TOP);
        k.text(
            "bar-label",
            (WIDTH - 12.0, (TOP + bottom) / 2.0),
            &self.bar_label,
            size,
            Anchor::Middle,
            true,
        );
        k.close();
    }
}
