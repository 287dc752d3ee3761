//! The reaction-network compiler: `.crn` text → an immutable, indexed [`Network`].
//!
//! ```text
//! lexer.rs → parser.rs (syntax tree with spans) → compile.rs (Network) → analysis.rs
//! ```
//!
//! The compiled network is what every kernel and the deterministic engine read. It is `Send +
//! Sync`, holds species and reactions by index, and never changes after compilation; a sweep or a
//! sensitivity analysis compiles a new one with [`Overrides`].

pub mod analysis;
pub mod compile;
pub mod expr;
mod inputs;
pub mod laws;
pub mod lexer;
pub mod mass_action;
pub mod parser;
pub mod schedule;
pub mod units;

pub use analysis::{law_text, motif_chains, DependencyGraph, Motif, MotifKind, Stoichiometry};
pub use compile::{compile, load, load_source, Override, Overrides};
pub use expr::{Dual, Interval, Law, Scalar, TimeUse};
pub use schedule::{Assignment, Dose, Event, Infusion, Target, TimeSeq};
pub use units::{Dim, Quantity, AVOGADRO};

use crate::error::{Diagnostic, Span};
use mass_action::factorial;

/// Largest molecule count copyloop accepts (2⁵⁰ ≈ 1.1e15), so that counts stay exact in f64 and
/// no sum of counts can overflow an i64.
pub const MAX_COUNT: i64 = 1 << 50;

/// A compiled reaction network.
///
/// Units: kernels hold integer counts n (molecules for `.crn`; see [`AmountUnit`]). The
/// deterministic engine's state is y = n/[`Network::omega`]: for a network of one compartment
/// that is the concentration in mol/L, without a volume the count itself; with several
/// compartments it is the amount in units of the first compartment's Ω, and each species'
/// own concentration is n/Ω of its compartment ([`Network::species_omega`]).
#[derive(Clone, Debug)]
pub struct Network {
    /// The file it came from, for messages.
    pub file: String,
    /// Compartments in declaration order (`volume V` is one compartment called `volume`);
    /// empty for a network in molecule counts.
    pub compartments: Vec<Compartment>,
    /// Volume in litres of the only (or first) compartment, if there is one.
    pub volume_l: Option<f64>,
    /// The reference Ω: the first compartment's N_A·V in molecules per mol/L; 1 in a network
    /// without a volume, where every figure is already in molecules.
    pub omega: f64,
    /// The unit amounts are reported in, and how counts relate to it.
    pub amount: AmountUnit,
    pub species: Vec<Species>,
    pub params: Vec<Param>,
    pub reactions: Vec<Reaction>,
    /// Scheduled bolus inputs.
    pub doses: Vec<Dose>,
    /// Zero-order inputs over windows of time (each also a reaction).
    pub infusions: Vec<Infusion>,
    /// Triggered events, in declaration order.
    pub events: Vec<Event>,
    /// Net stoichiometry, species × reactions (products minus reactants, as written; rows of
    /// clamped species show what the reaction would do, although the count is held fixed).
    pub stoichiometry: Stoichiometry,
    /// For each reaction j, the reactions whose propensity can change when j fires.
    pub dependents: DependencyGraph,
    /// Integer vectors l with l·S = 0 over the non-clamped species: l·x is constant in time
    /// between doses and event assignments.
    pub conservation_laws: Vec<Vec<i64>>,
    pub motifs: Vec<Motif>,
    pub warnings: Vec<Diagnostic>,
    /// The parsed file and the overrides it was compiled with, so that variants of the same
    /// network (sweep points, sensitivities, fits) can be compiled without reading it again.
    pub source: std::sync::Arc<parser::Ast>,
    pub overrides: Overrides,
}

/// A compartment: a volume that species sit in.
#[derive(Clone, Debug, PartialEq)]
pub struct Compartment {
    pub name: String,
    /// Its size in the model's volume unit (litres for `.crn`).
    pub size: f64,
    /// Its volume in litres, where the model's volume unit is known.
    pub volume_l: Option<f64>,
    /// Counts per unit of concentration: N_A·V molecules per mol/L for `.crn`
    /// (count_per_amount × size in general).
    pub omega: f64,
    pub span: Span,
}

/// The unit amounts are reported in, and its relation to counts.
#[derive(Clone, Debug, PartialEq)]
pub struct AmountUnit {
    /// "molecules" for `.crn`; an imported model's substance unit otherwise.
    pub name: String,
    /// The unit of concentrations (amount per volume): "M" (mol/L) for `.crn`.
    pub concentration_unit: String,
    /// Counts per unit amount: 1 for molecules, N_A for mole.
    pub count_per_amount: f64,
    /// Why counts of this model cannot be simulated stochastically, if they cannot.
    pub stochastic_refusal: Option<String>,
}

impl AmountUnit {
    /// The `.crn` units: amounts in molecules, concentrations in mol/L.
    pub fn molecules() -> AmountUnit {
        AmountUnit {
            name: "molecules".into(),
            concentration_unit: "M".into(),
            count_per_amount: 1.0,
            stochastic_refusal: None,
        }
    }
}

/// How laws, conditions and assignments read (and write) a species.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Reading {
    /// Its concentration in its own compartment.
    Concentration,
    /// Its amount (counts for `.crn` without a volume).
    Amount,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Species {
    pub name: String,
    /// Initial count in molecules (what the stochastic kernels start from).
    pub initial: i64,
    /// Initial amount in the network's amount unit, real-valued (what the deterministic
    /// engine starts from; for `.crn` the count itself).
    pub initial_amount: f64,
    /// Held at `initial` for the whole run.
    pub clamped: bool,
    /// The compartment it sits in (`None` in a network without a volume).
    pub compartment: Option<usize>,
    pub reads_as: Reading,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Param {
    pub name: String,
    /// Value in canonical units (mol/L, s, molecules, L); the initial value of a varying one.
    pub value: Quantity,
    /// Changed during a run (by an event): read at run time, never folded into constants.
    pub varies: bool,
    pub span: Span,
}

#[derive(Clone, Debug)]
pub struct Reaction {
    pub label: String,
    /// (species index, coefficient), one entry per species.
    pub reactants: Vec<(usize, u32)>,
    pub products: Vec<(usize, u32)>,
    pub kinetics: Kinetics,
    /// Net change of each non-clamped species the reaction moves (non-zero entries only).
    pub change: Vec<(usize, i64)>,
    /// The compartment whose volume its concentrations refer to: its reactants', or its
    /// products' for order 0.
    pub compartment: Option<usize>,
    /// A first-order step whose product sits in another compartment (c = k).
    pub transport: bool,
    pub span: Span,
}

/// A mass-action constant that follows a varying param: k = k_per_value·p, c = c_per_value·p.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Follows {
    pub param: usize,
    pub k_per_value: f64,
    pub c_per_value: f64,
}

/// How a reaction's rate depends on the state.
#[derive(Clone, Debug)]
pub enum Kinetics {
    /// Mass action: deterministic rate v = k·Π\[Xᵢ\]^νᵢ in the reaction's compartment (k in
    /// mol/L and seconds, or molecules and seconds without a volume); propensity
    /// a = c·Π C(xᵢ, νᵢ) with c = k·Π(νᵢ!)/Ω_c^(m−1). `k` and `c` are the initial values when
    /// the constant `follows` a varying param.
    MassAction {
        k: f64,
        c: f64,
        follows: Option<Follows>,
    },
    /// A regulated rate law giving the whole rate: propensity a = scale·law (molecules/s;
    /// `scale` is Ω_c when the law is in concentration per time, 1 when it is in molecules
    /// per time). The law reads species as counts, each load scaled to its reading.
    Law { law: Law, scale: f64 },
}

impl Reaction {
    /// Order m = Σ νᵢ over reactants.
    pub fn order(&self) -> u32 {
        self.reactants.iter().map(|r| r.1).sum()
    }

    /// The stochastic constant c of a mass-action reaction (its initial value if it follows a
    /// param).
    pub fn stochastic_constant(&self) -> Option<f64> {
        match self.kinetics {
            Kinetics::MassAction { c, .. } => Some(c),
            Kinetics::Law { .. } => None,
        }
    }

    /// Species whose counts the propensity reads.
    pub fn reads(&self) -> Vec<usize> {
        let mut s: Vec<usize> = self.reactants.iter().map(|r| r.0).collect();
        if let Kinetics::Law { law, .. } = &self.kinetics {
            s.extend(&law.species);
        }
        s.sort_unstable();
        s.dedup();
        s
    }

    /// Varying params the propensity reads.
    pub fn reads_params(&self) -> Vec<usize> {
        match &self.kinetics {
            Kinetics::MassAction { follows, .. } => follows.iter().map(|f| f.param).collect(),
            Kinetics::Law { law, .. } => law.params.clone(),
        }
    }

    /// How the propensity depends on time.
    pub fn time_use(&self) -> TimeUse {
        match &self.kinetics {
            Kinetics::Law { law, .. } => law.time,
            Kinetics::MassAction { .. } => TimeUse::None,
        }
    }
}

impl Network {
    /// The same file compiled with `changes` applied on top of this network's own overrides.
    pub fn with_overrides(&self, changes: &Overrides) -> crate::Result<Network> {
        let mut o = self.overrides.clone();
        for (name, v) in &changes.values {
            o = o.set(name, *v);
        }
        if changes.rescale_volume.is_some() {
            o.rescale_volume = changes.rescale_volume;
        }
        compile(&self.source, &o).map_err(crate::Error::Input)
    }

    pub fn species_index(&self, name: &str) -> Option<usize> {
        self.species.iter().position(|s| s.name == name)
    }

    pub fn reaction_index(&self, label: &str) -> Option<usize> {
        self.reactions.iter().position(|r| r.label == label)
    }

    pub fn param_index(&self, name: &str) -> Option<usize> {
        self.params.iter().position(|p| p.name == name)
    }

    pub fn initial_state(&self) -> Vec<i64> {
        self.species.iter().map(|s| s.initial).collect()
    }

    /// Every param's initial value in canonical units, indexed like `params` (what programs
    /// read for a varying param at the start of a run).
    pub fn initial_params(&self) -> Vec<f64> {
        self.params.iter().map(|p| p.value.value).collect()
    }

    /// Ω of the compartment of species `i` (the reference Ω where it has none).
    pub fn species_omega(&self, i: usize) -> f64 {
        self.species[i]
            .compartment
            .map_or(self.omega, |c| self.compartments[c].omega)
    }

    /// Ω of the compartment of reaction `j` (the reference Ω where it has none).
    pub fn reaction_omega(&self, j: usize) -> f64 {
        self.reactions[j]
            .compartment
            .map_or(self.omega, |c| self.compartments[c].omega)
    }

    /// Ω_c of the compartment species `i` sits in (`None` without one): a count over it is
    /// the species' concentration in its own compartment.
    pub fn species_molar_omega(&self, i: usize) -> Option<f64> {
        self.species[i]
            .compartment
            .map(|c| self.compartments[c].omega)
    }

    /// Ω_c of reaction `j`'s compartment (`None` without one): a flux in molecules per second
    /// over it is the rate in concentration per second of that compartment.
    pub fn reaction_molar_omega(&self, j: usize) -> Option<f64> {
        self.reactions[j]
            .compartment
            .map(|c| self.compartments[c].omega)
    }

    /// The factor from a count of species `i` to its concentration in its own compartment
    /// (1/Ω_c), where it sits in a compartment with a volume.
    pub fn concentration_factor(&self, i: usize) -> Option<f64> {
        let c = self.species[i].compartment?;
        Some(1.0 / self.compartments[c].omega)
    }

    /// The factor a program applies to a count of species `i` to read it (1/Ω_c for a
    /// concentration, 1/count_per_amount for an amount).
    pub fn reading_scale(&self, i: usize) -> f64 {
        match self.species[i].reads_as {
            Reading::Concentration => 1.0 / self.species_omega(i),
            Reading::Amount => 1.0 / self.amount.count_per_amount,
        }
    }

    /// The propensities in the specialised form kernels evaluate.
    pub fn propensities(&self) -> Vec<Propensity> {
        let params = self.initial_params();
        self.reactions
            .iter()
            .map(|r| Propensity::new(r, &params))
            .collect()
    }

    /// Deterministic rate of reaction `j` in state units per second (counts/Ω per second; for
    /// one compartment, concentration per time, as before), with the state y given by `y`
    /// (counts/Ω of every species), varying params `params` and the clock at `time`. Generic
    /// over [`Scalar`], so evaluating it on [`Dual`] numbers gives an exact column of the
    /// Jacobian (or ∂/∂t).
    ///
    /// Mass action: w/Ω = k·r^(1−m)·Π yᵢ^νᵢ with r = Ω_c/Ω (the rate k·Π\[Xᵢ\]^νᵢ in the
    /// reaction's compartment, times its Ω_c, over Ω). Law: law(n = y·Ω)·scale/Ω.
    pub fn rate<T: Scalar>(&self, j: usize, y: impl Fn(usize) -> T, params: &[f64], time: T) -> T {
        let r = &self.reactions[j];
        match &r.kinetics {
            Kinetics::MassAction { k, follows, .. } => {
                let k = match follows {
                    Some(f) => f.k_per_value * params[f.param],
                    None => *k,
                };
                let ratio = self.reaction_omega(j) / self.omega;
                let mut v = T::constant(k * ratio.powi(1 - r.order() as i32));
                for &(i, n) in &r.reactants {
                    v = v * y(i).powi(n as i32);
                }
                v
            }
            Kinetics::Law { law, scale } => {
                let om = T::constant(self.omega);
                law.eval(|i| y(i) * om, params, time) * T::constant(*scale / self.omega)
            }
        }
    }

    /// The species that only accumulate: not clamped, changed by some step, read by none (no
    /// reactant of any step, in no law or event) and in no conservation law. Such a species has no
    /// steady level, but it cannot affect the rest of the network either, so the rest can be
    /// stationary while it grows: its accumulation rate is the figure to report.
    pub fn outputs(&self) -> Vec<usize> {
        let mut read = vec![false; self.species.len()];
        for r in &self.reactions {
            for i in r.reads() {
                read[i] = true;
            }
        }
        for e in &self.events {
            let laws = std::iter::once(&e.trigger)
                .chain(&e.delay)
                .chain(&e.priority)
                .chain(e.assignments.iter().map(|a| &a.value));
            for &i in laws.flat_map(|l| &l.species) {
                read[i] = true;
            }
        }
        let changed = |i: usize| {
            self.reactions
                .iter()
                .any(|r| r.change.iter().any(|c| c.0 == i))
        };
        let in_law = |i: usize| self.conservation_laws.iter().any(|l| l[i] != 0);
        (0..self.species.len())
            .filter(|&i| !self.species[i].clamped && !read[i] && !in_law(i) && changed(i))
            .collect()
    }

    /// This network with `held` species treated as clamped at their initial amount (their
    /// changes removed), for analyses of the stationary part of a network whose outputs
    /// accumulate. Nothing reads an output, so every other species behaves as before.
    pub fn holding(&self, held: &[usize]) -> Network {
        let mut net = self.clone();
        for &i in held {
            net.species[i].clamped = true;
        }
        for r in &mut net.reactions {
            r.change.retain(|c| !held.contains(&c.0));
        }
        net
    }

    /// Initial deterministic state y₀ = n₀/Ω of every species (the initial amounts as counts
    /// over the reference Ω: concentrations for one compartment, counts without a volume).
    pub fn initial_concentrations(&self) -> Vec<f64> {
        self.species
            .iter()
            .map(|s| s.initial_amount * self.amount.count_per_amount / self.omega)
            .collect()
    }

    /// How the network's propensities depend on time (the strongest use of any reaction).
    pub fn time_use(&self) -> TimeUse {
        self.reactions
            .iter()
            .map(Reaction::time_use)
            .max()
            .unwrap_or(TimeUse::None)
    }

    /// Whether anything drives the network in time (doses, events, time in a law), and what:
    /// a sentence naming the first such line, or `None` for an autonomous network.
    pub fn time_forcing(&self) -> Option<String> {
        let at = |s: Span| format!("{}:{}", self.file, s.line);
        if let Some(d) = self.doses.first() {
            return Some(format!(
                "a dose of `{}` ({})",
                self.species[d.species].name,
                at(d.span)
            ));
        }
        if let Some(r) = self
            .reactions
            .iter()
            .find(|r| r.time_use() != TimeUse::None)
        {
            return Some(format!(
                "step `{}` depends on time ({})",
                r.label,
                at(r.span)
            ));
        }
        self.events
            .first()
            .map(|e| format!("the event `{}` ({})", e.label, at(e.span)))
    }

    /// Whether the drive repeats for ever (a pulse, sin or cos in a law): the long-run
    /// behaviour is then a cycle, not a point.
    pub fn periodic_drive(&self) -> bool {
        self.reactions.iter().any(|r| match &r.kinetics {
            Kinetics::Law { law, .. } => {
                law.time == TimeUse::Smooth
                    || law
                        .edges
                        .iter()
                        .any(|e| matches!(e, expr::Edge::Periodic { .. }))
            }
            _ => false,
        })
    }
}

/// A propensity function specialised by reaction order, matched once per evaluation.
#[derive(Clone, Debug)]
pub enum Propensity {
    /// 0 → …: a = c
    Zero { c: f64 },
    /// A → …: a = c·x_A
    First { a: usize, c: f64 },
    /// A + B → …: a = c·x_A·x_B
    Pair { a: usize, b: usize, c: f64 },
    /// 2A → …: a = (c/2)·x_A(x_A−1); `half_c` = c/2
    Dimer { a: usize, half_c: f64 },
    /// A + B + C → …: a = c·x_A·x_B·x_C
    Triple {
        a: usize,
        b: usize,
        d: usize,
        c: f64,
    },
    /// 2A + B → …: a = (c/2)·x_A(x_A−1)·x_B
    DimerPlus { a: usize, b: usize, half_c: f64 },
    /// 3A → …: a = (c/6)·x_A(x_A−1)(x_A−2)
    Trimer { a: usize, sixth_c: f64 },
    /// a = scale·law(x), and 0 when a reactant count is below its coefficient (the step
    /// cannot fire without its reactants). `params` holds the params' initial values, for
    /// [`Propensity::eval`].
    Law {
        law: Law,
        scale: f64,
        needs: Vec<(usize, i64)>,
        params: Vec<f64>,
    },
    /// a = p·inner(x): a mass-action propensity whose constant follows param p (`inner` has
    /// c = c_per_value); `initial` is p's initial value.
    Follow {
        inner: Box<Propensity>,
        param: usize,
        initial: f64,
    },
}

impl Propensity {
    fn new(r: &Reaction, params: &[f64]) -> Propensity {
        match &r.kinetics {
            Kinetics::Law { law, scale } => Propensity::Law {
                law: law.clone(),
                scale: *scale,
                needs: r.reactants.iter().map(|&(i, n)| (i, n as i64)).collect(),
                params: params.to_vec(),
            },
            Kinetics::MassAction {
                follows: Some(f), ..
            } => Propensity::Follow {
                inner: Box::new(Propensity::mass_action(r, f.c_per_value)),
                param: f.param,
                initial: params[f.param],
            },
            Kinetics::MassAction { c, .. } => Propensity::mass_action(r, *c),
        }
    }

    /// Whether it is a mass-action form with a constant c (not a law, not following a
    /// param).
    pub fn is_fixed_mass_action(&self) -> bool {
        !matches!(self, Propensity::Law { .. } | Propensity::Follow { .. })
    }

    fn mass_action(r: &Reaction, c: f64) -> Propensity {
        let mut rs = r.reactants.clone();
        rs.sort_by_key(|x| std::cmp::Reverse(x.1));
        match rs.as_slice() {
            [] => Propensity::Zero { c },
            [(a, 1)] => Propensity::First { a: *a, c },
            [(a, 1), (b, 1)] => Propensity::Pair { a: *a, b: *b, c },
            [(a, 2)] => Propensity::Dimer {
                a: *a,
                half_c: c / factorial(2),
            },
            [(a, 1), (b, 1), (d, 1)] => Propensity::Triple {
                a: *a,
                b: *b,
                d: *d,
                c,
            },
            [(a, 2), (b, 1)] => Propensity::DimerPlus {
                a: *a,
                b: *b,
                half_c: c / factorial(2),
            },
            [(a, 3)] => Propensity::Trimer {
                a: *a,
                sixth_c: c / factorial(3),
            },
            _ => unreachable!("the compiler rejects mass-action orders above 3"),
        }
    }

    /// The propensity at state `x` (molecules per second) at t = 0 with the params' initial
    /// values.
    #[inline(always)]
    pub fn eval(&self, x: &[i64]) -> f64 {
        match self {
            Propensity::Law { params, .. } => self.eval_at(x, params, 0.0),
            Propensity::Follow { inner, initial, .. } => initial * inner.eval(x),
            _ => self.eval_at(x, &[], 0.0),
        }
    }

    /// An interval enclosing the propensity at state `x` over the times `time` (interval
    /// arithmetic on the same program; see [`Interval`]).
    pub fn eval_interval(&self, x: &[i64], params: &[f64], time: Interval) -> Interval {
        match self {
            Propensity::Law {
                law, scale, needs, ..
            } => {
                if needs.iter().any(|&(i, n)| x[i] < n) {
                    return Interval::point(0.0);
                }
                law.eval(|i| Interval::point(x[i] as f64), params, time) * Interval::point(*scale)
            }
            _ => Interval::point(self.eval_at(x, params, time.lo)),
        }
    }

    /// The propensity at state `x` with the run's param values `params` at time `t`.
    #[inline(always)]
    pub fn eval_at(&self, x: &[i64], params: &[f64], t: f64) -> f64 {
        match *self {
            Propensity::Zero { c } => c,
            Propensity::First { a, c } => c * x[a] as f64,
            Propensity::Pair { a, b, c } => c * x[a] as f64 * x[b] as f64,
            Propensity::Dimer { a, half_c } => {
                let n = x[a] as f64;
                half_c * n * (n - 1.0)
            }
            Propensity::Triple { a, b, d, c } => c * x[a] as f64 * x[b] as f64 * x[d] as f64,
            Propensity::DimerPlus { a, b, half_c } => {
                let n = x[a] as f64;
                half_c * n * (n - 1.0) * x[b] as f64
            }
            Propensity::Trimer { a, sixth_c } => {
                let n = x[a] as f64;
                sixth_c * n * (n - 1.0) * (n - 2.0)
            }
            Propensity::Law {
                ref law,
                scale,
                ref needs,
                ..
            } => {
                if needs.iter().any(|&(i, n)| x[i] < n) {
                    return 0.0;
                }
                scale * law.eval(|i| x[i] as f64, params, t)
            }
            Propensity::Follow {
                ref inner, param, ..
            } => params[param] * inner.eval_at(x, params, t),
        }
    }
}
