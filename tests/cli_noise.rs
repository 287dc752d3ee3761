//! `copyloop noise` through the built binary: warnings at other volumes.

mod support;

/// 10 nM in 1.3 fL is 10e-9 · 1.3e-15 · 6.02214076e23 = 7.829 molecules (N_A exact, SI
/// Brochure, 9th ed. [M]); rounding it to 8 changes it by 2.2 %, which `noise --volumes` must
/// say, as a sweep over `volume` does.
#[test]
fn volumes_warn_when_amounts_round() {
    let dir = std::env::temp_dir().join(format!("copyloop-cli-noise-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("pair.crn");
    std::fs::write(
        &file,
        "volume 1 pL\nspecies E = 10 nM\nspecies S = 200 nM clamped\nspecies C = 0 nM\n\
         step bind E + S <-> C @ 1e6 /M/s, 1 /s\n",
    )
    .unwrap();
    let out = support::cli::run(&[
        "noise",
        file.to_str().unwrap(),
        "--replicates",
        "5",
        "--volumes",
        "1.3fL",
        "--json",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("at volume 1.3e-15 L"), "{err}");
    assert!(
        err.contains("7.829 molecules") && err.contains("rounded to 8"),
        "{err}"
    );
    // At the file's own volume 10 nM is 6022.1 molecules: no rounding warning there.
    let out = support::cli::run(&["noise", file.to_str().unwrap(), "--replicates", "5"]);
    assert!(!String::from_utf8_lossy(&out.stderr).contains("rounded to"));
    std::fs::remove_dir_all(&dir).ok();
}

/// `--exact-states` caps the exact stationary law beside the ensemble, and 0 skips it. For
/// birth–death `0 -> X @ 10`, `X -> 0 @ 1 /s` the stationary law is Poisson with mean and
/// variance k/γ = 10 (Gardiner, Handbook of Stochastic Methods, §7.1 [M]; [C]).
#[test]
fn exact_states_caps_or_skips_the_exact_columns() {
    let dir = std::env::temp_dir().join(format!("copyloop-cli-noise-x-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("bd.crn");
    std::fs::write(
        &file,
        "species X = 10\nstep make 0 -> X @ 10\nstep decay X -> 0 @ 1 /s\n",
    )
    .unwrap();
    let f = file.to_str().unwrap();
    let run = |states: &str| {
        support::cli::json(&[
            "noise",
            f,
            "--replicates",
            "4",
            "--threads",
            "1",
            "--exact-states",
            states,
            "--json",
        ])["volumes"][0]
            .clone()
    };
    let full = run("50000");
    let x = &full["species"]["X"];
    let eps = full["exact_truncation_error"].as_f64().unwrap();
    assert!(eps < 1e-5, "{full}");
    // The projection on 0..=n (n1 = n + 1 states) misplaces about its boundary probability ε, from states just past
    // n (a Poisson tail falls faster than geometrically): the k-th moment moves by about
    // ε·(n + 1)^k; twice that bounds it (common practice).
    let n1 = full["exact_states"].as_f64().unwrap();
    for (key, k) in [("exact_mean", 1), ("exact_variance", 2)] {
        let v = x[key].as_f64().unwrap();
        let bound = 2.0 * eps * n1.powi(k);
        assert!((v - 10.0).abs() <= bound, "{key} {v}, bound {bound}");
    }
    let off = run("0");
    assert!(off["species"]["X"]["exact_mean"].is_null(), "{off}");
    assert!(
        off["exact_note"]
            .as_str()
            .unwrap()
            .contains("--exact-states 0"),
        "{off}"
    );
    let small = run("5");
    assert!(small["species"]["X"]["exact_mean"].is_null(), "{small}");
    assert!(
        small["exact_note"]
            .as_str()
            .unwrap()
            .contains("more than 5 states"),
        "{small}"
    );
    std::fs::remove_dir_all(&dir).ok();
}
