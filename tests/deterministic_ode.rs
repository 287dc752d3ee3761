//! The ODE integrator against closed forms, invariants, published check points and a scipy
//! reference solution.

use copyloop::deterministic::{integrate, langmuir, OdeOptions, System};
use copyloop::network::{load, load_source, Network, Overrides};

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn tight() -> OdeOptions {
    OdeOptions {
        rtol: 1e-10,
        atol_molecules: 1e-10,
        ..OdeOptions::default()
    }
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

// First-order decay A -> B: A(t) = A0·e^(−kt) (McQuarrie 1967 §III.A [verified]; docs/references.md §2a,
// the mean of the binomial law equals the rate equation's solution).
#[test]
fn first_order_decay_matches_the_exponential() {
    let n = net("species A = 1000\nspecies B = 0\nstep r A -> B @ 0.5\n");
    let times = [0.5, 1.0, 2.0, 5.0, 20.0];
    let tr = integrate(&n, None, &times, &tight()).unwrap();
    for (t, x) in times.iter().zip(&tr.states) {
        let a = 1000.0 * (-0.5 * t).exp();
        assert!(rel(x[0], a) < 1e-8, "t = {t}: {} vs {a}", x[0]);
        assert!((x[0] + x[1] - 1000.0).abs() < 1e-9);
    }
    // docs/references.md §2a [C]: mean 606.5307 at t = 1.
    assert!((tr.states[1][0] - 606.5307).abs() < 1e-4);
}

// Isomerisation A <-> B: A(t) = N·p + (A0 − N·p)·e^(−(k1+k2)t), p = k2/(k1+k2)
// (docs/references.md §2c: k1 = 1, k2 = 3, N = 100, mean 78.383382 at t = 0.5 from A0 = 100 [C]).
#[test]
fn isomerisation_relaxes_to_binomial_mean() {
    let n = net("species A = 100\nspecies B = 0\nstep f A <-> B @ 1, 3\n");
    let times = [0.1, 0.5, 1.0, 3.0];
    let tr = integrate(&n, None, &times, &tight()).unwrap();
    for (t, x) in times.iter().zip(&tr.states) {
        let a = 75.0 + 25.0 * (-4.0 * t).exp();
        assert!(rel(x[0], a) < 1e-9, "t = {t}");
    }
    assert!((tr.states[1][0] - 78.383382).abs() < 1e-6);
}

// Michaelis–Menten motif with the substrate clamped: C obeys the linear equation
// dC/dt = k1·S·(E_T − C) − (k₋₁ + k₂)·C, so C(t) = C*(1 − e^(−λt)), λ = k1·S + k₋₁ + k₂,
// C* = E_T·S/(K + S), and P(t) = k₂·C*·(t − (1 − e^(−λt))/λ): at long times product is made
// at the constant rate V·S/(K + S) (Briggs & Haldane 1925 [M]; docs/references.md §6 [verified
// formula]).
#[test]
fn clamped_substrate_makes_product_at_the_langmuir_rate() {
    let n = net("volume 1 fL\nspecies E = 100\nspecies S = 5 uM clamped\nspecies C = 0\n\
                 species P = 0\nstep bind E + S <-> C @ 1e6 /M/s, 3 /s\nstep cat C -> E + P @ 2 /s\n");
    let s = n.initial_concentrations()[1];
    let et = 100.0 / n.omega;
    let (k1, km1, k2) = (1e6, 3.0, 2.0);
    let lambda = k1 * s + km1 + k2;
    let kk = (km1 + k2) / k1;
    let cstar = et * s / (kk + s);
    let times = [0.05, 0.2, 1.0, 5.0, 30.0];
    let tr = integrate(&n, None, &times, &tight()).unwrap();
    for (t, x) in times.iter().zip(&tr.states) {
        let c = cstar * (1.0 - (-lambda * t).exp());
        let p = k2 * cstar * (t - (1.0 - (-lambda * t).exp()) / lambda);
        assert!(rel(x[2], c) < 1e-8, "C at t = {t}: {} vs {c}", x[2]);
        assert!(rel(x[3], p) < 1e-8, "P at t = {t}: {} vs {p}", x[3]);
        assert_eq!(x[1], s, "clamped S moved");
    }
    // Product rate at t = 30 (λt ≈ 50): V·S/(K + S) with V = k2·E_T.
    let sys = System::new(&n);
    let y = sys.restrict(&tr.states[4]);
    let v = sys.rates(&y);
    let want = k2 * et * s / (kk + s);
    assert!(rel(v[2], want) < 1e-10);
}

// Lotka system of Gillespie 1977 (docs/references.md §1b [M], parameters): Y1 -> 2 Y1 (c1·X̄ = 10),
// Y1 + Y2 -> 2 Y2 (c2 = 0.01), Y2 -> 0 (c3 = 10). The rate equations conserve
// H = c2(Y1 + Y2) − c3·ln Y1 − c1X̄·ln Y2 (derived in docs/references.md §1b). Started off the fixed
// point (1000, 1000) so that it cycles; relative drift of H over t = 0..10 must stay below 1e-8.
#[test]
fn lotka_volterra_invariant_is_kept() {
    let n = net(
        "species Y1 = 1500\nspecies Y2 = 800\nstep a Y1 -> 2 Y1 @ 10\n\
                 step b Y1 + Y2 -> 2 Y2 @ 0.01\nstep c Y2 -> 0 @ 10\n",
    );
    let h = |x: &[f64]| 0.01 * (x[0] + x[1]) - 10.0 * x[0].ln() - 10.0 * x[1].ln();
    let times: Vec<f64> = (0..=200).map(|i| i as f64 * 0.05).collect();
    let opts = OdeOptions {
        rtol: 1e-11,
        atol_molecules: 1e-9,
        ..OdeOptions::default()
    };
    let tr = integrate(&n, None, &times, &opts).unwrap();
    let h0 = h(&tr.states[0]);
    let mut lo = f64::INFINITY;
    let mut hi: f64 = 0.0;
    for x in &tr.states {
        assert!(rel(h(x), h0) < 1e-8, "H drifted: {} vs {h0}", h(x));
        lo = lo.min(x[0]);
        hi = hi.max(x[0]);
    }
    assert!(hi / lo > 1.5, "the orbit must actually cycle ({lo}..{hi})");
}

// Brusselator and Oregonator of Gillespie 1977 (docs/references.md §1b [M] parameters, [C] steady
// states): with continuum mass action the right-hand side vanishes at the listed point, to
// rounding; with the discrete propensities x(x−1) it does not (Brusselator: 49950 vs 50000).
#[test]
fn brusselator_and_oregonator_rates_vanish_at_their_fixed_points() {
    let bruss = net("species Y1 = 1000\nspecies Y2 = 2000\nstep s1 0 -> Y1 @ 5000\n\
                     step s2 Y1 -> Y2 @ 50\nstep s3 2 Y1 + Y2 -> 3 Y1 @ 5e-5\nstep s4 Y1 -> 0 @ 5\n");
    let oreg = net("species Y1 = 500\nspecies Y2 = 1000\nspecies Y3 = 2000\n\
                    step o1 Y2 -> Y1 @ 2\nstep o2 Y1 + Y2 -> 0 @ 0.1\nstep o3 Y1 -> 2 Y1 + Y3 @ 104\n\
                    step o4 2 Y1 -> 0 @ 0.016\nstep o5 Y3 -> Y2 @ 26\n");
    for n in [&bruss, &oreg] {
        let sys = System::new(n);
        let y = sys.initial();
        let v = sys.rates(&y);
        let vmax = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        assert!(vmax >= 5e3);
        for f in sys.rhs(&y) {
            assert!(f.abs() < 1e-9 * vmax, "{f}");
        }
    }
    // The discrete propensities differ: 5e-5/2 · 1000·999 · 2000 = 49950.
    let x = bruss.initial_state();
    let a: Vec<f64> = bruss.propensities().iter().map(|p| p.eval(&x)).collect();
    assert!((a[2] - 49950.0).abs() < 1e-6);
}

// Full Michaelis–Menten mass action vs docs/references.md §6 [C]: k1 = 100, k₋₁ = 1, k₂ = 1, E_T = 10,
// S_T = 1 (molecule units, Ω = 1): P(0.5) = 0.392501, P(1) = 0.631340, P(2) = 0.864239. The
// total-QSSA reduction dS̄/dt = −k₂·C(S̄) with C from the quadratic (Borghans, de Boer & Segel
// 1996 [M]; Tzafriri 2003 [M]) gives 0.392812, 0.631336, 0.864099 and stays within 1e-3 of the
// full ODE after t = 0.5; the standard QSSA (K = 0.02, V = 10) does not (P(0.5) = 1.000000).
#[test]
fn michaelis_menten_full_tqssa_and_sqssa() {
    let full = net(
        "species E = 10\nspecies S = 1\nspecies C = 0\nspecies P = 0\n\
                    step bind E + S <-> C @ 100, 1\nstep cat C -> E + P @ 1\n",
    );
    let tq = net("species Sb = 1\nspecies P = 0\n\
                  step r Sb -> P @ law 2 * 10 * Sb / ((10 + 0.02 + Sb) + ((10 + 0.02 + Sb)^2 - 4 * 10 * Sb)^0.5)\n");
    let sq = net("species S = 1\nspecies P = 0\nstep r S -> P @ law 10 * sat(S, 0.02)\n");
    let times = [0.5, 1.0, 2.0];
    let opts = tight();
    let p_full: Vec<f64> = integrate(&full, None, &times, &opts)
        .unwrap()
        .states
        .iter()
        .map(|x| x[3])
        .collect();
    let p_tq: Vec<f64> = integrate(&tq, None, &times, &opts)
        .unwrap()
        .states
        .iter()
        .map(|x| x[1])
        .collect();
    let p_sq: Vec<f64> = integrate(&sq, None, &times, &opts)
        .unwrap()
        .states
        .iter()
        .map(|x| x[1])
        .collect();
    let want_full = [0.392501, 0.631340, 0.864239];
    let want_tq = [0.392812, 0.631336, 0.864099];
    for k in 0..3 {
        assert!(
            (p_full[k] - want_full[k]).abs() < 1e-6,
            "full {k}: {}",
            p_full[k]
        );
        assert!(
            (p_tq[k] - want_tq[k]).abs() < 1e-6,
            "tQSSA {k}: {}",
            p_tq[k]
        );
        assert!((p_tq[k] - p_full[k]).abs() < 1e-3);
    }
    assert!((p_sq[0] - 1.0).abs() < 1e-6);
    // The law written in the file is the library's tQSSA flux k₂·C(X_T, S̄, K).
    let sys = System::new(&tq);
    for sb in [1.0, 0.6, 0.1, 1e-3] {
        let v = sys.rates(&[sb, 1.0 - sb])[0];
        let want = langmuir::tqssa_flux(1.0, 10.0, sb, 0.02);
        assert!(rel(v, want) < 1e-12, "{v} vs {want}");
    }
    assert!((p_sq[0] - p_full[0]).abs() > 0.5);
}

// docs/references.md §6 [C], second regime: k1 = 1, k₋₁ = 1, k₂ = 1, E_T = 0.01, S_T = 1 gives
// P(50) = 0.156207. Run in molecules with every amount ×100 and k1/100 (the same equations in
// concentration), so P(50)/100 must match.
#[test]
fn michaelis_menten_low_enzyme_regime() {
    let n = net(
        "species E = 1\nspecies S = 100\nspecies C = 0\nspecies P = 0\n\
                 step bind E + S <-> C @ 0.01, 1\nstep cat C -> E + P @ 1\n",
    );
    let tr = integrate(&n, None, &[50.0], &tight()).unwrap();
    assert!((tr.states[0][3] / 100.0 - 0.156207).abs() < 1e-6);
}

// A stiff network (binding at ~1e3 /s, turnover 1e-4 /s, clearance 1e-3 /s; rate constants
// six orders apart) against scipy.integrate.solve_ivp, Radau IIA at rtol 1e-13 with the
// analytic Jacobian (a general-purpose reference library). The reference values and the script
// that made them are in tests/reference/ (stiff_enzyme.py → stiff_enzyme.json); Radau and BDF
// agree there to 4e-12 relative. Tolerance here: 1e-7 relative to each value, plus 1e-6
// molecules.
#[test]
fn stiff_network_matches_scipy_radau() {
    let dir = env!("CARGO_MANIFEST_DIR");
    let n = load(
        &format!("{dir}/tests/reference/stiff_enzyme.crn"),
        &Overrides::default(),
    )
    .unwrap();
    let reference: serde_json::Value =
        serde_json::from_str(include_str!("reference/stiff_enzyme.json")).unwrap();
    let times: Vec<f64> = reference["times"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t.as_f64().unwrap())
        .collect();
    let names: Vec<&str> = reference["species"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.as_str().unwrap())
        .collect();
    let idx: Vec<usize> = names.iter().map(|s| n.species_index(s).unwrap()).collect();
    let opts = OdeOptions {
        rtol: 1e-10,
        atol_molecules: 1e-9,
        ..OdeOptions::default()
    };
    let tr = integrate(&n, None, &times, &opts).unwrap();
    let floor = 1e-6 / n.omega;
    let mut worst: f64 = 0.0;
    for (k, row) in reference["values"].as_array().unwrap().iter().enumerate() {
        for (s, want) in row.as_array().unwrap().iter().enumerate() {
            let want = want.as_f64().unwrap();
            let got = tr.states[k][idx[s]];
            let err = (got - want).abs() / (1e-7 * want.abs() + floor);
            worst = worst.max(err);
            assert!(
                err <= 1.0,
                "{} at t = {}: {got} vs {want}",
                names[s],
                times[k]
            );
        }
    }
    eprintln!(
        "stiff network: {} accepted, {} rejected steps to t = 1e5 s; worst error {worst:.3} of tolerance",
        tr.accepted_steps, tr.rejected_steps
    );
    // The clamped X never moves.
    let x = n.species_index("X").unwrap();
    assert!(tr
        .states
        .iter()
        .all(|s| s[x] == n.initial_concentrations()[x]));
}

// Bad requests are errors, never panics.
#[test]
fn bad_times_and_blow_up_are_errors() {
    let n = net("species A = 10\nstep r A -> 0 @ 1\n");
    assert!(integrate(&n, None, &[1.0, 0.5], &OdeOptions::default()).is_err());
    assert!(integrate(&n, None, &[f64::NAN], &OdeOptions::default()).is_err());
    // 2A -> 3A: dA/dt = A²/2 blows up at t = 2/A0 = 0.2 (closed form 1/(1/A0 − t/2)).
    let n = net("species A = 10\nstep r 2 A -> 3 A @ 1\n");
    let tr = integrate(&n, None, &[0.1], &tight()).unwrap();
    assert!(rel(tr.states[0][0], 1.0 / (0.1 - 0.05)) < 1e-8);
    let e = integrate(&n, None, &[1.0], &OdeOptions::default()).unwrap_err();
    assert_eq!(e.exit_code(), 2);
}
