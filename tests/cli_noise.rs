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
        err.contains("7.8288 molecules") && err.contains("rounded to 8"),
        "{err}"
    );
    // At the file's own volume 10 nM is 6022.1 molecules: no rounding warning there.
    let out = support::cli::run(&["noise", file.to_str().unwrap(), "--replicates", "5"]);
    assert!(!String::from_utf8_lossy(&out.stderr).contains("rounded to"));
    std::fs::remove_dir_all(&dir).ok();
}
