//! The values of every symbol at t = 0: sizes, species amounts, parameters, stoichiometries.
//!
//! SBML's order (Level 3 core §3.4.8 and §4.8): attribute values first, then initial
//! assignments and assignment rules, which hold at t = 0 and may read one another in any order
//! as long as they form no cycle. A species' symbol in a formula is its concentration
//! (amount / compartment size) unless `hasOnlySubstanceUnits` is true or its compartment has
//! zero dimensions; an initial assignment or rule to a species sets that same quantity. A
//! reaction's id stands for its kinetic law's value.

use super::error::{ErrorKind, Loc, SbmlError};
use super::eval::eval;
use super::math::Math;
use super::model::{Initial, Model, RuleKind, Symbol};
use std::collections::HashMap;

/// Values at t = 0, `None` where the model leaves one undefined.
#[derive(Clone, Debug, PartialEq)]
pub struct InitialValues {
    pub compartments: Vec<Option<f64>>,
    /// Amounts (not concentrations).
    pub species: Vec<Option<f64>>,
    pub parameters: Vec<Option<f64>>,
    /// Per reaction, the stoichiometries of its reactants then products.
    pub stoichiometries: Vec<Vec<Option<f64>>>,
}

/// Whether species `i`'s symbol stands for its amount (rather than its concentration).
pub fn symbol_is_amount(m: &Model, i: usize) -> bool {
    let s = &m.species[i];
    s.has_only_substance_units
        || compartment_of(m, i).is_some_and(|c| c.spatial_dimensions == Some(0.0))
}

fn compartment_of(m: &Model, i: usize) -> Option<&super::model::Compartment> {
    m.compartments
        .iter()
        .find(|c| c.id == m.species[i].compartment)
}

/// Computes the values at t = 0 of a validated, expanded model.
pub fn initial_values(m: &Model) -> Result<InitialValues, SbmlError> {
    let symbols = m.symbols();
    let mut v = InitialValues {
        compartments: m.compartments.iter().map(|c| c.size).collect(),
        species: vec![None; m.species.len()],
        parameters: m.parameters.iter().map(|p| p.value).collect(),
        stoichiometries: m
            .reactions
            .iter()
            .map(|r| {
                r.reactants
                    .iter()
                    .chain(&r.products)
                    .map(|s| s.stoichiometry)
                    .collect()
            })
            .collect(),
    };
    // Species given as a concentration wait for their compartment's size.
    let mut conc: Vec<Option<f64>> = vec![None; m.species.len()];
    for (i, s) in m.species.iter().enumerate() {
        match s.initial {
            Some(Initial::Amount(a)) => v.species[i] = Some(a),
            Some(Initial::Concentration(c)) => conc[i] = Some(c),
            None => {}
        }
    }
    // Formulas that set a symbol at t = 0, in file order: initial assignments, assignment rules.
    let mut pending: Vec<(&str, &Math, Loc, &'static str)> = Vec::new();
    for a in &m.initial_assignments {
        if let Some(x) = &a.math {
            pending.push((&a.symbol, x, a.loc, "initialAssignment"));
        }
    }
    for r in &m.rules {
        if let (RuleKind::Assignment, Some(var), Some(x)) = (&r.kind, &r.variable, &r.math) {
            pending.push((var, x, r.loc, "assignmentRule"));
        }
    }
    // Symbols set by a formula are unknown until it is evaluated.
    for (id, ..) in &pending {
        match symbols.get(id) {
            Some(Symbol::Compartment(i)) => v.compartments[*i] = None,
            Some(Symbol::Species(i)) => {
                v.species[*i] = None;
                conc[*i] = None;
            }
            Some(Symbol::Parameter(i)) => v.parameters[*i] = None,
            Some(Symbol::SpeciesReference(r, j)) => v.stoichiometries[*r][*j] = None,
            _ => {}
        }
    }
    loop {
        settle_concentrations(m, &mut v, &mut conc);
        let before = pending.len();
        let mut rest = Vec::new();
        for (id, x, loc, element) in pending {
            let value = {
                let get = |name: &str| value_of(m, &symbols, &v, name);
                eval(x, &get, 0.0)
            };
            match value {
                Ok(val) => set(m, &symbols, &mut v, &mut conc, id, val),
                Err(_) => rest.push((id, x, loc, element)),
            }
        }
        pending = rest;
        if pending.is_empty() {
            break;
        }
        if pending.len() == before {
            let (id, x, loc, element) = pending[0];
            let get = |name: &str| value_of(m, &symbols, &v, name);
            let why = eval(x, &get, 0.0)
                .err()
                .map(|e| e.message)
                .unwrap_or_default();
            return Err(SbmlError::new(
                ErrorKind::Invalid {
                    message: format!("the value of `{id}` at t = 0 cannot be computed: {why}"),
                },
                element,
                Some(id),
                loc,
            ));
        }
    }
    settle_concentrations(m, &mut v, &mut conc);
    Ok(v)
}

/// Turns concentrations into amounts where the compartment's size is known.
fn settle_concentrations(m: &Model, v: &mut InitialValues, conc: &mut [Option<f64>]) {
    for (i, c) in conc.iter_mut().enumerate() {
        let Some(cv) = *c else { continue };
        let size = m
            .compartments
            .iter()
            .position(|k| k.id == m.species[i].compartment)
            .and_then(|k| v.compartments[k]);
        if let Some(size) = size {
            v.species[i] = Some(cv * size);
            *c = None;
        }
    }
}

/// The value of `name` as a formula reads it, if known.
fn value_of(
    m: &Model,
    symbols: &HashMap<&str, Symbol>,
    v: &InitialValues,
    name: &str,
) -> Option<f64> {
    match symbols.get(name)? {
        Symbol::Compartment(i) => v.compartments[*i],
        Symbol::Parameter(i) => v.parameters[*i],
        Symbol::SpeciesReference(r, j) => v.stoichiometries[*r][*j],
        Symbol::Species(i) => {
            let amount = v.species[*i]?;
            if symbol_is_amount(m, *i) {
                Some(amount)
            } else {
                let k = m
                    .compartments
                    .iter()
                    .position(|c| c.id == m.species[*i].compartment)?;
                Some(amount / v.compartments[k]?)
            }
        }
        Symbol::Reaction(r) => {
            let law = m.reactions[*r].kinetic_law.as_ref()?;
            let locals: HashMap<&str, Option<f64>> = law
                .local_parameters
                .iter()
                .map(|p| (p.id.as_str(), p.value))
                .collect();
            let get = |n: &str| match locals.get(n) {
                Some(x) => *x,
                None => value_of(m, symbols, v, n),
            };
            eval(law.math.as_ref()?, &get, 0.0).ok()
        }
        _ => None,
    }
}

fn set(
    m: &Model,
    symbols: &HashMap<&str, Symbol>,
    v: &mut InitialValues,
    conc: &mut [Option<f64>],
    id: &str,
    val: f64,
) {
    match symbols.get(id) {
        Some(Symbol::Compartment(i)) => v.compartments[*i] = Some(val),
        Some(Symbol::Parameter(i)) => v.parameters[*i] = Some(val),
        Some(Symbol::SpeciesReference(r, j)) => v.stoichiometries[*r][*j] = Some(val),
        Some(Symbol::Species(i)) => {
            if symbol_is_amount(m, *i) {
                v.species[*i] = Some(val);
            } else {
                conc[*i] = Some(val);
            }
        }
        _ => {}
    }
}
