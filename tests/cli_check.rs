//! `copyloop check` on every bundled example: valid JSON with every key of docs/json.md.

mod support;

fn check_json(path: &str) -> serde_json::Value {
    support::cli::json(&["check", path, "--json"])
}

fn examples() -> Vec<String> {
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/reactions");
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path().display().to_string())
        .filter(|p| p.ends_with(".crn"))
        .collect();
    v.sort();
    v
}

#[test]
fn every_example_has_every_contract_key() {
    let files = examples();
    assert!(files.len() >= 3);
    for f in files {
        let j = check_json(&f);
        for key in [
            "species",
            "reactions",
            "stoichiometry",
            "conservation_laws",
            "omega",
            "motifs",
        ] {
            assert!(j.get(key).is_some(), "{f}: missing {key}");
        }
        let ns = j["species"].as_array().unwrap().len();
        let nr = j["reactions"].as_array().unwrap().len();
        for s in j["species"].as_array().unwrap() {
            for key in ["name", "initial_count", "clamped"] {
                assert!(s.get(key).is_some(), "{f}: species lacks {key}");
            }
        }
        for r in j["reactions"].as_array().unwrap() {
            for key in [
                "label",
                "reactants",
                "products",
                "order",
                "stochastic_constant",
            ] {
                assert!(r.get(key).is_some(), "{f}: reaction lacks {key}");
            }
        }
        let s = j["stoichiometry"].as_array().unwrap();
        assert_eq!(s.len(), ns);
        assert!(s.iter().all(|row| row.as_array().unwrap().len() == nr));
        for m in j["motifs"].as_array().unwrap() {
            for key in [
                "kind",
                "carrier",
                "ligand",
                "complex",
                "bind",
                "unbind",
                "k_half",
                "k_half_molar",
            ] {
                assert!(m.get(key).is_some(), "{f}: motif lacks {key}");
            }
            assert!(m.get("turnover").is_some() || m.get("signal").is_some());
        }
    }
}

// Briggs–Haldane K = (k_off + k_cat)/k_on (Briggs & Haldane 1925 [M]) for the enzyme example:
// (0.5 + 1.5)/2e7 M = 100 nM; Langmuir K_d = k_off/k_on = 0.2/1e7 = 20 nM for the receptor.
#[test]
fn example_motifs_and_laws() {
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/reactions");
    let j = check_json(&format!("{dir}/enzyme_clearance.crn"));
    let m = &j["motifs"][0];
    assert_eq!(m["kind"], "enzyme");
    assert_eq!(m["carrier"], "E");
    assert_eq!(m["ligand"], "H");
    assert_eq!(m["turnover"], "turnover");
    assert!((m["k_half_molar"].as_f64().unwrap() - 1e-7).abs() < 1e-20);
    assert_eq!(
        j["conservation_laws"],
        serde_json::json!([{"E": 1, "EH": 1}])
    );

    let j = check_json(&format!("{dir}/receptor_signal.crn"));
    let m = &j["motifs"][0];
    assert_eq!(m["kind"], "receptor");
    assert_eq!(m["signal"], "signal");
    assert!((m["k_half_molar"].as_f64().unwrap() - 2e-8).abs() < 1e-21);

    let j = check_json(&format!("{dir}/gland_loop.crn"));
    assert_eq!(
        j["conservation_laws"],
        serde_json::json!([{"G": 1, "HG": 1}, {"R": 1, "HR": 1}])
    );
    assert_eq!(j["motifs"].as_array().unwrap().len(), 1);
    assert_eq!(j["motifs"][0]["carrier"], "R");
    assert_eq!(j["motifs"][0]["ligand"], "H");
    assert!(j["reactions"][0]["stochastic_constant"].is_null());
}

#[test]
fn help_carries_the_research_caution() {
    for args in [vec!["--help"], vec!["check", "--help"]] {
        let out = support::cli::run(&args);
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(
            text.contains("not a basis for diagnosis or treatment"),
            "{text}"
        );
    }
}

/// An unbinding constant at the edge of f64 (1.79e308 /s; f64's largest value is about
/// 1.798e308, IEEE 754-2019 binary64 [M]) makes K = (k_off + k_cat)/k_on overflow: `check`
/// warns on the step's line, and `reconcile` names that cause, not `--t-end`, which was never
/// given.
#[test]
fn an_overflowing_k_is_warned_and_named() {
    let dir = std::env::temp_dir().join(format!("copyloop-cli-check-inf-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("inf.crn");
    std::fs::write(
        &file,
        "volume 1 pL\nspecies E = 10 nM\nspecies S = 200 nM clamped\nspecies C = 0 nM\n\
         species P = 0 nM\nstep bind E + S <-> C @ 1e6 /M/s, 1.79e308 /s\n\
         step turn C -> E + P @ 1 /s\nstep clear P -> 0 @ 0.1 /s\n",
    )
    .unwrap();
    let path = file.to_str().unwrap();
    let out = support::cli::run(&["check", path]);
    assert_eq!(out.status.code(), Some(0));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("inf.crn:6:1: the half-saturation constant K"),
        "{err}"
    );
    assert!(err.contains("overflows"), "{err}");
    let out = support::cli::run(&["reconcile", path, "--replicates", "5"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("inf.crn:6:") && err.contains("overflows"),
        "{err}"
    );
    assert!(!err.contains("--t-end"), "{err}");
    std::fs::remove_dir_all(&dir).ok();
}

// A warning is a diagnostic of its own severity: printed as `warning:` with its place, never
// as an error, and the command succeeds (common practice of compilers' diagnostics).
#[test]
fn warnings_print_as_warnings_and_the_command_succeeds() {
    let src = "volume 1 pL\nparam spare = 3 /s\nspecies A = 10 molecules\nstep s A -> 0 @ 1 /s\n";
    let net = copyloop::network::load_source(
        "spare.crn",
        src.as_bytes(),
        &copyloop::network::Overrides::default(),
    )
    .unwrap();
    assert_eq!(net.warnings.len(), 1, "{:?}", net.warnings);
    assert_eq!(net.warnings[0].severity, copyloop::error::Severity::Warning);
    let dir = std::env::temp_dir().join(format!("copyloop-warn-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("spare.crn");
    std::fs::write(&file, src).unwrap();
    let out = support::cli::run(&["check", file.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(
        err.contains("warning: ") && err.contains("spare.crn:2:7: param `spare` is never used"),
        "{err}"
    );
    assert!(!err.contains("error"), "{err}");
    std::fs::remove_dir_all(&dir).ok();
}
