//! The deterministic description of a network: rate equations, their stiff integration, the
//! steady state, the linear noise approximation around it, and Langmuir-form predictions for
//! carrier motifs.
//!
//! ```text
//! system.rs   dx/dt = S·v(x) on the free species, exact Jacobian (dual numbers)
//! reduce.rs   conservation laws → independent species, link matrix, reduced Jacobian
//! ode.rs      RODAS4 Rosenbrock integration with error control
//! steady.rs   Newton with conservation rows, checked by integration; stability; diagnosis
//! lna.rs      J Σ + Σ Jᵀ + D = 0 at the steady state
//! langmuir.rs K, θ, Langmuir and total-QSSA fluxes of carrier motifs
//! ```
//!
//! Units: concentrations in mol/L where the network has a volume, molecule counts where it does
//! not (Ω = 1 then); results carry counts (×Ω) beside them.

pub mod langmuir;
pub mod lna;
pub mod ode;
pub mod reduce;
pub mod steady;
pub mod system;

pub use langmuir::{predict, MotifPrediction};
pub use lna::{at_steady_state, stationary, Lna};
pub use ode::{integrate, OdeOptions, Trajectory};
pub use steady::{solve, Accumulation, Residual, Route, Stability, Steady, SteadyOptions};
pub use system::System;
