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

use super::expr::{self, Resolved};
use super::parser::{self, Ast, Item, Literal, Operand, Rate, Step, Term};
use super::units::{self, Dim, Quantity};
use super::{analysis, laws};
use super::{Kinetics, Network, Param, Reaction, Species, MAX_COUNT};
use crate::error::{Diagnostic, Error, Span};
use std::collections::HashMap;

/// A value that replaces what the file says, for sweeps and sensitivity analyses.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Override {
    /// A value with a unit; its dimension must match the declaration.
    Quantity(Quantity),
    /// A bare number, read in the unit the file wrote for that name.
    Bare(f64),
}

/// Values that replace the file's: keyed by param name, species name, or `volume`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Overrides {
    pub values: Vec<(String, Override)>,
    /// Compile at this volume (litres) with every amount and constant kept as a concentration:
    /// counts and count-unit constants are rescaled by Ω_new/Ω_file to their power.
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
    compile(&ast, overrides).map_err(Error::Input)
}

/// Compiles a parsed file.
pub fn compile(ast: &Ast, overrides: &Overrides) -> Result<Network, Vec<Diagnostic>> {
    let mut c = Compiler {
        ast,
        overrides,
        errors: Vec::new(),
        warnings: Vec::new(),
        omega: 1.0,
        count_ratio: 1.0,
        volume_l: None,
        names: HashMap::new(),
        species: Vec::new(),
        params: Vec::new(),
        param_bare: Vec::new(),
    };
    c.volume();
    c.declarations();
    let reactions = c.steps();
    for o in &overrides.values {
        if o.0 != "volume" && !c.names.contains_key(o.0.as_str()) {
            c.errors.push(Diagnostic::at(
                &ast.file,
                &ast.source,
                Span::new(0, 0, 0),
                format!("`{}` is not a param or species of this network", o.0),
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
        species,
        params,
        ..
    } = c;
    let mut net = Network {
        file: ast.file.clone(),
        volume_l,
        omega,
        species,
        params,
        reactions,
        stoichiometry: Default::default(),
        dependents: Default::default(),
        conservation_laws: Vec::new(),
        motifs: Vec::new(),
        warnings,
        source: std::sync::Arc::new(ast.clone()),
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
enum Named {
    Species(usize),
    Param(usize),
}

struct Compiler<'a> {
    ast: &'a Ast,
    overrides: &'a Overrides,
    errors: Vec<Diagnostic>,
    warnings: Vec<Diagnostic>,
    omega: f64,
    /// Ω_new/Ω_file when the volume is rescaled, else 1.
    count_ratio: f64,
    volume_l: Option<f64>,
    names: HashMap<&'a str, Named>,
    species: Vec<Species>,
    params: Vec<Param>,
    /// Whether each param was written without a unit (a stochastic constant when used as one).
    param_bare: Vec<bool>,
}

/// The name the reports give the grid's time axis, beside the species' names.
pub const GRID_TIME: &str = "time";

impl<'a> Compiler<'a> {
    fn diag(&self, span: Span, msg: impl Into<String>) -> Diagnostic {
        Diagnostic::at(&self.ast.file, &self.ast.source, span, msg)
    }

    fn error(&mut self, span: Span, msg: impl Into<String>) {
        let d = self.diag(span, msg);
        self.errors.push(d);
    }

    fn error_help(&mut self, span: Span, msg: impl Into<String>, help: impl Into<String>) {
        let d = self.diag(span, msg).with_help(help);
        self.errors.push(d);
    }

    /// The literal's value after any override for `name`.
    fn overridden(&mut self, name: &str, lit: &Literal) -> Quantity {
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

    fn volume(&mut self) {
        let mut seen: Option<Span> = None;
        for item in &self.ast.items {
            let Item::Volume(lit) = item else { continue };
            if let Some(first) = seen {
                self.error_help(
                    lit.span,
                    "the volume is set twice",
                    format!("the first `volume` is on line {}", first.line),
                );
                continue;
            }
            seen = Some(lit.span);
            let q = self.overridden("volume", lit);
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
            let file_omega = units::omega(q.value);
            let v = self.overrides.rescale_volume.unwrap_or(q.value);
            self.volume_l = Some(v);
            self.omega = units::omega(v);
            self.count_ratio = self.omega / file_omega;
        }
        if self.volume_l.is_none() && self.overrides.rescale_volume.is_some() {
            self.error(
                Span::new(1, 1, 1),
                "this network has no volume, so it cannot be run at another volume",
            );
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
                };
                self.error_help(
                    span,
                    format!("`{}` is declared twice", name.text),
                    format!("the first declaration is on line {prev_line}; species and params share one set of names"),
                );
                continue;
            }
            match item {
                Item::Species {
                    name,
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
                    let initial = self.initial_count(&name.text, amount);
                    self.names
                        .insert(&name.text, Named::Species(self.species.len()));
                    self.species.push(Species {
                        name: name.text.clone(),
                        initial,
                        clamped: *clamped,
                        span: name.span,
                    });
                }
                Item::Param { name, value } => {
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
                        span: name.span,
                    });
                }
                _ => unreachable!(),
            }
        }
    }

    /// Whole molecules from an amount: a count as given, or a concentration times Ω, rounded
    /// (with a warning when rounding moves the value by more than 1 %).
    fn initial_count(&mut self, name: &str, lit: &Literal) -> i64 {
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
            q.value * self.omega
        } else if q.dim == Dim::COUNT || q.dim.is_none() {
            if q.value.fract() != 0.0 && self.count_ratio == 1.0 {
                self.error_help(
                    lit.span,
                    format!("`{name}` = {} is not a whole number of molecules", q.value),
                    "give a whole count, or a concentration with a unit such as `nM`",
                );
                return 0;
            }
            q.value * self.count_ratio
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
                    "`{name}` is {exact:.4} molecules in this volume; rounded to {rounded}, which changes it by {:.1} %",
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
        let mut labels: HashMap<String, Span> = HashMap::new();
        for item in &ast.items {
            let Item::Step(step) = item else { continue };
            let mut own = vec![step.label.text.clone()];
            if step.reversible {
                own.push(format!("{}_rev", step.label.text));
            }
            let mut clash = false;
            for l in &own {
                if let Some(prev) = labels.get(l) {
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
                labels.insert(l, step.label.span);
            }
            let (Some(lhs), Some(rhs)) = (self.side(&step.reactants), self.side(&step.products))
            else {
                continue;
            };
            let forward = self.kinetics(step, &lhs, &step.forward, None);
            let reverse = step
                .reverse
                .as_ref()
                .map(|r| self.kinetics(step, &rhs, r, Some((&forward, &lhs))));
            if let Some(k) = forward {
                reactions.push(self.reaction(step.label.text.clone(), &lhs, &rhs, k, step.span));
            }
            if let Some(Some(k)) = reverse {
                let label = format!("{}_rev", step.label.text);
                reactions.push(self.reaction(label, &rhs, &lhs, k, step.span));
            }
        }
        reactions
    }

    fn reaction(
        &self,
        label: String,
        reactants: &[(usize, u32)],
        products: &[(usize, u32)],
        kinetics: Kinetics,
        span: Span,
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
        Reaction {
            label,
            reactants: reactants.to_vec(),
            products: products.to_vec(),
            kinetics,
            change: net,
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
                Some(Named::Param(_)) => {
                    self.error(
                        t.species.span,
                        format!("`{}` is a param, not a species", t.species.text),
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
    fn operand(&mut self, op: &Operand) -> Option<(Quantity, bool)> {
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
                            "`{}` is a species; a rate here is a param or a number",
                            name.text
                        ),
                        "to make the rate depend on a species, write `law <expression>`",
                    );
                    None
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

    fn kinetics(
        &mut self,
        step: &Step,
        reactants: &[(usize, u32)],
        rate: &Rate,
        forward: Option<Forward>,
    ) -> Option<Kinetics> {
        let coeffs: Vec<u32> = reactants.iter().map(|r| r.1).collect();
        let order: u32 = coeffs.iter().sum();
        let side_span = side_span(step, forward.is_some());
        match rate {
            Rate::Law(e) => self.law(e, step),
            Rate::Constant(op) => {
                let (q, bare) = self.operand(op)?;
                self.mass_action(q, bare, &coeffs, order, op.span(), side_span)
            }
            Rate::HalfLife(op, kw) => {
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
                            q.value, q.dim
                        ),
                        "write e.g. `half-life 40 min`",
                    );
                    return None;
                }
                let k = std::f64::consts::LN_2 / q.value;
                Some(Kinetics::MassAction { k, c: k })
            }
            Rate::Kd(op, _) => {
                let (q, bare) = self.operand(op)?;
                let (fwd, fwd_reactants) = forward.expect("parser allows kd only in reverse");
                let fwd_order: u32 = fwd_reactants.iter().map(|r| r.1).sum();
                let k_fwd = match fwd {
                    Some(Kinetics::MassAction { k, .. }) => *k,
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
                let kd_molar =
                    if q.dim == Dim::CONC.powi(dm) && !bare && self.volume_l.is_some() {
                        q.value
                    } else if bare
                        || q.dim == Dim::COUNT.powi(dm)
                        || (self.volume_l.is_none() && q.dim.without_count().is_none())
                    {
                        q.value / self.omega.powi(dm)
                    } else {
                        let want = Dim::CONC.powi(dm);
                        self.error_help(
                        op.span(),
                        format!("this `kd` should have dimension {want}, but it has {}", q.dim),
                        if self.volume_l.is_none() && q.dim.conc != 0 {
                            "concentrations need a `volume` line; without one give kd in molecules"
                        } else {
                            "K_d of A + B <-> C is a concentration, e.g. `kd 3 nM`"
                        },
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
                let c = units::stochastic_constant(k, &coeffs, self.omega);
                Some(Kinetics::MassAction { k, c })
            }
        }
    }

    fn order_error(&mut self, order: u32, span: Span) {
        self.error_help(
            span,
            format!("a mass-action step of order {order}: copyloop accepts orders 0 to 3"),
            "elementary steps involve at most three molecules; split the step, or write its rate as a `law`",
        );
    }

    fn mass_action(
        &mut self,
        q: Quantity,
        bare: bool,
        coeffs: &[u32],
        order: u32,
        span: Span,
        side: Span,
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
                    q.value
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
                c: units::stochastic_constant(k, coeffs, self.omega),
            });
        }
        if bare || normalise(q.dim) == normalise(count) {
            let c = if bare {
                q.value * self.count_ratio.powi(1 - order as i32)
            } else {
                q.value
            };
            return Some(Kinetics::MassAction {
                k: units::macroscopic_constant(c, coeffs, self.omega),
                c,
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

    fn law(&mut self, e: &parser::Expr, step: &Step) -> Option<Kinetics> {
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
        let names = &self.names;
        let params = &self.params;
        let resolve = |n: &str| match names.get(n) {
            Some(Named::Species(i)) => Some(Resolved::Species(*i)),
            Some(Named::Param(i)) => Some(Resolved::Param(params[*i].value)),
            None => None,
        };
        let no_volume = self.volume_l.is_none();
        let law = match expr::compile(e, &text, &resolve, no_volume) {
            Ok(l) => l,
            Err(le) => {
                self.error(le.span, le.message);
                return None;
            }
        };
        let d = law.dim;
        let scale = if no_volume && (d == Dim::new(0, -1, 0, 0) || d.is_none()) {
            1.0
        } else if !no_volume && d == Dim::new(1, -1, 0, 0) {
            self.omega
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
