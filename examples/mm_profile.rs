//! Runs the clamped Michaelis–Menten motif of the kernel benchmark through the direct method
//! with no observer, for profiling under valgrind or perf, and prints the best and median event
//! rate of 15 runs (`cargo run --profile bench --example mm_profile -- [t_end] [observers]`;
//! `observers` runs with the grid, firing counts and time integrals that `simulate` keeps,
//! `grid` with the grid and firing counts alone). The
//! benchmark proper, with the hand-specialised ceiling beside it, is
//! `cargo bench --bench kernel`.
use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct, Integrals, RecordSpec, Recorder};
use copyloop::network::{load_source, Overrides};
use std::time::Instant;

const MM: &str = include_str!("../benches/mm_clamped.crn");

fn main() {
    let t_end: f64 = std::env::args()
        .nth(1)
        .map_or(2000.0, |s| s.parse().expect("t_end"));
    let net = load_source("mm_clamped.crn", MM.as_bytes(), &Overrides::default()).expect("network");
    let k = CompiledKernel::new(&net).expect("kernel");
    let mut d = Direct::new(&k);
    let mode = std::env::args().nth(2).unwrap_or_default();
    let mut obs = (
        Recorder::new(
            RecordSpec {
                t_end,
                grid_points: 11,
                window: 0.0,
            },
            &k,
        ),
        Integrals::new(t_end, 0.0, &k),
    );
    let mut rates: Vec<f64> = (0..15)
        .map(|_| {
            let start = Instant::now();
            let mut rng = replicate_rng(1, 0);
            let run = match mode.as_str() {
                "observers" => d.run(&k.x0, t_end, &mut rng, &mut obs),
                "grid" => d.run(&k.x0, t_end, &mut rng, &mut obs.0),
                _ => d.run(&k.x0, t_end, &mut rng, &mut ()),
            };
            run.expect("run").events as f64 / start.elapsed().as_secs_f64() / 1e6
        })
        .collect();
    rates.sort_by(f64::total_cmp);
    println!(
        "M events/s over 15 runs: best {:.1}, median {:.1}",
        rates[14], rates[7]
    );
}
