//! The test-side CME solver against exact stationary laws, so that the ensembles can be
//! checked against it with confidence.

mod support;

use copyloop::network::{load_source, Overrides};
use support::cme::stationary;

// Immigration–death 0 -> A (k), A -> 0 (γ·A): stationary Poisson(k/γ)
// (McQuarrie 1967 [verified]; REFERENCES §2b [C]).
#[test]
fn immigration_death_is_poisson() {
    let net = load_source(
        "t.crn",
        b"species A = 0\nstep in 0 -> A @ 4\nstep out A -> 0 @ 0.5\n",
        &Overrides::default(),
    )
    .unwrap();
    let s = stationary(&net, 60, 100);
    let mean = s.expect(|x| x[0] as f64);
    let var = s.expect(|x| (x[0] as f64 - mean).powi(2));
    assert!(
        (mean - 8.0).abs() < 1e-9 && (var - 8.0).abs() < 1e-8,
        "{mean} {var}"
    );
    assert!(s.edge_mass < 1e-15);
}

// Isomerisation A <-> B: stationary A ~ Binomial(N, k2/(k1+k2)) (REFERENCES §2c [C]).
#[test]
fn isomerisation_is_binomial() {
    let net = load_source(
        "t.crn",
        b"species A = 100\nspecies B = 0\nstep f A <-> B @ 1, 3\n",
        &Overrides::default(),
    )
    .unwrap();
    let s = stationary(&net, 100, 200);
    let mean = s.expect(|x| x[0] as f64);
    let var = s.expect(|x| (x[0] as f64 - mean).powi(2));
    assert!(
        (mean - 75.0).abs() < 1e-9 && (var - 18.75).abs() < 1e-8,
        "{mean} {var}"
    );
}
