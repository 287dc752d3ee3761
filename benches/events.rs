//! The cost of doses, triggers and time in the exact kernel (criterion; `cargo bench --bench
//! events`). Throughput is in events (channel firings) per second of one core.
//!
//! - `dosing`: immigration–death (0 → X at 10/s, X → 0 at 0.1/s per molecule) over 100 h,
//!   without doses, and with a dose of 100 molecules every hour (100 breakpoints): between
//!   breakpoints the event loop is the same, so the two rates should agree within a few per
//!   cent (the target: within 5 %). With a grid + firing-count observer as well.
//! - `triggered`: the same network with a state trigger `when X >= 150 : X = 50`, checked
//!   after every firing (the price of a state trigger).
//! - `pulsed`: the same network with its input switched by `pulse(time, 1 h, 10 min)`
//!   (a law, with breakpoints at the pulse edges), and by `1 + sin(2π·time / 1 h)` (thinning).

use copyloop::kernel::rng::replicate_rng;
use copyloop::kernel::{CompiledKernel, Direct, RecordSpec, Recorder};
use copyloop::network::{load_source, Network, Overrides};
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use std::hint::black_box;
use std::time::Duration;

const T_END: f64 = 360_000.0;

const PLAIN: &str = "species X = 100\nstep birth 0 -> X @ 10\nstep death X -> 0 @ 0.1\n";

fn net(src: &str) -> Network {
    load_source("bench.crn", src.as_bytes(), &Overrides::default()).expect("bench network")
}

fn configure() -> Criterion {
    Criterion::default()
        .sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(3))
}

/// One group of `name`: events per second of each network through the direct method, with
/// no observer and with grid + firing counts.
fn group(c: &mut Criterion, name: &str, cases: &[(&str, String)]) {
    let mut g = c.benchmark_group(name);
    for (label, src) in cases {
        let network = net(src);
        let k = CompiledKernel::new(&network).unwrap();
        let mut d = Direct::new(&k);
        let events = d
            .run(&k.x0, T_END, &mut replicate_rng(3, 0), &mut ())
            .unwrap()
            .events;
        g.throughput(Throughput::Elements(events));
        g.bench_function(format!("{label}_no_observer"), |b| {
            b.iter(|| {
                let s = d.run(&k.x0, T_END, &mut replicate_rng(3, 0), &mut ());
                black_box(s.unwrap().events)
            })
        });
        let spec = RecordSpec {
            t_end: T_END,
            grid_points: 101,
            window: 0.0,
        };
        let mut rec = Recorder::new(spec, &k);
        g.bench_function(format!("{label}_grid_and_firings"), |b| {
            b.iter(|| {
                let s = d.run(&k.x0, T_END, &mut replicate_rng(3, 0), &mut rec);
                black_box(s.unwrap().events)
            })
        });
    }
    g.finish();
}

fn bench_events(c: &mut Criterion) {
    let dosed = format!("{PLAIN}dose X += 100 molecules at 1 h every 1 h until 100 h\n");
    group(
        c,
        "dosing",
        &[("no_doses", PLAIN.to_string()), ("hourly_doses", dosed)],
    );
    let triggered = format!("{PLAIN}when X >= 150 : X = 50\n");
    group(c, "triggered", &[("state_trigger", triggered)]);
    let pulsed =
        "species X = 100\nstep birth 0 -> X @ law 20 molecules/s * pulse(time, 1 h, 30 min)\n\
                  step death X -> 0 @ 0.1\n";
    let smooth = "species X = 100\n\
                  step birth 0 -> X @ law 10 molecules/s * (1 + sin(2 * pi * time / 1 h))\n\
                  step death X -> 0 @ 0.1\n";
    group(
        c,
        "pulsed",
        &[
            ("pulse_edges", pulsed.to_string()),
            ("sin_thinning", smooth.to_string()),
        ],
    );
}

criterion_group! {
    name = benches;
    config = configure();
    targets = bench_events
}
criterion_main!(benches);
