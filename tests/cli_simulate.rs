//! `copyloop simulate` through the built binary: the JSON keys of docs/json.md, the table, the
//! CSV grid, thread-count independence and bad flags.

mod support;

use serde_json::Value;
use support::cli::{json, run};

fn example(name: &str) -> String {
    format!("{}/reactions/{name}", env!("CARGO_MANIFEST_DIR"))
}

/// The issue's acceptance run: the enzyme example, 1000 replicates, every contract key.
#[test]
fn enzyme_example_prints_every_contract_key() {
    let file = example("enzyme_clearance.crn");
    let v = json(&[
        "simulate",
        &file,
        "--t-end",
        "100",
        "--replicates",
        "1000",
        "--json",
    ]);
    for key in [
        "method",
        "replicates",
        "seed",
        "t_end",
        "events_total",
        "wall_seconds",
        "events_per_second",
        "final",
        "time_average",
        "firings",
        "grid",
    ] {
        assert!(v.get(key).is_some(), "missing key {key}");
    }
    assert_eq!(v["method"], "direct");
    assert_eq!(v["replicates"], 1000);
    assert_eq!(v["seed"], 0);
    assert_eq!(v["t_end"], 100.0);
    assert!(v["events_total"].as_u64().unwrap() > 1_000_000);
    assert!(v["events_per_second"].as_f64().unwrap() > 0.0);
    for s in ["H", "E", "EH", "M"] {
        for k in ["mean", "sd", "stderr", "mean_molar"] {
            assert!(v["final"][s][k].is_number(), "final.{s}.{k}");
        }
        for k in ["mean", "sd", "mean_molar"] {
            assert!(v["time_average"][s][k].is_number(), "time_average.{s}.{k}");
        }
        assert_eq!(v["grid"][s]["mean"].as_array().unwrap().len(), 101);
        assert_eq!(v["grid"][s]["sd"].as_array().unwrap().len(), 101);
    }
    for r in ["bind", "bind_rev", "turnover", "excrete"] {
        assert!(v["firings"][r]["mean"].is_number() && v["firings"][r]["sd"].is_number());
    }
    let time = v["grid"]["time"].as_array().unwrap();
    assert_eq!(
        (time[0].as_f64(), time[100].as_f64()),
        (Some(0.0), Some(100.0))
    );
    // Each enzyme is an independent two-state chain E ⇌ EH with λ_on = c·H (H clamped) and
    // λ_off = koff + kcat, so P(bound at t) = θ(1 − e^(−st)), θ = λ_on/s, s = λ_on + λ_off
    // (docs/references.md §6, exact stochastic flux at clamped substrate), and the mean turnover
    // rate over [0, T] is kcat·E_T·θ·(1 − (1 − e^(−sT))/(sT)) [C derived]. Constants from the
    // file: kon = 2e7 /M/s in 1 pL (c = kon/(N_A·V)), H = 30111 molecules, koff = 0.5,
    // kcat = 1.5, E_T = 200.
    let c: f64 = 2e7 / (6.02214076e23 * 1e-12);
    let on = c * 30111.0;
    let s = on + 0.5 + 1.5;
    let t: f64 = 100.0;
    let expect = 1.5 * 200.0 * on / s * (1.0 - (1.0 - (-s * t).exp()) / (s * t));
    let rate = v["firings"]["turnover"]["rate_per_s"].as_f64().unwrap();
    let se = v["firings"]["turnover"]["stderr"].as_f64().unwrap() / t;
    assert!(
        (rate - expect).abs() < 4.0 * se,
        "turnover rate {rate} vs {expect} ± {se}"
    );
}

#[test]
fn same_seed_same_numbers_whatever_the_thread_count() {
    let file = example("receptor_signal.crn");
    let args = |threads: &'static str| {
        vec![
            "simulate",
            file.as_str(),
            "--t-end",
            "20",
            "--replicates",
            "200",
            "--seed",
            "42",
            "--threads",
            threads,
            "--json",
        ]
    };
    let strip = |mut v: Value| {
        let o = v.as_object_mut().unwrap();
        o.remove("wall_seconds");
        o.remove("events_per_second");
        v
    };
    let one = strip(json(&args("1")));
    let two = strip(json(&args("2")));
    assert_eq!(one, two);
    let other = strip(json(&[
        "simulate",
        &file,
        "--t-end",
        "20",
        "--replicates",
        "200",
        "--seed",
        "43",
        "--json",
    ]));
    assert_ne!(one["final"], other["final"]);
}

#[test]
fn table_and_csv_grid() {
    let file = example("enzyme_clearance.crn");
    let dir = std::env::temp_dir().join(format!("copyloop-cli-sim-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let csv = dir.join("grid.csv");
    let out = run(&[
        "simulate",
        &file,
        "--t-end",
        "10",
        "--replicates",
        "20",
        "--grid",
        "6",
        "--window",
        "5",
        "--out",
        csv.to_str().unwrap(),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let table = String::from_utf8(out.stdout).unwrap();
    for word in [
        "species",
        "95 % CI",
        "time average",
        "turnover",
        "rate (/s)",
        "EH",
    ] {
        assert!(table.contains(word), "table lacks {word}:\n{table}");
    }
    let text = std::fs::read_to_string(&csv).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    // Counts first, then the concentrations of species in a compartment in the unit the file
    // declared (H in nM; the others, written in molecules, in the file's first concentration
    // unit), the layout in the report's module docs.
    assert_eq!(
        lines[0],
        "time_s,H_mean,H_sd,E_mean,E_sd,EH_mean,EH_sd,M_mean,M_sd,\
         H_nM_mean,H_nM_sd,E_nM_mean,E_nM_sd,EH_nM_mean,EH_nM_sd,M_nM_mean,M_nM_sd"
    );
    assert_eq!(lines.len(), 7);
    assert!(
        lines[1].starts_with("0,30111,0,200,0,0,0,0,0"),
        "{}",
        lines[1]
    );
    assert!(lines[6].starts_with("10,"));
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn bad_flags_exit_2_with_a_message() {
    let file = example("enzyme_clearance.crn");
    let cases: &[(&[&str], &str)] = &[
        (&["--t-end", "0"], "--t-end"),
        (&["--t-end", "-3"], "--t-end"),
        (&["--t-end", "inf"], "--t-end"),
        (&["--t-end", "10", "--grid", "1"], "--grid"),
        (&["--t-end", "10", "--window", "10"], "--window"),
        (&["--t-end", "10", "--replicates", "0"], "--replicates"),
        (&["--t-end", "10", "--threads", "0"], "--threads"),
        (
            &["--t-end", "10", "--method", "tau", "--epsilon", "0"],
            "--epsilon",
        ),
        (&["--t-end", "10", "--method", "leap"], "invalid value"),
        (&["--t-end", "ten"], "invalid value"),
        (&[], "--t-end"),
    ];
    for (extra, needle) in cases {
        let mut args = vec!["simulate", file.as_str()];
        args.extend_from_slice(extra);
        let out = run(&args);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(needle), "{args:?}: {err}");
        assert!(out.stdout.is_empty());
    }
    let out = run(&["simulate", "no/such/file.crn", "--t-end", "1"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no/such/file.crn"));
}

/// A Python with pandas: CI's venv (target/ci-venv), else the system's python3.
fn python_with_pandas() -> Option<std::path::PathBuf> {
    let venv = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/ci-venv/bin/python3");
    [venv, "python3".into()].into_iter().find(|py| {
        std::process::Command::new(py)
            .args(["-c", "import pandas"])
            .output()
            .is_ok_and(|o| o.status.success())
    })
}

#[test]
fn csv_grid_loads_in_pandas_with_counts_and_file_units() {
    let Some(py) = python_with_pandas() else {
        println!("skipped: no python3 with pandas (CI installs it in target/ci-venv)");
        return;
    };
    let file = example("enzyme_clearance.crn");
    let dir = std::env::temp_dir().join(format!("copyloop-cli-pandas-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let csv = dir.join("grid.csv");
    let out = run(&[
        "simulate",
        &file,
        "--t-end",
        "10",
        "--replicates",
        "3",
        "--grid",
        "5",
        "--out",
        csv.to_str().unwrap(),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // E + EH = 200 is conserved in every replicate, so in the mean. pandas reads every
    // column as a number and the concentration of the clamped hormone
    // back as the file's 50 nM within the rounding to whole molecules: count / (N_A·V) in nM,
    // N_A = 6.02214076e23 /mol exact (SI Brochure, 9th ed. [M]), V = 1 pL, so half a
    // molecule is 0.5e9 / 6.02214076e11 nM.
    let script = r#"
import sys, pandas as pd
d = pd.read_csv(sys.argv[1])
assert list(d.columns[:3]) == ["time_s", "H_mean", "H_sd"], list(d.columns)
assert len(d) == 5, len(d)
assert all(str(t) == "float64" or str(t) == "int64" for t in d.dtypes), d.dtypes
assert list(d["time_s"]) == [0, 2.5, 5, 7.5, 10], list(d["time_s"])
assert abs(d["H_nM_mean"][0] - 50) <= 0.5e9 / 6.02214076e11, d["H_nM_mean"][0]
assert ((d["E_mean"] + d["EH_mean"] - 200).abs() < 1e-9).all(), d[["E_mean", "EH_mean"]]
print("ok", d.shape[0], d.shape[1])
"#;
    let out = std::process::Command::new(&py)
        .args(["-c", script, csv.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "pandas failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::remove_dir_all(&dir).ok();
}
