//! `copyloop distribution` from the command line: the JSON keys of the contract, the CSV, the
//! SVG, and bad input.

mod support;

use support::cli::{json, run};

fn fixture(id: &str) -> String {
    format!(
        "{}/tests/fixtures/dsmts/dsmts-{id}.crn",
        env!("CARGO_MANIFEST_DIR")
    )
}

fn temp(name: &str) -> std::path::PathBuf {
    std::env::temp_dir().join(format!("copyloop-dist-{}-{name}", std::process::id()))
}

// Immigration–death 002-02 (0 -> X at 10, X -> 0 at 0.1·X from X = 0): X(t) is Poisson with
// mean 100(1 − e^{−0.1t}) (McQuarrie 1967 [verified]); the keys are those of docs/json.md.
#[test]
fn json_has_the_contract_keys_and_the_poisson_law() {
    let j = json(&[
        "distribution",
        &fixture("002-02"),
        "--t-end",
        "10",
        "--grid",
        "3",
        "--json",
    ]);
    let bound = j["truncation_error"].as_f64().unwrap();
    assert!(bound > 0.0 && bound <= 1e-6, "{bound}");
    assert!(j["states"].as_u64().unwrap() > 60);
    let times: Vec<f64> = j["times"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t.as_f64().unwrap())
        .collect();
    assert_eq!(times, vec![0.0, 5.0, 10.0]);
    let x = &j["species"]["X"];
    for key in ["mean", "variance", "fano", "p_zero", "marginal"] {
        assert_eq!(x[key].as_array().unwrap().len(), 3, "{key}");
    }
    let lambda = 100.0 * (1.0 - (-1.0f64).exp());
    assert!((x["mean"][2].as_f64().unwrap() - lambda).abs() < 1e-3);
    assert!((x["p_zero"][2].as_f64().unwrap() - (-lambda).exp()).abs() <= bound);
    let m = x["marginal"][2].as_array().unwrap();
    let sum: f64 = m.iter().map(|p| p.as_f64().unwrap()).sum();
    assert!((1.0 - sum) <= bound * (1.0 + 1e-9) && sum <= 1.0 + 1e-12);
    // Time 0: all probability on X = 0, Fano undefined (null).
    assert_eq!(x["marginal"][0], serde_json::json!([1.0]));
    assert!(x["fano"][0].is_null());
    assert!(j["stationary"].is_null());
}

// Isomerisation A <-> B (1, 3) with 100 molecules: stationary Binomial(100, 0.75), mean 75,
// variance 18.75 (docs/references.md §2c [C]); fluxes balance.
#[test]
fn stationary_only_keeps_the_keys_and_gives_the_law() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("iso.crn");
    std::fs::write(
        &f,
        "species A = 100\nspecies B = 0\nstep f A <-> B @ 1, 3\n",
    )
    .unwrap();
    let j = json(&[
        "distribution",
        f.to_str().unwrap(),
        "--stationary",
        "--json",
        "--tolerance",
        "1e-10",
    ]);
    assert_eq!(j["times"], serde_json::json!([]));
    assert!(j["species"]["A"]["mean"].as_array().unwrap().is_empty());
    let s = &j["stationary"];
    assert!((s["species"]["A"]["mean"].as_f64().unwrap() - 75.0).abs() < 1e-8);
    assert!((s["species"]["A"]["variance"].as_f64().unwrap() - 18.75).abs() < 1e-7);
    let (f, r) = (
        s["fluxes"]["f"].as_f64().unwrap(),
        s["fluxes"]["f_rev"].as_f64().unwrap(),
    );
    assert!(
        (f - 75.0).abs() < 1e-7 && (r - 75.0).abs() < 1e-7,
        "{f} {r}"
    );
    assert!(s["truncation_error"].as_f64().unwrap() <= 1e-10);
}

#[test]
fn csv_and_svg_are_written() {
    let (csv, svg) = (temp("m.csv"), temp("m.svg"));
    let out = run(&[
        "distribution",
        &fixture("003-01"),
        "--t-end",
        "20",
        "--grid",
        "5",
        "--species",
        "P2",
        "--out",
        csv.to_str().unwrap(),
        "--svg",
        svg.to_str().unwrap(),
        "--svg-times",
        "5,20",
        "--ensemble",
        "200",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let table = String::from_utf8(out.stdout).unwrap();
    assert!(table.contains("finite state projection") && table.contains("P2 (molecules)"));
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("time_s,species,count,probability"));
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert!(rows.iter().all(|r| r.len() == 4 && r[1] == "P2"));
    // Each time's probabilities sum to 1 within the bound; t = 0 is a point mass at 0.
    for t in ["0", "5", "10", "15", "20"] {
        let s: f64 = rows
            .iter()
            .filter(|r| r[0] == t)
            .map(|r| r[3].parse::<f64>().unwrap())
            .sum();
        assert!((s - 1.0).abs() < 1e-6, "t={t}: {s}");
    }
    let svg = std::fs::read_to_string(&svg).unwrap();
    assert!(svg.starts_with("<svg") || svg.starts_with("<?xml"));
    assert!(svg.contains("t = 5 s exact") && svg.contains("t = 20 s exact"));
    assert!(svg.contains("t = 20 s, 200 runs"));
    std::fs::remove_file(csv).ok();
}

#[test]
fn bad_input_exits_with_status_2() {
    let f = fixture("002-01");
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["distribution", &f], "--t-end"),
        (vec!["distribution", &f, "--t-end=-1"], "--t-end"),
        (vec!["distribution", &f, "--t-end", "inf"], "--t-end"),
        (
            vec!["distribution", &f, "--t-end", "5", "--grid", "1"],
            "--grid",
        ),
        (
            vec!["distribution", &f, "--t-end", "5", "--species", "Q"],
            "no species `Q`",
        ),
        (
            vec!["distribution", &f, "--t-end", "5", "--tolerance", "0"],
            "tolerance",
        ),
        (
            vec!["distribution", &f, "--t-end", "5", "--tolerance", "2"],
            "tolerance",
        ),
        (
            vec!["distribution", "/nonexistent/x.crn", "--t-end", "5"],
            "x.crn",
        ),
    ];
    for (args, needle) in cases {
        let out = run(&args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains(needle), "{args:?}: {err}");
    }
}

// A projection past --max-states is refused with the count it reached and a pointer to
// `simulate`.
#[test]
fn too_many_states_is_refused_with_the_count() {
    let out = run(&[
        "distribution",
        &fixture("001-07"),
        "--t-end",
        "50",
        "--max-states",
        "50",
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("more than 50 states") && err.contains("51"),
        "{err}"
    );
    assert!(err.contains("copyloop simulate"), "{err}");
}

// A syntax error keeps its file:line:column.
#[test]
fn a_bad_file_names_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("bad.crn");
    std::fs::write(&f, "species A = 1\nstep s A -> Q @ 1\n").unwrap();
    let out = run(&["distribution", f.to_str().unwrap(), "--t-end", "1"]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(err.contains("bad.crn:2:"), "{err}");
}

// `simulate --exact` on immigration–death 002-01 (0 -> X at 1, X -> 0 at 0.1·X): the suite's
// Z and Y statistics at every grid time against the exact law; with a correct direct method
// and a fixed seed, |Z| < 4 and |Y| < 5 everywhere (Evans, Gillespie & Wilkinson 2008
// [verified]; the bounds as in tests/dsmts.rs).
#[test]
fn simulate_exact_gives_the_suite_statistics() {
    let j = json(&[
        "simulate",
        &fixture("002-01"),
        "--t-end",
        "50",
        "--grid",
        "51",
        "--replicates",
        "4000",
        "--seed",
        "3",
        "--exact",
        "--json",
    ]);
    let e = &j["exact"];
    assert!(e["truncation_error"].as_f64().unwrap() <= 1e-6);
    let x = &e["species"]["X"];
    let z = x["z"].as_array().unwrap();
    assert_eq!(z.len(), 51);
    assert!(z[0].is_null(), "σ = 0 at t = 0");
    assert!(x["max_abs_z"].as_f64().unwrap() < 4.0, "{x}");
    assert!(x["max_abs_y"].as_f64().unwrap() < 5.0, "{x}");
    // μ at t = 50 is 10(1 − e^{−5}) (McQuarrie 1967 [verified]).
    let mu = x["exact_mean"][50].as_f64().unwrap();
    assert!((mu - 10.0 * (1.0 - (-5.0f64).exp())).abs() < 1e-4);
}

// A single enzyme at clamped substrate with its product P, which nothing reads: P is left out
// of the state space (two states remain), its mean is exact and its distribution is said not
// to be computed. E[P(t)] = J·t − (k₂α/(α+β)²)(1 − e^{−(α+β)t}) with α = 2, β = 2, k₂ = 1,
// J = k₂S/(K_M + S) = 0.5 (Kou et al. 2005, J. Phys. Chem. B 109:19068 [verified]; the
// finite-time term [C]). Asking to draw only P is refused after the results are printed.
#[test]
fn an_accumulating_product_is_reported_with_what_is_exact() {
    let path = temp("enzyme.crn");
    std::fs::write(
        &path,
        "species E = 1\nspecies S = 10 clamped\nspecies C = 0\nspecies P = 0\n\
         step bind E + S <-> C @ 0.2, 1\nstep cat C -> E + P @ 1\n",
    )
    .unwrap();
    let file = path.to_str().unwrap();
    let j = json(&[
        "distribution",
        file,
        "--t-end",
        "20",
        "--grid",
        "3",
        "--stationary",
        "--json",
    ]);
    assert_eq!(j["states"], 2);
    let p = &j["species"]["P"];
    assert_eq!(p["accumulates"], true);
    assert!(p["p_zero"][2].is_null());
    assert_eq!(p["marginal"][2], serde_json::json!([]));
    let want = 0.5 * 20.0 - 2.0 / 16.0 * (1.0 - (-80.0f64).exp());
    assert!((p["mean"][2].as_f64().unwrap() - want).abs() < 1e-6, "{p}");
    assert_eq!(j["species"]["E"]["accumulates"], false);
    let s = &j["stationary"]["species"]["P"];
    assert!(s["mean"].is_null());
    assert!((s["accumulation_per_s"].as_f64().unwrap() - 0.5).abs() < 1e-12);
    assert!(j["stationary"]["species"]["C"]["accumulation_per_s"].is_null());

    let out = run(&["distribution", file, "--t-end", "20", "--grid", "3"]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success());
    assert!(
        text.contains("only accumulates") && text.contains("not computed"),
        "{text}"
    );

    let svg = temp("enzyme.svg");
    let out = run(&[
        "distribution",
        file,
        "--t-end",
        "20",
        "--species",
        "P",
        "--svg",
        svg.to_str().unwrap(),
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("accumulates"), "{err}");
    assert!(String::from_utf8_lossy(&out.stdout).contains("not computed"));
    assert!(!svg.exists());
    let _ = std::fs::remove_file(&path);
}
