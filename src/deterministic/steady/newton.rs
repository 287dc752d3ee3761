//! Newton's method on the stacked rate equations and conservation laws, and the spectrum of
//! the reduced Jacobian that decides stability (the formulas are in the parent module's doc).

use super::Stability;
use crate::deterministic::reduce::Reduction;
use crate::deterministic::system::System;
use crate::{Error, Result};
use nalgebra::{Complex, DMatrix, DVector, Schur};
/// Everything Newton needs that does not change between iterations.
pub(super) struct Ctx<'s, 'a> {
    pub(super) sys: &'s System<'a>,
    pub(super) red: Reduction,
    pub(super) totals: Vec<f64>,
    /// Gross-turnover reference from the initial state.
    pub(super) g_ref: f64,
    pub(super) tol: f64,
    /// Absolute concentration scale below which differences do not matter (10⁻⁶ molecules).
    pub(super) tiny: f64,
    /// A million times the largest amount at the start, plus one molecule.
    pub(super) bound: f64,
}

pub(super) struct Eval {
    pub(super) f: Vec<f64>,
    /// max|f| over the larger of the turnover here and at the start.
    pub(super) rel_rate: f64,
    /// max|f| over the turnover here alone.
    pub(super) rel_own: f64,
    /// Largest amount.
    pub(super) top: f64,
    pub(super) rel_law: f64,
    pub(super) law_res: Vec<f64>,
    pub(super) law_scale: Vec<f64>,
    pub(super) gmax: f64,
}

impl Ctx<'_, '_> {
    pub(super) fn eval(&self, y: &[f64]) -> Option<Eval> {
        let v = self.sys.rates(y);
        if v.iter().any(|x| !x.is_finite()) {
            return None;
        }
        let f = self.sys.rhs_from_rates(&v);
        let g_own = self.sys.gross(&v).into_iter().fold(0.0, f64::max);
        let gmax = g_own.max(self.g_ref);
        let fmax = f.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let ratio = |g: f64| {
            if fmax == 0.0 {
                0.0
            } else if g > 0.0 {
                fmax / g
            } else {
                f64::INFINITY
            }
        };
        let (rel_rate, rel_own) = (ratio(gmax), ratio(g_own));
        let top = y.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let now = self.red.totals(y);
        let mut law_res = Vec::new();
        let mut law_scale = Vec::new();
        let mut rel_law = 0.0f64;
        for (k, (&a, &b)) in now.iter().zip(&self.totals).enumerate() {
            let scale: f64 = (0..y.len())
                .map(|j| (self.red.laws[(k, j)] * y[j]).abs())
                .sum::<f64>()
                .max(b.abs())
                .max(self.tiny);
            law_res.push(a - b);
            law_scale.push(scale);
            rel_law = rel_law.max((a - b).abs() / scale);
        }
        Some(Eval {
            f,
            rel_rate,
            rel_own,
            top,
            rel_law,
            law_res,
            law_scale,
            gmax,
        })
    }

    /// Steady: the laws hold, and the net rates are within `tol` of the turnover there, or
    /// within `tol`/1000 of the turnover at the start for a network that runs down to rest
    /// (no amount beyond a million times the largest at the start: rates that fade only as an
    /// amount runs off to infinity are not a steady state).
    pub(super) fn converged(&self, e: &Eval) -> bool {
        e.rel_law <= 1e-10
            && (e.rel_own <= self.tol || (e.rel_rate <= 1e-3 * self.tol && e.top <= self.bound))
    }

    /// Weighted residual vector [f_I / g; (Λx − T)/scale] with weights fixed by `w`.
    pub(super) fn weighted(&self, e: &Eval, w: &Eval) -> Vec<f64> {
        let gw = if w.gmax > 0.0 { 1.0 / w.gmax } else { 1.0 };
        let mut out: Vec<f64> = self.red.independent.iter().map(|&k| e.f[k] * gw).collect();
        out.extend(e.law_res.iter().zip(&w.law_scale).map(|(r, s)| r / s));
        out
    }

    /// Largest difference between two states, each species relative to its own level, with
    /// differences below 10⁻⁶ of the largest level (or 10⁻⁶ molecules) not counted.
    pub(super) fn distance(&self, a: &[f64], b: &[f64]) -> f64 {
        let top = b.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let floor = self.tiny.max(1e-6 * top);
        a.iter()
            .zip(b)
            .map(|(x, y)| (x - y).abs() / (x.abs().max(y.abs()) + floor))
            .fold(0.0, f64::max)
    }
}

/// max|a − b| relative to the largest level in either state (at least `floor`).
pub(super) fn norm_distance(a: &[f64], b: &[f64], floor: f64) -> f64 {
    let top = a
        .iter()
        .chain(b)
        .fold(0.0f64, |m, x| m.max(x.abs()))
        .max(floor)
        .max(f64::MIN_POSITIVE);
    a.iter()
        .zip(b)
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()))
        / top
}

pub(super) struct NewtonRun {
    pub(super) y: Vec<f64>,
    pub(super) iterations: usize,
    pub(super) converged: bool,
}

/// Newton from `start`. Guarded (`positive`): steps are shortened so that no positive
/// concentration falls below 10 % of its value, then halved until the weighted residual falls
/// (Armijo). Unguarded: full steps, wherever they lead (used only to locate an algebraic
/// solution with negative amounts for a diagnosis).
pub(super) fn newton(ctx: &Ctx, start: &[f64], positive: bool, max_iter: usize) -> NewtonRun {
    let mut y = start.to_vec();
    let Some(mut e) = ctx.eval(&y) else {
        return NewtonRun {
            y,
            iterations: 0,
            converged: false,
        };
    };
    for it in 0..=max_iter {
        if ctx.converged(&e) {
            // One more step to polish, kept only if it lowers the residual.
            if let Some((y2, e2)) = newton_step(ctx, &y, &e, positive) {
                let now: f64 = ctx.weighted(&e, &e).iter().map(|x| x * x).sum();
                let next: f64 = ctx.weighted(&e2, &e).iter().map(|x| x * x).sum();
                if next < now && ctx.converged(&e2) {
                    y = y2;
                }
            }
            return NewtonRun {
                y,
                iterations: it,
                converged: true,
            };
        }
        if it == max_iter {
            break;
        }
        match newton_step(ctx, &y, &e, positive) {
            Some((y2, e2)) => {
                y = y2;
                e = e2;
            }
            None => {
                return NewtonRun {
                    y,
                    iterations: it + 1,
                    converged: false,
                }
            }
        }
    }
    NewtonRun {
        y,
        iterations: max_iter,
        converged: false,
    }
}

/// One Newton step from `y` (with its evaluation `e`): the linear system [J_I; Λ]·Δ = −F by LU
/// (SVD least squares if singular), then the guarded or full step.
pub(super) fn newton_step(
    ctx: &Ctx,
    y: &[f64],
    e: &Eval,
    positive: bool,
) -> Option<(Vec<f64>, Eval)> {
    let n = ctx.sys.n();
    if n == 0 {
        return None;
    }
    let jac = ctx.sys.jacobian(y);
    if jac.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let nc = ctx.red.laws.nrows();
    let mut m = DMatrix::zeros(n, n);
    let mut rhs = DVector::zeros(n);
    for (row, &k) in ctx.red.independent.iter().enumerate() {
        m.row_mut(row).copy_from(&jac.row(k));
        rhs[row] = -e.f[k];
    }
    for l in 0..nc {
        let row = ctx.red.r() + l;
        m.row_mut(row).copy_from(&ctx.red.laws.row(l));
        rhs[row] = -e.law_res[l];
    }
    let delta = match m.clone().lu().solve(&rhs) {
        Some(d) if d.iter().all(|x| x.is_finite()) => d,
        _ => {
            let eps = 1e-12 * m.amax().max(f64::MIN_POSITIVE);
            match m.svd(true, true).solve(&rhs, eps) {
                Ok(d) if d.iter().all(|x| x.is_finite()) => d,
                _ => return None,
            }
        }
    };
    let mut lambda = 1.0f64;
    if positive {
        for (yi, di) in y.iter().zip(delta.iter()) {
            if *yi > 0.0 && *di < 0.0 && yi + di < 0.0 {
                lambda = lambda.min(0.9 * yi / -di);
            }
        }
    }
    let w0: f64 = ctx.weighted(e, e).iter().map(|x| x * x).sum();
    for _ in 0..40 {
        let trial: Vec<f64> = y
            .iter()
            .zip(delta.iter())
            .map(|(a, d)| a + lambda * d)
            .collect();
        if let Some(et) = ctx.eval(&trial) {
            let w1: f64 = ctx.weighted(&et, e).iter().map(|x| x * x).sum();
            if !positive || w1 <= (1.0 - 2e-4 * lambda) * w0 || ctx.converged(&et) {
                return Some((trial, et));
            }
        }
        lambda *= 0.5;
    }
    None
}

pub(super) fn eigenvalues(m: &DMatrix<f64>) -> Result<Vec<Complex<f64>>> {
    if m.is_empty() {
        return Ok(Vec::new());
    }
    if m.iter().any(|v| !v.is_finite()) {
        return Err(Error::Internal("the Jacobian is not finite".into()));
    }
    let schur = Schur::try_new(m.clone(), 1e-15, 10_000)
        .or_else(|| Schur::try_new(m.clone(), 1e-12, 100_000))
        .ok_or_else(|| Error::Internal("the eigenvalue iteration did not converge".into()))?;
    let mut ev: Vec<Complex<f64>> = schur.complex_eigenvalues().iter().copied().collect();
    ev.sort_by(|a, b| b.re.total_cmp(&a.re).then(b.im.total_cmp(&a.im)));
    Ok(ev)
}

pub(super) fn stability_of(ev: &[Complex<f64>]) -> Stability {
    let rho = ev.iter().fold(0.0f64, |m, z| m.max(z.norm()));
    let top = ev.iter().fold(f64::NEG_INFINITY, |m, z| m.max(z.re));
    if ev.is_empty() || top < -1e-10 * rho {
        Stability::Stable
    } else if top > 1e-10 * rho {
        Stability::Unstable
    } else {
        Stability::Marginal
    }
}

/// Fastest rate scale max|λ| of the reduced Jacobian at `y` (0 if none).
pub(super) fn spectral_radius(ctx: &Ctx, y: &[f64]) -> f64 {
    let jr = ctx.red.reduced_jacobian(&ctx.sys.jacobian(y));
    eigenvalues(&jr)
        .map(|ev| ev.iter().fold(0.0f64, |m, z| m.max(z.norm())))
        .unwrap_or(0.0)
}

/// Slowest relaxation time 1/min|Re λ| of a set of eigenvalues, ignoring those with a real part
/// at rounding level (0 if there is none).
pub(super) fn slowest_time(ev: &[Complex<f64>]) -> f64 {
    let rho = ev.iter().fold(0.0f64, |m, z| m.max(z.norm()));
    ev.iter()
        .filter(|z| z.re.abs() > 1e-9 * rho)
        .fold(0.0f64, |m, z| m.max(1.0 / z.re.abs()))
}
