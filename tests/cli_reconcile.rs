//! `copyloop reconcile --fit` through the built binary: the fitted value in the file's unit.

mod support;

/// Clamped Michaelis–Menten: E + S <-> C at kon, koff, C -> E + P at kcat, with E_T = 100
/// molecules and S = 500 nM clamped. The complex settles at C = E_T·S/(K + S) with
/// K = (koff + kcat)/kon (Briggs & Haldane 1925 [M]); with kon = 1e6 /M/s and koff = 1 /s that
/// is C = 50/(1.5 + kcat·s) molecules [C]. An observation C = 50/3.5 molecules is kcat = 2 /s,
/// 120 /min, and C ± 1.96 SD maps to kcat = 50/C − 1.5 per second at each end [C]. The file
/// wrote `60 /min`: the answer must be in /min, in the table and in the JSON.
#[test]
fn fit_answers_in_the_files_unit_with_an_interval() {
    let dir = std::env::temp_dir().join(format!("copyloop-cli-reconcile-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("mm.crn");
    std::fs::write(
        &file,
        "volume 1 pL\nspecies E = 100 molecules\nspecies S = 500 nM clamped\n\
         species C = 0 molecules\nspecies P = 0 molecules\nparam kon = 1e6 /M/s\n\
         param koff = 1 /s\nparam kcat = 60 /min\n\
         step bind E + S <-> C @ kon, koff\nstep turn C -> E + P @ kcat\n",
    )
    .unwrap();
    let c = 50.0 / 3.5;
    let observe = format!("C={c} molecules±1 molecules");
    let args = |json: bool| {
        let mut a = vec![
            "reconcile",
            file.to_str().unwrap(),
            "--observe",
            observe.as_str(),
            "--fit",
            "kcat",
            "--replicates",
            "8",
            "--t-end",
            "50",
            "--burn-in",
            "10",
            "--exact-states",
            "0",
            "--threads",
            "1",
        ];
        if json {
            a.push("--json");
        }
        a
    };
    let doc = support::cli::json(&args(true));
    let fit = &doc["fit"];
    assert_eq!(fit["unit"], "/min", "{fit}");
    assert_eq!(fit["original_in_unit"].as_f64(), Some(60.0), "{fit}");
    // The root is found to the steady state's accuracy; five digits are asked (the table
    // shows four) (common practice).
    let close = |got: f64, want: f64| (got - want).abs() <= 1e-5 * want;
    let v = fit["value_in_unit"].as_f64().unwrap();
    assert!(close(v, 120.0), "{fit}");
    let per_min = |level: f64| 60.0 * (50.0 / level - 1.5);
    let ci = fit["ci95_in_unit"].as_array().unwrap();
    let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
    assert!(close(lo, per_min(c + 1.96)), "{fit}");
    assert!(close(hi, per_min(c - 1.96)), "{fit}");
    let out = support::cli::run(&args(false));
    let table = String::from_utf8_lossy(&out.stdout);
    assert!(
        table.contains("fit: kcat = 120 /min, 95 % interval ["),
        "{table}"
    );
    assert!(table.contains("(the file has 60 /min)"), "{table}");
    assert!(!table.contains("canonical"), "{table}");
    std::fs::remove_dir_all(&dir).ok();
}
