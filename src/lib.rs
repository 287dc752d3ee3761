//! copyloop: stochastic molecular-level simulation of endocrine and pharmacological feedback
//! loops, reconciled with the deterministic organ-level description.
//!
//! Data flows one way: text → [`network`] (compiler) → kernels → ensemble → reconcile →
//! [`report`]. The command-line tool in `src/main.rs` is a thin layer over this library.
//!
//! # Example: compile a network and read its carrier motif
//!
//! ```
//! use copyloop::network::{load_source, Overrides};
//!
//! let text = "volume 1 pL
//! species H  = 50 nM clamped
//! species E  = 200 molecules
//! species EH = 0 molecules
//! species M  = 0 molecules
//! step bind     E + H <-> EH @ 2e7 /M/s, 0.5 /s
//! step turnover EH -> E + M  @ 1.5 /s
//! ";
//! let net = load_source("example.crn", text.as_bytes(), &Overrides::default())?;
//!
//! // Briggs–Haldane: K = (k_off + k_cat)/k_on = 2 /s / 2e7 /M/s = 100 nM.
//! let motif = &net.motifs[0];
//! assert_eq!(net.species[motif.carrier].name, "E");
//! assert!((motif.k_half / net.omega - 1e-7).abs() < 1e-18);
//!
//! // E + EH is conserved; H is clamped, so it takes part in no law.
//! assert_eq!(net.conservation_laws, vec![vec![0, 1, 1, 0]]);
//! # Ok::<(), copyloop::Error>(())
//! ```
//!
//! # Example: an ensemble, read from its typed result
//!
//! ```
//! use copyloop::ensemble::{self, EnsembleSpec};
//! use copyloop::network::{load_source, Overrides};
//!
//! // Immigration–death, counted in molecules: 0 → X at k = 10 /s, X → 0 at γ = 1 /s per X.
//! let text = "species X = 0 molecules
//! step make  0 -> X @ 10 /s
//! step decay X -> 0 @ 1 /s
//! ";
//! let net = load_source("immigration.crn", text.as_bytes(), &Overrides::default())?;
//! let spec = EnsembleSpec {
//!     replicates: 400,
//!     seed: 7,
//!     threads: Some(1),
//!     ..EnsembleSpec::new(2.0)
//! };
//! let result = ensemble::run(&net, &spec)?;
//! let x = &result.final_state[0];
//! assert_eq!(x.count(), 400);
//!
//! // X(t) is Poisson with mean (k/γ)(1 − e^(−γt)) from X(0) = 0 (a closed form of the
//! // master equation; common practice): 8.65 at t = 2 s. The ensemble mean lies within
//! // four standard errors of it.
//! let exact = 10.0 * (1.0 - (-2.0f64).exp());
//! assert!((x.mean() - exact).abs() < 4.0 * x.stderr());
//! # Ok::<(), copyloop::Error>(())
//! ```
//!
//! `examples/library_sweep.rs` runs a small parameter sweep from Rust the same way.
//!
//! copyloop is a research instrument; its output is not a basis for diagnosis or treatment.

pub mod cli;
pub mod deterministic;
pub mod distribution;
pub mod ensemble;
pub mod error;
pub mod kernel;
pub mod network;
pub mod noise;
pub mod numbers;
pub mod reconcile;
pub mod report;
pub mod sbml;
pub mod serial;
pub mod stationary;
pub mod stats;
pub mod sweep;

pub use error::{Error, Result};
pub use network::Network;
