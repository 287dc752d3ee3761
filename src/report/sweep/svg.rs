//! The swept response as an SVG picture, written by hand: a line for one varied value, a heat
//! map for two. Text is left to the viewer's sans-serif font, so no font is needed to write it.

use crate::report::num;
use crate::sweep::{Axis, Response};
use std::fmt::Write;

const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 480.0;
const LEFT: f64 = 84.0;
const TOP: f64 = 48.0;
const BOTTOM: f64 = HEIGHT - 64.0;

/// Colour ramp from dark blue through teal to pale yellow, ordered in lightness so that a
/// larger value always reads lighter: (position, r, g, b).
const RAMP: [(f64, f64, f64, f64); 5] = [
    (0.00, 33.0, 24.0, 84.0),
    (0.25, 38.0, 94.0, 155.0),
    (0.50, 33.0, 145.0, 140.0),
    (0.75, 122.0, 195.0, 94.0),
    (1.00, 240.0, 225.0, 80.0),
];

/// The picture of `r` (one or two axes).
pub fn svg(r: &Response) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(
        out,
        r#"<rect width="{WIDTH}" height="{HEIGHT}" fill="white"/>"#
    );
    let title = format!("{} sweep: {}", r.task, r.metric);
    let _ = writeln!(
        out,
        r#"<text x="{}" y="24" text-anchor="middle" font-size="14">{}</text>"#,
        WIDTH / 2.0,
        esc(&title)
    );
    if r.axes.len() == 1 {
        line(&mut out, r);
    } else {
        heat_map(&mut out, r);
    }
    out.push_str("</svg>\n");
    out
}

/// A mapping from data values to pixels.
#[derive(Clone, Copy, Debug)]
struct Scale {
    lo: f64,
    hi: f64,
    log: bool,
    from: f64,
    to: f64,
}

impl Scale {
    fn new(lo: f64, hi: f64, log: bool, from: f64, to: f64) -> Scale {
        Scale {
            lo,
            hi,
            log,
            from,
            to,
        }
    }

    fn px(&self, v: f64) -> f64 {
        let (a, b, x) = if self.log {
            (self.lo.ln(), self.hi.ln(), v.ln())
        } else {
            (self.lo, self.hi, v)
        };
        self.from + (x - a) / (b - a) * (self.to - self.from)
    }

    fn ticks(&self) -> Vec<f64> {
        if self.log {
            let a = self.lo.log10().ceil() as i32;
            let b = self.hi.log10().floor() as i32;
            if b - a >= 1 {
                let stride = ((b - a) / 8 + 1) as usize;
                return (a..=b).step_by(stride).map(|k| 10f64.powi(k)).collect();
            }
        }
        nice_ticks(self.lo, self.hi)
    }
}

/// About five round ticks (1, 2 or 5 times a power of ten apart) inside [lo, hi].
fn nice_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let raw = (hi - lo) / 5.0;
    if !(raw > 0.0 && raw.is_finite()) {
        return vec![lo];
    }
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|&s| s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// A tick label: [`num`] without the trailing zeros of a mantissa (`1e6`, `2.5e-4`).
fn tick(x: f64) -> String {
    let s = num(x);
    match s.split_once('e') {
        Some((m, e)) if m.contains('.') => {
            format!("{}e{e}", m.trim_end_matches('0').trim_end_matches('.'))
        }
        _ => s,
    }
}

/// A data range widened to a drawable one: padded by `pad` of its width, and opened up when
/// it is a single value.
fn range(values: impl Iterator<Item = f64>, log: bool, pad: f64) -> (f64, f64) {
    let (mut lo, mut hi) = values
        .filter(|v| v.is_finite() && (!log || *v > 0.0))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if !lo.is_finite() {
        return if log { (1.0, 10.0) } else { (0.0, 1.0) };
    }
    if log {
        let (a, b) = (lo.ln(), hi.ln());
        let w = if b > a { (b - a) * pad } else { 0.5 };
        return ((a - w).exp(), (b + w).exp());
    }
    if hi == lo {
        let w = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        lo -= w;
        hi += w;
    } else {
        let w = (hi - lo) * pad;
        lo -= w;
        hi += w;
    }
    (lo, hi)
}

fn axis_label(a: &Axis) -> String {
    match &a.unit {
        Some(u) => format!("{} [{u}]", a.name),
        None => format!("{} (unit as in the network file)", a.name),
    }
}

/// Tick marks, grid lines and labels of both axes around the plot area.
fn frame(out: &mut String, x: &Scale, y: &Scale, x_label: &str, y_label: &str, grid: bool) {
    for t in x.ticks() {
        let px = x.px(t);
        if grid {
            let _ = writeln!(
                out,
                r##"<line x1="{px:.1}" y1="{TOP}" x2="{px:.1}" y2="{BOTTOM}" stroke="#e4e4e4"/>"##
            );
        }
        let _ = writeln!(
            out,
            r##"<line x1="{px:.1}" y1="{BOTTOM}" x2="{px:.1}" y2="{}" stroke="#333"/><text x="{px:.1}" y="{}" text-anchor="middle">{}</text>"##,
            BOTTOM + 5.0,
            BOTTOM + 19.0,
            esc(&tick(t))
        );
    }
    for t in y.ticks() {
        let py = y.px(t);
        if grid {
            let _ = writeln!(
                out,
                r##"<line x1="{LEFT}" y1="{py:.1}" x2="{}" y2="{py:.1}" stroke="#e4e4e4"/>"##,
                x.to
            );
        }
        let _ = writeln!(
            out,
            r##"<line x1="{}" y1="{py:.1}" x2="{LEFT}" y2="{py:.1}" stroke="#333"/><text x="{}" y="{:.1}" text-anchor="end">{}</text>"##,
            LEFT - 5.0,
            LEFT - 8.0,
            py + 4.0,
            esc(&tick(t))
        );
    }
    let _ = writeln!(
        out,
        r##"<rect x="{LEFT}" y="{TOP}" width="{:.1}" height="{:.1}" fill="none" stroke="#333"/>"##,
        x.to - LEFT,
        BOTTOM - TOP
    );
    let _ = writeln!(
        out,
        r#"<text x="{:.1}" y="{}" text-anchor="middle">{}</text>"#,
        (LEFT + x.to) / 2.0,
        HEIGHT - 22.0,
        esc(x_label)
    );
    let cy = (TOP + BOTTOM) / 2.0;
    let _ = writeln!(
        out,
        r#"<text x="18" y="{cy:.1}" text-anchor="middle" transform="rotate(-90 18 {cy:.1})">{}</text>"#,
        esc(y_label)
    );
}

/// One varied value: the metric against it, a line through the finished points in order of x.
fn line(out: &mut String, r: &Response) {
    let ax = &r.axes[0];
    let mut pts: Vec<(f64, Option<f64>)> = r
        .points
        .iter()
        .map(|(x, y)| (x[0], *y))
        .filter(|(x, _)| x.is_finite() && (!ax.log || *x > 0.0))
        .collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let right = WIDTH - 30.0;
    let (x0, x1) = range(pts.iter().map(|p| p.0), ax.log, 0.03);
    let (y0, y1) = range(pts.iter().filter_map(|p| p.1), false, 0.06);
    let x = Scale::new(x0, x1, ax.log, LEFT, right);
    let y = Scale::new(y0, y1, false, BOTTOM, TOP);
    frame(out, &x, &y, &axis_label(ax), &r.metric, true);
    let mut path = String::new();
    let mut pen_down = false;
    for (px, py) in &pts {
        match py {
            Some(v) if v.is_finite() => {
                let _ = write!(
                    path,
                    "{}{:.2},{:.2} ",
                    if pen_down { "L" } else { "M" },
                    x.px(*px),
                    y.px(*v)
                );
                pen_down = true;
            }
            _ => pen_down = false,
        }
    }
    let _ = writeln!(
        out,
        r##"<path d="{}" fill="none" stroke="#265e9b" stroke-width="2"/>"##,
        path.trim_end()
    );
    for (px, py) in &pts {
        match py {
            Some(v) if v.is_finite() => {
                let _ = writeln!(
                    out,
                    r##"<circle cx="{:.2}" cy="{:.2}" r="3" fill="#265e9b"/>"##,
                    x.px(*px),
                    y.px(*v)
                );
            }
            _ => {
                let _ = writeln!(
                    out,
                    r##"<circle cx="{:.2}" cy="{BOTTOM}" r="3.5" fill="none" stroke="#999"><title>no value</title></circle>"##,
                    x.px(*px)
                );
            }
        }
    }
}

/// Colour of `t` in [0, 1] on [`RAMP`], linearly between its stops.
fn colour(t: f64) -> String {
    let t = t.clamp(0.0, 1.0);
    let k = RAMP
        .iter()
        .position(|s| s.0 >= t)
        .unwrap_or(RAMP.len() - 1)
        .max(1);
    let (a, b) = (RAMP[k - 1], RAMP[k]);
    let f = (t - a.0) / (b.0 - a.0);
    let mix = |p: f64, q: f64| (p + f * (q - p)).round() as u8;
    format!(
        "#{:02x}{:02x}{:02x}",
        mix(a.1, b.1),
        mix(a.2, b.2),
        mix(a.3, b.3)
    )
}

/// Cell boundaries around sorted grid values: midway between neighbours (geometrically on a
/// log axis), and as far beyond the ends as the nearest neighbour is.
fn edges(values: &[f64], log: bool) -> Vec<f64> {
    let f = |v: f64| if log { v.ln() } else { v };
    let g = |v: f64| if log { v.exp() } else { v };
    let t: Vec<f64> = values.iter().map(|&v| f(v)).collect();
    let n = t.len();
    if n == 1 {
        let w = if log || t[0] == 0.0 {
            0.5
        } else {
            t[0].abs() * 0.1
        };
        return vec![g(t[0] - w), g(t[0] + w)];
    }
    let mut e = Vec::with_capacity(n + 1);
    e.push(g(t[0] - (t[1] - t[0]) / 2.0));
    for k in 0..n - 1 {
        e.push(g((t[k] + t[k + 1]) / 2.0));
    }
    e.push(g(t[n - 1] + (t[n - 1] - t[n - 2]) / 2.0));
    e
}

/// Two varied values: a cell per grid point (a dot per point of a Latin hypercube), coloured by
/// the metric, with a colour bar.
fn heat_map(out: &mut String, r: &Response) {
    let (ax, ay) = (&r.axes[0], &r.axes[1]);
    let right = WIDTH - 132.0;
    let zs: Vec<f64> = r
        .points
        .iter()
        .filter_map(|p| p.1)
        .filter(|z| z.is_finite())
        .collect();
    let z0 = zs.iter().copied().fold(f64::INFINITY, f64::min);
    let z1 = zs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let shade = |z: Option<f64>| match z {
        Some(z) if z.is_finite() => colour(if z1 > z0 { (z - z0) / (z1 - z0) } else { 0.5 }),
        _ => "#d8d8d8".to_string(),
    };
    let is_grid = !ax.grid.is_empty() && !ay.grid.is_empty();
    let (x, y) = if is_grid {
        let mut gx = ax.grid.clone();
        let mut gy = ay.grid.clone();
        gx.sort_by(f64::total_cmp);
        gx.dedup();
        gy.sort_by(f64::total_cmp);
        gy.dedup();
        let ex = edges(&gx, ax.log);
        let ey = edges(&gy, ay.log);
        let x = Scale::new(ex[0], ex[ex.len() - 1], ax.log, LEFT, right);
        let y = Scale::new(ey[0], ey[ey.len() - 1], ay.log, BOTTOM, TOP);
        for (v, z) in &r.points {
            let (Some(i), Some(j)) = (
                gx.iter().position(|&g| g == v[0]),
                gy.iter().position(|&g| g == v[1]),
            ) else {
                continue;
            };
            let (xa, xb) = (x.px(ex[i]), x.px(ex[i + 1]));
            let (ya, yb) = (y.px(ey[j + 1]), y.px(ey[j]));
            let _ = writeln!(
                out,
                r#"<rect x="{xa:.2}" y="{ya:.2}" width="{:.2}" height="{:.2}" fill="{}" shape-rendering="crispEdges"><title>{}</title></rect>"#,
                xb - xa,
                yb - ya,
                shade(*z),
                esc(&cell_title(ax, ay, v, *z))
            );
        }
        (x, y)
    } else {
        let (x0, x1) = range(r.points.iter().map(|p| p.0[0]), ax.log, 0.04);
        let (y0, y1) = range(r.points.iter().map(|p| p.0[1]), ay.log, 0.04);
        let x = Scale::new(x0, x1, ax.log, LEFT, right);
        let y = Scale::new(y0, y1, ay.log, BOTTOM, TOP);
        for (v, z) in &r.points {
            if !(v[0].is_finite() && v[1].is_finite()) {
                continue;
            }
            let _ = writeln!(
                out,
                r##"<circle cx="{:.2}" cy="{:.2}" r="5" fill="{}" stroke="#555" stroke-width="0.5"><title>{}</title></circle>"##,
                x.px(v[0]),
                y.px(v[1]),
                shade(*z),
                esc(&cell_title(ax, ay, v, *z))
            );
        }
        (x, y)
    };
    frame(out, &x, &y, &axis_label(ax), &axis_label(ay), false);
    colour_bar(out, z0, z1, &r.metric);
}

fn cell_title(ax: &Axis, ay: &Axis, v: &[f64], z: Option<f64>) -> String {
    let z = z.map_or("no value".to_string(), num);
    format!(
        "{} = {}, {} = {}: {z}",
        ax.name,
        num(v[0]),
        ay.name,
        num(v[1])
    )
}

/// The metric's colour scale at the right of the heat map.
fn colour_bar(out: &mut String, z0: f64, z1: f64, metric: &str) {
    let x = WIDTH - 112.0;
    let w = 16.0;
    out.push_str(r#"<defs><linearGradient id="ramp" x1="0" y1="1" x2="0" y2="0">"#);
    for (t, ..) in RAMP {
        let _ = write!(out, r#"<stop offset="{t}" stop-color="{}"/>"#, colour(t));
    }
    out.push_str("</linearGradient></defs>\n");
    let _ = writeln!(
        out,
        r##"<rect x="{x}" y="{TOP}" width="{w}" height="{}" fill="url(#ramp)" stroke="#333"/>"##,
        BOTTOM - TOP
    );
    if z0.is_finite() && z1.is_finite() {
        let s = if z1 > z0 {
            Scale::new(z0, z1, false, BOTTOM, TOP)
        } else {
            Scale::new(z0 - 1.0, z0 + 1.0, false, BOTTOM, TOP)
        };
        let mut ticks: Vec<f64> = nice_ticks(s.lo, s.hi);
        if z1 == z0 {
            ticks = vec![z0];
        }
        for t in ticks {
            let py = s.px(t);
            let _ = writeln!(
                out,
                r##"<line x1="{}" y1="{py:.1}" x2="{}" y2="{py:.1}" stroke="#333"/><text x="{}" y="{:.1}">{}</text>"##,
                x + w,
                x + w + 4.0,
                x + w + 7.0,
                py + 4.0,
                esc(&tick(t))
            );
        }
    }
    let cx = WIDTH - 12.0;
    let cy = (TOP + BOTTOM) / 2.0;
    let _ = writeln!(
        out,
        r#"<text x="{cx}" y="{cy:.1}" text-anchor="middle" transform="rotate(-90 {cx} {cy:.1})">{}</text>"#,
        esc(metric)
    );
}

/// Text made safe inside SVG markup.
fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn axis(name: &str, log: bool, grid: Vec<f64>) -> Axis {
        Axis {
            name: name.into(),
            unit: Some("nM".into()),
            log,
            grid,
        }
    }

    #[test]
    fn ticks_are_round() {
        assert_eq!(nice_ticks(0.0, 10.0), vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
        let s = Scale::new(1.0, 1000.0, true, 0.0, 100.0);
        assert_eq!(s.ticks(), vec![1.0, 10.0, 100.0, 1000.0]);
        assert!((s.px(10.0) - 100.0 / 3.0).abs() < 1e-9);
    }

    #[test]
    fn tick_labels_are_short() {
        assert_eq!(tick(1e6), "1e6");
        assert_eq!(tick(2.5e-4), "2.5e-4");
        assert_eq!(tick(200.0), "200");
    }

    #[test]
    fn ramp_runs_dark_to_light() {
        assert_eq!(colour(0.0), "#211854");
        assert_eq!(colour(1.0), "#f0e150");
        assert_eq!(colour(0.5), "#21918c");
    }

    #[test]
    fn grid_cells_tile_the_axis() {
        let e = edges(&[1.0, 2.0, 4.0], false);
        assert_eq!(e, vec![0.5, 1.5, 3.0, 5.0]);
        let l = edges(&[1.0, 100.0], true);
        assert!((l[1] - 10.0).abs() < 1e-9);
    }

    #[test]
    fn line_and_heat_map_draw_every_point() {
        let line = Response {
            axes: vec![axis("H", false, vec![1.0, 2.0, 3.0])],
            metric: "/final/H/mean".into(),
            task: "simulate".into(),
            points: vec![
                (vec![1.0], Some(2.0)),
                (vec![2.0], None),
                (vec![3.0], Some(4.0)),
            ],
        };
        let s = svg(&line);
        assert_eq!(s.matches("<circle").count(), 3);
        assert!(s.contains("M"));
        assert!(s.contains("H [nM]"));
        let heat = Response {
            axes: vec![
                axis("a", false, vec![1.0, 2.0]),
                axis("b", true, vec![1.0, 10.0]),
            ],
            metric: "/x".into(),
            task: "steady".into(),
            points: vec![
                (vec![1.0, 1.0], Some(0.0)),
                (vec![1.0, 10.0], Some(1.0)),
                (vec![2.0, 1.0], Some(2.0)),
                (vec![2.0, 10.0], None),
            ],
        };
        let h = svg(&heat);
        assert_eq!(h.matches("<title>").count(), 4);
        assert!(h.contains("#d8d8d8"));
        assert!(h.contains("linearGradient"));
    }
}
