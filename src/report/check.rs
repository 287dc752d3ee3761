//! The report of `copyloop check`.

use super::table::Table;
use super::{jnum, num, side};
use crate::network::{law_text, Network};
use serde_json::{json, Map, Value};

fn coefficients(net: &Network, terms: &[(usize, u32)]) -> Value {
    let mut m = Map::new();
    for &(i, n) in terms {
        m.insert(net.species[i].name.clone(), json!(n));
    }
    Value::Object(m)
}

fn compartment_of(net: &Network, c: Option<usize>) -> Value {
    json!(c.map(|c| net.compartments[c].name.clone()))
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

fn event_json(net: &Network, e: &crate::network::Event) -> Value {
    let assignments: Vec<Value> = e
        .assignments
        .iter()
        .map(|a| {
            let target = match a.target {
                crate::network::Target::Species(i) => net.species[i].name.clone(),
                crate::network::Target::Param(p) => net.params[p].name.clone(),
            };
            json!({"target": target, "op": if a.add { "+=" } else { "=" }, "value": a.value.text})
        })
        .collect();
    json!({
        "label": e.label,
        "condition": e.trigger.text,
        "at_start": !e.initial_value,
        "reads_state": e.reads_state(),
        "assignments": assignments,
        "line": e.span.line,
    })
}

/// The JSON document of docs/json.md for `check`.
pub fn json(net: &Network) -> Value {
    let species: Vec<Value> = net
        .species
        .iter()
        .map(|s| {
            json!({
                "name": s.name,
                "initial_count": s.initial,
                "clamped": s.clamped,
                "compartment": compartment_of(net, s.compartment),
            })
        })
        .collect();
    let compartments: Vec<Value> = net
        .compartments
        .iter()
        .map(|c| json!({"name": c.name, "volume_l": c.volume_l, "omega": jnum(c.omega)}))
        .collect();
    let doses: Vec<Value> = net
        .doses
        .iter()
        .map(|d| {
            json!({
                "species": net.species[d.species].name,
                "molecules": d.count,
                "first_s": jnum(d.times.start),
                "period_s": d.times.period.map(jnum),
                "count": d.times.count,
                "last_s": jnum(d.times.last()),
                "line": d.span.line,
            })
        })
        .collect();
    let infusions: Vec<Value> = net
        .infusions
        .iter()
        .map(|f| {
            json!({
                "species": net.species[f.species].name,
                "reaction": net.reactions[f.reaction].label,
                "molecules_per_s": jnum(f.rate),
                "from_s": jnum(f.from),
                "to_s": jnum(f.to),
                "line": f.span.line,
            })
        })
        .collect();
    let events: Vec<Value> = net.events.iter().map(|e| event_json(net, e)).collect();
    let reactions: Vec<Value> = net
        .reactions
        .iter()
        .map(|r| {
            let mut v = json!({
                "label": r.label,
                "reactants": coefficients(net, &r.reactants),
                "products": coefficients(net, &r.products),
                "order": r.order(),
                "stochastic_constant": r.stochastic_constant().map(jnum),
                "compartment": compartment_of(net, r.compartment),
                "transport": r.transport,
            });
            match &r.kinetics {
                crate::network::Kinetics::Law { law, .. } => v["law"] = json!(law.text),
                crate::network::Kinetics::MassAction {
                    follows: Some(f), ..
                } => v["follows"] = json!(net.params[f.param].name),
                _ => {}
            }
            v
        })
        .collect();
    let laws: Vec<Value> = net
        .conservation_laws
        .iter()
        .map(|l| {
            let mut m = Map::new();
            for (i, &c) in l.iter().enumerate().filter(|(_, &c)| c != 0) {
                m.insert(net.species[i].name.clone(), json!(c));
            }
            Value::Object(m)
        })
        .collect();
    let motifs: Vec<Value> = net
        .motifs
        .iter()
        .map(|m| {
            let out_key = match m.kind {
                crate::network::MotifKind::Enzyme => "turnover",
                crate::network::MotifKind::Receptor => "signal",
            };
            let mut v = json!({
                "kind": m.kind.as_str(),
                "carrier": net.species[m.carrier].name,
                "ligand": net.species[m.ligand].name,
                "complex": net.species[m.complex].name,
                "bind": net.reactions[m.bind].label,
                "unbind": m.unbind.map(|j| net.reactions[j].label.clone()),
                "k_half": jnum(m.k_half),
                "k_half_molar": net.volume_l.map(|_| jnum(m.k_half / net.reaction_omega(m.bind))),
                "compartment": compartment_of(net, net.reactions[m.bind].compartment),
            });
            v[out_key] = json!(net.reactions[m.output].label);
            v
        })
        .collect();
    let warnings: Vec<Value> = net
        .warnings
        .iter()
        .map(|w| json!({"line": w.span.line, "column": w.span.col, "message": w.message}))
        .collect();
    json!({
        "file": net.file,
        "volume_l": net.volume_l,
        "omega": net.volume_l.map(|_| net.omega),
        "amount_unit": net.amount.name,
        "compartments": compartments,
        "species": species,
        "reactions": reactions,
        "stoichiometry": net.stoichiometry,
        "conservation_laws": laws,
        "motifs": motifs,
        "doses": doses,
        "infusions": infusions,
        "events": events,
        "warnings": warnings,
    })
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
