//! What a model must satisfy before copyloop gives it a meaning, and what copyloop refuses.
//!
//! Checks, each reported with the element, its id and its line:
//! - ids are unique in the model (and local parameter ids within their kinetic law);
//! - every reference names something of the right kind: a species' compartment, a reaction's
//!   species, the target of an initial assignment, rule or event assignment (which must not be
//!   `constant`), conversion factors, and every identifier in every formula (a kinetic law's
//!   local parameters shadow global ids);
//! - no symbol is determined twice (two rules, or an assignment rule and an initial assignment
//!   or a rate rule), and assignment rules do not depend on one another in a cycle;
//! - refused constructs: Level 3 packages other than the presentation-only `layout` and
//!   `render` (which are ignored, with a warning), algebraic rules, fast reactions, and the
//!   `delay` and `rateOf` csymbols.
//!
//! Constraints are accepted with a warning: they assert, they do not change the dynamics, and
//! copyloop does not check them during a run.

use super::error::{Construct, ErrorKind, Loc, SbmlError};
use super::math::{Math, MathKind};
use super::model::{Document, Model, Package, RuleKind, Symbol};
use std::collections::{HashMap, HashSet};

/// Packages that only describe how a model is drawn; their elements are skipped.
const PRESENTATION_PACKAGES: &[&str] = &["layout", "render"];

/// The errors of `doc` (empty when it is valid and supported) and its warnings.
pub fn validate(doc: &Document) -> (Vec<SbmlError>, Vec<SbmlError>) {
    let mut v = Validator {
        model: &doc.model,
        errors: Vec::new(),
        warnings: Vec::new(),
    };
    for p in &doc.packages {
        if PRESENTATION_PACKAGES.contains(&p.name.as_str()) {
            v.warnings.push(SbmlError::new(
                ErrorKind::Ignored {
                    message: format!(
                        "the {} package describes presentation only; ignored",
                        p.name
                    ),
                },
                "sbml",
                None,
                doc.loc,
            ));
        }
    }
    v.errors.extend(refused_package(&doc.packages, doc.loc));
    v.unique_ids();
    let symbols = doc.model.symbols();
    v.references(&symbols);
    v.targets(&symbols);
    v.formulas(&symbols);
    v.refusals();
    v.assignment_cycles();
    for c in &doc.model.constraints {
        v.warnings.push(SbmlError::new(
            ErrorKind::Ignored {
                message: "constraints are not checked during a run".into(),
            },
            "constraint",
            None,
            c.loc,
        ));
    }
    (v.errors, v.warnings)
}

/// The first declared package copyloop refuses (every one but the presentation packages).
/// The reader calls this before it reads the model, whose package elements would not parse.
pub fn refused_package(packages: &[Package], loc: Loc) -> Option<SbmlError> {
    let p = packages
        .iter()
        .find(|p| !PRESENTATION_PACKAGES.contains(&p.name.as_str()))?;
    Some(SbmlError::new(
        ErrorKind::Unsupported {
            construct: Construct::Package(p.name.clone()),
        },
        "sbml",
        None,
        loc,
    ))
}

struct Validator<'m> {
    model: &'m Model,
    errors: Vec<SbmlError>,
    warnings: Vec<SbmlError>,
}

impl<'m> Validator<'m> {
    fn error(&mut self, kind: ErrorKind, element: &str, id: Option<&str>, loc: Loc) {
        self.errors.push(SbmlError::new(kind, element, id, loc));
    }

    fn dangling(
        &mut self,
        element: &str,
        id: Option<&str>,
        loc: Loc,
        attribute: &str,
        target: &str,
    ) {
        self.error(
            ErrorKind::Dangling {
                attribute: attribute.to_string(),
                target: target.to_string(),
            },
            element,
            id,
            loc,
        );
    }

    fn unique_ids(&mut self) {
        let m = self.model;
        let mut seen: HashMap<&str, Loc> = HashMap::new();
        let mut all: Vec<(&str, &str, Loc)> = Vec::new();
        all.extend(
            m.function_definitions
                .iter()
                .map(|f| ("functionDefinition", f.id.as_str(), f.loc)),
        );
        all.extend(
            m.compartments
                .iter()
                .map(|c| ("compartment", c.id.as_str(), c.loc)),
        );
        all.extend(m.species.iter().map(|s| ("species", s.id.as_str(), s.loc)));
        all.extend(
            m.parameters
                .iter()
                .map(|p| ("parameter", p.id.as_str(), p.loc)),
        );
        for r in &m.reactions {
            all.push(("reaction", &r.id, r.loc));
            for s in r.reactants.iter().chain(&r.products) {
                if let Some(id) = &s.id {
                    all.push(("speciesReference", id, s.loc));
                }
            }
        }
        all.extend(
            m.events
                .iter()
                .filter_map(|e| e.id.as_deref().map(|id| ("event", id, e.loc))),
        );
        for (element, id, loc) in all {
            if let Some(first) = seen.get(id) {
                let first_line = first.line;
                self.error(
                    ErrorKind::DuplicateId { first_line },
                    element,
                    Some(id),
                    loc,
                );
            } else {
                seen.insert(id, loc);
            }
        }
        let mut units: HashMap<&str, Loc> = HashMap::new();
        for u in &m.unit_definitions {
            if let Some(first) = units.insert(&u.id, u.loc) {
                let first_line = first.line;
                self.error(
                    ErrorKind::DuplicateId { first_line },
                    "unitDefinition",
                    Some(&u.id),
                    u.loc,
                );
            }
        }
        for r in &m.reactions {
            let Some(k) = &r.kinetic_law else { continue };
            let mut local: HashMap<&str, Loc> = HashMap::new();
            for p in &k.local_parameters {
                if let Some(first) = local.insert(&p.id, p.loc) {
                    let first_line = first.line;
                    self.error(
                        ErrorKind::DuplicateId { first_line },
                        "localParameter",
                        Some(&p.id),
                        p.loc,
                    );
                }
            }
        }
    }

    fn references(&mut self, symbols: &HashMap<&str, Symbol>) {
        let m = self.model;
        let is = |id: &str, want: fn(&Symbol) -> bool| symbols.get(id).is_some_and(want);
        for s in &m.species {
            if !is(&s.compartment, |x| matches!(x, Symbol::Compartment(_))) {
                self.dangling("species", Some(&s.id), s.loc, "compartment", &s.compartment);
            }
            if let Some(cf) = &s.conversion_factor {
                if !is(cf, |x| matches!(x, Symbol::Parameter(_))) {
                    self.dangling("species", Some(&s.id), s.loc, "conversionFactor", cf);
                }
            }
        }
        if let Some(cf) = &m.conversion_factor {
            if !is(cf, |x| matches!(x, Symbol::Parameter(_))) {
                self.dangling("model", m.id.as_deref(), m.loc, "conversionFactor", cf);
            }
        }
        for r in &m.reactions {
            if let Some(c) = &r.compartment {
                if !is(c, |x| matches!(x, Symbol::Compartment(_))) {
                    self.dangling("reaction", Some(&r.id), r.loc, "compartment", c);
                }
            }
            for s in r.reactants.iter().chain(&r.products) {
                if !is(&s.species, |x| matches!(x, Symbol::Species(_))) {
                    self.dangling(
                        "speciesReference",
                        Some(&r.id),
                        s.loc,
                        "species",
                        &s.species,
                    );
                }
            }
            for s in &r.modifiers {
                if !is(&s.species, |x| matches!(x, Symbol::Species(_))) {
                    self.dangling(
                        "modifierSpeciesReference",
                        Some(&r.id),
                        s.loc,
                        "species",
                        &s.species,
                    );
                }
            }
        }
    }

    /// Whether `symbol` is a constant target (constant compartment, species or parameter, or a
    /// constant species reference).
    fn is_constant(&self, s: Symbol) -> bool {
        let m = self.model;
        match s {
            Symbol::Compartment(i) => m.compartments[i].constant,
            Symbol::Species(i) => m.species[i].constant,
            Symbol::Parameter(i) => m.parameters[i].constant,
            Symbol::SpeciesReference(r, j) => {
                let r = &m.reactions[r];
                r.reactants
                    .iter()
                    .chain(&r.products)
                    .nth(j)
                    .is_some_and(|x| x.constant)
            }
            _ => false,
        }
    }

    fn targets(&mut self, symbols: &HashMap<&str, Symbol>) {
        let m = self.model;
        let assignable = |s: &Symbol| {
            matches!(
                s,
                Symbol::Compartment(_)
                    | Symbol::Species(_)
                    | Symbol::Parameter(_)
                    | Symbol::SpeciesReference(..)
            )
        };
        for a in &m.initial_assignments {
            if !symbols.get(a.symbol.as_str()).is_some_and(assignable) {
                self.dangling(
                    "initialAssignment",
                    Some(&a.symbol),
                    a.loc,
                    "symbol",
                    &a.symbol,
                );
            }
        }
        // Which construct determines each symbol beyond its initial value.
        let mut determined: HashMap<&str, (RuleKind, Loc)> = HashMap::new();
        for r in &m.rules {
            let Some(var) = &r.variable else { continue };
            let element = match r.kind {
                RuleKind::Assignment => "assignmentRule",
                _ => "rateRule",
            };
            match symbols.get(var.as_str()) {
                Some(s) if assignable(s) => {
                    if self.is_constant(*s) {
                        self.error(
                            ErrorKind::Invalid {
                                message: format!(
                                    "the rule sets `{var}`, which is declared constant"
                                ),
                            },
                            element,
                            Some(var),
                            r.loc,
                        );
                    }
                }
                _ => self.dangling(element, Some(var), r.loc, "variable", var),
            }
            if let Some((_, first)) = determined.get(var.as_str()) {
                let line = first.line;
                self.error(
                    ErrorKind::Invalid {
                        message: format!(
                            "`{var}` is already determined by the rule on line {line}"
                        ),
                    },
                    element,
                    Some(var),
                    r.loc,
                );
            } else {
                determined.insert(var, (r.kind.clone(), r.loc));
            }
        }
        for a in &m.initial_assignments {
            if let Some((RuleKind::Assignment, rl)) = determined.get(a.symbol.as_str()) {
                let line = rl.line;
                self.error(
                    ErrorKind::Invalid {
                        message: format!(
                            "`{}` has both this initial assignment and the assignment rule on line {line}",
                            a.symbol
                        ),
                    },
                    "initialAssignment",
                    Some(&a.symbol),
                    a.loc,
                );
            }
        }
        let mut first_ia: HashMap<&str, Loc> = HashMap::new();
        for a in &m.initial_assignments {
            if let Some(first) = first_ia.insert(&a.symbol, a.loc) {
                let line = first.line;
                self.error(
                    ErrorKind::Invalid {
                        message: format!(
                            "`{}` has a second initial assignment (the first is on line {line})",
                            a.symbol
                        ),
                    },
                    "initialAssignment",
                    Some(&a.symbol),
                    a.loc,
                );
            }
        }
        for e in &m.events {
            for a in &e.assignments {
                match symbols.get(a.variable.as_str()) {
                    Some(s) if assignable(s) => {
                        if self.is_constant(*s) {
                            self.error(
                                ErrorKind::Invalid {
                                    message: format!(
                                        "the event sets `{}`, which is declared constant",
                                        a.variable
                                    ),
                                },
                                "eventAssignment",
                                Some(&a.variable),
                                a.loc,
                            );
                        }
                        if let Some((RuleKind::Assignment, _)) = determined.get(a.variable.as_str())
                        {
                            self.error(
                                ErrorKind::Invalid {
                                    message: format!("`{}` is set by an assignment rule, so an event cannot set it", a.variable),
                                },
                                "eventAssignment",
                                Some(&a.variable),
                                a.loc,
                            );
                        }
                    }
                    _ => self.dangling(
                        "eventAssignment",
                        Some(&a.variable),
                        a.loc,
                        "variable",
                        &a.variable,
                    ),
                }
            }
        }
    }

    /// Every identifier in every formula resolves; `delay` and `rateOf` are refused.
    fn formulas(&mut self, symbols: &HashMap<&str, Symbol>) {
        let m = self.model;
        let global = |id: &str| {
            matches!(
                symbols.get(id),
                Some(
                    Symbol::Compartment(_)
                        | Symbol::Species(_)
                        | Symbol::Parameter(_)
                        | Symbol::Reaction(_)
                        | Symbol::SpeciesReference(..)
                )
            )
        };
        let check =
            |me: &mut Self, math: &Math, owner: Option<&str>, local: &dyn Fn(&str) -> bool| {
                math.visit(&mut |n| {
                    let construct = match n.kind {
                        MathKind::Delay(..) => Some(Construct::DelayFunction),
                        MathKind::RateOf(..) => Some(Construct::RateOf),
                        _ => None,
                    };
                    if let Some(construct) = construct {
                        me.error(ErrorKind::Unsupported { construct }, "apply", owner, n.loc);
                    }
                    if let MathKind::Ident(id) = &n.kind {
                        if !local(id) && !global(id) {
                            let what = match symbols.get(id.as_str()) {
                                Some(Symbol::FunctionDefinition(_)) => {
                                    "a formula (a function is called, not used as a value)"
                                }
                                Some(Symbol::Event(_)) => "a formula (an event has no value)",
                                _ => "a formula",
                            };
                            me.dangling("ci", owner, n.loc, what, id);
                        }
                    }
                });
            };
        for f in &m.function_definitions {
            if let Some(b) = &f.body {
                let params: HashSet<&str> = f.params.iter().map(String::as_str).collect();
                check(self, b, Some(&f.id), &|id| params.contains(id));
            }
        }
        let none = |_: &str| false;
        for a in &m.initial_assignments {
            if let Some(x) = &a.math {
                check(self, x, Some(&a.symbol), &none);
            }
        }
        for r in &m.rules {
            if let Some(x) = &r.math {
                check(self, x, r.variable.as_deref(), &none);
            }
        }
        for c in &m.constraints {
            if let Some(x) = &c.math {
                check(self, x, None, &none);
            }
        }
        for r in &m.reactions {
            for s in r.reactants.iter().chain(&r.products) {
                if let Some(x) = &s.stoichiometry_math {
                    check(self, x, Some(&r.id), &none);
                }
            }
            if let Some(k) = &r.kinetic_law {
                let local: HashSet<&str> =
                    k.local_parameters.iter().map(|p| p.id.as_str()).collect();
                if let Some(x) = &k.math {
                    check(self, x, Some(&r.id), &|id| local.contains(id));
                }
            }
        }
        for e in &m.events {
            let maths = e
                .trigger
                .iter()
                .filter_map(|t| t.math.as_ref())
                .chain(e.delay.as_ref())
                .chain(e.priority.as_ref())
                .chain(e.assignments.iter().filter_map(|a| a.math.as_ref()));
            for x in maths {
                check(self, x, e.id.as_deref(), &none);
            }
        }
    }

    fn refusals(&mut self) {
        let m = self.model;
        for r in &m.rules {
            if r.kind == RuleKind::Algebraic {
                self.error(
                    ErrorKind::Unsupported {
                        construct: Construct::AlgebraicRule,
                    },
                    "algebraicRule",
                    None,
                    r.loc,
                );
            }
        }
        for r in &m.reactions {
            if r.fast {
                self.error(
                    ErrorKind::Unsupported {
                        construct: Construct::FastReaction,
                    },
                    "reaction",
                    Some(&r.id),
                    r.loc,
                );
            }
        }
    }

    /// Assignment rules form no cycle (x = f(y), y = g(x)): such a model is algebraic.
    fn assignment_cycles(&mut self) {
        let m = self.model;
        let rules: HashMap<&str, usize> = m
            .rules
            .iter()
            .enumerate()
            .filter(|(_, r)| r.kind == RuleKind::Assignment)
            .filter_map(|(i, r)| r.variable.as_deref().map(|v| (v, i)))
            .collect();
        // 0 unvisited, 1 on the stack, 2 done.
        let mut state = vec![0u8; m.rules.len()];
        for &start in rules.values() {
            if state[start] != 0 {
                continue;
            }
            let mut stack: Vec<(usize, Vec<usize>)> = vec![(start, self.deps(start, &rules))];
            state[start] = 1;
            while let Some((node, deps)) = stack.last_mut() {
                let node = *node;
                match deps.pop() {
                    Some(d) if state[d] == 1 => {
                        let var = m.rules[node].variable.clone().unwrap_or_default();
                        self.error(
                            ErrorKind::Invalid {
                                message: format!(
                                    "the assignment rules for `{var}` and `{}` depend on each other in a cycle",
                                    m.rules[d].variable.as_deref().unwrap_or("")
                                ),
                            },
                            "assignmentRule",
                            Some(&var),
                            m.rules[node].loc,
                        );
                        return;
                    }
                    Some(d) if state[d] == 0 => {
                        state[d] = 1;
                        let dd = self.deps(d, &rules);
                        stack.push((d, dd));
                    }
                    Some(_) => {}
                    None => {
                        state[node] = 2;
                        stack.pop();
                    }
                }
            }
        }
    }

    /// The assignment rules whose variables rule `i`'s formula reads.
    fn deps(&self, i: usize, rules: &HashMap<&str, usize>) -> Vec<usize> {
        let mut out = Vec::new();
        if let Some(x) = &self.model.rules[i].math {
            x.visit(&mut |n| {
                if let MathKind::Ident(id) = &n.kind {
                    if let Some(&j) = rules.get(id.as_str()) {
                        out.push(j);
                    }
                }
            });
        }
        out
    }
}
