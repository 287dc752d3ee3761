//! The finite state projection at 10⁶ states (criterion; `cargo bench --bench distribution`).
//!
//! - transient: a four-stage cascade with feedback on its first stage (an invented scenario:
//!   a gland's product passes three compartments and inhibits its own release), every stage
//!   bounded at 31 molecules: 32⁴ = 1,048,576 states, to t = 10 s on a grid of 51 points, on
//!   one thread and on two;
//! - stationary: hormone H (made at 200/s, cleared at 1/s) binding a receptor pool of 999
//!   (H + R <-> HR at 0.01, 1 /s), H bounded at 999 and HR capped by R + HR = 999: 10⁶ states
//!   in two dimensions, one sparse LU solve.
//!
//! The projection's size, the products and the peak resident memory (VmHWM) are printed to
//! stderr beside criterion's times, with the wall and CPU time of one untimed run before each
//! group (the CPU time, from /proc/self/stat, is the steadier figure when other work shares
//! the cores). A filter that matches no benchmark, e.g. `--bench none`, prints only those.

use copyloop::distribution::{self, Options};
use copyloop::network::{load_source, Overrides};
use criterion::{criterion_group, criterion_main, Criterion};
use std::time::{Duration, Instant};

const CASCADE: &str = "species A = 0\nspecies B = 0\nspecies C = 0\nspecies D = 0\n\
    step make 0 -> A @ law 8 * inhib(D, 10)\nstep ab A -> B @ 0.5\nstep bc B -> C @ 0.5\n\
    step cd C -> D @ 0.5\nstep clear D -> 0 @ 0.5\n";

const BINDING: &str = "species H = 0\nspecies R = 999\nspecies HR = 0\n\
    step make 0 -> H @ 200\nstep clear H -> 0 @ 1\nstep bind H + R <-> HR @ 0.01, 1\n";

fn peak_memory() -> String {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM"))
                .map(|l| l.to_string())
        })
        .unwrap_or_default()
}

/// CPU seconds (user + system) of this process so far, from /proc/self/stat (clock ticks of
/// 1/100 s, the kernel's usual USER_HZ).
fn cpu_seconds() -> f64 {
    std::fs::read_to_string("/proc/self/stat")
        .ok()
        .and_then(|s| {
            let after = s.rsplit_once(')')?.1;
            let f: Vec<&str> = after.split_whitespace().collect();
            Some((f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?) / 100.0)
        })
        .unwrap_or(f64::NAN)
}

/// Runs `f` once, with its wall and CPU seconds as text.
fn timed<T>(f: impl FnOnce() -> T) -> (T, String) {
    let (wall, cpu) = (Instant::now(), cpu_seconds());
    let r = f();
    let text = format!(
        "one run {:.2} s wall, {:.2} s CPU",
        wall.elapsed().as_secs_f64(),
        cpu_seconds() - cpu
    );
    (r, text)
}

fn bench(c: &mut Criterion) {
    let cascade = load_source("cascade.crn", CASCADE.as_bytes(), &Overrides::default()).unwrap();
    let times: Vec<f64> = (0..51).map(|i| i as f64 * 0.2).collect();
    let mut g = c.benchmark_group("fsp_transient_1e6_states_51_points");
    g.sample_size(10).measurement_time(Duration::from_secs(60));
    for threads in [1, 2] {
        let opts = Options {
            threads: Some(threads),
            bounds: Some(vec![31; 4]),
            max_states: 2_000_000,
            tolerance: 0.5,
            ..Options::default()
        };
        let (r, run) = timed(|| distribution::transient(&cascade, &times, &opts).unwrap());
        eprintln!(
            "transient, {threads} thread(s): {run}; {} states, {} non-zeros, generator {} MB, q = {:.1}/s, {} products, bound {:.2e}; {}",
            r.states,
            r.projection.nonzeros,
            r.projection.generator_bytes / 1_000_000,
            r.uniformization_rate,
            r.products,
            r.truncation_error,
            peak_memory()
        );
        g.bench_function(format!("threads_{threads}"), |b| {
            b.iter(|| distribution::transient(&cascade, &times, &opts).unwrap())
        });
    }
    g.finish();

    let binding = load_source("binding.crn", BINDING.as_bytes(), &Overrides::default()).unwrap();
    let opts = Options {
        threads: Some(1),
        bounds: Some(vec![999, 999]),
        max_states: 2_000_000,
        tolerance: 0.5,
        ..Options::default()
    };
    let (s, run) = timed(|| distribution::stationary(&binding, &opts).unwrap());
    eprintln!(
        "stationary: {run}; {} states, residual {:.1e}, boundary {:.1e}; {}",
        s.states,
        s.residual,
        s.truncation_error,
        peak_memory()
    );
    let mut g = c.benchmark_group("fsp_stationary_1e6_states");
    g.sample_size(10).measurement_time(Duration::from_secs(60));
    g.bench_function("sparse_lu", |b| {
        b.iter(|| distribution::stationary(&binding, &opts).unwrap())
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
