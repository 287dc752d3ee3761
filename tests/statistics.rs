//! The tests' own statistics (tests/support/stats.rs) against hand computations, printed
//! tables and seeded samples of known laws; each check names its source.

mod support;

use copyloop::stats::Welford;
use rand::{RngExt, SeedableRng};
use rand_distr::weighted::WeightedIndex;
use rand_distr::Distribution;
use rand_xoshiro::Xoshiro256PlusPlus;
use statrs::distribution::{ContinuousCDF, Discrete, Exp, Poisson};
use std::f64::consts::PI;
use support::stats::*;

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
}

#[test]
fn histogram_binning_and_distance() {
    let mut h = Histogram::new(0, 2, 3).unwrap();
    h.push_all(&[-1, 0, 1, 2, 5, 6, 100]);
    assert_eq!(h.counts(), &[2, 1, 1]);
    assert_eq!((h.below(), h.above(), h.total()), (1, 2, 7));
    assert_eq!(h.bin_range(2), (4, 5));
    let mut g = Histogram::new(0, 2, 3).unwrap();
    g.push_all(&[0, 0, 2, 3]);
    // p_h = (2,1,1)/7, tails 1/7, 2/7; p_g = (2,2,0)/4, tails 0.
    let expect =
        (2.0 / 7.0 - 0.5f64).abs() + (1.0 / 7.0 - 0.5f64).abs() + 1.0 / 7.0 + 1.0 / 7.0 + 2.0 / 7.0;
    assert!((histogram_distance(&h, &g).unwrap() - expect).abs() < 1e-15);
    assert_eq!(histogram_distance(&g, &g).unwrap(), 0.0);
    let other = Histogram::unit(0, 5).unwrap();
    assert_eq!(
        histogram_distance(&h, &other),
        Err(StatsError::BinningMismatch)
    );
    assert!(Histogram::new(0, 0, 3).is_err());
    assert!(Histogram::unit(3, 2).is_err());
}

#[test]
fn common_histograms_span_pooled_range() {
    let (a, b) = common_histograms(&[0, 1, 2], &[3, 4], 10).unwrap();
    assert_eq!(a.counts(), &[1, 1, 1, 0, 0]);
    assert_eq!(b.counts(), &[0, 0, 0, 1, 1]);
    // Disjoint supports: D = 2 (its maximum).
    assert_eq!(sample_distance(&[0, 1, 2], &[3, 4], 10).unwrap(), 2.0);
    // Range 0..=9 (10 values) into 3 bins → width 4: bins 0-3, 4-7, 8-11.
    let (a, _) = common_histograms(&[0, 9], &[4, 5], 3).unwrap();
    assert_eq!(a.counts(), &[1, 0, 1]);
    assert_eq!(a.bin_range(2), (8, 11));
    assert_eq!(a.above() + a.below(), 0);
    assert!(common_histograms(&[], &[1], 3).is_err());
    assert!(common_histograms(&[i64::MIN], &[i64::MAX], 4).is_ok());
}

#[test]
fn expected_self_distance_formula() {
    // docs/references.md §11 [C]: B = 5, p = (.1,.2,.3,.25,.15), N = 1000 → 0.06952;
    // N = 10⁴ → 0.02198; N = 100 → 0.2199.
    let p = [0.1, 0.2, 0.3, 0.25, 0.15];
    assert!((expected_self_distance(&p, 1000) - 0.06952).abs() < 5e-6);
    assert!((expected_self_distance(&p, 10_000) - 0.02198).abs() < 1e-5);
    assert!((expected_self_distance(&p, 100) - 0.2199).abs() < 1e-4);
    let bound = (4.0 * 4.0 / (PI * 1000.0)).sqrt();
    assert!(expected_self_distance(&p, 1000) <= bound);
    assert!(expected_self_distance(&p, 0).is_nan());
}

/// Mean histogram distance over `pairs` pairs of independent samples of n from `p`.
fn monte_carlo_self_distance(p: &[f64], n: usize, pairs: usize, seed: u64) -> Welford {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let law = WeightedIndex::new(p).unwrap();
    let top = p.len() as i64 - 1;
    let mut acc = Welford::new();
    for _ in 0..pairs {
        let mut h1 = Histogram::unit(0, top).unwrap();
        let mut h2 = h1.clone();
        for _ in 0..n {
            h1.push(law.sample(&mut rng) as i64);
            h2.push(law.sample(&mut rng) as i64);
        }
        acc.push(histogram_distance(&h1, &h2).unwrap());
    }
    acc
}

#[test]
fn self_distance_monte_carlo() {
    // docs/references.md §11 test (i) [C]: the mean distance of two seeded exact samples agrees
    // with the prediction within 5 % (MC there: 0.06972 at N = 1000, 0.02202 at N = 10⁴).
    // With 4000 pairs the SE of the MC mean is ≈ 0.6 % of it, so 5 % exceeds 4 SE plus
    // the small-N bias of the asymptotic formula (≈ 0.3 % at N = 1000).
    let p = [0.1, 0.2, 0.3, 0.25, 0.15];
    for (n, seed) in [(1000usize, 1u64), (10_000, 2)] {
        let mc = monte_carlo_self_distance(&p, n, 4000, seed);
        let predicted = expected_self_distance(&p, n as u64);
        assert!(4.0 * mc.stderr() < 0.05 * predicted, "SE {}", mc.stderr());
        assert!(
            rel(mc.mean(), predicted) < 0.05,
            "N = {n}: MC {} vs predicted {predicted}",
            mc.mean()
        );
    }
}

#[test]
fn chi_square_hand_computed() {
    // O = (10, 20, 30), equal p, n = 60, E = 20: X² = (100 + 0 + 100)/20 = 10, 2 dof,
    // p = e^{−10/2} (closed form of the χ²₂ tail).
    let r = chi_square_gof(&[10, 20, 30], &[1.0 / 3.0; 3]).unwrap();
    assert!((r.statistic - 10.0).abs() < 1e-12);
    assert_eq!(r.dof, 2);
    assert!(rel(r.p_value, (-5.0f64).exp()) < 1e-9);
    // O = (10, 20, 30, 40), E = 25: X² = (225 + 25 + 25 + 225)/25 = 20, 3 dof.
    let r = chi_square_gof(&[10, 20, 30, 40], &[0.25; 4]).unwrap();
    assert!((r.statistic - 20.0).abs() < 1e-12);
    assert_eq!(r.dof, 3);
    // χ²₃ 95 % point 7.8147 (standard χ² tables; tests/reference/tables.py [C]): p = 0.05.
    assert!((chi_square_sf(7.8147, 3) - 0.05).abs() < 1e-5);
}

#[test]
fn chi_square_merges_small_bins() {
    // n = 100, expected (50, 30, 12, 5, 2, 1): bins 4..6 merge to 8 → 4 bins, 3 dof.
    // Observed (48, 33, 10, 4, 3, 2) → (48, 33, 10, 9):
    // X² = 4/50 + 9/30 + 4/12 + 1/8 (hand computation).
    let p = [0.5, 0.3, 0.12, 0.05, 0.02, 0.01];
    let r = chi_square_gof(&[48, 33, 10, 4, 3, 2], &p).unwrap();
    assert_eq!((r.bins, r.dof), (4, 3));
    assert!((r.statistic - (0.08 + 0.3 + 1.0 / 3.0 + 0.125)).abs() < 1e-12);
    // Leading small bins merge forward: expected (1, 2, 3, 44, 50) → (6, 44, 50).
    let r = chi_square_gof(&[1, 1, 1, 47, 50], &[0.01, 0.02, 0.03, 0.44, 0.5]).unwrap();
    assert_eq!(r.bins, 3);
    let r = chi_square_gof_fitted(&[48, 33, 10, 4, 3, 2], &p, 1).unwrap();
    assert_eq!(r.dof, 2);
}

#[test]
fn chi_square_rejects_bad_input() {
    assert!(matches!(
        chi_square_gof(&[1, 2], &[0.5]),
        Err(StatsError::LengthMismatch(2, 1))
    ));
    assert!(chi_square_gof(&[5, 5], &[0.6, 0.6]).is_err());
    assert!(chi_square_gof(&[5, 5], &[f64::NAN, 1.0]).is_err());
    assert!(chi_square_gof(&[0, 0], &[0.5, 0.5]).is_err());
    assert_eq!(
        chi_square_gof(&[3, 3], &[0.5, 0.5]),
        Err(StatsError::TooFewBins)
    );
    assert!(chi_square_gof_fitted(&[50, 50], &[0.5, 0.5], 1).is_err());
}

#[test]
fn chi_square_gof_poisson_samples() {
    // Seeded Poisson(4) samples (rand_distr) against the Poisson pmf (statrs), last bin
    // holding the tail: a correct pair gives a p-value that is not extreme; a law with a
    // shifted mean is rejected.
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
    let sampler = rand_distr::Poisson::new(4.0).unwrap();
    let mut counts = [0u64; 16];
    for _ in 0..20_000 {
        let k: f64 = sampler.sample(&mut rng);
        counts[(k as usize).min(15)] += 1;
    }
    let probs = |lambda: f64| {
        let law = Poisson::new(lambda).unwrap();
        let mut p: Vec<f64> = (0..15).map(|k| law.pmf(k)).collect();
        p.push(1.0 - p.iter().sum::<f64>());
        p
    };
    let good = chi_square_gof(&counts, &probs(4.0)).unwrap();
    assert!(good.p_value > 1e-4, "{good:?}");
    let bad = chi_square_gof(&counts, &probs(4.2)).unwrap();
    assert!(bad.p_value < 1e-6, "{bad:?}");
}

#[test]
fn chi_square_two_sample_hand_and_seeded() {
    // a: 10 zeros, 20 ones; b: 20 zeros, 10 ones. Every expected cell is 15:
    // X² = 4 · 25/15 = 20/3 with 1 dof (hand computation).
    let a: Vec<i64> = [vec![0; 10], vec![1; 20]].concat();
    let b: Vec<i64> = [vec![0; 20], vec![1; 10]].concat();
    let r = chi_square_two_sample(&a, &b).unwrap();
    assert!((r.statistic - 20.0 / 3.0).abs() < 1e-12);
    assert_eq!(r.dof, 1);
    // Seeded Poisson samples: same law accepted, means 10 vs 11 rejected.
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(9);
    let mut draw = |lambda: f64, n: usize| -> Vec<i64> {
        let law = rand_distr::Poisson::new(lambda).unwrap();
        (0..n)
            .map(|_| {
                let k: f64 = law.sample(&mut rng);
                k as i64
            })
            .collect()
    };
    let (x, y, z) = (draw(10.0, 5000), draw(10.0, 5000), draw(11.0, 5000));
    let same = chi_square_two_sample(&x, &y).unwrap();
    assert!(same.p_value > 1e-4, "{same:?}");
    let diff = chi_square_two_sample(&x, &z).unwrap();
    assert!(diff.p_value < 1e-6, "{diff:?}");
    assert!(chi_square_two_sample(&[], &[1]).is_err());
    assert_eq!(
        chi_square_two_sample(&[1; 10], &[1; 10]),
        Err(StatsError::TooFewBins)
    );
}

#[test]
fn kolmogorov_distribution_table_values() {
    // Asymptotic critical values of the Kolmogorov distribution (Smirnov 1948 table;
    // standard KS tables; scipy's kstwobign in tests/reference/tables.py [C]): P(K > 1.2238) = 0.10, P(K > 1.3581) = 0.05,
    // P(K > 1.6276) = 0.01.
    assert!((kolmogorov_sf(1.2238) - 0.10).abs() < 1e-4);
    assert!((kolmogorov_sf(1.3581) - 0.05).abs() < 1e-4);
    assert!((kolmogorov_sf(1.6276) - 0.01).abs() < 1e-4);
    // The two series agree where they are switched.
    let a = 1.0 - kolmogorov_cdf_small(1.18);
    let b = kolmogorov_sf_large(1.18);
    assert!((a - b).abs() < 1e-14);
    assert_eq!(kolmogorov_sf(0.0), 1.0);
    assert!(kolmogorov_sf(0.1) > 0.999_999);
    assert!(kolmogorov_sf(5.0) < 1e-20);
}

#[test]
fn ks_statistic_hand_computed() {
    // Samples 0.1, 0.5, 0.9 against U(0, 1): D⁺ = max(1/3 − 0.1, 2/3 − 0.5, 1 − 0.9),
    // D⁻ = max(0.1, 0.5 − 1/3, 0.9 − 2/3); D = 0.7/3 (hand computation).
    let (d, p) = ks_statistic(&[0.9, 0.1, 0.5], |x| x.clamp(0.0, 1.0));
    assert!((d - 0.7 / 3.0).abs() < 1e-15);
    assert!(p > 0.5);
    assert!(ks_statistic(&[], |x| x).0.is_nan());
    assert!(ks_statistic(&[f64::NAN], |x| x).1.is_nan());
}

#[test]
fn ks_against_exponential_law() {
    // Seeded Exp(2) samples (rand_distr) against the Exp(2) CDF (statrs): accepted;
    // against Exp(2.4): rejected (D ≈ 0.067 at n = 5000, √n·D ≈ 4.7).
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
    let law = rand_distr::Exp::new(2.0).unwrap();
    let xs: Vec<f64> = (0..5000).map(|_| law.sample(&mut rng)).collect();
    let exact = Exp::new(2.0).unwrap();
    let (_, p) = ks_statistic(&xs, |x| exact.cdf(x));
    assert!(p > 1e-4, "p = {p}");
    let wrong = Exp::new(2.4).unwrap();
    let (d, p) = ks_statistic(&xs, |x| wrong.cdf(x));
    assert!(d > 0.04 && p < 1e-6, "D = {d}, p = {p}");
}

#[test]
fn ks_p_values_are_uniform_under_the_null() {
    // Under the null the p-value is U(0, 1); 400 seeded tests of n = 100 uniform samples,
    // their p-values tested against U(0, 1) with the KS test itself.
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(4);
    let ps: Vec<f64> = (0..400)
        .map(|_| {
            let xs: Vec<f64> = (0..100).map(|_| rng.random::<f64>()).collect();
            ks_statistic(&xs, |x| x).1
        })
        .collect();
    let (_, p) = ks_statistic(&ps, |x| x.clamp(0.0, 1.0));
    assert!(p > 1e-4, "p = {p}");
}
