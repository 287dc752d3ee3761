//! A compiled [`Network`] → the typed SBML [`Document`] (Level 3 Version 2), which `write.rs`
//! turns into text.
//!
//! What is written, and how it reads back (`map.rs`):
//!
//! - **Scale.** A network with a volume becomes one compartment `volume` of that many litres,
//!   amounts in mole (`substanceUnits="mole"`), each species' initial concentration the count
//!   the network holds divided by Ω = N_A·V. A network in molecule counts becomes amounts in
//!   items, species with `hasOnlySubstanceUnits`, and a nominal compartment of size 1 that no
//!   law reads.
//! - **Species.** Clamped species are boundary species (reactions do not change them).
//! - **Parameters** keep their ids and values, with their units as SBML unit definitions.
//! - **Mass-action steps** get the standard deterministic law, the rate in amount per time:
//!   `volume · k · Π[Xᵢ]^νᵢ` (with a volume) or `k · Π Xᵢ^νᵢ` (counts, k = c/Πνᵢ!). k is the
//!   step's parameter where it names one; a constant written as a number, a `half-life` or a
//!   `kd` becomes a plain local constant with its origin in the reaction's notes. copyloop's
//!   stochastic reading — propensity c·Π C(xᵢ, νᵢ) with c = k·Πνᵢ!/Ω^(m−1) — is written in
//!   the reaction's annotation ([`Reading`]): for a self-reaction such as `2 A → B` the two
//!   readings differ (the law read on counts would give k·A²/Ω, copyloop's is c·A(A−1)/2), and
//!   the annotation is how copyloop reads its own file back as the same network.
//! - **Law steps** get their law as MathML: in a volume, `volume · law` for a law in
//!   concentration per time, `law / N_A` for one in molecules per time; `sat`, `hill` and
//!   `inhib` become function definitions.
//!
//! Importing the export gives the same network: the same species, counts, reactions and
//! stochastic constants, bit for bit, so the same seed gives the same numbers — except for a
//! law in molecules per time in a network with a volume, which reads back equal to rounding.
//! Compartments, doses and events are further components of the same [`Document`]; they join
//! here when the network holds them.

use super::builtins::Builtin;
use super::error::Loc;
use super::math::{Math, MathKind, Op};
use super::model::*;
use super::units;
use crate::error::{Error, Result};
use crate::network::parser::{BinOp, Expr, Item, Operand, Rate, Step};
use crate::network::units::{factorial_product, macroscopic_constant, stochastic_constant};
use crate::network::{Dim, Kinetics, Network, Reaction as NetReaction, AVOGADRO};
use crate::numbers::plain;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet, HashSet};

/// What an export wrote, for the command's report.
#[derive(Clone, Debug, Serialize)]
pub struct ExportSummary {
    /// The network file exported.
    pub file: String,
    pub level: u32,
    pub version: u32,
    /// `volume` (amounts in mole in one compartment) or `counts` (amounts in items).
    pub scale: &'static str,
    pub volume_l: Option<f64>,
    pub species: usize,
    pub parameters: usize,
    pub reactions: usize,
    /// Reactions whose rate constant is written as a plain number, with its origin.
    pub plain_constants: Vec<PlainConstant>,
    /// Reactions whose stochastic reading (in the annotation) is not the law read on counts.
    pub self_reactions: Vec<String>,
    /// Reactions that read back equal only to rounding.
    pub rounded: Vec<String>,
}

#[derive(Clone, Debug, Serialize)]
pub struct PlainConstant {
    pub reaction: String,
    pub origin: String,
}

/// A document ready to write, and what it holds.
#[derive(Clone, Debug)]
pub struct Export {
    pub document: Document,
    pub summary: ExportSummary,
}

fn at() -> Loc {
    Loc::default()
}

fn ci(x: &str) -> Math {
    Math::new(MathKind::Ident(x.to_string()), at())
}

fn cn(v: f64) -> Math {
    Math::number(v, at())
}

fn ap(op: Op, args: Vec<Math>) -> Math {
    Math::new(MathKind::Apply(op, args), at())
}

/// The product of `factors` (one factor alone as itself).
fn product(mut factors: Vec<Math>) -> Math {
    if factors.len() == 1 {
        factors.pop().unwrap()
    } else {
        ap(Op::Times, factors)
    }
}

struct Exporter<'n> {
    net: &'n Network,
    /// The compartment's id (one not used by any other component).
    compartment: String,
    units: BTreeMap<String, UnitDefinition>,
    builtins: BTreeSet<&'static str>,
    /// Ids of every species, parameter and reaction, which a local parameter must not shadow.
    taken: HashSet<String>,
    summary: ExportSummary,
}

/// A step's rate as the syntax tree wrote it, for reaction `r` (a forward step, or the reverse
/// of a `<->` step, labelled `<step>_rev`).
fn rate_of<'a>(steps: &[&'a Step], r: &NetReaction) -> Option<&'a Rate> {
    if let Some(s) = steps.iter().find(|s| s.label.text == r.label) {
        return Some(&s.forward);
    }
    steps
        .iter()
        .find(|s| s.reversible && format!("{}_rev", s.label.text) == r.label)
        .and_then(|s| s.reverse.as_ref())
}

impl Exporter<'_> {
    fn volume(&self) -> Option<f64> {
        self.net.volume_l
    }

    /// The unit id of a dimension, recording its definition.
    fn unit(&mut self, dim: Dim) -> String {
        let (id, def) = units::unit_for(dim);
        if let Some(d) = def {
            self.units.entry(id.clone()).or_insert(d);
        }
        id
    }

    /// A local id starting with `base` that shadows nothing.
    fn local_id(&self, base: &str) -> String {
        let mut id = base.to_string();
        let mut n = 1;
        while self.taken.contains(&id) {
            id = format!("{base}_{n}");
            n += 1;
        }
        id
    }

    fn param(&self, name: &str) -> Option<&crate::network::Param> {
        self.net.params.iter().find(|p| p.name == name)
    }

    /// A number of the network language in SBML, its unit written where it has a dimension.
    fn number(&mut self, v: f64, dim: Dim) -> Math {
        let mut m = cn(v);
        if !dim.is_none() {
            m.units = Some(self.unit(dim));
        }
        m
    }

    /// A law of the network language as MathML.
    fn expr(&mut self, e: &Expr) -> Math {
        match e {
            Expr::Number(l) => self.number(l.quantity.value, l.quantity.dim),
            Expr::Name(n) => ci(&n.text),
            Expr::Neg(x, _) => ap(Op::Minus, vec![self.expr(x)]),
            Expr::Binary(op, a, b, _) => {
                let op = match op {
                    BinOp::Add => Op::Plus,
                    BinOp::Sub => Op::Minus,
                    BinOp::Mul => Op::Times,
                    BinOp::Div => Op::Divide,
                    BinOp::Pow => Op::Power,
                    BinOp::Lt => Op::Lt,
                    BinOp::Le => Op::Leq,
                    BinOp::Gt => Op::Gt,
                    BinOp::Ge => Op::Geq,
                    BinOp::And => Op::And,
                    BinOp::Or => Op::Or,
                };
                ap(op, vec![self.expr(a), self.expr(b)])
            }
            Expr::Call(f, args, _) => {
                let a: Vec<Math> = args.iter().map(|x| self.expr(x)).collect();
                match f.text.as_str() {
                    "exp" => ap(Op::Exp, a),
                    "ln" => ap(Op::Ln, a),
                    "min" => ap(Op::Min, a),
                    "max" => ap(Op::Max, a),
                    "sin" => ap(Op::Sin, a),
                    "cos" => ap(Op::Cos, a),
                    // pulse(s, p, w) = 1 where s − p·⌊s/p⌋ < w, else 0.
                    "pulse" => {
                        let (x, p, w) = (a[0].clone(), a[1].clone(), a[2].clone());
                        let floor = ap(Op::Floor, vec![ap(Op::Divide, vec![x.clone(), p.clone()])]);
                        let phase = ap(Op::Minus, vec![x, ap(Op::Times, vec![p, floor])]);
                        Math::new(
                            MathKind::Piecewise {
                                pieces: vec![(cn(1.0), ap(Op::Lt, vec![phase, w]))],
                                otherwise: Some(Box::new(cn(0.0))),
                            },
                            at(),
                        )
                    }
                    name => {
                        let b = Builtin::from_name(name)
                            .expect("the compiler accepts only the language's functions");
                        self.builtins.insert(b.name());
                        Math::new(MathKind::Call(b.name().to_string(), a), at())
                    }
                }
            }
        }
    }

    /// Π Xᵢ^νᵢ over the reactants.
    fn reactant_factors(&self, r: &NetReaction) -> Vec<Math> {
        r.reactants
            .iter()
            .map(|&(i, n)| {
                let x = ci(&self.net.species[i].name);
                if n == 1 {
                    x
                } else {
                    ap(Op::Power, vec![x, cn(f64::from(n))])
                }
            })
            .collect()
    }

    fn reaction(&mut self, r: &NetReaction, rate: Option<&Rate>) -> Result<Reaction> {
        let sref = |&(i, n): &(usize, u32)| SpeciesReference {
            id: None,
            species: self.net.species[i].name.clone(),
            stoichiometry: Some(f64::from(n)),
            stoichiometry_math: None,
            constant: true,
            loc: at(),
        };
        let mut out = Reaction {
            id: r.label.clone(),
            name: None,
            reversible: false,
            fast: false,
            compartment: None,
            reactants: r.reactants.iter().map(sref).collect(),
            products: r.products.iter().map(sref).collect(),
            modifiers: Vec::new(),
            kinetic_law: None,
            reading: None,
            keeps_law: matches!(r.kinetics, Kinetics::Law { .. }),
            notes: None,
            loc: at(),
        };
        let (math, locals, reading, notes) = match (&r.kinetics, rate) {
            (Kinetics::Law { scale, .. }, Some(Rate::Law(e))) => {
                let body = self.expr(e);
                let mut notes = Vec::new();
                if !r.reactants.is_empty() {
                    notes.push(
                        "copyloop does not fire this step while a reactant count is below its coefficient."
                            .to_string(),
                    );
                }
                let math = match self.volume() {
                    None => body,
                    Some(_) if *scale == 1.0 => {
                        self.summary.rounded.push(r.label.clone());
                        notes.push("The law is in molecules per time; divided by N_A it is the rate in mole per time.".into());
                        let na =
                            self.number(AVOGADRO, Dim::COUNT.per(Dim::CONC.times(Dim::VOLUME)));
                        ap(Op::Divide, vec![body, na])
                    }
                    Some(_) => ap(Op::Times, vec![ci(&self.compartment), body]),
                };
                (math, Vec::new(), None, notes)
            }
            (Kinetics::MassAction { k, c, .. }, Some(rate)) => self.mass_action(r, *k, *c, rate),
            _ => {
                return Err(Error::Internal(format!(
                    "reaction `{}` has no step in the network's syntax tree",
                    r.label
                )))
            }
        };
        out.kinetic_law = Some(KineticLaw {
            math: Some(math),
            local_parameters: locals,
            loc: at(),
        });
        out.reading = reading;
        out.notes = (!notes.is_empty()).then(|| notes.join("\n"));
        Ok(out)
    }

    /// The deterministic law, local constants, reading and notes of a mass-action reaction.
    fn mass_action(
        &mut self,
        r: &NetReaction,
        k: f64,
        c: f64,
        rate: &Rate,
    ) -> (Math, Vec<Parameter>, Option<Reading>, Vec<String>) {
        let nu: Vec<u32> = r.reactants.iter().map(|e| e.1).collect();
        let order: u32 = nu.iter().sum();
        let omega = self.net.omega;
        let molar = Dim::mass_action_molar(order);
        let count = Dim::mass_action_count(order);
        let mut notes = Vec::new();
        // The constant as the step wrote it: (parameter name, whether it is the macroscopic k).
        let named = match rate {
            Rate::Constant(Operand::Param(n)) => self.param(&n.text).map(|p| {
                let macroscopic = self.volume().is_some() && p.value.dim == molar;
                (p.name.clone(), p.value.value, macroscopic)
            }),
            _ => None,
        };
        // A parameter is the reading's constant where reading it back gives the same k and c.
        let named = named.filter(|(_, v, macroscopic)| {
            if *macroscopic {
                *v == k && stochastic_constant(*v, &nu, omega) == c
            } else {
                *v == c
            }
        });
        let origin = match rate {
            Rate::HalfLife(op, _) => Some(format!(
                "half-life {} s, so k = ln 2 / t½ = {} /s",
                self.operand_value(op).map_or("?".into(), plain),
                plain(k)
            )),
            Rate::Kd(op, _) => Some(format!(
                "the reverse of a step given by K_d = {}, so k_rev = k_fwd · K_d = {}; it does not follow later changes of the forward constant",
                self.operand_quantity(op)
                    .map_or("?".into(), |(v, d)| format!("{} {}", plain(v), units::unit_for(d).0)),
                plain(k)
            )),
            Rate::Constant(Operand::Literal(l)) => Some(format!(
                "the constant {}{} written in the step",
                plain(l.quantity.value),
                if l.quantity.dim.is_none() {
                    String::new()
                } else {
                    format!(" ({})", l.quantity.dim)
                }
            )),
            _ => None,
        };
        // Without a parameter, the reading's constant is a number: the macroscopic k where the
        // compiler derived c from it (a molar constant, a half-life, a kd), else c itself.
        let from_k = self.volume().is_some()
            && match rate {
                Rate::Constant(Operand::Literal(l)) => !l.bare && l.quantity.dim == molar,
                Rate::HalfLife(..) | Rate::Kd(..) => true,
                _ => false,
            };
        let mut locals = Vec::new();
        let (k_expr, constant, kind) = match (&named, self.volume()) {
            (Some((name, _, true)), _) => (
                ci(name),
                ReadingConstant::Parameter(name.clone()),
                ReadingKind::Macroscopic,
            ),
            (Some((name, _, false)), None) => {
                let f = factorial_product(&nu);
                let e = if f == 1.0 {
                    ci(name)
                } else {
                    ap(Op::Divide, vec![ci(name), cn(f)])
                };
                (
                    e,
                    ReadingConstant::Parameter(name.clone()),
                    ReadingKind::Stochastic,
                )
            }
            (Some((name, _, false)), Some(_)) => {
                // k = c·Ω^(m−1)/Πν!, the factor carrying the unit that makes k molar.
                let factor = macroscopic_constant(1.0, &nu, omega);
                let f = self.number(factor, molar.per(count));
                (
                    ap(Op::Times, vec![ci(name), f]),
                    ReadingConstant::Parameter(name.clone()),
                    ReadingKind::Stochastic,
                )
            }
            (None, _) => {
                let id = self.local_id("k");
                let dim = if self.volume().is_some() {
                    molar
                } else {
                    Dim::NONE
                };
                let units = (!dim.is_none()).then(|| self.unit(dim));
                let why = origin
                    .clone()
                    .unwrap_or_else(|| "the step's constant".into());
                self.summary.plain_constants.push(PlainConstant {
                    reaction: r.label.clone(),
                    origin: why.clone(),
                });
                notes.push(format!(
                    "The rate constant {id} is a plain constant: {why}."
                ));
                locals.push(Parameter {
                    id: id.clone(),
                    name: None,
                    value: Some(k),
                    units,
                    constant: true,
                    notes: None,
                    loc: at(),
                });
                let (constant, kind) = if from_k {
                    (ReadingConstant::Value(k), ReadingKind::Macroscopic)
                } else {
                    (ReadingConstant::Value(c), ReadingKind::Stochastic)
                };
                (ci(&id), constant, kind)
            }
        };
        let mut factors = Vec::new();
        if self.volume().is_some() {
            factors.push(ci(&self.compartment));
        }
        factors.push(k_expr);
        factors.extend(self.reactant_factors(r));
        let propensity = self.propensity(r, c);
        if nu.iter().any(|&n| n > 1) {
            self.summary.self_reactions.push(r.label.clone());
            notes.push(format!(
                "Deterministic reading (this kinetic law, as SBML defines it): the rate is {}. Stochastic reading (copyloop, in the annotation): the propensity is {propensity}, the combinatorial mass-action form; the law evaluated on molecule counts would give a different propensity.",
                if self.volume().is_some() { "volume · k · Π[X]^ν in mole per second" } else { "k · Π X^ν in molecules per second" }
            ));
        }
        let reading = Reading {
            constant,
            kind,
            propensity: Some(propensity),
            loc: at(),
        };
        (product(factors), locals, Some(reading), notes)
    }

    fn operand_value(&self, op: &Operand) -> Option<f64> {
        self.operand_quantity(op).map(|q| q.0)
    }

    fn operand_quantity(&self, op: &Operand) -> Option<(f64, Dim)> {
        match op {
            Operand::Literal(l) => Some((l.quantity.value, l.quantity.dim)),
            Operand::Param(n) => self.param(&n.text).map(|p| (p.value.value, p.value.dim)),
        }
    }

    /// copyloop's propensity in molecule counts, as text: c·Π C(xᵢ, νᵢ).
    fn propensity(&self, r: &NetReaction, c: f64) -> String {
        let mut parts = vec!["c".to_string()];
        let mut divisor = 1u64;
        for &(i, n) in &r.reactants {
            let x = &self.net.species[i].name;
            for j in 0..n {
                parts.push(if j == 0 {
                    x.clone()
                } else {
                    format!("({x} - {j})")
                });
            }
            divisor *= (1..=u64::from(n)).product::<u64>();
        }
        let mut s = parts.join(" * ");
        if divisor > 1 {
            s.push_str(&format!(" / {divisor}"));
        }
        format!("{s}, c = {} (molecules, seconds)", super::write::exact(c))
    }
}

/// An SBML id from a file name: letters, digits and `_`, not starting with a digit.
fn model_id(file: &str) -> String {
    let stem = std::path::Path::new(file)
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("model");
    let mut id: String = stem
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect();
    if !id.starts_with(|c: char| c.is_ascii_alphabetic() || c == '_') {
        id.insert(0, '_');
    }
    id
}

/// The network as an SBML Level 3 Version 2 document.
pub fn document(net: &Network) -> Result<Export> {
    refuse_time_forcing(net)?;
    let steps: Vec<&Step> = net
        .source
        .items
        .iter()
        .filter_map(|i| match i {
            Item::Step(s) => Some(s),
            _ => None,
        })
        .collect();
    let mut taken: HashSet<String> = net.species.iter().map(|s| s.name.clone()).collect();
    taken.extend(net.params.iter().map(|p| p.name.clone()));
    taken.extend(net.reactions.iter().map(|r| r.label.clone()));
    taken.extend(Builtin::ALL.iter().map(|b| b.name().to_string()));
    let mut compartment = "volume".to_string();
    let mut n = 1;
    while taken.contains(&compartment) {
        compartment = format!("volume_{n}");
        n += 1;
    }
    taken.insert(compartment.clone());
    let volume = net.volume_l;
    let mut x = Exporter {
        net,
        compartment: compartment.clone(),
        units: BTreeMap::new(),
        builtins: BTreeSet::new(),
        taken,
        summary: ExportSummary {
            file: net.file.clone(),
            level: 3,
            version: 2,
            scale: if volume.is_some() { "volume" } else { "counts" },
            volume_l: volume,
            species: net.species.len(),
            parameters: net.params.len(),
            reactions: net.reactions.len(),
            plain_constants: Vec::new(),
            self_reactions: Vec::new(),
            rounded: Vec::new(),
        },
    };
    let substance = if volume.is_some() { "mole" } else { "item" };
    let species = net
        .species
        .iter()
        .map(|s| Species {
            id: s.name.clone(),
            name: None,
            compartment: compartment.clone(),
            initial: Some(match volume {
                Some(_) => Initial::Concentration(s.initial as f64 / net.omega),
                None => Initial::Amount(s.initial as f64),
            }),
            substance_units: None,
            has_only_substance_units: volume.is_none(),
            boundary_condition: s.clamped,
            constant: false,
            conversion_factor: None,
            notes: volume.map(|_| format!("{} molecules at the start.", s.initial)),
            loc: at(),
        })
        .collect();
    let parameters = net
        .params
        .iter()
        .map(|p| Parameter {
            id: p.name.clone(),
            name: None,
            value: Some(p.value.value),
            units: Some(x.unit(p.value.dim)),
            constant: true,
            notes: None,
            loc: at(),
        })
        .collect();
    let mut reactions = Vec::new();
    for r in &net.reactions {
        reactions.push(x.reaction(r, rate_of(&steps, r))?);
    }
    let function_definitions = Builtin::ALL
        .into_iter()
        .filter(|b| x.builtins.contains(b.name()))
        .map(Builtin::definition)
        .collect();
    let compartment = Compartment {
        id: compartment,
        name: None,
        spatial_dimensions: Some(3.0),
        size: Some(volume.unwrap_or(1.0)),
        units: Some("litre".into()),
        constant: true,
        notes: volume.is_none().then(|| {
            "Nominal: the network is in molecule counts without a volume, so no law reads this size."
                .to_string()
        }),
        loc: at(),
    };
    let file_name = std::path::Path::new(&net.file)
        .file_name()
        .map_or(net.file.clone(), |f| f.to_string_lossy().into_owned());
    let notes = format!(
        "Exported by copyloop from {file_name} (SBML Level 3 Version 2).\n\
         Deterministic reading: each kinetic law is the reaction's rate in {} per second, as SBML defines it.\n\
         Stochastic reading: copyloop runs every mass-action reaction with the propensity c·Π C(x, ν) given in the reaction's annotation (namespace {COPYLOOP_NS}), and every other law evaluated on molecule counts.\n\
         This model is for research; its output is not a basis for diagnosis or treatment.",
        if volume.is_some() { "mole" } else { "molecules" }
    );
    let model = Model {
        id: Some(model_id(&net.file)),
        name: Some(file_name),
        substance_units: Some(substance.into()),
        time_units: Some("second".into()),
        volume_units: Some("litre".into()),
        extent_units: Some(substance.into()),
        function_definitions,
        unit_definitions: std::mem::take(&mut x.units).into_values().collect(),
        compartments: vec![compartment],
        species,
        parameters,
        reactions,
        notes: Some(notes),
        ..Model::default()
    };
    Ok(Export {
        document: Document {
            level: 3,
            version: 2,
            packages: Vec::new(),
            model,
            loc: at(),
        },
        summary: x.summary,
    })
}

/// The network as SBML Level 3 Version 2 text, with what it holds.
pub fn sbml(net: &Network) -> Result<(String, ExportSummary)> {
    let e = document(net)?;
    Ok((super::write::sbml(&e.document), e.summary))
}

/// Refuses what this export does not write yet: several compartments, doses, infusions,
/// triggered events and laws that read the clock. Writing them partly would hand another tool
/// a different model, so the whole export stops with the reason.
fn refuse_time_forcing(net: &Network) -> Result<()> {
    let what = if net.compartments.len() > 1 {
        Some("more than one compartment")
    } else if !net.doses.is_empty() {
        Some("doses")
    } else if !net.infusions.is_empty() {
        Some("infusions")
    } else if !net.events.is_empty() {
        Some("`when` events")
    } else if net.reactions.iter().any(|r| match &r.kinetics {
        Kinetics::Law { law, .. } => law.time != crate::network::expr::TimeUse::None,
        _ => false,
    }) {
        Some("a law that reads `time`")
    } else {
        None
    };
    match what {
        Some(w) => Err(Error::Usage(format!(
            "{}: export to SBML does not write {w} yet; export a copy of the network without them",
            net.file
        ))),
        None => Ok(()),
    }
}
