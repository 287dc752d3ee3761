//! The report of `copyloop reconcile`.

use super::num;
use super::plot::{AxisSpec, Chart, Datum, Interval, Marker, Series};
use super::table::Table;
use crate::network::Network;
use crate::reconcile::{Cause, CauseKind, Flux, Judgement, MotifReport, Reconciliation, Verdict};
use serde_json::Value;

/// The JSON document of `reconcile` (the result's own serialisation).
pub fn json(r: &Reconciliation) -> Value {
    serde_json::to_value(r).unwrap_or(Value::Null)
}

fn flux(f: &Flux) -> String {
    format!(
        "{} ± {}",
        num(f.mean_per_s),
        num((f.ci95[1] - f.ci95[0]) / 2.0)
    )
}

/// `agrees (+1.2 %)`, with a `*` when the difference is statistically significant.
fn judged(j: &Judgement) -> String {
    let d = if j.relative_difference.is_finite() {
        format!(
            " ({}{} %)",
            if j.relative_difference >= 0.0 {
                "+"
            } else {
                ""
            },
            num(100.0 * j.relative_difference)
        )
    } else {
        String::new()
    };
    let star = if j.significant { "*" } else { "" };
    format!("{}{d}{star}", j.verdict.as_str())
}

/// A cause in words, with its expected size.
fn cause_text(c: &Cause, m: &MotifReport) -> String {
    let e = 100.0 * c.expected_relative_error;
    let size = format!("{}{} %", if e >= 0.0 { "+" } else { "" }, num(e));
    match c.cause {
        CauseKind::LigandDepletion => format!(
            "ligand depletion: the Langmuir form counts all ligand as free, valid when \
             X_T/(L_T + K) ≪ 1 (Segel & Slemrod 1989); here it is {}, and the total-QSSA form, \
             which accounts for bound ligand, differs from it by {size}",
            num(m.qssa_parameter)
        ),
        CauseKind::LowCopyNumber => format!(
            "low copy number: fluctuations of the free ligand ({} molecules on average) shift \
             the mean of the saturating flux by about {size} (second-order estimate)",
            num(m.ligand_free)
        ),
        CauseKind::NotStationary => format!(
            "not stationary: the two halves of the window differ by {size} \
             ({} standard errors); lengthen --burn-in or --t-end",
            num(m.halves_z.abs())
        ),
        CauseKind::TooFewReplicates => format!(
            "too few replicates: the interval half-width is {size} of the mean, more than \
             --precision asked"
        ),
    }
}

/// The readable report.
pub fn table(net: &Network, r: &Reconciliation) -> String {
    let mut out = format!("{}: {} replicates\n", net.file, r.replicates);
    for line in super::noise::plan_lines(&r.plan) {
        out.push_str(&format!("  {line}\n"));
    }
    out.push('\n');
    if !r.motifs.is_empty() {
        out.push_str(&format!(
            "carrier motifs: output flux (molecules/s), ensemble mean ± 95 % half-width; each \
             prediction agrees when the 95 % interval of its relative difference lies within \
             ±{} % (* marks a statistically significant difference)\n",
            num(100.0 * r.tolerance)
        ));
        let mut t = Table::new(&[
            "motif",
            "kind",
            "K (molec.)",
            "L_T (molec.)",
            "capacity",
            "ensemble",
            "Langmuir",
            "verdict",
            "tQSSA",
            "verdict",
            "ODE",
            "verdict",
            "exact",
        ]);
        for m in &r.motifs {
            let v = &m.verdicts;
            t.row(vec![
                format!("{}·{} → {}", m.carrier, m.ligand, m.output),
                m.kind.as_str().into(),
                num(m.k_half),
                num(m.ligand_level),
                num(m.capacity_per_s),
                flux(&m.ensemble),
                num(m.predicted.langmuir_per_s),
                judged(&v.langmuir),
                m.predicted.tqssa_per_s.map_or("(clamped)".into(), num),
                v.tqssa.as_ref().map_or("-".into(), judged),
                num(m.predicted.ode_per_s),
                judged(&v.ode),
                m.exact.as_ref().map_or("-".into(), |e| num(e.mean_per_s)),
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
            let v = &m.verdicts;
            let named = [
                ("Langmuir", Some(&v.langmuir)),
                ("tQSSA", v.tqssa.as_ref()),
                ("ODE", Some(&v.ode)),
            ];
            for (what, j) in named {
                let Some(j) = j else { continue };
                if let (Verdict::Undecided, Some(n)) = (j.verdict, j.replicates_to_decide) {
                    out.push_str(&format!(
                        "  {}·{} {what}: undecided; about {n} replicates would decide it\n",
                        m.carrier, m.ligand
                    ));
                }
                for c in &j.causes {
                    out.push_str(&format!(
                        "  {}·{} {what}: {}\n",
                        m.carrier,
                        m.ligand,
                        cause_text(c, m)
                    ));
                }
            }
        }
        out.push('\n');
    } else {
        out.push_str("no carrier motif found: only observations are reconciled\n\n");
    }
    if !r.chains.is_empty() {
        out.push_str("motifs in series, end to end (last stage's flux, molecules/s)\n");
        let mut t = Table::new(&[
            "stages", "ensemble", "ODE", "verdict", "Langmuir", "verdict",
        ]);
        for c in &r.chains {
            t.row(vec![
                c.stages.join(" → "),
                flux(&c.ensemble),
                num(c.ode_per_s),
                judged(&c.verdicts.ode),
                num(c.langmuir_per_s),
                judged(&c.verdicts.langmuir),
            ]);
        }
        out.push_str(&t.render());
        out.push('\n');
    }
    if !r.outputs.is_empty() {
        out.push_str("species that only accumulate (molecules/s)\n");
        let mut t = Table::new(&["species", "deterministic", "ensemble"]);
        for o in &r.outputs {
            let ens = match (o.ensemble_rate_per_s, o.ensemble_rate_ci95) {
                (Some(m), Some(ci)) => format!("{} ± {}", num(m), num((ci[1] - ci[0]) / 2.0)),
                _ => "-".into(),
            };
            t.row(vec![o.name.clone(), num(o.rate_per_s), ens]);
        }
        out.push_str(&t.render());
        out.push('\n');
    }
    // Each species in its own compartment, in the unit the file declared it with.
    let with_volume = |i: usize| net.species_molar_omega(i).is_some();
    let shown = |i: usize, count: f64| match net.species_molar_omega(i) {
        Some(w) => super::units::species_unit(net, i).of(count / w),
        None => count,
    };
    let unit_of = |i: usize| {
        if with_volume(i) {
            super::units::species_unit(net, i).name
        } else {
            "molecules".to_string()
        }
    };
    if !r.observations.is_empty() {
        out.push_str("observed steady levels\n");
        let mut t = Table::new(&[
            "species",
            "unit",
            "observed",
            "deterministic",
            "ensemble",
            "z",
            "verdict",
        ]);
        for o in &r.observations {
            let i = o.observation.species;
            t.row(vec![
                o.name.clone(),
                unit_of(i),
                format!("{} ± {}", num(shown(i, o.observed)), num(shown(i, o.sd))),
                num(shown(i, o.deterministic)),
                format!(
                    "{} ± {}",
                    num(shown(i, o.ensemble.mean)),
                    num(shown(i, o.ensemble.half_width()))
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
                o.name
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
                let value = |x: f64| super::units::param_value(net, &f.param, x);
                let ci = f.ci95.map_or(
                    " (no 95 % interval: give the observation an SD, NAME=VALUE±SD)".to_string(),
                    |c| format!(", 95 % interval [{}, {}]", value(c[0]), value(c[1])),
                );
                out.push_str(&format!(
                    "fit: {} = {}{ci} (the file has {}) makes the deterministic level match\n",
                    f.param,
                    value(v),
                    value(f.original)
                ));
                if let Some(c) = &f.confirmation {
                    // The fit is to the first observation.
                    let i = r.observations.first().map_or(0, |o| o.observation.species);
                    out.push_str(&format!(
                        "  ensemble at the fitted value: {} ± {} {}, z = {}, {}\n",
                        num(shown(i, c.ensemble.mean)),
                        num(shown(i, c.ensemble.half_width())),
                        unit_of(i),
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
    out
}

/// Motif fluxes, one category per motif: the ensemble's mean with its 95 % interval as an
/// error bar, and the Langmuir, total-QSSA and ODE predictions as distinct markers beside it
/// (offset so that none hides another). The flux axis is logarithmic when the motifs' fluxes
/// span more than a factor of 30.
pub fn svg(net: &Network, r: &Reconciliation) -> String {
    let at = |k: usize, y: f64| Datum::new(k as f64, y);
    let ensemble: Vec<Datum> = r
        .motifs
        .iter()
        .enumerate()
        .map(|(k, m)| {
            at(k, m.ensemble.mean_per_s).with_interval(m.ensemble.ci95[0], m.ensemble.ci95[1])
        })
        .collect();
    let predicted = |f: &dyn Fn(&MotifReport) -> Option<f64>| -> Vec<Datum> {
        r.motifs
            .iter()
            .enumerate()
            .filter_map(|(k, m)| f(m).map(|y| at(k, y)))
            .collect()
    };
    let series = vec![
        Series {
            marker: Some(Marker::Circle),
            interval: Interval::Bars,
            offset: -0.24,
            ..Series::new("ensemble mean (95 % CI)", ensemble)
        },
        Series {
            marker: Some(Marker::Square),
            offset: -0.08,
            ..Series::new(
                "Langmuir form",
                predicted(&|m| Some(m.predicted.langmuir_per_s)),
            )
        },
        Series {
            marker: Some(Marker::Diamond),
            offset: 0.08,
            ..Series::new("total QSSA", predicted(&|m| m.predicted.tqssa_per_s))
        },
        Series {
            marker: Some(Marker::Triangle),
            offset: 0.24,
            ..Series::new(
                "ODE steady state",
                predicted(&|m| Some(m.predicted.ode_per_s)),
            )
        },
    ];
    let values: Vec<f64> = series
        .iter()
        .flat_map(|s| s.points.iter().map(|p| p.y))
        .filter(|y| y.is_finite())
        .collect();
    let (lo, hi) = values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &y| {
            (a.min(y), b.max(y))
        });
    let log = lo > 0.0 && hi / lo > 30.0;
    let mut notes = Vec::new();
    if r.motifs.iter().any(|m| m.predicted.tqssa_per_s.is_none()) {
        notes.push(
            "no total-QSSA marker where the ligand is clamped (it equals the Langmuir form)".into(),
        );
    }
    if r.motifs.is_empty() {
        notes.push("no carrier motif found".into());
    }
    Chart {
        title: format!("{}: motif output fluxes", net.file),
        x: AxisSpec {
            label: "carrier motif (carrier·ligand → output step)".into(),
            log: false,
            from_zero: false,
        },
        y: AxisSpec {
            label: format!(
                "output flux (molecules/s{})",
                if log { ", log scale" } else { "" }
            ),
            log,
            from_zero: false,
        },
        categories: r
            .motifs
            .iter()
            .map(|m| format!("{}·{} → {}", m.carrier, m.ligand, m.output))
            .collect(),
        series,
        notes,
    }
    .render()
}
