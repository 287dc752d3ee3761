//! `noise --volumes` and `sweep --vary volume=…` through the built binary: at another volume an
//! amount given as a concentration keeps its concentration (its count follows the volume) and an
//! amount given in molecules keeps its count; both warn when rounding to whole molecules changes
//! an amount.

mod support;

use serde_json::Value;

/// Avogadro's number, exact since the 2019 SI (SI Brochure, 9th ed. [M]).
const N_A: f64 = 6.022_140_76e23;

/// An invented hormone H given in nM binding an invented receptor R given in molecules.
const NET: &str = "# invented example\nvolume 1 pL\nspecies H = 10 nM\n\
                   species R = 250 molecules\nspecies C = 0 molecules\n\
                   step bind H + R <-> C @ 1e6 /M/s, 0.1 /s\n";

/// H's count at volume `v` litres: c·N_A·V rounded to a whole molecule (common practice).
fn h_count(v: f64) -> f64 {
    (10e-9 * N_A * v).round()
}

fn write_net(tag: &str) -> (std::path::PathBuf, std::path::PathBuf) {
    let dir =
        std::env::temp_dir().join(format!("copyloop-cli-volumes-{tag}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("pair.crn");
    std::fs::write(&file, NET).unwrap();
    (dir, file)
}

// By hand: 10 nM · 1 pL · N_A = 6022.14 → 6022 and 10 nM · 2.5 pL · N_A = 15055.35 → 15055;
// R stays 250 at both.
#[test]
fn a_sweep_over_volume_keeps_concentrations_and_counts_as_given() {
    let (dir, file) = write_net("sweep");
    let out = dir.join("s.jsonl");
    let run = support::cli::run(&[
        "sweep",
        file.to_str().unwrap(),
        "--vary",
        "volume=list:1pL,2.5pL,0.13fL",
        "--task",
        "initial",
        "--out",
        out.to_str().unwrap(),
    ]);
    let err = String::from_utf8_lossy(&run.stderr);
    assert_eq!(run.status.code(), Some(0), "{err}");
    let text = std::fs::read_to_string(&out).unwrap();
    let mut points: Vec<Value> = text
        .lines()
        .skip(1)
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    // Points are written as they finish, in any order.
    points.sort_by_key(|p| p["point"].as_u64());
    assert_eq!(points.len(), 3);
    assert_eq!(h_count(1e-12), 6022.0);
    assert_eq!(h_count(2.5e-12), 15055.0);
    for (p, v) in points.iter().zip([1e-12, 2.5e-12, 1.3e-16]) {
        let s = &p["result"]["species"];
        assert_eq!(s["H"]["initial_count"].as_f64(), Some(h_count(v)), "{p}");
        assert_eq!(s["R"]["initial_count"].as_f64(), Some(250.0), "{p}");
    }
    // 10 nM in 0.13 fL is 0.78288 molecules: rounding it to 1 changes it by 27.7 %.
    assert!(
        err.contains("0.7829 molecules") && err.contains("rounded to 1"),
        "{err}"
    );
    assert!(!err.contains("`R` is"), "a count is never rounded: {err}");
    std::fs::remove_dir_all(&dir).ok();
}

// Every trajectory keeps H + C and R + C (conservation laws of `bind`, exact), so the ensemble
// means satisfy mean(H) + mean(C) = H(0) and mean(R) + mean(C) = R(0) up to float rounding: the
// totals show the counts each volume started from.
#[test]
fn noise_at_other_volumes_keeps_concentrations_and_counts_as_given() {
    let (dir, file) = write_net("noise");
    let j = support::cli::json(&[
        "noise",
        file.to_str().unwrap(),
        "--volumes",
        "1pL,2.5pL",
        "--replicates",
        "4",
        "--threads",
        "1",
        "--json",
    ]);
    let vols = j["volumes"].as_array().unwrap();
    assert_eq!(vols.len(), 2);
    for (vol, v) in vols.iter().zip([1e-12, 2.5e-12]) {
        let mean = |n: &str| vol["species"][n]["mean"].as_f64().unwrap();
        let h_total = mean("H") + mean("C");
        let r_total = mean("R") + mean("C");
        assert!((h_total - h_count(v)).abs() < 1e-6 * h_count(v), "{vol}");
        assert!((r_total - 250.0).abs() < 1e-9 * 250.0, "{vol}");
    }
    std::fs::remove_dir_all(&dir).ok();
}

// A dose given in molecules keeps its count at another volume, one given in nM keeps its
// concentration: 5 nM in 2 pL is 5e-9 · 2e-12 · N_A = 6022.14 → 6022 molecules (by hand).
#[test]
fn doses_keep_what_the_file_gave() {
    let dir =
        std::env::temp_dir().join(format!("copyloop-cli-volumes-dose-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("dose.crn");
    std::fs::write(
        &file,
        "# invented example\nvolume 1 pL\nspecies H = 0 nM\nspecies R = 0 molecules\n\
         step h H -> 0 @ 1e-9 /s\nstep r R -> 0 @ 1e-9 /s\n\
         dose H += 5 nM at 1 s\ndose R += 300 molecules at 1 s\n",
    )
    .unwrap();
    let out = dir.join("s.jsonl");
    let run = support::cli::run(&[
        "sweep",
        file.to_str().unwrap(),
        "--vary",
        "volume=list:2pL",
        "--task",
        "simulate",
        "--t-end",
        "2",
        "--replicates",
        "1",
        "--out",
        out.to_str().unwrap(),
    ]);
    let err = String::from_utf8_lossy(&run.stderr);
    assert_eq!(run.status.code(), Some(0), "{err}");
    let text = std::fs::read_to_string(&out).unwrap();
    let p: Value = serde_json::from_str(text.lines().nth(1).unwrap()).unwrap();
    let fin = &p["result"]["final"];
    // Decay at 1e-9 /s over 1 s removes a molecule with probability about 6e-6: with this seed
    // none is lost, and a loss would show as one molecule less.
    let h = fin["H"]["mean"].as_f64().unwrap();
    let r = fin["R"]["mean"].as_f64().unwrap();
    assert!(
        (5e-9 * 2e-12 * N_A).round() - h <= 1.0 && h <= 6022.0,
        "{p}"
    );
    assert!((299.0..=300.0).contains(&r), "{p}");
    std::fs::remove_dir_all(&dir).ok();
}
