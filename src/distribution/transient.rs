//! The transient solver: uniformization (Jensen 1953; Grassmann 1977, Comput. Oper. Res. 4:47
//! [M]; the method Sidje & Vo 2015, Math. Biosci. 269:10 [M] compare against Krylov methods for
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
//! distribution (Munsky & Khammash 2006, J. Chem. Phys. 124:044104 [M]). Hence the probability
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
//! Poisson weights are computed outward from the mode in ratios (Fox & Glynn 1988, Commun.
//! ACM 31:440 [M]), so no weight overflows or underflows before it matters, whatever qΔ.

use super::generator::Generator;

/// e^{−λ} λ^k / k! for k = 0..=N and the bound on the tail beyond N (see the module doc).
pub fn poisson_weights(lambda: f64, budget: f64) -> (Vec<f64>, f64) {
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
        if tail <= budget {
            return (w, tail);
        }
        let next = w[k] * rho;
        w.push(next);
        k += 1;
    }
}

/// Work buffers and the uniformization rate for one generator.
pub struct Propagator<'a> {
    gen: &'a Generator,
    q: f64,
    parallel: bool,
    cur: Vec<f64>,
    next: Vec<f64>,
    /// Products with the generator so far.
    pub products: u64,
}

impl<'a> Propagator<'a> {
    pub fn new(gen: &'a Generator, parallel: bool) -> Propagator<'a> {
        Propagator {
            gen,
            q: gen.max_exit_rate(),
            parallel,
            cur: vec![0.0; gen.len()],
            next: vec![0.0; gen.len()],
            products: 0,
        }
    }

    /// The uniformization rate q.
    pub fn rate(&self) -> f64 {
        self.q
    }

    /// Advances `p` (states then sinks) by `dt`; the Poisson tail left out is at most `budget`.
    /// Returns the bound on the tail.
    pub fn advance(&mut self, p: &mut [f64], dt: f64, budget: f64) -> f64 {
        if self.q == 0.0 || dt <= 0.0 {
            return 0.0;
        }
        let (w, tail) = poisson_weights(self.q * dt, budget);
        let inv_q = 1.0 / self.q;
        self.cur.copy_from_slice(p);
        for v in p.iter_mut() {
            *v *= w[0];
        }
        for &wk in &w[1..] {
            self.gen
                .step(inv_q, &self.cur, &mut self.next, p, wk, self.parallel);
            std::mem::swap(&mut self.cur, &mut self.next);
            self.products += 1;
        }
        tail
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
            let (w, tail) = poisson_weights(lambda, 1e-12);
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
}
