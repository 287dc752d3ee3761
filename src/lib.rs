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
