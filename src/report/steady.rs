//! The report of `copyloop steady`.

use super::table::Table;
use super::units;
use super::{jnum, num, side};
use crate::deterministic::Steady;
use crate::network::law_text;
use crate::network::Network;
use serde_json::{json, Map, Value};

/// A molar figure beside a count figure: `x/Ω_c` with `own` the Ω_c of the compartment it
/// refers to, or null without one.
fn molar(own: Option<f64>, x: f64) -> Value {
    own.map_or(Value::Null, |w| jnum(x / w))
}

/// Ω of the only compartment, for figures of no one species or step (totals, residual).
fn single(net: &Network) -> Option<f64> {
    (net.compartments.len() == 1).then(|| net.compartments[0].omega)
}

/// Ω_c of the one compartment every species of conservation law `l` sits in, if they share
/// one (a total over several compartments has no single concentration).
fn law_omega(net: &Network, l: &[i64]) -> Option<f64> {
    let mut own = l
        .iter()
        .enumerate()
        .filter(|(_, &c)| c != 0)
        .map(|(i, _)| net.species[i].compartment);
    let first = own.next()??;
    own.all(|c| c == Some(first))
        .then(|| net.compartments[first].omega)
}

fn eigen_text(z: &nalgebra::Complex<f64>) -> String {
    if z.im == 0.0 {
        num(z.re)
    } else {
        let sign = if z.im < 0.0 { "-" } else { "+" };
        format!("{} {sign} {}i", num(z.re), num(z.im.abs()))
    }
}

/// The JSON document of docs/json.md for `steady`, with extras.
pub fn json(net: &Network, st: &Steady) -> Value {
    let mut state = Map::new();
    let accumulates = |i: usize| st.outputs.iter().any(|o| o.species == i);
    for (i, s) in net.species.iter().enumerate() {
        // A species that only accumulates has no steady level: its rate is under `outputs`.
        let count = if accumulates(i) {
            Value::Null
        } else {
            jnum(st.counts[i])
        };
        let molar_count = if accumulates(i) {
            Value::Null
        } else {
            molar(net.species_molar_omega(i), st.counts[i])
        };
        state.insert(
            s.name.clone(),
            json!({
                "count": count,
                "molar": molar_count,
                "clamped": s.clamped,
                "accumulates": accumulates(i),
            }),
        );
    }
    let mut outputs = Map::new();
    for o in &st.outputs {
        outputs.insert(
            net.species[o.species].name.clone(),
            json!({
                "rate_per_s": jnum(o.rate_per_s),
                "rate_molar_per_s": molar(net.species_molar_omega(o.species), o.rate_per_s),
                "ensemble_rate_per_s": Value::Null,
            }),
        );
    }
    let mut fluxes = Map::new();
    for (j, r) in net.reactions.iter().enumerate() {
        fluxes.insert(
            r.label.clone(),
            json!({
                "per_s": jnum(st.fluxes_per_s[j]),
                "molar_per_s": molar(net.reaction_molar_omega(j), st.fluxes_per_s[j]),
            }),
        );
    }
    let conservation: Vec<Value> = net
        .conservation_laws
        .iter()
        .zip(&st.totals)
        .map(|(l, &t)| {
            let mut m = Map::new();
            for (i, &c) in l.iter().enumerate().filter(|(_, &c)| c != 0) {
                m.insert(net.species[i].name.clone(), json!(c));
            }
            json!({
                "law": Value::Object(m),
                "total": jnum(t * net.omega),
                "total_molar": molar(law_omega(net, l), t * net.omega),
            })
        })
        .collect();
    let eigenvalues: Vec<Value> = st
        .eigenvalues
        .iter()
        .map(|z| json!({"re": jnum(z.re), "im": jnum(z.im)}))
        .collect();
    json!({
        "file": net.file,
        "volume_l": net.volume_l,
        "state": state,
        "fluxes": fluxes,
        "outputs": outputs,
        "residual": jnum(st.residual.max_abs_per_s),
        "residual_molar": molar(single(net), st.residual.max_abs_per_s),
        "residual_relative": jnum(st.residual.relative),
        "stable": st.stable(),
        "stability": st.stability.as_str(),
        "eigenvalues": eigenvalues,
        "independent": st.independent.iter().map(|&i| net.species[i].name.clone()).collect::<Vec<_>>(),
        "conservation": conservation,
        "method": st.method.as_str(),
        "iterations": st.iterations,
        "integrated_time": jnum(st.integrated_time),
        "ode_steps": st.ode_steps,
    })
}

/// The readable report of `steady`.
pub fn table(net: &Network, st: &Steady) -> String {
    let mut out = format!(
        "{}: deterministic steady state ({})\n\n",
        net.file,
        st.method.as_str()
    );
    let with_volume = net.volume_l.is_some();
    let mut head = vec!["species", "molecules"];
    if with_volume {
        head.push("concentration");
    }
    head.push("held");
    let mut t = Table::new(&head);
    for (i, s) in net.species.iter().enumerate() {
        if let Some(o) = st.outputs.iter().find(|o| o.species == i) {
            let mut row = vec![s.name.clone(), format!("+{}/s", num(o.rate_per_s))];
            if with_volume {
                row.push(format!("+{}/s", units::level(net, i, o.rate)));
            }
            row.push("accumulates".into());
            t.row(row);
            continue;
        }
        let mut row = vec![s.name.clone(), num(st.counts[i])];
        if with_volume {
            row.push(
                net.species_molar_omega(i)
                    .map_or("-".into(), |w| units::level(net, i, st.counts[i] / w)),
            );
        }
        row.push(if s.clamped {
            "clamped".into()
        } else {
            String::new()
        });
        t.row(row);
    }
    out.push_str(&t.render());
    if !st.outputs.is_empty() {
        out.push_str(
            "(a species that nothing consumes or reads only accumulates: the steady state is that of the rest, and its rate is shown)\n",
        );
    }
    out.push('\n');
    let mut head = vec!["reaction", "step", "flux (molecules/s)"];
    if with_volume {
        head.push("flux (concentration/s)");
    }
    let mut t = Table::new(&head);
    for (j, r) in net.reactions.iter().enumerate() {
        let mut row = vec![
            r.label.clone(),
            format!("{} -> {}", side(net, &r.reactants), side(net, &r.products)),
            num(st.fluxes_per_s[j]),
        ];
        if with_volume {
            row.push(net.reaction_molar_omega(j).map_or("-".into(), |w| {
                format!(
                    "{}/s",
                    units::reaction_level(net, j, st.fluxes_per_s[j] / w)
                )
            }));
        }
        t.row(row);
    }
    out.push_str(&t.render());
    if !net.conservation_laws.is_empty() {
        out.push_str("\nconserved totals\n");
        for (l, &total) in net.conservation_laws.iter().zip(&st.totals) {
            let molar = match law_omega(net, l) {
                Some(w) => {
                    let i = l.iter().position(|&c| c != 0).unwrap_or(0);
                    format!(" ({})", units::level(net, i, total * net.omega / w))
                }
                None => String::new(),
            };
            out.push_str(&format!(
                "  {} = {} molecules{molar}\n",
                law_text(net, l),
                num(total * net.omega)
            ));
        }
    }
    out.push_str(&format!(
        "\nresidual: max |dx/dt| = {} molecules/s (relative {})\n",
        num(st.residual.max_abs_per_s),
        num(st.residual.relative)
    ));
    let ev: Vec<String> = st.eigenvalues.iter().map(eigen_text).collect();
    out.push_str(&format!(
        "stability: {}; eigenvalues of the reduced Jacobian (1/s): {}\n",
        st.stability.as_str(),
        if ev.is_empty() {
            "none".to_string()
        } else {
            ev.join(", ")
        }
    ));
    out
}
