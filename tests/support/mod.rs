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

/// An SBML Level 3 Version 2 model in item units with one unit compartment `c`: `attrs` is
/// written as is after the model's `substanceUnits` (with its own leading space), and
/// `species`, `params` and `rest` are spliced in as the lists' contents and the remaining lists.
pub fn sbml_l3(attrs: &str, species: &str, params: &str, rest: &str) -> String {
    format!(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<sbml xmlns="http://www.sbml.org/sbml/level3/version2/core" level="3" version="2">
  <model id="m" substanceUnits="item"{attrs}>
    <listOfCompartments>
      <compartment id="c" spatialDimensions="3" size="1" constant="true"/>
    </listOfCompartments>
    <listOfSpecies>{species}</listOfSpecies>
    <listOfParameters>{params}</listOfParameters>
    {rest}
  </model>
</sbml>
"#
    )
}
