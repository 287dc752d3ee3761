//! The network compiler against hand computations and independent linear algebra.

use copyloop::network::{load_source, Kinetics, Network, Overrides};
use proptest::prelude::*;

fn net(src: &str) -> Network {
    load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn k_of(n: &Network, label: &str) -> f64 {
    match n.reactions[n.reaction_index(label).unwrap()].kinetics {
        Kinetics::MassAction { k, .. } => k,
        _ => panic!("not mass action"),
    }
}

// docs/references.md §12 [C]: in 1 fL, k = 1e6 /M/s gives c = 1.660539067e-3 /s for A + B and
// 3.321078134e-3 /s for A + A; k0 = 1e-9 M/s gives c = 0.602214076 /s.
#[test]
fn constants_from_concentration_units() {
    let n = net("volume 1 fL\nspecies A = 10\nspecies B = 10\nspecies C = 0\n\
                 step ab A + B -> C @ 1e6 /M/s\nstep aa 2 A -> C @ 1e6 M^-1 s^-1\nstep in 0 -> A @ 1 nM/s\n");
    let c = |l: &str| {
        n.reactions[n.reaction_index(l).unwrap()]
            .stochastic_constant()
            .unwrap()
    };
    assert!(rel(c("ab"), 1.660_539_067e-3) < 1e-9);
    assert!(rel(c("aa"), 3.321_078_134e-3) < 1e-9);
    assert!(rel(c("in"), 0.602_214_076) < 1e-15);
}

// A bare number is the stochastic constant itself (Gillespie 1977 convention [M]): the
// decaying-dimerising model's c2 = 0.002 has propensity 0.002·x(x−1)/2 (docs/references.md §3).
#[test]
fn bare_numbers_are_stochastic_constants() {
    let n = net("species S1 = 1000\nspecies S2 = 0\nstep d 2 S1 -> S2 @ 0.002\n");
    let a = n.propensities()[0].eval(&[1000, 0]);
    assert!(rel(a, 999.0) < 1e-15); // docs/references.md §3 [C by hand]: a = 0.002·1000·999/2 = 999
}

// The homodimer run from concentrations gives the same stochastic constant as the count-based
// input (docs/references.md §12: c = 2k/(N_A V) for A + A).
#[test]
fn homodimer_in_concentration_matches_count_input() {
    let om = copyloop::network::AVOGADRO * 1e-15;
    let k = 0.002 * om / 2.0; // macroscopic k for c = 0.002 in 1 fL
    let molar = net(&format!(
        "volume 1 fL\nspecies A = 100\nspecies B = 0\nstep d 2 A -> B @ {k} /M/s\n"
    ));
    let counts = net("species A = 100\nspecies B = 0\nstep d 2 A -> B @ 0.002\n");
    let c1 = molar.reactions[0].stochastic_constant().unwrap();
    let c2 = counts.reactions[0].stochastic_constant().unwrap();
    assert!(rel(c1, c2) < 1e-14);
}

// Trade forms (the README's network language): half-life t gives k = ln 2/t; kd K gives k_rev = k_fwd·K.
#[test]
fn half_life_and_kd_forms() {
    let n = net("volume 1 pL\nspecies H = 1 nM\nspecies G = 10 nM\nspecies HG = 0 nM\n\
                 step carry H + G <-> HG @ 2e6 /M/s, kd 3 nM\nstep clear H -> 0 @ half-life 40 min\n");
    assert!(rel(k_of(&n, "carry_rev"), 2e6 * 3e-9) < 1e-15);
    assert!(rel(k_of(&n, "clear"), std::f64::consts::LN_2 / 2400.0) < 1e-15);
}

// Concentrations are rounded to whole molecules, with a warning beyond 1 % (common practice).
// 1 nM in 1 fL is about 0.6 molecules (common practice): rounds to 1, a 66 % change.
#[test]
fn rounding_warnings() {
    let n = net("volume 1 fL\nspecies A = 1 nM\nspecies B = 100 nM\nstep s A + B -> 0 @ 1 /nM/s\n");
    assert_eq!(n.species[0].initial, 1);
    assert_eq!(n.species[1].initial, 60); // 100 nM · 0.602214 = 60.22
    let msgs: Vec<&str> = n.warnings.iter().map(|w| w.message.as_str()).collect();
    assert_eq!(msgs.len(), 1, "{msgs:?}");
    assert!(
        msgs[0].contains("`A`") && msgs[0].contains("66.1 %"),
        "{msgs:?}"
    );
}

#[test]
fn overrides_replace_values_in_the_written_unit() {
    use copyloop::network::Override;
    let src = "volume 1 pL\nspecies H = 1 nM\nparam kd1 = 3 nM\nparam k = 2 /min\n\
               step b H -> 0 @ law k * sat(H, kd1) * 1 nM\n";
    let o = Overrides::default()
        .set("kd1", Override::Bare(6.0))
        .set("H", Override::Bare(2.0));
    let n = load_source("t.crn", src.as_bytes(), &o).unwrap();
    let kd1 = n
        .params
        .iter()
        .find(|p| p.name == "kd1")
        .unwrap()
        .value
        .value;
    assert!(rel(kd1, 6e-9) < 1e-15);
    assert_eq!(n.species[0].initial, (2e-9 * n.omega).round() as i64);
    // Rescaling the volume keeps concentrations: 10 × the volume, 10 × the molecules.
    let big = load_source(
        "t.crn",
        src.as_bytes(),
        &Overrides {
            rescale_volume: Some(1e-11),
            ..Overrides::default()
        },
    )
    .unwrap();
    assert!(rel(big.omega, 10.0 * net(src).omega) < 1e-15);
    assert_eq!(big.species[0].initial, (1e-9 * big.omega).round() as i64);
    // A count-given amount keeps its count at another volume (an amount in molecules is a
    // count, not a concentration).
    let counts = "volume 1 pL\nspecies A = 30 molecules\nstep s A -> 0 @ 1 /s\n";
    let o = Overrides {
        rescale_volume: Some(5e-12),
        ..Overrides::default()
    };
    assert_eq!(
        load_source("t.crn", counts.as_bytes(), &o).unwrap().species[0].initial,
        30
    );
}

/// Rank by singular values (nalgebra), an independent check of the exact integer elimination.
fn svd_rank(rows: &[Vec<f64>], cols: usize) -> usize {
    if rows.is_empty() || cols == 0 {
        return 0;
    }
    let m = nalgebra::DMatrix::from_fn(rows.len(), cols, |i, j| rows[i][j]);
    m.svd(false, false).rank(1e-9)
}

/// One reaction of a generated network: reactant and product terms (species, coefficient).
type Spec = (Vec<(usize, u32)>, Vec<(usize, u32)>);

fn network_text(spec: &[Spec], n: usize, clamped: &[bool]) -> String {
    let mut s = String::new();
    for (i, &held) in clamped.iter().enumerate().take(n) {
        s.push_str(&format!(
            "species X{i} = {}{}\n",
            10 + i,
            if held { " clamped" } else { "" }
        ));
    }
    for (j, (lhs, rhs)) in spec.iter().enumerate() {
        let side = |t: &Vec<(usize, u32)>| {
            if t.is_empty() {
                "0".to_string()
            } else {
                t.iter()
                    .map(|(i, c)| format!("{c} X{i}"))
                    .collect::<Vec<_>>()
                    .join(" + ")
            }
        };
        s.push_str(&format!("step r{j} {} -> {} @ 0.5\n", side(lhs), side(rhs)));
    }
    s
}

fn side_strategy(n: usize) -> impl Strategy<Value = Vec<(usize, u32)>> {
    proptest::collection::vec((0..n, 1u32..=2), 0..=2).prop_map(|mut v| {
        v.sort();
        v.dedup_by_key(|t| t.0);
        // keep the order at most 3
        let mut total = 0;
        v.retain(|t| {
            total += t.1;
            total <= 3
        });
        v
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    /// Random valid networks compile, and the conservation laws annihilate the stoichiometry
    /// matrix over the free species and span its whole left null space.
    #[test]
    fn conservation_laws_span_the_left_null_space(
        n in 1usize..6,
        seed in proptest::collection::vec(any::<u8>(), 0..64),
        reactions in proptest::collection::vec((side_strategy(5), side_strategy(5)), 1..8),
    ) {
        let spec: Vec<_> = reactions
            .into_iter()
            .map(|(l, r)| {
                let fix = |v: Vec<(usize, u32)>| v.into_iter().map(|(i, c)| (i % n, c)).collect::<Vec<_>>();
                let mut l = fix(l);
                let mut r = fix(r);
                l.sort(); l.dedup_by_key(|t| t.0);
                r.sort(); r.dedup_by_key(|t| t.0);
                (l, r)
            })
            .collect();
        let clamped: Vec<bool> = (0..n).map(|i| seed.get(i).is_some_and(|b| b % 5 == 0)).collect();
        let text = network_text(&spec, n, &clamped);
        let net = load_source("p.crn", text.as_bytes(), &Overrides::default())
            .unwrap_or_else(|e| panic!("{text}\n{e}"));
        let free: Vec<usize> = (0..n).filter(|&i| !clamped[i]).collect();
        let m = net.reactions.len();
        for law in &net.conservation_laws {
            for j in 0..m {
                let s: i64 = free.iter().map(|&i| law[i] * net.stoichiometry.get(i, j)).sum();
                prop_assert_eq!(s, 0, "{}", text);
            }
            for i in 0..n {
                if clamped[i] { prop_assert_eq!(law[i], 0); }
            }
        }
        let s_free: Vec<Vec<f64>> = free.iter().map(|&i| net.stoichiometry.dense_row(i).iter().map(|&x| x as f64).collect()).collect();
        let expected_dim = free.len() - svd_rank(&s_free, m);
        let laws: Vec<Vec<f64>> = net.conservation_laws.iter().map(|l| free.iter().map(|&i| l[i] as f64).collect()).collect();
        prop_assert_eq!(net.conservation_laws.len(), expected_dim, "{}", text);
        prop_assert_eq!(svd_rank(&laws, free.len()), expected_dim, "{}", text);
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    /// No edit of a valid file makes the compiler panic: it returns a network or errors.
    #[test]
    fn mutated_files_never_panic(
        which in 0usize..3,
        edits in proptest::collection::vec((any::<u16>(), any::<u8>(), 0u8..3), 1..12),
    ) {
        let files = [
            include_str!("../reactions/gland_loop.crn"),
            include_str!("../reactions/enzyme_clearance.crn"),
            include_str!("../reactions/receptor_signal.crn"),
        ];
        let mut bytes = files[which].as_bytes().to_vec();
        for (pos, byte, kind) in edits {
            let p = pos as usize % (bytes.len() + 1);
            match kind {
                0 => bytes.insert(p, byte),
                1 if p < bytes.len() => { bytes.remove(p); }
                _ if p < bytes.len() => bytes[p] = byte,
                _ => {}
            }
        }
        let result = std::panic::catch_unwind(|| {
            let _ = load_source("m.crn", &bytes, &Overrides::default());
        });
        prop_assert!(result.is_ok(), "panicked on:\n{}", String::from_utf8_lossy(&bytes));
    }
}
