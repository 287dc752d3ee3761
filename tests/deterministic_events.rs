//! The ODE engine with doses, infusions, pulses, smoothly time-varying laws, compartments and
//! triggered events, against closed forms of linear kinetics (each solved by hand; sources
//! named per test). Tolerances are set by the integrator's own rtol 1e-8 / atol 1e-6 molecules:
//! a relative 1e-6 leaves room for the accumulated error of a few hundred steps.

use copyloop::deterministic::{integrate, OdeOptions};
use copyloop::network::{load_source, Network, Overrides};

fn net(src: &str) -> Network {
    load_source("test.crn", src.as_bytes(), &Overrides::default()).expect("test network")
}

/// Counts of species `name` at `times`.
fn counts(n: &Network, name: &str, times: &[f64]) -> Vec<f64> {
    let tr = integrate(n, None, times, &OdeOptions::default()).unwrap();
    let i = n.species_index(name).unwrap();
    tr.states.iter().map(|y| y[i] * n.omega).collect()
}

fn close(what: &str, got: f64, want: f64, rel: f64) {
    assert!(
        (got - want).abs() <= rel * want.abs().max(1.0),
        "{what}: {got} against {want}"
    );
}

/// Repeated IV bolus with first-order elimination: A(t) = Σ_{tᵢ ≤ t} D·e^(−k(t − tᵢ))
/// (linear superposition; Gibaldi & Perrier 1982, *Pharmacokinetics* 2nd ed. [M]); the
/// state at a dose time includes that dose.
#[test]
fn repeated_bolus_matches_superposition() {
    let n = net("species X = 0\nstep elim X -> 0 @ 0.05\n\
                 dose X += 300 molecules at 5 s every 20 s until 65 s\n");
    let times: Vec<f64> = (0..=16).map(|k| 5.0 * k as f64).collect();
    let got = counts(&n, "X", &times);
    for (&t, &g) in times.iter().zip(&got) {
        let want: f64 = [5.0, 25.0, 45.0, 65.0]
            .iter()
            .filter(|&&ti| ti <= t)
            .map(|ti| 300.0 * (-0.05 * (t - ti)).exp())
            .sum();
        close(&format!("bolus t = {t}"), g, want, 1e-6);
    }
}

/// Zero-order infusion R from t₁ to t₂ with elimination k: A = (R/k)(1 − e^(−k(t − t₁))) while
/// it runs, then that value decaying as e^(−k(t − t₂)) (Gibaldi & Perrier 1982 [M]).
#[test]
fn infusion_matches_its_closed_form() {
    let n = net("species X = 0\nstep elim X -> 0 @ 0.1\n\
                 infuse X at 50 molecules/s from 10 s to 40 s\n");
    let times: Vec<f64> = (0..=20).map(|k| 4.0 * k as f64).collect();
    let got = counts(&n, "X", &times);
    let (r, k) = (50.0, 0.1);
    for (&t, &g) in times.iter().zip(&got) {
        let want = if t <= 10.0 {
            0.0
        } else if t <= 40.0 {
            r / k * (1.0 - (-k * (t - 10.0)).exp())
        } else {
            r / k * (1.0 - (-k * 30.0f64).exp()) * (-k * (t - 40.0)).exp()
        };
        close(&format!("infusion t = {t}"), g, want, 1e-6);
    }
}

/// Periodic pulses of secretion, `pulse(time − 5 s, 30 s, 10 s)`, with clearance: the exact
/// solution of the linear ODE stretch by stretch, m ← m·e^(−kΔ) + (u/k)(1 − e^(−kΔ)) [C].
#[test]
fn periodic_pulses_match_the_piecewise_solution() {
    let n = net(
        "species H = 0\nstep sec 0 -> H @ law 20 molecules/s * pulse(time - 5 s, 30 s, 10 s)\n\
                 step clear H -> 0 @ 0.2\n",
    );
    let times: Vec<f64> = (0..=40).map(|k| 3.0 * k as f64).collect();
    let got = counts(&n, "H", &times);
    let k = 0.2;
    let exact = |t: f64| {
        let (mut m, mut s) = (0.0, 0.0);
        while s < t {
            let phase = (s - 5.0).rem_euclid(30.0);
            let (u, left) = if phase < 10.0 {
                (20.0, 10.0 - phase)
            } else {
                (0.0, 30.0 - phase)
            };
            let d = left.min(t - s);
            m = m * (-k * d).exp() + u / k * (1.0 - (-k * d).exp());
            s += d;
        }
        m
    };
    for (&t, &g) in times.iter().zip(&got) {
        close(&format!("pulse t = {t}"), g, exact(t), 1e-6);
    }
}

/// A daily rhythm, input a·(1 + sin ωt) with clearance k: m(t) = (a/k)(1 − e^(−kt)) +
/// a(k sin ωt − ω cos ωt + ω e^(−kt))/(k² + ω²) (variation of constants [C]); the stages of
/// the non-autonomous RODAS4 see the clock.
#[test]
fn sinusoidal_input_matches_its_closed_form() {
    let n = net("species X = 0\n\
                 step make 0 -> X @ law 5 molecules/s * (1 + sin(2 * pi * time / 10 s))\n\
                 step out X -> 0 @ 0.5\n");
    let times: Vec<f64> = (0..=30).map(|k| k as f64).collect();
    let got = counts(&n, "X", &times);
    let (a, k, w) = (5.0, 0.5, 2.0 * std::f64::consts::PI / 10.0);
    for (&t, &g) in times.iter().zip(&got) {
        let want = a / k * (1.0 - (-k * t).exp())
            + a * (k * (w * t).sin() - w * (w * t).cos() + w * (-k * t).exp()) / (k * k + w * w);
        close(&format!("sin t = {t}"), g, want, 1e-6);
    }
}

/// Two compartments with transport both ways: amounts A + B conserved; A(t) = N·(p∞ +
/// (1 − p∞)e^(−(k_o + k_b)t)) with p∞ = k_b/(k_o + k_b) (linear two-state kinetics [C]);
/// concentrations are amounts over each compartment's own Ω.
#[test]
fn transport_between_compartments_conserves_amounts() {
    let n = net("compartment plasma = 2 fL\ncompartment tissue = 0.5 fL\n\
         species A in plasma = 1000 molecules\nspecies B in tissue = 0 molecules\n\
         step out A -> B @ 0.2 /s\nstep back B -> A @ 0.05 /s\n");
    let times: Vec<f64> = (0..=10).map(|k| 3.0 * k as f64).collect();
    let a = counts(&n, "A", &times);
    let b = counts(&n, "B", &times);
    let p = 0.05 / 0.25;
    for k in 0..times.len() {
        let t = times[k];
        close(&format!("A + B t = {t}"), a[k] + b[k], 1000.0, 1e-9);
        let want = 1000.0 * (p + (1.0 - p) * (-0.25 * t).exp());
        close(&format!("A t = {t}"), a[k], want, 1e-6);
    }
    let tr = integrate(&n, None, &times, &OdeOptions::default()).unwrap();
    let doc = copyloop::report::simulate::ode_json(&n, &tr, 30.0, 0.0);
    let cb = doc["grid"]["B"]["concentration_mean"][10].as_f64().unwrap();
    close("B concentration", cb, b[10] / n.species_omega(1), 1e-12);
    assert!(
        doc["grid"]["B"].get("sd").is_none(),
        "no sd in an ODE report"
    );
    assert_eq!(doc["amount_unit"], "molecules");
}

/// A state-triggered reset in the ODE: X' = r until X reaches 10, then X = 0, so X(t) =
/// r·(t mod 10/r), a sawtooth [C]; the crossings are found by root finding on the dense
/// output, so the resets happen at 10/r, 20/r, … to the integrator's accuracy.
#[test]
fn triggered_reset_is_a_sawtooth() {
    let n = net("species X = 0\nstep in 0 -> X @ 2\nwhen X >= 10 : X = 0\n");
    let times: Vec<f64> = (0..=23).map(|k| 0.37 + 1.3 * k as f64).collect();
    let got = counts(&n, "X", &times);
    for (&t, &g) in times.iter().zip(&got) {
        let want = 2.0 * (t % 5.0);
        close(&format!("sawtooth t = {t}"), g, want, 1e-6);
    }
}

/// An event that changes a rate constant at a fixed time: decay at k₁ until 10 s, then at k₂:
/// N·e^(−k₁ min(t, 10) − k₂ max(t − 10, 0)) [C]; the param's value is reported on the grid.
#[test]
fn an_event_changes_a_rate_constant() {
    let n = net("species X = 1000\nparam k = 0.1 /s\nstep d X -> 0 @ k\n\
                 when time >= 10 s : k = 0.5 /s\n");
    let times: Vec<f64> = (0..=10).map(|k| 2.0 * k as f64).collect();
    let tr = integrate(&n, None, &times, &OdeOptions::default()).unwrap();
    for (k, &t) in times.iter().enumerate() {
        let want = 1000.0 * (-0.1 * t.min(10.0) - 0.5 * (t - 10.0).max(0.0)).exp();
        close(&format!("X t = {t}"), tr.states[k][0] * n.omega, want, 1e-6);
        let kv = tr.params[k][0];
        assert_eq!(kv, if t >= 10.0 { 0.5 } else { 0.1 }, "k at t = {t}");
    }
}

/// An event that fires at the start (`at start`): a condition true at t = 0 fires only when the
/// line says so (the `.crn` rule; SBML's initialValue = false).
#[test]
fn at_start_fires_at_time_zero() {
    let with = net("species X = 5\nstep d X -> 0 @ 0.1\nwhen X > 1 : X = 100 at start\n");
    let without = net("species X = 5\nstep d X -> 0 @ 0.1\nwhen X > 1 : X = 100\n");
    let t = [0.0, 1.0];
    close("at start", counts(&with, "X", &t)[0], 100.0, 1e-12);
    close(
        "at start t=1",
        counts(&with, "X", &t)[1],
        100.0 * (-0.1f64).exp(),
        1e-6,
    );
    close("not at start", counts(&without, "X", &t)[0], 5.0, 1e-12);
}

/// `steady` refuses a network driven in time, and names a periodic drive a stationary cycle.
#[test]
fn steady_refuses_time_forced_networks() {
    use copyloop::deterministic::{solve, SteadyOptions};
    let dosed = net("species X = 0\nstep elim X -> 0 @ 0.05\ndose X += 5 molecules at 1 s\n");
    let e = solve(&dosed, &SteadyOptions::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("driven in time") && e.contains("dose"), "{e}");
    let pulsed = net(
        "species H = 0\nstep s 0 -> H @ law 2 molecules/s * pulse(time, 60 s, 5 s)\n\
                      step c H -> 0 @ 0.1\n",
    );
    let e = solve(&pulsed, &SteadyOptions::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("stationary cycle"), "{e}");
    let plain = net("species H = 0\nstep s 0 -> H @ 2\nstep c H -> 0 @ 0.1\n");
    assert!(solve(&plain, &SteadyOptions::default()).is_ok());
}
