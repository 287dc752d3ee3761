//! The sweep machinery end to end with a task written here: it reports the point's compiled
//! initial counts and three numbers drawn with rand from the point's seed.

use copyloop::network::Overrides;
use copyloop::sweep::{
    self, DesignKind, Fault, FnTask, Job, Point, RunOptions, Shard, Store, Task,
};
use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use serde_json::{json, Value};
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;

const NET: &str = "# test network\nvolume 1 pL\nspecies H = 50 nM clamped\n\
                   species E = 200 molecules\nspecies C = 0\nparam kon = 2e7 /M/s\n\
                   param koff = 0.5 /s\nstep bind E + H <-> C @ kon, koff\n";

fn plan(specs: &[&str], seed: u64, shard: Option<Shard>) -> Job {
    let specs: Vec<String> = specs.iter().map(|s| s.to_string()).collect();
    Job::from_source(
        "t.crn",
        NET.as_bytes().to_vec(),
        &specs,
        DesignKind::Grid,
        None,
        seed,
        shard,
    )
    .unwrap()
}

/// Three uniform draws from the generator seeded with `seed`.
fn draws(seed: u64) -> Vec<f64> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    (0..3).map(|_| rng.random::<f64>()).collect()
}

fn probe() -> FnTask {
    FnTask::new("probe", json!({"draws": 3}), |p: &Point| {
        let counts: BTreeMap<String, i64> = p
            .net
            .species
            .iter()
            .map(|s| (s.name.clone(), s.initial))
            .collect();
        Ok(json!({"counts": counts, "omega": p.net.omega, "draws": draws(p.seed)}))
    })
}

/// Runs `plan` with `task` into a new file at `path`; returns the outcome.
fn run_to(plan: &Job, task: &dyn Task, path: &Path, threads: usize) -> sweep::Outcome {
    let store = Store::create(path.to_str().unwrap(), &plan.header(task)).unwrap();
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
    .unwrap()
}

fn lines(path: &Path) -> BTreeMap<u64, Value> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            let v: Value = serde_json::from_str(l).unwrap();
            (v["point"].as_u64().unwrap(), v)
        })
        .collect()
}

#[test]
fn each_line_holds_the_point_its_values_and_its_seed() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("a.jsonl");
    let p = plan(&["E=list:10,20,30", "kon=log:1e6..1e8:3"], 99, None);
    let out = run_to(&p, &probe(), &f, 2);
    assert_eq!(out.written, 9);
    assert!(out.failed.is_empty() && !out.stopped);
    let got = lines(&f);
    // Reference for the point seeds: SplitMix64 as rand_xoshiro implements it, started at the
    // sweep seed; point i takes its (i+1)-th output (Steele, Lea & Flood 2014 [M]).
    let mut splitmix = rand_xoshiro::SplitMix64::seed_from_u64(99);
    for i in 0..9u64 {
        let line = &got[&i];
        let seed = rand::Rng::next_u64(&mut splitmix);
        assert_eq!(line["seed"], seed);
        // (serde_json reads a float back to within one unit in the last place.)
        let got: Vec<f64> = line["result"]["draws"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        for (a, b) in got.iter().zip(draws(seed)) {
            assert!((a - b).abs() <= 2.0 * f64::EPSILON * b.abs(), "{a} vs {b}");
        }
        let e = [10, 20, 30][(i / 3) as usize];
        assert_eq!(line["params"]["E"], json!(e as f64));
        assert_eq!(
            line["result"]["counts"]["E"], e,
            "the point's network has its values"
        );
        let kon = [1e6, 1e7, 1e8][(i % 3) as usize];
        assert!((line["params"]["kon"].as_f64().unwrap() / kon - 1.0).abs() < 1e-12);
    }
}

#[test]
fn shards_and_thread_counts_change_no_line() {
    let dir = tempfile::tempdir().unwrap();
    let specs = ["E=lin:0..100:5", "koff=list:0.1,0.2,0.3"];
    let whole = dir.path().join("whole.jsonl");
    run_to(&plan(&specs, 5, None), &probe(), &whole, 2);
    let mut from_shards = BTreeMap::new();
    for i in 1..=4 {
        let f = dir.path().join(format!("s{i}.jsonl"));
        let shard = Shard { index: i, count: 4 };
        run_to(&plan(&specs, 5, Some(shard)), &probe(), &f, 1);
        from_shards.extend(lines(&f));
    }
    assert_eq!(lines(&whole), from_shards);
}

#[test]
fn thread_budgets_never_exceed_the_threads() {
    let dir = tempfile::tempdir().unwrap();
    let in_use = Arc::new(AtomicUsize::new(0));
    let peak = Arc::new(AtomicUsize::new(0));
    let seen = Arc::new(std::sync::Mutex::new(Vec::new()));
    let (u, pk, sn) = (in_use.clone(), peak.clone(), seen.clone());
    let task = FnTask::new("budget", json!({}), move |p: &Point| {
        let now = u.fetch_add(p.threads, Ordering::SeqCst) + p.threads;
        pk.fetch_max(now, Ordering::SeqCst);
        sn.lock().unwrap().push(p.threads);
        // Some work, so that points overlap.
        let x: f64 =
            draws(p.seed).iter().sum::<f64>() + (0..20_000).map(|k| (k as f64).sqrt()).sum::<f64>();
        u.fetch_sub(p.threads, Ordering::SeqCst);
        Ok(json!({"x": x}))
    });
    for threads in [1, 2, 3, 5] {
        peak.store(0, Ordering::SeqCst);
        let f = dir.path().join(format!("b{threads}.jsonl"));
        run_to(&plan(&["E=lin:0..100:40"], 0, None), &task, &f, threads);
        assert!(peak.load(Ordering::SeqCst) <= threads, "{threads} threads");
    }
    seen.lock().unwrap().clear();
    let f = dir.path().join("one.jsonl");
    run_to(&plan(&["E=list:7"], 0, None), &task, &f, 3);
    assert_eq!(
        *seen.lock().unwrap(),
        vec![3],
        "a lone point gets every thread"
    );
}

#[test]
fn a_failing_or_panicking_point_is_written_as_an_error_and_the_rest_go_on() {
    let dir = tempfile::tempdir().unwrap();
    let task = FnTask::new("picky", json!({}), |p: &Point| match p.index {
        2 => Err(copyloop::Error::usage("no steady state here")),
        4 => panic!("a bug at point 4"),
        _ => Ok(json!({"ok": p.index})),
    });
    let f = dir.path().join("e.jsonl");
    let out = run_to(&plan(&["E=lin:0..100:6"], 0, None), &task, &f, 2);
    assert_eq!(out.written, 6);
    let failed: Vec<(u64, Fault)> = out.failed.iter().map(|f| (f.point, f.fault)).collect();
    assert_eq!(failed, vec![(2, Fault::Input), (4, Fault::Internal)]);
    let got = lines(&f);
    assert_eq!(got[&2]["error"], "no steady state here");
    assert!(got[&4]["error"]
        .as_str()
        .unwrap()
        .contains("a bug at point 4"));
    assert_eq!(got[&5]["result"]["ok"], 5);
}

#[test]
fn a_stop_request_lets_the_points_in_flight_finish() {
    let dir = tempfile::tempdir().unwrap();
    let p = plan(&["E=lin:0..1000:200"], 0, None);
    let task = probe();
    let f = dir.path().join("s.jsonl");
    let store = Store::create(f.to_str().unwrap(), &p.header(&task)).unwrap();
    let todo: Vec<u64> = p.members().collect();
    let stop = AtomicBool::new(false);
    let progress = |n: u64| {
        if n == 10 {
            stop.store(true, Ordering::SeqCst);
        }
    };
    let out = sweep::run(
        &p.ast,
        &p.design,
        &task,
        &todo,
        &store,
        &RunOptions {
            threads: 2,
            stop: &stop,
            progress: &progress,
        },
    )
    .unwrap();
    assert!(out.stopped);
    assert!(
        out.written >= 10 && out.written <= 12,
        "{} written",
        out.written
    );
    assert_eq!(lines(&f).len() as u64, out.written);
    // And resuming does the rest.
    drop(store);
    let (store, done) = Store::resume(f.to_str().unwrap(), &p.header(&task)).unwrap();
    assert_eq!(done.len() as u64, out.written);
    let rest: Vec<u64> = todo.iter().copied().filter(|i| !done.contains(i)).collect();
    let never = AtomicBool::new(false);
    sweep::run(
        &p.ast,
        &p.design,
        &task,
        &rest,
        &store,
        &RunOptions {
            threads: 2,
            stop: &never,
            progress: &|_| {},
        },
    )
    .unwrap();
    assert_eq!(lines(&f).len(), 200);
}

#[test]
fn a_task_can_recompile_its_point_at_another_volume() {
    let dir = tempfile::tempdir().unwrap();
    let task = FnTask::new("volumes", json!({}), |p: &Point| {
        let bigger = p.recompile(&Overrides {
            values: vec![],
            rescale_volume: Some(2e-12),
        })?;
        Ok(
            json!({"E": p.net.species[1].initial, "E_at_2pL": bigger.species[1].initial,
                  "H": p.net.species[0].initial, "H_at_2pL": bigger.species[0].initial}),
        )
    });
    let f = dir.path().join("v.jsonl");
    run_to(&plan(&["E=list:100", "H=list:10nM"], 0, None), &task, &f, 1);
    let r = &lines(&f)[&0]["result"];
    // An amount given as a concentration keeps it: twice the volume, twice the molecules. 10 nM
    // in 1 pL is 6022.14 molecules (N_A·V, SI 2019 [verified, docs/references.md §12]). An
    // amount given in molecules keeps its count.
    assert_eq!(r["E"], 100);
    assert_eq!(r["E_at_2pL"], 100);
    assert_eq!(r["H"], 6022);
    assert_eq!(r["H_at_2pL"], 12044);
}
