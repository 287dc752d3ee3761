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

/// The JSON document of CONTRACT §3 for `check`.
pub fn json(net: &Network) -> Value {
    let species: Vec<Value> = net
        .species
        .iter()
        .map(|s| json!({"name": s.name, "initial_count": s.initial, "clamped": s.clamped}))
        .collect();
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
            });
            if let crate::network::Kinetics::Law { law, .. } = &r.kinetics {
                v["law"] = json!(law.text);
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
                "k_half_molar": net.volume_l.map(|_| jnum(m.k_half / net.omega)),
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
        "species": species,
        "reactions": reactions,
        "stoichiometry": net.stoichiometry,
        "conservation_laws": laws,
        "motifs": motifs,
        "warnings": warnings,
    })
}

/// The readable report of `check`.
pub fn table(net: &Network) -> String {
    let mut out = String::new();
    match net.volume_l {
        Some(v) => out.push_str(&format!(
            "{}: volume {} L, Ω = N_A·V = {} molecules per mol/L\n\n",
            net.file,
            num(v),
            num(net.omega)
        )),
        None => out.push_str(&format!(
            "{}: no volume; every amount is in molecules, every rate in molecules/s\n\n",
            net.file
        )),
    }
    let mut t = Table::new(&["species", "initial (molecules)", "initial (M)", "held"]);
    for s in &net.species {
        t.row(vec![
            s.name.clone(),
            s.initial.to_string(),
            net.volume_l
                .map_or("-".into(), |_| num(s.initial as f64 / net.omega)),
            if s.clamped {
                "clamped".into()
            } else {
                String::new()
            },
        ]);
    }
    out.push_str(&t.render());
    out.push('\n');
    let mut t = Table::new(&["reaction", "step", "order", "c (molecules, s)", "rate"]);
    for r in &net.reactions {
        let rate = match &r.kinetics {
            crate::network::Kinetics::MassAction { k, .. } => {
                if net.volume_l.is_some() {
                    format!("k = {} (M, s)", num(*k))
                } else {
                    "mass action".into()
                }
            }
            crate::network::Kinetics::Law { law, .. } => format!("law {}", law.text),
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
            "K (M)",
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
                net.volume_l
                    .map_or("-".into(), |_| num(m.k_half / net.omega)),
            ]);
        }
        out.push_str(&t.render());
    }
    if !net.warnings.is_empty() {
        out.push_str(&format!("\n{} warning(s) on stderr\n", net.warnings.len()));
    }
    out
}
