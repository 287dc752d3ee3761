//! The sweep machinery's cost per point against a point's own work, on the bundled
//! `reactions/enzyme_clearance.crn`.
//!
//! - machinery: a sweep whose task hands back a ready document of the size a `simulate` result
//!   has (4 species, a 101-point grid of means and SDs) — so what is timed is compiling the
//!   point's network, seeding, encoding the line, writing it and syncing it to the disk, and
//!   the bookkeeping;
//! - work: one point of the docs' example (`--t-end 200 --replicates 200`): 200 direct-method
//!   trajectories of the example to t = 200 s (about 1.1e7 events), with a minimal
//!   direct-method loop written here as the stand-in for `simulate` until that task is wired
//!   into the sweep.
//!
//! `cargo bench --bench sweep` prints both and their ratio at the end.

use copyloop::network::{compile, Network};
use copyloop::sweep::{self, DesignKind, FnTask, Job, RunOptions, Store, Task};
use criterion::Criterion;
use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use serde_json::{json, Value};
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

fn example() -> String {
    format!(
        "{}/reactions/enzyme_clearance.crn",
        env!("CARGO_MANIFEST_DIR")
    )
}

/// A document shaped like a `simulate` result: per species final/time-average statistics and a
/// 101-point grid of means and SDs.
fn simulate_sized_document(net: &Network) -> Value {
    let grid: Vec<f64> = (0..101).map(|k| k as f64 * 1.234_567_89).collect();
    let mut species = serde_json::Map::new();
    let mut finals = serde_json::Map::new();
    for s in &net.species {
        species.insert(
            s.name.clone(),
            json!({"mean": grid.iter().map(|x| x * 3.3).collect::<Vec<_>>(),
                   "sd": grid.iter().map(|x| x * 0.7).collect::<Vec<_>>()}),
        );
        finals.insert(
            s.name.clone(),
            json!({"mean": 123.456, "sd": 7.89, "stderr": 0.789}),
        );
    }
    species.insert("time".into(), json!(grid));
    json!({"method": "direct", "replicates": 100, "t_end": 100.0, "final": finals,
           "time_average": finals.clone(), "grid": species})
}

/// Runs a whole sweep of `points` points of `task` into a fresh file; returns the wall time.
fn sweep_once(points: usize, task: &dyn Task, threads: usize) -> Duration {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("bench.jsonl");
    let spec = vec![format!("kon=log:1e6..1e8:{points}")];
    let plan = Job::load(&example(), &spec, DesignKind::Grid, None, 1, None).unwrap();
    let start = Instant::now();
    let store = Store::create(out.to_str().unwrap(), &plan.header(task)).unwrap();
    let todo: Vec<u64> = plan.members().collect();
    let stop = AtomicBool::new(false);
    sweep::run(
        &plan.ast,
        &plan.design,
        task,
        &todo,
        &store,
        &RunOptions {
            threads,
            stop: &stop,
            progress: &|_| {},
        },
    )
    .unwrap();
    start.elapsed()
}

fn ready_task() -> FnTask {
    let net = copyloop::network::load(&example(), &Default::default()).unwrap();
    let doc = simulate_sized_document(&net);
    FnTask::new("ready", json!({}), move |_| Ok(doc.clone()))
}

/// Gillespie direct method (Gillespie 1977, J. Phys. Chem. 81:2340 [verified]):
/// τ = −ln(u₁)/a₀, channel j the first with Σ_{k≤j} a_k > u₂·a₀. Returns the events fired in
/// `replicates` trajectories to `t_end`, replicate r seeded from (seed, r).
fn direct_method(net: &Network, replicates: u64, t_end: f64, seed: u64) -> u64 {
    let props = net.propensities();
    let mut a = vec![0.0; props.len()];
    let mut events = 0;
    for r in 0..replicates {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(sweep::point_seed(seed, r));
        let mut x = net.initial_state();
        let mut t = 0.0;
        loop {
            let mut a0 = 0.0;
            for (aj, p) in a.iter_mut().zip(&props) {
                *aj = p.eval(&x);
                a0 += *aj;
            }
            if a0 <= 0.0 {
                break;
            }
            let u1: f64 = rng.random();
            t += -(1.0 - u1).ln() / a0;
            if t > t_end {
                break;
            }
            let target = rng.random::<f64>() * a0;
            let mut acc = 0.0;
            let mut j = a.len() - 1;
            for (k, aj) in a.iter().enumerate() {
                acc += aj;
                if acc > target {
                    j = k;
                    break;
                }
            }
            for &(i, d) in &net.reactions[j].change {
                x[i] += d;
            }
            events += 1;
        }
    }
    events
}

/// The docs' example point: `--t-end 200 --replicates 200`.
const REPLICATES: u64 = 200;
const T_END: f64 = 200.0;

fn point_work() -> (Duration, u64) {
    let net = copyloop::network::load(&example(), &Default::default()).unwrap();
    let start = Instant::now();
    let events = direct_method(&net, REPLICATES, T_END, 7);
    (start.elapsed(), events)
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn benches(c: &mut Criterion) {
    let task = ready_task();
    let mut g = c.benchmark_group("sweep");
    g.sample_size(10);
    g.bench_function("machinery_per_point", |b| {
        b.iter_custom(|iters| {
            let mut total = Duration::ZERO;
            for _ in 0..iters {
                total += sweep_once(200, &task, 1) / 200;
            }
            total
        })
    });
    let plan = Job::load(
        &example(),
        &["kon=log:1e6..1e8:10".to_string()],
        DesignKind::Grid,
        None,
        1,
        None,
    )
    .unwrap();
    let o = plan.design.overrides(3);
    g.bench_function("compile_point", |b| {
        b.iter(|| compile(&plan.ast, &o).unwrap())
    });
    g.bench_function("point_work_200_trajectories_to_200s", |b| {
        b.iter(point_work)
    });
    g.finish();
}

/// The machinery's work for one point without the disk: compile the point's network, encode
/// its line.
fn cpu_part(plan: &Job, doc: &Value, i: u64) -> usize {
    let net = compile(&plan.ast, &plan.design.overrides(i)).unwrap();
    let line = sweep::store::point_line(&plan.design, i, Ok(doc));
    net.species.len() + line.len()
}

fn main() {
    let mut c = Criterion::default().configure_from_args();
    benches(&mut c);
    c.final_summary();

    let plan = Job::load(
        &example(),
        &["kon=log:1e6..1e8:1000".to_string()],
        DesignKind::Grid,
        None,
        1,
        None,
    )
    .unwrap();
    let net = copyloop::network::load(&example(), &Default::default()).unwrap();
    let doc = simulate_sized_document(&net);
    let cpu = median(
        (0..1000u64)
            .map(|i| {
                let t = Instant::now();
                std::hint::black_box(cpu_part(&plan, &doc, i));
                t.elapsed()
            })
            .collect(),
    );
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sync.jsonl");
    let task = ready_task();
    let store = Store::create(path.to_str().unwrap(), &plan.header(&task)).unwrap();
    let line = sweep::store::point_line(&plan.design, 0, Ok(&doc));
    let sync = median(
        (0..200)
            .map(|_| {
                let t = Instant::now();
                store.append(&line).unwrap();
                t.elapsed()
            })
            .collect(),
    );
    let whole = median((0..5).map(|_| sweep_once(200, &task, 1) / 200).collect());
    let runs: Vec<(Duration, u64)> = (0..3).map(|_| point_work()).collect();
    let events = runs[0].1;
    let work = median(runs.into_iter().map(|r| r.0).collect());
    let pct = |d: Duration| 100.0 * d.as_secs_f64() / work.as_secs_f64();
    println!(
        "a point's work ({REPLICATES} trajectories to {T_END} s, {events} events): {:.1} ms",
        work.as_secs_f64() * 1e3
    );
    println!(
        "  compile + encode a {}-byte line: {:.1} µs = {:.4} % of it",
        line.len(),
        cpu.as_secs_f64() * 1e6,
        pct(cpu)
    );
    println!(
        "  append + fdatasync the line:     {:.1} µs = {:.4} % of it",
        sync.as_secs_f64() * 1e6,
        pct(sync)
    );
    println!(
        "  whole sweep, per point:          {:.1} µs = {:.4} % of it",
        whole.as_secs_f64() * 1e6,
        pct(whole)
    );
}
