//! An imported model's symbols on a run's grid, in the model's own units: every species as
//! amount and as concentration (those an assignment rule computes included), every parameter
//! and every compartment, keyed by SBML id.
//!
//! The network holds a species as a count n; the model's amount is n·a with a =
//! [`model_amount_per_count`] (1/N_A for a mole-based model read in molecules) and its
//! concentration is that amount over its compartment's size (SBML Level 3 Version 2 core §4.6
//! \[M\]). A parameter the network holds is its value over [`param_unit_factor`]; one an
//! assignment rule sets is its formula on the state ([`rule_values`]); any other is its initial
//! value. Compartments keep their initial sizes (the network refuses rules and events that
//! change them).

use super::initial::{initial_values, symbol_is_amount, InitialValues};
use super::map::rules::rule_values;
use super::map::{model_amount_per_count, param_unit_factor};
use super::model::{Document, RuleKind};
use crate::network::Network;

/// What a symbol of the model is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SymbolKind {
    Species,
    Parameter,
    Compartment,
}

/// One symbol at one grid point, in the model's units.
#[derive(Clone, Debug, PartialEq)]
pub struct Value {
    pub id: String,
    pub kind: SymbolKind,
    /// A species' amount; a parameter's value; a compartment's size.
    pub value: f64,
    /// A species' concentration (amount / its compartment's size).
    pub concentration: Option<f64>,
    /// Computed by an assignment rule: a nonlinear function of the state in general, so the
    /// mean of it over replicates is not the rule applied to the mean state.
    pub ruled: bool,
    /// The network index of the species or param that holds it, if one does.
    pub held: Option<Held>,
}

/// Where the network holds a symbol.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Held {
    /// Network species `i`; value = count × `scale`.
    Species { index: usize, scale: f64 },
    /// Network param `p`; value = param × `scale`.
    Param { index: usize, scale: f64 },
}

/// The model's own units, as its unit attributes name them.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelUnits {
    pub substance: String,
    pub volume: String,
    pub time: String,
}

/// The symbols of an imported model, ready to be read on any grid point.
#[derive(Clone, Debug)]
pub struct Output<'a> {
    doc: &'a Document,
    net: &'a Network,
    initial: InitialValues,
}

impl<'a> Output<'a> {
    /// The reader of `doc`'s symbols from states of `net` (the network imported from it).
    pub fn new(doc: &'a Document, net: &'a Network) -> Result<Output<'a>, String> {
        let initial = initial_values(&doc.model).map_err(|e| e.to_string())?;
        Ok(Output { doc, net, initial })
    }

    /// The model's units; "unspecified" where the model does not declare one.
    pub fn units(&self) -> ModelUnits {
        let m = &self.doc.model;
        let or = |u: &Option<String>| u.clone().unwrap_or_else(|| "unspecified".to_string());
        ModelUnits {
            substance: or(&m.substance_units),
            volume: or(&m.volume_units),
            time: or(&m.time_units),
        }
    }

    /// The compartment species `id` sits in.
    pub fn compartment_of(&self, id: &str) -> Option<String> {
        let m = &self.doc.model;
        m.species
            .iter()
            .find(|s| s.id == id)
            .map(|s| s.compartment.clone())
    }

    /// The size of species `id`'s compartment.
    pub fn species_size(&self, id: &str) -> Option<f64> {
        self.size(&self.compartment_of(id)?)
    }

    fn size(&self, compartment: &str) -> Option<f64> {
        let m = &self.doc.model;
        let k = m.compartments.iter().position(|c| c.id == compartment)?;
        self.initial.compartments[k]
    }

    /// Symbol `id` as SBML formulas read it (a species' concentration or amount) at a state.
    fn symbol(&self, counts: &[f64], params: &[f64], id: &str) -> Option<f64> {
        let m = &self.doc.model;
        let per_count = model_amount_per_count(self.net);
        if let Some(i) = self.net.species_index(id) {
            let amount = counts[i] * per_count;
            return match m.species.iter().position(|s| s.id == id) {
                Some(j) if !symbol_is_amount(m, j) => {
                    Some(amount / self.size(&m.species[j].compartment)?)
                }
                _ => Some(amount),
            };
        }
        if let Some(p) = self.net.param_index(id) {
            return Some(params[p] / param_unit_factor(self.doc, self.net, id));
        }
        if let Some(c) = m.compartments.iter().position(|c| c.id == id) {
            return self.initial.compartments[c];
        }
        if let Some(p) = m.parameters.iter().position(|p| p.id == id) {
            return self.initial.parameters[p];
        }
        m.reactions.iter().enumerate().find_map(|(r, rx)| {
            let j = rx
                .reactants
                .iter()
                .chain(&rx.products)
                .position(|s| s.id.as_deref() == Some(id))?;
            self.initial.stoichiometries[r][j]
        })
    }

    /// Every species, parameter and compartment of the model at a state: `counts` of the
    /// network's species, `params` the values of all its params, at time `t`. NaN where a
    /// value cannot be computed (a rule reading a symbol without a value).
    pub fn values(&self, counts: &[f64], params: &[f64], t: f64) -> Vec<Value> {
        let m = &self.doc.model;
        let net = self.net;
        let per_count = model_amount_per_count(net);
        let lookup = |id: &str| self.symbol(counts, params, id);
        let ruled: Vec<(String, Option<f64>)> =
            if m.rules.iter().any(|r| r.kind == RuleKind::Assignment) {
                rule_values(self.doc, &lookup, t)
            } else {
                Vec::new()
            };
        let rule = |id: &str| ruled.iter().find(|(v, _)| v == id).map(|(_, x)| *x);
        let mut out = Vec::with_capacity(m.species.len() + m.parameters.len());
        for (j, s) in m.species.iter().enumerate() {
            let size = self.size(&s.compartment);
            let (amount, ruled, held) = match (rule(&s.id), net.species_index(&s.id)) {
                (Some(x), _) => {
                    let x = x.unwrap_or(f64::NAN);
                    let amount = if symbol_is_amount(m, j) {
                        x
                    } else {
                        x * size.unwrap_or(f64::NAN)
                    };
                    (amount, true, None)
                }
                (None, Some(i)) => (
                    counts[i] * per_count,
                    false,
                    Some(Held::Species {
                        index: i,
                        scale: per_count,
                    }),
                ),
                (None, None) => (f64::NAN, false, None),
            };
            out.push(Value {
                id: s.id.clone(),
                kind: SymbolKind::Species,
                value: amount,
                concentration: Some(match size {
                    Some(v) => amount / v,
                    None => f64::NAN,
                }),
                ruled,
                held,
            });
        }
        for (k, p) in m.parameters.iter().enumerate() {
            let (value, ruled, held) = if let Some(x) = rule(&p.id) {
                (x.unwrap_or(f64::NAN), true, None)
            } else if let Some(i) = net.species_index(&p.id) {
                // A rate rule's parameter is a state of the network.
                let held = Held::Species {
                    index: i,
                    scale: per_count,
                };
                (counts[i] * per_count, false, Some(held))
            } else if let Some(q) = net.param_index(&p.id) {
                let scale = 1.0 / param_unit_factor(self.doc, net, &p.id);
                (
                    params[q] * scale,
                    false,
                    Some(Held::Param { index: q, scale }),
                )
            } else {
                (self.initial.parameters[k].unwrap_or(f64::NAN), false, None)
            };
            out.push(Value {
                id: p.id.clone(),
                kind: SymbolKind::Parameter,
                value,
                concentration: None,
                ruled,
                held,
            });
        }
        for (k, c) in m.compartments.iter().enumerate() {
            out.push(Value {
                id: c.id.clone(),
                kind: SymbolKind::Compartment,
                value: self.initial.compartments[k].unwrap_or(f64::NAN),
                concentration: None,
                ruled: false,
                held: None,
            });
        }
        out
    }
}
