//! The swept response as a plot: a line over one varied value, a heat map over two, axes
//! labelled with each varied name and its unit, the drawn figure named with its unit.

use crate::report::plot::{AxisSpec, Cell, Chart, Dash, Datum, Dot, HeatMap, Marker, Series};
use crate::sweep::{Axis, Response};

/// The axis title of a varied value: its name and unit (the one the sweep gave, else the one
/// the file wrote).
fn axis_label(a: &Axis) -> String {
    match a.unit.as_ref().or(a.file_unit.as_ref()) {
        Some(u) => format!("{} [{u}]", a.name),
        None => format!("{} (bare number, as in the network file)", a.name),
    }
}

fn axis(a: &Axis) -> AxisSpec {
    AxisSpec {
        label: axis_label(a),
        log: a.log,
        from_zero: false,
    }
}

/// A JSON pointer's reference tokens, unescaped (RFC 6901 §4).
fn tokens(pointer: &str) -> Vec<String> {
    pointer
        .split('/')
        .skip(1)
        .map(|t| t.replace("~1", "/").replace("~0", "~"))
        .collect()
}

/// The unit of a figure of copyloop's documents, from its key: molar figures in M (M/s for
/// rates), fluxes in molecules/s, firing rates per second, counts and their moments in
/// molecules; `None` for ratios (Fano factor, CV, relative differences) and unknown keys.
fn unit(parts: &[String]) -> Option<&'static str> {
    let key = parts.last()?.as_str();
    let firings = parts.first().is_some_and(|p| p.starts_with("firings"));
    if key.ends_with("molar_per_s") {
        Some("M/s")
    } else if key == "molar" || key.ends_with("_molar") {
        Some("M")
    } else if key == "rate_per_s" {
        Some("/s")
    } else if key.ends_with("per_s") {
        Some("molecules/s")
    } else if firings && matches!(key, "mean" | "sd" | "stderr") {
        Some("firings")
    } else if matches!(
        key,
        "mean"
            | "sd"
            | "stderr"
            | "count"
            | "initial_count"
            | "lna_mean"
            | "exact_mean"
            | "ensemble_mean"
            | "deterministic"
            | "observed"
    ) {
        Some("molecules")
    } else if matches!(key, "variance" | "lna_variance" | "exact_variance") {
        Some("molecules²")
    } else {
        None
    }
}

/// The drawn figure in words, with its unit where known, e.g. `H: final mean [molecules]`.
fn metric_label(pointer: &str) -> String {
    let p = tokens(pointer);
    let s = |i: usize| p.get(i).map_or("", String::as_str);
    let what = match (p.len(), s(0)) {
        (3, "final") => format!("{}: final {}", s(1), s(2).replace('_', " ")),
        (3, "time_average") => format!("{}: time average, {}", s(1), s(2).replace('_', " ")),
        (3, "state") => format!("{}: steady {}", s(1), s(2).replace('_', " ")),
        (3, "fluxes") => format!("{}: steady flux", s(1)),
        (3, "firings") => format!(
            "{}: firings in the window, {}",
            s(1),
            s(2).replace('_', " ")
        ),
        (5, "volumes") if s(2) == "species" => {
            let at = match s(1).parse::<usize>() {
                Ok(0) | Err(_) => String::new(),
                Ok(k) => format!(" at volume {}", k + 1),
            };
            format!("{}: {}{at}", s(3), s(4).replace('_', " "))
        }
        (4, "motifs") => match s(1).parse::<usize>() {
            Ok(k) => format!("motif {}: {} {}", k + 1, s(2), s(3).replace('_', " ")),
            Err(_) => pointer.to_string(),
        },
        _ => pointer.to_string(),
    };
    match unit(&p) {
        Some(u) => format!("{what} [{u}]"),
        None => what,
    }
}

/// The picture of `r`: a line for one varied value, a heat map for two.
pub fn svg(r: &Response) -> String {
    let title = format!("{} sweep: {}", r.task, r.metric);
    let missing = r.points.iter().filter(|p| p.1.is_none()).count();
    let mut notes = Vec::new();
    if missing > 0 {
        notes.push(format!(
            "{missing} of {} points have no value there (failed, or not run yet): {}",
            r.points.len(),
            if r.axes.len() == 1 {
                "gaps in the line"
            } else {
                "grey"
            }
        ));
    }
    if r.axes.len() == 1 {
        line(r, title, notes)
    } else {
        heat_map(r, title, notes)
    }
}

fn line(r: &Response, title: String, notes: Vec<String>) -> String {
    let mut pts: Vec<(f64, Option<f64>)> = r
        .points
        .iter()
        .map(|(x, y)| (x[0], *y))
        .filter(|(x, _)| x.is_finite())
        .collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let points = pts
        .iter()
        .map(|&(x, y)| Datum::new(x, y.unwrap_or(f64::NAN)))
        .collect();
    let label = metric_label(&r.metric);
    Chart {
        title,
        x: axis(&r.axes[0]),
        y: AxisSpec {
            label: label.clone(),
            log: false,
            from_zero: false,
        },
        categories: Vec::new(),
        series: vec![Series {
            line: Some(Dash::Solid),
            marker: Some(Marker::Circle),
            ..Series::new(label, points)
        }],
        notes,
    }
    .render()
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

fn tip(ax: &Axis, ay: &Axis, v: &[f64], z: Option<f64>) -> String {
    let num = crate::numbers::short;
    let z = z.map_or("no value".to_string(), num);
    format!(
        "{} = {}, {} = {}: {z}",
        ax.name,
        num(v[0]),
        ay.name,
        num(v[1])
    )
}

fn heat_map(r: &Response, title: String, notes: Vec<String>) -> String {
    let (ax, ay) = (&r.axes[0], &r.axes[1]);
    let mut map = HeatMap {
        title,
        x: axis(ax),
        y: axis(ay),
        bar_label: metric_label(&r.metric),
        notes,
        ..HeatMap::default()
    };
    if !ax.grid.is_empty() && !ay.grid.is_empty() {
        let sorted = |g: &[f64]| {
            let mut g: Vec<f64> = g.iter().copied().filter(|v| v.is_finite()).collect();
            g.sort_by(f64::total_cmp);
            g.dedup();
            g
        };
        let (gx, gy) = (sorted(&ax.grid), sorted(&ay.grid));
        let (ex, ey) = (edges(&gx, ax.log), edges(&gy, ay.log));
        for (v, z) in &r.points {
            let (Some(i), Some(j)) = (
                gx.iter().position(|&g| g == v[0]),
                gy.iter().position(|&g| g == v[1]),
            ) else {
                continue;
            };
            map.cells.push(Cell {
                x: [ex[i], ex[i + 1]],
                y: [ey[j], ey[j + 1]],
                value: *z,
                tip: tip(ax, ay, v, *z),
            });
        }
    } else {
        map.dots = r
            .points
            .iter()
            .filter(|(v, _)| v[0].is_finite() && v[1].is_finite())
            .map(|(v, z)| Dot {
                x: v[0],
                y: v[1],
                value: *z,
                tip: tip(ax, ay, v, *z),
            })
            .collect();
    }
    map.render()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_cells_tile_the_axis() {
        assert_eq!(edges(&[1.0, 2.0, 4.0], false), vec![0.5, 1.5, 3.0, 5.0]);
        let l = edges(&[1.0, 100.0], true);
        assert!(
            (l[1] - 10.0).abs() < 1e-9,
            "geometric midpoint on a log axis"
        );
    }

    #[test]
    fn figures_are_named_with_their_units() {
        assert_eq!(metric_label("/final/H/mean"), "H: final mean [molecules]");
        assert_eq!(
            metric_label("/final/H/mean_molar"),
            "H: final mean molar [M]"
        );
        assert_eq!(
            metric_label("/state/H/count"),
            "H: steady count [molecules]"
        );
        assert_eq!(
            metric_label("/fluxes/clear/per_s"),
            "clear: steady flux [molecules/s]"
        );
        assert_eq!(metric_label("/volumes/0/species/H/fano"), "H: fano");
        assert_eq!(metric_label("/volumes/1/species/H/cv"), "H: cv at volume 2");
        assert_eq!(
            metric_label("/motifs/0/ensemble/mean_per_s"),
            "motif 1: ensemble mean per s [molecules/s]"
        );
        assert_eq!(
            metric_label("/firings/bind/rate_per_s"),
            "bind: firings in the window, rate per s [/s]"
        );
        assert_eq!(metric_label("/omega"), "/omega");
        assert_eq!(metric_label("/final/a~1b/sd"), "a/b: final sd [molecules]");
    }

    #[test]
    fn axes_name_the_unit_the_sweep_or_the_file_gave() {
        let mut a = Axis {
            name: "kon".into(),
            unit: None,
            file_unit: Some("/M/s".into()),
            log: true,
            grid: vec![],
        };
        assert_eq!(axis_label(&a), "kon [/M/s]");
        a.unit = Some("/nM/s".into());
        assert_eq!(axis_label(&a), "kon [/nM/s]");
        a.unit = None;
        a.file_unit = None;
        assert_eq!(axis_label(&a), "kon (bare number, as in the network file)");
    }
}
