//! The direct method's channel selections give the same statistics: composition–rejection
//! against the sum tree on random networks (means and variances of every species at the end,
//! and mean firing counts of every reaction, within 4 standard errors of the difference), and
//! the automatic choice by size.

use copyloop::kernel::direct::{Selection, REJECTION_FROM};
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct, RecordSpec, Recorder};
use copyloop::network::{load_source, Overrides};
use copyloop::stats::Welford;

/// A network of `m` steps from a fixed sequence over m/3 species: conversions, binding,
/// dimerisation, a third-order step, synthesis, degradation and a regulated law, so that
/// propensities spread over many binary orders and some species start at zero.
fn network(m: usize, seed: u64) -> String {
    let n = (m / 3).max(3);
    let mut s = seed;
    let mut next = |k: usize| {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((s >> 33) as usize) % k
    };
    let mut src = String::new();
    for i in 0..n {
        let x0 = if i % 5 == 0 { 0 } else { 1 + next(300) };
        src.push_str(&format!("species X{i} = {x0}\n"));
    }
    for j in 0..m {
        let (a, b, c) = (next(n), next(n), next(n));
        src.push_str(&match next(8) {
            0 | 1 => format!("step r{j} X{a} -> X{b} @ 0.{}\n", 1 + next(9)),
            2 if a != b => format!("step r{j} X{a} + X{b} -> X{c} @ 0.0005\n"),
            3 => format!("step r{j} 2 X{a} -> X{b} @ 0.001\n"),
            4 if a != b => format!("step r{j} 2 X{a} + X{b} -> 2 X{c} + X{b} @ 0.00001\n"),
            5 => format!("step r{j} 0 -> X{a} @ {}\n", 1 + next(20)),
            6 => format!("step r{j} X{a} -> 0 @ law 0.2 * X{a} / (1 + 0.01 * X{b})\n"),
            _ => format!("step r{j} X{a} -> 0 @ 0.05\n"),
        });
    }
    src
}

struct Stats {
    finals: Vec<Welford>,
    firings: Vec<Welford>,
}

fn ensemble(k: &CompiledKernel, selection: Selection, seed: u64, reps: u64, t_end: f64) -> Stats {
    let mut d = Direct::with_selection(k, selection);
    assert_eq!(d.selection(), selection);
    let spec = RecordSpec {
        t_end,
        grid_points: 0,
        window: 0.0,
    };
    let mut rec = Recorder::new(spec, k);
    let mut st = Stats {
        finals: vec![Welford::new(); k.species],
        firings: vec![Welford::new(); k.reactions()],
    };
    for r in 0..reps {
        d.run(&k.x0, t_end, &mut replicate_rng(seed, r), &mut rec)
            .unwrap();
        for (w, &x) in st.finals.iter_mut().zip(d.state()) {
            w.push(x as f64);
        }
        for (w, &f) in st.firings.iter_mut().zip(rec.firings()) {
            w.push(f as f64);
        }
    }
    st
}

/// |mean₁ − mean₂| ≤ 4·√(SE₁² + SE₂²), and the same for the variances, on independent
/// samples. SE(s²) is the larger of the normal-theory s²·√(2/(n−1)) and the Poisson form
/// √((s² + 2s⁴)/n) (REFERENCES-style rule for a Poisson sample, with s² for λ), so that rare
/// counts (a channel that fires once in thousands of runs) are not judged by normal theory.
fn same(a: &Welford, b: &Welford, what: &str) {
    let se = (a.stderr().powi(2) + b.stderr().powi(2)).sqrt();
    assert!(
        (a.mean() - b.mean()).abs() <= 4.0 * se + 1e-12,
        "{what}: means {} and {} (SE {se})",
        a.mean(),
        b.mean()
    );
    let n = a.count() as f64;
    let var_se2 = |v: f64| (v * v * 2.0 / (n - 1.0)).max((v + 2.0 * v * v) / n);
    let var_se = (var_se2(a.variance()) + var_se2(b.variance())).sqrt();
    assert!(
        (a.variance() - b.variance()).abs() <= 4.0 * var_se + 1e-12,
        "{what}: variances {} and {} (SE {var_se})",
        a.variance(),
        b.variance()
    );
}

#[test]
fn rejection_and_tree_agree_on_random_networks() {
    for (m, seed) in [(40usize, 11u64), (120, 12), (400, 13)] {
        let src = network(m, seed);
        let net = load_source("r.crn", src.as_bytes(), &Overrides::default()).unwrap();
        let k = CompiledKernel::new(&net).unwrap();
        let reps = 3000;
        let tree = ensemble(&k, Selection::Tree, 100 + seed, reps, 2.0);
        let rej = ensemble(&k, Selection::Rejection, 200 + seed, reps, 2.0);
        for i in 0..k.species {
            same(
                &tree.finals[i],
                &rej.finals[i],
                &format!("m {m}: species {i}"),
            );
        }
        for j in 0..k.reactions() {
            same(
                &tree.firings[j],
                &rej.firings[j],
                &format!("m {m}: firings of {j}"),
            );
        }
    }
}

#[test]
fn selection_is_chosen_by_size() {
    let sel = |m: usize| {
        let net = load_source("r.crn", network(m, 3).as_bytes(), &Overrides::default()).unwrap();
        let k = CompiledKernel::new(&net).unwrap();
        Direct::new(&k).selection()
    };
    assert_eq!(sel(10), Selection::Auto);
    assert_eq!(sel(200), Selection::Tree);
    assert_eq!(sel(REJECTION_FROM), Selection::Rejection);
}
