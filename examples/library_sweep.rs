//! A small parameter sweep from Rust: the immigration rate k of an immigration–death network
//! over four values, each point an ensemble whose mean is set beside its closed form.
//! `cargo run --release --example library_sweep`; the sweep file goes to the system's
//! temporary directory. Invented numbers, for illustration only.

use copyloop::ensemble::{self, EnsembleSpec};
use copyloop::sweep::{self, DesignKind, Ending, FnTask, Job, Point, Session};
use serde_json::{json, Value};

const NETWORK: &str = "# invented: a hormone X secreted at k and cleared at g per molecule
species X = 0 molecules
param k = 10 /s
param g = 1 /s
step secrete 0 -> X @ k
step clear   X -> 0 @ g
";

/// The end time of every trajectory (s).
const T_END: f64 = 2.0;

fn main() -> copyloop::Result<()> {
    let job = Job::from_source(
        "invented.crn",
        NETWORK.as_bytes().to_vec(),
        &["k=lin:5..20:4".to_string()],
        DesignKind::Grid,
        None,
        1,
        None,
    )?;
    // Each point: 400 replicates, the mean of X at T_END with its standard error.
    let task = FnTask::new("mean-at-t-end", json!({"replicates": 400}), |p: &Point| {
        let spec = EnsembleSpec {
            replicates: 400,
            seed: p.seed,
            threads: Some(p.threads),
            ..EnsembleSpec::new(T_END)
        };
        let x = &ensemble::run(p.net, &spec)?.final_state[0];
        Ok(json!({"mean": x.mean(), "stderr": x.stderr()}))
    });
    let path = std::env::temp_dir().join(format!("library_sweep-{}.jsonl", std::process::id()));
    let path = path.to_str().expect("a UTF-8 temporary path");
    let session = Session::open(&job, &task, path, false)?;
    let outcome = session.run(&job, &task, 2, &|_| {})?;
    assert_eq!(
        session.ending(&outcome),
        Ending::Complete,
        "{:?}",
        outcome.failed
    );
    drop(session);

    // X(T) is Poisson with mean (k/g)(1 − e^(−g·T)) from X(0) = 0 (common practice).
    println!("| k (/s) | ensemble mean | ± SE | closed form |");
    println!("| ---: | ---: | ---: | ---: |");
    let mut rows = Vec::new();
    sweep::scan(path, |_, entry, line: &Value| {
        rows.push((entry.point, line.clone()))
    })?;
    rows.sort_by_key(|r| r.0);
    for (i, row) in &rows {
        let k = job.design.values(*i)[0];
        let mean = row["result"]["mean"].as_f64().unwrap_or(f64::NAN);
        let se = row["result"]["stderr"].as_f64().unwrap_or(f64::NAN);
        let exact = k * (1.0 - (-T_END).exp());
        println!("| {k} | {mean:.3} | {se:.3} | {exact:.3} |");
        assert!((mean - exact).abs() < 4.0 * se, "point {i} is off");
    }
    std::fs::remove_file(path).ok();
    println!("Research output only: not a basis for diagnosis or treatment.");
    Ok(())
}
