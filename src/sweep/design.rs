//! Sweep designs: which values each point takes, and each point's seed.
//!
//! - Grid: the product of the dimensions' values, numbered like nested loops with the first
//!   `--vary` outermost and the last one fastest.
//! - Latin hypercube (McKay, Beckman & Conover 1979, Technometrics 21:239 \[M\]): with P points,
//!   every dimension's range is cut into P equal strata (equal in ln for a log range), and each
//!   stratum of each dimension holds exactly one point. Point i sits in stratum π_d(i) of
//!   dimension d, at a uniform position inside it; the permutations π_d and the positions are
//!   drawn from the sweep seed alone. A list dimension of P values is used once per value.
//!
//! Point i's seed is the (i+1)-th output of SplitMix64 started at the sweep seed (Steele, Lea &
//! Flood 2014, "Fast splittable pseudorandom number generators", OOPSLA \[M\]): it depends on
//! (seed, i) alone, never on sharding, threads or the order in which points finish.

use super::spec::{Scale, Vary};
use crate::error::{Error, Result};
use crate::network::Overrides;
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// Largest sweep copyloop runs: beyond this a design is almost surely a typing mistake, and
/// the bookkeeping of finished points would no longer fit comfortably in memory.
pub const MAX_POINTS: u64 = 100_000_000;

pub use crate::kernel::rng::point_seed;

/// The stream a Latin hypercube is drawn from: a SplitMix64 output no point index reaches.
const LHS_STREAM: u64 = 1 << 63;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DesignKind {
    Grid,
    Lhs,
}

impl DesignKind {
    pub fn as_str(self) -> &'static str {
        match self {
            DesignKind::Grid => "grid",
            DesignKind::Lhs => "lhs",
        }
    }
}

/// The points of a sweep: every point's values, in each dimension's own unit.
#[derive(Clone, Debug)]
pub struct Design {
    pub kind: DesignKind,
    pub vary: Vec<Vary>,
    pub seed: u64,
    total: u64,
    /// Grid: each dimension's values. Latin hypercube: each dimension's value at every point.
    columns: Vec<Vec<f64>>,
}

impl Design {
    /// The product of the dimensions' values.
    pub fn grid(vary: Vec<Vary>, seed: u64) -> Result<Design> {
        check_names(&vary)?;
        let columns = vary
            .iter()
            .map(|v| v.grid_values())
            .collect::<Result<Vec<_>>>()?;
        let mut total: u64 = 1;
        for c in &columns {
            total = total
                .checked_mul(c.len() as u64)
                .filter(|&t| t <= MAX_POINTS)
                .ok_or_else(too_many)?;
        }
        Ok(Design {
            kind: DesignKind::Grid,
            vary,
            seed,
            total,
            columns,
        })
    }

    /// A Latin hypercube of `points` points; without `points`, the common `:N` of the specs.
    pub fn lhs(vary: Vec<Vary>, points: Option<u64>, seed: u64) -> Result<Design> {
        check_names(&vary)?;
        let given: Vec<usize> = vary
            .iter()
            .filter_map(|v| match v.scale {
                Scale::List => Some(v.list.len()),
                _ => v.count,
            })
            .collect();
        let p = match points {
            Some(p) => p,
            None => match given.first() {
                Some(&n) if given.iter().all(|&m| m == n) => n as u64,
                _ => {
                    return Err(Error::usage(
                        "--design lhs needs --points N (or specs that all give the same N)",
                    ))
                }
            },
        };
        if p == 0 || p > MAX_POINTS {
            return Err(if p == 0 {
                Error::usage("--points must be at least 1")
            } else {
                too_many()
            });
        }
        for v in &vary {
            let n = match v.scale {
                Scale::List => Some(v.list.len()),
                _ => v.count,
            };
            if let Some(n) = n.filter(|&n| n as u64 != p) {
                let what = if v.scale == Scale::List {
                    format!("lists {n} values")
                } else {
                    format!("asks for {n} values")
                };
                return Err(Error::usage(format!(
                    "--vary {}={} {what}, but the Latin hypercube has {p} points (one per \
                     stratum); give {p}, or leave `:N` out of a range",
                    v.name, v.spec
                )));
            }
        }
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(point_seed(seed, LHS_STREAM));
        let columns = vary
            .iter()
            .map(|v| {
                let strata = permutation(&mut rng, p as usize);
                strata
                    .iter()
                    .map(|&s| match v.scale {
                        Scale::List => v.list[s],
                        _ => {
                            let f = (s as f64 + unit_interval(&mut rng)) / p as f64;
                            v.finish(v.at_fraction(f))
                        }
                    })
                    .collect()
            })
            .collect();
        Ok(Design {
            kind: DesignKind::Lhs,
            vary,
            seed,
            total: p,
            columns,
        })
    }

    /// Number of points.
    pub fn total(&self) -> u64 {
        self.total
    }

    /// The grid values of each dimension (`None` for a Latin hypercube).
    pub fn grid_columns(&self) -> Option<&[Vec<f64>]> {
        (self.kind == DesignKind::Grid).then_some(&self.columns[..])
    }

    /// Point `i`'s value in each dimension (`i < total`).
    pub fn values(&self, i: u64) -> Vec<f64> {
        match self.kind {
            DesignKind::Lhs => self.columns.iter().map(|c| c[i as usize]).collect(),
            DesignKind::Grid => {
                let mut rest = i;
                let mut out = vec![0.0; self.columns.len()];
                for (d, c) in self.columns.iter().enumerate().rev() {
                    let n = c.len() as u64;
                    out[d] = c[(rest % n) as usize];
                    rest /= n;
                }
                out
            }
        }
    }

    /// The overrides that compile point `i`'s network.
    pub fn overrides(&self, i: u64) -> Overrides {
        let values = self.values(i);
        let mut o = Overrides::default();
        for (v, x) in self.vary.iter().zip(values) {
            o = o.set(&v.name, v.override_for(x));
        }
        o
    }

    /// Point `i`'s seed.
    pub fn seed_of(&self, i: u64) -> u64 {
        point_seed(self.seed, i)
    }

    /// Networks to compile before the sweep starts, so that a value the compiler rejects is
    /// reported at once rather than hours later: every value of a list, and the smallest and
    /// largest value of a range (what the compiler checks — sign, finiteness, size — is
    /// monotone in the value), each with the rest of the point at point 0's values.
    /// Each comes with its values in words (`kon = 3 nM, E = 100`).
    pub fn probes(&self) -> Vec<(String, Overrides)> {
        let first = self.values(0);
        let mut out = Vec::new();
        for (d, v) in self.vary.iter().enumerate() {
            let column = &self.columns[d];
            let picks: Vec<f64> = match v.scale {
                Scale::List => v.list.iter().map(|&x| v.finish(x)).collect(),
                Scale::Lin | Scale::Log => {
                    let lo = column.iter().copied().fold(f64::INFINITY, f64::min);
                    let hi = column.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                    vec![lo, hi]
                }
            };
            for x in picks {
                let mut o = Overrides::default();
                let mut words = Vec::new();
                for (e, w) in self.vary.iter().enumerate() {
                    let y = if e == d { x } else { first[e] };
                    o = o.set(&w.name, w.override_for(y));
                    words.push(match w.unit_text() {
                        Some(u) => format!("{} = {} {u}", w.name, crate::numbers::round_trip(y)),
                        None => format!("{} = {}", w.name, crate::numbers::round_trip(y)),
                    });
                }
                out.push((words.join(", "), o));
            }
        }
        out
    }
}

fn too_many() -> Error {
    Error::usage(format!(
        "the sweep would have more than {MAX_POINTS} points; use fewer values or a Latin \
         hypercube (--design lhs --points N)"
    ))
}

fn check_names(vary: &[Vary]) -> Result<()> {
    if vary.is_empty() {
        return Err(Error::usage("a sweep needs at least one --vary NAME=SPEC"));
    }
    for (i, v) in vary.iter().enumerate() {
        if vary[..i].iter().any(|w| w.name == v.name) {
            return Err(Error::usage(format!(
                "--vary {} is given twice; give each name once",
                v.name
            )));
        }
    }
    Ok(())
}

/// A uniform draw from [0, 1): the top 53 bits of one 64-bit output times 2⁻⁵³ (common
/// practice).
fn unit_interval(rng: &mut impl Rng) -> f64 {
    (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// A uniform integer in [0, n) by Lemire's multiply-and-reject method (Lemire 2019, "Fast random
/// integer generation in an interval", ACM TOMACS 29(1):3 \[M\]).
fn below(rng: &mut impl Rng, n: u64) -> u64 {
    let threshold = n.wrapping_neg() % n;
    loop {
        let m = rng.next_u64() as u128 * n as u128;
        if (m as u64) >= threshold {
            return (m >> 64) as u64;
        }
    }
}

/// A uniform random permutation of 0..n by the Fisher–Yates shuffle (Knuth, TAOCP vol. 2,
/// Algorithm 3.4.2P \[M\]).
fn permutation(rng: &mut impl Rng, n: usize) -> Vec<usize> {
    let mut p: Vec<usize> = (0..n).collect();
    for i in (1..n).rev() {
        let j = below(rng, i as u64 + 1) as usize;
        p.swap(i, j);
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::parser;

    fn vary(specs: &[&str]) -> Vec<Vary> {
        let src = "volume 1 pL\nspecies A = 10 nM\nspecies B = 5\nparam k = 1 /s\nparam j = 2 /s\n\
                   step s A -> B @ k\nstep t B -> 0 @ j\n";
        let ast = parser::parse("t.crn", src.as_bytes()).unwrap();
        specs
            .iter()
            .map(|s| Vary::parse(s, &ast).unwrap())
            .collect()
    }

    // SplitMix64 reference: the generator of rand_xoshiro (a general-purpose library), seeded
    // with the sweep seed, gives the same stream.
    #[test]
    fn point_seeds_are_the_splitmix64_stream() {
        let mut reference = rand_xoshiro::SplitMix64::seed_from_u64(42);
        for i in 0..5 {
            assert_eq!(point_seed(42, i), reference.next_u64());
        }
        // Published first output of SplitMix64 from state 0 (the splitmix64.c reference
        // generator; recomputed in tests/reference/tables.py [C]): 0xe220a8397b1dcdaf.
        assert_eq!(point_seed(0, 0), 0xe220_a839_7b1d_cdaf);
    }

    #[test]
    fn grid_is_numbered_like_nested_loops() {
        let d = Design::grid(vary(&["k=list:1,2", "j=list:10,20,30"]), 0).unwrap();
        assert_eq!(d.total(), 6);
        assert_eq!(d.values(0), vec![1.0, 10.0]);
        assert_eq!(d.values(1), vec![1.0, 20.0]);
        assert_eq!(d.values(3), vec![2.0, 10.0]);
        assert_eq!(d.values(5), vec![2.0, 30.0]);
    }

    #[test]
    fn lhs_points_follow_from_the_seed() {
        let a = Design::lhs(vary(&["k=lin:1..2", "j=log:1..100"]), Some(20), 7).unwrap();
        let b = Design::lhs(vary(&["k=lin:1..2", "j=log:1..100"]), Some(20), 7).unwrap();
        let c = Design::lhs(vary(&["k=lin:1..2", "j=log:1..100"]), Some(20), 8).unwrap();
        assert_eq!(a.values(13), b.values(13));
        assert_ne!(a.values(13), c.values(13));
    }

    #[test]
    fn lhs_point_count_must_agree_with_the_specs() {
        let e = Design::lhs(vary(&["k=lin:1..2:5"]), Some(6), 0).unwrap_err();
        assert!(e.to_string().contains("one per stratum"));
        let d = Design::lhs(vary(&["k=lin:1..2:5", "j=list:1,2,3,4,5"]), None, 0).unwrap();
        assert_eq!(d.total(), 5);
        assert!(Design::lhs(vary(&["k=lin:1..2"]), None, 0).is_err());
    }

    #[test]
    fn too_many_points_and_repeated_names_are_refused() {
        let big = vary(&["k=lin:1..2:10000", "j=lin:1..2:10001"]);
        assert!(Design::grid(big, 0)
            .unwrap_err()
            .to_string()
            .contains("more than"));
        let twice = vary(&["k=lin:1..2:3", "k=lin:1..2:3"]);
        assert!(Design::grid(twice, 0)
            .unwrap_err()
            .to_string()
            .contains("twice"));
    }

    #[test]
    fn permutations_are_permutations() {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
        let mut p = permutation(&mut rng, 1000);
        p.sort_unstable();
        assert_eq!(p, (0..1000).collect::<Vec<_>>());
    }
}
