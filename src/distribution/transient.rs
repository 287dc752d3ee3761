//! The transient solver: uniformization (Jensen 1953; Grassmann 1977, Comput. Oper. Res. 4:47
//! \[M\]; the method Sidje & Vo 2015, Math. Biosci. 269:10 \[M\] compare against Krylov methods for
//! the finite state projection).
//!
//! With q ≥ max_s |A_ss| the matrix P = I + A/q is substochastic and non-negative, and
//!
//! ```text
//! P(t + Δ) = Σ_{k≥0} e^{−qΔ} (qΔ)^k / k! · P^k · P(t).
//! ```
//!
//! The sum is cut at the first N past the Poisson mode with
//! w_N·ρ/(1 − ρ) ≤ budget, ρ = qΔ/(N + 1), a bound on the Poisson tail Σ_{k>N} w_k because
//! the ratio w_{k+1}/w_k = qΔ/(k + 1) falls with k. Every term is non-negative, so the cut sum
//! is a lower bound of the exact projected solution, which is itself a lower bound of the true
//! distribution (Munsky & Khammash 2006, J. Chem. Phys. 124:044104 \[M\]). Hence the probability
//! missing from the states, 1 − Σ_s p_s, bounds in ℓ¹ the whole error of the computed
//! distribution — projection and series cut together — and every probability it reports is
//! within that amount of the truth, below it.
//!
//! Why uniformization rather than a Krylov exponential: it needs only products with the stored
//! generator and three vectors (a Krylov basis of m vectors, and its m²·n orthogonalisation,
//! cost more memory and time per step at these sizes), it keeps every probability
//! non-negative, and its error has the exact bound above, which adds to the projection's
//! bound instead of needing an estimate of its own. Its cost is about q·t products, so it
//! suits the low-copy networks this command is for; a stiff network (fast binding beside slow
//! turnover) costs in proportion to its fastest rate, and the report gives q and the number
//! of products so the user sees it.
//!
//! **Counted species.** A species that only accumulates (produced by some reactions, read by
//! none) is no coordinate of the projection; its count is P(t) = P(0) + Σ_j ν_j N_j(t), with
//! N_j the firings of reaction j. Its exact mean and variance come from the partial moments
//! m₁(x) = E[(P − P(0))·1{X = x}] and m₂(x) = E[(P − P(0))²·1{X = x}], which obey
//!
//! ```text
//! dm₁/dt = A·m₁ + B·p,   dm₂/dt = A·m₂ + 2B·m₁ + C·p,
//! B_xy = Σ_{j: y→x} ν_j a_j(y),   C_xy = Σ_{j: y→x} ν_j² a_j(y)
//! ```
//!
//! (the master equation of the chain joined with its counter, summed over the counter's values
//! after weighting by it and its square; a firing of j that moves y to x adds ν_j to the
//! counter; x = y for a reaction that changes only the counted species, kept as a transition of
//! the state to itself). The joined system [A 0 0; B A 0; C 2B A] is uniformized by the same
//! q and weights: its powers are the discrete chain's, in which step k fires reaction j with
//! probability a_j/q (q is at least the total rate of every kept transition, self-loops
//! included), so m₁ after k steps is at most ν_max·k and m₂ at most (ν_max·k)² per unit of
//! probability, and the series cut at N leaves at most ν_max·Σ_{k>N} k·w_k in the mean and
//! ν_max²·Σ_{k>N} k²·w_k in the second moment; where species are counted the series runs on
//! until the latter is below the same budget as the probability's tail. Then
//! E\[P\] = P(0) + Σ_x m₁(x)/M and Var P = Σ_x m₂(x)/M − (Σ_x m₁(x)/M)², with M the
//! probability on the states (the law conditioned on the projection, as for every other
//! species). The marginal law of P is not computed (it would need P as a coordinate).
//!
//! Poisson weights are computed outward from the mode in ratios (Fox & Glynn 1988, Commun.
//! ACM 31:440 \[M\]), so no weight overflows or underflows before it matters, whatever qΔ.

use super::generator::{Generator, Rates};
use super::summary::Columns;
use rayon::prelude::*;

/// Rows per parallel task in a product (large enough that scheduling costs nothing).
const CHUNK: usize = 1 << 14;

/// e^{−λ} λ^k / k! for k = 0..=N and the bound on the tail beyond N (see the module doc).
/// With `moment` = ν_max² > 0 (counted species), N is also past the point where
/// ν_max²·Σ_{k>N} k²·w_k ≤ budget, bounded by ν_max²·(N + 1)λ·w_N/(1 − ρ′) with
/// ρ′ = (N + 2)λ/(N + 1)², the ratio u_{N+2}/u_{N+1} of u_k = k²·w_k, which falls with k.
pub fn poisson_weights(lambda: f64, budget: f64, moment: f64) -> (Vec<f64>, f64) {
    if lambda <= 0.0 {
        return (vec![1.0], 0.0);
    }
    let mode = lambda.floor() as usize;
    let ln_mode =
        -lambda + mode as f64 * lambda.ln() - statrs::function::gamma::ln_gamma(mode as f64 + 1.0);
    let w_mode = ln_mode.exp();
    let mut w = vec![0.0; mode + 1];
    w[mode] = w_mode;
    for k in (0..mode).rev() {
        w[k] = w[k + 1] * (k + 1) as f64 / lambda;
    }
    let mut k = mode;
    loop {
        let rho = lambda / (k + 1) as f64;
        let tail = if rho < 1.0 {
            w[k] * rho / (1.0 - rho)
        } else {
            f64::INFINITY
        };
        let n = (k + 1) as f64;
        let rho2 = (n + 1.0) * lambda / (n * n);
        let moment_tail = if moment == 0.0 {
            0.0
        } else if rho2 < 1.0 {
            moment * n * lambda * w[k] / (1.0 - rho2)
        } else {
            f64::INFINITY
        };
        if tail <= budget && moment_tail <= budget {
            return (w, tail);
        }
        let next = w[k] * rho;
        w.push(next);
        k += 1;
    }
}

/// What is kept of a distribution at one time: the marginal of every reported species
/// (flattened, at [`Columns::offsets`]), the probability on the states, each sink's, and
/// (Σ_x m₁(x), Σ_x m₂(x)) of every counted species (see the module doc).
#[derive(Clone, Debug, PartialEq)]
pub struct Observed {
    pub marginals: Vec<f64>,
    pub mass: f64,
    pub sinks: Vec<f64>,
    pub counted: Vec<[f64; 2]>,
}

impl Observed {
    fn zero(len: usize, sinks: usize, counted: usize) -> Observed {
        Observed {
            marginals: vec![0.0; len],
            mass: 0.0,
            sinks: vec![0.0; sinks],
            counted: vec![[0.0; 2]; counted],
        }
    }

    fn add_scaled(&mut self, w: f64, o: &Observed) {
        for (a, b) in self.marginals.iter_mut().zip(&o.marginals) {
            *a += w * b;
        }
        self.mass += w * o.mass;
        for (a, b) in self.sinks.iter_mut().zip(&o.sinks) {
            *a += w * b;
        }
        for (a, b) in self.counted.iter_mut().zip(&o.counted) {
            a[0] += w * b[0];
            a[1] += w * b[1];
        }
    }
}

/// Values per state when species are counted: p, then (m₁, m₂) of each counted species,
/// interleaved by state (state r's values at r·width..(r + 1)·width).
pub fn width(counted: usize) -> usize {
    1 + 2 * counted
}

/// Uniformization of one generator over one interval of constant rates, observed at a set of
/// times inside it.
///
/// All times share one series: with v_k = P^k·p₀ computed once,
/// p(τ_i) = Σ_k Pois(k; qτ_i)·v_k, and since every reported figure (marginals, the mass on the
/// states, the sinks) is linear in p, only those figures of each v_k are accumulated with each
/// time's weights, in the same pass over the matrix that makes v_k. The cost is that of the
/// longest time alone, q·τ_max + O(√(q·τ_max)) products, instead of a series per grid
/// interval, and no vector is kept per time.
pub struct Series<'a> {
    gen: &'a Generator,
    cols: &'a Columns,
    /// ν of each counted species in each reaction.
    counted: &'a [Vec<f64>],
    q: f64,
    parallel: bool,
    /// Products with the generator so far.
    pub products: u64,
}

impl<'a> Series<'a> {
    /// `counted[i][j]`: the increment of counted species i when reaction j fires (vectors
    /// then have [`width`]`(counted.len())` values per state).
    pub fn new(
        gen: &'a Generator,
        cols: &'a Columns,
        counted: &'a [Vec<f64>],
        parallel: bool,
    ) -> Series<'a> {
        Series {
            gen,
            cols,
            counted,
            q: gen.max_exit_rate(),
            parallel,
            products: 0,
        }
    }

    /// The uniformization rate q.
    pub fn rate(&self) -> f64 {
        self.q
    }

    fn zero(&self) -> Observed {
        Observed::zero(self.cols.len, self.gen.sinks, self.counted.len())
    }

    /// The observation of `v` (states then sinks, [`width`] values each).
    fn observe(&self, v: &[f64]) -> Observed {
        let n = self.gen.states;
        let w = width(self.counted.len());
        let mut o = self.zero();
        for r in 0..n {
            let p = v[r * w];
            o.mass += p;
            for (c, &off) in self.cols.counts.iter().zip(&self.cols.offsets) {
                o.marginals[off + c[r] as usize] += p;
            }
            for (i, m) in o.counted.iter_mut().enumerate() {
                m[0] += v[r * w + 1 + 2 * i];
                m[1] += v[r * w + 2 + 2 * i];
            }
        }
        for k in 0..self.gen.sinks {
            o.sinks[k] = v[(n + k) * w];
        }
        o
    }

    /// The joined system's step for counted species (module doc), rows `start..`, observed.
    fn counted_body(&self, inv_q: f64, x: &[f64], start: usize, y: &mut [f64], o: &mut Observed) {
        let g = self.gen;
        let n = g.states;
        let cols = self.cols;
        let k = self.counted.len();
        let w = width(k);
        let mut s = vec![0.0; w];
        let mut b = vec![[0.0; 3]; k];
        for (local, yr) in y.chunks_mut(w).enumerate() {
            let r = start + local;
            s.iter_mut().for_each(|v| *v = 0.0);
            b.iter_mut().for_each(|v| *v = [0.0; 3]);
            for e in g.row_ptr[r]..g.row_ptr[r + 1] {
                let (a, c) = (g.rate.get(e), g.col[e] as usize * w);
                for (sv, xv) in s.iter_mut().zip(&x[c..c + w]) {
                    *sv += a * xv;
                }
                for (i, bi) in b.iter_mut().enumerate() {
                    let nu = self.counted[i][g.reaction[e] as usize];
                    if nu != 0.0 {
                        bi[0] += nu * a * x[c];
                        bi[1] += nu * a * x[c + 1 + 2 * i];
                        bi[2] += nu * nu * a * x[c];
                    }
                }
            }
            let keep = if r < n { 1.0 + g.diag[r] * inv_q } else { 1.0 };
            let at = r * w;
            yr[0] = keep * x[at] + s[0] * inv_q;
            for (i, bi) in b.iter().enumerate() {
                let (j1, j2) = (1 + 2 * i, 2 + 2 * i);
                yr[j1] = keep * x[at + j1] + (s[j1] + bi[0]) * inv_q;
                yr[j2] = keep * x[at + j2] + (s[j2] + 2.0 * bi[1] + bi[2]) * inv_q;
            }
            if r < n {
                o.mass += yr[0];
                for (c, &off) in cols.counts.iter().zip(&cols.offsets) {
                    o.marginals[off + c[r] as usize] += yr[0];
                }
                for (i, m) in o.counted.iter_mut().enumerate() {
                    m[0] += yr[1 + 2 * i];
                    m[1] += yr[2 + 2 * i];
                }
            } else {
                o.sinks[r - n] = yr[0];
            }
        }
    }

    /// y = (I + A/q)·x (the joined system's step where species are counted), observed in the
    /// same pass.
    fn product(&self, inv_q: f64, x: &[f64], y: &mut [f64]) -> Observed {
        let g = self.gen;
        if !self.counted.is_empty() {
            let w = width(self.counted.len());
            return if self.parallel && y.len() > CHUNK * w {
                y.par_chunks_mut(CHUNK * w)
                    .enumerate()
                    .map(|(c, y)| {
                        let mut o = self.zero();
                        self.counted_body(inv_q, x, c * CHUNK, y, &mut o);
                        o
                    })
                    .reduce(
                        || self.zero(),
                        |mut a, b| {
                            a.add_scaled(1.0, &b);
                            a
                        },
                    )
            } else {
                let mut o = self.zero();
                self.counted_body(inv_q, x, 0, y, &mut o);
                o
            };
        }
        match &g.rate {
            Rates::Plain(rate) => self.plain(inv_q, x, y, |lo, hi| {
                let mut s = 0.0;
                for (&a, &c) in rate[lo..hi].iter().zip(&g.col[lo..hi]) {
                    s += a * x[c as usize];
                }
                s
            }),
            Rates::Coded { code, table } => self.plain(inv_q, x, y, |lo, hi| {
                let mut s = 0.0;
                for (&k, &c) in code[lo..hi].iter().zip(&g.col[lo..hi]) {
                    s += table[k as usize] * x[c as usize];
                }
                s
            }),
        }
    }

    /// y = (I + A/q)·x without counted species, observed in the same pass; `dot(lo, hi)` is
    /// Σ_{e ∈ lo..hi} rate_e·x_{col_e}.
    fn plain(
        &self,
        inv_q: f64,
        x: &[f64],
        y: &mut [f64],
        dot: impl Fn(usize, usize) -> f64 + Sync,
    ) -> Observed {
        let g = self.gen;
        let n = g.states;
        let cols = self.cols;
        let body = |start: usize, y: &mut [f64], o: &mut Observed| {
            for (k, yi) in y.iter_mut().enumerate() {
                let r = start + k;
                let s = dot(g.row_ptr[r], g.row_ptr[r + 1]);
                if r < n {
                    let v = (1.0 + g.diag[r] * inv_q) * x[r] + s * inv_q;
                    *yi = v;
                    o.mass += v;
                    for (c, &off) in cols.counts.iter().zip(&cols.offsets) {
                        o.marginals[off + c[r] as usize] += v;
                    }
                } else {
                    let v = x[r] + s * inv_q;
                    *yi = v;
                    o.sinks[r - n] = v;
                }
            }
        };
        if self.parallel && y.len() > CHUNK {
            y.par_chunks_mut(CHUNK)
                .enumerate()
                .map(|(c, y)| {
                    let mut o = self.zero();
                    body(c * CHUNK, y, &mut o);
                    o
                })
                .reduce(
                    || self.zero(),
                    |mut a, b| {
                        a.add_scaled(1.0, &b);
                        a
                    },
                )
        } else {
            let mut o = self.zero();
            body(0, y, &mut o);
            o
        }
    }

    /// Runs the series from `p0` (states then sinks, [`width`] values each) and calls `seen(i, p(τ_i), tail bound)` for
    /// each offset τ_i (non-decreasing, ≥ 0) in order, as soon as its sum is complete; `seen`
    /// returning false stops the run. With `end`, the whole vector p(end) is summed too (the
    /// start of the next interval). Returns whether it ran to the end, and p(end) (empty
    /// without `end`). The Poisson tail left out at each time is at most `budget`.
    pub fn run(
        &mut self,
        p0: &[f64],
        offsets: &[f64],
        end: Option<f64>,
        budget: f64,
        mut seen: impl FnMut(usize, &Observed, f64) -> bool,
    ) -> (bool, Vec<f64>) {
        let nu_max = self
            .counted
            .iter()
            .flatten()
            .fold(0.0f64, |m, &v| m.max(v.abs()));
        let moment = nu_max * nu_max;
        let weights: Vec<(Vec<f64>, f64)> = offsets
            .iter()
            .map(|&t| poisson_weights(self.q * t, budget, moment))
            .collect();
        let end_weights = end.map(|t| poisson_weights(self.q * t, budget, moment).0);
        let last = weights
            .iter()
            .map(|(w, _)| w.len())
            .chain(end_weights.as_ref().map(Vec::len))
            .max()
            .unwrap_or(1)
            - 1;
        let mut acc: Vec<Observed> = offsets.iter().map(|_| self.zero()).collect();
        let mut at_end = if end.is_some() {
            vec![0.0; p0.len()]
        } else {
            Vec::new()
        };
        let inv_q = if self.q > 0.0 { 1.0 / self.q } else { 0.0 };
        let mut cur = p0.to_vec();
        let mut next = vec![0.0; p0.len()];
        let mut o = self.observe(&cur);
        let mut done = 0;
        for k in 0..=last {
            if k > 0 {
                o = self.product(inv_q, &cur, &mut next);
                std::mem::swap(&mut cur, &mut next);
                self.products += 1;
            }
            for (a, (w, _)) in acc.iter_mut().zip(&weights).skip(done) {
                if let Some(&wk) = w.get(k) {
                    a.add_scaled(wk, &o);
                }
            }
            if let Some(&wk) = end_weights.as_ref().and_then(|w| w.get(k)) {
                for (e, &c) in at_end.iter_mut().zip(&cur) {
                    *e += wk * c;
                }
            }
            while done < offsets.len() && weights[done].0.len() == k + 1 {
                if !seen(done, &acc[done], weights[done].1) {
                    return (false, at_end);
                }
                done += 1;
            }
        }
        (true, at_end)
    }
}

#[cfg(test)]
mod tests {
    use super::poisson_weights;

    // Poisson pmf against statrs (general-purpose reference library), at small and large λ.
    #[test]
    fn weights_are_the_poisson_pmf_and_the_tail_is_bounded() {
        use statrs::distribution::{Discrete, DiscreteCDF, Poisson};
        for &lambda in &[0.3, 7.0, 250.0, 4.0e4] {
            let (w, tail) = poisson_weights(lambda, 1e-12, 0.0);
            let d = Poisson::new(lambda).unwrap();
            for (k, &wk) in w.iter().enumerate().step_by(7) {
                let exact = d.pmf(k as u64);
                assert!(
                    (wk - exact).abs() <= 1e-9 * exact.max(1e-300) + 1e-300,
                    "{lambda} {k}: {wk:e} vs {exact:e}"
                );
            }
            let n = w.len() as u64 - 1;
            let true_tail = d.sf(n);
            assert!(
                tail >= true_tail * (1.0 - 1e-6),
                "{lambda}: {tail} < {true_tail}"
            );
            assert!(tail <= 1e-12);
        }
    }

    // The second-moment tail Σ_{k>N} k²·Pois(k; λ) against a direct sum of statrs' pmf (a
    // general-purpose reference library): at most budget/ν², ν = 3.
    #[test]
    fn the_moment_tail_is_bounded() {
        use statrs::distribution::{Discrete, Poisson};
        for &lambda in &[0.3, 7.0, 250.0, 4.0e4] {
            let (w, _) = poisson_weights(lambda, 1e-10, 9.0);
            let d = Poisson::new(lambda).unwrap();
            let n = w.len() as u64 - 1;
            let tail: f64 = (n + 1..n + 2000).map(|k| (k * k) as f64 * d.pmf(k)).sum();
            assert!(9.0 * tail <= 1e-10, "{lambda}: {tail:e}");
        }
    }
}
