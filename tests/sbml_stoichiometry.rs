//! SBML stoichiometries beyond a fixed whole number: conversion factors (the species' own or
//! the model's, SBML Level 3 Version 2 core §4.6.7 and §4.13.6 [M]) and stoichiometries set by
//! initial assignments, on small models written for this project. Expected values are worked
//! by hand from the rate equations the specification defines ([C]).

mod support;

use support::cli::run_file;

const MATH: &str = r#"<math xmlns="http://www.w3.org/1998/Math/MathML">"#;

/// An SBML Level 3 Version 2 model in item units with one unit compartment `c`; the model's
/// own attributes `model_attrs`, and `species`, `params` and `rest` spliced in as the lists'
/// contents and the remaining lists.
fn l3(model_attrs: &str, species: &str, params: &str, rest: &str) -> String {
    support::sbml_l3(&format!(" {model_attrs}"), species, params, rest)
}

/// A species in amounts; `extra` holds further attributes (a conversion factor).
fn species(id: &str, amount: f64, extra: &str) -> String {
    format!(
        r#"<species id="{id}" compartment="c" initialAmount="{amount}" hasOnlySubstanceUnits="true" boundaryCondition="false" constant="false" {extra}/>"#
    )
}

fn param(id: &str, value: f64) -> String {
    format!(r#"<parameter id="{id}" value="{value}" constant="true"/>"#)
}

/// One reaction `reactants → products` (species ids, stoichiometry 1 unless given in the
/// reference's `extra` attributes) with kinetic law `law` (MathML).
fn reaction(id: &str, reactants: &[(&str, &str)], products: &[(&str, &str)], law: &str) -> String {
    let refs = |list: &[(&str, &str)]| -> String {
        list.iter()
            .map(|(s, extra)| {
                let st = if extra.contains("stoichiometry=") {
                    String::new()
                } else {
                    r#"stoichiometry="1""#.to_string()
                };
                format!(r#"<speciesReference species="{s}" {st} {extra} constant="true"/>"#)
            })
            .collect()
    };
    let reactants = match reactants {
        [] => String::new(),
        r => format!("<listOfReactants>{}</listOfReactants>", refs(r)),
    };
    let products = match products {
        [] => String::new(),
        p => format!("<listOfProducts>{}</listOfProducts>", refs(p)),
    };
    format!(
        r#"<reaction id="{id}" reversible="false">{reactants}{products}
           <kineticLaw>{MATH}{law}</math></kineticLaw></reaction>"#
    )
}

/// The simulate JSON of `doc` with `args`, which must succeed.
fn simulate(doc: &str, args: &[&str]) -> serde_json::Value {
    let mut all = vec!["simulate"];
    all.extend(args);
    all.push("--json");
    let (code, out, msg) = run_file(doc.as_bytes(), &all);
    assert_eq!(code, Some(0), "{msg}");
    serde_json::from_str(&out).unwrap()
}

/// Column `key` of species `id` on the grid.
fn column(v: &serde_json::Value, id: &str, key: &str) -> Vec<f64> {
    v["grid"][id][key]
        .as_array()
        .unwrap_or_else(|| panic!("no grid.{id}.{key} in {v}"))
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

const TIMES_A: &str = "<apply><times/><ci>k</ci><ci>A</ci></apply>";

#[test]
fn conversion_factors_scale_each_species_change_under_ode() {
    // A → B at rate k·A, k = 1, A(0) = 10. A's own factor 2 and the model's factor 3 (for B):
    // dA/dt = −2kA, dB/dt = 3kA, so A(t) = 10·e^(−2t) and B(t) = 15·(1 − e^(−2t)) [C].
    let doc = l3(
        r#"conversionFactor="mcf""#,
        &(species("A", 10.0, r#"conversionFactor="acf""#) + &species("B", 0.0, "")),
        &(param("k", 1.0) + &param("acf", 2.0) + &param("mcf", 3.0)),
        &format!(
            "<listOfReactions>{}</listOfReactions>",
            reaction("convert", &[("A", "")], &[("B", "")], TIMES_A)
        ),
    );
    let v = simulate(&doc, &["--t-end", "2", "--grid", "3", "--method", "ode"]);
    let (a, b) = (column(&v, "A", "mean"), column(&v, "B", "mean"));
    for (k, t) in [0.0f64, 1.0, 2.0].into_iter().enumerate() {
        let e = (-2.0 * t).exp();
        assert!((a[k] - 10.0 * e).abs() < 1e-6 * 10.0, "A at {t}: {a:?}");
        assert!(
            (b[k] - 15.0 * (1.0 - e)).abs() < 1e-6 * 15.0,
            "B at {t}: {b:?}"
        );
    }
}

#[test]
fn a_conversion_factor_scales_the_jump_of_a_stochastic_run() {
    // ∅ → B at propensity k = 2.5 /s with B's factor 3: B(t) = 3·N with N ~ Poisson(k·t)
    // (the Poisson process, common practice). At t = 2, λ = 5: mean 3λ = 15, variance 9λ = 45
    // (a rate three times as large would give variance 15). The sample variance's standard
    // error is √((κ₄ + 2σ⁴)/n) with κ₄ = 81λ the fourth cumulant of 3N (common practice);
    // 4,000 replicates, fixed seed, 4 standard errors.
    let doc = l3(
        "",
        &species("B", 0.0, r#"conversionFactor="bcf""#),
        &(param("k", 2.5) + &param("bcf", 3.0)),
        &format!(
            "<listOfReactions>{}</listOfReactions>",
            reaction("make", &[], &[("B", "")], "<ci>k</ci>")
        ),
    );
    let n = 4000.0;
    let v = simulate(
        &doc,
        &[
            "--t-end",
            "2",
            "--grid",
            "3",
            "--replicates",
            "4000",
            "--seed",
            "11",
        ],
    );
    let (mean, sd) = (column(&v, "B", "mean"), column(&v, "B", "sd"));
    let lambda = 5.0;
    let (mu, var) = (3.0 * lambda, 9.0 * lambda);
    assert!(
        (mean[2] - mu).abs() < 4.0 * (var / n).sqrt(),
        "{} vs {mu}",
        mean[2]
    );
    let se_var = ((81.0 * lambda + 2.0 * var * var) / n).sqrt();
    let s2 = sd[2] * sd[2];
    assert!((s2 - var).abs() < 4.0 * se_var, "{s2} vs {var}");
}

#[test]
fn a_conversion_factor_that_makes_a_fractional_change_is_refused() {
    let doc = l3(
        "",
        &(species("A", 10.0, r#"conversionFactor="half""#) + &species("B", 0.0, "")),
        &(param("k", 1.0) + &param("half", 0.5)),
        &format!(
            "<listOfReactions>{}</listOfReactions>",
            reaction("convert", &[("A", "")], &[("B", "")], TIMES_A)
        ),
    );
    let (code, _, msg) = run_file(doc.as_bytes(), &["check"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains(
            "the stoichiometry 1 of `A` times its conversion factor 0.5 is 0.5, not a whole number"
        ),
        "{msg}"
    );
    assert!(msg.contains(".xml:9:"), "{msg}");
}

#[test]
fn a_conversion_factor_that_an_event_changes_is_refused() {
    let event = format!(
        r#"<listOfEvents><event id="flip" useValuesFromTriggerTime="true">
             <trigger initialValue="true" persistent="true">{MATH}<apply><gt/><ci>A</ci><cn>100</cn></apply></math></trigger>
             <listOfEventAssignments><eventAssignment variable="acf">{MATH}<cn>1</cn></math></eventAssignment></listOfEventAssignments>
           </event></listOfEvents>"#
    );
    let doc = l3(
        "",
        &(species("A", 10.0, r#"conversionFactor="acf""#) + &species("B", 0.0, "")),
        &(param("k", 1.0) + &param("acf", 2.0).replace("true", "false")),
        &format!(
            "<listOfReactions>{}</listOfReactions>{event}",
            reaction("convert", &[("A", "")], &[("B", "")], TIMES_A)
        ),
    );
    let (code, _, msg) = run_file(doc.as_bytes(), &["check"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains("the conversion factor `acf` of `A` changes during the run"),
        "{msg}"
    );
}

/// The same reaction `A → n B` (law k·A, k = 1, A(0) = 10) in Level 2 Version 4 with B's
/// stoichiometry given by `stoichiometry_math` (MathML), in item units.
fn l2_with_stoichiometry_math(stoichiometry_math: &str) -> String {
    format!(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<sbml xmlns="http://www.sbml.org/sbml/level2/version4" level="2" version="4">
  <model id="m">
    <listOfUnitDefinitions>
      <unitDefinition id="substance"><listOfUnits><unit kind="item"/></listOfUnits></unitDefinition>
    </listOfUnitDefinitions>
    <listOfCompartments><compartment id="c" size="1"/></listOfCompartments>
    <listOfSpecies>
      <species id="A" compartment="c" initialAmount="10" hasOnlySubstanceUnits="true"/>
      <species id="B" compartment="c" initialAmount="0" hasOnlySubstanceUnits="true"/>
    </listOfSpecies>
    <listOfParameters><parameter id="k" value="1"/><parameter id="two" value="2"/></listOfParameters>
    <listOfReactions>
      <reaction id="split" reversible="false">
        <listOfReactants><speciesReference species="A"/></listOfReactants>
        <listOfProducts><speciesReference species="B">
          <stoichiometryMath>{MATH}{stoichiometry_math}</math></stoichiometryMath>
        </speciesReference></listOfProducts>
        <kineticLaw>{MATH}{TIMES_A}</math></kineticLaw>
      </reaction>
    </listOfReactions>
  </model>
</sbml>
"#
    )
}

#[test]
fn a_constant_stoichiometry_math_is_read_as_its_value() {
    // B's stoichiometry two·1.5 = 3: dA/dt = −A, dB/dt = 3A, B(t) = 30·(1 − e^(−t)) [C].
    let doc = l2_with_stoichiometry_math("<apply><times/><ci>two</ci><cn>1.5</cn></apply>");
    let v = simulate(&doc, &["--t-end", "2", "--grid", "3", "--method", "ode"]);
    let b = column(&v, "B", "mean");
    for (k, t) in [0.0f64, 1.0, 2.0].into_iter().enumerate() {
        let want = 30.0 * (1.0 - (-t).exp());
        assert!((b[k] - want).abs() < 1e-6 * 30.0, "B at {t}: {b:?}");
    }
}

#[test]
fn a_stoichiometry_math_that_reads_a_species_is_refused_by_name() {
    let doc = l2_with_stoichiometry_math("<ci>A</ci>");
    let (code, _, msg) = run_file(doc.as_bytes(), &["check"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains("the stoichiometryMath of `B` in reaction `split` reads `A`"),
        "{msg}"
    );
    assert!(msg.contains(".xml:17:"), "{msg}");
}

#[test]
fn a_stoichiometry_read_in_a_law_is_its_constant_value() {
    // A → 3 B with the product's stoichiometry `nb` = 3 read in the law k·nb·A (k = 1):
    // dA/dt = −3A, dB/dt = 9A, so A(t) = 10·e^(−3t) and B(t) = 30·(1 − e^(−3t)) [C].
    let law = "<apply><times/><ci>k</ci><ci>nb</ci><ci>A</ci></apply>";
    let doc = l3(
        "",
        &(species("A", 10.0, "") + &species("B", 0.0, "")),
        &param("k", 1.0),
        &format!(
            "<listOfReactions>{}</listOfReactions>",
            reaction(
                "split",
                &[("A", "")],
                &[("B", r#"id="nb" stoichiometry="3""#)],
                law
            )
        ),
    );
    let v = simulate(&doc, &["--t-end", "1", "--grid", "2", "--method", "ode"]);
    let (a, b) = (column(&v, "A", "mean"), column(&v, "B", "mean"));
    let e = (-3.0f64).exp();
    assert!((a[1] - 10.0 * e).abs() < 1e-6 * 10.0, "{a:?}");
    assert!((b[1] - 30.0 * (1.0 - e)).abs() < 1e-6 * 30.0, "{b:?}");
}

#[test]
fn a_stoichiometry_that_an_event_changes_is_refused_by_its_id() {
    let event = format!(
        r#"<listOfEvents><event id="more" useValuesFromTriggerTime="true">
             <trigger initialValue="true" persistent="true">{MATH}<apply><lt/><ci>A</ci><cn>5</cn></apply></math></trigger>
             <listOfEventAssignments><eventAssignment variable="nb">{MATH}<cn>4</cn></math></eventAssignment></listOfEventAssignments>
           </event></listOfEvents>"#
    );
    let doc = l3(
        "",
        &(species("A", 10.0, "") + &species("B", 0.0, "")),
        &param("k", 1.0),
        &format!(
            "<listOfReactions>{}</listOfReactions>{event}",
            reaction(
                "split",
                &[("A", "")],
                &[("B", r#"id="nb" stoichiometry="3""#)],
                TIMES_A
            )
            .replace(
                r#"constant="true"/></listOfProducts>"#,
                r#"constant="false"/></listOfProducts>"#
            )
        ),
    );
    let (code, _, msg) = run_file(doc.as_bytes(), &["check"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains("<speciesReference> `nb`: not supported yet: the stoichiometry `nb` of `B` in reaction `split`, which a rule or an event changes"),
        "{msg}"
    );
}
