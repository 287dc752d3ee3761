//! The compiler's analysis at scale: the near-linear stoichiometry, dependency graph and
//! conservation laws give exactly what the previous dense implementation gave (kept in
//! tests/compile_scale/previous.rs), on every bundled network and on random ones; the cases of
//! large networks that used to take minutes or gigabytes compile, with their results checked
//! against hand computations; laws whose coefficients do not fit are refused.

#[path = "compile_scale/previous.rs"]
mod previous;

use copyloop::kernel::compiled::Updates;
use copyloop::kernel::CompiledKernel;
use copyloop::network::{load_source, Network, Overrides};
use copyloop::Error;
use proptest::prelude::*;

fn compile(src: &str) -> Result<Network, Error> {
    load_source("t.crn", src.as_bytes(), &Overrides::default())
}

fn net(src: &str) -> Network {
    compile(src).unwrap_or_else(|e| panic!("{e}\n{src}"))
}

/// Stoichiometry, dependency graph and conservation laws equal the previous implementation's,
/// entry for entry and in the same order.
fn same_as_before(n: &Network, what: &str) {
    let s = previous::stoichiometry(n);
    for (i, row) in s.iter().enumerate() {
        assert_eq!(&n.stoichiometry.dense_row(i), row, "{what}: row {i}");
        for (j, &v) in row.iter().enumerate() {
            assert_eq!(n.stoichiometry.get(i, j), v, "{what}");
        }
    }
    let deps = previous::dependency_graph(n);
    for (j, d) in deps.iter().enumerate() {
        assert_eq!(&n.dependents.of(j), d, "{what}: dependents of {j}");
    }
    assert_eq!(
        n.conservation_laws,
        previous::conservation_laws(n),
        "{what}: conservation laws"
    );
}

#[test]
fn bundled_networks_compile_as_before() {
    let root = env!("CARGO_MANIFEST_DIR");
    let mut seen = 0;
    for dir in [
        "reactions",
        "tests/fixtures/dsmts",
        "benches",
        "tests/reference",
    ] {
        for entry in std::fs::read_dir(format!("{root}/{dir}")).unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_some_and(|e| e == "crn") {
                let text = std::fs::read_to_string(&path).unwrap();
                same_as_before(&net(&text), &path.display().to_string());
                seen += 1;
            }
        }
    }
    assert!(seen >= 18, "only {seen} bundled networks");
}

/// One step: reactant and product terms (species, coefficient).
type Step = (Vec<(usize, u32)>, Vec<(usize, u32)>);

/// Text of a network: species X0 … (the listed ones clamped), one step per (reactants,
/// products) pair of (species, coefficient) terms.
fn text(n: usize, clamped: &[usize], steps: &[Step]) -> String {
    let mut s = String::new();
    for i in 0..n {
        let held = if clamped.contains(&i) { " clamped" } else { "" };
        s.push_str(&format!("species X{i} = {}{held}\n", 5 + i));
    }
    let side = |t: &[(usize, u32)]| {
        if t.is_empty() {
            "0".to_string()
        } else {
            t.iter()
                .map(|(i, c)| format!("{c} X{i}"))
                .collect::<Vec<_>>()
                .join(" + ")
        }
    };
    for (j, (l, r)) in steps.iter().enumerate() {
        s.push_str(&format!("step r{j} {} -> {} @ 0.5\n", side(l), side(r)));
    }
    s
}

/// Terms of one side: distinct species, coefficients 1–3, order at most 3.
fn side(n: usize) -> impl Strategy<Value = Vec<(usize, u32)>> {
    proptest::collection::vec((0..n, 1u32..=3), 0..=3).prop_map(|mut v| {
        v.sort();
        v.dedup_by_key(|t| t.0);
        let mut order = 0;
        v.retain(|t| {
            order += t.1;
            order <= 3
        });
        v
    })
}

fn random_network() -> impl Strategy<Value = String> {
    (1usize..10).prop_flat_map(|n| {
        (
            proptest::collection::vec(0..n, 0..3),
            proptest::collection::vec((side(n), side(n)), 1..14),
        )
            .prop_map(move |(clamped, steps)| text(n, &clamped, &steps))
    })
}

/// Small pieces that each have laws (Michaelis–Menten, binding, a chain, dimerisation, a
/// cycle, a conversion with a factor), copied several times over disjoint species, with the
/// species and the steps of all copies shuffled together: the laws of different components
/// must come out in the same order as before, ties included.
fn many_components() -> impl Strategy<Value = String> {
    type Piece = (usize, Vec<Step>);
    let pieces: Vec<Piece> = vec![
        (
            4,
            vec![
                (vec![(0, 1), (1, 1)], vec![(2, 1)]),
                (vec![(2, 1)], vec![(0, 1), (1, 1)]),
                (vec![(2, 1)], vec![(0, 1), (3, 1)]),
            ],
        ),
        (
            3,
            vec![
                (vec![(0, 1), (1, 1)], vec![(2, 1)]),
                (vec![(2, 1)], vec![(0, 1), (1, 1)]),
            ],
        ),
        (
            3,
            vec![(vec![(0, 1)], vec![(1, 1)]), (vec![(1, 1)], vec![(2, 1)])],
        ),
        (
            2,
            vec![(vec![(0, 2)], vec![(1, 1)]), (vec![(1, 1)], vec![(0, 2)])],
        ),
        (
            3,
            vec![
                (vec![(0, 1)], vec![(1, 1)]),
                (vec![(1, 1)], vec![(2, 1)]),
                (vec![(2, 1)], vec![(0, 1)]),
            ],
        ),
        (2, vec![(vec![(0, 1)], vec![(1, 3)])]),
        (1, vec![]),
        (
            3,
            vec![(vec![(0, 1), (1, 1)], vec![(2, 1)]), (vec![(0, 1)], vec![])],
        ),
    ];
    (
        proptest::collection::vec(0..pieces.len(), 1..7),
        any::<u64>(),
        proptest::collection::vec(any::<bool>(), 0..6),
    )
        .prop_map(move |(chosen, shuffle, held)| {
            let mut state = shuffle | 1;
            let mut next = move |k: usize| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                (state % k.max(1) as u64) as usize
            };
            let mut species = 0;
            let mut steps = Vec::new();
            for &p in &chosen {
                let (size, ref s) = pieces[p];
                let shift =
                    |t: &Vec<(usize, u32)>| t.iter().map(|&(i, c)| (i + species, c)).collect();
                steps.extend(s.iter().map(|(l, r)| (shift(l), shift(r))));
                species += size;
            }
            // Relabel species and reorder steps with a Fisher–Yates shuffle.
            let mut perm: Vec<usize> = (0..species).collect();
            for i in (1..species).rev() {
                perm.swap(i, next(i + 1));
            }
            for i in (1..steps.len()).rev() {
                steps.swap(i, next(i + 1));
            }
            let relabel = |t: &Vec<(usize, u32)>| {
                let mut v: Vec<(usize, u32)> = t.iter().map(|&(i, c)| (perm[i], c)).collect();
                v.sort();
                v
            };
            let steps: Vec<_> = steps
                .iter()
                .map(|(l, r)| (relabel(l), relabel(r)))
                .collect();
            let clamped: Vec<usize> = held
                .iter()
                .enumerate()
                .filter(|(_, &h)| h)
                .map(|(k, _)| k * 5 % species.max(1))
                .collect();
            text(species, &clamped, &steps)
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn random_networks_compile_as_before(src in random_network()) {
        same_as_before(&net(&src), &src);
    }

    #[test]
    fn networks_of_many_components_compile_as_before(src in many_components()) {
        same_as_before(&net(&src), &src);
    }
}

/// A random network of `m` steps over `n` species from a fixed sequence: first-order
/// conversions, binding and unbinding, dimerisation, synthesis and degradation.
fn mixed(n: usize, m: usize, seed: u64) -> String {
    let mut s = seed;
    let mut next = |k: usize| {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((s >> 33) as usize) % k
    };
    let mut steps = Vec::new();
    for _ in 0..m {
        let (a, b, c) = (next(n), next(n), next(n));
        steps.push(match next(10) {
            0..=3 => (vec![(a, 1)], vec![(b, 1)]),
            4 | 5 if a != b => (vec![(a, 1), (b, 1)], vec![(c, 1)]),
            6 if a != b => (vec![(c, 1)], vec![(a, 1), (b, 1)]),
            7 => (vec![(a, 2)], vec![(b, 1)]),
            8 => (vec![], vec![(a, 1)]),
            _ => (vec![(a, 1)], vec![]),
        });
    }
    text(n, &[], &steps)
}

#[test]
fn medium_random_networks_compile_as_before() {
    for seed in 0..40u64 {
        for (n, m) in [(12, 30), (30, 40), (60, 50)] {
            let src = mixed(n, m, seed);
            same_as_before(&net(&src), &src);
        }
    }
}

fn chain(n: usize, factor: u32) -> String {
    let f = if factor == 1 {
        String::new()
    } else {
        format!("{factor} ")
    };
    let mut s = String::new();
    for i in 0..n {
        s.push_str(&format!("species X{i} = 1\n"));
    }
    for i in 0..n - 1 {
        s.push_str(&format!("step s{i} X{i} -> {f}X{} @ 1\n", i + 1));
    }
    s
}

// X_i -> f X_(i+1) conserves Σ f^(n-1-i)·X_i: each step removes one X_i (weight f^(n-1-i)) and
// adds f of X_(i+1) (weight f^(n-2-i) each) [C, by hand]. With f = 1000 and 7 species the first
// weight is 10^18, within i64; with 8 it is 10^21, beyond it; with 14, 10^39, beyond i128.
#[test]
fn chain_laws_are_exact_or_refused() {
    let n = net(&chain(7, 1000));
    let want: Vec<i64> = (0..7).map(|i| 1000i64.pow(6 - i)).collect();
    assert_eq!(n.conservation_laws, vec![want]);
    for (species, kind) in [(8, "more than the 64-bit"), (14, "beyond 2^127")] {
        let Err(Error::Input(d)) = compile(&chain(species, 1000)) else {
            panic!("{species} species: not refused");
        };
        assert_eq!(d.len(), 1);
        assert!(d[0].message.contains(kind), "{}", d[0].message);
        // The step at fault: the first of the chain, on the line after the species.
        assert!(d[0].message.contains("step `s0`"), "{}", d[0].message);
        assert_eq!(d[0].span.line as usize, species + 1);
        assert_eq!(Error::Input(d).exit_code(), 2);
    }
}

// A conserved total beyond i64 is refused too. 2 X -> Y conserves X + 2Y: with both at 2^50
// (the largest count) the total is 3·2^50, fine. X -> 1000 Y, Y -> 10 Z conserves
// 10000 X + 10 Y + Z [C, by hand]: with X = 2^50 the total is 1.1·10^19, beyond i64.
#[test]
fn conserved_totals_beyond_i64_are_refused() {
    let ok =
        net("species X = 1125899906842624\nspecies Y = 1125899906842624\nstep d 2 X -> Y @ 1\n");
    assert_eq!(ok.conservation_laws, vec![vec![1, 2]]);
    let big = "species X = 1125899906842624\nspecies Y = 0\nspecies Z = 0\n\
               step a X -> 1000 Y @ 1\nstep b Y -> 10 Z @ 1\n";
    let Err(Error::Input(d)) = compile(big) else {
        panic!("not refused")
    };
    assert!(d[0].message.contains("conserved total"), "{}", d[0].message);
    assert_eq!(d[0].span.line, 1);
    let fine = net(&big.replace("1125899906842624", "1000"));
    assert_eq!(fine.conservation_laws, vec![vec![10000, 10, 1]]);
}

// A chain X_0 -> X_1 -> … -> X_999 conserves the sum of all counts, and nothing else (rank 999
// of 1000 species) [C, by hand]; step s_i changes X_i and X_(i+1), read by s_i and s_(i+1).
#[test]
fn a_thousand_species_chain_compiles() {
    let n = net(&chain(1000, 1));
    assert_eq!(n.conservation_laws, vec![vec![1; 1000]]);
    assert_eq!(n.dependents.of(0), vec![0, 1]);
    assert_eq!(n.dependents.of(500), vec![500, 501]);
    assert_eq!(n.dependents.of(998), vec![998]);
    assert_eq!(n.stoichiometry.column(7), &[(7, -1), (8, 1)]);
}

// 40,000 steps A -> B_i that all change and read A: the dependency graph has 1.6·10⁹ edges,
// so the kernel walks it by species; the only law is A + Σ B_i [C, by hand].
#[test]
fn forty_thousand_steps_on_one_species_compile() {
    let m = 40_000;
    let mut src = String::from("species A = 100\n");
    for i in 0..m {
        src.push_str(&format!("species B{i} = 0\n"));
    }
    for i in 0..m {
        src.push_str(&format!("step s{i} A -> B{i} @ 1\n"));
    }
    let n = net(&src);
    assert_eq!(n.conservation_laws, vec![vec![1; m + 1]]);
    assert_eq!(n.dependents.readers(0).len(), m);
    assert_eq!(n.dependents.changed(123), &[0, 124]);
    assert_eq!(n.dependents.of(123).len(), m);
    let k = CompiledKernel::new(&n).unwrap();
    assert!(matches!(k.updates(), Updates::BySpecies { .. }));
}

#[test]
fn forty_thousand_unused_params_each_get_their_warning() {
    let m = 40_000;
    let mut src = String::from("species A = 10\nstep d A -> 0 @ 1\n");
    for i in 0..m {
        src.push_str(&format!("param p{i} = 1 /s\n"));
    }
    let n = net(&src);
    assert_eq!(n.warnings.len(), m);
    for (i, w) in n.warnings.iter().enumerate().step_by(997) {
        assert_eq!(w.message, format!("param `p{i}` is never used"));
        assert_eq!(w.span.line as usize, i + 3);
        assert_eq!(w.snippet, format!("param p{i} = 1 /s"));
    }
}

// Where the previous implementation's Fourier–Motzkin tableau passed its 4000 rows over the
// whole network, no law anywhere was taken from it; now each component has its own tableau,
// so a Michaelis–Menten motif beside 4001 species that take part in no step still gets E + C
// and S + C + P (Briggs & Haldane 1925 [M]; before: E + C and E − S − P, the same span).
#[test]
fn each_component_has_its_own_tableau() {
    let mut src = String::from(
        "species E = 10\nspecies S = 100\nspecies C = 0\nspecies P = 0\n\
         step bind E + S <-> C @ 1, 1\nstep cat C -> E + P @ 1\n",
    );
    for i in 0..4001 {
        src.push_str(&format!("species U{i} = 1\n"));
    }
    let n = net(&src);
    let laws = &n.conservation_laws;
    assert_eq!(laws.len(), 4003);
    for (k, l) in laws[..4001].iter().enumerate() {
        assert_eq!((l[4 + k], l.iter().sum::<i64>()), (1, 1));
    }
    assert_eq!(laws[4001][..4], [1, 0, 1, 0]);
    assert_eq!(laws[4002][..4], [0, 1, 1, 1]);
}
