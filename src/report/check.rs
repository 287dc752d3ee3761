//! The report of `copyloop check`.

use super::schema::Named;
use super::table::Table;
use super::{num, side};
use crate::network::{law_text, Network};
use schemars::JsonSchema;
use serde::Serialize;
use serde_json::Value;

/// The `--json` document of `check` (docs/json.md): the compiled network as programs read it.
#[derive(Serialize, JsonSchema)]
pub struct CheckDocument {
    pub file: String,
    /// Volume of the only compartment in litres, or null.
    pub volume_l: Option<f64>,
    /// Ω = N_A·V in molecules per mol/L, or null without a volume.
    pub omega: Option<f64>,
    pub amount_unit: String,
    pub compartments: Vec<CompartmentEntry>,
    pub species: Vec<SpeciesEntry>,
    pub reactions: Vec<ReactionEntry>,
    /// Rows are species in `species` order, columns reactions in `reactions` order.
    pub stoichiometry: Vec<Vec<i64>>,
    /// Each law as {species: coefficient}; Σ coefficient·count is constant.
    pub conservation_laws: Vec<Named<i64>>,
    pub motifs: Vec<MotifEntry>,
    pub doses: Vec<DoseEntry>,
    pub infusions: Vec<InfusionEntry>,
    pub events: Vec<EventEntry>,
    pub warnings: Vec<WarningEntry>,
}

/// A compartment: its volume and Ω_c = N_A·V_c.
#[derive(Serialize, JsonSchema)]
pub struct CompartmentEntry {
    pub name: String,
    pub volume_l: Option<f64>,
    pub omega: f64,
}

/// A species as compiled: its initial molecule count.
#[derive(Serialize, JsonSchema)]
pub struct SpeciesEntry {
    pub name: String,
    pub initial_count: i64,
    pub clamped: bool,
    pub compartment: Option<String>,
}

/// A reaction: sides, order and its stochastic constant c (molecules, s).
#[derive(Serialize, JsonSchema)]
pub struct ReactionEntry {
    pub label: String,
    pub reactants: Named<u32>,
    pub products: Named<u32>,
    pub order: u32,
    /// c in molecules and seconds; null for a `law`.
    pub stochastic_constant: Option<f64>,
    pub compartment: Option<String>,
    pub transport: bool,
    /// The law's text, for a reaction whose rate is a `law`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub law: Option<String>,
    /// The param a mass-action constant follows, where events change it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub follows: Option<String>,
}

/// A carrier motif found in the network (an enzyme or a receptor).
#[derive(Serialize, JsonSchema)]
pub struct MotifEntry {
    /// `enzyme` or `receptor`.
    pub kind: String,
    pub carrier: String,
    pub ligand: String,
    pub complex: String,
    pub bind: String,
    pub unbind: Option<String>,
    /// K = (k_off + k_cat)/k_on in molecules.
    pub k_half: f64,
    pub k_half_molar: Option<f64>,
    pub compartment: Option<String>,
    /// The enzyme's catalytic step.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub turnover: Option<String>,
    /// The receptor's signalling step.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub signal: Option<String>,
}

/// A dose: a jump of molecules at one or more times.
#[derive(Serialize, JsonSchema)]
pub struct DoseEntry {
    pub species: String,
    pub molecules: i64,
    pub first_s: f64,
    pub period_s: Option<f64>,
    pub count: u64,
    pub last_s: f64,
    pub line: u32,
}

/// An infusion: a constant inflow over a time window.
#[derive(Serialize, JsonSchema)]
pub struct InfusionEntry {
    pub species: String,
    pub reaction: String,
    pub molecules_per_s: f64,
    pub from_s: f64,
    pub to_s: f64,
    pub line: u32,
}

/// An event: a trigger and the assignments it makes.
#[derive(Serialize, JsonSchema)]
pub struct EventEntry {
    pub label: String,
    pub condition: String,
    pub at_start: bool,
    pub reads_state: bool,
    pub assignments: Vec<AssignmentEntry>,
    pub line: u32,
}

/// One assignment of an event: `target op value`.
#[derive(Serialize, JsonSchema)]
pub struct AssignmentEntry {
    pub target: String,
    /// `=` or `+=`.
    pub op: String,
    pub value: String,
}

/// A warning of the compiler with its position in the file.
#[derive(Serialize, JsonSchema)]
pub struct WarningEntry {
    pub line: u32,
    pub column: u32,
    pub message: String,
}

fn coefficients(net: &Network, terms: &[(usize, u32)]) -> Named<u32> {
    terms
        .iter()
        .map(|&(i, n)| (net.species[i].name.clone(), n))
        .collect()
}

fn compartment_of(net: &Network, c: Option<usize>) -> Option<String> {
    c.map(|c| net.compartments[c].name.clone())
}

/// `time ≥ T`-style text of a time sequence: "at 3600 s, every 86400 s, 7 times".
fn schedule_text(d: &crate::network::Dose) -> String {
    match d.times.period {
        Some(p) => format!(
            "at {} s, every {} s, {} times",
            num(d.times.start),
            num(p),
            d.times.count
        ),
        None => format!("at {} s", num(d.times.start)),
    }
}

fn event_entry(net: &Network, e: &crate::network::Event) -> EventEntry {
    let assignments = e
        .assignments
        .iter()
        .map(|a| AssignmentEntry {
            target: match a.target {
                crate::network::Target::Species(i) => net.species[i].name.clone(),
                crate::network::Target::Param(p) => net.params[p].name.clone(),
            },
            op: if a.add { "+=" } else { "=" }.to_string(),
            value: a.value.text.clone(),
        })
        .collect();
    EventEntry {
        label: e.label.clone(),
        condition: e.trigger.text.clone(),
        at_start: !e.initial_value,
        reads_state: e.reads_state(),
        assignments,
        line: e.span.line,
    }
}

/// The typed document of `check`.
pub fn document(net: &Network) -> CheckDocument {
    use crate::network::{Kinetics, MotifKind};
    let reactions = net
        .reactions
        .iter()
        .map(|r| ReactionEntry {
            label: r.label.clone(),
            reactants: coefficients(net, &r.reactants),
            products: coefficients(net, &r.products),
            order: r.order(),
            stochastic_constant: r.stochastic_constant(),
            compartment: compartment_of(net, r.compartment),
            transport: r.transport,
            law: match &r.kinetics {
                Kinetics::Law { law, .. } => Some(law.text.clone()),
                _ => None,
            },
            follows: match &r.kinetics {
                Kinetics::MassAction {
                    follows: Some(f), ..
                } => Some(net.params[f.param].name.clone()),
                _ => None,
            },
        })
        .collect();
    let motifs = net
        .motifs
        .iter()
        .map(|m| {
            let output = Some(net.reactions[m.output].label.clone());
            let enzyme = matches!(m.kind, MotifKind::Enzyme);
            MotifEntry {
                kind: m.kind.as_str().to_string(),
                carrier: net.species[m.carrier].name.clone(),
                ligand: net.species[m.ligand].name.clone(),
                complex: net.species[m.complex].name.clone(),
                bind: net.reactions[m.bind].label.clone(),
                unbind: m.unbind.map(|j| net.reactions[j].label.clone()),
                k_half: m.k_half,
                k_half_molar: net.volume_l.map(|_| m.k_half / net.reaction_omega(m.bind)),
                compartment: compartment_of(net, net.reactions[m.bind].compartment),
                turnover: if enzyme { output.clone() } else { None },
                signal: if enzyme { None } else { output },
            }
        })
        .collect();
    CheckDocument {
        file: net.file.clone(),
        volume_l: net.volume_l,
        omega: net.volume_l.map(|_| net.omega),
        amount_unit: net.amount.name.to_string(),
        compartments: net
            .compartments
            .iter()
            .map(|c| CompartmentEntry {
                name: c.name.clone(),
                volume_l: c.volume_l,
                omega: c.omega,
            })
            .collect(),
        species: net
            .species
            .iter()
            .map(|s| SpeciesEntry {
                name: s.name.clone(),
                initial_count: s.initial,
                clamped: s.clamped,
                compartment: compartment_of(net, s.compartment),
            })
            .collect(),
        reactions,
        stoichiometry: (0..net.species.len())
            .map(|i| net.stoichiometry.dense_row(i))
            .collect(),
        conservation_laws: net
            .conservation_laws
            .iter()
            .map(|l| {
                l.iter()
                    .enumerate()
                    .filter(|(_, &c)| c != 0)
                    .map(|(i, &c)| (net.species[i].name.clone(), c))
                    .collect()
            })
            .collect(),
        motifs,
        doses: net
            .doses
            .iter()
            .map(|d| DoseEntry {
                species: net.species[d.species].name.clone(),
                molecules: d.count,
                first_s: d.times.start,
                period_s: d.times.period,
                count: d.times.count,
                last_s: d.times.last(),
                line: d.span.line,
            })
            .collect(),
        infusions: net
            .infusions
            .iter()
            .map(|f| InfusionEntry {
                species: net.species[f.species].name.clone(),
                reaction: net.reactions[f.reaction].label.clone(),
                molecules_per_s: f.rate,
                from_s: f.from,
                to_s: f.to,
                line: f.span.line,
            })
            .collect(),
        events: net.events.iter().map(|e| event_entry(net, e)).collect(),
        warnings: net
            .warnings
            .iter()
            .map(|w| WarningEntry {
                line: w.span.line,
                column: w.span.col,
                message: w.message.clone(),
            })
            .collect(),
    }
}

/// The JSON document of docs/json.md for `check`.
pub fn json(net: &Network) -> Value {
    super::schema::to_value(&document(net))
}

/// The readable report of `check`.
pub fn table(net: &Network) -> String {
    let mut out = String::new();
    match net.volume_l {
        Some(v) if net.compartments.len() == 1 => out.push_str(&format!(
            "{}: volume {} L, Ω = N_A·V = {} molecules per mol/L\n\n",
            net.file,
            num(v),
            num(net.omega)
        )),
        Some(_) => {
            out.push_str(&format!(
                "{}: {} compartments\n",
                net.file,
                net.compartments.len()
            ));
            let mut t = Table::new(&[
                "compartment",
                "volume (L)",
                "Ω = N_A·V (molecules per mol/L)",
            ]);
            for c in &net.compartments {
                t.row(vec![
                    c.name.clone(),
                    c.volume_l.map_or("-".into(), num),
                    num(c.omega),
                ]);
            }
            out.push_str(&t.render());
            out.push('\n');
        }
        None => out.push_str(&format!(
            "{}: no volume; every amount is in molecules, every rate in molecules/s\n\n",
            net.file
        )),
    }
    let several = net.compartments.len() > 1;
    let mut head = vec!["species", "initial (molecules)", "initial", "held"];
    if several {
        head.push("compartment");
    }
    let mut t = Table::new(&head);
    for (i, s) in net.species.iter().enumerate() {
        let mut row = vec![
            s.name.clone(),
            s.initial.to_string(),
            net.concentration_factor(i).map_or("-".into(), |f| {
                super::units::level(net, i, s.initial as f64 * f)
            }),
            if s.clamped {
                "clamped".into()
            } else {
                String::new()
            },
        ];
        if several {
            row.push(
                s.compartment
                    .map_or("-".into(), |c| net.compartments[c].name.clone()),
            );
        }
        t.row(row);
    }
    out.push_str(&t.render());
    out.push('\n');
    let mut t = Table::new(&["reaction", "step", "order", "c (molecules, s)", "rate"]);
    for r in &net.reactions {
        let rate = match &r.kinetics {
            crate::network::Kinetics::MassAction { k, .. } => {
                if net.volume_l.is_some() {
                    format!(
                        "k = {} {}",
                        num(*k),
                        super::units::mass_action_unit(r.order())
                    )
                } else {
                    "mass action".into()
                }
            }
            crate::network::Kinetics::Law { law, .. } => format!("law {}", law.text),
        };
        let rate = match &r.kinetics {
            crate::network::Kinetics::MassAction {
                follows: Some(f), ..
            } => format!("{rate}, follows `{}`", net.params[f.param].name),
            _ => rate,
        };
        let rate = if r.transport {
            format!("{rate}, transport")
        } else {
            rate
        };
        t.row(vec![
            r.label.clone(),
            format!("{} -> {}", side(net, &r.reactants), side(net, &r.products)),
            r.order().to_string(),
            r.stochastic_constant().map_or("-".into(), num),
            rate,
        ]);
    }
    out.push_str(&t.render());
    out.push_str("\nstoichiometry (rows: species, columns: reactions)\n");
    let mut head: Vec<&str> = vec![""];
    head.extend(net.reactions.iter().map(|r| r.label.as_str()));
    let mut t = Table::new(&head);
    for (i, s) in net.species.iter().enumerate() {
        let mut row = vec![s.name.clone()];
        row.extend(net.stoichiometry.dense_row(i).iter().map(|x| x.to_string()));
        t.row(row);
    }
    out.push_str(&t.render());
    out.push_str("\nconservation laws\n");
    if net.conservation_laws.is_empty() {
        out.push_str("  none\n");
    }
    let x0 = net.initial_state();
    for l in &net.conservation_laws {
        let total: i64 = l.iter().zip(&x0).map(|(a, b)| a * b).sum();
        out.push_str(&format!("  {} = {total}\n", law_text(net, l)));
    }
    out.push_str("\ncarrier motifs\n");
    if net.motifs.is_empty() {
        out.push_str("  none found\n");
    } else {
        let mut t = Table::new(&[
            "kind",
            "carrier",
            "ligand",
            "complex",
            "steps",
            "K (molecules)",
            "K",
        ]);
        for m in &net.motifs {
            let label = |j: usize| net.reactions[j].label.clone();
            let mut steps = vec![label(m.bind)];
            steps.extend(m.unbind.map(label));
            steps.push(label(m.output));
            t.row(vec![
                m.kind.as_str().into(),
                net.species[m.carrier].name.clone(),
                net.species[m.ligand].name.clone(),
                net.species[m.complex].name.clone(),
                steps.join(", "),
                num(m.k_half),
                net.volume_l.map_or("-".into(), |_| {
                    super::units::level(net, m.ligand, m.k_half / net.reaction_omega(m.bind))
                }),
            ]);
        }
        out.push_str(&t.render());
    }
    if !net.doses.is_empty() {
        out.push_str("\ndoses\n");
        for d in &net.doses {
            out.push_str(&format!(
                "  {} += {} molecules {} (line {})\n",
                net.species[d.species].name,
                d.count,
                schedule_text(d),
                d.span.line
            ));
        }
    }
    if !net.infusions.is_empty() {
        out.push_str("\ninfusions\n");
        for f in &net.infusions {
            out.push_str(&format!(
                "  {} at {} molecules/s from {} s to {} s, as step `{}` (line {})\n",
                net.species[f.species].name,
                num(f.rate),
                num(f.from),
                num(f.to),
                net.reactions[f.reaction].label,
                f.span.line
            ));
        }
    }
    if !net.events.is_empty() {
        out.push_str("\nevents\n");
        for e in &net.events {
            let sets: Vec<String> = e
                .assignments
                .iter()
                .map(|a| {
                    let target = match a.target {
                        crate::network::Target::Species(i) => &net.species[i].name,
                        crate::network::Target::Param(p) => &net.params[p].name,
                    };
                    format!(
                        "{target} {} {}",
                        if a.add { "+=" } else { "=" },
                        a.value.text
                    )
                })
                .collect();
            out.push_str(&format!(
                "  {}: when {} : {}{} (line {})\n",
                e.label,
                e.trigger.text,
                sets.join(", "),
                if e.initial_value { "" } else { " at start" },
                e.span.line
            ));
        }
    }
    if !net.warnings.is_empty() {
        out.push_str(&format!("\n{} warning(s) on stderr\n", net.warnings.len()));
    }
    out
}
