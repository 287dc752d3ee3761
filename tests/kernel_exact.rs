//! The direct-method kernel against exact results: the algorithm's own laws, exactly solvable
//! first-order networks, the binomial combinatorics of order-2 and order-3 steps, and
//! single-molecule Michaelis–Menten.
//!
//! Acceptance rules (docs/references.md §0): means within 4 standard errors (σ the exact SD where
//! known), variances within 4 standard errors of the sample variance, chi-square and
//! Kolmogorov–Smirnov tests passed when p > 1e-4; fixed seeds throughout.

mod support;

use copyloop::ensemble::{self, EnsembleSpec};
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct, Observer};
use copyloop::network::{load_source, Network, Overrides};
use copyloop::stats::Welford;
use statrs::distribution::{Binomial, Discrete, Poisson};
use support::stats::{chi_square_gof, ks_statistic};

fn net(src: &str) -> Network {
    load_source("test.crn", src.as_bytes(), &Overrides::default()).expect("test network")
}

/// Final counts of species `name` over `replicates` runs to `t_end`.
fn finals(n: &Network, replicates: u64, seed: u64, t_end: f64, name: &str) -> Vec<i64> {
    let spec = EnsembleSpec {
        replicates,
        seed,
        keep_finals: true,
        ..EnsembleSpec::new(t_end)
    };
    let r = ensemble::run(n, &spec).expect("ensemble");
    let i = n.species_index(name).unwrap();
    r.finals.unwrap().iter().map(|x| x[i]).collect()
}

fn moments(xs: &[i64]) -> Welford {
    xs.iter().map(|&x| x as f64).collect()
}

/// Chi-square goodness of fit of integer samples to `pmf` on lo..=hi, with the rest of the
/// probability in one tail bin above hi.
fn gof(samples: &[i64], pmf: impl Fn(i64) -> f64, lo: i64, hi: i64) -> f64 {
    let mut observed = vec![0u64; (hi - lo + 2) as usize];
    for &x in samples {
        assert!(x >= lo, "sample {x} below the support");
        let b = ((x - lo) as usize).min(observed.len() - 1);
        observed[b] += 1;
    }
    let mut probs: Vec<f64> = (lo..=hi).map(&pmf).collect();
    let tail = (1.0 - probs.iter().sum::<f64>()).max(0.0);
    probs.push(tail);
    let total: f64 = probs.iter().sum();
    probs.iter_mut().for_each(|p| *p /= total);
    chi_square_gof(&observed, &probs)
        .expect("chi-square")
        .p_value
}

/// Records the time and channel of every firing.
#[derive(Default)]
struct Log {
    times: Vec<f64>,
    channels: Vec<usize>,
}

impl Observer for Log {
    fn fire(&mut self, t: f64, j: usize, _k: u64) {
        self.times.push(t);
        self.channels.push(j);
    }
}

/// Gillespie 1977 (J. Phys. Chem. 81:2340 [verified]; docs/references.md §1 check 1a): with the
/// propensities frozen at a = (1, 2, 7) (three zero-order channels), waiting times are
/// Exponential(a₀ = 10) and channels are drawn with probabilities (0.1, 0.2, 0.7).
#[test]
fn frozen_propensities_give_exponential_waits_and_multinomial_channels() {
    let n = net("species A = 0\nspecies B = 0\nspecies C = 0\n\
                 step a 0 -> A @ 1\nstep b 0 -> B @ 2\nstep c 0 -> C @ 7\n");
    let k = CompiledKernel::new(&n).unwrap();
    let mut d = Direct::new(&k);
    let mut log = Log::default();
    d.run(&k.x0, 10_000.0, &mut replicate_rng(11, 0), &mut log)
        .unwrap();
    let waits: Vec<f64> = std::iter::once(log.times[0])
        .chain(log.times.windows(2).map(|w| w[1] - w[0]))
        .collect();
    let w: Welford = waits.iter().copied().collect();
    assert!(w.count() > 90_000);
    // Mean 1/a₀ = 0.1, SD 0.1.
    let se = 0.1 / (w.count() as f64).sqrt();
    assert!((w.mean() - 0.1).abs() < 4.0 * se, "mean wait {}", w.mean());
    let (_, p) = ks_statistic(&waits, |t| 1.0 - (-10.0 * t).exp());
    assert!(p > 1e-4, "KS p = {p}");
    let mut counts = [0u64; 3];
    log.channels.iter().for_each(|&j| counts[j] += 1);
    let p = chi_square_gof(&counts, &[0.1, 0.2, 0.7]).unwrap().p_value;
    assert!(p > 1e-4, "channel chi-square p = {p}, counts {counts:?}");
}

/// Pure decay A → 0 (McQuarrie 1967, J. Appl. Prob. 4:413 §III.A [verified]; docs/references.md
/// §2a, values [C]): A(t) ~ Binomial(n₀, e^(−kt)); n₀ = 1000, k = 0.5, t = 1: mean 606.5307,
/// variance 238.6512.
#[test]
fn pure_decay_is_binomial() {
    let n = net("species A = 1000\nstep decay A -> 0 @ 0.5\n");
    let xs = finals(&n, 10_000, 21, 1.0, "A");
    let w = moments(&xs);
    let p = (-0.5f64).exp();
    let (mean, var) = (1000.0 * p, 1000.0 * p * (1.0 - p));
    assert!((mean - 606.5307).abs() < 1e-4 && (var - 238.6512).abs() < 1e-4);
    let r = xs.len() as f64;
    assert!(
        (w.mean() - mean).abs() < 4.0 * (var / r).sqrt(),
        "mean {}",
        w.mean()
    );
    // Binomial fourth central moment μ₄ = npq(1 + 3(n − 2)pq) (standard handbook formula);
    // SE(s²) ≈ √((μ₄ − σ⁴)/R).
    let pq = p * (1.0 - p);
    let mu4 = 1000.0 * pq * (1.0 + 3.0 * 998.0 * pq);
    let se_var = ((mu4 - var * var) / r).sqrt();
    assert!(
        (w.variance() - var).abs() < 4.0 * se_var,
        "variance {}",
        w.variance()
    );
    let b = Binomial::new(p, 1000).unwrap();
    let pv = gof(&xs, |k| b.pmf(k as u64), 0, 1000);
    assert!(pv > 1e-4, "chi-square p = {pv}");
}

/// Extinction time of pure decay (docs/references.md §2a, formula derived there, values [C]):
/// T = Σ_{j=1}^{n₀} Exp(kj); n₀ = 100, k = 1: E[T] = 5.187378, Var[T] = 1.634984.
#[test]
fn decay_extinction_time_has_the_harmonic_mean() {
    let n = net("species A = 100\nstep decay A -> 0 @ 1\n");
    let k = CompiledKernel::new(&n).unwrap();
    let mut d = Direct::new(&k);
    let mut w = Welford::new();
    for r in 0..10_000 {
        let s = d
            .run(&k.x0, 1e6, &mut replicate_rng(22, r), &mut ())
            .unwrap();
        assert_eq!(s.events, 100);
        w.push(s.absorbed_at.expect("decay ends in extinction"));
    }
    let se = (1.634984f64 / 1e4).sqrt();
    assert!(
        (w.mean() - 5.187378).abs() < 4.0 * se,
        "mean T {}",
        w.mean()
    );
}

/// Immigration–death 0 → X (k = 10), X → 0 (γ = 0.1 per molecule) from X = 0 (docs/references.md
/// §2b, Jahnke & Huisinga 2007 [verified]): X(t) ~ Poisson((k/γ)(1 − e^(−γt))), so at
/// t = 10 the law is Poisson(63.212056) and at t = 100 it is Poisson(100(1 − e^(−10))), the
/// stationary Poisson(100) to 5e-5. Also the windowed figures over [50, 100] (derived from
/// the mean path [C]): births ~ Poisson(kT) with mean 500 (250 in the first half), mean time
/// average 100 − (100/(γT))(e^(−5) − e^(−10)) = 99.866153, deaths γ·T·99.866153 = 499.33077.
#[test]
fn immigration_death_is_poisson_with_exact_window_figures() {
    let n = net("species X = 0\nstep birth 0 -> X @ 10\nstep death X -> 0 @ 0.1\n");
    let spec = EnsembleSpec {
        replicates: 10_000,
        seed: 31,
        grid_points: 11,
        window: 50.0,
        keep_finals: true,
        ..EnsembleSpec::new(100.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    let rr = 10_000f64;
    let lam = 100.0 * (1.0 - (-10.0f64).exp());
    let fin = &r.final_state[0];
    assert!(
        (fin.mean() - lam).abs() < 4.0 * (lam / rr).sqrt(),
        "mean {}",
        fin.mean()
    );
    // Poisson variance: SE(s²) ≈ √((λ + 2λ²)/R) (docs/references.md §0).
    let se_var = ((lam + 2.0 * lam * lam) / rr).sqrt();
    assert!(
        (fin.variance() - lam).abs() < 4.0 * se_var,
        "var {}",
        fin.variance()
    );
    let xs: Vec<i64> = r.finals.as_ref().unwrap().iter().map(|x| x[0]).collect();
    let pois = Poisson::new(lam).unwrap();
    let pv = gof(&xs, |k| pois.pmf(k as u64), 0, 200);
    assert!(pv > 1e-4, "chi-square p = {pv}");
    // Grid point 1 is t = 10.
    assert_eq!(r.grid_times[1], 10.0);
    let g = &r.grid[1][0];
    let lam10 = 63.212056;
    assert!(
        (g.mean() - lam10).abs() < 4.0 * (lam10 / rr).sqrt(),
        "grid mean {}",
        g.mean()
    );
    // Firings in the window.
    let births = &r.firings[0];
    assert!((births.mean() - 500.0).abs() < 4.0 * (500.0 / rr).sqrt());
    let first = &r.firings_first_half[0];
    assert!((first.mean() - 250.0).abs() < 4.0 * (250.0 / rr).sqrt());
    let deaths = &r.firings[1];
    assert!((deaths.mean() - 499.33077).abs() < 4.0 * deaths.stderr());
    let avg = &r.time_average[0];
    assert!(
        (avg.mean() - 99.866153).abs() < 4.0 * avg.stderr(),
        "avg {}",
        avg.mean()
    );
    // Within-window variance (1/T)∫x² − x̄², from the exact moments: X(t) ~ Poisson(λ(t)),
    // Cov(X(s), X(t)) = λ(s)e^(−γ(t−s)) for s < t (survivors of X(s); derived [C]), so
    // E = (1/T)∫(λ + λ²) − ((1/T)∫λ)² − (2/T²)∫ λ(s)(1 − e^(−γ(t_end−s)))/γ ds.
    let (w0, te, g) = (50.0, 100.0, 0.1);
    let lam_t = |t: f64| 100.0 * (1.0 - (-g * t).exp());
    let simpson = |f: &dyn Fn(f64) -> f64| {
        let m = 2000;
        let h = (te - w0) / m as f64;
        let mut acc = f(w0) + f(te);
        for i in 1..m {
            acc += f(w0 + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
        }
        acc * h / 3.0
    };
    let t = te - w0;
    let m1 = simpson(&|s| lam_t(s)) / t;
    let m2 = simpson(&|s| lam_t(s) + lam_t(s) * lam_t(s)) / t;
    let var_mean = 2.0 / (t * t) * simpson(&|s| lam_t(s) * (1.0 - (-g * (te - s)).exp()) / g);
    let within = m2 - m1 * m1 - var_mean;
    assert!((m1 - 99.866153).abs() < 1e-5);
    let wv = &r.within_variance[0];
    assert!(
        (wv.mean() - within).abs() < 4.0 * wv.stderr(),
        "within-replicate variance {} vs exact {within}",
        wv.mean()
    );
}

/// Isomerisation A ⇌ B, k₁ = 1, k₂ = 3, N = 100 (docs/references.md §2c, values [C]): from A = 100,
/// A(0.5) has mean 78.383382 and variance 16.943836; the stationary law is Binomial(100, 0.75).
#[test]
fn isomerisation_is_binomial() {
    let n = net("species A = 100\nspecies B = 0\nstep flip A <-> B @ 1, 3\n");
    let half = moments(&finals(&n, 10_000, 41, 0.5, "A"));
    assert!((half.mean() - 78.383382).abs() < 4.0 * (16.943836f64 / 1e4).sqrt());
    let xs = finals(&n, 10_000, 42, 6.0, "A");
    let w = moments(&xs);
    assert!(
        (w.mean() - 75.0).abs() < 4.0 * (18.75f64 / 1e4).sqrt(),
        "mean {}",
        w.mean()
    );
    let b = Binomial::new(0.75, 100).unwrap();
    let pv = gof(&xs, |k| b.pmf(k as u64), 0, 100);
    assert!(pv > 1e-4, "chi-square p = {pv}");
}

/// Exact stationary law of a closed reversible step by detailed balance: P(n+1)/P(n) =
/// a₊(n)/a₋(n+1), where n counts the product (docs/references.md §2d [C], extended to the other
/// orders with the same argument). `forward(n)` and `reverse(n)` are the propensities written
/// out from Gillespie's combinatorics (1976/1977 [M]): c·x, c·x₁x₂, c·x(x−1)/2,
/// c·x(x−1)(x−2)/6, c·x₁x₂x₃, c·x₁(x₁−1)x₂/2.
fn detailed_balance(
    max: i64,
    forward: impl Fn(i64) -> f64,
    reverse: impl Fn(i64) -> f64,
) -> Vec<f64> {
    let mut p = vec![1.0];
    for n in 0..max {
        let next = p[n as usize] * forward(n) / reverse(n + 1);
        p.push(next);
    }
    let total: f64 = p.iter().sum();
    p.iter().map(|v| v / total).collect()
}

/// Runs a reversible step to stationarity and checks the product count against the exact
/// law: mean within 4 SE, chi-square p > 1e-4.
fn check_reversible(src: &str, product: &str, law: &[f64], seed: u64) {
    let n = net(src);
    let xs = finals(&n, 10_000, seed, 30.0, product);
    let mean: f64 = law.iter().enumerate().map(|(k, p)| k as f64 * p).sum();
    let var: f64 = law
        .iter()
        .enumerate()
        .map(|(k, p)| (k as f64 - mean).powi(2) * p)
        .sum();
    let w = moments(&xs);
    assert!(
        (w.mean() - mean).abs() < 4.0 * (var / 1e4).sqrt(),
        "{product}: mean {} vs exact {mean}",
        w.mean()
    );
    let pv = gof(
        &xs,
        |k| law.get(k as usize).copied().unwrap_or(0.0),
        0,
        law.len() as i64 - 1,
    );
    assert!(pv > 1e-4, "{product}: chi-square p = {pv}");
}

#[test]
fn pair_binding_follows_detailed_balance() {
    // A + B ⇌ C, A₀ = 5, B₀ = 8: a₊ = c·A·B, a₋ = c'·C.
    let law = detailed_balance(
        5,
        |n| 0.2 * (5 - n) as f64 * (8 - n) as f64,
        |n| 1.5 * n as f64,
    );
    check_reversible(
        "species A = 5\nspecies B = 8\nspecies C = 0\nstep bind A + B <-> C @ 0.2, 1.5\n",
        "C",
        &law,
        51,
    );
}

#[test]
fn dimerisation_uses_x_times_x_minus_one_over_two() {
    // 2A ⇌ B, A₀ = 7: a₊ = c·A(A−1)/2 with A = 7 − 2B.
    let law = detailed_balance(
        3,
        |n| {
            let a = (7 - 2 * n) as f64;
            0.6 * a * (a - 1.0) / 2.0
        },
        |n| 1.0 * n as f64,
    );
    check_reversible(
        "species A = 7\nspecies B = 0\nstep dimer 2 A <-> B @ 0.6, 1\n",
        "B",
        &law,
        52,
    );
}

#[test]
fn trimerisation_uses_the_falling_factorial_over_six() {
    // 3A ⇌ B, A₀ = 8: a₊ = c·A(A−1)(A−2)/6 with A = 8 − 3B.
    let law = detailed_balance(
        2,
        |n| {
            let a = (8 - 3 * n) as f64;
            0.05 * a * (a - 1.0) * (a - 2.0) / 6.0
        },
        |n| 0.4 * n as f64,
    );
    check_reversible(
        "species A = 8\nspecies B = 0\nstep tri 3 A <-> B @ 0.05, 0.4\n",
        "B",
        &law,
        53,
    );
}

#[test]
fn order_three_mixed_steps_follow_detailed_balance() {
    // 2A + B ⇌ C, A₀ = 6, B₀ = 4: a₊ = c·A(A−1)/2·B.
    let law = detailed_balance(
        3,
        |n| {
            let a = (6 - 2 * n) as f64;
            0.04 * a * (a - 1.0) / 2.0 * (4 - n) as f64
        },
        |n| 0.5 * n as f64,
    );
    check_reversible(
        "species A = 6\nspecies B = 4\nspecies C = 0\nstep m 2 A + B <-> C @ 0.04, 0.5\n",
        "C",
        &law,
        54,
    );
    // A + B + C ⇌ D, (3, 4, 5): a₊ = c·A·B·C.
    let law = detailed_balance(
        3,
        |n| 0.02 * ((3 - n) * (4 - n) * (5 - n)) as f64,
        |n| 0.3 * n as f64,
    );
    check_reversible(
        "species A = 3\nspecies B = 4\nspecies C = 5\nspecies D = 0\n\
         step t A + B + C <-> D @ 0.02, 0.3\n",
        "D",
        &law,
        55,
    );
}

/// The compiled propensities against Gillespie's combinatorics a = c·Π C(xᵢ, νᵢ)
/// (Gillespie 1976 [verified]; forms [M]) on small states, to rounding.
#[test]
fn compiled_propensities_are_the_binomial_forms() {
    let n = net(
        "species A = 0\nspecies B = 0\nspecies C = 0\nspecies S = 7 clamped\n\
                 step z 0 -> A @ 0.5\nstep f A -> 0 @ 0.5\nstep p A + B -> 0 @ 0.5\n\
                 step d 2 A -> 0 @ 0.5\nstep t 3 A -> 0 @ 0.5\nstep q 2 A + B -> 0 @ 0.5\n\
                 step r A + B + C -> 0 @ 0.5\nstep s A + S -> 0 @ 0.5\nstep u 2 S -> A @ 0.5\n",
    );
    let k = CompiledKernel::new(&n).unwrap();
    let choose = |x: i64, v: i64| -> f64 {
        (0..v).map(|i| (x - i) as f64).product::<f64>() / (1..=v).map(|i| i as f64).product::<f64>()
    };
    for a in 0..6i64 {
        for b in 0..4i64 {
            let c = 3i64;
            let x = k.state_buffer(&[a, b, c, 7]);
            let expect = [
                0.5,
                0.5 * a as f64,
                0.5 * (a * b) as f64,
                0.5 * choose(a, 2),
                0.5 * choose(a, 3),
                0.5 * choose(a, 2) * b as f64,
                0.5 * (a * b * c) as f64,
                0.5 * (a * 7) as f64,
                0.5 * choose(7, 2),
            ];
            for (j, e) in expect.iter().enumerate() {
                let got = k.propensity(j, &x);
                assert!(
                    (got - e).abs() <= 1e-14 * e.abs(),
                    "step {j} at A={a}, B={b}: {got}"
                );
            }
        }
    }
}

/// Records the intervals between firings of one channel.
struct Intervals {
    channel: usize,
    last: f64,
    gaps: Vec<f64>,
}

impl Observer for Intervals {
    fn fire(&mut self, t: f64, j: usize, _k: u64) {
        if j == self.channel {
            self.gaps.push(t - self.last);
            self.last = t;
        }
    }
}

/// One enzyme with clamped substrate (Kou, Cherayil, Min, English & Xie 2005, J. Phys. Chem. B
/// 109:19068 [verified]; English et al. 2006 [M]; docs/references.md §7, derived there [C]):
/// k₁[S] = 2, k₋₁ = 1, k₂ = 1 give a mean turnover interval (K_M + S)/(k₂S) = 2 and randomness
/// var/mean² = 0.75; the interval density is k₁S·k₂(e^(−λ₋t) − e^(−λ₊t))/(λ₊ − λ₋) with
/// λ± the roots of λ² − (k₁S + k₋₁ + k₂)λ + k₁S·k₂ = 0.
#[test]
fn single_enzyme_turnover_intervals_follow_single_molecule_michaelis_menten() {
    let n = net(
        "species E = 1\nspecies S = 2 clamped\nspecies C = 0\nspecies P = 0\n\
                 step bind E + S -> C @ 1\nstep unbind C -> E + S @ 1\nstep cat C -> E + P @ 1\n",
    );
    let k = CompiledKernel::new(&n).unwrap();
    let mut d = Direct::new(&k);
    let mut obs = Intervals {
        channel: 2,
        last: 0.0,
        gaps: Vec::new(),
    };
    d.run(&k.x0, 200_000.0, &mut replicate_rng(61, 0), &mut obs)
        .unwrap();
    // Intervals are independent (the enzyme is free after every turnover: a renewal process).
    let gaps = &obs.gaps;
    assert!(gaps.len() > 90_000);
    let w: Welford = gaps.iter().copied().collect();
    let se = 2.0 * 0.75f64.sqrt() / (w.count() as f64).sqrt();
    assert!(
        (w.mean() - 2.0).abs() < 4.0 * se,
        "mean interval {}",
        w.mean()
    );
    // Randomness: its SE from 100 batches of consecutive intervals (independent batches).
    let batch = gaps.len() / 100;
    let rs: Welford = gaps
        .chunks_exact(batch)
        .map(|c| {
            let b: Welford = c.iter().copied().collect();
            b.variance() / (b.mean() * b.mean())
        })
        .collect();
    let r = w.variance() / (w.mean() * w.mean());
    assert!(
        (r - 0.75).abs() < 4.0 * rs.stderr(),
        "randomness {r} ± {}",
        rs.stderr()
    );
    let (s, k1s, km1, k2) = (4.0f64, 2.0f64, 1.0f64, 1.0f64);
    let root = (s * s - 4.0 * k1s * k2).sqrt();
    let (lp, lm) = ((s + root) / 2.0, (s - root) / 2.0);
    assert_eq!(s, k1s + km1 + k2);
    let cdf = |t: f64| 1.0 - k1s * k2 / (lp - lm) * ((-lm * t).exp() / lm - (-lp * t).exp() / lp);
    let (_, p) = ks_statistic(gaps, cdf);
    assert!(p > 1e-4, "KS p = {p}");
}

/// Exact stochastic flux at clamped substrate (docs/references.md §6, derived there): each of
/// E_T = 10 enzymes is an independent two-state chain, so at stationarity #C ~ Binomial(10,
/// 0.5) for k₁S = 2, k₋₁ = 1, k₂ = 1, and the product flux is k₂·E_T·S/(K_M + S) = 5 per second.
#[test]
fn clamped_enzyme_flux_is_the_langmuir_form() {
    let n = net(
        "species E = 10\nspecies S = 2 clamped\nspecies C = 0\nspecies P = 0\n\
                 step bind E + S -> C @ 1\nstep unbind C -> E + S @ 1\nstep cat C -> E + P @ 1\n",
    );
    let spec = EnsembleSpec {
        replicates: 10_000,
        seed: 71,
        window: 20.0,
        keep_finals: true,
        ..EnsembleSpec::new(40.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    let c = n.species_index("C").unwrap();
    let xs: Vec<i64> = r.finals.as_ref().unwrap().iter().map(|x| x[c]).collect();
    let fin = &r.final_state[c];
    assert!(
        (fin.mean() - 5.0).abs() < 4.0 * (2.5f64 / 1e4).sqrt(),
        "mean C {}",
        fin.mean()
    );
    let b = Binomial::new(0.5, 10).unwrap();
    let pv = gof(&xs, |k| b.pmf(k as u64), 0, 10);
    assert!(pv > 1e-4, "chi-square p = {pv}");
    let cat = n.reaction_index("cat").unwrap();
    let rate = r.firings[cat].mean() / r.window_length();
    let se = r.firings[cat].stderr() / r.window_length();
    assert!((rate - 5.0).abs() < 4.0 * se, "flux {rate} ± {se}");
    let avg = &r.time_average[c];
    assert!((avg.mean() - 5.0).abs() < 4.0 * avg.stderr());
}
