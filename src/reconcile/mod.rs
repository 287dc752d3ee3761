//! Reconciliation: do the elementary rate constants, put together, reproduce the loop's
//! organ-level behaviour?

pub mod fit;
pub mod observe;
