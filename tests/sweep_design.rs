//! Latin hypercube property (McKay, Beckman & Conover 1979, Technometrics 21:239 [M]): with N
//! points, each of the N equal strata of every dimension — equal in ln for a log range — holds
//! exactly one point; and the design follows from the seed.

use copyloop::network::parser;
use copyloop::sweep::{Design, Vary};

const NET: &str = "volume 1 pL\nspecies A = 10 nM\nspecies B = 40\nparam k = 1 /s\n\
                   param j = 2 /min\nstep s A -> B @ k\nstep t B -> 0 @ j\n";

fn vary(specs: &[&str]) -> Vec<Vary> {
    let ast = parser::parse("lhs.crn", NET.as_bytes()).unwrap();
    specs
        .iter()
        .map(|s| Vary::parse(s, &ast).unwrap())
        .collect()
}

/// Stratum of `x` among `n` equal parts of [a, b] (in ln when `log`).
fn stratum(x: f64, a: f64, b: f64, n: usize, log: bool) -> usize {
    let f = if log {
        (x.ln() - a.ln()) / (b.ln() - a.ln())
    } else {
        (x - a) / (b - a)
    };
    assert!((0.0..1.0).contains(&f), "{x} is outside [{a}, {b})");
    (f * n as f64).floor() as usize
}

#[test]
fn every_stratum_of_every_dimension_is_hit_once() {
    for (seed, n) in [(0u64, 7usize), (1, 50), (12345, 333)] {
        let d = Design::lhs(
            vary(&["k=lin:0.5..2.5", "j=log:0.01..100", "A=lin:1nM..1uM"]),
            Some(n as u64),
            seed,
        )
        .unwrap();
        assert_eq!(d.total(), n as u64);
        let dims = [(0.5, 2.5, false), (0.01, 100.0, true), (1.0, 1000.0, false)];
        for (k, &(a, b, log)) in dims.iter().enumerate() {
            let mut hits = vec![0u32; n];
            for i in 0..n as u64 {
                hits[stratum(d.values(i)[k], a, b, n, log)] += 1;
            }
            assert!(
                hits.iter().all(|&h| h == 1),
                "dimension {k}, seed {seed}: {hits:?}"
            );
        }
    }
}

#[test]
fn a_list_dimension_uses_each_value_once() {
    let d = Design::lhs(vary(&["k=lin:1..2", "B=list:1,2,3,4,5"]), Some(5), 9).unwrap();
    let mut b: Vec<f64> = (0..5).map(|i| d.values(i)[1]).collect();
    b.sort_by(f64::total_cmp);
    assert_eq!(b, vec![1.0, 2.0, 3.0, 4.0, 5.0]);
}

#[test]
fn the_design_follows_from_the_seed_alone() {
    let specs = ["k=lin:0.5..2.5", "j=log:0.01..100"];
    let a = Design::lhs(vary(&specs), Some(40), 77).unwrap();
    let b = Design::lhs(vary(&specs), Some(40), 77).unwrap();
    let c = Design::lhs(vary(&specs), Some(40), 78).unwrap();
    let all = |d: &Design| (0..40).map(|i| d.values(i)).collect::<Vec<_>>();
    assert_eq!(all(&a), all(&b));
    assert_ne!(all(&a), all(&c));
}

#[test]
fn the_strata_are_filled_uniformly() {
    // Within its stratum a point sits at a uniform position: over 3 dimensions × 4000 points
    // the position's mean is 1/2 with standard error sqrt(1/12 / 12000) = 0.00264; allow 4 SE.
    // (Uniform distribution moments, common practice.)
    let n = 4000;
    let d = Design::lhs(
        vary(&["k=lin:0..1", "j=lin:0..1", "A=lin:0..1"]),
        Some(n),
        5,
    )
    .unwrap();
    let mut sum = 0.0;
    for i in 0..n {
        for x in d.values(i) {
            let f = x * n as f64;
            sum += f - f.floor();
        }
    }
    let mean = sum / (3 * n) as f64;
    let se = (1.0 / 12.0 / (3 * n) as f64).sqrt();
    assert!((mean - 0.5).abs() < 4.0 * se, "mean position {mean}");
}
