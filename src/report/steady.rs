//! The report of `copyloop steady`.

use super::schema::Named;
use super::table::Table;
use super::units;
use super::{num, side};
use crate::deterministic::Steady;
use crate::network::law_text;
use crate::network::Network;
use schemars::JsonSchema;
use serde::Serialize;
use serde_json::Value;

/// A molar figure beside a count figure: `x/Ω_c` with `own` the Ω_c of the compartment it
/// refers to, or null without one.
fn molar(own: Option<f64>, x: f64) -> Option<f64> {
    own.map(|w| x / w)
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

/// The `--json` document of `steady` (docs/json.md).
#[derive(Serialize, JsonSchema)]
pub struct SteadyDocument {
    pub file: String,
    pub volume_l: Option<f64>,
    pub state: Named<Level>,
    pub fluxes: Named<Flux>,
    /// Species that only accumulate, with their rate.
    pub outputs: Named<Output>,
    /// max |dx/dt| at the reported state, molecules/s.
    pub residual: f64,
    pub residual_molar: Option<f64>,
    pub residual_relative: f64,
    pub stable: bool,
    pub stability: String,
    /// Eigenvalues of the Jacobian on the independent species.
    pub eigenvalues: Vec<Eigenvalue>,
    /// The species left after the conservation laws remove one each.
    pub independent: Vec<String>,
    pub conservation: Vec<ConservedTotal>,
    /// How the state was found.
    pub method: String,
    pub iterations: usize,
    pub integrated_time: f64,
    pub ode_steps: usize,
}

/// A species' steady level; null for one that only accumulates (its rate is in `outputs`).
#[derive(Serialize, JsonSchema)]
pub struct Level {
    pub count: Option<f64>,
    pub molar: Option<f64>,
    pub clamped: bool,
    pub accumulates: bool,
}

/// A reaction's steady flux.
#[derive(Serialize, JsonSchema)]
pub struct Flux {
    pub per_s: f64,
    pub molar_per_s: Option<f64>,
}

/// The rate at which a species that only accumulates grows.
#[derive(Serialize, JsonSchema)]
pub struct Output {
    pub rate_per_s: f64,
    pub rate_molar_per_s: Option<f64>,
    /// Always null here: `steady` runs no ensemble (the key is shared with `reconcile`).
    pub ensemble_rate_per_s: Option<f64>,
}

/// A complex number.
#[derive(Serialize, JsonSchema)]
pub struct Eigenvalue {
    pub re: f64,
    pub im: f64,
}

/// A conservation law {species: coefficient} and the total it keeps, in molecules.
#[derive(Serialize, JsonSchema)]
pub struct ConservedTotal {
    pub law: Named<i64>,
    pub total: f64,
    pub total_molar: Option<f64>,
}

/// The typed document of `steady`.
pub fn document(net: &Network, st: &Steady) -> SteadyDocument {
    let accumulates = |i: usize| st.outputs.iter().any(|o| o.species == i);
    let state = net
        .species
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let level = (!accumulates(i)).then_some(st.counts[i]);
            let entry = Level {
                count: level,
                molar: level.and_then(|c| molar(net.species_molar_omega(i), c)),
                clamped: s.clamped,
                accumulates: accumulates(i),
            };
            (s.name.clone(), entry)
        })
        .collect();
    let outputs = st
        .outputs
        .iter()
        .map(|o| {
            let out = Output {
                rate_per_s: o.rate_per_s,
                rate_molar_per_s: molar(net.species_molar_omega(o.species), o.rate_per_s),
                ensemble_rate_per_s: None,
            };
            (net.species[o.species].name.clone(), out)
        })
        .collect();
    let fluxes = net
        .reactions
        .iter()
        .enumerate()
        .map(|(j, r)| {
            let f = Flux {
                per_s: st.fluxes_per_s[j],
                molar_per_s: molar(net.reaction_molar_omega(j), st.fluxes_per_s[j]),
            };
            (r.label.clone(), f)
        })
        .collect();
    let conservation = net
        .conservation_laws
        .iter()
        .zip(&st.totals)
        .map(|(l, &t)| ConservedTotal {
            law: l
                .iter()
                .enumerate()
                .filter(|(_, &c)| c != 0)
                .map(|(i, &c)| (net.species[i].name.clone(), c))
                .collect(),
            total: t * net.omega,
            total_molar: molar(law_omega(net, l), t * net.omega),
        })
        .collect();
    SteadyDocument {
        file: net.file.clone(),
        volume_l: net.volume_l,
        state,
        fluxes,
        outputs,
        residual: st.residual.max_abs_per_s,
        residual_molar: molar(single(net), st.residual.max_abs_per_s),
        residual_relative: st.residual.relative,
        stable: st.stable(),
        stability: st.stability.as_str().to_string(),
        eigenvalues: st
            .eigenvalues
            .iter()
            .map(|z| Eigenvalue { re: z.re, im: z.im })
            .collect(),
        independent: st
            .independent
            .iter()
            .map(|&i| net.species[i].name.clone())
            .collect(),
        conservation,
        method: st.method.as_str().to_string(),
        iterations: st.iterations,
        integrated_time: st.integrated_time,
        ode_steps: st.ode_steps,
    }
}

/// The JSON document of docs/json.md for `steady`, with extras.
pub fn json(net: &Network, st: &Steady) -> Value {
    super::schema::to_value(&document(net, st))
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
