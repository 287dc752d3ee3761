//! Tau-leaping against the exact method on the decaying–dimerising model at its published size
//! (S1 = 100,000, c = 1, 0.002, 0.5, 0.04; Gillespie 2001; Cao, Gillespie & Petzold 2006),
//! to t = 10: time per replicate for each method, one thread.

use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::tau::{Switch, Tau};
use copyloop::kernel::{CompiledKernel, Direct};
use copyloop::network::{load_source, Overrides};
use criterion::{criterion_group, criterion_main, Criterion};
use std::time::Duration;

const MODEL: &str = "species S1 = 100000\nspecies S2 = 0\nspecies S3 = 0\n\
    step decay S1 -> 0 @ 1\nstep dimer 2 S1 -> S2 @ 0.002\nstep split S2 -> 2 S1 @ 0.5\nstep conv S2 -> S3 @ 0.04\n";

fn bench(c: &mut Criterion) {
    let net = load_source("dd.crn", MODEL.as_bytes(), &Overrides::default()).unwrap();
    let kernel = CompiledKernel::new(&net).unwrap();
    let x0 = net.initial_state();
    let mut g = c.benchmark_group("decaying_dimerising_t10");
    g.sample_size(10).measurement_time(Duration::from_secs(5));
    let mut r = 0u64;
    g.bench_function("direct", |b| {
        let mut d = Direct::new(&kernel);
        b.iter(|| {
            r += 1;
            d.run(&x0, 10.0, &mut replicate_rng(1, r), &mut ()).unwrap()
        })
    });
    g.bench_function("tau_eps_0.03", |b| {
        let mut t = Tau::new(&kernel, &net, 0.03, Switch::Tau);
        b.iter(|| {
            r += 1;
            t.run(&x0, 10.0, &mut replicate_rng(1, r), &mut ()).unwrap()
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
