//! The linear noise approximation against exact stationary variances.

use copyloop::deterministic::{lna, solve, SteadyOptions};
use copyloop::network::{load_source, Network, Overrides};

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn lna_of(n: &Network) -> lna::Lna {
    let st = solve(n, &SteadyOptions::default()).unwrap_or_else(|e| panic!("{e}"));
    lna::stationary(n, &st).unwrap_or_else(|e| panic!("{e}"))
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

// Immigration–death 0 -> A (k), A -> 0 (γ): J = −γ, D = 2k, Var = k/γ = mean, Poisson
// (docs/references.md §9 [C]; McQuarrie 1967 [verified]; Elf & Ehrenberg 2003 [verified]).
#[test]
fn immigration_death_is_poisson() {
    let l = lna_of(&net(
        "species A = 0\nstep in 0 -> A @ 10\nstep out A -> 0 @ 0.1\n",
    ));
    assert!(rel(l.mean[0], 100.0) < 1e-10);
    assert!(rel(l.variance[0], 100.0) < 1e-10);
    assert!(rel(l.fano[0], 1.0) < 1e-10);
    assert!(rel(l.cv[0], 0.1) < 1e-10);
    // With a volume: inflow 1 nM/s into 1 fL, so the mean is 10 nM = 6.02214076 molecules and
    // the count variance equals it (Ω enters D as a = Ω·v).
    let l = lna_of(&net(
        "volume 1 fL\nspecies A = 0 nM\nstep in 0 -> A @ 1 nM/s\nstep out A -> 0 @ 0.1 /s\n",
    ));
    assert!(rel(l.mean[0], 6.022_140_76) < 1e-10);
    assert!(rel(l.variance[0], 6.022_140_76) < 1e-10);
}

// Isomerisation A <-> B, k1 = 1, k2 = 3, N = 100: A ~ Binomial(N, p), p = k2/(k1 + k2) = 0.75,
// Var(A) = N·p(1 − p) = 18.75, Cov(A, B) = −18.75 (docs/references.md §2c, §9 [C]); the conservation
// law A + B = N is handled through the link matrix.
#[test]
fn isomerisation_is_binomial() {
    let l = lna_of(&net(
        "species A = 100\nspecies B = 0\nstep f A <-> B @ 1, 3\n",
    ));
    assert!(rel(l.mean[0], 75.0) < 1e-10);
    assert!(rel(l.variance[0], 18.75) < 1e-10);
    assert!(rel(l.variance[1], 18.75) < 1e-10);
    assert!(rel(l.covariance[(0, 1)], -18.75) < 1e-10);
}

// Two-stage expression 0 -> M (k_m), M -> 0 (g_m), M -> M + P (k_p), P -> 0 (g_p):
// <M> = k_m/g_m, <P> = k_m·k_p/(g_m·g_p), Fano(M) = 1, Fano(P) = 1 + k_p/(g_m + g_p)
// (Thattai & van Oudenaarden 2001 [M]; Paulsson 2004 [verified title]; docs/references.md §9):
// k_m = 1, g_m = 0.1, k_p = 10, g_p = 1 gives <P> = 100, Fano(P) = 10.0909...
#[test]
fn two_stage_expression_fano() {
    let l = lna_of(&net(
        "species M = 0\nspecies P = 0\nstep tx 0 -> M @ 1\nstep dm M -> 0 @ 0.1\n\
                         step tl M -> M + P @ 10\nstep dp P -> 0 @ 1\n",
    ));
    assert!(rel(l.mean[0], 10.0) < 1e-10);
    assert!(rel(l.mean[1], 100.0) < 1e-10);
    assert!(rel(l.fano[0], 1.0) < 1e-10);
    assert!(rel(l.fano[1], 1.0 + 10.0 / 1.1) < 1e-10);
    assert!((l.fano[1] - 10.0909).abs() < 1e-4);
}

// Receptor with the ligand clamped: every receptor is an independent two-state chain, so the
// bound count is exactly Binomial(R_T, θ), θ = L/(K_d + L) (docs/references.md §6, derived there);
// the clamped species has no variance.
#[test]
fn clamped_ligand_binding_is_binomial() {
    let l = lna_of(&net(
        "species L = 40 clamped\nspecies R = 20\nspecies RL = 0\n\
                         step b R + L <-> RL @ 0.01, 0.2\n",
    ));
    let theta: f64 = 40.0 / (20.0 + 40.0);
    assert!(rel(l.mean[2], 20.0 * theta) < 1e-10);
    assert!(rel(l.variance[2], 20.0 * theta * (1.0 - theta)) < 1e-10);
    assert_eq!(l.variance[0], 0.0);
    assert!(l.covariance.row(0).iter().all(|&x| x == 0.0));
}

// Nonlinear check (docs/references.md §2d, §9 (iii)): reversible binding A + B <-> C is not linear, so
// the LNA is only asymptotically right; its error in the variance is of relative order 1/N
// (van Kampen's system-size expansion [M]). The exact stationary law comes from detailed
// balance, P(C+1)/P(C) = c_on(A0 − C)(B0 − C)/(c_off(C + 1)), computed here. With N = 2000
// molecules the LNA variance must lie within 1 % of the exact one, and ten times the molecules
// must bring it at least five times closer.
#[test]
fn reversible_binding_approaches_the_exact_variance() {
    let mut errors = Vec::new();
    for scale in [1.0, 10.0] {
        let (a0, b0) = (2000.0 * scale, 1500.0 * scale);
        let (c_on, c_off) = (0.001 / scale, 1.0);
        let src = format!(
            "species A = {a0}\nspecies B = {b0}\nspecies C = 0\nstep b A + B <-> C @ {c_on}, {c_off}\n"
        );
        let l = lna_of(&net(&src));
        let nmax = b0 as usize;
        let mut logp = vec![0.0f64; nmax + 1];
        for c in 0..nmax {
            let cf = c as f64;
            logp[c + 1] = logp[c] + (c_on * (a0 - cf) * (b0 - cf) / (c_off * (cf + 1.0))).ln();
        }
        let top = logp.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        let w: Vec<f64> = logp.iter().map(|x| (x - top).exp()).collect();
        let z: f64 = w.iter().sum();
        let mean: f64 = w.iter().enumerate().map(|(c, p)| c as f64 * p).sum::<f64>() / z;
        let var: f64 = w
            .iter()
            .enumerate()
            .map(|(c, p)| (c as f64 - mean).powi(2) * p)
            .sum::<f64>()
            / z;
        let err = rel(l.variance[2], var);
        assert!(
            err < 0.01,
            "N scale {scale}: LNA {} vs exact {var}",
            l.variance[2]
        );
        // The LNA mean is the rate-equation value; it differs from the exact mean by O(1).
        assert!((l.mean[2] - mean).abs() < 2.0);
        errors.push(err);
    }
    eprintln!("LNA variance relative error at N = 2000, 20000: {errors:?}");
    // Relative order 1/N: ten times the molecules, at least five times closer.
    assert!(errors[1] < 0.2 * errors[0], "{errors:?}");
}

// No stationary law around a centre or an unstable point: an error with status 2.
#[test]
fn lna_needs_a_stable_steady_state() {
    let n = net(
        "species Y1 = 1000\nspecies Y2 = 1000\nstep a Y1 -> 2 Y1 @ 10\n\
                 step b Y1 + Y2 -> 2 Y2 @ 0.01\nstep c Y2 -> 0 @ 10\n",
    );
    let st = solve(&n, &SteadyOptions::default()).unwrap();
    let e = lna::stationary(&n, &st).unwrap_err();
    assert_eq!(e.exit_code(), 2);
}
