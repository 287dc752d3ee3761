//! One run of each benchmark case of benches/distribution.rs, timed with the wall clock and
//! with the peak resident memory, for a quick figure without criterion's repetitions:
//! `cargo run --release --example fsp_size`.

use copyloop::distribution::{self, Options};
use copyloop::network::{load_source, Overrides};
use std::time::Instant;

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

fn main() {
    let cascade = load_source("cascade.crn", CASCADE.as_bytes(), &Overrides::default()).unwrap();
    let times: Vec<f64> = (0..51).map(|i| i as f64 * 0.2).collect();
    for threads in [1, 2] {
        let opts = Options {
            threads: Some(threads),
            bounds: Some(vec![31; 4]),
            max_states: 2_000_000,
            tolerance: 0.5,
            ..Options::default()
        };
        let t = Instant::now();
        let r = distribution::transient(&cascade, &times, &opts).unwrap();
        println!(
            "transient, {threads} thread(s): {:.2} s; {} states, {} non-zeros, q = {:.1}/s, {} products, bound {:.2e}; {}",
            t.elapsed().as_secs_f64(),
            r.states,
            r.projection.nonzeros,
            r.uniformization_rate,
            r.products,
            r.truncation_error,
            peak_memory()
        );
    }
    let binding = load_source("binding.crn", BINDING.as_bytes(), &Overrides::default()).unwrap();
    let opts = Options {
        threads: Some(1),
        bounds: Some(vec![999, 999]),
        max_states: 2_000_000,
        tolerance: 0.5,
        ..Options::default()
    };
    let t = Instant::now();
    let s = distribution::stationary(&binding, &opts).unwrap();
    println!(
        "stationary: {:.2} s; {} states, residual {:.1e}, boundary {:.1e}; {}",
        t.elapsed().as_secs_f64(),
        s.states,
        s.residual,
        s.truncation_error,
        peak_memory()
    );
}
