//! SBML import (criterion; `cargo bench --bench sbml`).
//!
//! - `import/2000`: reading, validating and compiling an SBML model of 2,000 mass-action
//!   reactions over 1,000 species (`sbml::load_source`, the whole path from bytes to network);
//!   the target is well under a second.
//! - `events/crn` and `events/sbml`: the same mass-action network (a ring of 20 species,
//!   Xi → Xi+1 at c = 1 /s and Xi + Xi+1 → Xi+2 + Xi+3 at c = 10⁻³ /s, 100 molecules each),
//!   written once in `.crn` and once in SBML, through the direct method; throughput in events
//!   (channel firings) per second. An imported mass-action law compiles to the same propensity
//!   as a written one, so the two rates should agree to the machine's noise.

use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct};
use copyloop::network::{load_source, Network, Overrides};
use copyloop::sbml;
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use std::fmt::Write as _;
use std::hint::black_box;
use std::time::Duration;

const MATH: &str = r#"<math xmlns="http://www.w3.org/1998/Math/MathML">"#;

/// A Level 3 Version 2 model in items: `n` species of 100 molecules and the reactions
/// `(label, reactants, products, c)`, each with the law c·Π reactants.
fn sbml_model(n: usize, reactions: &[(String, Vec<usize>, Vec<usize>, f64)]) -> String {
    let mut s = String::from(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<sbml xmlns="http://www.sbml.org/sbml/level3/version2/core" level="3" version="2">
<model id="bench" substanceUnits="item" timeUnits="second">
<listOfCompartments><compartment id="c" spatialDimensions="3" size="1" constant="true"/></listOfCompartments>
<listOfSpecies>
"#,
    );
    for i in 0..n {
        writeln!(
            s,
            r#"<species id="X{i}" compartment="c" initialAmount="100" hasOnlySubstanceUnits="true" boundaryCondition="false" constant="false"/>"#
        )
        .unwrap();
    }
    s.push_str("</listOfSpecies>\n<listOfReactions>\n");
    let refs = |list: &[usize]| -> String {
        list.iter()
            .map(|i| {
                format!(r#"<speciesReference species="X{i}" stoichiometry="1" constant="true"/>"#)
            })
            .collect()
    };
    for (label, reactants, products, c) in reactions {
        let factors: String = reactants.iter().map(|i| format!("<ci>X{i}</ci>")).collect();
        writeln!(
            s,
            r#"<reaction id="{label}" reversible="false"><listOfReactants>{}</listOfReactants><listOfProducts>{}</listOfProducts><kineticLaw>{MATH}<apply><times/><cn>{c}</cn>{factors}</apply></math></kineticLaw></reaction>"#,
            refs(reactants),
            refs(products)
        )
        .unwrap();
    }
    s.push_str("</listOfReactions>\n</model>\n</sbml>\n");
    s
}

/// The same network in `.crn`.
fn crn_model(n: usize, reactions: &[(String, Vec<usize>, Vec<usize>, f64)]) -> String {
    let mut s = String::new();
    for i in 0..n {
        writeln!(s, "species X{i} = 100").unwrap();
    }
    let side = |list: &[usize]| -> String {
        list.iter()
            .map(|i| format!("X{i}"))
            .collect::<Vec<_>>()
            .join(" + ")
    };
    for (label, reactants, products, c) in reactions {
        writeln!(
            s,
            "step {label} {} -> {} @ {c}",
            side(reactants),
            side(products)
        )
        .unwrap();
    }
    s
}

/// A ring of `n` species: Xi → Xi+1 (c = 1) and Xi + Xi+1 → Xi+2 + Xi+3 (c = 10⁻³).
fn ring(n: usize) -> Vec<(String, Vec<usize>, Vec<usize>, f64)> {
    let mut out = Vec::new();
    for i in 0..n {
        out.push((format!("r{i}"), vec![i], vec![(i + 1) % n], 1.0));
        out.push((
            format!("b{i}"),
            vec![i, (i + 1) % n],
            vec![(i + 2) % n, (i + 3) % n],
            1e-3,
        ));
    }
    out
}

/// 2,000 reactions over 1,000 species: the ring's two forms.
fn large() -> String {
    sbml_model(1000, &ring(1000))
}

fn configure() -> Criterion {
    Criterion::default()
        .sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(3))
}

fn bench_import(c: &mut Criterion) {
    let text = large();
    let mut g = c.benchmark_group("import");
    g.bench_function("2000", |b| {
        b.iter(|| {
            let net = sbml::load_source("bench.xml", text.as_bytes(), &Overrides::default())
                .expect("bench model");
            black_box(net.reactions.len())
        })
    });
    g.finish();
}

fn bench_events(c: &mut Criterion) {
    const T_END: f64 = 200.0;
    let reactions = ring(20);
    let crn = load_source(
        "bench.crn",
        crn_model(20, &reactions).as_bytes(),
        &Overrides::default(),
    )
    .expect("bench network");
    let xml = sbml::load_source(
        "bench.xml",
        sbml_model(20, &reactions).as_bytes(),
        &Overrides::default(),
    )
    .expect("bench model");
    let mut g = c.benchmark_group("events");
    for (label, net) in [("crn", &crn), ("sbml", &xml)] {
        let (k, events) = kernel(net, T_END);
        let mut d = Direct::new(&k);
        g.throughput(Throughput::Elements(events));
        g.bench_function(label, |b| {
            b.iter(|| {
                let s = d.run(&k.x0, T_END, &mut replicate_rng(5, 0), &mut ());
                black_box(s.unwrap().events)
            })
        });
    }
    g.finish();
}

/// The network's kernel and the events of one run to `t_end` from seed 5.
fn kernel(net: &Network, t_end: f64) -> (CompiledKernel, u64) {
    let k = CompiledKernel::new(net).unwrap();
    let events = Direct::new(&k)
        .run(&k.x0, t_end, &mut replicate_rng(5, 0), &mut ())
        .unwrap()
        .events;
    (k, events)
}

criterion_group! {
    name = benches;
    config = configure();
    targets = bench_import, bench_events
}
criterion_main!(benches);
