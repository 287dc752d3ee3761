//! The report of `copyloop reconcile`.

use super::svg::{Chart, Point, Series, Style};
use super::table::Table;
use super::{jnum, num};
use crate::network::Network;
use crate::reconcile::{Estimate, ObservationReport, Reconciliation};
use serde_json::{json, Map, Value};

fn interval(e: &Estimate, scale: f64) -> Value {
    json!([jnum(e.ci95[0] * scale), jnum(e.ci95[1] * scale)])
}

fn molar(net: &Network, x: f64) -> Value {
    net.volume_l.map_or(Value::Null, |_| jnum(x / net.omega))
}

fn sensitivity_map(o: &ObservationReport) -> Value {
    let mut m = Map::new();
    for (p, s) in &o.sensitivities {
        m.insert(p.clone(), jnum(*s));
    }
    Value::Object(m)
}

fn observation_json(net: &Network, o: &ObservationReport) -> Value {
    json!({
        "name": o.observation.name,
        "observed": jnum(o.observation.value),
        "sd": jnum(o.observation.sd),
        "deterministic": jnum(o.deterministic),
        "ensemble_mean": jnum(o.ensemble.mean),
        "ci95": interval(&o.ensemble, 1.0),
        "z": jnum(o.z),
        "verdict": o.verdict.as_str(),
        "observed_molar": molar(net, o.observation.value),
        "sd_molar": molar(net, o.observation.sd),
        "deterministic_molar": molar(net, o.deterministic),
        "ensemble_mean_molar": molar(net, o.ensemble.mean),
        "ci95_molar": net.volume_l.map_or(Value::Null, |_| interval(&o.ensemble, 1.0 / net.omega)),
        "sensitivities": sensitivity_map(o),
    })
}

/// The JSON document of CONTRACT §3 for `reconcile`.
pub fn json(net: &Network, r: &Reconciliation) -> Value {
    let motifs: Vec<Value> = r
        .motifs
        .iter()
        .map(|m| {
            json!({
                "carrier": m.carrier,
                "ligand": m.ligand,
                "kind": m.kind.as_str(),
                "output": m.output,
                "k_half": jnum(m.k_half),
                "k_half_molar": molar(net, m.k_half),
                "carrier_total": jnum(m.carrier_total),
                "capacity_per_s": jnum(m.capacity_per_s),
                "capacity_molar_per_s": molar(net, m.capacity_per_s),
                "ligand_level": jnum(m.ligand_level),
                "ligand_level_molar": molar(net, m.ligand_level),
                "ligand_clamped": m.ligand_clamped,
                "ligand_free": jnum(m.ligand_free),
                "predicted": {
                    "langmuir_per_s": jnum(m.langmuir_per_s),
                    "tqssa_per_s": m.tqssa_per_s.map(jnum),
                    "ode_per_s": jnum(m.ode_per_s),
                },
                "ensemble": {
                    "mean_per_s": jnum(m.ensemble.mean),
                    "stderr_per_s": jnum(m.ensemble.stderr),
                    "ci95": interval(&m.ensemble, 1.0),
                    "replicates": m.ensemble.n,
                },
                "exact": m.exact_per_s.map(|e| json!({
                    "mean_per_s": jnum(e),
                    "langmuir_relative_difference": jnum((e - m.langmuir_per_s) / m.langmuir_per_s),
                    "ensemble_relative_difference": jnum((m.ensemble.mean - e) / e),
                })),
                "relative_difference": jnum(m.relative_difference),
                "verdict": m.verdict.as_str(),
                "verdicts": {
                    "langmuir": m.verdict.as_str(),
                    "tqssa": m.tqssa_verdict.map(|v| v.as_str()),
                    "ode": m.ode_verdict.as_str(),
                },
                "qssa_parameter": jnum(m.qssa_parameter),
                "halves_z": jnum(m.halves_z),
                "causes": m.causes,
            })
        })
        .collect();
    let chains: Vec<Value> = r
        .chains
        .iter()
        .map(|c| {
            json!({
                "stages": c.stages.iter().map(|&s| net.species[net.motifs[s].carrier].name.clone()).collect::<Vec<_>>(),
                "ensemble": {"mean_per_s": jnum(c.ensemble.mean), "stderr_per_s": jnum(c.ensemble.stderr), "ci95": interval(&c.ensemble, 1.0)},
                "ode_per_s": jnum(c.ode_per_s),
                "langmuir_per_s": jnum(c.langmuir_per_s),
                "verdict": c.verdict.as_str(),
            })
        })
        .collect();
    let observations: Vec<Value> = r
        .observations
        .iter()
        .map(|o| observation_json(net, o))
        .collect();
    let sensitivities = r.observations.first().map_or(json!({}), sensitivity_map);
    let fit = r.fit.as_ref().map(|f| {
        json!({
            "param": f.param,
            "original": jnum(f.original),
            "value": f.value.map(jnum),
            "why": f.why,
            "confirmation": f.confirmation.as_ref().map(|o| observation_json(net, o)),
        })
    });
    json!({
        "file": net.file,
        "replicates": r.replicates,
        "seed": r.seed,
        "t_end": r.plan.t_end,
        "burn_in": r.plan.burn_in,
        "burn_in_found": r.plan.burn_in_found,
        "relaxation_time": jnum(r.plan.relaxation_time),
        "started_from": r.plan.started_from,
        "motifs": motifs,
        "chains": chains,
        "observations": observations,
        "sensitivities": sensitivities,
        "fit": fit,
        "events_total": r.events_total,
        "wall_seconds": r.wall_seconds,
        "notes": r.notes,
        "exact_truncation_error": r.exact_truncation_error,
        "exact_states": r.exact_states,
        "exact_note": r.exact_note,
    })
}

fn est(e: &Estimate) -> String {
    format!("{} ± {}", num(e.mean), num(e.half_width()))
}

/// The readable report.
pub fn table(net: &Network, r: &Reconciliation) -> String {
    let mut out = format!(
        "{}: {} replicates, window [{}, {}] s, started from the {}\n\n",
        net.file,
        r.replicates,
        num(r.plan.burn_in),
        num(r.plan.t_end),
        r.plan.started_from
    );
    if !r.motifs.is_empty() {
        out.push_str(
            "carrier motifs: output flux (molecules/s), ensemble mean ± 95 % half-width\n",
        );
        let mut t = Table::new(&[
            "motif",
            "kind",
            "K (molec.)",
            "L_T (molec.)",
            "capacity",
            "Langmuir",
            "tQSSA",
            "ODE",
            "ensemble",
            "exact",
            "verdict",
        ]);
        for m in &r.motifs {
            t.row(vec![
                format!("{}·{} → {}", m.carrier, m.ligand, m.output),
                m.kind.as_str().into(),
                num(m.k_half),
                num(m.ligand_level),
                num(m.capacity_per_s),
                num(m.langmuir_per_s),
                m.tqssa_per_s.map_or("(clamped)".into(), num),
                num(m.ode_per_s),
                est(&m.ensemble),
                m.exact_per_s.map_or("-".into(), num),
                format!(
                    "{} (tQSSA {}, ODE {})",
                    m.verdict.as_str(),
                    m.tqssa_verdict.map_or("-", |v| v.as_str()),
                    m.ode_verdict.as_str()
                ),
            ]);
        }
        out.push_str(&t.render());
        match (&r.exact_note, r.exact_states) {
            (Some(n), _) => out.push_str(&format!("  exact column unavailable: {n}\n")),
            (None, Some(states)) => out.push_str(&format!(
                "  exact: stationary master equation on {states} states (finite state projection, boundary probability {})\n",
                num(r.exact_truncation_error.unwrap_or(0.0))
            )),
            _ => {}
        }
        for m in &r.motifs {
            for c in &m.causes {
                out.push_str(&format!("  {}·{}: {c}\n", m.carrier, m.ligand));
            }
        }
        out.push('\n');
    }
    if !r.chains.is_empty() {
        out.push_str("motifs in series, end to end (last stage's flux, molecules/s)\n");
        let mut t = Table::new(&["stages", "ODE", "Langmuir", "ensemble", "verdict"]);
        for c in &r.chains {
            let names: Vec<String> = c
                .stages
                .iter()
                .map(|&s| net.species[net.motifs[s].carrier].name.clone())
                .collect();
            t.row(vec![
                names.join(" → "),
                num(c.ode_per_s),
                num(c.langmuir_per_s),
                est(&c.ensemble),
                c.verdict.as_str().into(),
            ]);
        }
        out.push_str(&t.render());
        out.push('\n');
    }
    let unit = if net.volume_l.is_some() {
        "M"
    } else {
        "molecules"
    };
    let scale = if net.volume_l.is_some() {
        1.0 / net.omega
    } else {
        1.0
    };
    if !r.observations.is_empty() {
        out.push_str(&format!("observed steady levels ({unit})\n"));
        let mut t = Table::new(&[
            "species",
            "observed",
            "deterministic",
            "ensemble",
            "z",
            "verdict",
        ]);
        for o in &r.observations {
            t.row(vec![
                o.observation.name.clone(),
                format!(
                    "{} ± {}",
                    num(o.observation.value * scale),
                    num(o.observation.sd * scale)
                ),
                num(o.deterministic * scale),
                format!(
                    "{} ± {}",
                    num(o.ensemble.mean * scale),
                    num(o.ensemble.half_width() * scale)
                ),
                num(o.z),
                o.verdict.as_str().into(),
            ]);
        }
        out.push_str(&t.render());
        for o in &r.observations {
            let mut s = o.sensitivities.clone();
            s.sort_by(|a, b| {
                b.1.abs()
                    .partial_cmp(&a.1.abs())
                    .unwrap_or(std::cmp::Ordering::Equal)
            });
            out.push_str(&format!(
                "\n  which constant matters for {}: d ln(level)/d ln(param)\n",
                o.observation.name
            ));
            let mut t = Table::new(&["param", "sensitivity"]);
            for (p, v) in s {
                t.row(vec![p, num(v)]);
            }
            out.push_str(&t.render());
        }
        out.push('\n');
    }
    if let Some(f) = &r.fit {
        match (f.value, &f.why) {
            (Some(v), _) => {
                out.push_str(&format!(
                    "fit: {} = {} (canonical units; the file has {}) makes the deterministic level match\n",
                    f.param,
                    num(v),
                    num(f.original)
                ));
                if let Some(c) = &f.confirmation {
                    out.push_str(&format!(
                        "  ensemble at the fitted value: {} ± {} {unit}, z = {}, {}\n",
                        num(c.ensemble.mean * scale),
                        num(c.ensemble.half_width() * scale),
                        num(c.z),
                        c.verdict.as_str()
                    ));
                }
            }
            (None, Some(why)) => out.push_str(&format!("fit: {why}\n")),
            (None, None) => {}
        }
        out.push('\n');
    }
    for n in &r.notes {
        out.push_str(&format!("note: {n}\n"));
    }
    out
}

/// Predicted against ensemble flux, one position per motif, as an SVG chart.
pub fn svg(net: &Network, r: &Reconciliation) -> String {
    let point = |k: usize, y: f64, iv: Option<(f64, f64)>| Point {
        x: k as f64,
        y,
        interval: iv,
    };
    let mut series = vec![Series {
        name: "ensemble (95 % CI)".into(),
        style: Style::Markers,
        points: r
            .motifs
            .iter()
            .enumerate()
            .map(|(k, m)| {
                point(
                    k,
                    m.ensemble.mean,
                    Some((m.ensemble.ci95[0], m.ensemble.ci95[1])),
                )
            })
            .collect(),
    }];
    let mut add = |name: &str, f: &dyn Fn(&crate::reconcile::MotifReport) -> Option<f64>| {
        series.push(Series {
            name: name.into(),
            style: Style::Markers,
            points: r
                .motifs
                .iter()
                .enumerate()
                .filter_map(|(k, m)| f(m).map(|y| point(k, y, None)))
                .collect(),
        })
    };
    add("Langmuir", &|m| Some(m.langmuir_per_s));
    add("total QSSA", &|m| m.tqssa_per_s);
    add("ODE steady state", &|m| Some(m.ode_per_s));
    Chart {
        title: format!("{}: motif fluxes", net.file),
        x_label: "carrier motif".into(),
        y_label: "flux (molecules/s)".into(),
        x_log: false,
        y_log: false,
        series,
        x_categories: r
            .motifs
            .iter()
            .map(|m| format!("{}·{}", m.carrier, m.ligand))
            .collect(),
    }
    .render()
}
