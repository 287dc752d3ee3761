//! `simulate --json` on an imported SBML model: every species as amount and concentration
//! (one an assignment rule computes included), every parameter and compartment by id, in the
//! model's own units, for the ODE and for an ensemble. The model is invented for this test:
//! a hypothetical gland secreting a hormone H at a constant rate and clearing it at first order,
//! with a bound form B that an assignment rule keeps at three times H.
//!
//! Expected values [C]: H(t) = (k0/k1)(1 − e^{−k1·t}) from H(0) = 0 (the linear immigration-
//! death equation solved exactly); in a stochastic run H(t) is Poisson with that mean
//! (immigration-death from an empty state, a standard result of the chemical master equation
//! [M]), so the ensemble mean has standard error √(H(t)/n).

mod support;

use serde_json::Value;
use support::cli::run_file;

const K0: f64 = 4.0;
const K1: f64 = 0.5;
const GLAND: f64 = 2.0;

fn model() -> String {
    let m = r#"<math xmlns="http://www.w3.org/1998/Math/MathML">"#;
    format!(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<!-- invented: a hypothetical gland and hormone -->
<sbml xmlns="http://www.sbml.org/sbml/level3/version2/core" level="3" version="2">
  <model id="gland_model" substanceUnits="item" timeUnits="second" volumeUnits="litre" extentUnits="item">
    <listOfCompartments>
      <compartment id="gland" spatialDimensions="3" size="{GLAND}" constant="true"/>
    </listOfCompartments>
    <listOfSpecies>
      <species id="H" compartment="gland" initialAmount="0" hasOnlySubstanceUnits="true" boundaryCondition="false" constant="false"/>
      <species id="B" compartment="gland" initialAmount="0" hasOnlySubstanceUnits="true" boundaryCondition="false" constant="false"/>
    </listOfSpecies>
    <listOfParameters>
      <parameter id="k0" value="{K0}" constant="true"/>
      <parameter id="k1" value="{K1}" constant="true"/>
      <parameter id="twice_k1" constant="false"/>
    </listOfParameters>
    <listOfRules>
      <assignmentRule variable="B">{m}<apply><times/><cn>3</cn><ci>H</ci></apply></math></assignmentRule>
      <assignmentRule variable="twice_k1">{m}<apply><times/><cn>2</cn><ci>k1</ci></apply></math></assignmentRule>
    </listOfRules>
    <listOfReactions>
      <reaction id="secretion" reversible="false">
        <listOfProducts><speciesReference species="H" stoichiometry="1" constant="true"/></listOfProducts>
        <kineticLaw>{m}<ci>k0</ci></math></kineticLaw>
      </reaction>
      <reaction id="clearance" reversible="false">
        <listOfReactants><speciesReference species="H" stoichiometry="1" constant="true"/></listOfReactants>
        <kineticLaw>{m}<apply><times/><ci>k1</ci><ci>H</ci></apply></math></kineticLaw>
      </reaction>
    </listOfReactions>
  </model>
</sbml>
"#
    )
}

fn simulate(args: &[&str]) -> Value {
    let mut all = vec!["simulate"];
    all.extend(args);
    let (code, out, err) = run_file(model().as_bytes(), &all);
    assert_eq!(code, Some(0), "{err}");
    let doc: Value = serde_json::from_str(&out).expect("one JSON document");
    // The document conforms to the committed schema, closed both ways (docs/schema).
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/docs/schema/simulate.json");
    let schema: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    support::schema::validate(&schema, &doc, support::schema::Closed::Yes).unwrap();
    doc
}

fn column(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn exact_h(t: f64) -> f64 {
    K0 / K1 * (1.0 - (-K1 * t).exp())
}

#[test]
fn ode_grid_has_every_symbol_in_the_models_units() {
    let d = simulate(&["--t-end", "10", "--grid", "11", "--method", "ode", "--json"]);
    assert_eq!(d["model_units"]["substance"], "item");
    assert_eq!(d["model_units"]["volume"], "litre");
    assert_eq!(d["model_units"]["time"], "second");
    let g = &d["grid"];
    let times = column(&g["time"]);
    let h = column(&g["H"]["amount_mean"]);
    let h_conc = column(&g["H"]["concentration_mean"]);
    let b = column(&g["B"]["amount_mean"]);
    let b_conc = column(&g["B"]["concentration_mean"]);
    assert_eq!(g["B"]["assigned"], true);
    assert_eq!(g["B"]["compartment"], "gland");
    for (k, &t) in times.iter().enumerate() {
        let want = exact_h(t);
        let tol = 1e-6 * want.max(1.0);
        assert!((h[k] - want).abs() <= tol, "H at {t}: {} vs {want}", h[k]);
        assert!((h_conc[k] - want / GLAND).abs() <= tol, "[H] at {t}");
        assert!((b[k] - 3.0 * want).abs() <= 3.0 * tol, "B at {t}");
        assert!(
            (b_conc[k] - 3.0 * want / GLAND).abs() <= 3.0 * tol,
            "[B] at {t}"
        );
    }
    for (id, value) in [
        ("k0", K0),
        ("k1", K1),
        ("twice_k1", 2.0 * K1),
        ("gland", GLAND),
    ] {
        let s = column(&g[id]["mean"]);
        assert_eq!(s.len(), times.len(), "{id}");
        assert!(s.iter().all(|&x| x == value), "{id}: {s:?}");
        assert!(g[id].get("sd").is_none(), "{id} has no sd under ode");
    }
    assert_eq!(g["gland"]["kind"], "compartment");
    assert_eq!(g["k1"]["kind"], "param");
    assert!(d.get("model_note").is_none());
}

#[test]
fn one_replicate_reports_rule_values_on_its_own_trajectory() {
    let d = simulate(&["--t-end", "10", "--grid", "21", "--seed", "7", "--json"]);
    let g = &d["grid"];
    let h = column(&g["H"]["amount_mean"]);
    let b = column(&g["B"]["amount_mean"]);
    let h_conc = column(&g["H"]["concentration_mean"]);
    for k in 0..h.len() {
        assert_eq!(b[k], 3.0 * h[k], "the rule B = 3·H at grid point {k}");
        assert_eq!(h_conc[k], h[k] / GLAND);
    }
    assert_eq!(column(&g["twice_k1"]["mean"])[0], 2.0 * K1);
    assert_eq!(column(&g["gland"]["sd"]), vec![0.0; h.len()]);
}

#[test]
fn an_ensemble_leaves_rule_values_out_and_says_so() {
    let n = 400.0;
    let d = simulate(&[
        "--t-end",
        "10",
        "--grid",
        "6",
        "--replicates",
        "400",
        "--seed",
        "3",
        "--json",
    ]);
    let g = &d["grid"];
    assert!(g.get("B").is_none() && g.get("twice_k1").is_none());
    let note = d["model_note"].as_str().unwrap();
    assert!(note.contains("B") && note.contains("twice_k1"), "{note}");
    let times = column(&g["time"]);
    let h = column(&g["H"]["amount_mean"]);
    let sd = column(&g["H"]["amount_sd"]);
    let conc_sd = column(&g["H"]["concentration_sd"]);
    for (k, &t) in times.iter().enumerate().skip(1) {
        let want = exact_h(t);
        let se = (want / n).sqrt();
        assert!(
            (h[k] - want).abs() <= 5.0 * se,
            "H at {t}: {} vs {want} ± {se}",
            h[k]
        );
        assert!((conc_sd[k] - sd[k] / GLAND).abs() <= 1e-12 * sd[k]);
    }
    assert_eq!(column(&g["k1"]["mean"]), vec![K1; times.len()]);
}
