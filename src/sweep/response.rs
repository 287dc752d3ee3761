//! The swept response read back from a sweep file: each point's varied values and one number
//! from its result, chosen with a JSON pointer (RFC 6901).

use super::store::{scan, Header};
use super::task::default_metric;
use crate::error::{Error, Result};

/// A varied value as an axis.
#[derive(Clone, Debug, PartialEq)]
pub struct Axis {
    pub name: String,
    /// The unit the values are in; `None` when they are in the unit the file wrote.
    pub unit: Option<String>,
    /// The unit the file wrote for the name, where the sweep file records it.
    pub file_unit: Option<String>,
    /// Drawn on a logarithmic scale (a `log:` spec).
    pub log: bool,
    /// The grid's values on this axis; empty for a Latin hypercube.
    pub grid: Vec<f64>,
}

/// The points of a sweep as numbers to draw.
#[derive(Clone, Debug, PartialEq)]
pub struct Response {
    pub axes: Vec<Axis>,
    /// The JSON pointer drawn.
    pub metric: String,
    pub task: String,
    /// (values on each axis, the metric or `None` where the point failed or has no number
    /// there), ordered by point.
    pub points: Vec<(Vec<f64>, Option<f64>)>,
}

/// How many axes a sweep plot can show: one (a line) or two (a heat map).
pub fn check_drawable(axes: usize) -> Result<()> {
    if axes == 1 || axes == 2 {
        Ok(())
    } else {
        Err(Error::usage(format!(
            "--svg draws one varied value (a line) or two (a heat map); this sweep varies {axes}"
        )))
    }
}

/// Reads `metric` (or the sweep's default, else the task's) from every point of the sweep file at `path`.
pub fn response(path: &str, metric: Option<&str>) -> Result<Response> {
    if let Some(m) = metric {
        if !(m.is_empty() || m.starts_with('/')) {
            return Err(Error::usage(format!(
                "--metric {m}: a JSON pointer into the result starts with `/`, e.g. \
                 `/final/H/mean`"
            )));
        }
    }
    let mut metric: Option<String> = metric.map(str::to_string);
    let mut rows: Vec<(u64, Vec<f64>, Option<f64>)> = Vec::new();
    let s = scan(path, |h, e, v| {
        let values = h
            .vary
            .iter()
            .map(|d| {
                let name = d["name"].as_str().unwrap_or("");
                v["params"][name].as_f64().unwrap_or(f64::NAN)
            })
            .collect();
        let result = &v["result"];
        if metric.is_none() && !result.is_null() {
            metric = h
                .default_metric
                .clone()
                .or_else(|| default_metric(&h.task, result));
        }
        let y = metric
            .as_deref()
            .and_then(|m| result.pointer(m))
            .and_then(|y| y.as_f64());
        rows.push((e.point, values, y));
    })?;
    let header: Header = s
        .header
        .ok_or_else(|| Error::usage(format!("{path} has no sweep header")))?;
    check_drawable(header.vary.len())?;
    let metric = metric.ok_or_else(|| {
        Error::usage(format!(
            "{path}: no finished point has a number to draw; name one with --metric"
        ))
    })?;
    rows.sort_by_key(|r| r.0);
    let points: Vec<(Vec<f64>, Option<f64>)> = rows.into_iter().map(|(_, x, y)| (x, y)).collect();
    if !points.iter().any(|p| p.1.is_some()) {
        return Err(Error::usage(format!(
            "--metric {metric}: no point of {path} has a number there"
        )));
    }
    let axes = header
        .vary
        .iter()
        .map(|v| Axis {
            name: v["name"].as_str().unwrap_or("").to_string(),
            unit: v["unit"].as_str().map(str::to_string),
            file_unit: v["file_unit"].as_str().map(str::to_string),
            log: v["scale"] == "log",
            grid: v["values"]
                .as_array()
                .map(|a| a.iter().filter_map(|x| x.as_f64()).collect())
                .unwrap_or_default(),
        })
        .collect();
    Ok(Response {
        axes,
        metric,
        task: header.task,
        points,
    })
}
