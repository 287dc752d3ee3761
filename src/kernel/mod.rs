//! One trajectory at a time: exact and approximate stochastic kernels.
//!
//! ```text
//! Network ──CompiledKernel::new──▶ flat arrays ──Direct::run(x0, t_end, rng, observer)──▶ RunSummary
//!                                                        │
//!                                       observer: grid samples, firing counts, ∫x dt, ∫x² dt
//! ```
//!
//! - [`compiled`]: the network in flat, index form, built once.
//! - [`direct`]: the Gillespie direct method.
//! - [`observe`]: what a run reports ([`observe::Observer`], [`observe::Recorder`]).
//! - [`rng`]: the documented random stream of each replicate.
//! - [`select`]: channel selection (linear scan, sum tree).
//! - [`timeline`]: doses, law edges and events: the breakpoints of a run.
//! - [`ziggurat`]: exponential waiting times, fast path and slow path apart.
//!
//! Kernels never print and never allocate inside their event loop.

pub mod compiled;
pub mod direct;
pub mod leap;
pub mod observe;
pub mod rng;
pub mod select;

pub use compiled::CompiledKernel;
pub use direct::{Direct, RunSummary};
pub use observe::{Integrals, Observer, RecordSpec, Recorder};
pub mod tau;
pub mod timeline;
pub mod ziggurat;
