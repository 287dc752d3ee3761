//! The projection's states: the states reachable from the initial state inside a box, in the
//! coordinates left once the conservation laws have removed their dimensions.
//!
//! A conservation law l·x = l·x₀ (integer l over the free species) fixes one species given the
//! others. The laws are brought to reduced row-echelon form by fraction-free elimination (exact
//! integer arithmetic), so that each law has a pivot species that no other law contains: the
//! pivots are the *dependent* species, x_p = (l·x₀ − Σ_{k≠p} l_k x_k)/l_p, and the rest are the
//! *independent* coordinates a state is stored and looked up by. Clamped species never change
//! and are not coordinates. The reachable states of the chain lie on the lattice the laws cut
//! out, so enumerating by reactions from x₀ visits only states that obey them.
//!
//! The box bounds each independent coordinate above (counts are never negative). A transition
//! that would cross bound k leads to the absorbing sink k instead (one sink per coordinate, as
//! in Munsky & Khammash 2006, J. Chem. Phys. 124:044104 \[M\]), so the probability that leaves
//! the projection is measured, and where it leaves says which bound to raise. A coordinate that
//! a semi-positive conservation law caps (l ≥ 0, l_k > 0: x_k ≤ l·x₀/l_k) is never bounded
//! below its cap, and so never leaks.
//!
//! Species *left out* (a species that only accumulates: produced, read by no propensity, law
//! or event, in no conservation law) are no coordinates either: they keep their initial count
//! in every state, and a reaction that changes nothing else is a transition of a state to
//! itself. Nothing reads them, so the chain of the other species is exactly the same; their
//! moments follow from it (transient.rs).

use super::schedule::Forcing;
use super::FspError;
use crate::network::{Network, Propensity};

/// How full states are rebuilt from the independent coordinates.
#[derive(Clone, Debug)]
pub struct Reduction {
    /// The initial state; clamped species keep these counts.
    template: Vec<i64>,
    /// Species indices of the independent coordinates, in order.
    pub independent: Vec<usize>,
    dependent: Vec<Dependent>,
    /// Largest value each independent coordinate can take under the conservation laws.
    pub caps: Vec<Option<u64>>,
    /// Species that are no coordinate although free (they only accumulate).
    pub left_out: Vec<usize>,
}

/// x_species = (total − Σ coefficient·coordinate)/pivot.
#[derive(Clone, Debug)]
struct Dependent {
    species: usize,
    pivot: i128,
    total: i128,
    terms: Vec<(usize, i128)>,
}

fn gcd(a: i128, b: i128) -> i128 {
    let (mut a, mut b) = (a.abs(), b.abs());
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

fn normalise(v: &mut [i128]) {
    let g = v.iter().fold(0, |g, &x| gcd(g, x));
    if g > 1 {
        v.iter_mut().for_each(|x| *x /= g);
    }
}

impl Reduction {
    /// The coordinates of `net`: free species that are not the pivot of a conservation law.
    pub fn new(net: &Network) -> Reduction {
        Reduction::from_start(net, net.initial_state(), &[], &[])
    }

    /// The coordinates from the start state `template`, using only the conservation laws that
    /// do not involve a species in `touched` (set by doses or events, which break them), with
    /// the species `left_out` (in no conservation law) kept at their start counts.
    pub fn from_start(
        net: &Network,
        template: Vec<i64>,
        touched: &[usize],
        left_out: &[usize],
    ) -> Reduction {
        let laws: Vec<&Vec<i64>> = net
            .conservation_laws
            .iter()
            .filter(|l| touched.iter().all(|&i| l[i] == 0))
            .collect();
        let free: Vec<usize> = (0..net.species.len())
            .filter(|&i| !net.species[i].clamped && !left_out.contains(&i))
            .collect();
        // Fraction-free Gauss–Jordan elimination over the free species' columns.
        let mut rows: Vec<Vec<i128>> = laws
            .iter()
            .map(|l| free.iter().map(|&i| l[i] as i128).collect())
            .collect();
        let mut pivots: Vec<usize> = Vec::new();
        let mut rank = 0;
        for c in 0..free.len() {
            let Some(p) = (rank..rows.len()).find(|&r| rows[r][c] != 0) else {
                continue;
            };
            rows.swap(rank, p);
            for r in 0..rows.len() {
                if r != rank && rows[r][c] != 0 {
                    let (a, b) = (rows[rank][c], rows[r][c]);
                    let pivot = rows[rank].clone();
                    for (x, y) in rows[r].iter_mut().zip(pivot) {
                        *x = a * *x - b * y;
                    }
                    normalise(&mut rows[r]);
                }
            }
            pivots.push(c);
            rank += 1;
            if rank == rows.len() {
                break;
            }
        }
        let independent: Vec<usize> = (0..free.len())
            .filter(|c| !pivots.contains(c))
            .map(|c| free[c])
            .collect();
        let position = |species: usize| independent.iter().position(|&s| s == species);
        let mut dependent = Vec::new();
        for (r, &c) in pivots.iter().enumerate() {
            let row = &rows[r];
            let total: i128 = free
                .iter()
                .zip(row)
                .map(|(&i, &l)| l * template[i] as i128)
                .sum();
            let terms = free
                .iter()
                .zip(row)
                .enumerate()
                .filter(|&(k, (_, &l))| k != c && l != 0)
                .map(|(_, (&i, &l))| (position(i).expect("non-pivot is independent"), l))
                .collect();
            dependent.push(Dependent {
                species: free[c],
                pivot: row[c],
                total,
                terms,
            });
        }
        // Caps from the semi-positive laws as the network states them.
        let caps = independent
            .iter()
            .map(|&i| {
                laws.iter()
                    .filter(|l| l[i] > 0 && l.iter().all(|&c| c >= 0))
                    .map(|l| {
                        let total: i64 = l.iter().zip(&template).map(|(c, x)| c * x).sum();
                        (total / l[i]) as u64
                    })
                    .min()
            })
            .collect();
        Reduction {
            template,
            independent,
            dependent,
            caps,
            left_out: left_out.to_vec(),
        }
    }

    /// Number of independent coordinates.
    pub fn dim(&self) -> usize {
        self.independent.len()
    }

    /// The coordinates of the initial state.
    pub fn initial_coords(&self) -> Vec<u32> {
        self.independent
            .iter()
            .map(|&i| self.template[i] as u32)
            .collect()
    }

    /// The full start state (every species).
    pub fn initial_full(&self) -> &[i64] {
        &self.template
    }

    /// Writes the full state (every species, clamped ones included) of `coords` into `x`.
    pub fn expand(&self, coords: &[u32], x: &mut [i64]) {
        x.copy_from_slice(&self.template);
        for (k, &i) in self.independent.iter().enumerate() {
            x[i] = coords[k] as i64;
        }
        for d in &self.dependent {
            let s: i128 = d.terms.iter().map(|&(k, l)| l * coords[k] as i128).sum();
            x[d.species] = ((d.total - s) / d.pivot) as i64;
        }
    }
}

/// An open-addressing table from coordinates to state indices (the coordinates live in the
/// projection's flat array; the table holds only indices).
struct IndexTable {
    slots: Vec<u32>,
    mask: usize,
    len: usize,
}

const EMPTY: u32 = u32::MAX;

fn hash(coords: &[u32]) -> u64 {
    // Multiply–rotate mixing of each coordinate (common practice, as in FxHash).
    let mut h: u64 = 0x243f_6a88_85a3_08d3;
    for &c in coords {
        h = (h.rotate_left(5) ^ c as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    }
    h ^ (h >> 29)
}

impl IndexTable {
    fn new() -> IndexTable {
        IndexTable {
            slots: vec![EMPTY; 1024],
            mask: 1023,
            len: 0,
        }
    }

    /// The index of `coords`, or the slot where it would go.
    fn find(&self, coords: &[u32], all: &[u32], d: usize) -> Result<u32, usize> {
        let mut slot = hash(coords) as usize & self.mask;
        loop {
            let v = self.slots[slot];
            if v == EMPTY {
                return Err(slot);
            }
            let at = v as usize * d;
            if &all[at..at + d] == coords {
                return Ok(v);
            }
            slot = (slot + 1) & self.mask;
        }
    }

    fn insert_at(&mut self, slot: usize, index: u32, all: &[u32], d: usize) {
        self.slots[slot] = index;
        self.len += 1;
        if self.len * 2 > self.slots.len() {
            let size = self.slots.len() * 2;
            self.slots = vec![EMPTY; size];
            self.mask = size - 1;
            for i in 0..self.len as u32 {
                let at = i as usize * d;
                let Err(s) = self.find(&all[at..at + d], all, d) else {
                    unreachable!("indices are distinct")
                };
                self.slots[s] = i;
            }
        }
    }
}

/// The enumerated projection: states and every transition out of each of them, by source.
pub struct Projection {
    /// Independent coordinates of every state, `dim` per state; state 0 is the initial state.
    pub coords: Vec<u32>,
    pub dim: usize,
    pub states: usize,
    /// Transitions by source: `first[s]..first[s + 1]` index `target` and `reaction`, and
    /// `rate[e·phases + p]` is the rate of transition e in phase p. A target at or above
    /// `states` is sink `target − states`.
    pub first: Vec<usize>,
    pub target: Vec<u32>,
    pub reaction: Vec<u32>,
    pub rate: Vec<f64>,
    pub phases: usize,
    /// For each dose, the state (or sink) each state jumps to.
    pub jumps: Vec<Vec<u32>>,
}

/// Where a full state `x` lies: its index (added to the table if new) or the code of the sink
/// of the first coordinate past its bound (`u32::MAX − k`).
struct Locate<'a> {
    red: &'a Reduction,
    bounds: &'a [u32],
    max_states: usize,
}

impl Locate<'_> {
    fn place(
        &self,
        x: &[i64],
        y: &mut [u32],
        coords: &mut Vec<u32>,
        table: &mut IndexTable,
    ) -> Result<u32, FspError> {
        let d = self.red.dim();
        for (k, &i) in self.red.independent.iter().enumerate() {
            if x[i] > self.bounds[k] as i64 {
                return Ok(u32::MAX - k as u32);
            }
            y[k] = x[i] as u32;
        }
        if d == 0 {
            return Ok(0);
        }
        match table.find(y, coords, d) {
            Ok(t) => Ok(t),
            Err(slot) => {
                let t = table.len;
                if t >= self.max_states {
                    return Err(FspError::TooManyStates {
                        found: t + 1,
                        max: self.max_states,
                        leaked: None,
                        stationary: false,
                    });
                }
                coords.extend_from_slice(y);
                table.insert_at(slot, t as u32, coords, d);
                Ok(t as u32)
            }
        }
    }
}

/// Enumerates the states reachable from the start inside `bounds` (one per coordinate) by
/// breadth-first search, by reactions in any phase of `forcing` and by its doses, with the rate
/// of every transition in every phase; refuses past `max_states`. A transition of a state to
/// itself is kept only for the reactions `loops` marks (those whose firings are counted).
pub fn enumerate(
    net: &Network,
    red: &Reduction,
    props: &[Propensity],
    bounds: &[u32],
    max_states: usize,
    forcing: &Forcing,
    loops: &[bool],
) -> Result<Projection, FspError> {
    let d = red.dim();
    let phases = forcing.phase_times.len();
    let mut coords = red.initial_coords();
    let mut table = IndexTable::new();
    if d > 0 {
        let Err(slot) = table.find(&coords[..d], &coords, d) else {
            unreachable!("empty table")
        };
        table.insert_at(slot, 0, &coords, d);
    } else {
        table.len = 1;
    }
    let locate = Locate {
        red,
        bounds,
        max_states,
    };
    let changes: Vec<Vec<(usize, i64)>> = net.reactions.iter().map(|r| r.change.clone()).collect();
    let n_species = net.species.len();
    let mut x = vec![0i64; n_species];
    let mut x2 = vec![0i64; n_species];
    let mut y = vec![0u32; d];
    let mut a = vec![0.0; phases];
    let (mut first, mut target, mut reaction, mut rate) =
        (vec![0usize], Vec::new(), Vec::new(), Vec::new());
    let mut jumps: Vec<Vec<u32>> = vec![Vec::new(); net.doses.len()];
    let mut s = 0usize;
    while s < table.len {
        red.expand(&coords[s * d..(s + 1) * d], &mut x);
        for (j, p) in props.iter().enumerate() {
            if changes[j].is_empty() {
                continue;
            }
            for (ap, &t) in a.iter_mut().zip(&forcing.phase_times) {
                *ap = p.eval_at(&x, forcing.params(), t);
                if !(*ap >= 0.0 && ap.is_finite()) {
                    return Err(FspError::BadPropensity {
                        reaction: net.reactions[j].label.clone(),
                        state: state_text(net, &x),
                        value: *ap,
                    });
                }
            }
            if a.iter().all(|&v| v == 0.0) {
                continue;
            }
            x2.copy_from_slice(&x);
            let mut negative = false;
            for &(i, dx) in &changes[j] {
                if net.species[i].clamped {
                    continue;
                }
                x2[i] += dx;
                negative |= x2[i] < 0;
            }
            if negative {
                return Err(FspError::BadPropensity {
                    reaction: net.reactions[j].label.clone(),
                    state: state_text(net, &x),
                    value: a.iter().copied().fold(0.0, f64::max),
                });
            }
            forcing.settle(net, &mut x2)?;
            let t = locate.place(&x2, &mut y, &mut coords, &mut table)?;
            if t as usize != s || t > u32::MAX / 2 || loops[j] {
                target.push(t);
                reaction.push(j as u32);
                rate.extend_from_slice(&a);
            }
        }
        for (dose, jump) in net.doses.iter().zip(jumps.iter_mut()) {
            x2.copy_from_slice(&x);
            if !net.species[dose.species].clamped {
                x2[dose.species] += dose.count;
            }
            forcing.settle(net, &mut x2)?;
            jump.push(locate.place(&x2, &mut y, &mut coords, &mut table)?);
        }
        first.push(target.len());
        s += 1;
    }
    let states = table.len;
    // Sinks were coded from the top of the index range; renumber them after the states.
    let renumber = |t: &mut u32| {
        if *t as u64 + d as u64 > u32::MAX as u64 {
            *t = states as u32 + (u32::MAX - *t);
        }
    };
    target.iter_mut().for_each(renumber);
    jumps.iter_mut().flatten().for_each(renumber);
    Ok(Projection {
        coords,
        dim: d,
        states,
        first,
        target,
        reaction,
        rate,
        phases,
        jumps,
    })
}

/// `A=3, B=0` for messages.
pub fn state_text(net: &Network, x: &[i64]) -> String {
    net.species
        .iter()
        .zip(x)
        .map(|(s, c)| format!("{}={c}", s.name))
        .collect::<Vec<_>>()
        .join(", ")
}
