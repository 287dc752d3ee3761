//! The event models of the SBML test suite's stochastic cases (the discrete stochastic models
//! test suite, Evans, Gillespie & Wilkinson 2008, Bioinformatics 24(2):285-286 [verified]),
//! written as `.crn` fixtures of our own (tests/fixtures/sbml_suite/), simulated with the
//! direct method and `auto`, and judged by the suite's own criteria against the case's
//! `-results.csv`, read at run time from the shared suite data (the test says it skipped
//! when the data is absent).
//!
//! Criteria (the case's `-settings.txt`: meanRange (−3, 3), sdRange (−5, 5)), with n = 10,000
//! replicates sampled at t = 0, 1, …, 50: Z_t = √n·(x̄_t − μ_t)/σ_t and
//! Y_t = √(n/2)·(S²_t/σ²_t − 1) with S²_t = (1/n)Σ(x − μ_t)². Multiple comparisons (51
//! correlated points per species): at most one |Z_t| per species outside the mean range and
//! none above 4, every Y_t inside the sd range; where σ_t = 0 the ensemble must equal μ_t
//! exactly. Fixed seeds.

use copyloop::ensemble::{self, EnsembleSpec, Method};
use copyloop::network::{load, Overrides};
use std::path::PathBuf;

const REPLICATES: u64 = 10_000;

/// The shared suite's stochastic cases, where they are.
fn suite_dir() -> Option<PathBuf> {
    let here = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let candidates = [
        std::env::var_os("COPYLOOP_SBML_SUITE").map(PathBuf::from),
        Some(here.join("../shared/sbml-suite")),
        Some(here.join("../../shared/sbml-suite")),
    ];
    candidates
        .into_iter()
        .flatten()
        .map(|d| d.join("stochastic"))
        .find(|d| d.is_dir())
}

/// Columns of a results file by name.
fn read_results(path: &PathBuf) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.trim().is_empty());
    let header = lines
        .next()
        .unwrap()
        .split(',')
        .map(|s| s.trim().to_string())
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(|v| v.trim().parse().unwrap()).collect())
        .collect();
    (header, rows)
}

/// The (low, high) of a `meanRange: (-3, 3)` line.
fn range(settings: &str, key: &str) -> (f64, f64) {
    let line = settings
        .lines()
        .find(|l| l.starts_with(key))
        .unwrap_or_else(|| panic!("no {key}"));
    let inner = line.split('(').nth(1).unwrap().trim_end_matches(')');
    let mut it = inner.split(',').map(|v| v.trim().parse::<f64>().unwrap());
    (it.next().unwrap(), it.next().unwrap())
}

fn check(id: &str, method: Method, seed: u64) {
    let Some(dir) = suite_dir() else {
        eprintln!("skipped: the shared SBML test-suite data is absent");
        return;
    };
    let case = dir.join(id);
    let settings = std::fs::read_to_string(case.join(format!("{id}-settings.txt"))).unwrap();
    let (z_lo, z_hi) = range(&settings, "meanRange");
    let (y_lo, y_hi) = range(&settings, "sdRange");
    let (header, rows) = read_results(&case.join(format!("{id}-results.csv")));
    let fixture = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/sbml_suite");
    let net = load(&format!("{fixture}/{id}.crn"), &Overrides::default()).unwrap();
    let spec = EnsembleSpec {
        replicates: REPLICATES,
        seed,
        grid_points: 51,
        method,
        ..EnsembleSpec::new(50.0)
    };
    let r = ensemble::run(&net, &spec).unwrap();
    let n = REPLICATES as f64;
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    for s in &net.species {
        let (cm, cs) = (
            col(&format!("{}-mean", s.name)),
            col(&format!("{}-sd", s.name)),
        );
        let i = net.species_index(&s.name).unwrap();
        let mut outside = 0;
        for row in &rows {
            let t = row[col("time")];
            let p = t.round() as usize;
            assert_eq!(r.grid_times[p], t);
            let (mu, sigma) = (row[cm], row[cs]);
            let w = &r.grid[p][i];
            if sigma == 0.0 {
                assert_eq!(w.mean(), mu, "{id} {} t={t}: deterministic point", s.name);
                assert_eq!(w.variance(), 0.0);
                continue;
            }
            let z = n.sqrt() * (w.mean() - mu) / sigma;
            let s2 = (n - 1.0) / n * w.variance() + (w.mean() - mu).powi(2);
            let y = (n / 2.0).sqrt() * (s2 / (sigma * sigma) - 1.0);
            if !(z_lo < z && z < z_hi) {
                outside += 1;
            }
            assert!(z.abs() < 4.0, "{id} {} t={t}: Z = {z:.2}", s.name);
            assert!(y_lo < y && y < y_hi, "{id} {} t={t}: Y = {y:.2}", s.name);
        }
        assert!(
            outside <= 1,
            "{id} {}: {outside} points outside the mean range",
            s.name
        );
    }
}

#[test]
fn case_00028_immigration_death_reset_direct() {
    check("00028", Method::Direct, 28);
}

#[test]
fn case_00032_dimerisation_reset_direct() {
    check("00032", Method::Direct, 32);
}

#[test]
fn case_00028_immigration_death_reset_auto() {
    check("00028", Method::Auto { epsilon: 0.03 }, 128);
}

#[test]
fn case_00032_dimerisation_reset_auto() {
    check("00032", Method::Auto { epsilon: 0.03 }, 132);
}
