//! Events per second of the exact kernel as networks grow (criterion; `cargo bench --bench
//! scale`), on the stationary random networks of `benches/support/networks.rs` (M reactions
//! over M/2 species in reversible pairs, three in four first-order conversions, one in four
//! bimolecular exchanges, every species starting at 100 and staying near it): each species is
//! read by about two reactions at every size, so the work of recomputing propensities per
//! event is the same and what changes is selection and memory. M = 100 … 100,000; each size
//! with the sum tree and with composition–rejection, and the same with propensities spread
//! over twelve orders of magnitude (`spread`); one core, no observer, a run of about two
//! million events (the same run every iteration).
//!
//! `cargo run --release --example scale_plot` draws the figures criterion stored
//! (target/criterion/scale) as docs/scale.svg.

#[path = "support/networks.rs"]
mod networks;

use copyloop::kernel::direct::Selection;
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct};
use copyloop::network::{load_source, Overrides};
use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use std::hint::black_box;
use std::time::Duration;

/// The sizes benchmarked.
pub const SIZES: [usize; 7] = [100, 300, 1_000, 3_000, 10_000, 30_000, 100_000];

/// Events in one benchmarked run.
const EVENTS: f64 = 2e6;

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("scale");
    g.sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(4));
    for (spread, decades) in [("", 0.0), ("spread_", 12.0)] {
        for m in sizes() {
            one_size(&mut g, m, spread, decades);
        }
    }
    g.finish();
}

/// The sizes to run: `SCALE_SIZES` (a comma-separated list, for profiling one size under
/// valgrind without building the others) or all of [`SIZES`].
fn sizes() -> Vec<usize> {
    match std::env::var("SCALE_SIZES") {
        Ok(list) => list
            .split(',')
            .map(|m| {
                m.trim()
                    .parse()
                    .expect("SCALE_SIZES: sizes separated by commas")
            })
            .collect(),
        Err(_) => SIZES.to_vec(),
    }
}

fn one_size(
    g: &mut criterion::BenchmarkGroup<criterion::measurement::WallTime>,
    m: usize,
    spread: &str,
    decades: f64,
) {
    let net = load_source(
        "bench.crn",
        networks::stationary(m, 100, decades).as_bytes(),
        &Overrides::default(),
    )
    .expect("bench network");
    let k = CompiledKernel::new(&net).unwrap();
    for (name, selection) in [
        ("tree", Selection::Tree),
        ("rejection", Selection::Rejection),
    ] {
        let name = format!("{spread}{name}");
        let mut d = Direct::with_selection(&k, selection);
        // a₀ at the start, events per second of model time.
        let a0: f64 = (0..m)
            .map(|j| k.propensity(j, &k.state_buffer(&k.x0)))
            .sum();
        let t_end = EVENTS / a0;
        let events = d
            .run(&k.x0, t_end, &mut replicate_rng(3, 0), &mut ())
            .unwrap()
            .events;
        g.throughput(Throughput::Elements(events));
        g.bench_with_input(BenchmarkId::new(&name, m), &t_end, |b, &t_end| {
            b.iter(|| {
                let s = d.run(&k.x0, t_end, &mut replicate_rng(3, 0), &mut ());
                black_box(s.unwrap().events)
            })
        });
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
