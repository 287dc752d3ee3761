//! Ensembles and kernel edge cases: reproducibility whatever the thread count, per-replicate
//! seeding, absorbing states, overflow and bad rate laws, and option checks.

use copyloop::ensemble::{self, EnsembleResult, EnsembleSpec, Method};
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct};
use copyloop::network::{load_source, Network, Overrides, MAX_COUNT};
use copyloop::Error;

fn net(src: &str) -> Network {
    load_source("ens.crn", src.as_bytes(), &Overrides::default()).expect("test network")
}

const MM: &str = "species E = 20\nspecies S = 300 clamped\nspecies C = 0\nspecies P = 0\n\
                  step bind E + S <-> C @ 0.01, 1\nstep cat C -> E + P @ 2\n";

/// Everything but the wall time.
fn same_numbers(a: &EnsembleResult, b: &EnsembleResult) {
    let mut b = b.clone();
    b.wall_seconds = a.wall_seconds;
    b.spec.threads = a.spec.threads;
    assert_eq!(*a, b);
}

/// Common practice for parallel Monte Carlo: a replicate's stream depends on (seed, replicate)
/// only, and blocks are merged in a fixed order, so results are bit-for-bit equal.
#[test]
fn one_and_two_threads_give_identical_numbers() {
    let n = net(MM);
    let spec = |threads| EnsembleSpec {
        replicates: 300,
        seed: 7,
        grid_points: 21,
        window: 5.0,
        threads: Some(threads),
        keep_finals: true,
        ..EnsembleSpec::new(10.0)
    };
    let one = ensemble::run(&n, &spec(1)).unwrap();
    let two = ensemble::run(&n, &spec(2)).unwrap();
    same_numbers(&one, &two);
    let three = ensemble::run(&n, &spec(3)).unwrap();
    same_numbers(&one, &three);
    assert!(one.events_total > 0);
}

#[test]
fn a_replicate_depends_on_seed_and_index_only() {
    let n = net(MM);
    let run = |replicates, seed| {
        let spec = EnsembleSpec {
            replicates,
            seed,
            keep_finals: true,
            ..EnsembleSpec::new(10.0)
        };
        ensemble::run(&n, &spec).unwrap().finals.unwrap()
    };
    let many = run(40, 3);
    let few = run(17, 3);
    assert_eq!(&many[..17], &few[..]);
    // The same trajectory from the kernel alone, with replicate 5's stream.
    let k = CompiledKernel::new(&n).unwrap();
    let mut d = Direct::new(&k);
    d.run(&k.x0, 10.0, &mut replicate_rng(3, 5), &mut ())
        .unwrap();
    assert_eq!(d.state(), &many[5][..]);
    let other = run(17, 4);
    assert_ne!(few, other);
    // Different replicates differ.
    assert!(many.windows(2).any(|w| w[0] != w[1]));
}

#[test]
fn absorbing_state_ends_the_run_and_fills_the_grid() {
    let n = net("species A = 5\nspecies B = 0\nstep decay A -> B @ 1\n");
    let spec = EnsembleSpec {
        replicates: 50,
        grid_points: 11,
        window: 100.0,
        ..EnsembleSpec::new(1000.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    assert_eq!(r.absorbed, 50);
    assert_eq!(r.events_total, 250);
    // From t = 100 on every replicate is extinct: A = 0 and B = 5 at every later grid point.
    for p in 1..11 {
        assert_eq!(r.grid[p][0].mean(), 0.0);
        assert_eq!(r.grid[p][1].mean(), 5.0);
    }
    assert_eq!(r.grid[0][0].mean(), 5.0);
    assert_eq!(r.time_average[1].mean(), 5.0);
    assert_eq!(r.firings[0].mean(), 0.0);
}

#[test]
fn a_network_that_cannot_fire_is_absorbed_at_zero() {
    let n = net("species A = 0\nstep decay A -> 0 @ 1\n");
    let k = CompiledKernel::new(&n).unwrap();
    let mut d = Direct::new(&k);
    let s = d
        .run(&k.x0, 5.0, &mut replicate_rng(0, 0), &mut ())
        .unwrap();
    assert_eq!((s.events, s.absorbed_at), (0, Some(0.0)));
}

#[test]
fn overflow_is_an_error_naming_the_species() {
    let src = format!("species A = {MAX_COUNT}\nstep grow A -> 2 A @ 1\n");
    let n = net(&src);
    let err = ensemble::run(&n, &EnsembleSpec::new(1.0)).unwrap_err();
    let text = err.to_string();
    assert!(matches!(err, Error::Usage(_)), "{text}");
    assert!(text.contains("ens.crn:1:9") && text.contains("`A`") && text.contains("`grow`"));
    assert_eq!(err.exit_code(), 2);
}

#[test]
fn a_negative_law_is_an_error_naming_the_step() {
    let n = net("species X = 0\nstep make 0 -> X @ law 3 - X\nstep more 0 -> X @ 1\n");
    let err = ensemble::run(&n, &EnsembleSpec::new(100.0)).unwrap_err();
    let text = err.to_string();
    assert!(
        text.contains("ens.crn:2:") && text.contains("`make`"),
        "{text}"
    );
    assert!(text.contains("-1"), "{text}");
    assert_eq!(err.exit_code(), 2);
}

#[test]
fn a_law_that_is_nan_at_the_start_is_an_error() {
    let n = net("species X = 0\nstep make 0 -> X @ law ln(X) - ln(X)\n");
    let err = ensemble::run(&n, &EnsembleSpec::new(1.0)).unwrap_err();
    assert!(err.to_string().contains("`make`"), "{err}");
}

#[test]
fn bad_options_are_usage_errors() {
    let n = net(MM);
    let bad = [
        EnsembleSpec::new(0.0),
        EnsembleSpec::new(-1.0),
        EnsembleSpec::new(f64::INFINITY),
        EnsembleSpec::new(f64::NAN),
        EnsembleSpec {
            replicates: 0,
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            grid_points: 1,
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            window: 1.0,
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            window: -0.5,
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            threads: Some(0),
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            method: Method::Tau { epsilon: 0.0 },
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            method: Method::Tau { epsilon: 1.5 },
            ..EnsembleSpec::new(1.0)
        },
        EnsembleSpec {
            method: Method::Auto { epsilon: 0.0 },
            ..EnsembleSpec::new(1.0)
        },
    ];
    for spec in bad {
        let err = ensemble::run(&n, &spec).unwrap_err();
        assert!(matches!(err, Error::Invalid { .. }), "{spec:?}: {err}");
        assert_eq!(err.exit_code(), 2);
    }
    for method in [
        Method::Tau { epsilon: 0.03 },
        Method::Auto { epsilon: 0.03 },
    ] {
        let spec = EnsembleSpec {
            method,
            ..EnsembleSpec::new(1.0)
        };
        assert!(ensemble::run(&n, &spec).is_ok(), "{method:?} is available");
    }
}

/// Networks of 32 reactions or more select through the sum tree; the result is the same law.
/// Each of 40 parallel channels A_i → B_i (rate 1, A_i = 10) is an independent pure decay:
/// A_i(1) ~ Binomial(10, e^(−1)) (docs/references.md §2a), so ΣA_i has mean 400·e^(−1) and
/// variance 400·e^(−1)(1 − e^(−1)).
#[test]
fn sum_tree_selection_reproduces_the_exact_law() {
    let mut src = String::new();
    for i in 0..40 {
        src.push_str(&format!(
            "species A{i} = 10\nspecies B{i} = 0\nstep d{i} A{i} -> B{i} @ 1\n"
        ));
    }
    let n = net(&src);
    let k = CompiledKernel::new(&n).unwrap();
    assert!(Direct::new(&k).uses_tree());
    let spec = EnsembleSpec {
        replicates: 4000,
        seed: 9,
        keep_finals: true,
        ..EnsembleSpec::new(1.0)
    };
    let r = ensemble::run(&n, &spec).unwrap();
    let sums: copyloop::stats::Welford = r
        .finals
        .unwrap()
        .iter()
        .map(|x| (0..40).map(|i| x[2 * i]).sum::<i64>() as f64)
        .collect();
    let p = (-1.0f64).exp();
    let (mean, var) = (400.0 * p, 400.0 * p * (1.0 - p));
    assert!(
        (sums.mean() - mean).abs() < 4.0 * (var / 4000.0).sqrt(),
        "{}",
        sums.mean()
    );
    for i in 0..40 {
        let w = &r.final_state[2 * i];
        assert!((w.mean() - 10.0 * p).abs() < 4.0 * (10.0 * p * (1.0 - p) / 4000.0f64).sqrt());
    }
}

// A stop request is honoured before the next replicate and scoped to its `stoppable` call
// (the contract of `ensemble::stoppable`; Ctrl-C in the Python package rests on it).
#[test]
fn a_stop_request_interrupts_between_replicates_and_only_inside_its_scope() {
    use copyloop::ensemble::stoppable;
    use std::sync::atomic::{AtomicBool, Ordering};
    use std::sync::Arc;
    let n = net("species X = 0\nstep make 0 -> X @ 10\nstep decay X -> 0 @ 0.1\n");
    let mut spec = EnsembleSpec::new(50.0);
    spec.replicates = 64;
    spec.threads = Some(1);
    let set = Arc::new(AtomicBool::new(true));
    let r = stoppable(set, || ensemble::run(&n, &spec));
    assert!(matches!(r, Err(Error::Interrupted)), "{r:?}");
    assert_eq!(Error::Interrupted.exit_code(), 130);
    // Outside the scope the same run completes, with every replicate.
    let full = ensemble::run(&n, &spec).expect("runs");
    assert_eq!(full.spec.replicates, 64);
    // A flag that is never set changes nothing: same numbers as without it.
    let unset = Arc::new(AtomicBool::new(false));
    let same = stoppable(unset.clone(), || ensemble::run(&n, &spec)).expect("runs");
    same_numbers(&full, &same);
    assert!(!unset.load(Ordering::Relaxed));
    // Set from another thread while a long run is under way.
    let mut long = EnsembleSpec::new(2e4);
    long.replicates = 20_000;
    long.threads = Some(1);
    let stop = Arc::new(AtomicBool::new(false));
    let r = std::thread::scope(|s| {
        let watcher = stop.clone();
        s.spawn(move || {
            std::thread::sleep(std::time::Duration::from_millis(200));
            watcher.store(true, Ordering::Relaxed);
        });
        stoppable(stop.clone(), || ensemble::run(&n, &long))
    });
    assert!(matches!(r, Err(Error::Interrupted)), "{r:?}");
}
