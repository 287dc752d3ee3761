//! The x–y chart: lines, markers, dashed reference lines, vertical error bars, shaded bands,
//! point labels, numeric or categorical x, and a legend beside the plot area (never over the
//! data).

use super::axis::{label, AxisSpec, Scale};
use super::canvas::{Anchor, Canvas, Paint};
use super::frame::{self, WIDTH};
use super::ramp::series_colour;
use super::text::{fit, width};

/// Marker shapes, distinct in outline as well as colour.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Marker {
    Circle,
    /// An open circle, wide enough to show a filled marker inside it.
    Ring,
    Square,
    Diamond,
    Triangle,
    Cross,
}

/// How a series' line is stroked.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Dash {
    Solid,
    /// A dashed reference line.
    Dashed,
}

/// How the points' intervals are drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Interval {
    None,
    /// A vertical bar with caps at each point.
    Bars,
    /// A shaded band between the lower and upper bounds along the series (mean ± SD).
    Band,
}

/// One point: x (a category index on a categorical chart), y, an optional interval
/// [low, high] and an optional label written beside it.
#[derive(Clone, Debug, PartialEq)]
pub struct Datum {
    pub x: f64,
    pub y: f64,
    pub interval: Option<[f64; 2]>,
    pub label: Option<String>,
}

impl Datum {
    pub fn new(x: f64, y: f64) -> Datum {
        Datum {
            x,
            y,
            interval: None,
            label: None,
        }
    }

    pub fn with_interval(mut self, low: f64, high: f64) -> Datum {
        self.interval = Some([low, high]);
        self
    }

    pub fn with_label(mut self, text: impl Into<String>) -> Datum {
        self.label = Some(text.into());
        self
    }
}

/// A named set of points drawn one way; its colour is the palette's by position.
#[derive(Clone, Debug, PartialEq)]
pub struct Series {
    pub name: String,
    pub points: Vec<Datum>,
    pub line: Option<Dash>,
    pub marker: Option<Marker>,
    pub interval: Interval,
    /// Shift along x, in category widths, so that series at one category stand side by side.
    pub offset: f64,
}

impl Series {
    /// A series of `points` drawn with nothing yet: set `line`, `marker`, `interval`.
    pub fn new(name: impl Into<String>, points: Vec<Datum>) -> Series {
        Series {
            name: name.into(),
            points,
            line: None,
            marker: None,
            interval: Interval::None,
            offset: 0.0,
        }
    }
}

/// An x–y chart.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Chart {
    pub title: String,
    pub x: AxisSpec,
    pub y: AxisSpec,
    /// Category names at x = 0, 1, 2, … (instead of a numeric x axis) when not empty.
    pub categories: Vec<String>,
    pub series: Vec<Series>,
    /// Lines of small print under the x axis (what was left out, how to read the chart).
    pub notes: Vec<String>,
}

const MIN_HEIGHT: f64 = 480.0;
const TOP: f64 = 48.0;
const TICK_SIZE: f64 = 11.0;
const LEGEND_SIZE: f64 = 12.0;
const POINT_LABEL_SIZE: f64 = 10.0;
const LEGEND_ROW: f64 = 20.0;
const SWATCH: f64 = 26.0;
const BAND_OPACITY: f64 = 0.2;
/// Half the room a marker takes (the widest, the ring, has radius 6.5).
const MARK: f64 = 7.0;
/// The legend's widest share of the page; longer names are set smaller.
const LEGEND_MAX: f64 = 0.4 * WIDTH;

/// A box in pixels: (x0, y0, x1, y1).
type Bounds = (f64, f64, f64, f64);

fn overlaps(a: Bounds, b: Bounds) -> bool {
    a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
}

/// The plot area and the scales, fixed before anything is drawn.
struct Layout {
    x: Scale,
    y: Scale,
    area: Bounds,
    height: f64,
    legend_x: f64,
    category_rows: usize,
}

impl Chart {
    fn layout(&self) -> Layout {
        let legend_w = (self
            .series
            .iter()
            .map(|s| width(&s.name, LEGEND_SIZE))
            .fold(0.0, f64::max)
            + SWATCH
            + 26.0)
            .min(LEGEND_MAX);
        let legend_h = self.series.len() as f64 * LEGEND_ROW + 16.0;
        let ys = self.series.iter().flat_map(|s| {
            s.points.iter().flat_map(|p| {
                let [lo, hi] = p.interval.unwrap_or([p.y, p.y]);
                [p.y, lo, hi]
            })
        });
        let y = Scale::fit(&self.y, ys, 0.05, 0.0, 1.0);
        let tick_w = y
            .ticks()
            .iter()
            .map(|&t| width(&label(t), TICK_SIZE))
            .fold(0.0, f64::max);
        let left = 28.0 + tick_w + 10.0;
        let right = WIDTH - legend_w - 12.0;
        let categorical = !self.categories.is_empty();
        let n = self.categories.len().max(1) as f64;
        let widest = self
            .categories
            .iter()
            .map(|c| width(c, TICK_SIZE))
            .fold(0.0, f64::max);
        let category_rows = if categorical && widest > (right - left) / n * 0.95 {
            2
        } else {
            1
        };
        let bottom_room = 18.0 * category_rows as f64 + 26.0 + 15.0 * self.notes.len() as f64;
        let height = MIN_HEIGHT.max(TOP + legend_h + bottom_room + 10.0);
        let bottom = height - bottom_room - 8.0;
        let x = if categorical {
            Scale {
                lo: -0.5,
                hi: n - 0.5,
                log: false,
                from: left,
                to: right,
            }
        } else {
            let xs = self
                .series
                .iter()
                .flat_map(|s| s.points.iter().map(|p| p.x));
            Scale::fit(&self.x, xs, 0.03, left, right)
        };
        let y = Scale {
            from: bottom,
            to: TOP,
            ..y
        };
        Layout {
            x,
            y,
            area: (left, TOP, right, bottom),
            height,
            legend_x: right + 12.0,
            category_rows,
        }
    }

    /// The chart as an SVG document.
    pub fn render(&self) -> String {
        let l = self.layout();
        let mut k = Canvas::new(WIDTH, l.height);
        frame::title(&mut k, &self.title);
        self.frame(&mut k, &l);
        let mut markers: Vec<Bounds> = Vec::new();
        let mut labels: Vec<(f64, f64, &str)> = Vec::new();
        for (i, s) in self.series.iter().enumerate() {
            draw_series(&mut k, &l, s, series_colour(i), &mut markers, &mut labels);
        }
        place_labels(&mut k, &l, &labels, &markers);
        self.legend(&mut k, &l);
        k.finish()
    }

    fn frame(&self, k: &mut Canvas, l: &Layout) {
        let (x0, y0, x1, y1) = l.area;
        let grid = Paint::stroke("#e6e6e6", 1.0);
        let ink = Paint::stroke("#333333", 1.0);
        for t in l.y.ticks() {
            let Some(py) = l.y.px(t) else { continue };
            k.line("grid", (x0, py), (x1, py), grid);
            k.line("tick", (x0 - 5.0, py), (x0, py), ink);
            k.text(
                "y-tick",
                (x0 - 8.0, py + 4.0),
                &label(t),
                TICK_SIZE,
                Anchor::End,
                false,
            );
        }
        if self.categories.is_empty() {
            for t in l.x.ticks() {
                let Some(px) = l.x.px(t) else { continue };
                k.line("grid", (px, y0), (px, y1), grid);
                k.line("tick", (px, y1), (px, y1 + 5.0), ink);
                k.text(
                    "x-tick",
                    (px, y1 + 18.0),
                    &label(t),
                    TICK_SIZE,
                    Anchor::Middle,
                    false,
                );
            }
        } else {
            let spacing = (x1 - x0) / self.categories.len() as f64;
            let room = spacing * l.category_rows as f64 * 0.95;
            for (c, name) in self.categories.iter().enumerate() {
                let Some(px) = l.x.px(c as f64) else { continue };
                let row = (c % l.category_rows) as f64;
                k.line("tick", (px, y1), (px, y1 + 5.0), ink);
                k.text(
                    "x-tick",
                    (px, y1 + 18.0 + 16.0 * row),
                    name,
                    fit(name, TICK_SIZE, room),
                    Anchor::Middle,
                    false,
                );
            }
        }
        let below = y1 + 18.0 * l.category_rows as f64 + 22.0;
        frame::labels(
            k,
            l.area,
            below,
            (&self.x.label, &self.y.label),
            &self.notes,
        );
    }

    fn legend(&self, k: &mut Canvas, l: &Layout) {
        if self.series.is_empty() {
            return;
        }
        k.open("legend");
        let x = l.legend_x;
        let h = self.series.len() as f64 * LEGEND_ROW + 8.0;
        let w = WIDTH - x - 6.0;
        k.rect(
            "legend-frame",
            (x, TOP),
            (w, h),
            Paint::stroke("#bbbbbb", 1.0),
            None,
        );
        for (i, s) in self.series.iter().enumerate() {
            let colour = series_colour(i);
            let cy = TOP + 14.0 + LEGEND_ROW * i as f64;
            let (sx, cx) = (x + 6.0, x + 6.0 + SWATCH / 2.0);
            k.open("legend-entry");
            if s.interval == Interval::Band {
                let band = Paint {
                    fill_opacity: Some(BAND_OPACITY),
                    ..Paint::fill(colour)
                };
                k.rect("swatch", (sx, cy - 6.0), (SWATCH, 12.0), band, None);
            }
            if let Some(d) = s.line {
                k.line("swatch", (sx, cy), (sx + SWATCH, cy), stroke(colour, d));
            }
            if s.interval == Interval::Bars {
                error_bar(k, "swatch", cx, cy - 7.0, cy + 7.0, colour);
            }
            if let Some(m) = s.marker {
                marker(k, "swatch", m, (cx, cy), colour);
            }
            let size = fit(&s.name, LEGEND_SIZE, WIDTH - (sx + SWATCH + 8.0) - 12.0);
            k.text(
                "legend-label",
                (sx + SWATCH + 8.0, cy + 4.0),
                &s.name,
                size,
                Anchor::Start,
                false,
            );
            k.close();
        }
        k.close();
    }
}

fn stroke(colour: &str, d: Dash) -> Paint<'_> {
    Paint {
        dash: (d == Dash::Dashed).then_some("6 4"),
        ..Paint::stroke(colour, 2.0)
    }
}

/// Runs of consecutive drawable items (an item that cannot be drawn breaks the run).
fn runs<T>(items: impl Iterator<Item = Option<T>>) -> Vec<Vec<T>> {
    let mut out: Vec<Vec<T>> = vec![Vec::new()];
    for item in items {
        match item {
            Some(v) => out.last_mut().expect("never empty").push(v),
            None if out.last().is_some_and(|r| !r.is_empty()) => out.push(Vec::new()),
            None => {}
        }
    }
    out.retain(|r| !r.is_empty());
    out
}

fn draw_series<'s>(
    k: &mut Canvas,
    l: &Layout,
    s: &'s Series,
    colour: &str,
    markers: &mut Vec<Bounds>,
    labels: &mut Vec<(f64, f64, &'s str)>,
) {
    k.open("series");
    let px = |p: &Datum| l.x.px(p.x + s.offset);
    if s.interval == Interval::Band {
        let paint = Paint {
            fill_opacity: Some(BAND_OPACITY),
            ..Paint::fill(colour)
        };
        for outline in band_outlines(l, s) {
            k.path("band", &[outline], true, paint);
        }
    }
    if let Some(d) = s.line {
        let line = runs(s.points.iter().map(|p| Some((px(p)?, l.y.px(p.y)?))));
        if line.iter().any(|r| r.len() > 1) {
            k.path("line", &line, false, stroke(colour, d));
        }
    }
    for p in &s.points {
        let (Some(x), Some(y)) = (px(p), l.y.px(p.y)) else {
            continue;
        };
        if s.interval == Interval::Bars {
            if let Some([lo, hi]) = p.interval {
                if let (Some(a), Some(b)) = (l.y.px_clamped(lo), l.y.px_clamped(hi)) {
                    error_bar(k, "error-bar", x, a, b, colour);
                }
            }
        }
        if let Some(m) = s.marker {
            marker(k, "marker", m, (x, y), colour);
            markers.push((x - MARK, y - MARK, x + MARK, y + MARK));
        }
        if let Some(t) = &p.label {
            labels.push((x, y, t));
        }
    }
    k.close();
}

/// Each run of two or more points with a drawable interval, as a closed outline: the upper
/// bounds in order, then the lower bounds back.
fn band_outlines(l: &Layout, s: &Series) -> Vec<Vec<(f64, f64)>> {
    let spans = runs(s.points.iter().map(|p| {
        let [lo, hi] = p.interval?;
        Some((
            l.x.px(p.x + s.offset)?,
            l.y.px_clamped(lo)?,
            l.y.px_clamped(hi)?,
        ))
    }));
    spans
        .into_iter()
        .filter(|r| r.len() > 1)
        .map(|r| {
            let mut outline: Vec<(f64, f64)> = r.iter().map(|&(x, _, hi)| (x, hi)).collect();
            outline.extend(r.iter().rev().map(|&(x, lo, _)| (x, lo)));
            outline
        })
        .collect()
}

fn error_bar(k: &mut Canvas, class: &str, x: f64, a: f64, b: f64, colour: &str) {
    let cap = 4.0;
    k.path(
        class,
        &[
            vec![(x, a), (x, b)],
            vec![(x - cap, a), (x + cap, a)],
            vec![(x - cap, b), (x + cap, b)],
        ],
        false,
        Paint::stroke(colour, 1.5),
    );
}

fn marker(k: &mut Canvas, class: &str, m: Marker, (x, y): (f64, f64), colour: &str) {
    let fill = Paint {
        stroke: Some("white"),
        stroke_width: 0.8,
        ..Paint::fill(colour)
    };
    match m {
        Marker::Circle => k.circle(class, (x, y), 4.5, fill, None),
        Marker::Ring => k.circle(class, (x, y), 6.5, Paint::stroke(colour, 1.8), None),
        Marker::Square => k.rect(class, (x - 4.0, y - 4.0), (8.0, 8.0), fill, None),
        Marker::Diamond => k.path(
            class,
            &[vec![(x, y - 5.5), (x + 5.5, y), (x, y + 5.5), (x - 5.5, y)]],
            true,
            fill,
        ),
        Marker::Triangle => k.path(
            class,
            &[vec![(x, y - 5.5), (x + 5.5, y + 4.5), (x - 5.5, y + 4.5)]],
            true,
            fill,
        ),
        Marker::Cross => k.path(
            class,
            &[
                vec![(x - 4.5, y - 4.5), (x + 4.5, y + 4.5)],
                vec![(x - 4.5, y + 4.5), (x + 4.5, y - 4.5)],
            ],
            false,
            Paint::stroke(colour, 2.0),
        ),
    }
}

/// Writes each point label at the first spot beside its point (right, left, above, below,
/// then the corners) that stays inside the plot area and covers no marker and no label
/// already placed; where none is free, the spot that covers the fewest.
fn place_labels(k: &mut Canvas, l: &Layout, labels: &[(f64, f64, &str)], markers: &[Bounds]) {
    if labels.is_empty() {
        return;
    }
    let size = POINT_LABEL_SIZE;
    let (ax0, ay0, ax1, ay1) = l.area;
    let spots: [(f64, f64, Anchor); 8] = [
        (9.0, 4.0, Anchor::Start),
        (-9.0, 4.0, Anchor::End),
        (0.0, -10.0, Anchor::Middle),
        (0.0, 18.0, Anchor::Middle),
        (8.0, -8.0, Anchor::Start),
        (8.0, 16.0, Anchor::Start),
        (-8.0, -8.0, Anchor::End),
        (-8.0, 16.0, Anchor::End),
    ];
    let mut placed: Vec<Bounds> = Vec::new();
    k.open("point-labels");
    for &(x, y, text) in labels {
        let w = width(text, size);
        let own = (x - MARK, y - MARK, x + MARK, y + MARK);
        let mut best: Option<(usize, f64, f64, Anchor, Bounds)> = None;
        for &(dx, dy, anchor) in &spots {
            let (tx, ty) = (x + dx, y + dy);
            let left = match anchor {
                Anchor::Start => tx,
                Anchor::Middle => tx - w / 2.0,
                Anchor::End => tx - w,
            };
            let b = (left, ty - size, left + w, ty + 0.3 * size);
            if b.0 < ax0 + 1.0 || b.2 > ax1 - 1.0 || b.1 < ay0 + 1.0 || b.3 > ay1 - 1.0 {
                continue;
            }
            let hits = placed.iter().filter(|p| overlaps(**p, b)).count() * 2
                + markers
                    .iter()
                    .filter(|m| **m != own && overlaps(**m, b))
                    .count();
            if best.as_ref().is_none_or(|bb| hits < bb.0) {
                best = Some((hits, tx, ty, anchor, b));
            }
            if hits == 0 {
                break;
            }
        }
        if let Some((_, tx, ty, anchor, b)) = best {
            k.text("point-label", (tx, ty), text, size, anchor, false);
            placed.push(b);
        }
    }
    k.close();
}
