//! `noise` against exact results: Poisson noise and the 1/√N law of a linear network over
//! three volumes, and the low-copy shift of the mean in a bimolecular network against the exact
//! stationary master equation.

mod support;

use copyloop::network::{load_source, Network, Overrides};
use copyloop::noise::{self, Options};

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

// Immigration–death: stationary law Poisson(k/γ), so Fano = 1 and CV = 1/√mean exactly, and
// the LNA is exact for this linear network (docs/references.md §2b [C], §9: Elf & Ehrenberg 2003
// [verified]). At 1, 10 and 100 fL with the concentrations kept, the mean grows tenfold each
// time and CV·√mean stays 1.
#[test]
fn linear_network_follows_one_over_root_n() {
    let n =
        net("volume 1 fL\nspecies A = 0 nM\nstep in 0 -> A @ 0.5 nM/s\nstep out A -> 0 @ 0.1 /s\n");
    let o = Options {
        replicates: 200,
        volumes: vec![1e-15, 1e-14, 1e-13],
        burn_in: Some(50.0),
        t_end: Some(550.0),
        seed: 3,
        ..Options::default()
    };
    let vols = noise::noise(&n, &o).unwrap().volumes;
    assert_eq!(vols.len(), 3);
    let mut means = Vec::new();
    for v in &vols {
        let a = &v.species[0];
        let poisson_mean = 0.5e-9 / 0.1 * v.omega.unwrap();
        assert!((a.lna_mean - poisson_mean).abs() < 1e-6 * poisson_mean);
        assert!((a.lna_variance - poisson_mean).abs() < 1e-6 * poisson_mean);
        assert!(
            (a.mean - poisson_mean).abs() < 4.0 * a.mean_stderr,
            "{} vs {poisson_mean}",
            a.mean
        );
        // Var of a Poisson window estimate: the sample of R window variances has relative SE
        // about √(2/(R·T_eff/τ_c)); with R = 200, T = 500 s, τ_c = 10 s it is under 3 %.
        // 4 SE of that gives 12 %.
        assert!(
            (a.fano - 1.0).abs() < 0.12,
            "Fano {} at {:?} L",
            a.fano,
            v.volume_l
        );
        // The exact Fano factor lies in the reported interval, whose half-width is of the
        // size of the 4-SE allowance above divided by 4·(1.96/4).
        assert!(
            a.fano_ci95[0] < 1.0 + 0.02 && a.fano_ci95[1] > 1.0 - 0.02,
            "Fano interval {:?}",
            a.fano_ci95
        );
        assert!(v.plan.coverage().reliable && v.plan.shortened.is_none());
        assert!(
            (a.cv * a.mean.sqrt() - 1.0).abs() < 0.06,
            "CV·√N = {}",
            a.cv * a.mean.sqrt()
        );
        means.push(a.mean);
    }
    assert!((means[1] / means[0] - 10.0).abs() < 1.0 && (means[2] / means[1] - 10.0).abs() < 0.5);
}

// Open Michaelis–Menten system with one enzyme, in molecules: 0 -> S (k_in), S + E <-> C,
// C -> E. The deterministic steady state is S* = K·ρ/(1 − ρ) = 11 with K = 11, ρ = 0.5; the
// exact stationary mean lies above it at low copy number (Grima 2009, BMC Syst. Biol. 3:101
// [verified]; docs/references.md §8: computed here from the exact master equation [C]).
#[test]
fn low_copy_mean_departs_from_the_deterministic_value_as_the_master_equation_says() {
    let n = net("species E = 1\nspecies S = 0\nspecies C = 0\n\
         step feed 0 -> S @ 0.5\nstep bind E + S <-> C @ 0.1, 0.1\nstep cat C -> E @ 1\n");
    let exact = copyloop::distribution::stationary(
        &n,
        &copyloop::distribution::Options {
            tolerance: 1e-12,
            ..Default::default()
        },
    )
    .unwrap();
    let s_exact = exact.species.get("S").unwrap().mean;
    let c_exact = exact.species.get("C").unwrap().mean;
    assert!((c_exact - 0.5).abs() < 1e-9, "flux balance <C> = k_in/k2");
    assert!(
        s_exact > 11.0,
        "the exact mean lies above the deterministic 11: {s_exact}"
    );
    let o = Options {
        replicates: 200,
        burn_in: Some(100.0),
        t_end: Some(2100.0),
        seed: 11,
        ..Options::default()
    };
    let v = &noise::noise(&n, &o).unwrap().volumes[0];
    let s = &v.species[1];
    assert!((s.lna_mean - 11.0).abs() < 1e-6);
    // The exact column is the same law at the default tolerance (boundary probability ≤ 1e-6
    // on counts below ~100 moves the mean by well under 1e-3).
    let e = s.exact_mean.expect("this network fits a projection");
    assert!((e - s_exact).abs() < 1e-3, "{e} vs {s_exact}");
    assert!(
        (s.mean - s_exact).abs() < 4.0 * s.mean_stderr,
        "{} vs exact {s_exact}",
        s.mean
    );
    assert!(
        s.mean - 11.0 > 4.0 * s.mean_stderr,
        "the shift is resolved: {} vs 11",
        s.mean
    );
}

#[test]
fn cli_prints_every_contract_key_and_draws_the_svg() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/reactions/receptor_signal.crn");
    let svg = std::env::temp_dir().join(format!("copyloop-noise-{}.svg", std::process::id()));
    let j = support::cli::json(&[
        "noise",
        path,
        "--replicates",
        "20",
        "--volumes",
        "1fL,4fL",
        "--json",
        "--svg",
        svg.to_str().unwrap(),
    ]);
    let vols = j["volumes"].as_array().unwrap();
    assert_eq!(vols.len(), 2);
    assert!((vols[1]["volume_l"].as_f64().unwrap() - 4e-15).abs() < 1e-27);
    for k in [
        "mean",
        "variance",
        "cv",
        "fano",
        "lna_mean",
        "lna_variance",
        "lna_cv",
    ] {
        assert!(vols[0]["species"]["Q"][k].is_number(), "Q lacks {k}");
        if !k.starts_with("lna") {
            let ci = &vols[0]["species"]["Q"][format!("{k}_ci95")];
            assert!(
                ci[0].as_f64().unwrap() <= ci[1].as_f64().unwrap(),
                "{k}_ci95"
            );
        }
    }
    for k in ["exact_mean", "exact_variance", "exact_fano"] {
        assert!(vols[0]["species"]["Q"].get(k).is_some(), "Q lacks {k}");
    }
    for k in ["burn_in", "t_end", "shortened", "reason"] {
        assert!(vols[0]["plan"].get(k).is_some(), "plan lacks {k}");
    }
    for k in ["exact_mean", "exact_variance", "exact_fano"] {
        let v = &vols[0]["species"]["Q"][k];
        assert!(v.is_number() || v.is_null(), "Q lacks {k}");
    }
    assert!(std::fs::read_to_string(&svg).unwrap().contains("1/√N"));
    let _ = std::fs::remove_file(&svg);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_copyloop"))
        .args(["noise", path, "--volumes", "3nM"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

// A slowly relaxing loop (γ = 0.01/s, τ = 100 s) at a high event rate: with 1000 replicates
// the event budget cuts copyloop's own burn-in to well under three relaxation times, so the
// replicates are still building up their fluctuations. The plan must say it was shortened and
// that its figures are unreliable. With the rule's full window given explicitly, the Fano
// factor agrees with the linear-noise value, which is exact here: 1 (Poisson; docs/references.md §2b
// [C]), within 4 delta-method standard errors.
#[test]
fn a_shortened_window_is_flagged_and_the_full_one_agrees_with_the_lna() {
    let n = net("species A = 10000\nstep in 0 -> A @ 100\nstep out A -> 0 @ 0.01\n");
    let short = Options {
        replicates: 1000,
        seed: 5,
        ..Options::default()
    };
    let report = noise::noise(&n, &short).unwrap();
    let v = &report.volumes[0];
    let sh = v.plan.shortened.expect("the budget shortened the plan");
    assert!((sh.full_burn_in - 500.0).abs() < 1e-6, "{sh:?}");
    let c = v.plan.coverage();
    assert!(
        !c.reliable && c.burn_in_relaxation_times.unwrap() < 3.0,
        "{c:?}"
    );
    let table = copyloop::report::noise::table(&report);
    assert!(
        table.contains("SHORTENED") && table.contains("UNRELIABLE"),
        "{table}"
    );

    let full = Options {
        replicates: 100,
        seed: 6,
        burn_in: Some(500.0),
        t_end: Some(1500.0),
        ..Options::default()
    };
    let v = &noise::noise(&n, &full).unwrap().volumes[0];
    assert!(v.plan.shortened.is_none() && v.plan.coverage().reliable);
    let a = &v.species[0];
    assert!((a.lna_variance / a.lna_mean - 1.0).abs() < 1e-9);
    let se = (a.fano_ci95[1] - a.fano_ci95[0]) / (2.0 * 1.984);
    assert!((a.fano - 1.0).abs() < 4.0 * se, "Fano {} ± {se}", a.fano);
}

// The 95 % intervals of the Fano factor cover the exact value about 95 % of the time: 200
// independent small ensembles of immigration–death (Fano 1 exactly, docs/references.md §2b [C]); the
// coverage must lie within 4 binomial standard errors (√(0.95·0.05/200) = 1.5 %) of 95 %.
#[test]
fn fano_intervals_cover_the_exact_value() {
    let n = net("species A = 20\nstep in 0 -> A @ 20\nstep out A -> 0 @ 1\n");
    let mut covered = 0;
    let trials = 200;
    for seed in 0..trials {
        let o = Options {
            replicates: 40,
            seed,
            burn_in: Some(5.0),
            t_end: Some(25.0),
            threads: Some(1),
            ..Options::default()
        };
        let a = &noise::noise(&n, &o).unwrap().volumes[0].species[0];
        if a.fano_ci95[0] <= 1.0 && 1.0 <= a.fano_ci95[1] {
            covered += 1;
        }
    }
    let coverage = covered as f64 / trials as f64;
    let se = (0.95f64 * 0.05 / trials as f64).sqrt();
    assert!((coverage - 0.95).abs() < 4.0 * se, "coverage {coverage}");
}

// A product that only accumulates (the enzyme's P) is reported by its rate, not as a species
// with a meaningless variance; a count that never changes (the enzyme E in `E -> E + P`) has
// variance exactly 0, not rounding noise.
#[test]
fn outputs_are_rates_and_constant_counts_have_zero_variance() {
    let n = net("species E = 3011\nspecies P = 0\nstep make E -> E + P @ 0.01\n");
    let o = Options {
        replicates: 50,
        burn_in: Some(10.0),
        t_end: Some(60.0),
        ..Options::default()
    };
    let v = &noise::noise(&n, &o).unwrap().volumes[0];
    assert_eq!(v.species.len(), 1);
    assert_eq!(v.species[0].variance, 0.0);
    let p = &v.outputs[0];
    assert_eq!(p.name, "P");
    assert!((p.rate_per_s - 30.11).abs() < 1e-9);
    // Poisson firings: the mean rate over 50 replicates of 50 s has SE √(30.11/(50·50)).
    let se = (30.11f64 / 2500.0).sqrt();
    assert!(
        (p.ensemble_rate_per_s - 30.11).abs() < 4.0 * se,
        "{}",
        p.ensemble_rate_per_s
    );
}
