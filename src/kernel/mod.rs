//! One trajectory at a time: exact and approximate stochastic kernels.

pub mod leap;
pub mod select;
