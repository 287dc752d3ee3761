//! Syntax tree → [`Network`]: names resolved to indices, units checked against reaction orders,
//! rate constants converted to stochastic constants, initial amounts converted to counts.
//!
//! Conventions (stated in the README):
//! - A constant with a concentration unit is a macroscopic k; c = k·Π(νᵢ!)/Ω^(m−1).
//! - A constant in molecule units, or a bare number, is the stochastic constant c itself, in
//!   molecules and seconds: `2 A -> B @ 0.002` has propensity 0.002·x_A(x_A−1)/2.
//! - `half-life t` on a first-order step gives k = ln 2/t.
//! - `kd K` as the reverse rate of a `<->` step gives k_rev = k_fwd·K^(m_fwd − m_rev).
//! - A `law` is the whole rate: concentration per time where a volume is set (or molecules per
//!   time if its units say so), molecules per time where none is.
//! - Compartments: concentrations refer to the compartment of the species or of the reaction
//!   (its reactants', or its products' for order 0), whose Ω_c = N_A·V_c converts them; a
//!   first-order step whose product sits in another compartment is transport (c = k), and
//!   `clearance CL` gives k = CL/V of the reactant's compartment. Reactants in two
//!   compartments are an error.
//! - Doses, infusions and `when` events are compiled in `super::inputs`.

use super::expr::{self, Checks, Resolved};
use super::parser::{self, Ast, Item, Literal, Operand, Rate, Step, Term};
use super::units::{self, Dim, Quantity};
use super::{analysis, laws};
use super::{
    AmountUnit, Compartment, Follows, Kinetics, Network, Param, Reaction, Reading, Species,
    MAX_COUNT,
};
use crate::error::{Diagnostic, Error, Span};
use std::collections::{HashMap, HashSet};

/// A value that replaces what the file says, for sweeps and sensitivity analyses.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Override {
    /// A value with a unit; its dimension must match the declaration.
    Quantity(Quantity),
    /// A bare number, read in the unit the file wrote for that name.
    Bare(f64),
}

/// Values that replace the file's: keyed by param name, species name, compartment name, or
/// `volume`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Overrides {
    pub values: Vec<(String, Override)>,
    /// Compile at this volume (litres), every compartment scaled by the same factor, keeping
    /// what the file gave: an amount given as a concentration keeps its concentration (its
    /// count follows Ω), an amount given in molecules keeps its count, and every rate constant
    /// keeps its macroscopic k (so c = k·Πνᵢ!/Ω^(m−1) follows Ω, a constant written bare or in
    /// molecule units included). An override of `volume` compiles the same way.
    pub rescale_volume: Option<f64>,
}

impl Overrides {
    pub fn set(mut self, name: &str, value: Override) -> Overrides {
        self.values.retain(|(n, _)| n != name);
        self.values.push((name.to_string(), value));
        self
    }

    fn get(&self, name: &str) -> Option<Override> {
        self.values.iter().find(|(n, _)| n == name).map(|(_, v)| *v)
    }
}

/// Reads, parses and compiles the network file at `path` (SBML for `.xml` and `.sbml`).
pub fn load(path: &str, overrides: &Overrides) -> Result<Network, Error> {
    if crate::sbml::is_sbml_path(path) {
        return crate::sbml::load(path, overrides);
    }
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    load_source(path, &bytes, overrides)
}

/// Parses and compiles `bytes` as the network file called `file` (SBML for `.xml` and `.sbml`).
pub fn load_source(file: &str, bytes: &[u8], overrides: &Overrides) -> Result<Network, Error> {
    if crate::sbml::is_sbml_path(file) {
        return crate::sbml::load_source(file, bytes, overrides);
    }
    let ast = parser::parse(file, bytes).map_err(Error::Input)?;
    compile(&std::sync::Arc::new(ast), overrides).map_err(Error::Input)
}

/// Compiles a parsed file. The network keeps `ast` (shared, never copied: a sweep compiles
/// one file many times).
pub fn compile(
    ast: &std::sync::Arc<Ast>,
    overrides: &Overrides,
) -> Result<Network, Vec<Diagnostic>> {
    let mut c = Compiler {
        ast,
        overrides,
        errors: Vec::new(),
        warnings: Vec::new(),
        omega: 1.0,
        count_ratio: 1.0,
        volume_l: None,
        compartments: Vec::new(),
        names: HashMap::new(),
        species: Vec::new(),
        params: Vec::new(),
        param_bare: Vec::new(),
        varying: HashSet::new(),
        labels: HashMap::new(),
    };
    c.volume();
    c.varying_params();
    c.declarations();
    let mut reactions = c.steps();
    let (infused, infusions) = c.infusions(reactions.len());
    reactions.extend(infused);
    let doses = c.doses();
    let events = c.events();
    c.conflicts(&doses, &events);
    for o in &overrides.values {
        if o.0 != "volume" && !c.names.contains_key(o.0.as_str()) {
            c.errors.push(Diagnostic::at(
                &ast.file,
                &ast.source,
                Span::new(0, 0, 0),
                format!(
                    "`{}` is not a param, species or compartment of this network",
                    o.0
                ),
            ));
        }
    }
    if !c.errors.is_empty() {
        return Err(c.errors);
    }
    let Compiler {
        warnings,
        omega,
        volume_l,
        compartments,
        species,
        params,
        ..
    } = c;
    let mut net = Network {
        file: ast.file.clone(),
        compartments,
        volume_l,
        omega,
        amount: AmountUnit::molecules(),
        species,
        params,
        reactions,
        doses,
        infusions,
        events,
        stoichiometry: Default::default(),
        dependents: Default::default(),
        conservation_laws: Vec::new(),
        motifs: Vec::new(),
        warnings: warnings.into_iter().map(Diagnostic::warning).collect(),
        source: std::sync::Arc::clone(ast),
        overrides: overrides.clone(),
    };
    net.stoichiometry = analysis::stoichiometry(&net);
    net.dependents = analysis::dependency_graph(&net);
    net.conservation_laws = laws::conservation_laws(&net).map_err(|d| vec![d])?;
    net.motifs = analysis::motifs(&net);
    analysis::usage_warnings(&mut net, ast);
    Ok(net)
}

/// The forward reaction's kinetics and reactants, which a `kd` reverse rate is built from.
type Forward<'f> = (&'f Option<Kinetics>, &'f [(usize, u32)]);

#[derive(Clone, Copy)]
pub(super) enum Named {
    Species(usize),
    Param(usize),
    Compartment(usize),
}

/// A failure already recorded in the compiler's errors: the caller skips what depended on it.
struct Reported;

pub(super) struct Compiler<'a> {
    pub(super) ast: &'a Ast,
    overrides: &'a Overrides,
    pub(super) errors: Vec<Diagnostic>,
    pub(super) warnings: Vec<Diagnostic>,
    /// The reference Ω (the first compartment's, 1 without one).
    omega: f64,
    /// Ω_new/Ω_file when the volume is rescaled, else 1.
    pub(super) count_ratio: f64,
    pub(super) volume_l: Option<f64>,
    pub(super) compartments: Vec<Compartment>,
    pub(super) names: HashMap<&'a str, Named>,
    pub(super) species: Vec<Species>,
    pub(super) params: Vec<Param>,
    /// Whether each param was written without a unit (a stochastic constant when used as one).
    param_bare: Vec<bool>,
    /// Params that `when` lines assign.
    varying: HashSet<&'a str>,
    /// Reaction labels and where they are declared.
    pub(super) labels: HashMap<String, Span>,
}

/// The name the reports give the grid's time axis, beside the species' names.
pub const GRID_TIME: &str = "time";

impl<'a> Compiler<'a> {
    pub(super) fn diag(&self, span: Span, msg: impl Into<String>) -> Diagnostic {
        Diagnostic::at(&self.ast.file, &self.ast.source, span, msg)
    }

    pub(super) fn error(&mut self, span: Span, msg: impl Into<String>) {
        let d = self.diag(span, msg);
        self.errors.push(d);
    }

    pub(super) fn error_help(
        &mut self,
        span: Span,
        msg: impl Into<String>,
        help: impl Into<String>,
    ) {
        let d = self.diag(span, msg).with_help(help);
        self.errors.push(d);
    }

    /// The literal's value after any override for `name`.
    pub(super) fn overridden(&mut self, name: &str, lit: &Literal) -> Quantity {
        match self.overrides.get(name) {
            None => lit.quantity,
            Some(Override::Bare(v)) => Quantity::new(v * lit.unit_factor, lit.quantity.dim),
            Some(Override::Quantity(q)) => {
                if q.dim != lit.quantity.dim && !(lit.bare && q.dim.is_none()) {
                    self.error(
                        lit.span,
                        format!(
                            "the value given for `{name}` has dimension {}, but the file declares {}",
                            q.dim, lit.quantity.dim
                        ),
                    );
                }
                q
            }
        }
    }

    /// `volume` (one compartment called `volume`) or `compartment` lines: their sizes, Ω and
    /// the reference Ω.
    fn volume(&mut self) {
        let mut volume_seen: Option<Span> = None;
        let mut named_seen: Option<Span> = None;
        let mut file_first: Option<f64> = None;
        let mut written_first: Option<f64> = None;
        for item in &self.ast.items {
            let (name, lit) = match item {
                Item::Volume(lit) => {
                    if let Some(first) = volume_seen {
                        self.error_help(
                            lit.span,
                            "the volume is set twice",
                            format!(
                                "the first `volume` is on line {}; for several volumes declare \
                                 compartments: `compartment plasma = 3 L`",
                                first.line
                            ),
                        );
                        continue;
                    }
                    volume_seen = Some(lit.span);
                    ("volume", lit)
                }
                Item::Compartment { name, size } => {
                    named_seen.get_or_insert(name.span);
                    if self.names.contains_key(name.text.as_str()) {
                        self.error(name.span, format!("`{}` is declared twice", name.text));
                        continue;
                    }
                    if name.text == GRID_TIME {
                        self.error(
                            name.span,
                            "`time` is the clock in expressions and cannot name a compartment",
                        );
                        continue;
                    }
                    (name.text.as_str(), size)
                }
                _ => continue,
            };
            if let (Some(v), Some(n)) = (volume_seen, named_seen) {
                let span = if v.line > n.line { v } else { n };
                self.error_help(
                    span,
                    "a network has either one `volume` or `compartment` lines, not both",
                    "write the volume as a compartment: `compartment cell = 1 pL`",
                );
                return;
            }
            let q = self.overridden(name, lit);
            if q.dim != Dim::VOLUME {
                self.error_help(
                    lit.span,
                    format!("a volume needs a volume unit, but this is {}", q.dim),
                    "write e.g. `volume 1 pL` (units L mL uL µL nL pL fL um3)",
                );
                continue;
            }
            if !(q.value > 0.0 && q.value.is_finite()) {
                self.error(lit.span, "the volume must be a positive, finite number");
                continue;
            }
            let first = *file_first.get_or_insert(q.value);
            let written = *written_first.get_or_insert(lit.quantity.value);
            let ratio = self.overrides.rescale_volume.map_or(1.0, |v| v / first);
            let v = q.value * ratio;
            if written > 0.0 && written.is_finite() {
                self.count_ratio = first * ratio / written;
            }
            let span = match item {
                Item::Compartment { name, .. } => name.span,
                _ => lit.span,
            };
            if let Item::Compartment { name, .. } = item {
                self.names
                    .insert(&name.text, Named::Compartment(self.compartments.len()));
            }
            self.compartments.push(Compartment {
                name: name.to_string(),
                size: v,
                volume_l: Some(v),
                omega: units::omega(v),
                span,
            });
        }
        if let Some(c) = self.compartments.first() {
            self.volume_l = c.volume_l;
            self.omega = c.omega;
        }
        if self.volume_l.is_none() && self.overrides.rescale_volume.is_some() {
            self.error(
                Span::new(1, 1, 1),
                "this network has no volume, so it cannot be run at another volume",
            );
        }
    }

    /// The params some `when` line assigns: they vary during a run.
    fn varying_params(&mut self) {
        let ast = self.ast;
        for item in &ast.items {
            if let Item::When(w) = item {
                for a in &w.assignments {
                    self.varying.insert(a.target.text.as_str());
                }
            }
        }
    }

    /// Ω of compartment `c` (the reference Ω without one).
    pub(super) fn omega_of(&self, c: Option<usize>) -> f64 {
        c.map_or(self.omega, |c| self.compartments[c].omega)
    }

    /// How programs see the names declared so far.
    pub(super) fn resolved(&self, name: &str) -> Option<Resolved> {
        if name == GRID_TIME {
            return Some(Resolved::Time);
        }
        match self.names.get(name)? {
            Named::Species(i) => {
                let s = &self.species[*i];
                Some(match s.reads_as {
                    Reading::Concentration => Resolved::Species {
                        index: *i,
                        scale: 1.0 / self.omega_of(s.compartment),
                        dim: Dim::CONC,
                    },
                    Reading::Amount => Resolved::Species {
                        index: *i,
                        scale: 1.0,
                        dim: Dim::COUNT,
                    },
                })
            }
            Named::Param(i) => {
                let p = &self.params[*i];
                Some(if p.varies {
                    Resolved::Param {
                        index: *i,
                        dim: p.value.dim,
                    }
                } else {
                    Resolved::Constant(p.value)
                })
            }
            Named::Compartment(c) => Some(Resolved::Constant(Quantity::new(
                self.compartments[*c].size,
                Dim::VOLUME,
            ))),
        }
    }

    /// Compiles an expression of the file at `e` with the `.crn` checks.
    pub(super) fn program(&mut self, e: &parser::Expr) -> Option<expr::Law> {
        let span = e.span();
        let line = self
            .ast
            .source
            .lines()
            .nth(span.line as usize - 1)
            .unwrap_or("");
        let text: String = line
            .chars()
            .skip(span.col as usize - 1)
            .take(span.len as usize)
            .collect();
        let resolve = |n: &str| self.resolved(n);
        let checks = Checks::crn(self.volume_l.is_none());
        match expr::compile(e, &text, &resolve, checks) {
            Ok(l) => Some(l),
            Err(le) => {
                self.error(le.span, le.message);
                None
            }
        }
    }

    fn declarations(&mut self) {
        let ast = self.ast;
        for item in &ast.items {
            let (name, span) = match item {
                Item::Species { name, .. } | Item::Param { name, .. } => (name, name.span),
                _ => continue,
            };
            if let Some(prev) = self.names.get(name.text.as_str()) {
                let prev_line = match *prev {
                    Named::Species(i) => self.species[i].span.line,
                    Named::Param(i) => self.params[i].span.line,
                    Named::Compartment(c) => self.compartments[c].span.line,
                };
                self.error_help(
                    span,
                    format!("`{}` is declared twice", name.text),
                    format!("the first declaration is on line {prev_line}; species, params and compartments share one set of names"),
                );
                continue;
            }
            match item {
                Item::Species {
                    name,
                    compartment,
                    amount,
                    clamped,
                } => {
                    if name.text == GRID_TIME {
                        self.error_help(
                            name.span,
                            "`time` cannot name a species: the JSON reports use it for the time \
                             axis of the grid (`grid.time`), beside the species' names",
                            "rename the species, for example `time_` or `T`",
                        );
                    }
                    let compartment = self.species_compartment(name, compartment.as_ref());
                    let omega = self.omega_of(compartment);
                    let initial = self.initial_count(&name.text, amount, omega);
                    self.names
                        .insert(&name.text, Named::Species(self.species.len()));
                    self.species.push(Species {
                        name: name.text.clone(),
                        initial,
                        initial_amount: initial as f64,
                        clamped: *clamped,
                        compartment,
                        reads_as: if compartment.is_some() {
                            Reading::Concentration
                        } else {
                            Reading::Amount
                        },
                        span: name.span,
                    });
                }
                Item::Param { name, value } => {
                    if name.text == GRID_TIME {
                        self.error(
                            name.span,
                            "`time` is the clock in expressions and cannot name a param",
                        );
                    }
                    let mut q = self.overridden(&name.text, value);
                    if !q.value.is_finite() {
                        self.error(
                            value.span,
                            format!("`{}` is not a finite number", name.text),
                        );
                    }
                    q.value *= self.count_ratio.powi(q.dim.count as i32);
                    self.names
                        .insert(&name.text, Named::Param(self.params.len()));
                    self.param_bare.push(value.bare);
                    self.params.push(Param {
                        name: name.text.clone(),
                        value: q,
                        varies: self.varying.contains(name.text.as_str()),
                        span: name.span,
                    });
                }
                _ => unreachable!(),
            }
        }
    }

    /// The compartment a species sits in: the one it names, or the only one there is.
    fn species_compartment(
        &mut self,
        name: &parser::Name,
        given: Option<&parser::Name>,
    ) -> Option<usize> {
        match given {
            Some(c) => match self.names.get(c.text.as_str()) {
                Some(Named::Compartment(k)) => Some(*k),
                _ if c.text == "volume" && !self.compartments.is_empty() => Some(0),
                _ => {
                    let known: Vec<&str> =
                        self.compartments.iter().map(|c| c.name.as_str()).collect();
                    self.error_help(
                        c.span,
                        format!("unknown compartment `{}`", c.text),
                        if known.is_empty() {
                            "declare it with `compartment <name> = <volume>`".to_string()
                        } else {
                            format!("the compartments are: {}", known.join(", "))
                        },
                    );
                    None
                }
            },
            None if self.compartments.len() > 1 => {
                self.error_help(
                    name.span,
                    format!("say which compartment `{}` is in", name.text),
                    format!(
                        "write `species {} in {} = …`; the network has {} compartments",
                        name.text,
                        self.compartments[0].name,
                        self.compartments.len()
                    ),
                );
                Some(0)
            }
            None => (!self.compartments.is_empty()).then_some(0),
        }
    }

    /// Whole molecules from an amount: a count as given, or a concentration times Ω, rounded
    /// (with a warning when rounding moves the value by more than 1 %).
    fn initial_count(&mut self, name: &str, lit: &Literal, omega: f64) -> i64 {
        let q = self.overridden(name, lit);
        let exact = if q.dim == Dim::CONC {
            if self.volume_l.is_none() {
                self.error_help(
                    lit.span,
                    format!("`{name}` is given as a concentration, but the network has no volume"),
                    "add a line such as `volume 1 pL`, or give the amount in molecules",
                );
                return 0;
            }
            q.value * omega
        } else if q.dim == Dim::COUNT || q.dim.is_none() {
            if q.value.fract() != 0.0 {
                self.error_help(
                    lit.span,
                    format!(
                        "`{name}` = {} is not a whole number of molecules",
                        crate::numbers::round_trip(q.value)
                    ),
                    "give a whole count, or a concentration with a unit such as `nM`",
                );
                return 0;
            }
            q.value
        } else {
            self.error_help(
                lit.span,
                format!(
                    "an amount needs a concentration or `molecules`, but this is {}",
                    q.dim
                ),
                "write e.g. `species H = 2 nM` or `species R = 300 molecules`",
            );
            return 0;
        };
        if !exact.is_finite() || exact < 0.0 {
            self.error(
                lit.span,
                format!("the amount of `{name}` must be a finite number, at least 0"),
            );
            return 0;
        }
        if exact > MAX_COUNT as f64 {
            self.error_help(
                lit.span,
                format!(
                    "`{name}` would be {exact:.3e} molecules, more than copyloop can count (2^50)"
                ),
                "use a smaller volume or amount; counts this large are deterministic anyway",
            );
            return 0;
        }
        let rounded = exact.round();
        if exact > 0.0 && ((rounded - exact) / exact).abs() > 0.01 {
            let d = self.diag(
                lit.span,
                format!(
                    "`{name}` is {} molecules in this volume; rounded to {}, which changes it by {:.1} %",
                    crate::numbers::short(exact),
                    rounded as i64,
                    100.0 * ((rounded - exact) / exact).abs()
                ),
            );
            self.warnings.push(d);
        }
        rounded as i64
    }

    fn steps(&mut self) -> Vec<Reaction> {
        let ast = self.ast;
        let mut reactions = Vec::new();
        for item in &ast.items {
            let Item::Step(step) = item else { continue };
            let mut own = vec![step.label.text.clone()];
            if step.reversible {
                own.push(format!("{}_rev", step.label.text));
            }
            let mut clash = false;
            for l in &own {
                if let Some(prev) = self.labels.get(l) {
                    let line = prev.line;
                    self.error_help(
                        step.label.span,
                        format!("the step label `{l}` is used twice"),
                        format!("labels are unique; `{l}` is already on line {line} (a `<->` step `b` also takes `b_rev`)"),
                    );
                    clash = true;
                }
            }
            if clash {
                continue;
            }
            for l in own {
                self.labels.insert(l, step.label.span);
            }
            let (Some(lhs), Some(rhs)) = (self.side(&step.reactants), self.side(&step.products))
            else {
                continue;
            };
            let Ok(fwd_comp) = self.reaction_compartment(step, &lhs, &rhs, false) else {
                continue;
            };
            let forward = self.kinetics(step, &lhs, &step.forward, None, fwd_comp);
            let reverse = match &step.reverse {
                Some(r) => {
                    let Ok(rev_comp) = self.reaction_compartment(step, &rhs, &lhs, true) else {
                        continue;
                    };
                    Some((
                        self.kinetics(step, &rhs, r, Some((&forward, &lhs)), rev_comp),
                        rev_comp,
                    ))
                }
                None => None,
            };
            if let Some(k) = forward {
                let label = step.label.text.clone();
                reactions.push(self.reaction(label, &lhs, &rhs, k, step.span, fwd_comp));
            }
            if let Some((Some(k), comp)) = reverse {
                let label = format!("{}_rev", step.label.text);
                reactions.push(self.reaction(label, &rhs, &lhs, k, step.span, comp));
            }
        }
        reactions
    }

    /// The compartment a reaction's concentrations refer to: its reactants' (which must share
    /// one), or for order 0 its products' (which must share one); `None` without
    /// compartments. `Err` when the sides disagree: the error is already reported.
    fn reaction_compartment(
        &mut self,
        step: &Step,
        reactants: &[(usize, u32)],
        products: &[(usize, u32)],
        reverse: bool,
    ) -> Result<Option<usize>, Reported> {
        if self.compartments.is_empty() {
            return Ok(None);
        }
        let comp = |i: usize| self.species[i].compartment;
        let (side, which) = if reactants.is_empty() {
            (products, "products")
        } else {
            (reactants, "reactants")
        };
        let Some(&(first, _)) = side.first() else {
            return Ok(Some(0));
        };
        if let Some(&(other, _)) = side.iter().find(|&&(i, _)| comp(i) != comp(first)) {
            let name = |i: usize| {
                let s = &self.species[i];
                let c = s
                    .compartment
                    .map_or("-", |c| self.compartments[c].name.as_str());
                format!("`{}` in {c}", s.name)
            };
            let (a, b) = (name(first), name(other));
            let span = side_span(step, reverse);
            if which == "reactants" {
                self.error_help(
                    span,
                    format!(
                        "the reactants of step `{}` sit in different compartments ({a}, {b})",
                        step.label.text
                    ),
                    "a reaction between compartments (membrane binding) is not supported; \
                     move one species across with a first-order transport step first",
                );
            } else {
                self.error_help(
                    step.label.span,
                    format!(
                        "the products of zero-order step `{}` sit in different compartments \
                         ({a}, {b}), so its rate has no one volume",
                        step.label.text
                    ),
                    "split it into one step per compartment",
                );
            }
            return Err(Reported);
        }
        Ok(comp(first))
    }

    pub(super) fn reaction(
        &self,
        label: String,
        reactants: &[(usize, u32)],
        products: &[(usize, u32)],
        kinetics: Kinetics,
        span: Span,
        compartment: Option<usize>,
    ) -> Reaction {
        let mut net: Vec<(usize, i64)> = Vec::new();
        for &(i, n) in reactants {
            net.push((i, -(n as i64)));
        }
        for &(i, n) in products {
            match net.iter_mut().find(|e| e.0 == i) {
                Some(e) => e.1 += n as i64,
                None => net.push((i, n as i64)),
            }
        }
        net.retain(|&(i, d)| d != 0 && !self.species[i].clamped);
        net.sort_unstable();
        let order: u32 = reactants.iter().map(|r| r.1).sum();
        let transport = order == 1
            && products
                .iter()
                .any(|&(i, _)| self.species[i].compartment != compartment);
        Reaction {
            label,
            reactants: reactants.to_vec(),
            products: products.to_vec(),
            kinetics,
            change: net,
            compartment,
            transport,
            span,
        }
    }

    /// Species indices and coefficients of one side, with repeats merged (`A + A` is `2 A`).
    fn side(&mut self, terms: &[Term]) -> Option<Vec<(usize, u32)>> {
        let mut out: Vec<(usize, u32)> = Vec::new();
        let mut ok = true;
        for t in terms {
            match self.names.get(t.species.text.as_str()) {
                Some(Named::Species(i)) => match out.iter_mut().find(|e| e.0 == *i) {
                    Some(e) => e.1 += t.coefficient,
                    None => out.push((*i, t.coefficient)),
                },
                Some(other) => {
                    let what = match other {
                        Named::Param(_) => "a param",
                        _ => "a compartment",
                    };
                    self.error(
                        t.species.span,
                        format!("`{}` is {what}, not a species", t.species.text),
                    );
                    ok = false;
                }
                None => {
                    self.error_help(
                        t.species.span,
                        format!("unknown species `{}`", t.species.text),
                        format!("declare it with `species {} = <amount>`", t.species.text),
                    );
                    ok = false;
                }
            }
        }
        ok.then_some(out)
    }

    /// A constant operand's value, and whether it was written without a unit.
    pub(super) fn operand(&mut self, op: &Operand) -> Option<(Quantity, bool)> {
        match op {
            Operand::Literal(l) => {
                let mut q = l.quantity;
                q.value *= self.count_ratio.powi(q.dim.count as i32);
                Some((q, l.bare))
            }
            Operand::Param(name) => match self.names.get(name.text.as_str()) {
                Some(Named::Param(i)) => Some((self.params[*i].value, self.param_bare[*i])),
                Some(Named::Species(_)) => {
                    self.error_help(
                        name.span,
                        format!(
                            "`{}` is a species; a value here is a param or a number",
                            name.text
                        ),
                        "to make a rate depend on a species, write `law <expression>`",
                    );
                    None
                }
                Some(Named::Compartment(c)) => {
                    let v = self.compartments[*c].size;
                    Some((Quantity::new(v, Dim::VOLUME), false))
                }
                None => {
                    self.error_help(
                        name.span,
                        format!("unknown param `{}`", name.text),
                        format!("declare it with `param {} = <value> <unit>`", name.text),
                    );
                    None
                }
            },
        }
    }

    /// The varying param an operand names, if it names one.
    pub(super) fn varying_param(&self, op: &Operand) -> Option<usize> {
        let Operand::Param(name) = op else {
            return None;
        };
        match self.names.get(name.text.as_str()) {
            Some(Named::Param(i)) if self.params[*i].varies => Some(*i),
            _ => None,
        }
    }

    fn kinetics(
        &mut self,
        step: &Step,
        reactants: &[(usize, u32)],
        rate: &Rate,
        forward: Option<Forward>,
        comp: Option<usize>,
    ) -> Option<Kinetics> {
        let coeffs: Vec<u32> = reactants.iter().map(|r| r.1).collect();
        let order: u32 = coeffs.iter().sum();
        let side_span = side_span(step, forward.is_some());
        let omega = self.omega_of(comp);
        match rate {
            Rate::Law(e) => self.law(e, step, omega),
            Rate::Constant(op) => {
                let (q, bare) = self.operand(op)?;
                let k = self.mass_action(q, bare, &coeffs, order, op.span(), side_span, omega)?;
                self.follow(k, op, |c| {
                    c.mass_action(
                        Quantity::new(1.0, q.dim),
                        bare,
                        &coeffs,
                        order,
                        op.span(),
                        side_span,
                        omega,
                    )
                })
            }
            Rate::Clearance(op, kw) => {
                let (q, _) = self.operand(op)?;
                if order != 1 {
                    self.error_help(
                        kw.to(op.span()),
                        format!("`clearance` is for first-order steps; this one has order {order}"),
                        "a clearance CL gives k = CL / V of the reactant's compartment",
                    );
                    return None;
                }
                let Some(v) = comp.and_then(|c| self.compartments[c].volume_l) else {
                    self.error_help(
                        kw.to(op.span()),
                        "a clearance needs the volume of the reactant's compartment",
                        "add a `volume` or `compartment` line, or give the rate constant",
                    );
                    return None;
                };
                let want = Dim::VOLUME.per(Dim::TIME);
                if q.dim != want || !(q.value >= 0.0 && q.value.is_finite()) {
                    self.error_help(
                        op.span(),
                        format!(
                            "a clearance is a volume per time, at least 0, but this is {} {}",
                            crate::numbers::plain(q.value),
                            q.dim
                        ),
                        "write e.g. `clearance 5 L/h`",
                    );
                    return None;
                }
                let k = q.value / v;
                self.follow(
                    Kinetics::MassAction {
                        k,
                        c: k,
                        follows: None,
                    },
                    op,
                    |_| {
                        Some(Kinetics::MassAction {
                            k: 1.0 / v,
                            c: 1.0 / v,
                            follows: None,
                        })
                    },
                )
            }
            Rate::HalfLife(op, kw) => {
                if self.varying_param(op).is_some() {
                    self.error(
                        op.span(),
                        "a half-life cannot be a param that events change; give the rate \
                         constant (k = ln 2 / half-life) as that param instead",
                    );
                    return None;
                }
                let (q, _) = self.operand(op)?;
                if order != 1 {
                    self.error_help(
                        kw.to(op.span()),
                        format!("`half-life` is for first-order steps; this one has order {order}"),
                        "give a rate constant instead",
                    );
                    return None;
                }
                if q.dim != Dim::TIME || q.value.is_nan() || q.value <= 0.0 {
                    self.error_help(
                        op.span(),
                        format!(
                            "a half-life must be a positive time, but this is {} {}",
                            crate::numbers::plain(q.value),
                            q.dim
                        ),
                        "write e.g. `half-life 40 min`",
                    );
                    return None;
                }
                let k = std::f64::consts::LN_2 / q.value;
                Some(Kinetics::MassAction {
                    k,
                    c: k,
                    follows: None,
                })
            }
            Rate::Kd(op, _) => {
                if self.varying_param(op).is_some() {
                    self.error(op.span(), "a `kd` cannot be a param that events change");
                    return None;
                }
                let (q, bare) = self.operand(op)?;
                let (fwd, fwd_reactants) = forward.expect("parser allows kd only in reverse");
                let fwd_order: u32 = fwd_reactants.iter().map(|r| r.1).sum();
                let k_fwd = match fwd {
                    Some(Kinetics::MassAction {
                        k, follows: None, ..
                    }) => *k,
                    Some(Kinetics::MassAction { .. }) => {
                        self.error(
                            op.span(),
                            "`kd` needs a forward rate constant that events do not change",
                        );
                        return None;
                    }
                    Some(Kinetics::Law { .. }) => {
                        self.error(
                            op.span(),
                            "`kd` needs a mass-action forward rate, not a `law`",
                        );
                        return None;
                    }
                    None => return None,
                };
                let dm = fwd_order as i32 - order as i32;
                if order > 3 {
                    self.order_error(order, side_span);
                    return None;
                }
                let kd_molar = if q.dim == Dim::CONC.powi(dm) && !bare && self.volume_l.is_some() {
                    q.value
                } else if bare
                    || q.dim == Dim::COUNT.powi(dm)
                    || (self.volume_l.is_none() && q.dim.without_count().is_none())
                {
                    q.value / omega.powi(dm)
                } else if self.volume_l.is_none() && q.dim.conc != 0 {
                    self.error_help(
                            op.span(),
                            "this `kd` is given in concentration units, but the network has no volume to turn them into molecules",
                            "add a `volume` line (or compartments), or give kd in molecules, e.g. `kd 3000 molecules`",
                        );
                    return None;
                } else {
                    let want = Dim::CONC.powi(dm);
                    self.error_help(
                        op.span(),
                        format!(
                            "this `kd` should have dimension {want}, but it has {}",
                            q.dim
                        ),
                        "K_d of A + B <-> C is a concentration, e.g. `kd 3 nM`",
                    );
                    return None;
                };
                if !(kd_molar >= 0.0 && kd_molar.is_finite()) {
                    self.error(
                        op.span(),
                        "a dissociation constant must be finite and at least 0",
                    );
                    return None;
                }
                let k = k_fwd * kd_molar.powi(dm);
                let c = units::stochastic_constant(k, &coeffs, omega);
                Some(Kinetics::MassAction {
                    k,
                    c,
                    follows: None,
                })
            }
        }
    }

    /// A mass-action constant written as a param that events change follows it: `per_unit`
    /// gives the kinetics for a param value of 1 (every form here is linear in it).
    fn follow(
        &mut self,
        kinetics: Kinetics,
        op: &Operand,
        per_unit: impl FnOnce(&mut Self) -> Option<Kinetics>,
    ) -> Option<Kinetics> {
        let Some(p) = self.varying_param(op) else {
            return Some(kinetics);
        };
        let Some(Kinetics::MassAction { k, c, .. }) = per_unit(self) else {
            return Some(kinetics);
        };
        let Kinetics::MassAction { k: k0, c: c0, .. } = kinetics else {
            return Some(kinetics);
        };
        Some(Kinetics::MassAction {
            k: k0,
            c: c0,
            follows: Some(Follows {
                param: p,
                k_per_value: k,
                c_per_value: c,
            }),
        })
    }

    fn order_error(&mut self, order: u32, span: Span) {
        self.error_help(
            span,
            format!("a mass-action step of order {order}: copyloop accepts orders 0 to 3"),
            "elementary steps involve at most three molecules; split the step, or write its rate as a `law`",
        );
    }

    #[allow(clippy::too_many_arguments)]
    fn mass_action(
        &mut self,
        q: Quantity,
        bare: bool,
        coeffs: &[u32],
        order: u32,
        span: Span,
        side: Span,
        omega: f64,
    ) -> Option<Kinetics> {
        if order > 3 {
            self.order_error(order, side);
            return None;
        }
        if !q.value.is_finite() || q.value < 0.0 {
            self.error_help(
                span,
                format!(
                    "a rate constant must be finite and at least 0, found {}",
                    crate::numbers::plain(q.value)
                ),
                "rate constants are never negative; to make a step run backwards, swap its sides",
            );
            return None;
        }
        let molar = Dim::mass_action_molar(order);
        let count = Dim::mass_action_count(order);
        let normalise = |d: Dim| {
            if self.volume_l.is_none() {
                d.without_count()
            } else {
                d
            }
        };
        if !bare && q.dim == molar {
            if self.volume_l.is_none() && order != 1 {
                self.error_help(
                    span,
                    "a rate constant in concentration units needs a volume",
                    "add a `volume` line, or give the stochastic constant in molecules and seconds",
                );
                return None;
            }
            let k = q.value;
            return Some(Kinetics::MassAction {
                k,
                c: units::stochastic_constant(k, coeffs, omega),
                follows: None,
            });
        }
        if bare || normalise(q.dim) == normalise(count) {
            let c = if bare {
                q.value * self.count_ratio.powi(1 - order as i32)
            } else {
                q.value
            };
            return Some(Kinetics::MassAction {
                k: units::macroscopic_constant(c, coeffs, omega),
                c,
                follows: None,
            });
        }
        let example = ["nM/s", "/s", "/M/s", "/M^2/s"][order as usize];
        self.error_help(
            span,
            format!(
                "a rate constant of a step of order {order} needs dimension {molar}, but this one is {}",
                q.dim
            ),
            format!("write e.g. `{example}`, or a bare number for the stochastic constant in molecules and seconds"),
        );
        None
    }

    fn law(&mut self, e: &parser::Expr, step: &Step, omega: f64) -> Option<Kinetics> {
        let span = e.span();
        let law = self.program(e)?;
        if law.boolean {
            self.error_help(
                span,
                format!(
                    "the rate law of step `{}` is a condition, not a rate",
                    step.label.text
                ),
                "multiply it by a rate: `law vmax * (X > 5 nM)`",
            );
            return None;
        }
        let no_volume = self.volume_l.is_none();
        let d = law.dim;
        let scale = if no_volume && (d == Dim::new(0, -1, 0, 0) || d.is_none()) {
            1.0
        } else if !no_volume && d == Dim::new(1, -1, 0, 0) {
            omega
        } else if !no_volume && d == Dim::new(0, -1, 1, 0) {
            1.0
        } else {
            let want = if no_volume {
                "molecules per time"
            } else {
                "concentration per time (or molecules per time)"
            };
            self.error_help(
                span,
                format!(
                    "the rate law of step `{}` has dimension {d}, but a rate is {want}",
                    step.label.text
                ),
                "give the constants their units, e.g. `param vmax = 2 nM/min`",
            );
            return None;
        };
        Some(Kinetics::Law { law, scale })
    }
}

/// Span of the reactant side of a step (the product side for a reverse reaction).
fn side_span(step: &Step, reverse: bool) -> Span {
    let terms = if reverse {
        &step.products
    } else {
        &step.reactants
    };
    match (terms.first(), terms.last()) {
        (Some(a), Some(b)) => a.span.to(b.span),
        _ => step.label.span,
    }
}
