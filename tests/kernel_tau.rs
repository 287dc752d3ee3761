//! Tau-leaping against the exact method and exact laws.

mod support;

use copyloop::ensemble::{self, EnsembleSpec, Method};
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::tau::{Switch, Tau};
use copyloop::kernel::{CompiledKernel, Observer};
use copyloop::network::{load_source, Network, Overrides};
use proptest::prelude::*;
use support::stats::{
    chi_square_gof, common_histograms, expected_self_distance, histogram_distance,
};

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn finals(
    n: &Network,
    method: Method,
    replicates: u64,
    t_end: f64,
    seed: u64,
) -> ensemble::EnsembleResult {
    ensemble::run(
        n,
        &EnsembleSpec {
            replicates,
            seed,
            grid_points: 2,
            keep_finals: true,
            method,
            ..EnsembleSpec::new(t_end)
        },
    )
    .unwrap()
}

/// The decaying–dimerising model (Gillespie 2001; Cao, Gillespie & Petzold 2006 [M]) shrunk
/// tenfold with c2 = 0.02: the same concentration dynamics, RRE values at t = 10 of
/// (274.044, 1759.369, 1222.283) [C] (docs/references.md §3).
const DECAY_DIMER: &str = "species S1 = 10000\nspecies S2 = 0\nspecies S3 = 0\n\
    step decay S1 -> 0 @ 1\nstep dimer 2 S1 -> S2 @ 0.02\nstep split S2 -> 2 S1 @ 0.5\nstep conv S2 -> S3 @ 0.04\n";

// Means and SDs of tau (ε = 0.03) and exact ensembles agree within 4 combined standard errors
// plus a bias allowance of 0.5 % of the mean (docs/references.md §3: the mean-field offset and the
// leap bias are of order one molecule here); SDs within 4 SE(sd) = 4·sd/√(2R) plus 5 %.
// Histogram distance (Cao & Petzold 2006 [M]; docs/references.md §11): below twice the predicted
// self-distance of two exact samples of this size.
#[test]
fn decaying_dimerising_tau_matches_exact() {
    let n = net(DECAY_DIMER);
    let r = 2000;
    let exact = finals(&n, Method::Direct, r, 10.0, 1);
    let tau = finals(&n, Method::Tau { epsilon: 0.03 }, r, 10.0, 2);
    let rre = [274.044, 1759.369, 1222.283];
    for (i, &rre_i) in rre.iter().enumerate() {
        let (e, t) = (&exact.final_state[i], &tau.final_state[i]);
        let se = (e.stderr().powi(2) + t.stderr().powi(2)).sqrt();
        assert!(
            (e.mean() - t.mean()).abs() < 4.0 * se + 0.005 * e.mean(),
            "species {i}: {} vs {}",
            e.mean(),
            t.mean()
        );
        let se_sd = e.sd() / (2.0 * r as f64).sqrt() * 2f64.sqrt();
        assert!(
            (e.sd() - t.sd()).abs() < 4.0 * se_sd + 0.05 * e.sd(),
            "species {i} sd: {} vs {}",
            e.sd(),
            t.sd()
        );
        // the exact mean against the RRE: max(4 SE, 0.5 %) (docs/references.md §3).
        assert!(
            (e.mean() - rre_i).abs() < (4.0 * e.stderr()).max(0.005 * rre_i),
            "{} vs RRE {}",
            e.mean(),
            rre_i
        );
    }
    assert!(tau.leaps > 0);
    let a: Vec<i64> = exact
        .finals
        .as_ref()
        .unwrap()
        .iter()
        .map(|x| x[0])
        .collect();
    let b: Vec<i64> = tau.finals.as_ref().unwrap().iter().map(|x| x[0]).collect();
    let (ha, hb) = common_histograms(&a, &b, 12).unwrap();
    let d = histogram_distance(&ha, &hb).unwrap();
    let bound = 2.0 * expected_self_distance(&ha.probabilities(), r);
    assert!(d < bound, "distance {d} vs bound {bound}");
}

// Fixed-step Poisson tau-leaping on immigration–death has stationary mean k/γ exactly and
// Fano factor 1/(1 − γτ/2) (docs/references.md §4, derived [C]). With k/γ = 1000 and ε = 0.03 the
// variance bound gives τ ≈ (ε·1000)²/(k + γ·1000) = 0.45 s, so Fano ≈ 1.29; with ε = 0.005,
// τ ≈ 0.0125 s and Fano ≈ 1.006, Poisson within errors. SE(Fano) ≈ √(2/R); allowance 4 SE
// plus 0.03 for the spread of τ with the count.
#[test]
fn immigration_death_with_tau() {
    let n = net("species A = 1000\nstep in 0 -> A @ 1000\nstep out A -> 0 @ 1\n");
    let r = 2000u64;
    for (eps, fano_expected) in [
        (0.03, 1.0 / (1.0 - 0.45 / 2.0)),
        (0.005, 1.0 / (1.0 - 0.0125 / 2.0)),
    ] {
        // `auto` takes the same ε: at 0.03, τ' = ε²x²/σ² = 0.45 s and τ'·a₀ = 900, above its
        // switch of 100, so it leaps as `tau` does; at 0.005, τ'·a₀ = 25 and it steps exactly
        // throughout (with a default ε of 0.03 in its place it would leap).
        for method in [Method::Tau { epsilon: eps }, Method::Auto { epsilon: eps }] {
            let e = finals(&n, method, r, 15.0, 9);
            if matches!(method, Method::Auto { .. }) && eps < 0.01 {
                assert!(e.leaps == 0 && e.exact_steps > 0, "{method:?}");
            } else {
                assert!(e.leaps > 0, "{method:?}");
            }
            let w = &e.final_state[0];
            assert!(
                (w.mean() - 1000.0).abs() < 4.0 * (1000.0 * fano_expected / r as f64).sqrt(),
                "mean {}",
                w.mean()
            );
            let fano = w.variance() / w.mean();
            assert!(
                (fano - fano_expected).abs() < 4.0 * (2.0 / r as f64).sqrt() + 0.03,
                "{method:?}: Fano {fano} vs {fano_expected}"
            );
        }
    }
}

// With every population below n_c every reaction is critical, so each leap fires exactly one
// reaction after an Exp(a0) wait: the exact law returns (docs/references.md §4 limit test). Decay
// A -> 0 from 8: A(1) ~ Binomial(8, e^-1) (McQuarrie 1967 [verified]; docs/references.md §2a).
#[test]
fn all_critical_reproduces_the_exact_law() {
    let n = net("species A = 8\nstep d A -> 0 @ 1\n");
    let e = finals(&n, Method::Tau { epsilon: 0.03 }, 4000, 1.0, 4);
    let p = (-1f64).exp();
    let mut counts = vec![0u64; 9];
    for x in e.finals.as_ref().unwrap() {
        counts[x[0] as usize] += 1;
    }
    let binom = |k: u64| {
        let c = (1..=8u64).product::<u64>() as f64
            / ((1..=k).product::<u64>() as f64 * (1..=8 - k).product::<u64>() as f64);
        c * p.powi(k as i32) * (1.0 - p).powi(8 - k as i32)
    };
    let probs: Vec<f64> = (0..=8).map(binom).collect();
    let chi = chi_square_gof(&counts, &probs).unwrap();
    assert!(chi.p_value > 1e-4, "{chi:?}");
    // One firing per leap, but for each replicate's last leap, which may end at t_end unfired.
    assert!(e.leaps >= e.events_total && e.leaps - e.events_total <= 4000);
}

/// Records the smallest count any species ever had.
struct Lowest(i64);

impl Observer for Lowest {
    fn start(&mut self, x: &[i64]) {
        self.0 = self.0.min(*x.iter().min().unwrap_or(&0));
    }
    fn moved(&mut self, _t: f64, _i: usize, before: i64, dx: i64) {
        self.0 = self.0.min(before + dx);
    }
}

fn lowest_count(src: &str, seed: u64, t_end: f64, eps: f64) -> i64 {
    let n = net(src);
    let k = CompiledKernel::new(&n).unwrap();
    let mut tau = Tau::new(&k, &n, eps, Switch::Tau);
    let mut obs = Lowest(i64::MAX);
    let x0 = n.initial_state();
    let mut rng = replicate_rng(seed, 0);
    tau.run(&x0, t_end, &mut rng, &mut obs).unwrap();
    obs.0
}

// No count is ever negative (Cao, Gillespie & Petzold 2005 [verified]; docs/references.md §4): the
// two cases named there, over many seeds.
#[test]
fn named_low_copy_cases_never_go_negative() {
    for seed in 0..2000 {
        assert!(lowest_count("species A = 5\nstep d A -> 0 @ 1\n", seed, 10.0, 0.03) >= 0);
        assert!(
            lowest_count(
                "species A = 3\nspecies B = 1000\nspecies C = 0\nstep r A + B -> C @ 0.1\n",
                seed,
                10.0,
                0.03
            ) >= 0
        );
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    /// Random small networks at small copy numbers never reach a negative count.
    #[test]
    fn random_networks_never_go_negative(
        a0 in 0i64..30, b0 in 0i64..30,
        c in proptest::collection::vec(0.01f64..5.0, 5),
        eps in 0.01f64..0.5,
        seed in any::<u64>(),
    ) {
        let src = format!(
            "species A = {a0}\nspecies B = {b0}\nspecies C = 0\n\
             step r1 A + B -> C @ {}\nstep r2 C -> A + B @ {}\nstep r3 2 A -> B @ {}\n\
             step r4 0 -> A @ {}\nstep r5 B -> 0 @ {}\n",
            c[0], c[1], c[2], 10.0 * c[3], c[4]
        );
        prop_assert!(lowest_count(&src, seed, 5.0, eps) >= 0);
    }
}

/// Means and Fano factor of species `i` at t_end under `method`, with R replicates.
fn mean_and_fano(src: &str, method: Method, r: u64, t_end: f64, seed: u64) -> (f64, f64) {
    let e = finals(&net(src), method, r, t_end, seed);
    let w = &e.final_state[0];
    (w.mean(), w.variance() / w.mean())
}

// Immigration–death from X = 0 is Poisson at every time with mean (k/γ)(1 − e^(−γt))
// (docs/references.md §2b [C]; Jahnke & Huisinga 2007 [verified]). The first tau kernel leapt from
// X = 0 straight to t_end (X only produced at first, so nothing bounded the leap) and gave
// ≈ 1000 at t = 100 and 50.2 at t = 1. Tolerance: 4 SE of the mean (SE = √(mean/R)) and
// 4·√(2/R) on the Fano factor (docs/references.md §0), the leap bias being far below both here.
#[test]
fn immigration_death_from_zero_matches_the_exact_law() {
    let r = 4000u64;
    for (src, t, exact) in [
        (
            "species X = 0\nstep make 0 -> X @ 10\nstep decay X -> 0 @ 0.1\n",
            100.0,
            100.0 * (1.0 - (-10f64).exp()),
        ),
        (
            "species X = 0\nstep make 0 -> X @ 50\nstep decay X -> 0 @ 0.5\n",
            1.0,
            100.0 * (1.0 - (-0.5f64).exp()),
        ),
    ] {
        for method in [
            Method::Tau { epsilon: 0.03 },
            Method::Auto { epsilon: 0.03 },
        ] {
            let (mean, fano) = mean_and_fano(src, method, r, t, 5);
            let se = (exact / r as f64).sqrt();
            assert!(
                (mean - exact).abs() < 4.0 * se,
                "{method:?} t = {t}: mean {mean} vs exact {exact}"
            );
            assert!(
                (fano - 1.0).abs() < 4.0 * (2.0 / r as f64).sqrt(),
                "{method:?} t = {t}: Fano {fano}"
            );
        }
    }
}

// A law that turns negative stops tau and auto with the same error as the direct method
// (`0 -> A @ 5`, `0 -> A @ law 3 - A`: the law is −1 once A reaches 4); before, tau leapt
// past it and exited with A ≈ 7.7.
#[test]
fn a_negative_law_stops_tau_as_it_stops_direct() {
    let n = net("species A = 0\nstep a 0 -> A @ 5\nstep b 0 -> A @ law 3 - A\n");
    for method in [
        Method::Direct,
        Method::Tau { epsilon: 0.03 },
        Method::Auto { epsilon: 0.03 },
    ] {
        let spec = EnsembleSpec {
            method,
            ..EnsembleSpec::new(1.0)
        };
        let err = ensemble::run(&n, &spec).expect_err("the law goes negative");
        assert_eq!(err.exit_code(), 2, "{method:?}");
        let text = err.to_string();
        assert!(
            text.contains("step `b`") && text.contains("propensity became -"),
            "{method:?}: {text}"
        );
    }
}

// The bundled gland loop (invented demo numbers) under tau against the exact method at
// t = 500 s, 100 replicates each: free hormone, bound receptor and messenger within 4
// combined SE plus 3 % (the leap bias at ε = 0.03). The first tau kernel gave H ≈ 43,000
// against ≈ 560 and left the receptor unbound.
#[test]
fn gland_loop_under_tau_matches_direct() {
    let src = std::fs::read_to_string("reactions/gland_loop.crn").unwrap();
    let n = net(&src);
    let exact = finals(&n, Method::Direct, 100, 500.0, 11);
    let tau = finals(&n, Method::Tau { epsilon: 0.03 }, 100, 500.0, 12);
    assert!(tau.leaps > 0);
    for name in ["H", "HR", "Q"] {
        let i = n.species_index(name).unwrap();
        let (e, t) = (&exact.final_state[i], &tau.final_state[i]);
        let se = (e.stderr().powi(2) + t.stderr().powi(2)).sqrt();
        assert!(
            (e.mean() - t.mean()).abs() < 4.0 * se + 0.03 * e.mean(),
            "{name}: exact {} ± {}, tau {} ± {}",
            e.mean(),
            e.stderr(),
            t.mean(),
            t.stderr()
        );
    }
}
