//! Runs the clamped Michaelis–Menten motif of the kernel benchmark through the generic direct
//! method, interleaved with a loop hand-written for this motif alone, for profiling under
//! valgrind or perf (`cargo run --release --example mm_profile -- [t_end]`). The benchmark
//! proper is `cargo bench --bench kernel`.
use copyloop::kernel::rng::{exp1, replicate_rng, uniform};
use copyloop::kernel::{CompiledKernel, Direct};
use copyloop::network::{load_source, Overrides};
use rand::Rng;
use std::time::Instant;

const MM: &str = "\
species E = 100
species S = 5000 clamped
species C = 0
species P = 0
step bind E + S -> C @ 1e-3
step unbind C -> E + S @ 1
step cat C -> E + P @ 2
";

/// The motif alone: two live counts, branch selection.
#[inline(never)]
fn by_hand<R: Rng>(rng: &mut R, t_end: f64) -> u64 {
    let (c1s, c2, c3) = (1e-3 * 5000.0, 1.0, 2.0);
    let (mut e, mut c) = (100i64, 0i64);
    let (mut t, mut events) = (0.0, 0u64);
    loop {
        let a_bind = c1s * e as f64;
        let a0 = a_bind + (c2 + c3) * c as f64;
        t += exp1(rng) / a0;
        if t > t_end {
            return events;
        }
        if uniform(rng) * a0 < a_bind {
            e -= 1;
            c += 1;
        } else {
            c -= 1;
            e += 1;
        }
        events += 1;
    }
}

fn best(rates: &mut [f64]) -> f64 {
    rates.sort_by(f64::total_cmp);
    rates[rates.len() - 1]
}

fn main() {
    let t_end: f64 = std::env::args()
        .nth(1)
        .map_or(2000.0, |s| s.parse().expect("t_end"));
    let net = load_source("mm.crn", MM.as_bytes(), &Overrides::default()).expect("network");
    let k = CompiledKernel::new(&net).expect("kernel");
    let mut d = Direct::new(&k);
    let (mut generic, mut hand) = (Vec::new(), Vec::new());
    for _ in 0..15 {
        let start = Instant::now();
        let events = d
            .run(&k.x0, t_end, &mut replicate_rng(1, 0), &mut ())
            .expect("run")
            .events;
        generic.push(events as f64 / start.elapsed().as_secs_f64() / 1e6);
        let start = Instant::now();
        let events = by_hand(&mut replicate_rng(1, 0), t_end);
        hand.push(events as f64 / start.elapsed().as_secs_f64() / 1e6);
    }
    let (g, h) = (best(&mut generic), best(&mut hand));
    println!(
        "M events/s, best of 15: generic {g:.1}, by hand {h:.1}, ratio {:.2}",
        g / h
    );
}
