//! The JSON Schema of every command's `--json` document (docs/schema/, generated from the
//! document types) is current, and what the commands print on the bundled networks conforms
//! to it: every required key present, every key printed declared, every value of its type.
//!
//! Regenerate the files after changing a document type with
//! `COPYLOOP_BLESS=1 cargo test --release --test json_schema`.

mod support;

use serde_json::Value;
use std::path::PathBuf;
use support::schema::{validate, Closed};

fn schema_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("docs/schema")
}

/// The committed schema of `name`; with COPYLOOP_BLESS set, the generated one, written first.
fn committed(name: &str) -> Value {
    if std::env::var_os("COPYLOOP_BLESS").is_some() {
        let (_, schema) = copyloop::report::schema::all()
            .into_iter()
            .find(|(n, _)| *n == name)
            .expect("a schema of that name");
        std::fs::create_dir_all(schema_dir()).unwrap();
        let text = serde_json::to_string_pretty(&schema).unwrap() + "\n";
        std::fs::write(schema_dir().join(format!("{name}.json")), text).unwrap();
        return schema;
    }
    let path = schema_dir().join(format!("{name}.json"));
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("{}: {e}; regenerate with COPYLOOP_BLESS=1", path.display()));
    serde_json::from_str(&text).expect("a schema file is JSON")
}

#[test]
fn the_committed_schemas_are_the_generated_ones() {
    for (name, schema) in copyloop::report::schema::all() {
        assert_eq!(
            committed(name),
            schema,
            "docs/schema/{name}.json is stale: regenerate with COPYLOOP_BLESS=1"
        );
    }
}

fn example(name: &str) -> String {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("reactions")
        .join(name)
        .to_string_lossy()
        .into_owned()
}

const NETWORKS: [&str; 5] = [
    "enzyme_clearance.crn",
    "gland_loop.crn",
    "receptor_signal.crn",
    "pulsatile_gland.crn",
    "dosed_two_compartments.crn",
];

fn conforms(command: &str, doc: &Value) {
    let schema = committed(command);
    if let Err(e) = validate(&schema, doc, Closed::Yes) {
        panic!("`{command} --json` does not match docs/schema/{command}.json: {e}");
    }
}

#[test]
fn check_output_conforms() {
    for n in NETWORKS {
        conforms(
            "check",
            &support::cli::json(&["check", &example(n), "--json"]),
        );
    }
}

#[test]
fn simulate_output_conforms_for_the_ensemble_and_the_ode() {
    for n in NETWORKS {
        let file = example(n);
        let ensemble = support::cli::json(&[
            "simulate",
            &file,
            "--t-end",
            "5",
            "--replicates",
            "3",
            "--grid",
            "4",
            "--seed",
            "1",
            "--json",
        ]);
        conforms("simulate", &ensemble);
        let ode = support::cli::json(&[
            "simulate", &file, "--t-end", "5", "--grid", "4", "--method", "ode", "--json",
        ]);
        conforms("simulate", &ode);
    }
    // With the exact comparison, on a network small enough for it.
    let exact = support::cli::json(&[
        "simulate",
        &example("receptor_signal.crn"),
        "--t-end",
        "2",
        "--replicates",
        "20",
        "--grid",
        "3",
        "--exact",
        "--json",
    ]);
    assert!(exact.get("exact").is_some(), "{exact}");
    conforms("simulate", &exact);
}

#[test]
fn steady_output_conforms() {
    for n in [
        "enzyme_clearance.crn",
        "gland_loop.crn",
        "receptor_signal.crn",
    ] {
        conforms(
            "steady",
            &support::cli::json(&["steady", &example(n), "--json"]),
        );
    }
}

// The validator itself must reject what the schema does not allow, or the checks above could
// not fail.
#[test]
fn the_validator_rejects_a_missing_key_an_unknown_key_and_a_wrong_type() {
    let schema = committed("steady");
    let good = support::cli::json(&["steady", &example("enzyme_clearance.crn"), "--json"]);
    validate(&schema, &good, Closed::Yes).unwrap();
    let mut missing = good.clone();
    missing.as_object_mut().unwrap().remove("residual");
    assert!(validate(&schema, &missing, Closed::Yes).is_err());
    let mut unknown = good.clone();
    unknown["fluxes"]["bind"]["per_minute"] = Value::from(1.0);
    assert!(validate(&schema, &unknown, Closed::Yes).is_err());
    let mut wrong = good;
    wrong["stable"] = Value::from("yes");
    assert!(validate(&schema, &wrong, Closed::Yes).is_err());
    // A document whose top level is an untagged, flattened choice: a key that none of the
    // branches declares is still caught.
    let simulate = committed("simulate");
    let mut ode = support::cli::json(&[
        "simulate",
        &example("enzyme_clearance.crn"),
        "--t-end",
        "1",
        "--method",
        "ode",
        "--json",
    ]);
    validate(&simulate, &ode, Closed::Yes).unwrap();
    ode["replicates"] = Value::from(3);
    assert!(validate(&simulate, &ode, Closed::Yes).is_err());
    assert!(validate(&simulate, &ode, Closed::No).is_ok());
}

#[test]
fn sweep_merge_and_the_initial_task_conform() {
    let dir = std::env::temp_dir().join(format!("copyloop-schema-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = example("enzyme_clearance.crn");
    let mut shards = Vec::new();
    for k in 1..=2 {
        let out = dir.join(format!("s{k}.jsonl"));
        let shard = format!("{k}/2");
        let summary = support::cli::json(&[
            "sweep",
            &file,
            "--vary",
            "kcat=list:1,2,3",
            "--task",
            "initial",
            "--shard",
            &shard,
            "--out",
            out.to_str().unwrap(),
            "--json",
        ]);
        conforms("sweep", &summary);
        let text = std::fs::read_to_string(&out).unwrap();
        for line in text.lines().skip(1) {
            let point: Value = serde_json::from_str(line).unwrap();
            conforms("sweep-initial", &point["result"]);
        }
        shards.push(out.to_string_lossy().into_owned());
    }
    let merged = dir.join("all.jsonl");
    let mut args = vec!["merge"];
    args.extend(shards.iter().map(String::as_str));
    args.extend(["--out", merged.to_str().unwrap(), "--json"]);
    conforms("merge", &support::cli::json(&args));
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn distribution_output_conforms_transient_and_stationary() {
    let file = example("receptor_signal.crn");
    let transient = support::cli::json(&[
        "distribution",
        &file,
        "--t-end",
        "2",
        "--grid",
        "3",
        "--json",
    ]);
    conforms("distribution", &transient);
    let stationary = support::cli::json(&["distribution", &file, "--stationary", "--json"]);
    assert!(stationary["stationary"].is_object(), "{stationary}");
    conforms("distribution", &stationary);
    let both = support::cli::json(&[
        "distribution",
        &file,
        "--t-end",
        "2",
        "--grid",
        "3",
        "--stationary",
        "--json",
    ]);
    conforms("distribution", &both);
}

#[test]
fn noise_and_reconcile_output_conforms() {
    for n in ["receptor_signal.crn", "enzyme_clearance.crn"] {
        let file = example(n);
        let noise = support::cli::json(&[
            "noise",
            &file,
            "--replicates",
            "4",
            "--volumes",
            "1fL,4fL",
            "--json",
        ]);
        conforms("noise", &noise);
        let reconcile = support::cli::json(&["reconcile", &file, "--replicates", "4", "--json"]);
        conforms("reconcile", &reconcile);
    }
}
