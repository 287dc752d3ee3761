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
pub mod laws;
pub mod lexer;
pub mod parser;
pub mod units;

pub use analysis::{law_text, motif_chains, DependencyGraph, Motif, MotifKind, Stoichiometry};
pub use compile::{compile, load, load_source, Override, Overrides};
pub use expr::{Dual, Law, Scalar};
pub use units::{Dim, Quantity, AVOGADRO};

use crate::error::{Diagnostic, Span};

/// Largest molecule count copyloop accepts (2⁵⁰ ≈ 1.1e15), so that counts stay exact in f64 and
/// no sum of counts can overflow an i64.
pub const MAX_COUNT: i64 = 1 << 50;

/// A compiled reaction network.
#[derive(Clone, Debug)]
pub struct Network {
    /// The file it came from, for messages.
    pub file: String,
    /// Volume in litres, if the file sets one.
    pub volume_l: Option<f64>,
    /// Ω = N_A·V in molecules per mol/L; 1 in a network without a volume, where every figure is
    /// already in molecules.
    pub omega: f64,
    pub species: Vec<Species>,
    pub params: Vec<Param>,
    pub reactions: Vec<Reaction>,
    /// Net stoichiometry, species × reactions (products minus reactants, as written; rows of
    /// clamped species show what the reaction would do, although the count is held fixed).
    pub stoichiometry: Stoichiometry,
    /// For each reaction j, the reactions whose propensity can change when j fires.
    pub dependents: DependencyGraph,
    /// Integer vectors l with l·S = 0 over the non-clamped species: l·x is constant in time.
    pub conservation_laws: Vec<Vec<i64>>,
    pub motifs: Vec<Motif>,
    pub warnings: Vec<Diagnostic>,
    /// The parsed file and the overrides it was compiled with, so that variants of the same
    /// network (sweep points, sensitivities, fits) can be compiled without reading it again.
    pub source: std::sync::Arc<parser::Ast>,
    pub overrides: Overrides,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Species {
    pub name: String,
    /// Initial count in molecules.
    pub initial: i64,
    /// Held at `initial` for the whole run.
    pub clamped: bool,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Param {
    pub name: String,
    /// Value in canonical units (mol/L, s, molecules, L).
    pub value: Quantity,
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
    pub span: Span,
}

/// How a reaction's rate depends on the state.
#[derive(Clone, Debug)]
pub enum Kinetics {
    /// Mass action: deterministic rate v = k·Π[Xᵢ]^νᵢ (k in mol/L and seconds, or molecules and
    /// seconds without a volume); propensity a = c·Π C(xᵢ, νᵢ) with c = k·Π(νᵢ!)/Ω^(m−1).
    MassAction { k: f64, c: f64 },
    /// A regulated rate law giving the whole rate: propensity a = scale·law(x/Ω) in molecules/s
    /// (`scale` is Ω when the law is in concentration per time, 1 when it is in molecules per
    /// time).
    Law { law: Law, scale: f64 },
}

impl Reaction {
    /// Order m = Σ νᵢ over reactants.
    pub fn order(&self) -> u32 {
        self.reactants.iter().map(|r| r.1).sum()
    }

    /// The stochastic constant c of a mass-action reaction.
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

    pub fn initial_state(&self) -> Vec<i64> {
        self.species.iter().map(|s| s.initial).collect()
    }

    /// The propensities in the specialised form kernels evaluate.
    pub fn propensities(&self) -> Vec<Propensity> {
        self.reactions
            .iter()
            .map(|r| Propensity::new(r, self.omega))
            .collect()
    }

    /// Deterministic rate of reaction `j` (concentration per time; molecules per time without a
    /// volume) with concentrations given by `conc`. Generic over [`Scalar`], so evaluating it on
    /// [`Dual`] numbers gives an exact column of the Jacobian.
    ///
    /// Mass action: v = k·Π[Xᵢ]^νᵢ. Law: v = law([X])·scale/Ω.
    pub fn rate<T: Scalar>(&self, j: usize, conc: impl Fn(usize) -> T) -> T {
        let r = &self.reactions[j];
        match &r.kinetics {
            Kinetics::MassAction { k, .. } => {
                let mut v = T::constant(*k);
                for &(i, n) in &r.reactants {
                    v = v * conc(i).powi(n as i32);
                }
                v
            }
            Kinetics::Law { law, scale } => law.eval(conc) * T::constant(*scale / self.omega),
        }
    }

    /// The species that only accumulate: not clamped, changed by some step, read by none (no
    /// reactant of any step, in no law) and in no conservation law. Such a species has no
    /// steady level, but it cannot affect the rest of the network either, so the rest can be
    /// stationary while it grows: its accumulation rate is the figure to report.
    pub fn outputs(&self) -> Vec<usize> {
        let mut read = vec![false; self.species.len()];
        for r in &self.reactions {
            for i in r.reads() {
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

    /// Initial concentrations x₀/Ω (counts without a volume).
    pub fn initial_concentrations(&self) -> Vec<f64> {
        self.species
            .iter()
            .map(|s| s.initial as f64 / self.omega)
            .collect()
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
    /// a = scale·law(x/Ω), and 0 when a reactant count is below its coefficient (the step
    /// cannot fire without its reactants).
    Law {
        law: Law,
        scale: f64,
        inv_omega: f64,
        needs: Vec<(usize, i64)>,
    },
}

impl Propensity {
    fn new(r: &Reaction, omega: f64) -> Propensity {
        match &r.kinetics {
            Kinetics::Law { law, scale } => Propensity::Law {
                law: law.clone(),
                scale: *scale,
                inv_omega: 1.0 / omega,
                needs: r.reactants.iter().map(|&(i, n)| (i, n as i64)).collect(),
            },
            Kinetics::MassAction { c, .. } => {
                let c = *c;
                let mut rs = r.reactants.clone();
                rs.sort_by_key(|x| std::cmp::Reverse(x.1));
                match rs.as_slice() {
                    [] => Propensity::Zero { c },
                    [(a, 1)] => Propensity::First { a: *a, c },
                    [(a, 1), (b, 1)] => Propensity::Pair { a: *a, b: *b, c },
                    [(a, 2)] => Propensity::Dimer {
                        a: *a,
                        half_c: c / 2.0,
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
                        half_c: c / 2.0,
                    },
                    [(a, 3)] => Propensity::Trimer {
                        a: *a,
                        sixth_c: c / 6.0,
                    },
                    _ => unreachable!("the compiler rejects mass-action orders above 3"),
                }
            }
        }
    }

    /// The propensity at state `x` (molecules per second).
    #[inline(always)]
    pub fn eval(&self, x: &[i64]) -> f64 {
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
                inv_omega,
                ref needs,
            } => {
                if needs.iter().any(|&(i, n)| x[i] < n) {
                    return 0.0;
                }
                scale * law.eval(|i| x[i] as f64 * inv_omega)
            }
        }
    }
}
