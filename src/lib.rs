//! copyloop: stochastic molecular-level simulation of feedback loops, reconciled with the
//! deterministic organ-level description.
//!
//! Data flows one way: text → [`network`] → kernels → ensemble → reconcile → report.

pub mod cli;
pub mod error;
pub mod kernel;
pub mod network;
pub mod report;
pub mod stats;
pub mod sweep;

pub use error::{Error, Result};
pub use network::Network;
