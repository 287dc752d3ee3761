//! The report of `copyloop simulate`: table, JSON (CONTRACT §3) and the CSV grid.
//!
//! Count figures are molecules and seconds. Where the network sets a volume, each count figure
//! has a molar twin with the suffix `_molar` (count/Ω in mol/L; rates in mol/L/s), Ω = N_A·V.
//!
//! CSV layout (`--out`): one header row, then one row per grid time:
//! `time_s,<A>_mean,<A>_sd,<B>_mean,<B>_sd,…` with species in file order, counts in molecules
//! across replicates (sd is the sample SD over replicates; `NaN` with a single replicate).

use super::table::Table;
use super::{jnum, num};
use crate::ensemble::EnsembleResult;
use crate::network::Network;
use crate::stats::Welford;
use serde_json::{json, Map, Value};

/// 1/Ω where a volume is set.
fn molar_factor(net: &Network) -> Option<f64> {
    net.volume_l.map(|_| 1.0 / net.omega)
}

fn moments(w: &Welford, molar: Option<f64>) -> Map<String, Value> {
    let mut m = Map::new();
    m.insert("mean".into(), jnum(w.mean()));
    m.insert("sd".into(), jnum(w.sd()));
    m.insert("stderr".into(), jnum(w.stderr()));
    let ci = w.ci95();
    m.insert("ci95".into(), json!([jnum(ci[0]), jnum(ci[1])]));
    if let Some(f) = molar {
        m.insert("mean_molar".into(), jnum(w.mean() * f));
        m.insert("sd_molar".into(), jnum(w.sd() * f));
        m.insert("stderr_molar".into(), jnum(w.stderr() * f));
        m.insert(
            "ci95_molar".into(),
            json!([jnum(ci[0] * f), jnum(ci[1] * f)]),
        );
    }
    m
}

/// The JSON document of CONTRACT §3 for `simulate`, with a few more keys (`window`,
/// `grid_points`, `absorbed_replicates`, `firings_first_half`, `within_variance`, `ci95`,
/// `rate_per_s`).
pub fn json(net: &Network, r: &EnsembleResult) -> Value {
    let molar = molar_factor(net);
    let t = r.window_length();
    let mut finals = Map::new();
    let mut averages = Map::new();
    for (i, s) in net.species.iter().enumerate() {
        finals.insert(
            s.name.clone(),
            Value::Object(moments(&r.final_state[i], molar)),
        );
        let mut a = moments(&r.time_average[i], molar);
        let wv = r.within_variance[i].mean();
        a.insert("within_variance".into(), jnum(wv));
        if let Some(f) = molar {
            a.insert("within_variance_molar".into(), jnum(wv * f * f));
        }
        averages.insert(s.name.clone(), Value::Object(a));
    }
    let mut firings = Map::new();
    let mut halves = Map::new();
    for (j, rx) in net.reactions.iter().enumerate() {
        let w = &r.firings[j];
        let mut m = moments(w, molar);
        m.insert("rate_per_s".into(), jnum(w.mean() / t));
        if let Some(f) = molar {
            m.insert("rate_molar_per_s".into(), jnum(w.mean() / t * f));
        }
        firings.insert(rx.label.clone(), Value::Object(m));
        let h = &r.firings_first_half[j];
        halves.insert(
            rx.label.clone(),
            json!({"mean": jnum(h.mean()), "sd": jnum(h.sd())}),
        );
    }
    let mut grid = Map::new();
    grid.insert(
        crate::network::compile::GRID_TIME.into(),
        Value::Array(r.grid_times.iter().map(|&x| jnum(x)).collect()),
    );
    for (i, s) in net.species.iter().enumerate() {
        let col = |f: &dyn Fn(&Welford) -> f64| -> Value {
            Value::Array(r.grid.iter().map(|row| jnum(f(&row[i]))).collect())
        };
        let mut m = Map::new();
        m.insert("mean".into(), col(&|w| w.mean()));
        m.insert("sd".into(), col(&|w| w.sd()));
        if let Some(f) = molar {
            m.insert("mean_molar".into(), col(&|w| w.mean() * f));
            m.insert("sd_molar".into(), col(&|w| w.sd() * f));
        }
        grid.insert(s.name.clone(), Value::Object(m));
    }
    json!({
        "method": r.spec.method.name(),
        "replicates": r.spec.replicates,
        "seed": r.spec.seed,
        "t_end": jnum(r.spec.t_end),
        "window": jnum(r.spec.window),
        "grid_points": r.spec.grid_points,
        "events_total": r.events_total,
        "leaps": r.leaps,
        "exact_steps": r.exact_steps,
        "wall_seconds": jnum(r.wall_seconds),
        "events_per_second": jnum(r.events_per_second()),
        "absorbed_replicates": r.absorbed,
        "final": finals,
        "time_average": averages,
        "firings": firings,
        "firings_first_half": halves,
        "grid": grid,
    })
}

fn pm(w: &Welford) -> String {
    if w.count() < 2 {
        num(w.mean())
    } else {
        format!("{} ± {}", num(w.mean()), num(w.sd()))
    }
}

fn interval(ci: [f64; 2]) -> String {
    if ci[0].is_finite() && ci[1].is_finite() {
        format!("[{}, {}]", num(ci[0]), num(ci[1]))
    } else {
        "-".into()
    }
}

/// The table for people.
pub fn table(net: &Network, r: &EnsembleResult) -> String {
    let s = &r.spec;
    let mut out = format!(
        "{}: {} method, {} replicate{}, seed {}, t_end {} s, window [{}, {}] s\n\
         {} events in {} s ({} events/s){}\n\n",
        net.file,
        s.method.name(),
        s.replicates,
        if s.replicates == 1 { "" } else { "s" },
        s.seed,
        num(s.t_end),
        num(s.window),
        num(s.t_end),
        r.events_total,
        num(r.wall_seconds),
        num(r.events_per_second()),
        if r.absorbed > 0 {
            format!(
                "; {} replicate(s) stopped early: nothing could fire any more",
                r.absorbed
            )
        } else {
            String::new()
        },
    );
    if r.leaps + r.exact_steps > 0 {
        out.insert_str(
            out.len() - 1,
            &format!("{} leaps and {} exact steps\n", r.leaps, r.exact_steps),
        );
    }
    let molar = molar_factor(net);
    let mut header = vec![
        "species",
        "final mean ± sd (molecules)",
        "95 % CI of mean",
        "time average ± sd (molecules)",
    ];
    if molar.is_some() {
        header.push("final mean (M)");
        header.push("time average (M)");
    }
    let mut t = Table::new(&header);
    for (i, sp) in net.species.iter().enumerate() {
        let mut row = vec![
            format!("{}{}", sp.name, if sp.clamped { " (clamped)" } else { "" }),
            pm(&r.final_state[i]),
            interval(r.final_state[i].ci95()),
            pm(&r.time_average[i]),
        ];
        if let Some(f) = molar {
            row.push(num(r.final_state[i].mean() * f));
            row.push(num(r.time_average[i].mean() * f));
        }
        t.row(row);
    }
    out.push_str(&t.render());
    out.push('\n');
    let mut t = Table::new(&["reaction", "firings in window (mean ± sd)", "rate (/s)"]);
    let len = r.window_length();
    for (j, rx) in net.reactions.iter().enumerate() {
        t.row(vec![
            rx.label.clone(),
            pm(&r.firings[j]),
            num(r.firings[j].mean() / len),
        ]);
    }
    out.push_str(&t.render());
    out
}

/// The grid as CSV (layout in the module docs).
pub fn csv(net: &Network, r: &EnsembleResult) -> String {
    let mut out = String::from("time_s");
    for s in &net.species {
        out.push_str(&format!(",{0}_mean,{0}_sd", s.name));
    }
    out.push('\n');
    for (p, &time) in r.grid_times.iter().enumerate() {
        out.push_str(&format!("{time}"));
        for w in &r.grid[p] {
            out.push_str(&format!(",{},{}", w.mean(), w.sd()));
        }
        out.push('\n');
    }
    out
}

/// A time course to draw: at each grid time, a level per species.
#[derive(Clone, Copy, Debug)]
pub enum Course<'a> {
    /// A replicate ensemble: the mean across replicates, with its SD as a band.
    Ensemble(&'a EnsembleResult),
    /// A deterministic time course (the ODE): `counts[p][i]` is species i at `times[p]`, in
    /// molecules; drawn as lines without bands.
    Deterministic {
        times: &'a [f64],
        counts: &'a [Vec<f64>],
    },
}

impl<'a> From<&'a EnsembleResult> for Course<'a> {
    fn from(r: &'a EnsembleResult) -> Course<'a> {
        Course::Ensemble(r)
    }
}

/// The species a time course shows unless told otherwise: every species that is not clamped.
pub fn default_species(net: &Network) -> Vec<usize> {
    (0..net.species.len())
        .filter(|&i| !net.species[i].clamped)
        .collect()
}

/// The unit a time axis reads best in for a run to `t_end` seconds: seconds up to 10 min,
/// minutes up to 10 h, hours beyond; with its length in seconds.
fn time_unit(t_end: f64) -> (&'static str, f64) {
    if t_end <= 600.0 {
        ("s", 1.0)
    } else if t_end <= 36_000.0 {
        ("min", 60.0)
    } else {
        ("h", 3600.0)
    }
}

/// The time course of `species` (indices into `net.species`, in the order given) as an SVG
/// chart: a line per species through its level at every grid time, in molecules, and for an
/// ensemble of two or more replicates a band of mean ± SD.
pub fn svg(net: &Network, course: Course, species: &[usize]) -> String {
    use super::plot::{AxisSpec, Chart, Dash, Interval, Point, Series};
    let (times, title, banded) = match course {
        Course::Ensemble(r) => {
            let n = r.spec.replicates;
            let what = if n >= 2 {
                format!("mean ± SD of {n} replicates")
            } else {
                "one trajectory".to_string()
            };
            let title = format!(
                "{}: time course, {what} ({})",
                net.file,
                r.spec.method.name()
            );
            (r.grid_times.as_slice(), title, n >= 2)
        }
        Course::Deterministic { times, .. } => (
            times,
            format!("{}: deterministic time course (ODE)", net.file),
            false,
        ),
    };
    let t_end = times.iter().copied().fold(0.0, f64::max);
    let (unit, per) = time_unit(t_end);
    let series = species
        .iter()
        .filter(|&&i| i < net.species.len())
        .map(|&i| {
            let points: Vec<Point> = times
                .iter()
                .enumerate()
                .map(|(p, &t)| match course {
                    Course::Ensemble(r) => {
                        let w = &r.grid[p][i];
                        let pt = Point::new(t / per, w.mean());
                        if banded {
                            pt.with_interval(w.mean() - w.sd(), w.mean() + w.sd())
                        } else {
                            pt
                        }
                    }
                    Course::Deterministic { counts, .. } => Point::new(
                        t / per,
                        counts
                            .get(p)
                            .and_then(|c| c.get(i))
                            .copied()
                            .unwrap_or(f64::NAN),
                    ),
                })
                .collect();
            let sp = &net.species[i];
            let clamped = if sp.clamped { ", clamped" } else { "" };
            let name = if banded {
                format!("{} (mean ± SD{clamped})", sp.name)
            } else if clamped.is_empty() {
                sp.name.clone()
            } else {
                format!("{} (clamped)", sp.name)
            };
            Series {
                line: Some(Dash::Solid),
                interval: if banded {
                    Interval::Band
                } else {
                    Interval::None
                },
                ..Series::new(name, points)
            }
        })
        .collect();
    let notes = if banded {
        vec!["bands: mean ± 1 SD across replicates at each grid time".to_string()]
    } else {
        Vec::new()
    };
    Chart {
        title,
        x: AxisSpec {
            label: format!("time ({unit})"),
            log: false,
            from_zero: true,
        },
        y: AxisSpec {
            label: "count (molecules)".into(),
            log: false,
            from_zero: true,
        },
        categories: Vec::new(),
        series,
        notes,
    }
    .render()
}

/// Adds the comparison with the exact law under `exact` (null, with `exact_note`, where the
/// network does not fit a finite state projection).
pub fn add_exact_json(
    doc: &mut Value,
    exact: &Result<crate::distribution::compare::ExactComparison, String>,
) {
    let obj = doc.as_object_mut().expect("an object");
    match exact {
        Ok(c) => {
            obj.insert("exact".into(), serde_json::to_value(c).expect("serialises"));
        }
        Err(note) => {
            obj.insert("exact".into(), Value::Null);
            obj.insert("exact_note".into(), Value::from(note.clone()));
        }
    }
}

/// The comparison with the exact law: per species the largest |Z| and |Y| over the grid and
/// how many points pass the suite's thresholds (|Z| ≥ 3, |Y| ≥ 5).
pub fn exact_table(
    exact: &Result<crate::distribution::compare::ExactComparison, String>,
) -> String {
    let c = match exact {
        Ok(c) => c,
        Err(note) => return format!("\nexact comparison unavailable: {note}\n"),
    };
    let mut out = format!(
        "\nagainst the exact distribution ({} states, error bound {}): \
         Z = √n(mean − μ)/σ, Y = √(n/2)(S²/σ² − 1) at each of {} grid times\n",
        c.states,
        num(c.truncation_error),
        c.times.len()
    );
    let mut t = Table::new(&["species", "max |Z|", "|Z| ≥ 3", "max |Y|", "|Y| ≥ 5"]);
    for (name, s) in &c.species.0 {
        t.row(vec![
            name.clone(),
            num(s.max_abs_z),
            s.z_outside_3.to_string(),
            num(s.max_abs_y),
            s.y_outside_5.to_string(),
        ]);
    }
    out.push_str(&t.render());
    out.push_str(
        "a correct simulator gives |Z| < 3 at nearly every point (about 1 in 370 by chance) and |Y| < 5\n",
    );
    out
}
