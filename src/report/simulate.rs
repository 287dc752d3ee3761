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
