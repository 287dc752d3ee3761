//! The linear noise approximation at a steady state.
//!
//! In molecule numbers (Ω absorbed; van Kampen 1976 \[M\]; Elf & Ehrenberg 2003, Genome Res.
//! 13:2475, \[verified\]) the stationary covariance Σ of the fluctuations solves the Lyapunov
//! equation
//!
//! ```text
//! J Σ + Σ Jᵀ + D = 0,    J = S·∂v/∂x at x*,    D = S·diag(a(x*))·Sᵀ,   a = Ω·v,
//! ```
//!
//! on the independent species (J → J_r = J_I·L₀, D → D_II), and the covariance of every free
//! species follows through the link matrix: Σ = L₀ Σ_r L₀ᵀ (Elf & Ehrenberg 2003). Clamped
//! species do not fluctuate. The mean is the steady state itself. For networks of zero- and
//! first-order steps only, the moment equations close and this is the exact stationary
//! covariance (common practice; docs/references.md §9).
//!
//! The Lyapunov equation is solved as its vectorised linear system over the r(r+1)/2 distinct
//! entries of the symmetric Σ_r, (J_r ⊗ I + I ⊗ J_r)·vec Σ_r = −vec D_r folded by symmetry, with
//! nalgebra LU: exact to rounding, and cheap for the r ≤ 60 independent species it accepts.

use super::reduce::Reduction;
use super::steady::{Steady, SteadyOptions};
use super::system::System;
use crate::network::Network;
use crate::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// Most independent species [`stationary`] accepts (the linear system has r(r+1)/2 unknowns).
pub const MAX_INDEPENDENT: usize = 60;

/// Stationary linear-noise statistics, in molecules, for every species in network order.
#[derive(Clone, Debug)]
pub struct Lna {
    /// Mean counts (the deterministic steady state × Ω).
    pub mean: Vec<f64>,
    /// Covariance of the counts (molecules²); rows and columns of clamped species are zero.
    pub covariance: DMatrix<f64>,
    /// Diagonal of `covariance`.
    pub variance: Vec<f64>,
    /// Coefficient of variation sd/mean (NaN where the mean is 0).
    pub cv: Vec<f64>,
    /// Fano factor variance/mean (NaN where the mean is 0).
    pub fano: Vec<f64>,
}

/// Solves A Σ + Σ Aᵀ + Q = 0 for symmetric Σ (A n × n, Q symmetric) through the vectorised
/// system on the upper triangle, by LU. Fails if λᵢ + λⱼ = 0 for two eigenvalues of A (no
/// unique solution), which a stable A never has.
pub fn lyapunov(a: &DMatrix<f64>, q: &DMatrix<f64>) -> Result<DMatrix<f64>> {
    let n = a.nrows();
    if n == 0 {
        return Ok(DMatrix::zeros(0, 0));
    }
    let idx = |p: usize, q: usize| -> usize {
        let (i, j) = if p <= q { (p, q) } else { (q, p) };
        // Row-major upper triangle: rows before i hold n + (n−1) + … entries.
        i * n - i * (i + 1) / 2 + j
    };
    let size = n * (n + 1) / 2;
    let mut m = DMatrix::<f64>::zeros(size, size);
    let mut rhs = DVector::<f64>::zeros(size);
    for p in 0..n {
        for r in p..n {
            let row = idx(p, r);
            // (AΣ)_pr = Σ_k A_pk Σ_kr ; (ΣAᵀ)_pr = Σ_k Σ_pk A_rk
            for k in 0..n {
                m[(row, idx(k, r))] += a[(p, k)];
                m[(row, idx(p, k))] += a[(r, k)];
            }
            rhs[row] = -q[(p, r)];
        }
    }
    let sol = m
        .lu()
        .solve(&rhs)
        .filter(|s| s.iter().all(|x| x.is_finite()))
        .ok_or_else(|| {
            Error::usage(
                "the Lyapunov equation of the linear noise approximation has no unique solution (the steady state is not asymptotically stable)",
            )
        })?;
    Ok(DMatrix::from_fn(n, n, |i, j| sol[idx(i, j)]))
}

/// The stationary LNA of `net` at its steady state `steady` (from [`super::steady::solve`]).
pub fn stationary(net: &Network, steady: &Steady) -> Result<Lna> {
    if steady.conc.len() != net.species.len() {
        return Err(Error::Internal(
            "steady state does not belong to this network".into(),
        ));
    }
    if !steady.stable() {
        return Err(Error::usage(format!(
            "{}: the steady state is {}, so fluctuations around it have no stationary law and the linear noise approximation does not apply",
            net.file,
            steady.stability.as_str()
        )));
    }
    // Species that only accumulate are held (as the steady state held them): they do not
    // fluctuate around a level.
    let outputs: Vec<usize> = steady.outputs.iter().map(|o| o.species).collect();
    let held = net.holding(&outputs);
    let net = if outputs.is_empty() { net } else { &held };
    let sys = System::new(net);
    let red = Reduction::new(&sys);
    let r = red.r();
    if r > MAX_INDEPENDENT {
        return Err(Error::usage(format!(
            "{}: the linear noise approximation is limited to {MAX_INDEPENDENT} independent species; this network has {r}",
            net.file
        )));
    }
    let y = sys.restrict(&steady.conc);
    let jr = red.reduced_jacobian(&sys.jacobian(&y));
    let s = sys.stoichiometry();
    // Propensities a = Ω·v in molecules per second; a rate that came out slightly negative at
    // rounding level adds no noise.
    let a: Vec<f64> = sys
        .rates(&y)
        .iter()
        .map(|v| (v * net.omega).max(0.0))
        .collect();
    let d_full = DMatrix::from_fn(sys.n(), sys.n(), |i, k| {
        (0..sys.m()).map(|j| s[(i, j)] * a[j] * s[(k, j)]).sum()
    });
    let d_r = DMatrix::from_fn(r, r, |i, k| {
        d_full[(red.independent[i], red.independent[k])]
    });
    let sigma_r = lyapunov(&jr, &d_r)?;
    let sigma_free = &red.link * sigma_r * red.link.transpose();
    let ns = net.species.len();
    let mut cov = DMatrix::zeros(ns, ns);
    for (k, &i) in sys.free.iter().enumerate() {
        for (l, &j) in sys.free.iter().enumerate() {
            cov[(i, j)] = sigma_free[(k, l)];
        }
    }
    let mean = steady.counts.clone();
    let variance: Vec<f64> = (0..ns).map(|i| cov[(i, i)].max(0.0)).collect();
    let cv = mean
        .iter()
        .zip(&variance)
        .map(|(m, v)| if *m > 0.0 { v.sqrt() / m } else { f64::NAN })
        .collect();
    let fano = mean
        .iter()
        .zip(&variance)
        .map(|(m, v)| if *m > 0.0 { v / m } else { f64::NAN })
        .collect();
    Ok(Lna {
        mean,
        covariance: cov,
        variance,
        cv,
        fano,
    })
}

/// The steady state reached from the initial state (default [`SteadyOptions`]) and the
/// stationary LNA around it: what `noise` puts beside each ensemble.
pub fn at_steady_state(net: &Network) -> Result<(Steady, Lna)> {
    let st = super::steady::solve(net, &SteadyOptions::default())?;
    let l = stationary(net, &st)?;
    Ok((st, l))
}

#[cfg(test)]
mod tests {
    use super::*;

    // A Σ + Σ Aᵀ + Q = 0 checked by substitution on a non-symmetric stable A (common practice).
    #[test]
    fn lyapunov_solution_satisfies_the_equation() {
        let a = DMatrix::from_row_slice(3, 3, &[-2.0, 1.0, 0.0, 0.5, -3.0, 1.0, 0.0, 2.0, -1.5]);
        let q = DMatrix::from_row_slice(3, 3, &[2.0, 0.3, 0.0, 0.3, 1.0, -0.2, 0.0, -0.2, 4.0]);
        let s = lyapunov(&a, &q).unwrap();
        let res = &a * &s + &s * a.transpose() + &q;
        assert!(res.amax() < 1e-13, "{res}");
        assert!((&s - s.transpose()).amax() < 1e-15);
    }

    #[test]
    fn singular_lyapunov_is_an_error() {
        let a = DMatrix::from_row_slice(2, 2, &[0.0, 1.0, -1.0, 0.0]);
        let q = DMatrix::identity(2, 2);
        assert!(lyapunov(&a, &q).is_err());
    }
}
