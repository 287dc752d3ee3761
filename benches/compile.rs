//! Compiling and analysing large networks (criterion; `cargo bench --bench compile`): parse,
//! compile, stoichiometry, dependency graph, conservation laws, carrier motifs and warnings,
//! i.e. `network::load_source`, and then the kernel's flat form (`CompiledKernel::new`).
//!
//! - `random/M`: M reactions over M/2 species (three in four first-order conversions, one in
//!   four bimolecular), M = 1,000, 10,000, 100,000;
//! - `chain_1000`: X0 -> X1 -> … -> X999;
//! - `star_40000`: 40,000 steps A -> Bi on one species (a dependency graph of 1.6·10⁹ edges);
//! - `unused_params_40000`: 40,000 params nothing uses (40,000 warnings).
//!
//! Before the timings it prints, for each network, the peak resident memory that compiling it
//! adds (VmHWM after resetting it, less the resident size before).

#[path = "support/networks.rs"]
mod networks;

use copyloop::kernel::CompiledKernel;
use copyloop::network::{load_source, Overrides};
use criterion::{criterion_group, BenchmarkId, Criterion};
use std::hint::black_box;
use std::time::{Duration, Instant};

fn cases() -> Vec<(String, String)> {
    let mut v: Vec<(String, String)> = [1_000, 10_000, 100_000]
        .iter()
        .map(|&m| (format!("random/{m}"), networks::random(m)))
        .collect();
    v.push(("chain_1000".into(), networks::chain(1000)));
    v.push(("star_40000".into(), networks::star(40_000)));
    v.push((
        "unused_params_40000".into(),
        networks::unused_params(40_000),
    ));
    v
}

/// Environment variable under which the benchmark runs itself to measure one case.
const ONE_CASE: &str = "COPYLOOP_BENCH_COMPILE_CASE";

/// Compiles one case in this fresh process and prints the peak memory it added.
fn measure_one(name: &str) {
    let Some((_, src)) = cases().into_iter().find(|c| c.0 == name) else {
        return;
    };
    let before = networks::resident_bytes().unwrap_or(0);
    if !networks::reset_peak() {
        println!("  {name:22} (cannot reset the peak memory on this system)");
        return;
    }
    let t = Instant::now();
    let net = load_source("bench.crn", src.as_bytes(), &Overrides::default()).unwrap();
    let kernel = CompiledKernel::new(&net).unwrap();
    let dt = t.elapsed().as_secs_f64();
    let peak = networks::peak_bytes().unwrap_or(0);
    println!(
        "  {name:22} {:8.1} MB  (one run {dt:.3} s; {} species, {} reactions, {} laws)",
        peak.saturating_sub(before) as f64 / 1e6,
        net.species.len(),
        net.reactions.len(),
        net.conservation_laws.len()
    );
    black_box((kernel, net));
}

/// Each case in a process of its own, so that memory freed by one does not hide the next.
fn memory() {
    println!(
        "peak memory added by compiling (load_source + CompiledKernel::new), one process each:"
    );
    let exe = std::env::current_exe().expect("the benchmark's own path");
    for (name, _) in cases() {
        let out = std::process::Command::new(&exe)
            .env(ONE_CASE, &name)
            .output()
            .expect("the benchmark runs itself");
        print!("{}", String::from_utf8_lossy(&out.stdout));
    }
}

fn timing(c: &mut Criterion) {
    let mut g = c.benchmark_group("compile");
    g.sample_size(10)
        .warm_up_time(Duration::from_millis(200))
        .measurement_time(Duration::from_secs(3));
    for (name, src) in cases() {
        g.bench_with_input(BenchmarkId::new("load", &name), &src, |b, src| {
            b.iter(|| {
                black_box(load_source("bench.crn", src.as_bytes(), &Overrides::default()).unwrap())
            })
        });
        let net = load_source("bench.crn", src.as_bytes(), &Overrides::default()).unwrap();
        g.bench_with_input(BenchmarkId::new("kernel", &name), &net, |b, net| {
            b.iter(|| black_box(CompiledKernel::new(net).unwrap()))
        });
    }
    g.finish();
}

criterion_group!(benches, timing);

fn main() {
    if let Ok(name) = std::env::var(ONE_CASE) {
        measure_one(&name);
        return;
    }
    memory();
    benches();
    Criterion::default().configure_from_args().final_summary();
}
