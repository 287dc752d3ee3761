//! Event rate of the direct-method kernel (criterion; `cargo bench --bench kernel`).
//!
//! Throughput is in events (channel firings) per second of one core, unless the group says
//! otherwise:
//!
//! - `mm_clamped`: the clamped Michaelis–Menten motif E + S ⇌ C → E + P with E_T = 100,
//!   S = 5000 clamped, c1 = 1e-3, c2 = 1 (unbinding), c3 = 2 (turnover), through the generic
//!   kernel with no observer, with grid + firing counts, and with integrals too; beside a loop
//!   hand-specialised for this network alone (the ceiling), with the ziggurat exponential and
//!   with −ln u.
//! - `immigration_death`: 0 → X (10/s), X → 0 (0.1/s per molecule).
//! - `random_200`: 200 random mass-conserving reactions over 100 species (sum-tree selection).
//! - `ensemble_threads`: 1000 replicates of the motif on 1 and 2 threads (replicates per second).
//!
//! `KERNEL_PROFILE=<observers>,<t_end>` (observers `none`, or `all`: grid, firing counts and
//! integrals, what `simulate` keeps) runs the motif once instead and prints its events, for
//! counting instructions under callgrind: the figure per event is the difference of two runs
//! of different t_end, divided by the difference of their events.

use copyloop::ensemble::{self, EnsembleSpec};
use copyloop::kernel::rng::{replicate_rng, uniform};
use copyloop::kernel::ziggurat::exp_ziggurat;
use copyloop::kernel::{CompiledKernel, Direct, Integrals, RecordSpec, Recorder};
use copyloop::network::{load_source, Network, Overrides};
use criterion::{criterion_group, BenchmarkId, Criterion, Throughput};
use rand::Rng;
use std::hint::black_box;
use std::time::Duration;

const MM: &str = include_str!("../benches/mm_clamped.crn");

const T_MM: f64 = 2000.0;

const IMMIGRATION: &str = "\
species X = 100
step birth 0 -> X @ 10
step death X -> 0 @ 0.1
";

fn net(src: &str) -> Network {
    load_source("bench.crn", src.as_bytes(), &Overrides::default()).expect("bench network")
}

/// A random network of `m` mass-conserving reactions (A → B and A + B → C + D) over `n`
/// species with 1000 molecules each, from a fixed linear congruential sequence.
fn random_network(n: usize, m: usize) -> String {
    let mut s = 0x2545_F491_4F6C_DD1Du64;
    let mut next = |k: usize| {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((s >> 33) as usize) % k
    };
    let mut src = String::new();
    for i in 0..n {
        src.push_str(&format!("species X{i} = 1000\n"));
    }
    for j in 0..m {
        let (a, b, c, d) = (next(n), next(n), next(n), next(n));
        if j % 2 == 0 {
            src.push_str(&format!(
                "step r{j} X{a} -> X{b} @ {}\n",
                0.5 + next(100) as f64 / 100.0
            ));
        } else if a != b {
            src.push_str(&format!(
                "step r{j} X{a} + X{b} -> X{c} + X{d} @ {}\n",
                (1 + next(100)) as f64 * 1e-5
            ));
        } else {
            src.push_str(&format!("step r{j} X{a} -> X{c} @ 1\n"));
        }
    }
    src
}

/// The motif hand-specialised: two live counts in registers, propensities recomputed from
/// them, branch-free three-way selection, no observer; `exp` draws the standard exponential.
/// Returns (events, final P) so nothing is optimised away.
#[inline(always)]
fn mm_by_hand<R: Rng>(rng: &mut R, t_end: f64, exp: impl Fn(&mut R) -> f64) -> (u64, i64) {
    let (c1s, c2, c3) = (1e-3 * 5000.0, 1.0, 2.0);
    let (mut e, mut c, mut p) = (100i64, 0i64, 0i64);
    let mut t = 0.0;
    let mut events = 0u64;
    loop {
        let a_bind = c1s * e as f64;
        let a_unbind = c2 * c as f64;
        let a0 = a_bind + (c2 + c3) * c as f64;
        t += exp(rng) / a0;
        if t > t_end {
            break;
        }
        let r = uniform(rng) * a0;
        let bind = (r < a_bind) as i64;
        let cat = (r >= a_bind + a_unbind) as i64;
        e += 1 - 2 * bind;
        c -= 1 - 2 * bind;
        p += cat;
        events += 1;
    }
    (events, p)
}

/// [`mm_by_hand`] with the ziggurat's fast path inline (its rare slow path is a call).
#[inline(never)]
fn mm_specialised<R: Rng>(rng: &mut R, t_end: f64) -> (u64, i64) {
    let zig = exp_ziggurat();
    mm_by_hand(rng, t_end, |rng| match zig.fast(rng) {
        Ok(x) => x,
        Err(miss) => zig.finish(miss, rng),
    })
}

/// [`mm_by_hand`] with the waiting time −ln(1 − u) through libm's log.
#[inline(never)]
fn mm_specialised_ln<R: Rng>(rng: &mut R, t_end: f64) -> (u64, i64) {
    mm_by_hand(rng, t_end, |rng| -(1.0 - uniform(rng)).ln())
}

fn configure() -> Criterion {
    Criterion::default()
        .sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(2))
}

fn record(t_end: f64) -> RecordSpec {
    RecordSpec {
        t_end,
        grid_points: 101,
        window: 0.0,
    }
}

fn bench_mm(c: &mut Criterion) {
    let network = net(MM);
    let k = CompiledKernel::new(&network).unwrap();
    let mut d = Direct::new(&k);
    let events = d
        .run(&k.x0, T_MM, &mut replicate_rng(1, 0), &mut ())
        .unwrap()
        .events;
    let mut g = c.benchmark_group("mm_clamped");
    g.throughput(Throughput::Elements(events));
    g.bench_function("generic_no_observer", |b| {
        b.iter(|| {
            let s = d.run(&k.x0, T_MM, &mut replicate_rng(1, 0), &mut ());
            black_box(s.unwrap().events)
        })
    });
    let mut rec = Recorder::new(record(T_MM), &k);
    g.bench_function("generic_grid_and_firings", |b| {
        b.iter(|| {
            let s = d.run(&k.x0, T_MM, &mut replicate_rng(1, 0), &mut rec);
            black_box(s.unwrap().events)
        })
    });
    let mut rec = (
        Recorder::new(record(T_MM), &k),
        Integrals::new(T_MM, 0.0, &k),
    );
    g.bench_function("generic_grid_firings_integrals", |b| {
        b.iter(|| {
            let s = d.run(&k.x0, T_MM, &mut replicate_rng(1, 0), &mut rec);
            black_box(s.unwrap().events)
        })
    });
    let spec_events = mm_specialised(&mut replicate_rng(1, 0), T_MM).0;
    g.throughput(Throughput::Elements(spec_events));
    g.bench_function("specialised_ziggurat", |b| {
        b.iter(|| black_box(mm_specialised(&mut replicate_rng(1, 0), T_MM)))
    });
    let ln_events = mm_specialised_ln(&mut replicate_rng(1, 0), T_MM).0;
    g.throughput(Throughput::Elements(ln_events));
    g.bench_function("specialised_ln", |b| {
        b.iter(|| black_box(mm_specialised_ln(&mut replicate_rng(1, 0), T_MM)))
    });
    g.finish();
}

fn bench_generic(c: &mut Criterion, name: &str, src: &str, t_end: f64) {
    let network = net(src);
    let k = CompiledKernel::new(&network).unwrap();
    let mut d = Direct::new(&k);
    let events = d
        .run(&k.x0, t_end, &mut replicate_rng(2, 0), &mut ())
        .unwrap()
        .events;
    let mut g = c.benchmark_group(name);
    g.throughput(Throughput::Elements(events));
    let label = if d.uses_tree() {
        "generic_tree"
    } else {
        "generic_linear"
    };
    g.bench_function(label, |b| {
        b.iter(|| {
            let s = d.run(&k.x0, t_end, &mut replicate_rng(2, 0), &mut ());
            black_box(s.unwrap().events)
        })
    });
    g.finish();
}

fn bench_other(c: &mut Criterion) {
    bench_generic(c, "immigration_death", IMMIGRATION, 50_000.0);
    bench_generic(c, "random_200", &random_network(100, 200), 5.0);
}

fn bench_ensemble(c: &mut Criterion) {
    let network = net(MM);
    let mut g = c.benchmark_group("ensemble_threads");
    g.throughput(Throughput::Elements(1000));
    for threads in [1usize, 2] {
        let spec = EnsembleSpec {
            replicates: 1000,
            threads: Some(threads),
            ..EnsembleSpec::new(20.0)
        };
        g.bench_with_input(BenchmarkId::from_parameter(threads), &spec, |b, spec| {
            b.iter(|| black_box(ensemble::run(&network, spec).unwrap().events_total))
        });
    }
    g.finish();
}

criterion_group! {
    name = benches;
    config = configure();
    targets = bench_mm, bench_other, bench_ensemble
}

/// One run of the motif as `KERNEL_PROFILE` says (see the module docs).
fn profile(spec: &str) {
    let Some((observers, t_end)) = spec.split_once(',') else {
        panic!("KERNEL_PROFILE=<observers>,<t_end>, got {spec}");
    };
    let t_end: f64 = t_end.parse().expect("t_end");
    let network = net(MM);
    let k = CompiledKernel::new(&network).unwrap();
    let mut d = Direct::new(&k);
    let mut rng = replicate_rng(1, 0);
    let summary = match observers {
        "all" => {
            let mut obs = (
                Recorder::new(record(t_end), &k),
                Integrals::new(t_end, 0.0, &k),
            );
            d.run(&k.x0, t_end, &mut rng, &mut obs)
        }
        _ => d.run(&k.x0, t_end, &mut rng, &mut ()),
    };
    println!("{} events", summary.unwrap().events);
}

fn main() {
    if let Ok(spec) = std::env::var("KERNEL_PROFILE") {
        profile(&spec);
        return;
    }
    benches();
    Criterion::default().configure_from_args().final_summary();
}
