//! The reconciler against exact results: clamped-substrate Michaelis–Menten flux, ligand
//! depletion (total QSSA), low copy number, non-stationary windows, sensitivities and fits.

mod support;

use copyloop::network::{load_source, Network, Overrides};
use copyloop::reconcile::{self, parse_observation, CauseKind, Options, Verdict};

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn opts(replicates: u64, t_end: f64, burn_in: f64) -> Options {
    Options {
        replicates,
        t_end: Some(t_end),
        burn_in: Some(burn_in),
        seed: 7,
        ..Options::default()
    }
}

// With the substrate clamped, each enzyme is an independent two-state chain, so the mean
// product flux is exactly k2·E_T·S/(K + S) at any copy number (Kou et al. 2005 [verified];
// docs/references.md §6, derived [C]). Checked over S/K from 0.1 to 10 with one enzyme and with 100.
#[test]
fn clamped_substrate_flux_is_michaelis_menten_exactly() {
    // k1 = 0.01 per molecule per s, k_-1 = 1, k2 = 1: K = 200 molecules.
    for (et, s) in [
        (1, 20),
        (1, 200),
        (1, 2000),
        (100, 20),
        (100, 200),
        (100, 2000),
    ] {
        let src = format!(
            "species E = {et}\nspecies S = {s} clamped\nspecies C = 0\nspecies P = 0\n\
             step bind E + S <-> C @ 0.01, 1\nstep cat C -> E + P @ 1\nstep out P -> 0 @ 0.1\n"
        );
        let n = net(&src);
        let r = reconcile::reconcile(&n, &opts(200, 220.0, 20.0)).unwrap();
        let m = &r.motifs[0];
        let exact = et as f64 * s as f64 / (200.0 + s as f64);
        assert!((m.predicted.langmuir_per_s - exact).abs() < 1e-9 * exact);
        let z = (m.ensemble.mean_per_s - exact) / m.ensemble.stderr_per_s;
        assert!(
            z.abs() < 4.0,
            "E_T {et}, S {s}: ensemble {} vs {exact} (z = {z})",
            m.ensemble.mean_per_s
        );
        assert!((m.predicted.ode_per_s - exact).abs() < 1e-6 * exact);
    }
}

// Receptor R + L <-> RL with RL -> RL + Q: Langmuir occupancy L/(K_d + L), K_d = k_off/k_on
// (Langmuir isotherm; common practice); with L clamped the flux k_sig·R_T·θ is exact in mean.
#[test]
fn receptor_signal_flux() {
    let n = net(
        "species L = 40 clamped\nspecies R = 50\nspecies RL = 0\nspecies Q = 0\n\
         step bind R + L <-> RL @ 0.005, 0.2\nstep sig RL -> RL + Q @ 2\nstep deg Q -> 0 @ 1\n",
    );
    let r = reconcile::reconcile(&n, &opts(200, 110.0, 10.0)).unwrap();
    let m = &r.motifs[0];
    assert!((m.k_half - 40.0).abs() < 1e-12); // 0.2/0.005
    let exact = 2.0 * 50.0 * 0.5;
    let z = (m.ensemble.mean_per_s - exact) / m.ensemble.stderr_per_s;
    assert!(z.abs() < 4.0, "{} vs {exact}", m.ensemble.mean_per_s);
}

// Enzyme comparable to substrate + K, substrate fed and cleared: the Langmuir (sQSSA) form
// with total ligand fails, since X_T/(L_T + K) is not ≪ 1 (Segel & Slemrod 1989 [M]); the
// total-QSSA complex (Borghans, de Boer & Segel 1996 [M]) holds. Large counts keep the
// stochastic correction well below the standard error.
#[test]
fn ligand_depletion_deviates_from_langmuir_not_tqssa() {
    let n = net("species E = 2000\nspecies S = 0\nspecies C = 0\n\
         step feed 0 -> S @ 500\nstep wash S -> 0 @ 0.5\n\
         step bind E + S <-> C @ 0.001, 0.5\nstep cat C -> E @ 0.5\n");
    let r = reconcile::reconcile(&n, &opts(40, 60.0, 20.0)).unwrap();
    let m = &r.motifs[0];
    assert!(m.qssa_parameter > 0.5, "{}", m.qssa_parameter);
    assert_eq!(m.verdict, Verdict::Differs);
    let depletion = m
        .verdicts
        .langmuir
        .causes
        .iter()
        .find(|c| c.cause == CauseKind::LigandDepletion)
        .expect("ligand depletion is named");
    // Its expected size, the total-QSSA form's difference from the Langmuir form, explains
    // the observed difference to within a few per cent of it.
    let d = m.verdicts.langmuir.relative_difference;
    assert!(
        (depletion.expected_relative_error - d).abs() < 0.1 * d.abs(),
        "{} vs {d}",
        depletion.expected_relative_error
    );
    assert_eq!(m.verdicts.tqssa.as_ref().unwrap().verdict, Verdict::Agrees);
    let t = m.predicted.tqssa_per_s.unwrap();
    assert!(
        (m.ensemble.mean_per_s - t).abs() < 4.0 * m.ensemble.stderr_per_s + 1e-3 * t,
        "{} vs {t}",
        m.ensemble.mean_per_s
    );
    assert!(
        (m.ensemble.mean_per_s - m.predicted.langmuir_per_s).abs() > 20.0 * m.ensemble.stderr_per_s
    );
}

// One enzyme fed at k_in: flux balance gives an exact mean turnover flux k_in whatever the
// noise (docs/references.md §8 [C]), while the tQSSA complex at the mean total substrate over-predicts
// it by a few per cent: a significant difference, which the report explains by low copy
// number with an expected size of the same sign and order (the second-order term of the
// saturating occupancy under the ligand's fluctuations, Jensen's inequality).
#[test]
fn low_copy_number_is_flagged() {
    let n = net("species E = 1\nspecies S = 0\nspecies C = 0\n\
         step feed 0 -> S @ 0.5\nstep bind E + S <-> C @ 0.1, 0.1\nstep cat C -> E @ 1\n");
    let r = reconcile::reconcile(&n, &opts(400, 1050.0, 50.0)).unwrap();
    let m = &r.motifs[0];
    let z = (m.ensemble.mean_per_s - 0.5) / m.ensemble.stderr_per_s;
    assert!(
        z.abs() < 4.0,
        "flux balance: {} vs 0.5",
        m.ensemble.mean_per_s
    );
    let t = m.verdicts.tqssa.as_ref().unwrap();
    assert!(t.significant && t.relative_difference < 0.0, "{t:?}");
    let c = t
        .causes
        .iter()
        .find(|c| c.cause == CauseKind::LowCopyNumber)
        .expect("low copy number is named");
    let ratio = c.expected_relative_error / t.relative_difference;
    assert!(ratio > 0.5 && ratio < 2.0, "{t:?}");
}

// A run measured while still relaxing from an empty start: its window halves disagree.
#[test]
fn non_stationary_window_is_flagged() {
    let n = net("species E = 100\nspecies S = 0\nspecies C = 0\n\
         step feed 0 -> S @ 20\nstep bind E + S <-> C @ 0.01, 1\nstep cat C -> E @ 1\n");
    let o = Options {
        from_initial: true,
        ..opts(100, 20.0, 0.0)
    };
    let r = reconcile::reconcile(&n, &o).unwrap();
    let m = &r.motifs[0];
    assert_ne!(m.verdicts.ode.verdict, Verdict::Agrees);
    assert!(m.halves_z.abs() > 4.0);
    assert!(
        m.verdicts
            .ode
            .causes
            .iter()
            .any(|c| c.cause == CauseKind::NotStationary),
        "{:?}",
        m.verdicts.ode.causes
    );
}

// An enzyme fed by constant inflow v: S* = K·v/(V_max − v) (Briggs–Haldane rearranged,
// docs/references.md §6). Then d ln S*/d ln v = V_max/(V_max − v) and
// d ln S*/d ln kcat = kcat/(koff + kcat) − V_max/(V_max − v) (differentiating the formula).
#[test]
fn sensitivities_match_the_closed_form() {
    let n = net("species E = 10\nspecies S = 0\nspecies C = 0\n\
         param v = 4\nparam kon = 0.01\nparam koff = 1\nparam kcat = 1\n\
         step feed 0 -> S @ v\nstep bind E + S <-> C @ kon, koff\nstep cat C -> E @ kcat\n");
    let o = parse_observation("S=300+-10", &n).unwrap();
    let r = reconcile::reconcile(
        &n,
        &Options {
            observations: vec![o],
            ..opts(20, 60.0, 10.0)
        },
    )
    .unwrap();
    let obs = &r.observations[0];
    let (vmax, v, k) = (10.0, 4.0, 200.0);
    assert!((obs.deterministic - k * v / (vmax - v)).abs() < 1e-6);
    let s: std::collections::HashMap<_, _> = obs.sensitivities.iter().cloned().collect();
    assert!((s["v"] - vmax / (vmax - v)).abs() < 1e-5, "{}", s["v"]);
    assert!(
        (s["kcat"] - (0.5 - vmax / (vmax - v))).abs() < 1e-5,
        "{}",
        s["kcat"]
    );
    assert!((s["kon"] + 1.0).abs() < 1e-5);
    assert!((s["koff"] - 0.5).abs() < 1e-5);
}

// --observe and --fit on the bundled feedback loop: a synthetic observation made with ki
// doubled is matched by fitting ki from the file's value.
#[test]
fn fit_recovers_the_param_behind_a_synthetic_observation() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/reactions/gland_loop.crn");
    let n = copyloop::network::load(path, &Overrides::default()).unwrap();
    let ki = n.params.iter().find(|p| p.name == "ki").unwrap().value;
    let changed = n
        .with_overrides(&Overrides::default().set(
            "ki",
            copyloop::network::Override::Quantity(copyloop::network::Quantity::new(
                2.0 * ki.value,
                ki.dim,
            )),
        ))
        .unwrap();
    let st = copyloop::deterministic::solve(&changed, &Default::default()).unwrap();
    let h = n.species_index("H").unwrap();
    let text = format!("H={} molecules±20 molecules", st.counts[h]);
    let o = parse_observation(&text, &n).unwrap();
    let r = reconcile::reconcile(
        &n,
        &Options {
            observations: vec![o],
            fit: Some("ki".into()),
            replicates: 16,
            ..opts(16, 600.0, 100.0)
        },
    )
    .unwrap();
    let f = r.fit.unwrap();
    let v = f.value.expect("a value exists");
    assert!(
        (v - 2.0 * ki.value).abs() < 1e-6 * ki.value,
        "{v} vs {}",
        2.0 * ki.value
    );
    assert!(f.confirmation.is_some());
    // ki lowers feedback strength: the level rises with ki.
    let s = &r.observations[0].sensitivities;
    assert!(s.iter().find(|(p, _)| p == "ki").unwrap().1 > 0.0);
}

// --precision adds reproducible batches until the interval is narrow enough: the half-width of
// a mean of R values falls as 1/√R (common practice), so a tighter target takes more batches.
#[test]
fn precision_adds_batches_until_the_interval_is_narrow() {
    let n = net("species E = 5\nspecies S = 40 clamped\nspecies C = 0\n\
         step bind E + S <-> C @ 0.01, 1\nstep cat C -> E @ 1\n");
    let o = Options {
        precision: Some(0.01),
        ..opts(10, 30.0, 5.0)
    };
    let r = reconcile::reconcile(&n, &o).unwrap();
    let m = &r.motifs[0];
    assert!(r.replicates > 10 && r.replicates <= o.max_replicates);
    let half = (m.ensemble.ci95[1] - m.ensemble.ci95[0]) / 2.0;
    assert!(half <= 0.01 * m.ensemble.mean_per_s);
    assert_eq!(m.ensemble.replicates, r.replicates);
    // The batches are the replicates 0..N of one ensemble: running N at once gives the same.
    let once = reconcile::reconcile(&n, &opts(r.replicates, 30.0, 5.0)).unwrap();
    let again = once.motifs[0].ensemble.mean_per_s;
    assert!((again - m.ensemble.mean_per_s).abs() < 1e-9 * m.ensemble.mean_per_s);
}

// Motifs in series: a transporter feeding an enzyme feeding a receptor, reconciled end to end
// against the deterministic steady state. With about 20 copies of each carrier the stochastic
// mean may differ from the ODE by a correction of order 1/N (linear noise approximation; van
// Kampen 1976 [M]), so the allowance is 4 SE plus 5 %.
#[test]
fn motifs_in_series_are_reconciled_end_to_end() {
    let n = net(
        "species Aout = 200 clamped\nspecies T = 20\nspecies TA = 0\nspecies A = 0\n\
         species E = 20\nspecies EA = 0\nspecies P = 0\nspecies R = 20\nspecies RP = 0\nspecies Q = 0\n\
         step tb T + Aout <-> TA @ 0.01, 1\nstep tt TA -> T + A @ 1\n\
         step eb E + A <-> EA @ 0.01, 1\nstep ec EA -> E + P @ 2\n\
         step rb R + P <-> RP @ 0.01, 1\nstep rs RP -> RP + Q @ 1\n\
         step pd P -> 0 @ 0.2\nstep qd Q -> 0 @ 1\n",
    );
    let r = reconcile::reconcile(&n, &opts(100, 120.0, 20.0)).unwrap();
    assert_eq!(r.motifs.len(), 3);
    assert_eq!(r.chains.len(), 1);
    let c = &r.chains[0];
    assert_eq!(c.stages.len(), 3);
    let last = &r.motifs[*c.stage_motifs.last().unwrap()];
    assert_eq!(c.ensemble.mean_per_s, last.ensemble.mean_per_s);
    assert!(
        (c.ensemble.mean_per_s - c.ode_per_s).abs()
            < 4.0 * c.ensemble.stderr_per_s + 0.05 * c.ode_per_s
    );
}

#[test]
fn cli_prints_every_contract_key_and_draws_the_svg() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/reactions/gland_loop.crn");
    let svg = std::env::temp_dir().join(format!("copyloop-rec-{}.svg", std::process::id()));
    let j = support::cli::json(&[
        "reconcile",
        path,
        "--replicates",
        "8",
        "--t-end",
        "300",
        "--burn-in",
        "50",
        "--observe",
        "H=1.2nM+-0.1nM",
        "--json",
        "--svg",
        svg.to_str().unwrap(),
    ]);
    let m = &j["motifs"][0];
    for k in [
        "carrier",
        "ligand",
        "kind",
        "k_half",
        "capacity_per_s",
        "ligand_level",
        "relative_difference",
        "verdict",
        "tolerance",
    ] {
        assert!(m.get(k).is_some(), "motif lacks {k}");
    }
    for p in ["langmuir", "tqssa", "ode"] {
        let v = &m["verdicts"][p];
        for k in [
            "verdict",
            "relative_difference",
            "relative_difference_ci95",
            "significant",
            "replicates_to_decide",
            "causes",
        ] {
            assert!(v.get(k).is_some(), "verdicts.{p} lacks {k}");
        }
        let word = v["verdict"].as_str().unwrap();
        assert!(["agrees", "differs", "undecided"].contains(&word), "{word}");
    }
    assert_eq!(m["verdict"], m["verdicts"]["langmuir"]["verdict"]);
    for k in ["langmuir_per_s", "tqssa_per_s", "ode_per_s"] {
        assert!(m["predicted"].get(k).is_some(), "predicted lacks {k}");
    }
    for k in ["mean_per_s", "stderr_per_s", "ci95"] {
        assert!(m["ensemble"].get(k).is_some(), "ensemble lacks {k}");
    }
    let o = &j["observations"][0];
    for k in [
        "name",
        "observed",
        "sd",
        "deterministic",
        "ensemble_mean",
        "ci95",
        "z",
        "verdict",
    ] {
        assert!(o.get(k).is_some(), "observation lacks {k}");
    }
    assert!(j["sensitivities"]["ki"].is_number());
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.starts_with("<svg") && text.contains("R·H"));
    let _ = std::fs::remove_file(&svg);
    // A bad observation is a usage error.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_copyloop"))
        .args(["reconcile", path, "--observe", "Nope=3"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

// The enzyme's product P accumulates (nothing consumes or reads it), yet the enzyme's flux is
// stationary: with S clamped the flux is k_cat·E_T·S/(K + S) exactly (Briggs & Haldane 1925
// [M]; docs/references.md §6 [C]), and P's accumulation rate equals it, deterministic and in the
// ensemble. Before, steady, reconcile and noise refused ("P grows without bound").
#[test]
fn an_accumulating_product_does_not_block_reconciliation() {
    // k1 = 0.01 per molecule per s, k_-1 = 1, k2 = 2: K = 300 molecules; S = 600, E_T = 50:
    // flux = 2·50·600/900 = 66.667 molecules/s.
    let n = net(
        "species E = 50\nspecies S = 600 clamped\nspecies C = 0\nspecies P = 0\n\
         step bind E + S <-> C @ 0.01, 1\nstep cat C -> E + P @ 2\n",
    );
    let exact = 2.0 * 50.0 * 600.0 / 900.0;
    let r = reconcile::reconcile(&n, &opts(200, 40.0, 10.0)).unwrap();
    let m = &r.motifs[0];
    assert!((m.predicted.langmuir_per_s - exact).abs() < 1e-9 * exact);
    assert!((m.predicted.ode_per_s - exact).abs() < 1e-6 * exact);
    let z = (m.ensemble.mean_per_s - exact) / m.ensemble.stderr_per_s;
    assert!(z.abs() < 4.0, "{} vs {exact}", m.ensemble.mean_per_s);
    assert_eq!(m.verdict, Verdict::Agrees);
    let p = &r.outputs[0];
    assert_eq!(p.name, "P");
    assert!((p.rate_per_s - exact).abs() < 1e-6 * exact);
    let ens = p.ensemble_rate_per_s.unwrap();
    let ci = p.ensemble_rate_ci95.unwrap();
    assert!(ci[0] <= ens && ens <= ci[1]);
    assert!(
        (ens - exact).abs() < 4.0 * (ci[1] - ci[0]) / 3.92,
        "{ens} vs {exact}"
    );
}

// A high-precision run: the Langmuir form with total ligand is off by about the QSSA
// parameter (here ~1 %): significant, yet within the 5 % tolerance, so it agrees, and the
// named cause carries an expected size close to the difference (Segel & Slemrod 1989 [M]:
// the sQSSA error is of order E_T/(S_T + K)).
#[test]
fn a_small_real_difference_agrees_and_is_explained() {
    let n = net("species E = 100\nspecies S = 0\nspecies C = 0\n\
         step feed 0 -> S @ 500\nstep wash S -> 0 @ 0.05\n\
         step bind E + S <-> C @ 0.001, 0.5\nstep cat C -> E @ 0.5\n");
    let r = reconcile::reconcile(&n, &opts(200, 120.0, 20.0)).unwrap();
    let m = &r.motifs[0];
    let j = &m.verdicts.langmuir;
    assert!(
        m.qssa_parameter > 0.005 && m.qssa_parameter < 0.05,
        "{}",
        m.qssa_parameter
    );
    assert_eq!(j.verdict, Verdict::Agrees, "{j:?}");
    if j.significant {
        let c = j
            .causes
            .iter()
            .find(|c| c.cause == CauseKind::LigandDepletion)
            .expect("a significant difference names its cause");
        assert!(c.expected_relative_error.abs() > 0.25 * j.relative_difference.abs());
    }
}
