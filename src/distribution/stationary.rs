//! The stationary solver: closed classes of the projected chain, then π·A = 0 on the one closed
//! class by a sparse LU factorisation.
//!
//! For the stationary law the projection is *reflecting*: transitions that would leave it are
//! dropped (the diagonal loses them too), so the projected generator is a proper generator on
//! a finite set. A finite chain always has at least one closed communicating class, and its
//! stationary laws are the mixtures of one law per closed class; the states outside every
//! closed class are transient and carry no stationary probability (Norris 1997, Markov Chains,
//! §3.5 \[M\]). So:
//!
//! - one closed class: the stationary law is unique; it is solved on that class;
//! - more than one: the long-run law depends on where the chain starts, and the solver says
//!   so ([`FspError::ClosedClasses`]) instead of choosing one;
//! - none in the full chain (the process drifts away for ever, e.g. pure growth): on every
//!   projection the only closed class is held closed by the projection's edge, its stationary
//!   probability on the boundary does not fall as the projection grows, and growth stops at
//!   the state limit with that explanation.
//!
//! Classes are found by Tarjan's strongly connected components (Tarjan 1972, SIAM J. Comput.
//! 1:146 \[M\]) in iterative form. On the class C (n states) the balance equations A·π = 0 are
//! made non-singular by fixing π_r = 1 at a reference state r and dropping row r: a proper
//! principal block of an irreducible generator is a non-singular M-matrix (Berman & Plemmons
//! 1994, Nonnegative Matrices in the Mathematical Sciences, ch. 6 \[M\]). The block is
//! factorised by faer's sparse LU with partial pivoting and a column approximate minimum
//! degree ordering (Davis et al. 2004, ACM TOMS 30:353 \[M\]), which keeps the fill of the two-
//! and three-dimensional lattices of a CME small; π is then normalised. The reference must be
//! a probable state: fixing an improbable one makes the block nearly singular (its smallest
//! pivot is about π_min/π_r times the rates, lost to cancellation) and the solution grows by
//! the ratio of the probabilities. So r starts at a state found probable before any solve (below),
//! and moves to the entry of the solution largest in magnitude until that entry is at most
//! [`REFERENCE_SPREAD`] times π_r, which bounds the loss to two digits (at most four solves;
//! common practice). Each solve costs one factorisation, the whole cost at 10⁶ states.
//!
//! The first reference climbs the balance of each pair of opposite transitions: where s → t has
//! rate a and t → s rate b, local balance π_t·b ≈ π_s·a (exact for a reversible chain, Kelly
//! 1979, Reversibility and Stochastic Networks, §1.5 \[M\]) says π rises towards t when a > b.
//! From the initial state the walk takes the pair with the largest a/b > 1 until none is left
//! (at most n steps). A chain far from reversible may end the walk anywhere; the moves above
//! still correct it, at the cost of a second factorisation.
//!
//! The stationary error figure is the stationary probability of the boundary states (those
//! with a transition leaving the projection). The finite state projection theorem bounds
//! transient solutions only; the boundary probability is the standard indicator for the
//! stationary projection (common practice), and the projection is grown until it is below the
//! tolerance.

use super::generator::Generator;
use super::FspError;
use faer::prelude::*;
use faer::sparse::{SparseColMat, Triplet};

/// Communicating classes of the projected chain.
pub struct Classes {
    /// Class of every state.
    pub of: Vec<u32>,
    pub count: usize,
    /// Classes with no transition to another state of the projection.
    pub closed: Vec<bool>,
}

/// Strongly connected components by Tarjan's algorithm without recursion, on the graph of
/// transitions inside the projection (read through rows: an edge is source → destination; the
/// reversed graph has the same components).
pub fn classes(g: &Generator) -> Classes {
    let n = g.states;
    const NONE: u32 = u32::MAX;
    let mut index = vec![NONE; n];
    let mut low = vec![0u32; n];
    let mut on_stack = vec![false; n];
    let mut of = vec![NONE; n];
    let mut stack: Vec<u32> = Vec::new();
    let mut call: Vec<(u32, usize)> = Vec::new();
    let mut next_index = 0u32;
    let mut count = 0u32;
    for root in 0..n {
        if index[root] != NONE {
            continue;
        }
        call.push((root as u32, g.row_ptr[root]));
        index[root] = next_index;
        low[root] = next_index;
        next_index += 1;
        stack.push(root as u32);
        on_stack[root] = true;
        while let Some(&mut (v, ref mut e)) = call.last_mut() {
            let v = v as usize;
            if *e < g.row_ptr[v + 1] {
                let w = g.col[*e] as usize;
                *e += 1;
                if index[w] == NONE {
                    index[w] = next_index;
                    low[w] = next_index;
                    next_index += 1;
                    stack.push(w as u32);
                    on_stack[w] = true;
                    call.push((w as u32, g.row_ptr[w]));
                } else if on_stack[w] {
                    low[v] = low[v].min(index[w]);
                }
            } else {
                call.pop();
                if let Some(&(u, _)) = call.last() {
                    let u = u as usize;
                    low[u] = low[u].min(low[v]);
                }
                if low[v] == index[v] {
                    loop {
                        let w = stack.pop().expect("v is on the stack") as usize;
                        on_stack[w] = false;
                        of[w] = count;
                        if w == v {
                            break;
                        }
                    }
                    count += 1;
                }
            }
        }
    }
    // Row r lists the sources of transitions into r: a source outside r's class has a way out.
    let mut closed = vec![true; count as usize];
    for r in 0..n {
        for e in g.row_ptr[r]..g.row_ptr[r + 1] {
            let s = g.col[e] as usize;
            if of[s] != of[r] {
                closed[of[s] as usize] = false;
            }
        }
    }
    Classes {
        of,
        count: count as usize,
        closed,
    }
}

/// The stationary law on the states of `class` (indices into the projection), zero elsewhere,
/// and the ℓ¹ residual ‖A·π‖₁ of the reflecting generator on the class.
pub fn solve(g: &Generator, classes: &Classes, class: u32) -> Result<(Vec<f64>, f64), FspError> {
    let members: Vec<usize> = (0..g.states).filter(|&s| classes.of[s] == class).collect();
    let m = members.len();
    let mut local = vec![u32::MAX; g.states];
    for (k, &s) in members.iter().enumerate() {
        local[s] = k as u32;
    }
    let mut pi = vec![0.0; g.states];
    if m == 1 {
        pi[members[0]] = 1.0;
        return Ok((pi, 0.0));
    }
    // The reference starts at the end of the climb and moves as the module doc says.
    let mut reference = climb(g, &members, &local);
    for _ in 0..4 {
        let x = solve_fixed(g, &members, &local, reference)?;
        let top = x
            .iter()
            .enumerate()
            .filter(|(_, v)| v.is_finite())
            .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
            .map_or(0, |(k, _)| k);
        let finite = x.iter().all(|v| v.is_finite());
        let spread = x[top].abs() / x[reference];
        if finite && spread <= REFERENCE_SPREAD && x.iter().all(|&v| v >= -1e-9) {
            let total: f64 = x.iter().sum();
            for (k, &s) in members.iter().enumerate() {
                pi[s] = x[k].max(0.0) / total;
            }
            let residual = residual(g, &members, &local, &pi);
            return Ok((pi, residual));
        }
        reference = top;
    }
    Err(FspError::Solver(
        "the stationary system could not be solved to finite values".into(),
    ))
}

/// Largest ratio π_max/π_r accepted at the reference state r of a solve.
pub const REFERENCE_SPREAD: f64 = 100.0;

/// Total rate of the transitions s → t (global indices), read from t's row.
fn rate_between(g: &Generator, s: usize, t: usize) -> f64 {
    let (start, end) = (g.row_ptr[t], g.row_ptr[t + 1]);
    let row = &g.col[start..end];
    let first = row.partition_point(|&c| (c as usize) < s);
    let last = row.partition_point(|&c| (c as usize) <= s);
    g.rate.sum(start + first..start + last)
}

/// The local state where the climb of the module doc ends, from the class's first state.
fn climb(g: &Generator, members: &[usize], local: &[u32]) -> usize {
    let m = members.len();
    // Destinations of each member inside the class, by source.
    let mut first = vec![0usize; m + 1];
    for &t in members {
        for e in g.row_ptr[t]..g.row_ptr[t + 1] {
            let k = local[g.col[e] as usize];
            if k != u32::MAX {
                first[k as usize + 1] += 1;
            }
        }
    }
    for k in 0..m {
        first[k + 1] += first[k];
    }
    let mut next = first.clone();
    let mut out = vec![0u32; first[m]];
    for (kt, &t) in members.iter().enumerate() {
        for e in g.row_ptr[t]..g.row_ptr[t + 1] {
            let k = local[g.col[e] as usize];
            if k != u32::MAX {
                out[next[k as usize]] = kt as u32;
                next[k as usize] += 1;
            }
        }
    }
    let mut at = 0usize;
    for _ in 0..m {
        let s = members[at];
        let mut best = (1.0, None);
        for &kt in &out[first[at]..first[at + 1]] {
            let t = members[kt as usize];
            if t == s {
                continue;
            }
            let back = rate_between(g, t, s);
            if back > 0.0 {
                let ratio = rate_between(g, s, t) / back;
                if ratio > best.0 {
                    best = (ratio, Some(kt as usize));
                }
            }
        }
        match best.1 {
            Some(k) => at = k,
            None => break,
        }
    }
    at
}

/// Solves the balance equations with π at local state `r` fixed to 1.
fn solve_fixed(
    g: &Generator,
    members: &[usize],
    local: &[u32],
    r: usize,
) -> Result<Vec<f64>, FspError> {
    let m = members.len();
    // Unknowns and equations: local indices without r, shifted down above it.
    let shift = |k: usize| if k > r { k - 1 } else { k };
    let mut triplets: Vec<Triplet<usize, usize, f64>> = Vec::new();
    let mut diag = vec![0.0; m];
    let mut rhs = vec![0.0; m - 1];
    for (ki, &row) in members.iter().enumerate() {
        for e in g.row_ptr[row]..g.row_ptr[row + 1] {
            let s = g.col[e] as usize;
            let kj = local[s];
            if kj == u32::MAX {
                continue;
            }
            let kj = kj as usize;
            let a = g.rate.get(e);
            diag[kj] -= a;
            if ki == r {
                continue;
            }
            if kj == r {
                rhs[shift(ki)] -= a;
            } else {
                triplets.push(Triplet::new(shift(ki), shift(kj), a));
            }
        }
    }
    for (k, &d) in diag.iter().enumerate() {
        if k != r {
            triplets.push(Triplet::new(shift(k), shift(k), d));
        }
    }
    let a = SparseColMat::<usize, f64>::try_new_from_triplets(m - 1, m - 1, &triplets)
        .map_err(|e| FspError::Solver(format!("sparse matrix: {e:?}")))?;
    drop(triplets);
    let lu = a
        .sp_lu()
        .map_err(|e| FspError::Solver(format!("sparse LU: {e:?}")))?;
    let mut b = Mat::<f64>::from_fn(m - 1, 1, |i, _| rhs[i]);
    lu.solve_in_place(b.as_mut());
    let mut x = Vec::with_capacity(m);
    for k in 0..m {
        x.push(if k == r { 1.0 } else { b[(shift(k), 0)] });
    }
    Ok(x)
}

/// ‖A·π‖₁ with the reflecting generator of the class (transitions leaving it dropped).
fn residual(g: &Generator, members: &[usize], local: &[u32], pi: &[f64]) -> f64 {
    let mut out = vec![0.0; members.len()];
    for (ki, &row) in members.iter().enumerate() {
        for e in g.row_ptr[row]..g.row_ptr[row + 1] {
            let s = g.col[e] as usize;
            if local[s] == u32::MAX {
                continue;
            }
            let flow = g.rate.get(e) * pi[s];
            out[ki] += flow;
            out[local[s] as usize] -= flow;
        }
    }
    out.iter().map(|v| v.abs()).sum()
}

#[cfg(test)]
mod tests {
    use super::super::generator::Rates;
    use super::*;

    /// A three-state chain 0 ⇄ 1 ⇄ 2 with rates up (1, 2) and down (3, 4), rows by destination.
    fn chain() -> Generator {
        // Row r lists (source, rate) into r.
        let rows: Vec<Vec<(u32, f64)>> =
            vec![vec![(1, 3.0)], vec![(0, 1.0), (2, 4.0)], vec![(1, 2.0)]];
        let mut row_ptr = vec![0];
        let (mut col, mut rate) = (Vec::new(), Vec::new());
        let mut diag = vec![0.0; 3];
        for r in &rows {
            for &(s, a) in r {
                col.push(s);
                rate.push(a);
                diag[s as usize] -= a;
            }
            row_ptr.push(col.len());
        }
        Generator {
            states: 3,
            sinks: 0,
            row_ptr,
            reaction: vec![0; col.len()],
            col,
            rate: Rates::new(rate),
            diag,
        }
    }

    /// A birth–death chain on 0..=n with birth rate λ and death rate μ·k, rows by destination.
    fn immigration_death(n: usize, lambda: f64, mu: f64) -> Generator {
        let (mut row_ptr, mut col, mut rate) = (vec![0], Vec::new(), Vec::new());
        let mut diag = vec![0.0; n + 1];
        for t in 0..=n {
            if t > 0 {
                col.push(t as u32 - 1);
                rate.push(lambda);
                diag[t - 1] -= lambda;
            }
            if t < n {
                col.push(t as u32 + 1);
                rate.push(mu * (t + 1) as f64);
                diag[t + 1] -= mu * (t + 1) as f64;
            }
            row_ptr.push(col.len());
        }
        Generator {
            states: n + 1,
            sinks: 0,
            row_ptr,
            reaction: vec![0; col.len()],
            col,
            rate: Rates::new(rate),
            diag,
        }
    }

    // Immigration–death is reversible with a Poisson(λ/μ) law (Norris 1997 §3.7 [M]), whose
    // mode is ⌊λ/μ⌋: the climb from 0 must end there, and the law solved from it is the pmf.
    #[test]
    fn the_climb_ends_at_the_poisson_mode_and_the_law_is_poisson() {
        use statrs::distribution::{Discrete, Poisson};
        let g = immigration_death(120, 41.0, 2.0);
        let members: Vec<usize> = (0..g.states).collect();
        let local: Vec<u32> = (0..g.states as u32).collect();
        assert_eq!(climb(&g, &members, &local), 20);
        let c = classes(&g);
        let (pi, residual) = solve(&g, &c, 0).unwrap();
        let d = Poisson::new(20.5).unwrap();
        for (k, p) in pi.iter().enumerate() {
            assert!(
                (p - d.pmf(k as u64)).abs() < 1e-13,
                "{k}: {p} vs {}",
                d.pmf(k as u64)
            );
        }
        assert!(residual < 1e-12);
    }

    // Detailed balance of a birth–death chain: π₁/π₀ = 1/3, π₂/π₁ = 2/4 (Norris 1997 §3.7 [M]).
    #[test]
    fn birth_death_chain_satisfies_detailed_balance() {
        let g = chain();
        let c = classes(&g);
        assert_eq!(c.count, 1);
        let (pi, residual) = solve(&g, &c, 0).unwrap();
        let z = 1.0 + 1.0 / 3.0 + 1.0 / 6.0;
        let want = [1.0 / z, 1.0 / 3.0 / z, 1.0 / 6.0 / z];
        for (a, b) in pi.iter().zip(want) {
            assert!((a - b).abs() < 1e-14, "{pi:?}");
        }
        assert!(residual < 1e-14);
    }
}
