//! SBML import on small models written for this project: level defaults, formulas, function
//! definitions, the same model in `.crn` and SBML, refusals and malformed files. Expected values
//! are worked by hand from the formulas in the SBML Level 3 core specification ([C]).

mod support;

use copyloop::sbml::{self, initial::initial_values, Construct, ErrorKind};
use std::io::Write;
use support::cli::{self, run_file};

/// An SBML Level 3 Version 2 model in item units with one unit compartment `c`; `species`,
/// `params` and `rest` are spliced in as the lists' contents and the remaining lists.
fn l3(species: &str, params: &str, rest: &str) -> String {
    support::sbml_l3("", species, params, rest)
}

const MATH: &str = r#"<math xmlns="http://www.w3.org/1998/Math/MathML">"#;

fn species(id: &str, amount: f64) -> String {
    format!(
        r#"<species id="{id}" compartment="c" initialAmount="{amount}" hasOnlySubstanceUnits="true" boundaryCondition="false" constant="false"/>"#
    )
}

fn param(id: &str, value: f64) -> String {
    format!(r#"<parameter id="{id}" value="{value}" constant="true"/>"#)
}

/// Initial assignments `symbol = mathml`.
fn assignments(list: &[(&str, &str)]) -> String {
    let items: String = list
        .iter()
        .map(|(s, m)| {
            format!(r#"<initialAssignment symbol="{s}">{MATH}{m}</math></initialAssignment>"#)
        })
        .collect();
    format!("<listOfInitialAssignments>{items}</listOfInitialAssignments>")
}

/// The t = 0 value of each parameter of `doc`, by id.
fn values(doc: &str) -> std::collections::HashMap<String, f64> {
    let imported = sbml::import(doc.as_bytes()).unwrap_or_else(|e| panic!("{e:?}"));
    let m = &imported.document.model;
    let v = initial_values(m).unwrap();
    m.parameters
        .iter()
        .zip(&v.parameters)
        .map(|(p, x)| (p.id.clone(), x.unwrap()))
        .collect()
}

/// The first error of importing `doc`.
fn first_error(doc: &str) -> sbml::SbmlError {
    sbml::import(doc.as_bytes())
        .expect_err("must fail")
        .remove(0)
}

/// Writes `text` to a temporary file with extension `.xml` and runs `copyloop check` on it.
fn check_file(text: &[u8]) -> (Option<i32>, String) {
    let mut f = tempfile::Builder::new().suffix(".xml").tempfile().unwrap();
    f.write_all(text).unwrap();
    let out = cli::run(&["check", f.path().to_str().unwrap()]);
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

// --- the same model three ways -------------------------------------------------------------

fn without(mut v: serde_json::Value, keys: &[&str]) -> serde_json::Value {
    for k in keys {
        v.as_object_mut().unwrap().remove(*k);
    }
    v
}

#[test]
fn crn_and_both_sbml_levels_give_identical_json() {
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/sbml/");
    let files = ["secretion.crn", "secretion.xml", "secretion_l2.xml"].map(|f| format!("{dir}{f}"));
    let checks: Vec<serde_json::Value> = files
        .iter()
        .map(|f| {
            let mut v = without(cli::json(&["check", f, "--json"]), &["file"]);
            // The law's display text is the source text in .crn and the formula in SBML.
            let law = v["reactions"][0].as_object_mut().unwrap().remove("law");
            assert!(law
                .unwrap()
                .as_str()
                .unwrap()
                .starts_with("ks * K / (K + H"));
            v
        })
        .collect();
    assert_eq!(checks[0], checks[1]);
    assert_eq!(checks[0], checks[2]);
    let sims: Vec<serde_json::Value> = files
        .iter()
        .map(|f| {
            let args = [
                "simulate",
                f,
                "--t-end",
                "20",
                "--replicates",
                "40",
                "--seed",
                "11",
                "--json",
            ];
            without(
                cli::json(&args),
                &["file", "wall_seconds", "events_per_second"],
            )
        })
        .collect();
    // The SBML runs add the model's own output (its units, every parameter and compartment
    // on the grid, each species' amount in the model's substance unit: items here, so equal
    // to `mean`; and its concentration in the compartment `cell` of size 1, equal again,
    // which the .crn file, without a volume, has not); without it, the three documents are
    // the same.
    let plain: Vec<serde_json::Value> = sims
        .iter()
        .map(|v| {
            let mut v = v.clone();
            let o = v.as_object_mut().unwrap();
            o.remove("model_units");
            let grid = o["grid"].as_object_mut().unwrap();
            grid.retain(|_, e| e.get("kind").is_none());
            for e in grid.values_mut().filter_map(|e| e.as_object_mut()) {
                if let Some(a) = e.remove("amount_mean") {
                    assert_eq!(a, e["mean"]);
                }
                if let Some(a) = e.remove("amount_sd") {
                    assert_eq!(a, e["sd"]);
                }
                if e.remove("compartment").is_some() {
                    for (key, same) in [
                        ("mean_molar", "mean"),
                        ("sd_molar", "sd"),
                        ("concentration_mean", "mean"),
                        ("concentration_sd", "sd"),
                    ] {
                        let c = e.remove(key).unwrap();
                        assert_eq!(c, e[same], "{key}");
                    }
                    e.remove("concentration_unit");
                }
            }
            v
        })
        .collect();
    assert!(
        sims[0].get("model_units").is_none(),
        "the .crn run has no model output"
    );
    assert_eq!(plain[0], sims[0]);
    assert_eq!(plain[0], plain[1]);
    assert_eq!(plain[0], plain[2]);
}

// --- level defaults ------------------------------------------------------------------------

#[test]
fn level2_fills_in_its_defaults() {
    let doc = format!(
        r#"<?xml version="1.0"?>
<sbml xmlns="http://www.sbml.org/sbml/level2/version4" level="2" version="4">
  <model>
    <listOfCompartments><compartment id="c"/><compartment id="point" spatialDimensions="0"/></listOfCompartments>
    <listOfSpecies><species id="A" compartment="c" initialAmount="3"/></listOfSpecies>
    <listOfParameters><parameter id="k" value="1"/></listOfParameters>
    <listOfReactions>
      <reaction id="r">
        <listOfReactants><speciesReference species="A"/></listOfReactants>
        <kineticLaw>{MATH}<apply><times/><ci>k</ci><ci>A</ci></apply></math>
          <listOfParameters><parameter id="k" value="4"/></listOfParameters>
        </kineticLaw>
      </reaction>
    </listOfReactions>
    <listOfEvents>
      <event><trigger>{MATH}<true/></math></trigger>
        <listOfEventAssignments><eventAssignment variable="A">{MATH}<cn>1</cn></math></eventAssignment></listOfEventAssignments>
      </event>
    </listOfEvents>
  </model>
</sbml>"#
    );
    let d = sbml::import(doc.as_bytes()).unwrap().document;
    let m = &d.model;
    assert_eq!((d.level, d.version), (2, 4));
    // Level 2: size 1 for a compartment with dimensions, none for a 0-D one; constant true.
    assert_eq!(m.compartments[0].size, Some(1.0));
    assert_eq!(m.compartments[0].spatial_dimensions, Some(3.0));
    assert!(m.compartments[0].constant);
    assert_eq!(m.compartments[1].size, None);
    let s = &m.species[0];
    assert!(!s.has_only_substance_units && !s.boundary_condition && !s.constant);
    assert!(m.parameters[0].constant);
    let r = &m.reactions[0];
    assert!(r.reversible && !r.fast);
    assert_eq!(r.reactants[0].stoichiometry, Some(1.0));
    let k = r.kinetic_law.as_ref().unwrap();
    assert_eq!(k.local_parameters[0].id, "k");
    assert_eq!(k.local_parameters[0].value, Some(4.0));
    let e = &m.events[0];
    assert!(e.use_values_from_trigger_time);
    let t = e.trigger.as_ref().unwrap();
    assert!(t.persistent && t.initial_value);
}

#[test]
fn level3_requires_the_attributes_level2_defaults() {
    let doc = l3(
        r#"<species id="A" compartment="c" initialAmount="1" boundaryCondition="false" constant="false"/>"#,
        "",
        "",
    );
    let e = first_error(&doc);
    assert_eq!(
        *e.kind,
        ErrorKind::MissingAttribute {
            attribute: "hasOnlySubstanceUnits".into()
        }
    );
    assert_eq!(
        (e.element.as_str(), e.id.as_deref(), e.loc.line),
        ("species", Some("A"), 7)
    );
}

#[test]
fn a_local_parameter_shadows_the_global_one() {
    let rest = format!(
        r#"<listOfReactions><reaction id="decay" reversible="false">
        <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
        <kineticLaw>{MATH}<apply><times/><ci>k</ci><ci>A</ci></apply></math>
          <listOfLocalParameters><localParameter id="k" value="0.25"/></listOfLocalParameters>
        </kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(&species("A", 10.0), &param("k", 3.0), &rest);
    let net = sbml::load_source("m.xml", doc.as_bytes(), &Default::default()).unwrap();
    // k·A with the local k = 0.25: first order, stochastic constant 0.25.
    assert_eq!(net.reactions[0].stochastic_constant(), Some(0.25));
}

#[test]
fn a_concentration_symbol_is_the_count_over_the_size() {
    // In a compartment of size 2, `k * A` with A a concentration is k·x_A/2 per unit time:
    // a law on counts with half the constant ([C]).
    let doc = l3(
        r#"<species id="A" compartment="c2" initialAmount="10" hasOnlySubstanceUnits="false" boundaryCondition="false" constant="false"/>"#,
        &param("k", 3.0),
        &format!(
            r#"<listOfReactions><reaction id="decay" reversible="false">
        <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
        <kineticLaw>{MATH}<apply><times/><ci>k</ci><ci>A</ci></apply></math></kineticLaw>
        </reaction></listOfReactions>"#
        ),
    )
    .replace(
        r#"<compartment id="c" spatialDimensions="3" size="1" constant="true"/>"#,
        r#"<compartment id="c" spatialDimensions="3" size="1" constant="true"/><compartment id="c2" spatialDimensions="3" size="2" constant="true"/>"#,
    );
    let net = sbml::load_source("m.xml", doc.as_bytes(), &Default::default()).unwrap();
    let a = net.propensities()[0].eval(&[10]);
    assert!((a - 3.0 * 10.0 / 2.0).abs() < 1e-12, "{a}");
}

// --- formulas ------------------------------------------------------------------------------

#[test]
fn mathml_numbers_constants_and_operators() {
    let ids = [
        "e", "q", "i", "pw", "rt", "lg", "av", "pi", "sem", "tr", "ln", "fl",
    ];
    let params: String = ids.iter().map(|id| param(id, 0.0)).collect();
    let list = [
        ("e", r#"<cn type="e-notation"> 2 <sep/> -3 </cn>"#),
        ("q", r#"<cn type="rational"> 1 <sep/> 4 </cn>"#),
        ("i", r#"<cn type="integer"> -7 </cn>"#),
        (
            "pw",
            r#"<piecewise><piece><cn>1</cn><apply><lt/><cn>3</cn><cn>2</cn></apply></piece>
                 <piece><cn>2</cn><apply><geq/><cn>3</cn><cn>2</cn><cn>2</cn></apply></piece>
                 <otherwise><cn>3</cn></otherwise></piecewise>"#,
        ),
        (
            "rt",
            r#"<apply><root/><degree><cn>3</cn></degree><cn>27</cn></apply>"#,
        ),
        (
            "lg",
            r#"<apply><log/><logbase><cn>2</cn></logbase><cn>32</cn></apply>"#,
        ),
        (
            "av",
            r#"<csymbol encoding="text" definitionURL="http://www.sbml.org/sbml/symbols/avogadro"/>"#,
        ),
        ("pi", r#"<apply><times/><pi/><cn>2</cn></apply>"#),
        (
            "sem",
            r#"<semantics><apply><plus/><cn>1</cn><cn>2</cn></apply><annotation encoding="text">three</annotation></semantics>"#,
        ),
        (
            "tr",
            r#"<apply><and/><true/><apply><not/><false/></apply></apply>"#,
        ),
        ("ln", r#"<apply><ln/><exponentiale/></apply>"#),
        (
            "fl",
            r#"<apply><plus/><apply><floor/><cn>-1.5</cn></apply><apply><factorial/><cn>4</cn></apply></apply>"#,
        ),
    ];
    let v = values(&l3("", &params, &assignments(&list)));
    let want = [
        ("e", 0.002),
        ("q", 0.25),
        ("i", -7.0),
        ("pw", 2.0),
        ("rt", 3.0),
        ("lg", 5.0),
        ("av", 6.02214179e23),
        ("pi", 2.0 * std::f64::consts::PI),
        ("sem", 3.0),
        ("tr", 1.0),
        ("ln", 1.0),
        ("fl", -2.0 + 24.0),
    ];
    for (id, x) in want {
        assert!(
            (v[id] - x).abs() <= 1e-12 * x.abs().max(1.0),
            "{id}: {} vs {x}",
            v[id]
        );
    }
}

#[test]
fn initial_assignments_read_one_another_in_any_order() {
    // b = 2a, a = k + 1, k = 4: a = 5, b = 10; the species amount follows its assignment.
    let list = [
        ("b", "<apply><times/><cn>2</cn><ci>a</ci></apply>"),
        ("a", "<apply><plus/><ci>k</ci><cn>1</cn></apply>"),
        ("S", "<ci>b</ci>"),
    ];
    let doc = l3(
        &species("S", 0.0),
        &(param("a", 0.0) + &param("b", 0.0) + &param("k", 4.0)),
        &assignments(&list),
    );
    let v = values(&doc);
    assert_eq!((v["a"], v["b"]), (5.0, 10.0));
    let m = sbml::import(doc.as_bytes()).unwrap().document.model;
    assert_eq!(initial_values(&m).unwrap().species[0], Some(10.0));
}

#[test]
fn function_definitions_expand_without_capturing_names() {
    let fns = format!(
        r#"<listOfFunctionDefinitions>
      <functionDefinition id="sq">{MATH}<lambda><bvar><ci>z</ci></bvar><apply><power/><ci>z</ci><cn>2</cn></apply></lambda></math></functionDefinition>
      <functionDefinition id="f">{MATH}<lambda><bvar><ci>x</ci></bvar><bvar><ci>y</ci></bvar>
        <apply><plus/><apply><times/><ci>x</ci><ci>y</ci></apply><apply><ci>sq</ci><ci>x</ci></apply></apply></lambda></math></functionDefinition>
      <functionDefinition id="diff">{MATH}<lambda><bvar><ci>x</ci></bvar><bvar><ci>y</ci></bvar>
        <apply><minus/><ci>x</ci><ci>y</ci></apply></lambda></math></functionDefinition>
    </listOfFunctionDefinitions>"#
    );
    let list = [
        ("p", "<apply><ci>f</ci><cn>2</cn><cn>3</cn></apply>"),
        // diff(y, x) with the model's y = 5 and x = 1 is 5 − 1: the arguments are not rescanned.
        ("q", "<apply><ci>diff</ci><ci>y</ci><ci>x</ci></apply>"),
    ];
    let params = param("p", 0.0) + &param("q", 0.0) + &param("x", 1.0) + &param("y", 5.0);
    let doc = l3("", &params, &(fns + &assignments(&list)));
    let v = values(&doc);
    // f(2, 3) = 2·3 + 2² = 10.
    assert_eq!((v["p"], v["q"]), (10.0, 4.0));
}

#[test]
fn recursive_functions_and_wrong_arity_are_errors() {
    let rec = format!(
        r#"<listOfFunctionDefinitions>
      <functionDefinition id="f">{MATH}<lambda><bvar><ci>x</ci></bvar><apply><ci>g</ci><ci>x</ci></apply></lambda></math></functionDefinition>
      <functionDefinition id="g">{MATH}<lambda><bvar><ci>x</ci></bvar><apply><ci>f</ci><ci>x</ci></apply></lambda></math></functionDefinition>
    </listOfFunctionDefinitions>"#
    );
    let e = first_error(&l3("", "", &rec));
    assert!(e.to_string().contains("calls itself"), "{e}");
    let arity = format!(
        r#"<listOfFunctionDefinitions>
      <functionDefinition id="f">{MATH}<lambda><bvar><ci>x</ci></bvar><ci>x</ci></lambda></math></functionDefinition>
    </listOfFunctionDefinitions>{}"#,
        assignments(&[("p", "<apply><ci>f</ci><cn>1</cn><cn>2</cn></apply>")])
    );
    let e = first_error(&l3("", &param("p", 0.0), &arity));
    assert!(
        e.to_string().contains("takes 1 argument(s), found 2"),
        "{e}"
    );
}

// --- refusals ------------------------------------------------------------------------------

/// `check` on `doc` exits with 2 and names `construct`, `id` and the line.
fn refused(doc: &str, construct: Construct, id: Option<&str>, line: u32) {
    let e = first_error(doc);
    assert_eq!(
        *e.kind,
        ErrorKind::Unsupported {
            construct: construct.clone()
        },
        "{e}"
    );
    assert_eq!(e.id.as_deref(), id);
    assert_eq!(e.loc.line, line);
    let (code, msg) = check_file(doc.as_bytes());
    assert_eq!(code, Some(2));
    assert!(msg.contains(&construct.name()), "{msg}");
    assert!(msg.contains(&format!(".xml:{line}:")), "{msg}");
    if let Some(id) = id {
        assert!(msg.contains(&format!("`{id}`")), "{msg}");
    }
}

#[test]
fn unsupported_constructs_are_refused_by_name() {
    let alg = format!(
        r#"<listOfRules>
      <algebraicRule>{MATH}<apply><minus/><ci>p</ci><cn>1</cn></apply></math></algebraicRule></listOfRules>"#
    );
    refused(
        &l3("", &param("p", 0.0).replace("true", "false"), &alg),
        Construct::AlgebraicRule,
        None,
        10,
    );

    let fast = l3(
        &species("A", 1.0),
        &param("k", 1.0),
        &format!(
            r#"<listOfReactions>
      <reaction id="quick" reversible="false" fast="true">
        <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
        <kineticLaw>{MATH}<ci>k</ci></math></kineticLaw></reaction></listOfReactions>"#
        ),
    )
    .replace("level3/version2/core\" level=\"3\" version=\"2\"", "level3/version1/core\" level=\"3\" version=\"1\"");
    refused(&fast, Construct::FastReaction, Some("quick"), 10);

    let delay = format!(
        r#"<listOfRules>
      <assignmentRule variable="p">{MATH}<apply><csymbol encoding="text" definitionURL="http://www.sbml.org/sbml/symbols/delay"/><ci>q</ci><cn>1</cn></apply></math></assignmentRule></listOfRules>"#
    );
    let params = param("p", 0.0).replace("true", "false") + &param("q", 2.0);
    refused(
        &l3("", &params, &delay),
        Construct::DelayFunction,
        Some("p"),
        10,
    );

    let rate_of = delay
        .replace("symbols/delay", "symbols/rateOf")
        .replace("<cn>1</cn>", "");
    refused(&l3("", &params, &rate_of), Construct::RateOf, Some("p"), 10);

    let comp = l3("", "", "").replace(
        r#"level="3" version="2">"#,
        r#"xmlns:comp="http://www.sbml.org/sbml/level3/version1/comp/version1" comp:required="true" level="3" version="2">"#,
    );
    refused(&comp, Construct::Package("comp".into()), None, 2);
}

#[test]
fn presentation_packages_are_ignored_with_a_warning() {
    let doc = l3("", &param("p", 1.0), "").replace(
        r#"level="3" version="2">"#,
        r#"xmlns:layout="http://www.sbml.org/sbml/level3/version1/layout/version1" layout:required="false" level="3" version="2">"#,
    ).replace("</listOfParameters>", "</listOfParameters><layout:listOfLayouts/>");
    let i = sbml::import(doc.as_bytes()).unwrap();
    assert!(i.warnings[0].to_string().contains("layout"));
}

#[test]
fn what_the_network_cannot_hold_yet_is_refused_with_the_reason() {
    // An assignment rule on a species that a reaction lists (a boundary species may be both).
    let rule = format!(
        r#"<listOfRules><assignmentRule variable="A">{MATH}<cn>1</cn></math></assignmentRule></listOfRules>
           <listOfReactions><reaction id="use" reversible="false">
           <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
           <kineticLaw>{MATH}<cn>1</cn></math></kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(
        &species("A", 0.0).replace(
            r#"boundaryCondition="false""#,
            r#"boundaryCondition="true""#,
        ),
        "",
        &rule,
    );
    let (code, msg) = check_file(doc.as_bytes());
    assert_eq!(code, Some(2));
    assert!(
        msg.contains("<assignmentRule> `A`: not supported yet: an assignment rule on species `A`, which a reaction lists"),
        "{msg}"
    );
}

#[test]
fn an_assignment_rule_on_a_species_is_computed_where_it_is_read() {
    // A → ∅ at k·A (k = 1, A(0) = 10); B = 2·A by an assignment rule (B is no state); ∅ → C at
    // rate B. A(t) = 10·e^(−t), so C(t) = ∫ 20·e^(−s) ds = 20·(1 − e^(−t)) [C].
    let rest = format!(
        r#"<listOfRules><assignmentRule variable="B">{MATH}<apply><times/><cn>2</cn><ci>A</ci></apply></math></assignmentRule></listOfRules>
           <listOfReactions><reaction id="decay" reversible="false">
           <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
           <kineticLaw>{MATH}<apply><times/><ci>k</ci><ci>A</ci></apply></math></kineticLaw></reaction>
           <reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="C" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}<ci>B</ci></math></kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(
        &(species("A", 10.0) + &species("B", 0.0) + &species("C", 0.0)),
        &param("k", 1.0),
        &rest,
    );
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate", "--t-end", "2", "--grid", "3", "--method", "ode", "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(v["final"]["B"].is_null(), "B is computed, not a state: {v}");
    assert_eq!(v["grid"]["B"]["assigned"], true, "{v}");
    let a = v["grid"]["A"]["mean"].as_array().unwrap();
    let b = v["grid"]["B"]["mean"].as_array().unwrap();
    for (a, b) in a.iter().zip(b) {
        assert_eq!(
            b.as_f64().unwrap(),
            2.0 * a.as_f64().unwrap(),
            "B = 2·A on the grid"
        );
    }
    let c = v["grid"]["C"]["mean"].as_array().unwrap();
    for (k, t) in [0.0f64, 1.0, 2.0].into_iter().enumerate() {
        let want = 20.0 * (1.0 - (-t).exp());
        assert!((c[k].as_f64().unwrap() - want).abs() < 1e-6 * 20.0, "{c:?}");
    }
}

#[test]
fn rules_on_parameters_hold_at_every_instant() {
    // dp/dt = 2 from p = 0 (p = 2t), q = 3·p by an assignment rule, and 0 → A at rate q:
    // A(t) = ∫ 6t dt = 3t², A(1) = 3 and A(2) = 12 [C].
    let rules = format!(
        r#"<listOfRules><rateRule variable="p">{MATH}<cn>2</cn></math></rateRule>
           <assignmentRule variable="q">{MATH}<apply><times/><cn>3</cn><ci>p</ci></apply></math></assignmentRule></listOfRules>
           <listOfReactions><reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="A" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}<ci>q</ci></math></kineticLaw></reaction></listOfReactions>"#
    );
    let params = r#"<parameter id="p" value="0" constant="false"/><parameter id="q" value="0" constant="false"/>"#;
    let doc = l3(&species("A", 0.0), params, &rules);
    let a = a_by_ode(&doc);
    for (k, want) in [(1, 3.0), (2, 12.0)] {
        assert!((a[k] - want).abs() < 1e-6 * want, "{a:?}");
    }
    // A stochastic run cannot integrate the rate rule: refused with the reason.
    let (code, _, msg) = run_file(doc.as_bytes(), &["simulate", "--t-end", "2"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(msg.contains("the rate rule on `p`"), "{msg}");
}

#[test]
fn a_reaction_id_in_a_formula_is_its_rate() {
    // decay: A → ∅ at k·A (k = 1, A(0) = 10); make: ∅ → B at the rate of decay, read through
    // an assignment rule q = decay. B(t) = 10·(1 − e^(−t)) [C].
    let rest = format!(
        r#"<listOfRules><assignmentRule variable="q">{MATH}<ci>decay</ci></math></assignmentRule></listOfRules>
           <listOfReactions><reaction id="decay" reversible="false">
           <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
           <kineticLaw>{MATH}<apply><times/><ci>k</ci><ci>A</ci></apply></math></kineticLaw></reaction>
           <reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="B" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}<ci>q</ci></math></kineticLaw></reaction></listOfReactions>"#
    );
    let params = param("k", 1.0) + r#"<parameter id="q" constant="false"/>"#;
    let doc = l3(&(species("A", 10.0) + &species("B", 0.0)), &params, &rest);
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate", "--t-end", "2", "--grid", "3", "--method", "ode", "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let b = v["grid"]["B"]["mean"].as_array().unwrap();
    for (k, t) in [0.0f64, 1.0, 2.0].into_iter().enumerate() {
        let want = 10.0 * (1.0 - (-t).exp());
        assert!((b[k].as_f64().unwrap() - want).abs() < 1e-6 * 10.0, "{b:?}");
    }
}

#[test]
fn abs_hyperbolic_functions_and_logic_in_a_law() {
    // A → ∅ at |−k|·A (k = 1, A(0) = 10): A(1) = 10/e. ∅ → B at cosh(1) + sinh(1) + tanh(0)
    // + xor(true, false) + not(0) + eq(2, 2) + neq(2, 2) = e + 3: B(1) = e + 3 [C].
    let x = |op: &str, args: &str| format!("<apply><{op}/>{args}</apply>");
    let rate = x(
        "plus",
        &[
            x("cosh", "<cn>1</cn>"),
            x("sinh", "<cn>1</cn>"),
            x("tanh", "<cn>0</cn>"),
            x("xor", "<true/><false/>"),
            x("not", "<cn>0</cn>"),
            x("eq", "<cn>2</cn><cn>2</cn>"),
            x("neq", "<cn>2</cn><cn>2</cn>"),
        ]
        .concat(),
    );
    let decay = x(
        "times",
        &(x("abs", &x("minus", "<ci>k</ci>")) + "<ci>A</ci>"),
    );
    let rest = format!(
        r#"<listOfReactions><reaction id="decay" reversible="false">
           <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
           <kineticLaw>{MATH}{decay}</math></kineticLaw></reaction>
           <reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="B" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}{rate}</math></kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(
        &(species("A", 10.0) + &species("B", 0.0)),
        &param("k", 1.0),
        &rest,
    );
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate", "--t-end", "1", "--grid", "2", "--method", "ode", "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let at_1 = |s: &str| v["grid"][s]["mean"][1].as_f64().unwrap();
    let e = std::f64::consts::E;
    assert!((at_1("A") - 10.0 / e).abs() < 1e-6, "{}", at_1("A"));
    assert!((at_1("B") - (e + 3.0)).abs() < 1e-6, "{}", at_1("B"));
}

#[test]
fn a_rate_rule_changes_a_boundary_species_no_reaction_lists() {
    // S is a boundary species with dS/dt = 2 from S = 1 (S = 1 + 2t); 0 → A at rate S, so
    // A(t) = t + t², A(1) = 2 and A(2) = 6 [C].
    let rules = format!(
        r#"<listOfRules><rateRule variable="S">{MATH}<cn>2</cn></math></rateRule></listOfRules>
           <listOfReactions><reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="A" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}<ci>S</ci></math></kineticLaw></reaction></listOfReactions>"#
    );
    let s = species("S", 1.0).replace(
        r#"boundaryCondition="false""#,
        r#"boundaryCondition="true""#,
    );
    let doc = l3(&(species("A", 0.0) + &s), "", &rules);
    let a = a_by_ode(&doc);
    for (k, want) in [(1, 2.0), (2, 6.0)] {
        assert!((a[k] - want).abs() < 1e-6 * want, "{a:?}");
    }
}

// --- mole-based models: the volume scale ---------------------------------------------------

/// A Level 3 model in mole and litre with one compartment `cell` of `size` litres; `rest` holds
/// the unit definitions, species, parameters and reactions.
fn molar(size: &str, rest: &str) -> String {
    format!(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<sbml xmlns="http://www.sbml.org/sbml/level3/version2/core" level="3" version="2">
  <model id="m" substanceUnits="mole" volumeUnits="litre" timeUnits="second" extentUnits="mole">
    <listOfUnitDefinitions>
      <unitDefinition id="per_nM_per_s"><listOfUnits>
        <unit kind="mole" exponent="-1" scale="-9" multiplier="1"/>
        <unit kind="litre" exponent="1" scale="0" multiplier="1"/>
        <unit kind="second" exponent="-1" scale="0" multiplier="1"/>
      </listOfUnits></unitDefinition>
      <unitDefinition id="per_s"><listOfUnits>
        <unit kind="second" exponent="-1" scale="0" multiplier="1"/>
      </listOfUnits></unitDefinition>
      <unitDefinition id="nM"><listOfUnits>
        <unit kind="mole" exponent="1" scale="-9" multiplier="1"/>
        <unit kind="litre" exponent="-1" scale="0" multiplier="1"/>
      </listOfUnits></unitDefinition>
    </listOfUnitDefinitions>
    <listOfCompartments>
      <compartment id="cell" spatialDimensions="3" size="{size}" constant="true"/>
    </listOfCompartments>
    {rest}
  </model>
</sbml>
"#
    )
}

fn molar_species(id: &str, conc: f64) -> String {
    format!(
        r#"<species id="{id}" compartment="cell" initialConcentration="{conc}" hasOnlySubstanceUnits="false" boundaryCondition="false" constant="false"/>"#
    )
}

fn reaction(id: &str, reactants: &[&str], law: &str, locals: &str) -> String {
    let refs: String = reactants
        .iter()
        .map(|s| format!(r#"<speciesReference species="{s}" stoichiometry="1" constant="true"/>"#))
        .collect();
    format!(
        r#"<reaction id="{id}" reversible="false"><listOfReactants>{refs}</listOfReactants>
           <kineticLaw>{MATH}{law}</math>{locals}</kineticLaw></reaction>"#
    )
}

#[test]
fn a_mole_based_model_gets_its_compartment_as_the_volume() {
    // 1 fL; A = 10 nM, B = 5 nM: Ω = N_A·1e-15 = 6.02214076e8 per mol/L, so A rounds to 6 and B
    // to 3 molecules [C]. kon = 0.002 /nM/s = 2e6 /M/s by its unit; c = k/Ω for A + B [C].
    let rest = format!(
        r#"<listOfSpecies>{}{}</listOfSpecies>
        <listOfParameters><parameter id="kon" value="0.002" units="per_nM_per_s" constant="true"/>
          <parameter id="K" value="4" units="nM" constant="true"/></listOfParameters>
        <listOfReactions>{}{}</listOfReactions>"#,
        molar_species("A", 1e-8),
        molar_species("B", 5e-9),
        reaction(
            "bind",
            &["A", "B"],
            "<apply><times/><ci>cell</ci><ci>kon</ci><ci>A</ci><ci>B</ci></apply>",
            ""
        ),
        reaction(
            "clear",
            &["A"],
            "<apply><divide/><apply><times/><ci>cell</ci><ci>k</ci><ci>K</ci><ci>A</ci></apply><apply><plus/><ci>K</ci><ci>A</ci></apply></apply>",
            r#"<listOfLocalParameters><localParameter id="k" value="0.5" units="per_s"/></listOfLocalParameters>"#,
        ),
    );
    let doc = molar("1e-15", &rest);
    let net = sbml::load_source("m.xml", doc.as_bytes(), &Default::default()).unwrap();
    assert_eq!(net.volume_l, Some(1e-15));
    let omega = 6.022_140_76e8;
    assert!((net.omega - omega).abs() < 1e-6);
    assert_eq!(net.initial_state(), vec![6, 3]);
    let bind = &net.reactions[0];
    let c = bind.stochastic_constant().unwrap();
    assert!((c - 2e6 / omega).abs() < 1e-15 * c, "{c}");
    // clear: cell·k·K·A/(K + A) is not mass action; in mol/L/s it is (cell·k·K·A/(K + A))/cell,
    // propensity Ω·k·K·[A]/(K + [A]) with [A] = 6/Ω, K = 4e-9 mol/L [C].
    let a = net.propensities()[1].eval(&[6, 3]);
    let want = omega * 0.5 * 4e-9 * (6.0 / omega) / (4e-9 + 6.0 / omega);
    assert!((a - want).abs() < 1e-12 * want, "{a} vs {want}");
}

#[test]
fn mole_based_models_beyond_molecule_counts_run_deterministically_only() {
    // Each model decays as A' = −k·A (law cell·k·[A] in amount per time); read in its own
    // units, amount(1 s) = amount(0)·e^(−0.5) [C].
    let decay = reaction(
        "r",
        &["A"],
        "<apply><times/><ci>cell</ci><ci>k</ci><ci>A</ci></apply>",
        "",
    );
    let k = r#"<listOfParameters><parameter id="k" value="0.5" units="per_s" constant="true"/></listOfParameters>"#;
    let with = |conc: f64| {
        format!(
            "<listOfSpecies>{}</listOfSpecies>{k}<listOfReactions>{decay}</listOfReactions>",
            molar_species("A", conc)
        )
    };
    let cases = [
        // a parameter without units: the law's dimension cannot be checked in mol/L
        (
            molar("1e-15", &with(1e-8).replace(r#" units="per_s""#, "")),
            1e-8 * 1e-15,
            "cannot be held as molecule counts",
        ),
        // a litre of 1 M: 6e23 molecules, more than copyloop counts
        (molar("1", &with(1.0)), 1.0, "more than copyloop can count"),
        // minutes
        (
            molar("1e-15", &with(1e-8))
                .replace(r#"timeUnits="second""#, r#"timeUnits="minute_u""#)
                .replace("<listOfUnitDefinitions>", r#"<listOfUnitDefinitions><unitDefinition id="minute_u"><listOfUnits><unit kind="second" exponent="1" scale="0" multiplier="60"/></listOfUnits></unitDefinition>"#),
            1e-8 * 1e-15,
            "is not the second",
        ),
        // two compartments
        (
            molar("1e-15", &with(1e-8))
                .replace("</listOfCompartments>", r#"<compartment id="out" spatialDimensions="3" size="1e-12" constant="true"/></listOfCompartments>"#),
            1e-8 * 1e-15,
            "more than one compartment",
        ),
    ];
    for (doc, amount0, part) in cases {
        let (code, _, msg) = run_file(doc.as_bytes(), &["check"]);
        assert_eq!(code, Some(0), "{msg}");
        let (code, _, msg) = run_file(doc.as_bytes(), &["simulate", "--t-end", "1"]);
        assert_eq!(code, Some(2), "{msg}");
        assert!(
            msg.contains("cannot run with a stochastic method") && msg.contains(part),
            "{part}: {msg}"
        );
        let (code, out, msg) = run_file(
            doc.as_bytes(),
            &["simulate", "--t-end", "1", "--method", "ode", "--json"],
        );
        assert_eq!(code, Some(0), "{msg}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        let got = v["final"]["A"]["mean"].as_f64().unwrap();
        let want = amount0 * (-0.5f64).exp();
        assert!((got - want).abs() < 1e-6 * want, "{part}: {got} vs {want}");
        assert_eq!(v["amount_unit"], "mole", "{part}");
    }
}

#[test]
fn fractional_amounts_run_deterministically_and_are_refused_stochastically() {
    // 2.5 items decaying at 0.5 /s: the deterministic amount at 1 s is 2.5·e^(−0.5) [C]; no
    // stochastic method can start from half a molecule.
    let rest = format!(
        "<listOfReactions>{}</listOfReactions>",
        reaction(
            "r",
            &["A"],
            "<apply><times/><ci>k</ci><ci>A</ci></apply>",
            ""
        )
        .replace("cell", "c")
    );
    let doc = l3(&species("A", 2.5), &param("k", 0.5), &rest);
    let (code, _, msg) = run_file(doc.as_bytes(), &["simulate", "--t-end", "1"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains("2.5 of `A` is not a whole number of molecules"),
        "{msg}"
    );
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &["simulate", "--t-end", "1", "--method", "ode", "--json"],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let got = v["final"]["A"]["mean"].as_f64().unwrap();
    let want = 2.5 * (-0.5f64).exp();
    assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
}

#[test]
fn several_compartments_in_items_read_concentrations_in_their_own_sizes() {
    // A in c (size 1) and B in d (size 4), B's symbol a concentration: A → ∅ at k·[B] with
    // [B] = 8/4 = 2, so A(1) = 10·e^(−0.5·2) [C].
    let doc = l3(
        &format!(
            "{}{}",
            species("A", 10.0),
            r#"<species id="B" compartment="d" initialAmount="8" hasOnlySubstanceUnits="false" boundaryCondition="true" constant="false"/>"#
        ),
        &param("k", 0.5),
        &format!(
            "<listOfReactions>{}</listOfReactions>",
            reaction(
                "r",
                &["A"],
                "<apply><times/><ci>k</ci><ci>B</ci><ci>A</ci></apply>",
                ""
            )
        ),
    )
    .replace(
        "</listOfCompartments>",
        r#"<compartment id="d" spatialDimensions="3" size="4" constant="true"/></listOfCompartments>"#,
    );
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &["simulate", "--t-end", "1", "--method", "ode", "--json"],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let got = v["final"]["A"]["mean"].as_f64().unwrap();
    let want = 10.0 * (-1.0f64).exp();
    assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
}

#[test]
fn numbers_with_units_are_read_in_their_units() {
    // 0 -> A at cell · 2 nM/s (a cn with sbml:units): propensity Ω·2e-9 = 1.2044 /s [C].
    let rest = format!(
        r#"<listOfSpecies>{}</listOfSpecies><listOfReactions>
        <reaction id="make" reversible="false"><listOfProducts><speciesReference species="A" stoichiometry="1" constant="true"/></listOfProducts>
        <kineticLaw><math xmlns="http://www.w3.org/1998/Math/MathML" xmlns:sbml="http://www.sbml.org/sbml/level3/version2/core">
          <apply><times/><ci>cell</ci><apply><times/><cn sbml:units="nM">2</cn><cn sbml:units="per_s">1</cn></apply></apply>
        </math></kineticLaw></reaction></listOfReactions>"#,
        molar_species("A", 0.0)
    );
    let doc = molar("1e-15", &rest);
    let net = sbml::load_source("m.xml", doc.as_bytes(), &Default::default()).unwrap();
    let a = net.propensities()[0].eval(&[0]);
    assert!((a - 2e-9 * 6.022_140_76e8).abs() < 1e-12, "{a}");
}

// --- malformed files -----------------------------------------------------------------------

/// `check` on `text` exits with 2, and its message holds each of `parts`.
fn bad(text: &[u8], parts: &[&str]) {
    let (code, msg) = check_file(text);
    assert_eq!(code, Some(2), "{msg}");
    for p in parts {
        assert!(msg.contains(p), "expected {p:?} in:\n{msg}");
    }
}

#[test]
fn malformed_files_get_clear_errors_with_element_and_line() {
    // Malformed XML: the closing tag does not match.
    bad(
        b"<?xml version=\"1.0\"?>\n<sbml>\n  <model>\n</sbml>\n",
        &["malformed XML", ".xml:4:"],
    );
    // Not SBML, an unknown SBML namespace, and a level that contradicts the namespace.
    bad(b"<html/>", &["not an SBML file"]);
    let wrong_ns = l3("", "", "").replace("level3/version2/core", "level3/version9/core");
    bad(wrong_ns.as_bytes(), &["unknown SBML namespace", ".xml:2:"]);
    let wrong_level = l3("", "", "").replace(r#"version="2">"#, r#"version="1">"#);
    bad(
        wrong_level.as_bytes(),
        &["the namespace is that of Level 3 Version 2"],
    );
    // A species in a foreign namespace.
    let foreign = l3(r#"<s:species xmlns:s="urn:elsewhere" id="A"/>"#, "", "");
    bad(
        foreign.as_bytes(),
        &["namespace \"urn:elsewhere\"", ".xml:7:"],
    );
    // A missing id, a duplicate id, a dangling reference.
    let no_id = l3(&species("A", 1.0).replace(r#"id="A" "#, ""), "", "");
    bad(
        no_id.as_bytes(),
        &["<species> needs the attribute `id`", ".xml:7:"],
    );
    let twice = l3(&species("A", 1.0), &param("A", 1.0), "");
    bad(
        twice.as_bytes(),
        &["<parameter> `A`: this id is already used on line 7"],
    );
    let dangling = l3(
        &species("A", 1.0).replace(r#"compartment="c""#, r#"compartment="nowhere""#),
        "",
        "",
    );
    bad(
        dangling.as_bytes(),
        &["<species> `A`: compartment refers to `nowhere`", ".xml:7:"],
    );
    let unknown_id = l3(
        "",
        &param("p", 0.0),
        &assignments(&[("p", "<ci>ghost</ci>")]),
    );
    bad(unknown_id.as_bytes(), &["refers to `ghost`"]);
    // Unknown MathML: an operator outside the subset, and an element that is no MathML at all.
    let sum = l3(
        "",
        &param("p", 0.0),
        &assignments(&[("p", "<apply><sum/><cn>1</cn></apply>")]),
    );
    bad(
        sum.as_bytes(),
        &[
            "<sum> is not an operator of the MathML subset",
            "`p`",
            ".xml:9:",
        ],
    );
    let mtext = l3(
        "",
        &param("p", 0.0),
        &assignments(&[("p", "<mtext>one</mtext>")]),
    );
    bad(
        mtext.as_bytes(),
        &["<mtext> is not part of the MathML subset"],
    );
    // Bytes that are not UTF-8.
    bad(b"<sbml>\xff</sbml>", &["not UTF-8", ".xml:1:7"]);
}

#[test]
fn a_file_larger_than_the_limit_is_refused_before_parsing() {
    // 50 MB: a valid model followed by a comment that makes it too large to read.
    let mut text = l3(&species("A", 1.0), "", "").into_bytes();
    text.extend(b"<!--");
    text.resize(50 * 1000 * 1000, b'x');
    text.extend(b"-->\n");
    let e = sbml::import(&text).unwrap_err().remove(0);
    assert!(matches!(*e.kind, ErrorKind::TooLarge { .. }));
    bad(
        &text,
        &["copyloop reads SBML files of up to 33554432 bytes"],
    );
}

#[test]
fn a_reversible_reaction_with_a_general_law_runs_its_net_rate_deterministically() {
    // A ⇌ B at net rate k1·A − k2·B (A0 = 10, k1 = 1, k2 = 0.5 /s): A(t) = 10/3 + (20/3)·e^(−1.5 t)
    // [C]; the law can be negative, so it is no propensity and stochastic methods refuse it.
    let law = "<apply><minus/><apply><times/><ci>k1</ci><ci>A</ci></apply><apply><times/><ci>k2</ci><ci>B</ci></apply></apply>";
    let r = format!(
        r#"<listOfReactions><reaction id="flip" reversible="true">
           <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
           <listOfProducts><speciesReference species="B" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}{law}</math></kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(
        &format!("{}{}", species("A", 10.0), species("B", 0.0)),
        &format!("{}{}", param("k1", 1.0), param("k2", 0.5)),
        &r,
    );
    let (code, _, msg) = run_file(doc.as_bytes(), &["simulate", "--t-end", "1"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(msg.contains("reaction `flip` is reversible"), "{msg}");
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &["simulate", "--t-end", "1", "--method", "ode", "--json"],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let got = v["final"]["A"]["mean"].as_f64().unwrap();
    let want = 10.0 / 3.0 + 20.0 / 3.0 * (-1.5f64).exp();
    assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
}

#[test]
fn csymbol_time_in_a_kinetic_law_is_the_clock() {
    // 0 → A at k·t with k = 2 /s²: A(t) = k·t²/2, A(1) = 1 and A(2) = 4 [C].
    let law = r#"<apply><times/><ci>k</ci><csymbol encoding="text" definitionURL="http://www.sbml.org/sbml/symbols/time">t</csymbol></apply>"#;
    let r = format!(
        r#"<listOfReactions><reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="A" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}{law}</math></kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(&species("A", 0.0), &param("k", 2.0), &r);
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate", "--t-end", "2", "--grid", "3", "--method", "ode", "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let grid = &v["grid"]["A"]["mean"];
    for (k, want) in [(1, 1.0), (2, 4.0)] {
        let got = grid[k].as_f64().unwrap();
        assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
    }
}

#[test]
fn piecewise_and_comparisons_in_a_kinetic_law() {
    // 0 → A at piecewise(k1 if t < 1, otherwise k2), k1 = 2, k2 = 5 /s: A(1) = 2 and
    // A(2) = 2 + 5 = 7 [C].
    let time = r#"<csymbol encoding="text" definitionURL="http://www.sbml.org/sbml/symbols/time">t</csymbol>"#;
    let law = format!(
        "<piecewise><piece><ci>k1</ci><apply><lt/>{time}<cn>1</cn></apply></piece><otherwise><ci>k2</ci></otherwise></piecewise>"
    );
    let r = format!(
        r#"<listOfReactions><reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="A" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}{law}</math></kineticLaw></reaction></listOfReactions>"#
    );
    let doc = l3(
        &species("A", 0.0),
        &format!("{}{}", param("k1", 2.0), param("k2", 5.0)),
        &r,
    );
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate", "--t-end", "2", "--grid", "3", "--method", "ode", "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let grid = &v["grid"]["A"]["mean"];
    for (k, want) in [(1, 2.0), (2, 7.0)] {
        let got = grid[k].as_f64().unwrap();
        assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
    }
    // Without <otherwise> the value is undefined where no piece holds: refused by name.
    let open = doc.replace("<otherwise><ci>k2</ci></otherwise>", "");
    let (code, _, msg) = run_file(open.as_bytes(), &["check"]);
    assert_eq!(code, Some(2), "{msg}");
    assert!(msg.contains("piecewise without <otherwise>"), "{msg}");
}

// --- events ------------------------------------------------------------------------------

const TIME: &str =
    r#"<csymbol encoding="text" definitionURL="http://www.sbml.org/sbml/symbols/time">t</csymbol>"#;

/// `0 → A` at 1 item/s from A = 0, and the event `events` (a `listOfEvents`' content).
fn producing(events: &str) -> String {
    let r = format!(
        r#"<listOfReactions><reaction id="make" reversible="false">
           <listOfProducts><speciesReference species="A" stoichiometry="1" constant="true"/></listOfProducts>
           <kineticLaw>{MATH}<ci>k</ci></math></kineticLaw></reaction></listOfReactions>
           <listOfEvents>{events}</listOfEvents>"#
    );
    l3(&species("A", 0.0), &param("k", 1.0), &r)
}

/// An event that sets A to `value` (MathML) `delay` s after `trigger` turns true.
fn event(
    id: &str,
    trigger: &str,
    persistent: bool,
    delay: f64,
    at_trigger: bool,
    value: &str,
) -> String {
    format!(
        r#"<event id="{id}" useValuesFromTriggerTime="{at_trigger}">
             <trigger initialValue="true" persistent="{persistent}">{MATH}{trigger}</math></trigger>
             <delay>{MATH}<cn>{delay}</cn></math></delay>
             <listOfEventAssignments><eventAssignment variable="A">{MATH}{value}</math></eventAssignment></listOfEventAssignments>
           </event>"#
    )
}

/// A at t = 0, 1, 2 by the deterministic method.
fn a_by_ode(doc: &str) -> Vec<f64> {
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate", "--t-end", "2", "--grid", "3", "--method", "ode", "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let grid = v["grid"]["A"]["mean"].as_array().unwrap().clone();
    grid.iter().map(|x| x.as_f64().unwrap()).collect()
}

#[test]
fn an_event_delay_takes_its_values_at_trigger_or_at_execution() {
    // A(t) = t; at t = 1 the event triggers, at t = 1.5 it sets A = A + 10, with A read at
    // trigger time (1 + 10 = 11, so A(2) = 11.5) or at execution (1.5 + 10, A(2) = 12) [C].
    let trigger = format!("<apply><geq/>{TIME}<cn>1</cn></apply>");
    let plus = "<apply><plus/><ci>A</ci><cn>10</cn></apply>";
    for (at_trigger, want) in [(true, 11.5), (false, 12.0)] {
        let doc = producing(&event("bump", &trigger, true, 0.5, at_trigger, plus));
        let a = a_by_ode(&doc);
        assert!((a[1] - 1.0).abs() < 1e-7, "{a:?}");
        assert!((a[2] - want).abs() < 1e-7 * want, "{at_trigger}: {a:?}");
    }
}

#[test]
fn a_non_persistent_event_is_dropped_when_its_trigger_turns_false_first() {
    // Trigger 1 ≤ t < 1.2, delay 0.5: persistent, it sets A = 0 at t = 1.5 and A(2) = 0.5;
    // not persistent, the trigger turned false at 1.2, nothing happens and A(2) = 2 [C].
    let trigger = format!(
        "<apply><and/><apply><geq/>{TIME}<cn>1</cn></apply><apply><lt/>{TIME}<cn>1.2</cn></apply></apply>"
    );
    for (persistent, want) in [(true, 0.5), (false, 2.0)] {
        let doc = producing(&event(
            "reset",
            &trigger,
            persistent,
            0.5,
            true,
            "<cn>0</cn>",
        ));
        let a = a_by_ode(&doc);
        assert!((a[2] - want).abs() < 1e-7, "{persistent}: {a:?}");
    }
}

#[test]
fn events_at_one_instant_run_in_decreasing_priority() {
    // Both trigger at t = 1 with no delay: `set` (A = 5) and `double` (A = 2·A, read at
    // execution). Priority set > double: A = 10 then A(2) = 11; double > set: A = 5, A(2) = 6 [C].
    let trigger = format!("<apply><geq/>{TIME}<cn>1</cn></apply>");
    let with_priority = |e: String, p: f64| {
        e.replace(
            "<delay>",
            &format!("<priority>{MATH}<cn>{p}</cn></math></priority><delay>"),
        )
        .replace(
            "<delay><math xmlns=\"http://www.w3.org/1998/Math/MathML\"><cn>0</cn></math></delay>",
            "",
        )
    };
    for ((p_set, p_double), want) in [((2.0, 1.0), 11.0), ((1.0, 2.0), 6.0)] {
        let set = with_priority(
            event("set", &trigger, true, 0.0, false, "<cn>5</cn>"),
            p_set,
        );
        let double = with_priority(
            event(
                "double",
                &trigger,
                true,
                0.0,
                false,
                "<apply><times/><cn>2</cn><ci>A</ci></apply>",
            ),
            p_double,
        );
        let doc = producing(&format!("{set}{double}"));
        assert!(!doc.contains("<delay>"));
        let a = a_by_ode(&doc);
        assert!((a[2] - want).abs() < 1e-7, "{p_set} {p_double}: {a:?}");
    }
}

#[test]
fn a_stochastic_run_executes_an_event_exactly() {
    // A → ∅ at 0.1 /s from A = 0; at t = 1 an event sets A = 100. At t = 2 each molecule has
    // survived with p = e^(−0.1): A(2) ~ Binomial(100, p), mean 100p and variance 100p(1 − p)
    // (the binomial law, common practice). 4,000 replicates, fixed seed; 4 standard errors.
    let r = format!(
        r#"<listOfReactions><reaction id="decay" reversible="false">
           <listOfReactants><speciesReference species="A" stoichiometry="1" constant="true"/></listOfReactants>
           <kineticLaw>{MATH}<apply><times/><ci>k</ci><ci>A</ci></apply></math></kineticLaw></reaction></listOfReactions>
           <listOfEvents>{}</listOfEvents>"#,
        event(
            "fill",
            &format!("<apply><geq/>{TIME}<cn>1</cn></apply>"),
            true,
            0.0,
            true,
            "<cn>100</cn>"
        )
    );
    let doc = l3(&species("A", 0.0), &param("k", 0.1), &r);
    let n = 4000.0;
    let (code, out, msg) = run_file(
        doc.as_bytes(),
        &[
            "simulate",
            "--t-end",
            "2",
            "--grid",
            "3",
            "--replicates",
            "4000",
            "--seed",
            "7",
            "--json",
        ],
    );
    assert_eq!(code, Some(0), "{msg}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let mean = v["grid"]["A"]["mean"].as_array().unwrap();
    assert_eq!(mean[1].as_f64().unwrap(), 100.0);
    let p = (-0.1f64).exp();
    let (mu, var) = (100.0 * p, 100.0 * p * (1.0 - p));
    let got = mean[2].as_f64().unwrap();
    assert!((got - mu).abs() < 4.0 * (var / n).sqrt(), "{got} vs {mu}");
}

#[test]
fn an_event_that_resizes_a_compartment_is_refused_by_name() {
    let e = format!(
        r#"<listOfEvents><event id="grow" useValuesFromTriggerTime="true">
             <trigger initialValue="true" persistent="true">{MATH}<apply><geq/>{TIME}<cn>1</cn></apply></math></trigger>
             <listOfEventAssignments><eventAssignment variable="c">{MATH}<cn>2</cn></math></eventAssignment></listOfEventAssignments>
           </event></listOfEvents>"#
    );
    let doc =
        l3(&species("A", 1.0), "", &e).replace(r#"constant="true"/>"#, r#"constant="false"/>"#);
    let (code, msg) = check_file(doc.as_bytes());
    assert_eq!(code, Some(2), "{msg}");
    assert!(
        msg.contains("event `grow` changes the size of compartment `c`"),
        "{msg}"
    );
}
