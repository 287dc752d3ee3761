//! The typed SBML document: what a model says, with each level's defaults already applied.
//!
//! One type per SBML component, each with the [`Loc`] of its element for messages. The reader
//! (`read.rs`) fills these from the XML; nothing here knows about XML or about copyloop's
//! network. Values the file leaves unset stay `None` where SBML gives them no default (Level 3),
//! and carry the level's default where it has one (Level 2: compartment size 1 for a compartment
//! with dimensions, `hasOnlySubstanceUnits` false, stoichiometry 1, reactions reversible).

use super::error::Loc;
use super::math::Math;
use serde::Serialize;
use std::collections::HashMap;

/// A whole SBML file.
#[derive(Clone, Debug, Serialize)]
pub struct Document {
    pub level: u32,
    pub version: u32,
    /// Level 3 packages declared on the `<sbml>` element.
    pub packages: Vec<Package>,
    pub model: Model,
    pub loc: Loc,
}

/// A Level 3 package declaration (`xmlns:comp="…" comp:required="true"`).
#[derive(Clone, Debug, Serialize)]
pub struct Package {
    /// The package's short name (`comp`, `fbc`, `layout`, …).
    pub name: String,
    pub uri: String,
    /// The `required` attribute: whether the package changes the model's mathematics.
    pub required: Option<bool>,
}

#[derive(Clone, Debug, Default, Serialize)]
pub struct Model {
    pub id: Option<String>,
    pub name: Option<String>,
    pub substance_units: Option<String>,
    pub time_units: Option<String>,
    pub volume_units: Option<String>,
    pub area_units: Option<String>,
    pub length_units: Option<String>,
    pub extent_units: Option<String>,
    /// Model-wide conversion factor (Level 3): the id of a constant parameter.
    pub conversion_factor: Option<String>,
    pub function_definitions: Vec<FunctionDefinition>,
    pub unit_definitions: Vec<UnitDefinition>,
    pub compartments: Vec<Compartment>,
    pub species: Vec<Species>,
    pub parameters: Vec<Parameter>,
    pub initial_assignments: Vec<InitialAssignment>,
    pub rules: Vec<Rule>,
    pub constraints: Vec<Constraint>,
    pub reactions: Vec<Reaction>,
    pub events: Vec<Event>,
    /// The text of the model's `notes` (for people; nothing reads it).
    pub notes: Option<String>,
    pub loc: Loc,
}

/// `lambda(x, y, …, body)`: a function called by id in other formulas.
#[derive(Clone, Debug, Serialize)]
pub struct FunctionDefinition {
    pub id: String,
    /// The bound variables, in order.
    pub params: Vec<String>,
    /// The body; `None` when the definition has no math (Level 3 Version 2 allows it).
    pub body: Option<Math>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct UnitDefinition {
    pub id: String,
    pub units: Vec<Unit>,
    pub loc: Loc,
}

/// One factor of a unit definition: (multiplier · 10^scale · kind)^exponent.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Unit {
    pub kind: String,
    pub exponent: f64,
    pub scale: i32,
    pub multiplier: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Compartment {
    pub id: String,
    pub name: Option<String>,
    pub spatial_dimensions: Option<f64>,
    /// Size in the compartment's units; `None` when unset (Level 3, or a 0-D compartment).
    pub size: Option<f64>,
    pub units: Option<String>,
    pub constant: bool,
    pub notes: Option<String>,
    pub loc: Loc,
}

/// How a species' initial quantity is given.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Initial {
    Amount(f64),
    Concentration(f64),
}

#[derive(Clone, Debug, Serialize)]
pub struct Species {
    pub id: String,
    pub name: Option<String>,
    pub compartment: String,
    pub initial: Option<Initial>,
    pub substance_units: Option<String>,
    /// The species' symbol in formulas is its amount (true) or its concentration (false).
    pub has_only_substance_units: bool,
    /// Reactions do not change it; rules and events may.
    pub boundary_condition: bool,
    /// Nothing changes it.
    pub constant: bool,
    pub conversion_factor: Option<String>,
    pub notes: Option<String>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct Parameter {
    pub id: String,
    pub name: Option<String>,
    pub value: Option<f64>,
    pub units: Option<String>,
    pub constant: bool,
    pub notes: Option<String>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct InitialAssignment {
    pub symbol: String,
    pub math: Option<Math>,
    pub loc: Loc,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RuleKind {
    /// variable = math at every instant.
    Assignment,
    /// d variable / dt = math.
    Rate,
    /// 0 = math.
    Algebraic,
}

#[derive(Clone, Debug, Serialize)]
pub struct Rule {
    pub kind: RuleKind,
    /// The symbol the rule determines (none for an algebraic rule).
    pub variable: Option<String>,
    pub math: Option<Math>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct Constraint {
    pub math: Option<Math>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct Reaction {
    pub id: String,
    pub name: Option<String>,
    pub reversible: bool,
    pub fast: bool,
    pub compartment: Option<String>,
    pub reactants: Vec<SpeciesReference>,
    pub products: Vec<SpeciesReference>,
    pub modifiers: Vec<ModifierReference>,
    pub kinetic_law: Option<KineticLaw>,
    /// copyloop's reading of the reaction, from its annotation.
    pub reading: Option<Reading>,
    /// copyloop's annotation `<copyloop:law/>`: the law is run as written, even where it is a
    /// constant times the reactants (the exporter marks every law step so).
    pub keeps_law: bool,
    pub notes: Option<String>,
    pub loc: Loc,
}

/// The namespace of copyloop's annotations.
pub const COPYLOOP_NS: &str = "urn:copyloop:sbml:1";

/// copyloop's own reading of a mass-action reaction, written by the exporter as
/// `<copyloop:massAction constant="…" reading="…"/>` in the reaction's annotation.
///
/// The kinetic law states the deterministic rate by the standard (for `2 A → …`,
/// compartment·k·\[A\]²); this states how copyloop runs the reaction stochastically: mass action,
/// propensity c·Π C(xᵢ, νᵢ), with `constant` its rate constant read as `kind` says. The importer
/// uses it only where the law is that constant's deterministic law.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Reading {
    pub constant: ReadingConstant,
    pub kind: ReadingKind,
    /// The propensity in molecule counts, as text for people (`propensity` attribute).
    pub propensity: Option<String>,
    pub loc: Loc,
}

/// Where a reading's rate constant is.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ReadingConstant {
    /// A global parameter, by id.
    Parameter(String),
    /// A number.
    Value(f64),
}

/// How a reading's rate constant is read.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ReadingKind {
    /// The macroscopic constant k, in mol/L and seconds: c = k·Π(νᵢ!)/Ω^(m−1).
    Macroscopic,
    /// The stochastic constant c itself, in molecules and seconds.
    Stochastic,
}

impl ReadingKind {
    pub fn name(self) -> &'static str {
        match self {
            ReadingKind::Macroscopic => "macroscopic",
            ReadingKind::Stochastic => "stochastic",
        }
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct SpeciesReference {
    /// The reference's own id (Level 2 Version 2 on; in Level 3 it names the stoichiometry in
    /// formulas).
    pub id: Option<String>,
    pub species: String,
    /// `None` when Level 3 leaves it unset.
    pub stoichiometry: Option<f64>,
    /// Level 2 `<stoichiometryMath>`.
    pub stoichiometry_math: Option<Math>,
    pub constant: bool,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct ModifierReference {
    pub species: String,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct KineticLaw {
    pub math: Option<Math>,
    /// Level 3 `listOfLocalParameters`, Level 2 `kineticLaw/listOfParameters`: they shadow
    /// global ids inside this law.
    pub local_parameters: Vec<Parameter>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct Event {
    pub id: Option<String>,
    pub use_values_from_trigger_time: bool,
    pub trigger: Option<Trigger>,
    pub delay: Option<Math>,
    pub priority: Option<Math>,
    pub assignments: Vec<EventAssignment>,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct Trigger {
    pub math: Option<Math>,
    /// Whether the event fires although its trigger turned false before its delay ran out.
    pub persistent: bool,
    /// The trigger's value just before t = 0 (an event true at the start fires only if false).
    pub initial_value: bool,
    pub loc: Loc,
}

#[derive(Clone, Debug, Serialize)]
pub struct EventAssignment {
    pub variable: String,
    pub math: Option<Math>,
    pub loc: Loc,
}

/// What an SBML id names in the model-wide scope.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Symbol {
    Compartment(usize),
    Species(usize),
    Parameter(usize),
    Reaction(usize),
    /// (reaction, index among reactants then products)
    SpeciesReference(usize, usize),
    FunctionDefinition(usize),
    Event(usize),
}

impl Model {
    /// Every math element of the model, for walks that rewrite formulas.
    pub fn maths_mut(&mut self) -> Vec<&mut Math> {
        let mut out: Vec<&mut Math> = Vec::new();
        for f in &mut self.function_definitions {
            out.extend(f.body.as_mut());
        }
        for a in &mut self.initial_assignments {
            out.extend(a.math.as_mut());
        }
        for r in &mut self.rules {
            out.extend(r.math.as_mut());
        }
        for c in &mut self.constraints {
            out.extend(c.math.as_mut());
        }
        for r in &mut self.reactions {
            for s in r.reactants.iter_mut().chain(r.products.iter_mut()) {
                out.extend(s.stoichiometry_math.as_mut());
            }
            if let Some(k) = &mut r.kinetic_law {
                out.extend(k.math.as_mut());
            }
        }
        for e in &mut self.events {
            if let Some(t) = &mut e.trigger {
                out.extend(t.math.as_mut());
            }
            out.extend(e.delay.as_mut());
            out.extend(e.priority.as_mut());
            for a in &mut e.assignments {
                out.extend(a.math.as_mut());
            }
        }
        out
    }

    /// Every math element of the model (function bodies included).
    pub fn maths(&self) -> Vec<&Math> {
        let mut out: Vec<&Math> = Vec::new();
        for f in &self.function_definitions {
            out.extend(f.body.as_ref());
        }
        for a in &self.initial_assignments {
            out.extend(a.math.as_ref());
        }
        for r in &self.rules {
            out.extend(r.math.as_ref());
        }
        for c in &self.constraints {
            out.extend(c.math.as_ref());
        }
        for r in &self.reactions {
            for s in r.reactants.iter().chain(r.products.iter()) {
                out.extend(s.stoichiometry_math.as_ref());
            }
            if let Some(k) = &r.kinetic_law {
                out.extend(k.math.as_ref());
            }
        }
        for e in &self.events {
            if let Some(t) = &e.trigger {
                out.extend(t.math.as_ref());
            }
            out.extend(e.delay.as_ref());
            out.extend(e.priority.as_ref());
            for a in &e.assignments {
                out.extend(a.math.as_ref());
            }
        }
        out
    }

    /// The model-wide symbol table: id → what it names (the first definition wins; duplicates
    /// are the validator's business).
    pub fn symbols(&self) -> HashMap<&str, Symbol> {
        let mut t: HashMap<&str, Symbol> = HashMap::new();
        for (i, f) in self.function_definitions.iter().enumerate() {
            t.entry(&f.id).or_insert(Symbol::FunctionDefinition(i));
        }
        for (i, c) in self.compartments.iter().enumerate() {
            t.entry(&c.id).or_insert(Symbol::Compartment(i));
        }
        for (i, s) in self.species.iter().enumerate() {
            t.entry(&s.id).or_insert(Symbol::Species(i));
        }
        for (i, p) in self.parameters.iter().enumerate() {
            t.entry(&p.id).or_insert(Symbol::Parameter(i));
        }
        for (i, r) in self.reactions.iter().enumerate() {
            t.entry(&r.id).or_insert(Symbol::Reaction(i));
            for (j, s) in r.reactants.iter().chain(r.products.iter()).enumerate() {
                if let Some(id) = &s.id {
                    t.entry(id).or_insert(Symbol::SpeciesReference(i, j));
                }
            }
        }
        for (i, e) in self.events.iter().enumerate() {
            if let Some(id) = &e.id {
                t.entry(id).or_insert(Symbol::Event(i));
            }
        }
        t
    }
}
