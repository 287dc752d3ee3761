//! Doses, infusions, compartments, triggered events and time-varying laws in the exact
//! (direct-method) kernel, against exact distributions; and the breakpoint and trigger rules of
//! tau-leaping.
//!
//! Acceptance rules (as in kernel_exact.rs): fixed seeds; means within 4 standard errors with
//! the exact SD; variances within 4 standard errors from the exact fourth moment; chi-square
//! goodness of fit passed when p > 1e-4. Every exact law here is a thinning of independent
//! molecules or a Poisson count (immigration–death with a time-dependent input has a Poisson
//! law with the deterministic mean: Kingman 1993, *Poisson Processes*, §2 and §5 [M]; binomial
//! survival of independent first-order molecules [C]).

mod support;

use copyloop::ensemble::{self, EnsembleSpec, Method};
use copyloop::kernel::observe::RecordSpec;
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::tau::{Switch, Tau};
use copyloop::kernel::{CompiledKernel, Direct, Observer, Recorder};
use copyloop::network::{load_source, Network, Overrides, AVOGADRO};
use copyloop::stats::Welford;
use statrs::distribution::{Binomial, Discrete, Poisson};
use support::stats::chi_square_gof;

fn net(src: &str) -> Network {
    load_source("test.crn", src.as_bytes(), &Overrides::default()).expect("test network")
}

/// The counts of species `name` at the grid points of [0, t_end] (`points` of them) over
/// `replicates` direct-method runs: `out[p][r]`.
fn grid_samples(
    n: &Network,
    name: &str,
    t_end: f64,
    points: usize,
    replicates: u64,
    seed: u64,
) -> Vec<Vec<i64>> {
    let k = CompiledKernel::new(n).unwrap();
    let i = n.species_index(name).unwrap();
    let mut d = Direct::new(&k);
    let spec = RecordSpec {
        t_end,
        grid_points: points,
        window: 0.0,
    };
    let mut rec = Recorder::new(spec, &k);
    let mut out = vec![Vec::with_capacity(replicates as usize); points];
    for r in 0..replicates {
        d.run(&k.x0, t_end, &mut replicate_rng(seed, r), &mut rec)
            .unwrap();
        for (p, col) in out.iter_mut().enumerate() {
            col.push(rec.grid_state(p)[i]);
        }
    }
    out
}

fn moments(xs: &[i64]) -> Welford {
    xs.iter().map(|&x| x as f64).collect()
}

/// Chi-square goodness of fit of integer samples to `pmf` on 0..=hi, the rest of the
/// probability in one tail bin.
fn gof(samples: &[i64], pmf: impl Fn(i64) -> f64, hi: i64) -> f64 {
    let mut observed = vec![0u64; (hi + 2) as usize];
    let last = observed.len() - 1;
    for &x in samples {
        assert!(x >= 0);
        observed[(x as usize).min(last)] += 1;
    }
    let mut probs: Vec<f64> = (0..=hi).map(&pmf).collect();
    probs.push((1.0 - probs.iter().sum::<f64>()).max(0.0));
    let total: f64 = probs.iter().sum();
    probs.iter_mut().for_each(|p| *p /= total);
    // Merge sparse bins (expected count < 5) into their neighbour, as chi-square needs.
    let n = samples.len() as f64;
    let (mut o2, mut p2) = (Vec::new(), Vec::new());
    let (mut o_acc, mut p_acc) = (0u64, 0.0);
    for (o, p) in observed.iter().zip(&probs) {
        o_acc += o;
        p_acc += p;
        if p_acc * n >= 5.0 {
            o2.push(o_acc);
            p2.push(p_acc);
            o_acc = 0;
            p_acc = 0.0;
        }
    }
    if let (Some(lo), Some(lp)) = (o2.last_mut(), p2.last_mut()) {
        *lo += o_acc;
        *lp += p_acc;
    }
    chi_square_gof(&o2, &p2).expect("chi-square").p_value
}

/// Mean within 4 SE of `mean` (SE from the exact variance), sample variance within 4 SE of
/// `var` (SE from the exact fourth central moment `mu4`: Var(s²) ≈ (μ₄ − σ⁴)/n).
fn check_moments(what: &str, xs: &[i64], mean: f64, var: f64, mu4: f64) {
    let w = moments(xs);
    let n = xs.len() as f64;
    assert!(
        (w.mean() - mean).abs() <= 4.0 * (var / n).sqrt() + 1e-12,
        "{what}: mean {} against {mean}",
        w.mean()
    );
    let se_var = ((mu4 - var * var) / n).sqrt();
    assert!(
        (w.variance() - var).abs() <= 4.0 * se_var + 1e-12,
        "{what}: variance {} against {var} (SE {se_var})",
        w.variance()
    );
}

/// Binomial(n, p): mean, variance, fourth central moment npq(1 + 3(n − 2)pq) (standard
/// handbook formulas).
fn binomial_moments(n: f64, p: f64) -> (f64, f64, f64) {
    let pq = p * (1.0 - p);
    (n * p, n * pq, n * pq * (1.0 + 3.0 * (n - 2.0) * pq))
}

/// Poisson(λ): mean λ, variance λ, fourth central moment λ(1 + 3λ) (standard handbook).
fn poisson_moments(l: f64) -> (f64, f64, f64) {
    (l, l, l * (1.0 + 3.0 * l))
}

/// One-compartment IV bolus with first-order elimination (standard pharmacokinetics, Gibaldi
/// & Perrier 1982, *Pharmacokinetics* 2nd ed., ch. 1 [M]): mean D·e^(−k(t − t_d)); each of the
/// D molecules survives independently with probability e^(−k(t − t_d)), so the count is
/// binomial [C]. D = 500, k = 0.05 /s, dose at 10 s; before it the compartment is empty.
#[test]
fn iv_bolus_is_binomial_after_the_dose() {
    let n = net("species X = 0\nstep elim X -> 0 @ 0.05\ndose X += 500 molecules at 10 s\n");
    let grid = grid_samples(&n, "X", 70.0, 8, 4000, 101);
    // Grid 0, 10, …, 70 s.
    assert!(grid[0].iter().all(|&x| x == 0));
    assert!(
        grid[1].iter().all(|&x| x == 500),
        "the dose at 10 s is in the sample at 10 s"
    );
    for (p, col) in grid.iter().enumerate().skip(2) {
        let t = 10.0 * p as f64;
        let q = (-0.05 * (t - 10.0)).exp();
        let (m, v, m4) = binomial_moments(500.0, q);
        check_moments(&format!("bolus t = {t}"), col, m, v, m4);
    }
    let b = Binomial::new((-0.05f64 * 30.0).exp(), 500).unwrap();
    let pv = gof(&grid[4], |k| b.pmf(k as u64), 500);
    assert!(pv > 1e-4, "bolus chi-square p = {pv}");
}

/// Repeated bolus: superposition Σ D·e^(−k(t − tᵢ)) of the doses given by t (linear
/// kinetics, Gibaldi & Perrier 1982 [M]); the survivors of each dose are independent
/// binomials, so the variance is Σ D·pᵢ(1 − pᵢ) [C]. Doses of 300 at 0, 20, 40, 60 s.
#[test]
fn repeated_bolus_superposes() {
    let n = net("species X = 0\nstep elim X -> 0 @ 0.05\n\
         dose X += 300 molecules at 0 s every 20 s times 4\n");
    let grid = grid_samples(&n, "X", 75.0, 16, 4000, 102);
    for (p, col) in grid.iter().enumerate() {
        let t = 5.0 * p as f64;
        let (mut m, mut v, mut m4_sum) = (0.0, 0.0, 0.0);
        for ti in [0.0, 20.0, 40.0, 60.0] {
            if ti <= t {
                let (a, b, _) = binomial_moments(300.0, (-0.05 * (t - ti)).exp());
                m += a;
                v += b;
                // Fourth cumulant of a binomial: npq(1 − 6pq); cumulants of independent
                // parts add, μ₄ = κ₄ + 3σ⁴.
                let q = (-0.05f64 * (t - ti)).exp();
                m4_sum += 300.0 * q * (1.0 - q) * (1.0 - 6.0 * q * (1.0 - q));
            }
        }
        let mu4 = m4_sum + 3.0 * v * v;
        check_moments(&format!("repeated bolus t = {t}"), col, m, v, mu4);
    }
}

/// Constant-rate infusion into a compartment with first-order elimination: immigration–death
/// from zero, so the count is Poisson with mean (R/k)(1 − e^(−k(t − t₁))) during the infusion
/// and that mean times e^(−k(t − t₂)) after it (Kingman 1993 [M]; mean: Gibaldi & Perrier 1982
/// [M]). R = 2 nM/min in 1 fL = 2e-9/60 M/s × N_A·1e-15 L molecules/s, k = 0.05 /s, infusion
/// from 10 s to 60 s.
#[test]
fn infusion_gives_a_poisson_count() {
    let n = net(
        "volume 1 fL\nspecies X = 0 nM\nstep elim X -> 0 @ 0.05 /s\n\
         infuse X at 200 nM/min from 10 s to 60 s\n",
    );
    let r = 200e-9 / 60.0 * AVOGADRO * 1e-15;
    let j = n.reaction_index("infuse_X").unwrap();
    assert_eq!(n.reactions[j].order(), 0);
    let grid = grid_samples(&n, "X", 100.0, 11, 4000, 103);
    for (p, col) in grid.iter().enumerate() {
        let t = 10.0 * p as f64;
        let k = 0.05;
        let mean = if t <= 10.0 {
            0.0
        } else if t <= 60.0 {
            r / k * (1.0 - (-k * (t - 10.0)).exp())
        } else {
            r / k * (1.0 - (-k * 50.0f64).exp()) * (-k * (t - 60.0)).exp()
        };
        if mean == 0.0 {
            assert!(col.iter().all(|&x| x == 0), "nothing before the infusion");
            continue;
        }
        let (m, v, m4) = poisson_moments(mean);
        check_moments(&format!("infusion t = {t}"), col, m, v, m4);
        if p == 4 || p == 8 {
            let pois = Poisson::new(mean).unwrap();
            let pv = gof(col, |x| pois.pmf(x as u64), (mean * 3.0) as i64 + 20);
            assert!(pv > 1e-4, "infusion chi-square p = {pv} at t = {t}");
        }
    }
}

/// Two compartments with transport both ways (first order, c = k, molecules moved, not
/// concentrations): A + B is conserved exactly; each molecule is an independent two-state
/// Markov chain, so A(t) ~ Binomial(N, p(t)) with p(t) = k_b/(k_o + k_b) +
/// k_o/(k_o + k_b)·e^(−(k_o + k_b)t) [C]; at equilibrium the amounts stand in the ratio of the
/// rates (A/B = k_b/k_o) and the concentrations follow from the volumes.
#[test]
fn transport_conserves_molecules_and_equilibrates_by_the_rates() {
    let src = "compartment plasma = 2 fL\ncompartment tissue = 0.5 fL\n\
               species A in plasma = 1000 molecules\nspecies B in tissue = 0 molecules\n\
               step out A -> B @ 0.2 /s\nstep back B -> A @ 0.05 /s\n";
    let n = net(src);
    assert!(n.reactions.iter().all(|r| r.transport));
    assert_eq!(n.reactions[0].stochastic_constant(), Some(0.2));
    let spec = EnsembleSpec {
        replicates: 4000,
        seed: 104,
        grid_points: 11,
        keep_finals: true,
        ..EnsembleSpec::new(100.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    for f in r.finals.as_ref().unwrap() {
        assert_eq!(f[0] + f[1], 1000, "molecules are conserved exactly");
    }
    let (ko, kb) = (0.2, 0.05);
    let finals: Vec<i64> = r.finals.as_ref().unwrap().iter().map(|f| f[0]).collect();
    let (m, v, m4) = binomial_moments(1000.0, kb / (ko + kb));
    check_moments("A at equilibrium", &finals, m, v, m4);
    // Amount ratio kb/ko = 0.25 within the error of the means.
    let (ma, mb) = (r.final_state[0].mean(), r.final_state[1].mean());
    let se = (v / 4000.0).sqrt();
    assert!((ma / mb - 0.25).abs() < 4.0 * se * (1.0 / mb + ma / (mb * mb)));
    // Transient at t = 10 s (grid point 1).
    let p10 = kb / (ko + kb) + ko / (ko + kb) * (-(ko + kb) * 10.0f64).exp();
    let w = &r.grid[1][0];
    let (m, v, _) = binomial_moments(1000.0, p10);
    assert!((w.mean() - m).abs() < 4.0 * (v / 4000.0).sqrt());
    // Concentrations in each species' own compartment: count / (N_A·V_c).
    let doc = copyloop::report::simulate::json(&n, &r);
    let ca = doc["grid"]["A"]["concentration_mean"][10].as_f64().unwrap();
    let cb = doc["grid"]["B"]["concentration_mean"][10].as_f64().unwrap();
    let gm = |i: usize| r.grid[10][i].mean();
    assert!((ca - gm(0) / (AVOGADRO * 2e-15)).abs() < 1e-12 * ca);
    assert!((cb - gm(1) / (AVOGADRO * 0.5e-15)).abs() < 1e-12 * cb);
    assert_eq!(doc["grid"]["B"]["concentration_unit"], "M");
    assert_eq!(doc["grid"]["B"]["compartment"], "tissue");
}

/// A bimolecular step in a compartment of volume V uses that volume for k ↔ c
/// (c = k/(N_A·V) for A + B, Gillespie 1977 [verified]): the network in a named compartment
/// of 2 fL beside another compartment gives exactly the trajectories, and so the
/// concentrations, of the same network in one volume of 2 fL (same seed, same channels).
#[test]
fn a_compartment_behaves_as_its_own_volume() {
    let one = net(
        "volume 2 fL\nspecies A = 50 nM\nspecies B = 30 nM\nspecies C = 0 nM\n\
                   step bind A + B -> C @ 1e6 /M/s\nstep split C -> A + B @ 0.5 /s\n",
    );
    let two = net("compartment cyto = 2 fL\ncompartment lumen = 7 fL\n\
         species A in cyto = 50 nM\nspecies B in cyto = 30 nM\nspecies C in cyto = 0 nM\n\
         species D in lumen = 10 nM\n\
         step bind A + B -> C @ 1e6 /M/s\nstep split C -> A + B @ 0.5 /s\n");
    let c = 1e6 / (AVOGADRO * 2e-15);
    for n in [&one, &two] {
        let got = n.reactions[0].stochastic_constant().unwrap();
        assert!((got - c).abs() < 1e-15 * c, "c = {got}, want {c}");
    }
    assert_eq!(
        two.species[3].initial,
        (10e-9 * AVOGADRO * 7e-15f64).round() as i64
    );
    let spec = EnsembleSpec {
        replicates: 50,
        seed: 105,
        grid_points: 21,
        ..EnsembleSpec::new(5.0)
    };
    let (r1, r2) = (
        ensemble::run(&one, &spec).unwrap(),
        ensemble::run(&two, &spec).unwrap(),
    );
    let (d1, d2) = (
        copyloop::report::simulate::json(&one, &r1),
        copyloop::report::simulate::json(&two, &r2),
    );
    for s in ["A", "B", "C"] {
        assert_eq!(d1["grid"][s]["mean"], d2["grid"][s]["mean"]);
        assert_eq!(
            d1["grid"][s]["concentration_mean"],
            d2["grid"][s]["concentration_mean"]
        );
    }
}

/// Probabilities of N mod m for N ~ Poisson(λ) (exact sums of the Poisson pmf [C]).
fn poisson_mod(lambda: f64, m: usize) -> Vec<f64> {
    let pois = Poisson::new(lambda).unwrap();
    let mut p = vec![0.0; m];
    for k in 0..(lambda * 10.0 + 200.0) as u64 {
        p[(k as usize) % m] += pois.pmf(k);
    }
    p
}

/// Immigration with a triggered reset, `when X >= 8 : X = 0`: every arrival adds one and
/// the reset fires at the arrival that makes 8, so X(t) = N(t) mod 8 with N(t) ~ Poisson(λt)
/// exactly; its mean, variance and whole law follow from the Poisson pmf [C].
#[test]
fn triggered_reset_is_a_poisson_count_modulo_the_threshold() {
    let n = net("species X = 0\nstep in 0 -> X @ 3\nwhen X >= 8 : X = 0\n");
    let grid = grid_samples(&n, "X", 10.0, 5, 6000, 106);
    for (p, col) in grid.iter().enumerate().skip(1) {
        let t = 2.5 * p as f64;
        let probs = poisson_mod(3.0 * t, 8);
        let mean: f64 = probs.iter().enumerate().map(|(k, p)| k as f64 * p).sum();
        let var: f64 = probs
            .iter()
            .enumerate()
            .map(|(k, p)| (k as f64 - mean).powi(2) * p)
            .sum();
        let mu4: f64 = probs
            .iter()
            .enumerate()
            .map(|(k, p)| (k as f64 - mean).powi(4) * p)
            .sum();
        assert!(col.iter().all(|&x| (0..8).contains(&x)));
        check_moments(&format!("reset t = {t}"), col, mean, var, mu4);
        let pv = gof(col, |k| probs.get(k as usize).copied().unwrap_or(0.0), 7);
        assert!(pv > 1e-4, "reset chi-square p = {pv} at t = {t}");
    }
}

/// Records every state change and firing of one run.
#[derive(Default)]
struct Log {
    /// (time, species, before, change)
    moves: Vec<(f64, usize, i64, i64)>,
    /// (time, channel, times)
    fires: Vec<(f64, usize, u64)>,
}

impl Observer for Log {
    fn fire(&mut self, t: f64, j: usize, k: u64) {
        self.fires.push((t, j, k));
    }
    fn moved(&mut self, t: f64, i: usize, before: i64, dx: i64) {
        if dx != 0 {
            self.moves.push((t, i, before, dx));
        }
    }
}

/// Tau-leaping and `auto` with a trigger: a leap that would carry X past the threshold is
/// redone shorter, so the reset always happens at the state where X first reaches 40 (the
/// assignment's `before` is exactly 40), whatever the leap sizes elsewhere.
#[test]
fn tau_fires_a_trigger_at_the_state_that_makes_it_true() {
    let n = net("species X = 0\nstep in 0 -> X @ 2000\nwhen X >= 40 : X = 0\n");
    let k = CompiledKernel::new(&n).unwrap();
    for switch in [Switch::Tau, Switch::Auto] {
        let mut tau = Tau::new(&k, &n, 0.03, switch);
        let mut log = Log::default();
        tau.run(&k.x0, 2.0, &mut replicate_rng(107, 0), &mut log)
            .unwrap();
        let resets: Vec<_> = log.moves.iter().filter(|m| m.3 < 0).collect();
        assert!(resets.len() > 50, "{} resets", resets.len());
        for &&(t, _, before, dx) in &resets {
            assert_eq!((before, dx), (40, -40), "reset at t = {t}");
        }
        assert!(
            log.moves.iter().all(|m| m.2 + m.3 <= 40),
            "X never passes 40"
        );
    }
}

/// Tau-leaping never leaps across a breakpoint: an infusion on for 10 s ≤ t < 20 s fires
/// only inside its window (a leap across its end would report firings after 20 s), and the
/// number it fires is Poisson with mean R·10 s (Kingman 1993 [M]).
#[test]
fn tau_never_leaps_across_a_breakpoint() {
    let n = net(
        "species X = 0\nstep elim X -> 0 @ 0.5\ninfuse X at 100 molecules/s from 10 s to 20 s\n",
    );
    let k = CompiledKernel::new(&n).unwrap();
    let j = n.reaction_index("infuse_X").unwrap();
    let mut total = Welford::new();
    for r in 0..400 {
        let mut tau = Tau::new(&k, &n, 0.03, Switch::Tau);
        let mut log = Log::default();
        tau.run(&k.x0, 30.0, &mut replicate_rng(108, r), &mut log)
            .unwrap();
        let mut fired = 0;
        for &(t, c, times) in &log.fires {
            if c == j {
                assert!((10.0..=20.0).contains(&t), "infusion fired at {t}");
                fired += times;
            }
        }
        total.push(fired as f64);
    }
    assert!(
        (total.mean() - 1000.0).abs() < 4.0 * (1000.0f64 / 400.0).sqrt(),
        "{}",
        total.mean()
    );
}

/// A pulsatile secretion law, `law R·pulse(time, 60 s, 15 s)`, with first-order clearance:
/// the input is piecewise constant, so H(t) is Poisson with the mean of the linear ODE solved
/// piece by piece, m ← m·e^(−kΔ) + (u/k)(1 − e^(−kΔ)) over each constant stretch [C]
/// (Kingman 1993 [M] for the Poisson law).
#[test]
fn pulsatile_secretion_is_poisson_with_the_piecewise_mean() {
    let n = net(
        "species H = 0\nstep sec 0 -> H @ law 40 molecules/s * pulse(time, 60 s, 15 s)\n\
                 step clear H -> 0 @ 0.1\n",
    );
    let grid = grid_samples(&n, "H", 150.0, 16, 4000, 109);
    let mean_at = |t: f64| {
        let (mut m, mut s) = (0.0, 0.0);
        while s < t {
            let phase = s % 60.0;
            let (u, end) = if phase < 15.0 {
                (40.0, s - phase + 15.0)
            } else {
                (0.0, s - phase + 60.0)
            };
            let e = end.min(t);
            let d = e - s;
            m = m * (-0.1 * d).exp() + u / 0.1 * (1.0 - (-0.1 * d).exp());
            s = e;
        }
        m
    };
    for (p, col) in grid.iter().enumerate().skip(1) {
        let t = 10.0 * p as f64;
        let (m, v, m4) = poisson_moments(mean_at(t));
        check_moments(&format!("pulse t = {t}"), col, m, v, m4);
    }
}

/// A daily-rhythm law, rate a·(1 + sin(2πt/P)), simulated by thinning: immigration–death
/// with a time-varying input, so the count is Poisson with mean
/// m(t) = (a/k)(1 − e^(−kt)) + a·(k·sin ωt − ω·cos ωt + ω·e^(−kt))/(k² + ω²) (the solution of
/// dm/dt = a(1 + sin ωt) − k·m, m(0) = 0, by variation of constants [C]).
#[test]
fn smoothly_varying_input_is_exact_by_thinning() {
    let n = net("species X = 0\nparam P = 10 s\n\
                 step make 0 -> X @ law 5 molecules/s * (1 + sin(2 * pi * time / P))\n\
                 step out X -> 0 @ 0.5\n");
    let grid = grid_samples(&n, "X", 20.0, 9, 6000, 110);
    let (a, k, w) = (5.0, 0.5, 2.0 * std::f64::consts::PI / 10.0);
    for (p, col) in grid.iter().enumerate().skip(1) {
        let t = 2.5 * p as f64;
        let m = a / k * (1.0 - (-k * t).exp())
            + a * (k * (w * t).sin() - w * (w * t).cos() + w * (-k * t).exp()) / (k * k + w * w);
        let (m, v, m4) = poisson_moments(m);
        check_moments(&format!("sin input t = {t}"), col, m, v, m4);
        if p == 3 || p == 8 {
            let pois = Poisson::new(m).unwrap();
            let pv = gof(col, |x| pois.pmf(x as u64), (m * 3.0) as i64 + 20);
            assert!(pv > 1e-4, "sin chi-square p = {pv} at t = {t}");
        }
    }
}

/// An event that changes a rate constant: elimination at k₁ = 0.1 /s until 10 s, then at
/// k₂ = 0.5 /s; each molecule survives to t > 10 s with probability e^(−10k₁ − (t − 10)k₂),
/// so the count is binomial [C]. The param's value is recorded on the grid.
#[test]
fn an_event_can_change_a_rate_constant() {
    let n = net("species X = 1000\nparam k = 0.1 /s\nstep d X -> 0 @ k\n\
                 when time >= 10 s : k = 0.5 /s\n");
    assert!(n.params[0].varies);
    let grid = grid_samples(&n, "X", 14.0, 8, 4000, 111);
    for (p, col) in grid.iter().enumerate() {
        let t = 2.0 * p as f64;
        let q = if t <= 10.0 {
            (-0.1 * t).exp()
        } else {
            (-1.0 - 0.5 * (t - 10.0)).exp()
        };
        let (m, v, m4) = binomial_moments(1000.0, q);
        if v > 0.0 {
            check_moments(&format!("rate change t = {t}"), col, m, v, m4);
        }
    }
    let spec = EnsembleSpec {
        replicates: 16,
        grid_points: 8,
        ..EnsembleSpec::new(14.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    assert_eq!(r.varying_params, vec![0]);
    let k: Vec<f64> = r.grid_params.iter().map(|row| row[0].mean()).collect();
    // The event at 10 s is in the sample at 10 s (grid point 5).
    assert_eq!(k[..5], [0.1; 5]);
    assert_eq!(k[5..], [0.5; 3]);
}

/// `tau` and `auto` agree with the exact bolus law where they run exact steps near the dose:
/// with ε small enough that every step is exact, the grid is the exact law again (binomial,
/// as in the bolus test).
#[test]
fn auto_with_breakpoints_keeps_the_exact_law() {
    let n = net("species X = 0\nstep elim X -> 0 @ 0.05\ndose X += 500 molecules at 10 s\n");
    let spec = EnsembleSpec {
        replicates: 4000,
        seed: 112,
        grid_points: 8,
        method: Method::Auto { epsilon: 0.03 },
        ..EnsembleSpec::new(70.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    for p in 2..8 {
        let t = 10.0 * p as f64;
        let (m, v, _) = binomial_moments(500.0, (-0.05 * (t - 10.0)).exp());
        let w = &r.grid[p][0];
        assert!(
            (w.mean() - m).abs() < 4.0 * (v / 4000.0).sqrt(),
            "auto bolus t = {t}: {} against {m}",
            w.mean()
        );
    }
    assert_eq!(r.grid[1][0].mean(), 500.0);
}
