//! Helpers shared by the integration tests; each test crate uses some of them.
#![allow(dead_code)]

pub mod cli;
pub mod sbml_semantic;
pub mod sbml_stochastic;
pub mod sbml_suite;
pub mod stats;
pub mod svg;
