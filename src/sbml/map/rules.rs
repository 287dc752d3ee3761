//! SBML assignment and rate rules, in the forms that map exactly onto the network.
//!
//! - An **assignment rule** on a global parameter (`p = f` at every instant, SBML Level 3
//!   Version 2 core §4.11.3 \[M\]) is written into every formula that reads `p` (kinetic laws,
//!   triggers, delays, priorities, event assignments, other rules): wherever the network reads
//!   `p` it evaluates `f` on the current state, so the rule holds at every reaction event, event
//!   and ODE step, in every method. A kinetic law with a local parameter of the same id keeps
//!   its own. The parameter is not declared in the network (it holds no state of its own);
//!   [`rule_values`] gives its value along a trajectory.
//! - An **assignment rule on a species** that no reaction lists as a reactant or product is
//!   the same substitution: the species is computed, not a state, and is not declared in the
//!   network. Its formula gives the species' symbol as SBML reads it (its concentration where
//!   `hasOnlySubstanceUnits` is false, else its amount), which is what every formula reading
//!   the species reads, so the substitution is exact.
//! - A **rate rule** on a global parameter or a species that no reaction lists, a boundary
//!   species included (`dx/dt = f`, §4.11.4 \[M\]), becomes a state of the network changed by a zero-order law step `∅ → x` at
//!   rate f (× the compartment's size where the species' symbol is its concentration). That is
//!   the rule exactly in the deterministic method; a stochastic run would make f a propensity of
//!   unit jumps, so the model is read in its own units and stochastic methods refuse it.
//!
//! Refused, with the reason: assignment rules on compartments and on species that a reaction
//! lists; rate rules on compartments and on species that a reaction lists; rules that read a
//! stoichiometry that a rule or an event changes. A rule that reads a reaction's id reads its
//! kinetic law (map.rs).

use super::not_yet;
use crate::network::parser::{BinOp, Expr, Rate, Step, Term};
use crate::sbml::error::SbmlError;
use crate::sbml::math::{Math, MathKind};
use crate::sbml::model::{Document, Model, RuleKind, Symbol};

/// The kind of a rule, for messages.
fn element(k: &RuleKind) -> &'static str {
    match k {
        RuleKind::Assignment => "assignmentRule",
        RuleKind::Rate => "rateRule",
        RuleKind::Algebraic => "algebraicRule",
    }
}

/// Checks the rules of `m` against the forms above; returns the ids of the parameters and
/// species that assignment rules set.
pub(super) fn check(m: &Model) -> Result<Vec<String>, SbmlError> {
    let symbols = m.symbols();
    let mut assigned = Vec::new();
    for r in &m.rules {
        // A rule without a formula sets nothing (SBML Level 3 Version 2 core §4.11 [M]).
        let (Some(v), Some(math)) = (r.variable.as_deref(), &r.math) else {
            continue;
        };
        let refuse = |why: String| Err(not_yet(element(&r.kind), Some(v), r.loc, why));
        // A stoichiometry that no rule or event changes is a constant (read as its value), a
        // reaction's id its kinetic law; a stoichiometry that changes is not held by the
        // network.
        let mut reads = None;
        math.visit(&mut |x| {
            if let MathKind::Ident(id) = &x.kind {
                let changing = match symbols.get(id.as_str()) {
                    Some(Symbol::SpeciesReference(..)) => changed(m, id),
                    _ => false,
                };
                if changing {
                    reads.get_or_insert(id.clone());
                }
            }
        });
        if let Some(id) = reads {
            return refuse(format!(
                "a rule that reads `{id}`, a stoichiometry that changes during the run"
            ));
        }
        match (&r.kind, symbols.get(v)) {
            (RuleKind::Assignment, Some(Symbol::Parameter(_))) => assigned.push(v.to_string()),
            (RuleKind::Assignment, Some(Symbol::Species(_))) if in_reaction(m, v) => {
                return refuse(format!(
                    "an assignment rule on species `{v}`, which a reaction lists as a reactant or product (assignment rules are supported on parameters and on species no reaction lists)"
                ))
            }
            (RuleKind::Assignment, Some(Symbol::Species(_))) => assigned.push(v.to_string()),
            (RuleKind::Assignment, _) => {
                return refuse(format!(
                    "an assignment rule on `{v}`, which is not a parameter or a species (assignment rules are supported on parameters and on species no reaction lists)"
                ))
            }
            (RuleKind::Rate, Some(Symbol::Parameter(_))) => {}
            (RuleKind::Rate, Some(Symbol::Species(i))) => {
                // A boundary species that no reaction lists is changed by its rule alone.
                if in_reaction(m, &m.species[*i].id) {
                    return refuse(format!(
                        "a rate rule on species `{v}`, which a reaction lists as a reactant or product (rate rules are supported on parameters and on species no reaction lists)"
                    ));
                }
            }
            (RuleKind::Rate, _) => {
                return refuse(format!(
                    "a rate rule on `{v}`, which is not a parameter or a species (compartments have a fixed size)"
                ))
            }
            (RuleKind::Algebraic, _) => {}
        }
    }
    Ok(assigned)
}

/// Whether a rule or an event of `m` sets `id`.
fn changed(m: &Model, id: &str) -> bool {
    m.rules.iter().any(|r| r.variable.as_deref() == Some(id))
        || m.events
            .iter()
            .any(|e| e.assignments.iter().any(|a| a.variable == id))
}

/// Whether a reaction of `m` lists species `id` as a reactant or a product.
fn in_reaction(m: &Model, id: &str) -> bool {
    m.reactions.iter().any(|r| {
        r.reactants
            .iter()
            .chain(&r.products)
            .any(|x| x.species == id)
    })
}

/// Whether the model has rate rules (read in its own units, deterministic only).
pub(super) fn has_rate_rules(m: &Model) -> bool {
    m.rules.iter().any(|r| r.kind == RuleKind::Rate)
}

/// Why a model with rate rules runs deterministically only.
pub(super) fn rate_rule_refusal(m: &Model) -> Option<String> {
    let r = m.rules.iter().find(|r| r.kind == RuleKind::Rate)?;
    Some(format!(
        "the rate rule on `{}` changes it continuously, which a stochastic run cannot do exactly; it runs with `--method ode`",
        r.variable.as_deref().unwrap_or("")
    ))
}

/// The model's assignment rules that have both a variable and a formula, in document order.
fn assignment_rules(doc: &Document) -> impl Iterator<Item = (&str, &Math)> {
    doc.model
        .rules
        .iter()
        .filter(|r| r.kind == RuleKind::Assignment)
        .filter_map(|r| Some((r.variable.as_deref()?, r.math.as_ref()?)))
}

/// `doc` with every assignment rule's parameter replaced by its formula wherever it is read
/// (the rules themselves stay, for their values at t = 0).
pub(super) fn substituted(doc: &Document, assigned: &[String]) -> Document {
    let mut out = doc.clone();
    if assigned.is_empty() {
        return out;
    }
    let rules: Vec<(String, Math)> = assignment_rules(doc)
        .map(|(v, m)| (v.to_string(), m.clone()))
        .collect();
    let m = &mut out.model;
    for r in &mut m.reactions {
        if let Some(k) = &mut r.kinetic_law {
            let shadowed: Vec<String> = k.local_parameters.iter().map(|p| p.id.clone()).collect();
            if let Some(math) = &mut k.math {
                replace_all(math, &rules, &shadowed);
            }
        }
    }
    for e in &mut m.events {
        if let Some(t) = &mut e.trigger {
            if let Some(math) = &mut t.math {
                replace_all(math, &rules, &[]);
            }
        }
        for math in e.delay.iter_mut().chain(e.priority.iter_mut()) {
            replace_all(math, &rules, &[]);
        }
        for a in &mut e.assignments {
            if let Some(math) = &mut a.math {
                replace_all(math, &rules, &[]);
            }
        }
    }
    for r in &mut m.rules {
        if r.kind == RuleKind::Rate {
            if let Some(math) = &mut r.math {
                replace_all(math, &rules, &[]);
            }
        }
    }
    out
}

/// Replaces the rules' variables in `m` until none is left (rules are acyclic, so at most one
/// round per rule).
fn replace_all(m: &mut Math, rules: &[(String, Math)], shadowed: &[String]) {
    for _ in 0..=rules.len() {
        if !replace(m, rules, shadowed) {
            return;
        }
    }
}

/// One round of replacement; whether anything was replaced.
fn replace(m: &mut Math, rules: &[(String, Math)], shadowed: &[String]) -> bool {
    match &mut m.kind {
        MathKind::Ident(id) if !shadowed.contains(id) => {
            match rules.iter().find(|(v, _)| v == id) {
                Some((_, f)) => {
                    *m = f.clone();
                    true
                }
                None => false,
            }
        }
        MathKind::Apply(_, args) | MathKind::Call(_, args) => {
            let mut any = false;
            for a in args {
                any |= replace(a, rules, shadowed);
            }
            any
        }
        MathKind::Piecewise { pieces, otherwise } => {
            let mut any = false;
            for (v, c) in pieces {
                any |= replace(v, rules, shadowed);
                any |= replace(c, rules, shadowed);
            }
            if let Some(o) = otherwise {
                any |= replace(o, rules, shadowed);
            }
            any
        }
        MathKind::Delay(x, d) => replace(x, rules, shadowed) | replace(d, rules, shadowed),
        MathKind::RateOf(x) => replace(x, rules, shadowed),
        _ => false,
    }
}

/// The value of every assignment-rule parameter and species (its symbol: concentration or
/// amount) of `doc` at time `t`, where `value(id)` gives
/// every other symbol's value as SBML reads it (a species' concentration or amount, a
/// parameter, a compartment's size): the rules' formulas evaluated in dependency order.
pub fn rule_values(
    doc: &Document,
    value: &dyn Fn(&str) -> Option<f64>,
    t: f64,
) -> Vec<(String, Option<f64>)> {
    let rules: Vec<(&str, &Math)> = assignment_rules(doc).collect();
    let mut known: Vec<(String, Option<f64>)> = Vec::new();
    for _ in 0..=rules.len() {
        for (v, f) in &rules {
            if known.iter().any(|(k, _)| k == v) {
                continue;
            }
            let lookup = |id: &str| {
                if rules.iter().any(|(r, _)| *r == id) {
                    return known.iter().find(|(k, _)| k == id).and_then(|(_, x)| *x);
                }
                value(id)
            };
            if let Ok(x) = crate::sbml::eval::eval(f, &lookup, t) {
                known.push((v.to_string(), Some(x)));
            }
        }
    }
    for (v, _) in &rules {
        if !known.iter().any(|(k, _)| k == v) {
            known.push((v.to_string(), None));
        }
    }
    known
}

impl super::Context<'_> {
    /// The law step `∅ → x` of a rate rule on `x` (none for other rules).
    pub(super) fn rate_rule(
        &self,
        r: &crate::sbml::model::Rule,
    ) -> Result<Option<Step>, SbmlError> {
        let (RuleKind::Rate, Some(v), Some(math)) = (&r.kind, r.variable.as_deref(), &r.math)
        else {
            return Ok(None);
        };
        let locals = super::Locals::new();
        let law = self.law(math, &locals, v)?;
        // The rule gives the rate of the symbol (a truth value counts as 0 or 1); the step
        // changes the amount.
        let size = match self.symbols.get(v) {
            Some(Symbol::Species(i)) => self.divisor(*i, r.loc)?,
            _ => None,
        };
        let law = Expr::Binary(
            BinOp::Mul,
            Box::new(law),
            Box::new(Expr::Number(super::bare(size.unwrap_or(1.0), r.loc))),
            super::span(r.loc),
        );
        let at = super::span(r.loc);
        Ok(Some(Step {
            label: super::name(&format!("{v}__rate_rule"), r.loc),
            reactants: Vec::new(),
            products: vec![Term {
                coefficient: 1,
                species: super::name(v, r.loc),
                span: at,
            }],
            reversible: false,
            forward: Rate::Law(law),
            reverse: None,
            span: at,
        }))
    }
}
