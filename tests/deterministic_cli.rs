//! `copyloop steady` end to end: the JSON keys of docs/json.md, the table, exit statuses.

use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_copyloop"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn temp_file(name: &str, text: &str) -> String {
    let dir = std::env::temp_dir().join(format!("copyloop-det-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path.to_string_lossy().into_owned()
}

// reactions/enzyme_clearance.crn: clamped hormone H at 50 nM (30111 molecules in 1 pL), E_T = 200,
// K = (koff + kcat)/kon = 100 nM; Briggs–Haldane (docs/references.md §6 [verified formula]): complex
// E_T·H/(K + H), turnover kcat·complex, metabolite turnover/(ln 2/600 s).
#[test]
fn steady_json_has_the_contract_keys_and_values() {
    let (code, out, err) = run(&["steady", "reactions/enzyme_clearance.crn", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let omega = 6.022_140_76e23 * 1e-12;
    let h = 30111.0;
    let k = 100e-9 * omega;
    let c = 200.0 * h / (k + h);
    let eh = &v["state"]["EH"];
    assert!(rel(eh["count"].as_f64().unwrap(), c) < 1e-9);
    assert!(rel(eh["molar"].as_f64().unwrap(), c / omega) < 1e-9);
    let t = &v["fluxes"]["turnover"];
    assert!(rel(t["per_s"].as_f64().unwrap(), 1.5 * c) < 1e-9);
    assert!(rel(t["molar_per_s"].as_f64().unwrap(), 1.5 * c / omega) < 1e-9);
    let m = v["state"]["M"]["count"].as_f64().unwrap();
    assert!(rel(m, 1.5 * c * 600.0 / std::f64::consts::LN_2) < 1e-9);
    assert!(v["residual"].as_f64().unwrap() < 1e-6);
    assert_eq!(v["stable"], serde_json::json!(true));
    for key in [
        "eigenvalues",
        "conservation",
        "method",
        "residual_relative",
        "residual_molar",
    ] {
        assert!(v.get(key).is_some(), "missing {key}");
    }
    assert_eq!(v["conservation"][0]["law"]["E"], serde_json::json!(1));
    assert!(rel(v["conservation"][0]["total"].as_f64().unwrap(), 200.0) < 1e-12);
}

#[test]
fn steady_table_reads_well_and_molar_is_null_without_volume() {
    let (code, out, _) = run(&["steady", "reactions/receptor_signal.crn"]);
    assert_eq!(code, 0);
    assert!(out.contains("stability: asymptotically stable"), "{out}");
    assert!(out.contains("flux (molecules/s)"));
    let f = temp_file(
        "counts.crn",
        "species A = 0\nstep in 0 -> A @ 10\nstep out A -> 0 @ 0.1\n",
    );
    let (code, out, _) = run(&["steady", &f, "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(v["state"]["A"]["molar"].is_null());
    assert!(v["fluxes"]["out"]["molar_per_s"].is_null());
    assert!(rel(v["state"]["A"]["count"].as_f64().unwrap(), 100.0) < 1e-12);
}

// An enzyme fed beyond its capacity (v_in = 250 > V_max = 200): no steady state, status 2, and
// the reason on stderr, nothing on stdout.
#[test]
fn no_steady_state_exits_with_status_2() {
    let f = temp_file(
        "overfed.crn",
        "species S = 0\nspecies E = 100\nspecies C = 0\nspecies P = 0\nstep feed 0 -> S @ 250\n\
         step bind E + S <-> C @ 0.01, 1\nstep cat C -> E + P @ 2\nstep out P -> 0 @ 0.1\n",
    );
    let (code, out, err) = run(&["steady", &f, "--json"]);
    assert_eq!(code, 2);
    assert!(out.is_empty());
    assert!(err.contains("S grows without bound"), "{err}");
    let (code, _, err) = run(&["steady", "no/such/file.crn"]);
    assert_eq!(code, 2);
    assert!(err.contains("no/such/file.crn"));
}
