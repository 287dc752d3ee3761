//! A validated SBML model → copyloop's [`Network`].
//!
//! The model is written as the network compiler's own syntax tree and compiled by it, so an
//! imported model is the same kind of network as a `.crn` file (sweeps and overrides address
//! its parameters and species by SBML id). The network is in molecule counts without a volume:
//! species amounts are counts, and a kinetic law — the reaction's rate in amount per time —
//! evaluated on counts is the propensity, the convention of the discrete stochastic models test
//! suite (Evans, Gillespie & Wilkinson 2008, Bioinformatics 24:285). A species whose symbol is
//! a concentration is written as its count divided by its compartment's size, so the law keeps
//! its meaning in both the stochastic and the deterministic reading.
//!
//! Laws that are a constant times one count of each distinct reactant (`k·A·B`, `k·A`, `k`)
//! become mass-action reactions with that constant as the stochastic constant; both readings are
//! unchanged by this. Every other law stays a law. Boundary and constant species are clamped;
//! a boundary species is not listed as a reactant of a law, so it never gates one.
//!
//! What the network cannot hold yet is refused with [`ErrorKind::NotYet`]: rules, events,
//! `time` in laws, non-integer amounts or stoichiometries, mole-based substance units,
//! conversion factors, reversible reactions with a general law, and MathML operators beyond
//! `+ − × ÷ ^ exp ln min max`.

use super::error::{ErrorKind, Loc, SbmlError};
use super::initial::{initial_values, symbol_is_amount, InitialValues};
use super::math::{Math, MathKind, Op, SBML_AVOGADRO};
use super::model::{Document, Model, Reaction, Symbol};
use crate::error::{Error, Span};
use crate::network::parser::{Ast, BinOp, Expr, Item, Literal, Name, Operand, Rate, Step, Term};
use crate::network::{compile, Kinetics, Network, Overrides, Quantity};
use std::collections::HashMap;

/// Compiles `doc` (read from `file`, whose text is `text`) with `overrides`.
pub fn network(
    file: &str,
    text: &str,
    doc: &Document,
    overrides: &Overrides,
) -> Result<Network, Error> {
    let diag = |e: SbmlError| Error::Input(vec![e.diagnostic(file, text)]);
    let ast = ast(file, text, doc).map_err(diag)?;
    let mut net = compile(&std::sync::Arc::new(ast), overrides).map_err(Error::Input)?;
    // Show each law as the SBML formula it came from.
    let shown: HashMap<&str, String> = doc
        .model
        .reactions
        .iter()
        .filter_map(|r| {
            Some((
                r.id.as_str(),
                r.kinetic_law.as_ref()?.math.as_ref()?.to_string(),
            ))
        })
        .collect();
    for r in &mut net.reactions {
        if let Kinetics::Law { law, .. } = &mut r.kinetics {
            if let Some(t) = shown.get(r.label.as_str()) {
                law.text = t.clone();
            }
        }
    }
    Ok(net)
}

fn not_yet(element: &str, id: Option<&str>, loc: Loc, message: impl Into<String>) -> SbmlError {
    SbmlError::new(
        ErrorKind::NotYet {
            message: message.into(),
        },
        element,
        id,
        loc,
    )
}

fn invalid(element: &str, id: Option<&str>, loc: Loc, message: impl Into<String>) -> SbmlError {
    SbmlError::new(
        ErrorKind::Invalid {
            message: message.into(),
        },
        element,
        id,
        loc,
    )
}

fn span(loc: Loc) -> Span {
    Span::new(loc.line, loc.col, 1)
}

fn bare(value: f64, loc: Loc) -> Literal {
    Literal {
        quantity: Quantity::bare(value),
        bare: true,
        unit_factor: 1.0,
        span: span(loc),
    }
}

fn name(text: &str, loc: Loc) -> Name {
    Name {
        text: text.to_string(),
        span: span(loc),
    }
}

/// The network compiler's syntax tree for the model.
pub fn ast(file: &str, text: &str, doc: &Document) -> Result<Ast, SbmlError> {
    let m = &doc.model;
    supported(doc)?;
    let values = initial_values(m)?;
    let mut items = Vec::new();
    for (i, s) in m.species.iter().enumerate() {
        let Some(amount) = values.species[i] else {
            return Err(invalid(
                "species",
                Some(&s.id),
                s.loc,
                "the species has no initial amount or concentration",
            ));
        };
        if !(amount >= 0.0 && amount.is_finite()) {
            return Err(invalid(
                "species",
                Some(&s.id),
                s.loc,
                format!("the initial amount {amount} is not a finite number of at least 0"),
            ));
        }
        if amount.fract() != 0.0 {
            return Err(not_yet(
                "species",
                Some(&s.id),
                s.loc,
                format!("the initial amount {amount} is not a whole number of molecules (real-valued amounts arrive with the network extension)"),
            ));
        }
        items.push(Item::Species {
            name: name(&s.id, s.loc),
            compartment: None,
            amount: bare(amount, s.loc),
            clamped: s.boundary_condition || s.constant,
        });
    }
    for (i, p) in m.parameters.iter().enumerate() {
        if p.id == crate::network::compile::GRID_TIME {
            return Err(not_yet(
                "parameter",
                Some(&p.id),
                p.loc,
                "the id `time` is the clock in copyloop's expressions; a parameter of that name is not supported yet",
            ));
        }
        if let Some(v) = values.parameters[i] {
            if !v.is_finite() {
                return Err(not_yet(
                    "parameter",
                    Some(&p.id),
                    p.loc,
                    format!("the value {v} is not a finite number"),
                ));
            }
            items.push(Item::Param {
                name: name(&p.id, p.loc),
                value: bare(v, p.loc),
            });
        }
    }
    let cx = Context {
        m,
        values: &values,
        symbols: m.symbols(),
    };
    for (j, r) in m.reactions.iter().enumerate() {
        items.push(Item::Step(cx.step(j, r)?));
    }
    Ok(Ast {
        file: file.to_string(),
        source: text.to_string(),
        items,
    })
}

/// Refuses what the current network cannot hold.
fn supported(doc: &Document) -> Result<(), SbmlError> {
    let m = &doc.model;
    if let Some(r) = m.rules.first() {
        let element = match r.kind {
            super::model::RuleKind::Assignment => "assignmentRule",
            _ => "rateRule",
        };
        return Err(not_yet(
            element,
            r.variable.as_deref(),
            r.loc,
            "assignment and rate rules (they arrive with the network extension)",
        ));
    }
    if let Some(e) = m.events.first() {
        return Err(not_yet(
            "event",
            e.id.as_deref(),
            e.loc,
            "events (they arrive with the network extension)",
        ));
    }
    if let Some(cf) = &m.conversion_factor {
        return Err(not_yet(
            "model",
            m.id.as_deref(),
            m.loc,
            format!("the conversion factor `{cf}`"),
        ));
    }
    for s in &m.species {
        if let Some(cf) = &s.conversion_factor {
            return Err(not_yet(
                "species",
                Some(&s.id),
                s.loc,
                format!("the conversion factor `{cf}`"),
            ));
        }
        if !substance_is_items(m, doc.level, s.substance_units.as_deref()) {
            return Err(not_yet(
                "species",
                Some(&s.id),
                s.loc,
                "substance units that are not items or dimensionless, or not declared (mole-based amounts are converted with the network extension)",
            ));
        }
    }
    Ok(())
}

/// Whether the substance unit of a species (its own, else the model's, else Level 2's default
/// `substance`, which is mole unless the model redefines it) counts items. A Level 3 model that
/// declares no substance unit has amounts of no known unit, which are not read as counts.
fn substance_is_items(m: &Model, level: u32, own: Option<&str>) -> bool {
    let default = (level == 2).then_some("substance");
    let Some(unit) = own.or(m.substance_units.as_deref()).or(default) else {
        return false;
    };
    if let Some(d) = m.unit_definitions.iter().find(|d| d.id == unit) {
        return matches!(d.units.as_slice(), [u] if (u.kind == "item" || u.kind == "dimensionless")
            && u.exponent == 1.0 && u.multiplier * 10f64.powi(u.scale) == 1.0);
    }
    matches!(unit, "item" | "dimensionless")
}

struct Context<'m> {
    m: &'m Model,
    values: &'m InitialValues,
    symbols: HashMap<&'m str, Symbol>,
}

/// A law in monomial form: factor · Π params^power · Π species, each species once.
struct Monomial {
    factor: f64,
    params: Vec<(usize, i32)>,
    species: Vec<usize>,
}

impl Context<'_> {
    fn species_index(&self, id: &str) -> usize {
        match self.symbols.get(id) {
            Some(Symbol::Species(i)) => *i,
            _ => unreachable!("the validator checked species references"),
        }
    }

    /// Whether a rule or an event changes `id` during the run.
    fn varied(&self, id: &str) -> bool {
        self.m
            .rules
            .iter()
            .any(|r| r.variable.as_deref() == Some(id))
            || self
                .m
                .events
                .iter()
                .any(|e| e.assignments.iter().any(|a| a.variable == id))
    }

    /// One side of a reaction: (species, whole stoichiometry) in file order.
    fn side(
        &self,
        j: usize,
        r: &Reaction,
        products: bool,
    ) -> Result<Vec<(usize, u32, Loc)>, SbmlError> {
        let offset = if products { r.reactants.len() } else { 0 };
        let refs = if products { &r.products } else { &r.reactants };
        let mut out: Vec<(usize, u32, Loc)> = Vec::new();
        for (k, s) in refs.iter().enumerate() {
            let varied = s.id.as_deref().is_some_and(|id| self.varied(id));
            if s.stoichiometry_math.is_some() || varied {
                return Err(not_yet(
                    "speciesReference",
                    Some(&r.id),
                    s.loc,
                    "a stoichiometry that changes during the run",
                ));
            }
            let Some(n) = self.values.stoichiometries[j][offset + k] else {
                return Err(invalid(
                    "speciesReference",
                    Some(&r.id),
                    s.loc,
                    format!("the stoichiometry of `{}` is not set", s.species),
                ));
            };
            if !(n >= 0.0 && n.fract() == 0.0 && n <= u32::MAX as f64) {
                return Err(not_yet(
                    "speciesReference",
                    Some(&r.id),
                    s.loc,
                    format!("the stoichiometry {n} is not a whole number of at least 0"),
                ));
            }
            if n == 0.0 {
                continue;
            }
            let i = self.species_index(&s.species);
            match out.iter_mut().find(|e| e.0 == i) {
                Some(e) => e.1 += n as u32,
                None => out.push((i, n as u32, s.loc)),
            }
        }
        Ok(out)
    }

    fn step(&self, j: usize, r: &Reaction) -> Result<Step, SbmlError> {
        let law = r
            .kinetic_law
            .as_ref()
            .and_then(|k| k.math.as_ref())
            .ok_or_else(|| {
                invalid(
                    "reaction",
                    Some(&r.id),
                    r.loc,
                    "the reaction has no kinetic law, so its rate is undefined",
                )
            })?;
        let locals: HashMap<&str, (Option<f64>, Loc)> = r
            .kinetic_law
            .iter()
            .flat_map(|k| &k.local_parameters)
            .map(|p| (p.id.as_str(), (p.value, p.loc)))
            .collect();
        let reactants = self.side(j, r, false)?;
        let products = self.side(j, r, true)?;
        let term = |&(i, n, loc): &(usize, u32, Loc)| Term {
            coefficient: n,
            species: name(&self.m.species[i].id, loc),
            span: span(loc),
        };
        let mass = self.monomial(law, &locals)?.filter(|mo| {
            let mut want: Vec<usize> = reactants.iter().filter(|e| e.1 == 1).map(|e| e.0).collect();
            let mut got = mo.species.clone();
            want.sort_unstable();
            got.sort_unstable();
            reactants.iter().all(|e| e.1 == 1)
                && want == got
                && mo.factor >= 0.0
                && mo.factor.is_finite()
        });
        let forward = match mass {
            Some(Monomial { factor, params, .. }) if params.is_empty() => {
                Rate::Constant(Operand::Literal(bare(factor, law.loc)))
            }
            Some(Monomial { factor, params, .. })
                if factor == 1.0 && params.len() == 1 && params[0].1 == 1 =>
            {
                Rate::Constant(Operand::Param(name(
                    &self.m.parameters[params[0].0].id,
                    law.loc,
                )))
            }
            _ => {
                if r.reversible {
                    return Err(not_yet(
                        "reaction",
                        Some(&r.id),
                        r.loc,
                        "a reversible reaction whose law is not mass action (its net rate needs the deterministic reading)",
                    ));
                }
                Rate::Law(self.expr(law, &locals, &r.id)?)
            }
        };
        // A boundary species is never consumed; leaving it out of a law's reactants keeps it from
        // gating the law.
        let is_law = matches!(forward, Rate::Law(_));
        let shown: Vec<Term> = reactants
            .iter()
            .filter(|e| !(is_law && self.m.species[e.0].boundary_condition))
            .map(term)
            .collect();
        Ok(Step {
            label: name(&r.id, r.loc),
            reactants: shown,
            products: products.iter().map(term).collect(),
            reversible: false,
            forward,
            reverse: None,
            span: span(r.loc),
        })
    }

    /// The size of a species' compartment, when its symbol is a concentration.
    fn divisor(&self, i: usize, loc: Loc) -> Result<Option<f64>, SbmlError> {
        if symbol_is_amount(self.m, i) {
            return Ok(None);
        }
        let s = &self.m.species[i];
        let k = self
            .m
            .compartments
            .iter()
            .position(|c| c.id == s.compartment)
            .expect("validated");
        match self.values.compartments[k] {
            Some(v) => Ok(Some(v)),
            None => Err(invalid(
                "species",
                Some(&s.id),
                loc,
                format!(
                    "compartment `{}` has no size, so the concentration of `{}` is undefined",
                    s.compartment, s.id
                ),
            )),
        }
    }

    /// The law as a monomial in the species counts, if it is one.
    fn monomial(
        &self,
        m: &Math,
        locals: &HashMap<&str, (Option<f64>, Loc)>,
    ) -> Result<Option<Monomial>, SbmlError> {
        let one = || Monomial {
            factor: 1.0,
            params: Vec::new(),
            species: Vec::new(),
        };
        let times = |mut a: Monomial, b: Monomial| {
            a.factor *= b.factor;
            for (p, k) in b.params {
                match a.params.iter_mut().find(|e| e.0 == p) {
                    Some(e) => e.1 += k,
                    None => a.params.push((p, k)),
                }
            }
            a.params.retain(|e| e.1 != 0);
            a.species.extend(b.species);
            a
        };
        Ok(Some(match &m.kind {
            MathKind::Number(v) => Monomial {
                factor: *v,
                ..one()
            },
            MathKind::Avogadro => Monomial {
                factor: SBML_AVOGADRO,
                ..one()
            },
            MathKind::Ident(id) => {
                if let Some((v, _)) = locals.get(id.as_str()) {
                    return Ok(v.map(|v| Monomial { factor: v, ..one() }));
                }
                match self.symbols.get(id.as_str()) {
                    Some(Symbol::Compartment(k)) => match self.values.compartments[*k] {
                        Some(v) => Monomial { factor: v, ..one() },
                        None => return Ok(None),
                    },
                    Some(Symbol::Parameter(p)) => Monomial {
                        params: vec![(*p, 1)],
                        ..one()
                    },
                    Some(Symbol::Species(i)) => {
                        let d = self.divisor(*i, m.loc)?;
                        Monomial {
                            factor: d.map_or(1.0, |v| 1.0 / v),
                            species: vec![*i],
                            ..one()
                        }
                    }
                    _ => return Ok(None),
                }
            }
            MathKind::Apply(Op::Times, args) => {
                let mut acc = one();
                for a in args {
                    match self.monomial(a, locals)? {
                        Some(x) => acc = times(acc, x),
                        None => return Ok(None),
                    }
                }
                acc
            }
            MathKind::Apply(Op::Divide, args) => {
                let (Some(a), Some(b)) = (
                    self.monomial(&args[0], locals)?,
                    self.monomial(&args[1], locals)?,
                ) else {
                    return Ok(None);
                };
                if !b.species.is_empty() || b.factor == 0.0 {
                    return Ok(None);
                }
                let inv = Monomial {
                    factor: 1.0 / b.factor,
                    params: b.params.iter().map(|&(p, k)| (p, -k)).collect(),
                    species: Vec::new(),
                };
                times(a, inv)
            }
            _ => return Ok(None),
        }))
    }

    /// The law as the network compiler's expression.
    fn expr(
        &self,
        m: &Math,
        locals: &HashMap<&str, (Option<f64>, Loc)>,
        owner: &str,
    ) -> Result<Expr, SbmlError> {
        let s = span(m.loc);
        let num = |v: f64| Expr::Number(bare(v, m.loc));
        let bin = |op: BinOp, a: Expr, b: Expr| Expr::Binary(op, Box::new(a), Box::new(b), s);
        let call = |f: &str, a: Vec<Expr>| Expr::Call(name(f, m.loc), a, s);
        let unsupported = |what: String| Err(not_yet(element_of(m), Some(owner), m.loc, what));
        Ok(match &m.kind {
            MathKind::Number(v) => num(*v),
            MathKind::Boolean(_) => return unsupported("truth values in a kinetic law".into()),
            MathKind::Avogadro => num(SBML_AVOGADRO),
            MathKind::Time => {
                return unsupported(
                    "time in a kinetic law (it arrives with the network extension)".into(),
                )
            }
            MathKind::Ident(id) => {
                if let Some((v, loc)) = locals.get(id.as_str()) {
                    return match v {
                        Some(v) => Ok(num(*v)),
                        None => Err(invalid(
                            "localParameter",
                            Some(id),
                            *loc,
                            "the local parameter has no value",
                        )),
                    };
                }
                match self.symbols.get(id.as_str()) {
                    Some(Symbol::Compartment(k)) => match self.values.compartments[*k] {
                        Some(v) => num(v),
                        None => {
                            return Err(invalid(
                                "ci",
                                Some(owner),
                                m.loc,
                                format!("compartment `{id}` has no size"),
                            ))
                        }
                    },
                    Some(Symbol::Parameter(p)) => {
                        if self.values.parameters[*p].is_none() {
                            return Err(invalid(
                                "ci",
                                Some(owner),
                                m.loc,
                                format!("parameter `{id}` has no value"),
                            ));
                        }
                        Expr::Name(name(id, m.loc))
                    }
                    Some(Symbol::Species(i)) => {
                        let x = Expr::Name(name(id, m.loc));
                        match self.divisor(*i, m.loc)? {
                            Some(v) => bin(BinOp::Div, x, num(v)),
                            None => x,
                        }
                    }
                    _ => {
                        return unsupported(format!(
                            "`{id}` (a reaction or species reference) in a kinetic law"
                        ))
                    }
                }
            }
            MathKind::Apply(op, args) => {
                let a: Vec<Expr> = args
                    .iter()
                    .map(|x| self.expr(x, locals, owner))
                    .collect::<Result<_, _>>()?;
                let fold = |op: BinOp, unit: f64, a: Vec<Expr>| {
                    let mut it = a.into_iter();
                    match it.next() {
                        None => num(unit),
                        Some(first) => it.fold(first, |acc, x| bin(op, acc, x)),
                    }
                };
                match op {
                    Op::Plus => fold(BinOp::Add, 0.0, a),
                    Op::Times => fold(BinOp::Mul, 1.0, a),
                    Op::Minus if a.len() == 1 => Expr::Neg(Box::new(a.into_iter().next().unwrap()), s),
                    Op::Minus => fold(BinOp::Sub, 0.0, a),
                    Op::Divide => fold(BinOp::Div, 1.0, a),
                    Op::Power => fold(BinOp::Pow, 1.0, a),
                    Op::Exp => call("exp", a),
                    Op::Ln => call("ln", a),
                    Op::Max | Op::Min if a.len() == 1 => a.into_iter().next().unwrap(),
                    Op::Max => call("max", a),
                    Op::Min => call("min", a),
                    other => {
                        return unsupported(format!(
                            "the MathML operator <{}> in a kinetic law (it joins the law evaluator with the network extension)",
                            other.name()
                        ))
                    }
                }
            }
            MathKind::Piecewise { .. } => return unsupported("piecewise in a kinetic law".into()),
            MathKind::Call(..) | MathKind::Delay(..) | MathKind::RateOf(..) => {
                unreachable!("calls are expanded and delay/rateOf refused before mapping")
            }
        })
    }
}

fn element_of(m: &Math) -> &'static str {
    match m.kind {
        MathKind::Number(_) => "cn",
        MathKind::Ident(_) => "ci",
        MathKind::Time | MathKind::Avogadro => "csymbol",
        MathKind::Piecewise { .. } => "piecewise",
        _ => "apply",
    }
}
