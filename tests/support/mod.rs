//! Helpers shared by the integration tests; each test crate uses some of them.
#![allow(dead_code)]

pub mod cli;
pub mod sbml_semantic;
pub mod sbml_stochastic;
pub mod sbml_suite;
pub mod schema;
pub mod stats;
pub mod svg;

/// The longest run of ASCII digits in `text` (a number printed with hundreds of digits shows
/// as a long run).
pub fn longest_digits(text: &str) -> usize {
    let (mut best, mut run) = (0, 0);
    for b in text.bytes() {
        run = if b.is_ascii_digit() { run + 1 } else { 0 };
        best = best.max(run);
    }
    best
}
