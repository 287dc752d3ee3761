//! The report of `copyloop distribution`: the JSON document (the serialisation of the
//! library's results, the keys of docs/json.md at the top level), a table, a long-form CSV of the
//! marginals, and an SVG of marginals at chosen times beside ensemble histograms.

use super::num;
use super::plot::{AxisSpec, Chart, Dash, Datum, Marker, Series};
use super::table::Table;
use crate::distribution::compare::Histogram;
use crate::distribution::{Stationary, Transient};
use serde_json::{json, Map, Value};

/// What one run of the command computed.
pub struct Results<'a> {
    pub file: &'a str,
    pub transient: Option<&'a Transient>,
    pub stationary: Option<&'a Stationary>,
    pub histograms: &'a [Histogram],
}

fn value<T: serde::Serialize>(x: &T) -> Value {
    serde_json::to_value(x).expect("results serialise")
}

/// The JSON document. With a transient solve its fields are the top level (`truncation_error`,
/// `states`, `times`, `species` of docs/json.md); a stationary-only run keeps those keys, with
/// no times, and its law under `stationary`.
pub fn json(r: &Results) -> Value {
    let mut doc = match (r.transient, r.stationary) {
        (Some(t), _) => value(t),
        (None, Some(s)) => {
            let mut species = Map::new();
            for (name, law) in &s.species.0 {
                species.insert(
                    name.clone(),
                    json!({"clamped": law.clamped, "accumulates": law.accumulates, "mean": [], "variance": [], "fano": [], "p_zero": [], "marginal": []}),
                );
            }
            json!({
                "truncation_error": s.truncation_error,
                "states": s.states,
                "times": [],
                "species": species,
            })
        }
        (None, None) => json!({}),
    };
    let obj = doc.as_object_mut().expect("an object");
    obj.insert("file".into(), json!(r.file));
    obj.insert("stationary".into(), r.stationary.map_or(Value::Null, value));
    obj.insert("ensemble_histograms".into(), value(&r.histograms));
    doc
}

fn header(r: &Results) -> String {
    let mut out = String::new();
    if let Some(t) = r.transient {
        let p = &t.projection;
        let bounds: Vec<String> = p
            .bounds
            .iter()
            .map(|b| {
                format!(
                    "{} ≤ {}{}",
                    b.species,
                    b.max_count,
                    if b.capped { " (conserved)" } else { "" }
                )
            })
            .collect();
        out.push_str(&format!(
            "{}: exact distribution by finite state projection, {} states in {} dimension{} ({})\n\
             every probability below is within {} of the truth (probability that left the projection, \
             series cut included); {} projection{} solved\n\
             uniformization rate {} /s, {} sparse products\n\n",
            r.file,
            t.states,
            p.dimensions,
            if p.dimensions == 1 { "" } else { "s" },
            if bounds.is_empty() { "no free coordinate".into() } else { bounds.join(", ") },
            num(t.truncation_error),
            p.rounds,
            if p.rounds == 1 { "" } else { "s" },
            num(t.uniformization_rate),
            t.products
        ));
    }
    out
}

/// The readable report.
pub fn table(r: &Results) -> String {
    let mut out = header(r);
    if let Some(t) = r.transient {
        for (name, law) in &t.species.0 {
            if law.clamped {
                continue;
            }
            if law.accumulates {
                out.push_str(&format!(
                    "{name} (molecules): only accumulates, so it is left out of the state space; its mean, \
                     variance and Fano factor are exact (from the firings of the projected chain), its \
                     distribution and p(0) are not computed\n"
                ));
            } else {
                out.push_str(&format!("{name} (molecules)\n"));
            }
            let mut tab = Table::new(&["time (s)", "mean", "variance", "Fano", "p(0)"]);
            for (i, &time) in t.times.iter().enumerate() {
                tab.row(vec![
                    num(time),
                    num(law.mean[i]),
                    num(law.variance[i]),
                    num(law.fano[i]),
                    if law.accumulates {
                        "not computed".into()
                    } else {
                        num(law.p_zero[i])
                    },
                ]);
            }
            out.push_str(&tab.render());
            out.push('\n');
        }
    }
    if let Some(s) = r.stationary {
        out.push_str(&format!(
            "{}: stationary law on {} states ({} in its closed class); stationary probability on the \
             projection's boundary {} (indicator of the truncation error); residual {}\n",
            r.file,
            s.states,
            s.class_states,
            num(s.truncation_error),
            num(s.residual)
        ));
        let mut tab = Table::new(&["species", "mean", "variance", "Fano", "p(0)"]);
        for (name, law) in s.species.0.iter().filter(|(_, l)| !l.clamped) {
            if let Some(rate) = law.accumulation_per_s {
                let none = || "none (accumulates)".to_string();
                tab.row(vec![name.clone(), none(), none(), none(), none()]);
                out.push_str(&format!(
                    "{name} only accumulates: no stationary law; it grows at {} molecules/s on average (exact)\n",
                    num(rate)
                ));
                continue;
            }
            tab.row(vec![
                name.clone(),
                num(law.mean),
                num(law.variance),
                num(law.fano),
                num(law.p_zero),
            ]);
        }
        out.push_str(&tab.render());
        out.push('\n');
        let mut tab = Table::new(&["reaction", "mean flux (/s)"]);
        for (label, f) in &s.fluxes.0 {
            tab.row(vec![label.clone(), num(*f)]);
        }
        out.push_str(&tab.render());
    }
    out
}

/// The marginals as CSV, one probability per row: `time_s,species,count,probability`
/// (`time_s` is `inf` for the stationary law).
pub fn csv(r: &Results) -> String {
    let mut out = String::from("time_s,species,count,probability\n");
    if let Some(t) = r.transient {
        for (name, law) in &t.species.0 {
            for (i, &time) in t.times.iter().enumerate() {
                for (k, p) in law.marginal[i].iter().enumerate() {
                    out.push_str(&format!("{time},{name},{k},{p}\n"));
                }
            }
        }
    }
    if let Some(s) = r.stationary {
        for (name, law) in &s.species.0 {
            for (k, p) in law.marginal.iter().enumerate() {
                out.push_str(&format!("inf,{name},{k},{p}\n"));
            }
        }
    }
    out
}

/// The marginal law of `species` at the grid points `at` (indices into the transient times;
/// the stationary law too when there is one), each beside the ensemble histogram of the same
/// species and time if one was run.
pub fn svg(r: &Results, species: &str, at: &[usize]) -> String {
    let mut series = Vec::new();
    let bars = |p: &[f64]| -> Vec<Datum> {
        p.iter()
            .enumerate()
            .map(|(k, &y)| Datum::new(k as f64, y))
            .collect()
    };
    if let Some(t) = r.transient {
        if let Some(law) = t.species.get(species) {
            for &i in at {
                series.push(Series {
                    line: Some(Dash::Solid),
                    ..Series::new(
                        format!("t = {} s exact", num(t.times[i])),
                        bars(&law.marginal[i]),
                    )
                });
                for h in r
                    .histograms
                    .iter()
                    .filter(|h| h.species == species && h.time == t.times[i])
                {
                    let points = bars(&h.frequencies)
                        .into_iter()
                        .filter(|p| p.y > 0.0)
                        .collect();
                    series.push(Series {
                        marker: Some(Marker::Circle),
                        ..Series::new(
                            format!("t = {} s, {} runs", num(h.time), h.replicates),
                            points,
                        )
                    });
                }
            }
        }
    }
    if let Some(law) = r.stationary.and_then(|s| s.species.get(species)) {
        series.push(Series {
            line: Some(Dash::Dashed),
            ..Series::new("stationary exact", bars(&law.marginal))
        });
    }
    let bound = r
        .transient
        .map(|t| t.truncation_error)
        .or(r.stationary.map(|s| s.truncation_error))
        .unwrap_or(0.0);
    Chart {
        title: format!(
            "{}: distribution of {species} (error bound {})",
            r.file,
            num(bound)
        ),
        x: AxisSpec {
            label: format!("{species} (molecules)"),
            log: false,
            from_zero: true,
        },
        y: AxisSpec {
            label: "probability".into(),
            log: false,
            from_zero: true,
        },
        series,
        ..Chart::default()
    }
    .render()
}
