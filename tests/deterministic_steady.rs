//! Steady states against hand formulas, and the reasons given when there is none.

use copyloop::deterministic::langmuir;
use copyloop::deterministic::{solve, Route, Stability, Steady, SteadyOptions};
use copyloop::network::{load_source, Network, Overrides};
use copyloop::Error;

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn steady(n: &Network) -> Steady {
    solve(n, &SteadyOptions::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn no_steady(n: &Network) -> String {
    match solve(n, &SteadyOptions::default()) {
        Ok(s) => panic!("expected no steady state, got {:?}", s.counts),
        Err(e) => {
            assert_eq!(e.exit_code(), 2, "{e}");
            assert!(matches!(e, Error::Usage(_)));
            e.to_string()
        }
    }
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

/// An enzyme fed by a constant inflow: 0 -> S (v_in), E + S <-> C (k1 = 0.01, k₋₁ = 1),
/// C -> E + P (k₂ = 2), P -> 0 (0.1). K = 300 molecules, V_max = k₂·E_T = 200 /s.
fn fed_enzyme(v_in: f64) -> Network {
    net(&format!(
        "species S = 0\nspecies E = 100\nspecies C = 0\nspecies P = 0\n\
         step feed 0 -> S @ {v_in}\nstep bind E + S <-> C @ 0.01, 1\n\
         step cat C -> E + P @ 2\nstep out P -> 0 @ 0.1\n"
    ))
}

// Briggs–Haldane rearranged (docs/references.md §6 [verified formula]): at steady state the turnover
// V_max·S/(K + S) equals the inflow, so S* = K·v_in/(V_max − v_in), C* = v_in/k₂ and
// P* = v_in/0.1.
#[test]
fn fed_enzyme_steady_state() {
    for v_in in [20.0, 100.0, 150.0, 190.0] {
        let n = fed_enzyme(v_in);
        let n_cat = n.reaction_index("cat").unwrap();
        let st = steady(&n);
        let s_star = 300.0 * v_in / (200.0 - v_in);
        assert!(
            rel(st.counts[0], s_star) < 1e-9,
            "S* {} vs {s_star}",
            st.counts[0]
        );
        assert!(rel(st.counts[2], v_in / 2.0) < 1e-9);
        assert!(rel(st.counts[3], v_in / 0.1) < 1e-9);
        assert!(rel(st.fluxes_per_s[n_cat], v_in) < 1e-9);
        assert!(st.stable());
        assert!(st.residual.relative < 1e-10);
        assert_eq!(st.method, Route::NewtonConfirmed);
        // E + C is conserved at 100.
        assert_eq!(st.totals.len(), 1);
        assert!(rel(st.totals[0], 100.0) < 1e-12);
    }
}

// v_in ≥ V_max: no steady state (the turnover saturates at V_max); reported as unbounded
// growth of S, and for v_in > V_max with the algebraic root's negative amounts and the
// conservation law E + C it would break.
#[test]
fn fed_enzyme_beyond_capacity_has_no_steady_state() {
    let msg = no_steady(&fed_enzyme(250.0));
    assert!(msg.contains("S grows without bound"), "{msg}");
    assert!(msg.contains("negative amount"), "{msg}");
    assert!(msg.contains("E + C = 100 molecules cannot hold"), "{msg}");
    let msg = no_steady(&fed_enzyme(200.0));
    assert!(msg.contains("S grows without bound"), "{msg}");
}

// A closed enzyme cycle E + S <-> C -> E + P, P -> S (k₃): at the steady state dC/dt = 0 makes
// the Langmuir form exact, C* = E_T·S*/(K + S*), and the total-QSSA root with L_T = S* + C*
// gives the same C* (Borghans, de Boer & Segel 1996 [M]). S* from hand algebra: with
// a = 1 + k₂/k₃, S + a·E_T·S/(K + S) = S_T, i.e. S² + (K + a·E_T − S_T)·S − S_T·K = 0.
#[test]
fn closed_enzyme_cycle_matches_langmuir_and_tqssa() {
    let n = net("species E = 50\nspecies S = 400\nspecies C = 0\nspecies P = 0\n\
                 step bind E + S <-> C @ 0.02, 1.5\nstep cat C -> E + P @ 2.5\nstep back P -> S @ 0.3\n");
    let st = steady(&n);
    let (k1, km1, k2, k3) = (0.02, 1.5, 2.5, 0.3);
    let (et, s_t) = (50.0, 400.0);
    let k = langmuir::k_half(k1, km1, k2);
    assert!(rel(k, 200.0) < 1e-15);
    let a = 1.0 + k2 / k3;
    let b = k + a * et - s_t;
    let s_star = (-b + (b * b + 4.0 * s_t * k).sqrt()) / 2.0;
    assert!(
        rel(st.counts[1], s_star) < 1e-10,
        "{} vs {s_star}",
        st.counts[1]
    );
    let c = st.counts[2];
    assert!(rel(c, et * langmuir::occupancy(s_star, k)) < 1e-10);
    assert!(rel(c, langmuir::tqssa_complex(et, s_star + c, k)) < 1e-10);
    // The motif-level prediction from the steady-state counts.
    assert_eq!(n.motifs.len(), 1);
    let p = langmuir::predict(&n, &n.motifs[0], &st.counts);
    let flux = st.fluxes_per_s[n.reaction_index("cat").unwrap()];
    assert!(rel(p.langmuir_per_s, flux) < 1e-10);
    assert!(rel(p.tqssa_per_s, flux) < 1e-10);
    assert!(rel(p.capacity_per_s, k2 * et) < 1e-14);
    assert!(rel(p.k_half, 200.0) < 1e-14);
}

// Receptor with clamped ligand, with a volume: occupancy L/(K_d + L) (Langmuir isotherm;
// docs/references.md §6, "same for pure binding"), K_d = k_off/k_on in concentration.
#[test]
fn clamped_ligand_receptor_in_molar_units() {
    let n = net("volume 2 fL\nspecies L = 30 nM clamped\nspecies R = 150\nspecies RL = 0\nspecies Q = 0\n\
                 step bind R + L <-> RL @ 1e7 /M/s, 0.2 /s\nstep sig RL -> RL + Q @ 2 /s\nstep deg Q -> 0 @ 0.2 /s\n");
    let st = steady(&n);
    let l = n.initial_concentrations()[0];
    let kd = 0.2 / 1e7;
    let rl = 150.0 * l / (kd + l);
    assert!(rel(st.counts[2], rl) < 1e-10);
    assert!(rel(st.conc[2], rl / n.omega) < 1e-10);
    assert!(rel(st.counts[3], 2.0 * rl / 0.2) < 1e-10);
    assert!(rel(st.fluxes_per_s[2], 2.0 * rl) < 1e-10);
    assert!(rel(st.rates[2], 2.0 * rl / n.omega) < 1e-10);
    let p = langmuir::predict(&n, &n.motifs[0], &st.counts);
    assert!(rel(p.langmuir_per_s, st.fluxes_per_s[2]) < 1e-10);
    assert_eq!(p.tqssa_per_s, p.langmuir_per_s);
}

// Gillespie 1977 Brusselator (docs/references.md §1b [M]): the fixed point (1000, 2000) has the
// Jacobian [[45, 25], [−50, −25]] (by hand), eigenvalues 10 ± 5i: an unstable focus, so from a
// nearby start the system oscillates and there is no steady state to report.
#[test]
fn brusselator_oscillates() {
    let src = |y1: u32, y2: u32| {
        format!(
            "species Y1 = {y1}\nspecies Y2 = {y2}\nstep s1 0 -> Y1 @ 5000\nstep s2 Y1 -> Y2 @ 50\n\
             step s3 2 Y1 + Y2 -> 3 Y1 @ 5e-5\nstep s4 Y1 -> 0 @ 5\n"
        )
    };
    let msg = no_steady(&net(&src(1000, 1000)));
    assert!(msg.contains("sustained oscillation"), "{msg}");
    assert!(msg.contains("unstable"), "{msg}");
    assert!(msg.contains("10 + 5i") || msg.contains("10 - 5i"), "{msg}");
}

// Lotka system (docs/references.md §1b): the fixed point (1000, 1000) is a centre (eigenvalues ±10i by
// hand: J = [[0, −10], [10, 0]]). Started there it is reported, not asymptotically stable; started
// elsewhere it cycles for ever.
#[test]
fn lotka_volterra_centre() {
    let src = |y1: u32, y2: u32| {
        format!(
            "species Y1 = {y1}\nspecies Y2 = {y2}\nstep a Y1 -> 2 Y1 @ 10\n\
             step b Y1 + Y2 -> 2 Y2 @ 0.01\nstep c Y2 -> 0 @ 10\n"
        )
    };
    let st = steady(&net(&src(1000, 1000)));
    assert_eq!(st.stability, Stability::Marginal);
    assert!(!st.stable());
    for z in &st.eigenvalues {
        assert!(z.re.abs() < 1e-9 && (z.im.abs() - 10.0).abs() < 1e-9, "{z}");
    }
    let msg = no_steady(&net(&src(1500, 800)));
    assert!(msg.contains("sustained oscillation"), "{msg}");
}

// A + B -> C with equal amounts approaches A = B = 0 only as 1/t; the steady state is still
// found (A = B = 0, C = 1000, the conservation totals A + C and B + C).
#[test]
fn slow_algebraic_approach_is_found() {
    let st = steady(&net(
        "species A = 1000\nspecies B = 1000\nspecies C = 0\nstep r A + B -> C @ 0.001\n",
    ));
    assert!(
        st.counts[0].abs() < 1.0 && st.counts[1].abs() < 1.0,
        "{:?}",
        st.counts
    );
    assert!((st.counts[2] - 1000.0).abs() < 1.0);
    // Unequal amounts: exponential approach, exact end point A = 400, B = 0, C = 600.
    let st = steady(&net(
        "species A = 1000\nspecies B = 600\nspecies C = 0\nstep r A + B -> C @ 0.001\n",
    ));
    assert!(rel(st.counts[0], 400.0) < 1e-10);
    assert!(st.counts[1].abs() < 1e-6);
    assert!(st.stable());
}

// Reasons for having no steady state.
#[test]
fn blow_up_and_negative_amounts_are_explained() {
    // 2A -> 3A: dA/dt = A²/2 blows up in finite time (closed form 1/(1/A0 − t/2)).
    let msg = no_steady(&net("species A = 10\nstep r 2 A -> 3 A @ 1\n"));
    assert!(
        msg.contains("blows up") || msg.contains("without bound"),
        "{msg}"
    );
    // Exponential growth A -> 2A.
    let msg = no_steady(&net("species A = 10\nstep r A -> 2 A @ 1\n"));
    assert!(msg.contains("A grows without bound"), "{msg}");
    // A law that keeps removing X at a fixed rate drives it negative.
    let msg = no_steady(&net(
        "species X = 10\nspecies Y = 0\nstep out X -> Y @ law 5\n",
    ));
    assert!(msg.contains("X becomes negative"), "{msg}");
}

// Nothing to do: every species clamped, or no step moves anything.
#[test]
fn trivial_networks() {
    let st = steady(&net(
        "species A = 10 clamped\nspecies B = 3 clamped\nstep r A -> B @ 1\n",
    ));
    assert!(st.stable());
    assert_eq!(st.counts, vec![10.0, 3.0]);
    assert!(rel(st.fluxes_per_s[0], 10.0) < 1e-15);
    let st = steady(&net(
        "species A = 10\nspecies B = 3\nstep r A + B -> A + B @ 1\n",
    ));
    assert_eq!(st.counts, vec![10.0, 3.0]);
    assert!(st.eigenvalues.is_empty());
}

// A start next to the answer (as in a sensitivity analysis) converges by Newton alone.
#[test]
fn near_guess_uses_newton_only() {
    let n = fed_enzyme(100.0);
    let base = steady(&n);
    let mut guess = base.conc.clone();
    guess[0] *= 1.01;
    let st = solve(&n, &SteadyOptions::near(guess)).unwrap();
    assert_eq!(st.method, Route::Newton);
    assert!(st.iterations <= 6, "{}", st.iterations);
    assert!(rel(st.counts[0], 300.0) < 1e-10);
}

mod random_networks {
    use super::*;
    use proptest::prelude::*;

    /// A random network over species A..D: each step has up to two reactant and two product
    /// molecules; its rate is mass action, or a law with sat, inhib or hill of one species.
    fn network() -> impl Strategy<Value = String> {
        let term = prop::collection::vec(0usize..4, 0..=2);
        let rate = (0usize..6, 0.01f64..10.0, 0usize..4, 1u32..300, 1u32..4);
        let step = (term.clone(), term, rate);
        (
            prop::collection::vec(0u32..200, 4),
            prop::collection::vec(step, 1..7),
        )
            .prop_map(|(init, steps)| {
                let names = ["A", "B", "C", "D"];
                let mut s = String::new();
                for (n, x) in names.iter().zip(&init) {
                    s.push_str(&format!("species {n} = {x}\n"));
                }
                for (k, (r, p, (kind, c, x, kk, h))) in steps.iter().enumerate() {
                    let side = |t: &[usize]| {
                        if t.is_empty() {
                            "0".to_string()
                        } else {
                            t.iter().map(|&i| names[i]).collect::<Vec<_>>().join(" + ")
                        }
                    };
                    let x = names[*x];
                    let rate = match kind {
                        0 => format!("law {c:.3} * 100 * sat({x}, {kk})"),
                        1 => format!("law {c:.3} * 100 * inhib({x}, {kk})"),
                        2 => format!("law {c:.3} * 100 * hill({x}, {kk}, {h})"),
                        _ => format!("{c:.4}"),
                    };
                    s.push_str(&format!("step r{k} {} -> {} @ {rate}\n", side(r), side(p)));
                }
                s
            })
    }

    proptest! {
        #![proptest_config(ProptestConfig {
            cases: 256,
            rng_seed: proptest::test_runner::RngSeed::Fixed(20240607),
            failure_persistence: None,
            ..ProptestConfig::default()
        })]
        // Whatever the network, the solver returns a steady state or a status-2 reason, never a
        // panic; a returned state is non-negative, keeps every conservation law and has a small
        // residual.
        #[test]
        fn never_panics_and_answers_are_steady(src in network()) {
            let n = load_source("p.crn", src.as_bytes(), &Overrides::default()).unwrap();
            let mut opts = SteadyOptions::default();
            opts.ode.max_steps = 20_000;
            match solve(&n, &opts) {
                Ok(st) => {
                    prop_assert!(st.counts.iter().all(|&x| x >= 0.0), "{:?}", st.counts);
                    prop_assert!(st.residual.relative < 1e-8, "{}", st.residual.relative);
                    let x0 = n.initial_state();
                    for (l, t) in n.conservation_laws.iter().zip(&st.totals) {
                        let t0: f64 = l.iter().zip(&x0).map(|(&c, &x)| (c * x) as f64).sum();
                        prop_assert!((t - t0).abs() <= 1e-9 * t0.abs().max(1.0));
                    }
                }
                Err(e) => prop_assert_eq!(e.exit_code(), 2, "{}", e),
            }
        }
    }
}

// A law that is negative at the steady state is refused as the direct method refuses it
// (`0 -> A @ 5`, `0 -> A @ law 3 - A`, `A -> 0 @ 1`: the algebraic state A = 4 makes the law
// −1), with the step's location; before, steady reported the state and a flux of −1.
#[test]
fn a_negative_law_at_the_steady_state_is_refused() {
    let n = copyloop::network::load_source(
        "neg.crn",
        b"species A = 0\nstep a 0 -> A @ 5\nstep b 0 -> A @ law 3 - A\nstep d A -> 0 @ 1\n",
        &copyloop::network::Overrides::default(),
    )
    .unwrap();
    let e = copyloop::deterministic::solve(&n, &Default::default()).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    let text = e.to_string();
    assert!(
        text.contains("neg.crn:3:1") && text.contains("step `b`"),
        "{text}"
    );
}
