//! A validated SBML model → copyloop's [`Network`].
//!
//! The model is written as the network compiler's own syntax tree and compiled by it, so an
//! imported model is the same kind of network as a `.crn` file (sweeps and overrides address
//! its parameters and species by SBML id). Two scales:
//!
//! - **Counts**: substance units `item` or `dimensionless`. The network has no volume; amounts
//!   are molecule counts and a kinetic law — the reaction's rate in amount per time — evaluated
//!   on counts is the propensity, the convention of the discrete stochastic models test suite
//!   (Evans, Gillespie & Wilkinson 2008, Bioinformatics 24:285). A species whose symbol is a
//!   concentration is written as its count divided by its compartment's size.
//! - **Volume**: substance unit `mole`, one compartment of V litres, time in seconds (every
//!   unit exactly these). The network gets that volume, Ω = N_A·V, and the model's units are
//!   copyloop's canonical ones: concentrations in mol/L, amounts in mol (a count is amount·N_A),
//!   parameters converted by the units they declare. A law L in mol/s is the network law L/V in
//!   mol/L/s, whose propensity is Ω·L/V = N_A·L: the same convention, amounts being counts/N_A.
//!   A law written `V · E` (the compartment as a factor of the product) becomes E itself.
//!
//! Laws that are a constant times one of each distinct reactant (`k·A·B`, `k·A`, `k`) become
//! mass-action reactions with that constant (the stochastic constant in counts, the macroscopic
//! one in a volume); both readings are unchanged by this. Every other law stays a law (`k·A²`
//! stays `k·A²`) — unless the reaction carries copyloop's own reading ([`Reading`], written by
//! the exporter): then a law that is exactly the deterministic law of that reading's constant
//! is compiled as copyloop's mass action with that constant (for `2 A → …`, propensity
//! c·A(A−1)/2). A reading that does not match the law is ignored with a warning; a reaction
//! marked `<copyloop:law/>` keeps its law as a law. Calls of a
//! function definition that is one of the network language's own functions stay calls of it.
//! Boundary and constant species are clamped; a boundary species is not listed as a reactant
//! of a law, so it never gates one (except in a law step marked `<copyloop:law/>`, which
//! copyloop gates by all its reactants, as it does its own law steps).
//!
//! - **Own units**: any other model (substance units that are not items, dimensionless or
//!   mole, none declared, mixed, mole-based amounts in several compartments or beyond 2^50
//!   molecules, a volume or time unit other than the litre and the second, fractional amounts,
//!   a reversible reaction with a general law) is read at the counts scale in its own units:
//!   amounts real-valued in its substance unit, time in its time unit. The deterministic
//!   method runs it; stochastic methods refuse it, naming the reason
//!   ([`AmountUnit::stochastic_refusal`]).
//!
//! Events become the network's own events (map/events.rs); assignment rules on parameters and
//! on species no reaction lists, and rate rules on parameters and free species, map as
//! map/rules.rs says. A conversion factor (the species' own, else the model's; SBML Level 3
//! core §4.6.7 \[M\]) multiplies the species' stoichiometry in every reaction, so the species
//! changes by factor × stoichiometry per reaction event; a reaction with a scaled reactant keeps
//! its law as a law (its rate is unchanged, only the change is scaled). What the network cannot
//! hold yet is refused with [`ErrorKind::NotYet`]: other rules, non-integer stoichiometries
//! (a stoichiometry times its conversion factor included), MathML operators beyond
//! `abs cosh sinh tanh eq neq not xor` (written exactly in the evaluator's own) and
//! `+ − × ÷ ^ exp ln min max sin cos`, comparisons, `and`, `or` and piecewise with an
//! `otherwise` in laws.

use super::builtins::{self, Builtin};
use super::error::{ErrorKind, Loc, SbmlError};
use super::initial::{initial_values, symbol_is_amount, InitialValues};
use super::math::{Math, MathKind, Op, SBML_AVOGADRO};
use super::model::{Document, Model, Reaction, Reading, ReadingConstant, ReadingKind, Symbol};
use super::monomial::{Factor, Monomial};
use super::units;
use crate::error::{Diagnostic, Error, Span};
use crate::network::parser::{Ast, BinOp, Expr, Item, Literal, Name, Operand, Rate, Step, Term};
use crate::network::units::{macroscopic_constant, omega, stochastic_constant};
use crate::network::{
    compile, AmountUnit, Dim, Kinetics, Network, Overrides, Quantity, AVOGADRO, MAX_COUNT,
};
use std::collections::HashMap;

mod events;
pub mod rules;

/// The scale an SBML model is read at.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Scale {
    /// Amounts are molecule counts; no volume.
    Counts,
    /// Amounts in mol, in the one compartment (by index) of `litres` L.
    Volume { compartment: usize, litres: f64 },
}

/// The syntax tree of a model and what goes with it.
#[derive(Clone, Debug)]
pub struct Mapped {
    pub ast: Ast,
    pub scale: Scale,
    /// Each law's formula as copyloop reads it, by reaction id, for display.
    pub shown: HashMap<String, String>,
    /// Readings that were ignored, and the like.
    pub warnings: Vec<SbmlError>,
    /// Each species' initial amount in the model's own substance unit, exactly.
    pub amounts: Vec<f64>,
    /// The unit amounts are reported in, and why the counts cannot be simulated stochastically
    /// where they cannot.
    pub unit: AmountUnit,
}

/// Compiles `doc` (read from `file`, whose text is `text`) with `overrides`.
pub fn network(
    file: &str,
    text: &str,
    doc: &Document,
    overrides: &Overrides,
) -> Result<Network, Error> {
    let diag = |e: SbmlError| Error::Input(vec![e.diagnostic(file, text)]);
    let mapped = ast(file, text, doc).map_err(diag)?;
    let compiled = compile(&std::sync::Arc::new(mapped.ast.clone()), overrides);
    let (mapped, mut net) = match (compiled, mapped.scale) {
        (Ok(net), _) => (mapped, net),
        (Err(d), Scale::Counts) => return Err(Error::Input(d)),
        // The molecule counts of a mole-based model do not fit the network (too many
        // molecules, or units the compiler does not check): the model is read in its own
        // units, for the deterministic method only.
        (Err(d), Scale::Volume { .. }) => {
            let why = format!(
                "its amounts in mol cannot be held as molecule counts ({}); simulate it with `--method ode`",
                d[0].message
            );
            let mapped = ast_at(file, text, doc, Some(why)).map_err(diag)?;
            let net = compile(&std::sync::Arc::new(mapped.ast.clone()), overrides)
                .map_err(|d| Error::Input(d.into_iter().map(units_not_yet).collect()))?;
            (mapped, net)
        }
    };
    for r in &mut net.reactions {
        if let Kinetics::Law { law, .. } = &mut r.kinetics {
            if let Some(t) = mapped.shown.get(r.label.as_str()) {
                law.text = t.clone();
            }
        }
    }
    // Real-valued amounts for the deterministic engine (a species whose amount is overridden
    // keeps the compiler's value): in the model's own unit at the counts scale; in molecules
    // at the volume scale, where a count that is whole to 1e-9 stays the compiler's.
    for (s, &a) in net.species.iter_mut().zip(&mapped.amounts) {
        if overrides.values.iter().any(|(n, _)| *n == s.name) {
            continue;
        }
        let exact = match mapped.scale {
            Scale::Counts => a,
            Scale::Volume { .. } => a * AVOGADRO,
        };
        if (exact - s.initial as f64).abs() > 1e-9 * exact.abs() {
            s.initial_amount = exact;
        }
    }
    net.amount = mapped.unit.clone();
    net.warnings.extend(
        mapped
            .warnings
            .iter()
            .map(|w| w.diagnostic(file, text).warning()),
    );
    Ok(net)
}

/// The factor from a count of an imported network to an amount in the model's own substance
/// unit: 1/N_A for a mole-based model read in molecule counts (a network with a volume), 1
/// where the network holds the model's own amounts.
pub fn model_amount_per_count(net: &Network) -> f64 {
    match net.volume_l {
        Some(_) => 1.0 / AVOGADRO,
        None => 1.0 / net.amount.count_per_amount,
    }
}

/// The factor from parameter `id`'s value in the model's own unit to the value the network
/// holds (its canonical unit in a volume-scale model; 1 where the model is read in its own
/// units).
pub fn param_unit_factor(doc: &Document, net: &Network, id: &str) -> f64 {
    let m = &doc.model;
    match (net.volume_l, m.parameters.iter().find(|p| p.id == id)) {
        (Some(_), Some(p)) => p
            .units
            .as_deref()
            .and_then(|u| units::canonical(m, doc.level, u).ok())
            .map_or(1.0, |(_, f)| f),
        _ => 1.0,
    }
}

/// A compile error of a volume-scale model: its units do not check in the network compiler,
/// which reads such models with their declared units until the network extension reads laws
/// without dimensions.
fn units_not_yet(mut d: Diagnostic) -> Diagnostic {
    d.message = format!(
        "not supported yet: a mole-based model whose counts or units the network cannot hold yet (it reads such a model in molecule counts, with the units the model declares; the rest arrives with the network extension): {}",
        d.message
    );
    d
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

fn literal(q: Quantity, unit_factor: f64, loc: Loc) -> Literal {
    Literal {
        quantity: q,
        bare: false,
        unit_factor,
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
pub fn ast(file: &str, text: &str, doc: &Document) -> Result<Mapped, SbmlError> {
    ast_at(file, text, doc, None)
}

/// The syntax tree at the scale the model's units give, or in the model's own units (the
/// counts scale, deterministic only) when `own_units` says why it must be.
fn ast_at(
    file: &str,
    text: &str,
    doc: &Document,
    own_units: Option<String>,
) -> Result<Mapped, SbmlError> {
    let assigned = rules::check(&doc.model)?;
    let values = initial_values(&doc.model)?;
    let doc = &rules::substituted(doc, &assigned);
    let m = &doc.model;
    let rate_ruled: Vec<String> = m
        .rules
        .iter()
        .filter(|r| r.kind == super::model::RuleKind::Rate)
        .filter_map(|r| r.variable.clone())
        .collect();
    let (scale, mut refusal) = match own_units {
        Some(why) => (Scale::Counts, Some(why)),
        None if rules::has_rate_rules(m) => (Scale::Counts, rules::rate_rule_refusal(m)),
        None => scale(doc, &values)?,
    };
    let mut amounts = Vec::with_capacity(m.species.len());
    let mut items = Vec::new();
    if let Scale::Volume {
        compartment,
        litres,
    } = scale
    {
        let c = &m.compartments[compartment];
        items.push(Item::Volume(literal(
            Quantity::new(litres, Dim::VOLUME),
            1.0,
            c.loc,
        )));
    }
    for (i, s) in m.species.iter().enumerate() {
        // A species set by an assignment rule is computed where it is read (map/rules.rs).
        if assigned.contains(&s.id) {
            continue;
        }
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
        amounts.push(amount);
        let amount = match scale {
            Scale::Counts if amount.fract() != 0.0 || amount > MAX_COUNT as f64 => {
                refusal.get_or_insert_with(|| {
                    format!(
                        "the initial amount {amount} of `{}` is not a whole number of molecules, so the model runs with `--method ode` only",
                        s.id
                    )
                });
                // The deterministic engine starts from the exact amount; the compiler's
                // count is never simulated.
                bare(amount.round().min(MAX_COUNT as f64), s.loc)
            }
            Scale::Counts => bare(amount, s.loc),
            // mol in V litres: a concentration in mol/L, rounded to whole molecules by the
            // compiler.
            Scale::Volume { litres, .. } => {
                literal(Quantity::new(amount / litres, Dim::CONC), 1.0, s.loc)
            }
        };
        items.push(Item::Species {
            name: name(&s.id, s.loc),
            compartment: None,
            amount,
            // A species changed by its rate rule is no reaction's (map/rules.rs), so only the
            // rule's own step changes it.
            clamped: (s.boundary_condition || s.constant) && !rate_ruled.contains(&s.id),
        });
    }
    let mut param_dims = vec![Dim::NONE; m.parameters.len()];
    for (i, p) in m.parameters.iter().enumerate() {
        if p.id == crate::network::compile::GRID_TIME {
            return Err(not_yet(
                "parameter",
                Some(&p.id),
                p.loc,
                "the id `time` is the clock in copyloop's expressions; a parameter of that name is not supported yet",
            ));
        }
        if assigned.contains(&p.id) {
            continue;
        }
        let Some(v) = values.parameters[i] else {
            continue;
        };
        if rate_ruled.contains(&p.id) {
            // A state of the network, changed by its rule's law step.
            if !(v >= 0.0 && v.is_finite()) {
                return Err(not_yet(
                    "parameter",
                    Some(&p.id),
                    p.loc,
                    format!("a rate rule on a parameter whose initial value {v} is below 0"),
                ));
            }
            if v.fract() != 0.0 {
                refusal.get_or_insert_with(|| {
                    format!("the rate-rule parameter `{}` is not a whole number", p.id)
                });
            }
            amounts.push(v);
            items.push(Item::Species {
                name: name(&p.id, p.loc),
                compartment: None,
                amount: bare(v.round().min(MAX_COUNT as f64), p.loc),
                clamped: false,
            });
            continue;
        }
        if !v.is_finite() {
            return Err(not_yet(
                "parameter",
                Some(&p.id),
                p.loc,
                format!("the value {v} is not a finite number"),
            ));
        }
        let value = match (scale, &p.units) {
            (Scale::Volume { .. }, Some(u)) => {
                let (dim, f) = units::canonical(m, doc.level, u)
                    .map_err(|e| not_yet("parameter", Some(&p.id), p.loc, e))?;
                param_dims[i] = dim;
                if dim.is_none() && f == 1.0 {
                    // A pure number, as a bare number of the network language is.
                    bare(v, p.loc)
                } else {
                    literal(Quantity::new(v * f, dim), f, p.loc)
                }
            }
            _ => bare(v, p.loc),
        };
        items.push(Item::Param {
            name: name(&p.id, p.loc),
            value,
        });
    }
    let cx = Context {
        m,
        level: doc.level,
        values: &values,
        symbols: m.symbols(),
        scale,
        param_dims,
        builtins: builtins::recognised(m),
    };
    let mut shown = HashMap::new();
    let mut warnings = Vec::new();
    for (j, r) in m.reactions.iter().enumerate() {
        let (step, text, warning) = cx.step(j, r)?;
        if r.reversible && matches!(step.forward, Rate::Law(_)) {
            refusal.get_or_insert_with(|| {
                format!(
                    "reaction `{}` is reversible and its law is not mass action, so the law is a net rate, not a propensity",
                    r.id
                )
            });
        }
        if let Some(t) = text {
            shown.insert(r.id.clone(), t);
        }
        warnings.extend(warning);
        items.push(Item::Step(step));
    }
    for r in &m.rules {
        items.extend(cx.rate_rule(r)?.map(Item::Step));
    }
    cx.equal_priorities()?;
    for (k, e) in m.events.iter().enumerate() {
        items.extend(cx.event(k, e)?.map(Item::When));
    }
    Ok(Mapped {
        ast: Ast {
            file: file.to_string(),
            source: text.to_string(),
            items,
        },
        scale,
        shown,
        warnings,
        amounts,
        unit: amount_unit(doc, scale, refusal),
    })
}

/// The unit the model's amounts are reported in.
fn amount_unit(doc: &Document, scale: Scale, refusal: Option<String>) -> AmountUnit {
    let m = &doc.model;
    match scale {
        // Read in molecule counts, reported as a `.crn` file's are.
        Scale::Volume { .. } => AmountUnit::molecules(),
        Scale::Counts => {
            let mut own: Vec<&str> = m
                .species
                .iter()
                .map(|s| {
                    s.substance_units
                        .as_deref()
                        .or(m.substance_units.as_deref())
                        .unwrap_or(if doc.level == 2 { "substance" } else { "" })
                })
                .collect();
            own.sort_unstable();
            own.dedup();
            let counts = m.species.iter().all(|s| {
                matches!(
                    substance(m, doc.level, s.substance_units.as_deref()),
                    Substance::Items
                )
            });
            let name = match own.as_slice() {
                _ if counts => "molecules".to_string(),
                [""] => "the model's amounts (no substance unit declared)".to_string(),
                [u] => (*u).to_string(),
                _ => "each species' own substance unit".to_string(),
            };
            AmountUnit {
                concentration_unit: format!("{name} per compartment size"),
                name,
                count_per_amount: 1.0,
                stochastic_refusal: refusal.map(|why| {
                    format!("this SBML model cannot run with a stochastic method: {why}")
                }),
            }
        }
    }
}

/// What a species' substance unit counts.
enum Substance {
    Items,
    Mole,
    Other,
    /// A Level 3 model that declares none.
    Undeclared,
}

/// The substance unit of species `own` (its own, else the model's, else Level 2's default
/// `substance`, which is mole unless the model redefines it). A Level 3 model that declares no
/// substance unit has amounts of no known unit.
fn substance(m: &Model, level: u32, own: Option<&str>) -> Substance {
    let default = (level == 2).then_some("substance");
    let Some(unit) = own.or(m.substance_units.as_deref()).or(default) else {
        return Substance::Undeclared;
    };
    match units::canonical(m, level, unit) {
        Ok((d, f)) if (d == Dim::COUNT || d.is_none()) && f == 1.0 => Substance::Items,
        Ok((d, f)) if d == Dim::CONC.times(Dim::VOLUME) && f == 1.0 => Substance::Mole,
        _ => Substance::Other,
    }
}

/// The scale of the model (see the module docs), and why its amounts cannot be simulated as
/// molecule counts where they are read in the model's own units instead.
fn scale(doc: &Document, values: &InitialValues) -> Result<(Scale, Option<String>), SbmlError> {
    let m = &doc.model;
    let level = doc.level;
    let kinds: Vec<Substance> = m
        .species
        .iter()
        .map(|s| substance(m, level, s.substance_units.as_deref()))
        .collect();
    let own = |why: String| Ok((Scale::Counts, Some(why)));
    if let Some(k) = kinds.iter().position(|k| matches!(k, Substance::Other)) {
        return own(format!(
            "the substance unit of `{}` is not item, dimensionless or mole, so its amounts are no molecule counts",
            m.species[k].id
        ));
    }
    if let Some(k) = kinds
        .iter()
        .position(|k| matches!(k, Substance::Undeclared))
    {
        return own(format!(
            "the amount of `{}` has no declared substance unit (Level 3 has no default), so it is no molecule count",
            m.species[k].id
        ));
    }
    let Some(k) = kinds.iter().position(|k| matches!(k, Substance::Mole)) else {
        return Ok((Scale::Counts, None));
    };
    if let Some(j) = kinds.iter().position(|k| matches!(k, Substance::Items)) {
        return own(format!(
            "`{}` is counted in items beside `{}` in mole",
            m.species[j].id, m.species[k].id
        ));
    }
    let [c] = m.compartments.as_slice() else {
        return own(
            "its amounts are in mole in more than one compartment (molecule counts of mole-based models are read in one compartment)".into(),
        );
    };
    if c.spatial_dimensions != Some(3.0) {
        return own(format!(
            "its amounts are in mole in compartment `{}`, whose spatialDimensions is not 3",
            c.id
        ));
    }
    let default = (level == 2).then_some("volume");
    let Some(unit) = c.units.as_deref().or(m.volume_units.as_deref()).or(default) else {
        return own(format!(
            "the volume unit of compartment `{}` is not declared",
            c.id
        ));
    };
    match units::canonical(m, level, unit) {
        Ok((d, f)) if d == Dim::VOLUME && f == 1.0 => {}
        _ => return own(format!("the volume unit `{unit}` is not the litre")),
    }
    if level == 3 {
        if let Some(t) = &m.time_units {
            match units::canonical(m, level, t) {
                Ok((d, f)) if d == Dim::TIME && f == 1.0 => {}
                _ => return own(format!("the time unit `{t}` is not the second")),
            }
        }
    }
    match values.compartments[0] {
        Some(v) if v > 0.0 && v.is_finite() => Ok((
            Scale::Volume {
                compartment: 0,
                litres: v,
            },
            None,
        )),
        _ => own(format!(
            "compartment `{}` has no positive, finite size",
            c.id
        )),
    }
}

/// A species (by index) on one side of a reaction, with its whole change and its reference's
/// position.
type SideTerm = (usize, u32, Loc);

struct Context<'m> {
    m: &'m Model,
    level: u32,
    values: &'m InitialValues,
    symbols: HashMap<&'m str, Symbol>,
    scale: Scale,
    /// Each global parameter's dimension as the syntax tree gives it.
    param_dims: Vec<Dim>,
    builtins: HashMap<String, Builtin>,
}

/// A kinetic law's local parameter: its value in canonical units, with its dimension when it
/// declares a unit in a volume-scale model.
#[derive(Clone, Copy)]
struct Local {
    value: Option<Quantity>,
    loc: Loc,
}

type Locals<'a> = HashMap<&'a str, Local>;

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

    fn volume(&self) -> Option<f64> {
        match self.scale {
            Scale::Counts => None,
            Scale::Volume { litres, .. } => Some(litres),
        }
    }

    /// The conversion factor of species `i` (its own, else the model's; SBML Level 3 core
    /// §4.6.7 and §4.13.6 \[M\]): the species changes by the factor times the stoichiometry at
    /// each reaction. `None` where there is none.
    fn conversion_factor(&self, i: usize, loc: Loc) -> Result<Option<f64>, SbmlError> {
        let s = &self.m.species[i];
        let Some(cf) = s
            .conversion_factor
            .as_deref()
            .or(self.m.conversion_factor.as_deref())
        else {
            return Ok(None);
        };
        let refuse = |why: String| Err(not_yet("speciesReference", Some(&s.id), loc, why));
        let Some(Symbol::Parameter(p)) = self.symbols.get(cf) else {
            unreachable!("the validator checked conversion factors")
        };
        if self.varied(cf) {
            return refuse(format!(
                "the conversion factor `{cf}` of `{}` changes during the run",
                s.id
            ));
        }
        match self.values.parameters[*p] {
            Some(f) if f.is_finite() => Ok(Some(f)),
            Some(f) => refuse(format!("the conversion factor `{cf}` is {f}, not finite")),
            None => Err(invalid(
                "parameter",
                Some(cf),
                self.m.parameters[*p].loc,
                format!("the conversion factor `{cf}` of `{}` has no value", s.id),
            )),
        }
    }

    /// One side of a reaction: (species, whole change, loc) in file order, and whether a
    /// conversion factor other than 1 scaled a stoichiometry. The change is the stoichiometry
    /// times the species' conversion factor; it must be a whole number.
    fn side(
        &self,
        j: usize,
        r: &Reaction,
        products: bool,
    ) -> Result<(Vec<SideTerm>, bool), SbmlError> {
        let offset = if products { r.reactants.len() } else { 0 };
        let refs = if products { &r.products } else { &r.reactants };
        let mut out: Vec<SideTerm> = Vec::new();
        let mut converted = false;
        for (k, s) in refs.iter().enumerate() {
            let named = s.id.as_deref().unwrap_or(&r.id);
            if let Some(id) = s.id.as_deref().filter(|id| self.varied(id)) {
                return Err(not_yet(
                    "speciesReference",
                    Some(named),
                    s.loc,
                    format!(
                        "the stoichiometry `{id}` of `{}` in reaction `{}`, which a rule or an event changes during the run (stoichiometries are supported where they stay constant after the initial assignments)",
                        s.species, r.id
                    ),
                ));
            }
            let from_math = match &s.stoichiometry_math {
                None => None,
                Some(x) => Some(self.constant_stoichiometry(x).map_err(|why| {
                    not_yet(
                        "stoichiometryMath",
                        Some(named),
                        x.loc,
                        format!(
                            "the stoichiometryMath of `{}` in reaction `{}` reads {why}, so it may change during the run (stoichiometries are supported where they stay constant)",
                            s.species, r.id
                        ),
                    )
                })?),
            };
            let Some(n) = from_math.or(self.values.stoichiometries[j][offset + k]) else {
                return Err(invalid(
                    "speciesReference",
                    Some(&r.id),
                    s.loc,
                    format!("the stoichiometry of `{}` is not set", s.species),
                ));
            };
            let i = self.species_index(&s.species);
            let clamped = self.m.species[i].boundary_condition || self.m.species[i].constant;
            let n = match self.conversion_factor(i, s.loc)? {
                Some(f) if f != 1.0 && !clamped => {
                    converted = true;
                    let c = n * f;
                    if !(c >= 0.0 && c.fract() == 0.0 && c <= u32::MAX as f64) {
                        return Err(not_yet(
                            "speciesReference",
                            Some(&r.id),
                            s.loc,
                            format!(
                                "the stoichiometry {n} of `{}` times its conversion factor {f} is {c}, not a whole number of at least 0",
                                s.species
                            ),
                        ));
                    }
                    c
                }
                _ => n,
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
            match out.iter_mut().find(|e| e.0 == i) {
                Some(e) => e.1 += n as u32,
                None => out.push((i, n as u32, s.loc)),
            }
        }
        Ok((out, converted))
    }

    /// The value of a Level 2 `stoichiometryMath` that stays constant: one reading only
    /// numbers, constants, and parameters, compartments and stoichiometries that no rule or
    /// event changes, evaluated on the initial values. Otherwise what it reads that may change.
    fn constant_stoichiometry(&self, x: &Math) -> Result<f64, String> {
        let mut changing = None;
        x.visit(&mut |e| match &e.kind {
            MathKind::Time => {
                changing.get_or_insert_with(|| "the time".to_string());
            }
            MathKind::Ident(id) => {
                let fixed = match self.symbols.get(id.as_str()) {
                    Some(Symbol::Parameter(_) | Symbol::Compartment(_)) => !self.varied(id),
                    Some(Symbol::SpeciesReference(..)) => !self.varied(id),
                    _ => false,
                };
                if !fixed {
                    changing.get_or_insert_with(|| format!("`{id}`"));
                }
            }
            _ => {}
        });
        if let Some(what) = changing {
            return Err(what);
        }
        let value = |id: &str| match self.symbols.get(id)? {
            Symbol::Parameter(p) => self.values.parameters[*p],
            Symbol::Compartment(c) => self.values.compartments[*c],
            Symbol::SpeciesReference(r, j) => self.values.stoichiometries[*r][*j],
            _ => None,
        };
        super::eval::eval(x, &value, 0.0)
            .map_err(|e| format!("a value it cannot evaluate ({})", e.message))
    }

    /// The value of a stoichiometry that a formula reads, where no rule or event changes it.
    fn stoichiometry_value(&self, id: &str) -> Option<f64> {
        match self.symbols.get(id)? {
            Symbol::SpeciesReference(r, j) if !self.varied(id) => {
                let s = {
                    let rx = &self.m.reactions[*r];
                    rx.reactants.iter().chain(&rx.products).nth(*j)?
                };
                match &s.stoichiometry_math {
                    Some(x) => self.constant_stoichiometry(x).ok(),
                    None => self.values.stoichiometries[*r][*j],
                }
            }
            _ => None,
        }
    }

    fn locals<'r>(&self, r: &'r Reaction) -> Result<Locals<'r>, SbmlError> {
        let mut out = HashMap::new();
        for p in r.kinetic_law.iter().flat_map(|k| &k.local_parameters) {
            let value = match (self.scale, p.value, &p.units) {
                (_, None, _) => None,
                (Scale::Volume { .. }, Some(v), Some(u)) => {
                    let (dim, f) = units::canonical(self.m, self.level, u)
                        .map_err(|e| not_yet("localParameter", Some(&p.id), p.loc, e))?;
                    Some(Quantity::new(v * f, dim))
                }
                (_, Some(v), _) => Some(Quantity::bare(v)),
            };
            out.insert(p.id.as_str(), Local { value, loc: p.loc });
        }
        Ok(out)
    }

    /// Returns the step, the law's formula for display (law steps), and a warning.
    fn step(
        &self,
        j: usize,
        r: &Reaction,
    ) -> Result<(Step, Option<String>, Option<SbmlError>), SbmlError> {
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
        let locals = self.locals(r)?;
        let (reactants, converted) = self.side(j, r, false)?;
        let (products, _) = self.side(j, r, true)?;
        let term = |&(i, n, loc): &(usize, u32, Loc)| Term {
            coefficient: n,
            species: name(&self.m.species[i].id, loc),
            span: span(loc),
        };
        let coeffs: Vec<(usize, u32)> = reactants.iter().map(|e| (e.0, e.1)).collect();
        let mono = Monomial::of(law, &|x| self.factor(x, &locals));
        let mut warning = None;
        let from_reading = match &r.reading {
            None => None,
            Some(reading) => match self.reading_rate(reading, mono.as_ref(), &coeffs, law.loc) {
                Ok(rate) => Some(rate),
                Err(why) => {
                    warning = Some(SbmlError::new(
                        ErrorKind::Ignored {
                            message: format!(
                                "copyloop's reading of this reaction is ignored and its law read as written: {why}"
                            ),
                        },
                        "massAction",
                        Some(&r.id),
                        reading.loc,
                    ));
                    None
                }
            },
        };
        // A reactant whose change a conversion factor scales is consumed by more (or fewer)
        // than its stoichiometry: the law is the reaction's rate as written, never a
        // combinatorial form of the scaled coefficient.
        let from_reading = from_reading.filter(|_| !converted);
        let standard = || {
            (!r.keeps_law && !converted)
                .then(|| self.mass_action(mono.as_ref(), &coeffs, law.loc))
                .flatten()
        };
        let forward = match from_reading.or_else(standard) {
            Some(rate) => rate,
            // A reversible reaction's law is its net rate: the deterministic rate as written,
            // but no propensity (the caller refuses stochastic methods for it).
            None => Rate::Law(self.law(law, &locals, &r.id)?),
        };
        // A boundary species is never consumed; leaving it out of a law's reactants keeps it from
        // gating the law (except in copyloop's own law steps, gated by every listed reactant).
        let is_law = matches!(forward, Rate::Law(_));
        let shown_terms: Vec<Term> = reactants
            .iter()
            .filter(|e| r.keeps_law || !(is_law && self.m.species[e.0].boundary_condition))
            .map(term)
            .collect();
        let text = is_law.then(|| self.shown(law));
        Ok((
            Step {
                label: name(&r.id, r.loc),
                reactants: shown_terms,
                products: products.iter().map(term).collect(),
                reversible: false,
                forward,
                reverse: None,
                span: span(r.loc),
            },
            text,
            warning,
        ))
    }

    /// What a leaf of a law is, as a factor of a monomial, in the scale's units.
    fn factor(&self, m: &Math, locals: &Locals) -> Option<Factor> {
        match &m.kind {
            MathKind::Number(v) => Some(Factor::Number(self.number(*v, m)?.value)),
            MathKind::Avogadro => Some(Factor::Number(SBML_AVOGADRO)),
            MathKind::Ident(id) => {
                if let Some(l) = locals.get(id.as_str()) {
                    return l.value.map(|q| Factor::Number(q.value));
                }
                match self.symbols.get(id.as_str())? {
                    Symbol::Compartment(k) => Some(Factor::Compartment(*k)),
                    // A parameter that rules or events change is read where the law is.
                    Symbol::Parameter(p) if self.varied(&self.m.parameters[*p].id) => None,
                    Symbol::Parameter(p) => Some(Factor::Parameter(*p)),
                    Symbol::Species(i) => Some(Factor::Species(*i)),
                    Symbol::SpeciesReference(..) => {
                        self.stoichiometry_value(id).map(Factor::Number)
                    }
                    _ => None,
                }
            }
            _ => None,
        }
    }

    /// A `cn`'s value in the scale's units (with its unit's dimension in a volume).
    fn number(&self, v: f64, m: &Math) -> Option<Quantity> {
        match (self.scale, &m.units) {
            (Scale::Volume { .. }, Some(u)) => units::canonical(self.m, self.level, u)
                .ok()
                .map(|(d, f)| Quantity::new(v * f, d)),
            _ => Some(Quantity::bare(v)),
        }
    }

    /// The constant of a monomial law as a deterministic rate constant: per volume, in mol/L
    /// and seconds, at the volume scale (law/V); in counts and seconds at the counts scale
    /// (species read as concentrations divided by their compartment's size).
    fn constant(&self, mono: &Monomial) -> Option<f64> {
        let mut k = mono.number;
        for &(p, e) in &mono.parameters {
            k *= self.param_value(p)?.powi(e);
        }
        match self.scale {
            Scale::Counts => {
                for &(c, e) in &mono.compartments {
                    k *= self.values.compartments[c]?.powi(e);
                }
                for &(i, e) in &mono.species {
                    if !symbol_is_amount(self.m, i) {
                        let c = self
                            .m
                            .compartments
                            .iter()
                            .position(|c| c.id == self.m.species[i].compartment)?;
                        k *= (1.0 / self.values.compartments[c]?).powi(e);
                    }
                }
            }
            Scale::Volume { litres, .. } => {
                // The one compartment's power: its own, one per amount-read species factor,
                // and −1 for the division by V.
                let amounts: i32 = mono
                    .species
                    .iter()
                    .filter(|e| symbol_is_amount(self.m, e.0))
                    .map(|e| e.1)
                    .sum();
                let v_power = mono.compartments.iter().map(|c| c.1).sum::<i32>() + amounts - 1;
                if v_power != 0 {
                    k *= litres.powi(v_power);
                }
            }
        }
        Some(k)
    }

    /// A global parameter's value in canonical units at the volume scale.
    fn param_value(&self, p: usize) -> Option<f64> {
        let v = self.values.parameters[p]?;
        match (&self.m.parameters[p].units, self.scale) {
            (Some(u), Scale::Volume { .. }) => units::canonical(self.m, self.level, u)
                .ok()
                .map(|(_, f)| v * f),
            _ => Some(v),
        }
    }

    /// Mass action read from a law that is a constant times one of each distinct reactant.
    fn mass_action(
        &self,
        mono: Option<&Monomial>,
        coeffs: &[(usize, u32)],
        loc: Loc,
    ) -> Option<Rate> {
        let mono = mono?;
        if !coeffs.iter().all(|e| e.1 == 1) {
            return None;
        }
        let mut want: Vec<(usize, i32)> = coeffs.iter().map(|e| (e.0, 1)).collect();
        let mut got = mono.species.clone();
        want.sort_unstable();
        got.sort_unstable();
        if want != got {
            return None;
        }
        let k = self.constant(mono)?;
        if !(k >= 0.0 && k.is_finite()) {
            return None;
        }
        let order = coeffs.len() as u32;
        let molar = Dim::mass_action_molar(order);
        // k is the one parameter itself: the law is that parameter times the reactants.
        let rest = Monomial {
            parameters: Vec::new(),
            ..mono.clone()
        };
        if let [(p, 1)] = mono.parameters.as_slice() {
            let fits = match self.scale {
                Scale::Counts => true,
                Scale::Volume { .. } => self.param_dims[*p] == molar,
            };
            if fits && self.constant(&rest) == Some(1.0) {
                return Some(Rate::Constant(Operand::Param(name(
                    &self.m.parameters[*p].id,
                    loc,
                ))));
            }
        }
        if !mono.parameters.is_empty() {
            return None;
        }
        Some(Rate::Constant(Operand::Literal(match self.scale {
            Scale::Counts => bare(k, loc),
            Scale::Volume { .. } => literal(Quantity::new(k, molar), 1.0, loc),
        })))
    }

    /// The mass-action rate copyloop's reading names, if the law is its deterministic law.
    fn reading_rate(
        &self,
        reading: &Reading,
        mono: Option<&Monomial>,
        coeffs: &[(usize, u32)],
        loc: Loc,
    ) -> Result<Rate, String> {
        let mono = mono.ok_or("the law is not a constant times its reactants")?;
        let mut want: Vec<(usize, i32)> = coeffs.iter().map(|e| (e.0, e.1 as i32)).collect();
        let mut got = mono.species.clone();
        want.sort_unstable();
        got.sort_unstable();
        if want != got {
            return Err("the law's species and powers are not the reaction's reactants".into());
        }
        let nu: Vec<u32> = coeffs.iter().map(|e| e.1).collect();
        let order: u32 = nu.iter().sum();
        let k_law = self
            .constant(mono)
            .ok_or("the law's constant has no value")?;
        let om = self.volume().map_or(1.0, omega);
        let (value, operand_dim, p) = match &reading.constant {
            ReadingConstant::Value(v) => (*v, None, None),
            ReadingConstant::Parameter(id) => match self.symbols.get(id.as_str()) {
                Some(Symbol::Parameter(p)) => (
                    self.param_value(*p)
                        .ok_or(format!("parameter `{id}` has no value"))?,
                    Some(self.param_dims[*p]),
                    Some(id.as_str()),
                ),
                _ => return Err(format!("`{id}` is not a global parameter")),
            },
        };
        let k_reading = match reading.kind {
            ReadingKind::Macroscopic => value,
            ReadingKind::Stochastic => macroscopic_constant(value, &nu, om),
        };
        if !(k_reading >= 0.0 && k_reading.is_finite()) {
            return Err(format!("the constant {value} is not finite and at least 0"));
        }
        if (k_law - k_reading).abs() > 1e-12 * k_reading.abs() {
            return Err(format!(
                "the law's rate constant {k_law} is not the reading's {k_reading}"
            ));
        }
        let molar = Dim::mass_action_molar(order);
        let count = Dim::mass_action_count(order);
        let unit_free = stochastic_constant(1.0, &nu, 1.0) == 1.0;
        match (self.scale, reading.kind, operand_dim, p) {
            (Scale::Volume { .. }, ReadingKind::Macroscopic, Some(d), Some(id)) if d == molar => {
                Ok(Rate::Constant(Operand::Param(name(id, loc))))
            }
            (Scale::Volume { .. }, ReadingKind::Stochastic, Some(d), Some(id))
                if d.is_none() || d == count =>
            {
                Ok(Rate::Constant(Operand::Param(name(id, loc))))
            }
            (Scale::Counts, ReadingKind::Stochastic, Some(_), Some(id)) => {
                Ok(Rate::Constant(Operand::Param(name(id, loc))))
            }
            (Scale::Counts, ReadingKind::Macroscopic, Some(_), Some(id)) if unit_free => {
                Ok(Rate::Constant(Operand::Param(name(id, loc))))
            }
            (_, _, Some(_), Some(id)) => Err(format!(
                "parameter `{id}`'s unit is not that of a {} constant of order {order}",
                reading.kind.name()
            )),
            (Scale::Volume { .. }, ReadingKind::Macroscopic, ..) => Ok(Rate::Constant(
                Operand::Literal(literal(Quantity::new(value, molar), 1.0, loc)),
            )),
            (Scale::Counts, ReadingKind::Macroscopic, ..) => Ok(Rate::Constant(Operand::Literal(
                bare(stochastic_constant(value, &nu, 1.0), loc),
            ))),
            (_, ReadingKind::Stochastic, ..) => {
                Ok(Rate::Constant(Operand::Literal(bare(value, loc))))
            }
        }
    }

    /// The law as a rate per volume: at the volume scale, `V · E` gives E, any other law L
    /// gives L / V (`false`: the division is still to be made); at the counts scale the law.
    fn per_volume<'l>(&self, law: &'l Math) -> (&'l Math, bool) {
        let Scale::Volume { compartment, .. } = self.scale else {
            return (law, true);
        };
        let c = &self.m.compartments[compartment].id;
        if let MathKind::Apply(Op::Times, args) = &law.kind {
            let is_c = |a: &Math| matches!(&a.kind, MathKind::Ident(x) if x == c);
            if let [a, b] = args.as_slice() {
                if is_c(a) && !is_c(b) {
                    return (b, true);
                }
            }
        }
        (law, false)
    }

    /// The law's formula as the network reads it (per volume at the volume scale).
    fn shown(&self, law: &Math) -> String {
        match (self.per_volume(law), self.scale) {
            ((body, true), _) => body.to_string(),
            ((body, false), Scale::Volume { compartment, .. }) => {
                let c = &self.m.compartments[compartment].id;
                let v = Math::new(MathKind::Ident(c.clone()), law.loc);
                Math::new(MathKind::Apply(Op::Divide, vec![body.clone(), v]), law.loc).to_string()
            }
            ((body, false), Scale::Counts) => body.to_string(),
        }
    }

    /// The law as the network compiler's expression (per volume at the volume scale).
    fn law(&self, law: &Math, locals: &Locals, owner: &str) -> Result<Expr, SbmlError> {
        let (body, divided) = self.per_volume(law);
        let e = self.expr(body, locals, owner)?;
        Ok(match (divided, self.volume()) {
            (false, Some(v)) => Expr::Binary(
                BinOp::Div,
                Box::new(e),
                Box::new(Expr::Number(literal(
                    Quantity::new(v, Dim::VOLUME),
                    1.0,
                    law.loc,
                ))),
                span(law.loc),
            ),
            _ => e,
        })
    }

    /// The size of a species' compartment at the counts scale, when its symbol is a
    /// concentration.
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

    /// A formula as the network compiler's expression.
    fn expr(&self, m: &Math, locals: &Locals, owner: &str) -> Result<Expr, SbmlError> {
        let s = span(m.loc);
        let num = |v: f64| Expr::Number(bare(v, m.loc));
        let quantity = |q: Quantity| {
            if q.dim.is_none() {
                num(q.value)
            } else {
                Expr::Number(literal(q, 1.0, m.loc))
            }
        };
        let bin = |op: BinOp, a: Expr, b: Expr| Expr::Binary(op, Box::new(a), Box::new(b), s);
        let call = |f: &str, a: Vec<Expr>| Expr::Call(name(f, m.loc), a, s);
        let unsupported = |what: String| Err(not_yet(element_of(m), Some(owner), m.loc, what));
        Ok(match &m.kind {
            MathKind::Number(v) => match self.number(*v, m) {
                Some(q) => quantity(q),
                None => {
                    return unsupported(format!(
                        "the unit `{}` of this number",
                        m.units.as_deref().unwrap_or("")
                    ))
                }
            },
            // A truth value as the comparison that has it (true = 1, false = 0).
            MathKind::Boolean(b) => bin(BinOp::Gt, num(f64::from(u8::from(*b))), num(0.5)),
            MathKind::Avogadro => num(SBML_AVOGADRO),
            // The network's clock, in the model's time unit at the counts scale (seconds at the
            // volume scale, whose time unit is checked to be the second).
            // At the counts scale every figure is a bare number: the clock over one second.
            MathKind::Time => {
                let t = Expr::Name(name(crate::network::compile::GRID_TIME, m.loc));
                match self.scale {
                    Scale::Counts => bin(BinOp::Div, t, quantity(Quantity::new(1.0, Dim::TIME))),
                    Scale::Volume { .. } => t,
                }
            }
            MathKind::Ident(id) => {
                if let Some(l) = locals.get(id.as_str()) {
                    return match l.value {
                        Some(q) => Ok(quantity(q)),
                        None => Err(invalid(
                            "localParameter",
                            Some(id),
                            l.loc,
                            "the local parameter has no value",
                        )),
                    };
                }
                match self.symbols.get(id.as_str()) {
                    Some(Symbol::Compartment(k)) => {
                        match (self.scale, self.values.compartments[*k]) {
                            (Scale::Volume { litres, .. }, _) => {
                                quantity(Quantity::new(litres, Dim::VOLUME))
                            }
                            (Scale::Counts, Some(v)) => num(v),
                            (Scale::Counts, None) => {
                                return Err(invalid(
                                    "ci",
                                    Some(owner),
                                    m.loc,
                                    format!("compartment `{id}` has no size"),
                                ))
                            }
                        }
                    }
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
                        match self.scale {
                            Scale::Counts => match self.divisor(*i, m.loc)? {
                                Some(v) => bin(BinOp::Div, x, num(v)),
                                None => x,
                            },
                            // The species loads its concentration; its amount is that times V.
                            Scale::Volume { litres, .. } if symbol_is_amount(self.m, *i) => {
                                bin(BinOp::Mul, x, quantity(Quantity::new(litres, Dim::VOLUME)))
                            }
                            Scale::Volume { .. } => x,
                        }
                    }
                    Some(Symbol::SpeciesReference(..)) => match self.stoichiometry_value(id) {
                        Some(v) => num(v),
                        None => {
                            return unsupported(format!(
                                "the stoichiometry `{id}`, which a rule or an event changes, in a formula"
                            ))
                        }
                    },
                    // A reaction's id is its rate (SBML Level 3 core §4.11.7 [M]): its kinetic
                    // law, with the law's own local parameters.
                    Some(Symbol::Reaction(r)) => {
                        let rx = &self.m.reactions[*r];
                        let law = rx.kinetic_law.as_ref().and_then(|k| k.math.as_ref());
                        let mut nested = false;
                        if let Some(law) = law {
                            law.visit(&mut |x| {
                                if let MathKind::Ident(y) = &x.kind {
                                    nested |= matches!(
                                        self.symbols.get(y.as_str()),
                                        Some(Symbol::Reaction(_))
                                    ) && !locals_of(rx).contains(&y.as_str());
                                }
                            });
                        }
                        match law {
                            Some(law) if !nested => {
                                let locals = self.locals(rx)?;
                                self.expr(law, &locals, owner)?
                            }
                            _ => {
                                return unsupported(format!(
                                    "`{id}` (a reaction's rate) in a formula, where its kinetic law is missing or reads a reaction's rate"
                                ))
                            }
                        }
                    }
                    _ => {
                        return unsupported(format!(
                            "`{id}` (a reaction's rate) in a formula"
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
                    Op::Minus if a.len() == 1 => {
                        Expr::Neg(Box::new(a.into_iter().next().unwrap()), s)
                    }
                    Op::Minus => fold(BinOp::Sub, 0.0, a),
                    Op::Divide => fold(BinOp::Div, 1.0, a),
                    Op::Power => fold(BinOp::Pow, 1.0, a),
                    Op::Exp => call("exp", a),
                    Op::Ln => call("ln", a),
                    Op::Max | Op::Min if a.len() == 1 => a.into_iter().next().unwrap(),
                    Op::Max => call("max", a),
                    Op::Min => call("min", a),
                    Op::Sin if a.len() == 1 => call("sin", a),
                    Op::Cos if a.len() == 1 => call("cos", a),
                    Op::Gt | Op::Lt | Op::Geq | Op::Leq if a.len() == 2 => {
                        let code = match op {
                            Op::Gt => BinOp::Gt,
                            Op::Lt => BinOp::Lt,
                            Op::Geq => BinOp::Ge,
                            _ => BinOp::Le,
                        };
                        let mut it = a.into_iter();
                        let (x, y) = (it.next().unwrap(), it.next().unwrap());
                        // At the counts scale `time` compared with a settled value is written as
                        // the clock against that value in seconds, so that the network sees the
                        // edge where the comparison flips.
                        let clock = || Expr::Name(name(crate::network::compile::GRID_TIME, m.loc));
                        let second = || quantity(Quantity::new(1.0, Dim::TIME));
                        let is_time = |k: usize| matches!(args[k].kind, MathKind::Time);
                        match self.scale {
                            Scale::Counts if is_time(0) && !is_time(1) => {
                                bin(code, clock(), bin(BinOp::Mul, y, second()))
                            }
                            Scale::Counts if is_time(1) && !is_time(0) => {
                                bin(code, bin(BinOp::Mul, x, second()), clock())
                            }
                            _ => bin(code, x, y),
                        }
                    }
                    // Operators the law evaluator lacks, written exactly in the ones it has:
                    // |x| = max(x, −x); cosh, sinh and tanh by their exponential definitions;
                    // x = y as x ≥ y and x ≤ y; x ≠ y as x < y or x > y; not x as x = 0; and
                    // a xor b, each 0 or 1, as 0.5 < a + b < 1.5.
                    Op::Abs if a.len() == 1 => {
                        let x = a.into_iter().next().unwrap();
                        call("max", vec![x.clone(), Expr::Neg(Box::new(x), s)])
                    }
                    Op::Cosh | Op::Sinh | Op::Tanh if a.len() == 1 => {
                        let x = a.into_iter().next().unwrap();
                        let up = call("exp", vec![x.clone()]);
                        let down = call("exp", vec![Expr::Neg(Box::new(x), s)]);
                        match op {
                            Op::Cosh => bin(BinOp::Div, bin(BinOp::Add, up, down), num(2.0)),
                            Op::Sinh => bin(BinOp::Div, bin(BinOp::Sub, up, down), num(2.0)),
                            _ => bin(
                                BinOp::Div,
                                bin(BinOp::Sub, up.clone(), down.clone()),
                                bin(BinOp::Add, up, down),
                            ),
                        }
                    }
                    Op::Eq | Op::Neq if a.len() == 2 => {
                        let mut it = a.into_iter();
                        let (x, y) = (it.next().unwrap(), it.next().unwrap());
                        if *op == Op::Eq {
                            bin(
                                BinOp::And,
                                bin(BinOp::Ge, x.clone(), y.clone()),
                                bin(BinOp::Le, x, y),
                            )
                        } else {
                            bin(
                                BinOp::Or,
                                bin(BinOp::Lt, x.clone(), y.clone()),
                                bin(BinOp::Gt, x, y),
                            )
                        }
                    }
                    Op::Not if a.len() == 1 => {
                        let x = a.into_iter().next().unwrap();
                        bin(
                            BinOp::And,
                            bin(BinOp::Ge, x.clone(), num(0.0)),
                            bin(BinOp::Le, x, num(0.0)),
                        )
                    }
                    Op::Xor if a.len() >= 2 => {
                        let truth = |e: Expr| {
                            bin(
                                BinOp::Or,
                                bin(BinOp::Lt, e.clone(), num(0.0)),
                                bin(BinOp::Gt, e, num(0.0)),
                            )
                        };
                        let mut it = a.into_iter();
                        let first = truth(it.next().unwrap());
                        it.fold(first, |acc, e| {
                            let sum = bin(BinOp::Add, acc, truth(e));
                            bin(
                                BinOp::And,
                                bin(BinOp::Gt, sum.clone(), num(0.5)),
                                bin(BinOp::Lt, sum, num(1.5)),
                            )
                        })
                    }
                    Op::And | Op::Or if a.len() >= 2 => {
                        fold(if *op == Op::And { BinOp::And } else { BinOp::Or }, 1.0, a)
                    }
                    other => {
                        return unsupported(format!(
                            "the MathML operator <{}> in a kinetic law (it joins the law evaluator with the network extension)",
                            other.name()
                        ))
                    }
                }
            }
            MathKind::Call(f, args) => match self.builtins.get(f) {
                Some(b) => {
                    let a: Vec<Expr> = args
                        .iter()
                        .map(|x| self.expr(x, locals, owner))
                        .collect::<Result<_, _>>()?;
                    call(b.name(), a)
                }
                None => unreachable!("calls other than the network's functions are expanded"),
            },
            // piecewise(v₁, c₁, …, otherwise) = c₁·v₁ + (1 − c₁)·(…), each condition 0 or 1.
            MathKind::Piecewise { pieces, otherwise } => {
                let Some(last) = otherwise else {
                    return unsupported("piecewise without <otherwise> in a kinetic law".into());
                };
                let mut acc = self.expr(last, locals, owner)?;
                for (v, c) in pieces.iter().rev() {
                    let v = self.expr(v, locals, owner)?;
                    let c1 = self.expr(c, locals, owner)?;
                    let c2 = self.expr(c, locals, owner)?;
                    let keep = bin(BinOp::Sub, num(1.0), c2);
                    acc = bin(
                        BinOp::Add,
                        bin(BinOp::Mul, c1, v),
                        bin(BinOp::Mul, keep, acc),
                    );
                }
                acc
            }
            MathKind::Delay(..) | MathKind::RateOf(..) => {
                unreachable!("delay and rateOf are refused before mapping")
            }
        })
    }
}

/// The ids of a reaction's local parameters.
fn locals_of(r: &Reaction) -> Vec<&str> {
    r.kinetic_law
        .iter()
        .flat_map(|k| &k.local_parameters)
        .map(|p| p.id.as_str())
        .collect()
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
