//! The deterministic steady state reached from the initial state.
//!
//! Newton's method on F(x) = 0, where F stacks the rate equations of the independent species
//! and the conservation laws Λ·x − T (T from the initial state) in place of the dependent rows
//! (Reder 1988 [M]; common practice in metabolic control analysis), with the linear system
//! solved by nalgebra LU (SVD least squares if it is singular), an Armijo backtracking line
//! search on the weighted residual, and steps shortened so that no concentration crosses zero.
//!
//! "Reached from the initial state" is checked, not assumed: unless
//! [`SteadyOptions::verify`] is off, the rate equations are integrated from the initial state
//! ([`super::ode`]) over doubling time segments until the trajectory comes within 10⁻³
//! (relative) of Newton's stable answer, or its rates of change become small, in which case
//! Newton polishes the state it reached. When no steady state is reached the reason is found from
//! the trajectory: unbounded growth (a species still rising by ≥ 25 % per doubling of time over
//! five doublings), sustained oscillation (≥ 4 turning points per segment with no decay over
//! three segments), a concentration turning negative, or a blow-up; where the algebraic
//! solution exists but has a negative concentration, the message says so, and names the
//! conservation law that cannot hold when that species belongs to one.
//!
//! Residual: max |dx/dt| over the free species, and the same divided by the largest gross
//! turnover Σ_j |S_ij|·v_j of any species (at the steady state or at the start, whichever is
//! larger). Newton stops when that ratio against the turnover at the state itself is below
//! [`SteadyOptions::tol`], or against the turnover at the start below tol/1000 (for networks that
//! run down to rest, where both vanish together), and then takes one more step if it helps. Stability: eigenvalues of the reduced Jacobian (see [`super::reduce`]); asymptotically
//! stable when every real part is below −10⁻¹⁰·max|λ|.

use super::ode::{Integrator, OdeFailure, OdeOptions};
use super::reduce::Reduction;
use super::system::System;
use crate::network::Network;
use crate::numbers::short;
use crate::{Error, Result};
use nalgebra::{Complex, DMatrix, DVector, Schur};

/// How to look for the steady state.
#[derive(Clone, Debug)]
pub struct SteadyOptions {
    /// Relative residual (see the module docs) below which a state counts as steady.
    pub tol: f64,
    /// Newton iterations per attempt.
    pub max_newton: usize,
    /// Confirm by integrating from the initial state that the steady state is the one reached.
    pub verify: bool,
    /// Where Newton starts (concentrations of every species), e.g. a nearby steady state in a
    /// sensitivity analysis. The conserved totals always come from the network's initial state.
    pub guess: Option<Vec<f64>>,
    /// Integration settings for the time-course fallback and the check.
    pub ode: OdeOptions,
    /// Longest time to integrate, in seconds (default: 2⁵⁰ times the fastest time scale at the
    /// start, within the step budget of `ode.max_steps`).
    pub max_time: Option<f64>,
}

impl Default for SteadyOptions {
    fn default() -> SteadyOptions {
        SteadyOptions {
            tol: 1e-10,
            max_newton: 100,
            verify: true,
            guess: None,
            ode: OdeOptions {
                rtol: 1e-8,
                atol_molecules: 1e-6,
                max_steps: 200_000,
                h_max: f64::INFINITY,
            },
            max_time: None,
        }
    }
}

impl SteadyOptions {
    /// Newton only, from `guess` (falling back to integration if Newton fails): for many nearby
    /// solves, as in a sensitivity analysis around a known steady state.
    pub fn near(guess: Vec<f64>) -> SteadyOptions {
        SteadyOptions {
            verify: false,
            guess: Some(guess),
            ..SteadyOptions::default()
        }
    }
}

/// Which route found the steady state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// Newton's method alone (no check by integration was asked for).
    Newton,
    /// Newton's method, and the trajectory from the initial state was seen to approach it.
    NewtonConfirmed,
    /// Integration in time from the initial state, then Newton to polish.
    IntegrationThenNewton,
}

impl Method {
    pub fn as_str(self) -> &'static str {
        match self {
            Method::Newton => "newton",
            Method::NewtonConfirmed => "newton, confirmed by integration",
            Method::IntegrationThenNewton => "integration, then newton",
        }
    }
}

/// Linear stability of a steady state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Stability {
    /// Every eigenvalue of the reduced Jacobian has a negative real part.
    Stable,
    /// The largest real part is zero to rounding: linear analysis cannot decide.
    Marginal,
    /// Some eigenvalue has a positive real part.
    Unstable,
}

impl Stability {
    pub fn as_str(self) -> &'static str {
        match self {
            Stability::Stable => "asymptotically stable",
            Stability::Marginal => "marginal",
            Stability::Unstable => "unstable",
        }
    }
}

/// How far a state is from steady.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Residual {
    /// max |dx/dt| over the free species, concentration per second (molecules per second
    /// without a volume).
    pub max_abs: f64,
    /// The same in molecules per second (×Ω).
    pub max_abs_per_s: f64,
    /// max |dx/dt| divided by the largest gross turnover.
    pub relative: f64,
}

/// A steady state with everything the reports, the reconciler and the noise analysis read.
#[derive(Clone, Debug)]
pub struct Steady {
    /// Ω of the network (1 without a volume).
    pub omega: f64,
    /// Concentrations of every species (counts without a volume); clamped ones fixed.
    pub conc: Vec<f64>,
    /// Counts of every species (conc·Ω), continuous.
    pub counts: Vec<f64>,
    /// Rate of every reaction, concentration per second.
    pub rates: Vec<f64>,
    /// Rate of every reaction in molecules per second (v·Ω).
    pub fluxes_per_s: Vec<f64>,
    pub residual: Residual,
    /// Eigenvalues of the reduced Jacobian (1/s).
    pub eigenvalues: Vec<Complex<f64>>,
    pub stability: Stability,
    /// Network indices of the independent species (the reduced coordinates).
    pub independent: Vec<usize>,
    /// Conserved total of each of `net.conservation_laws`, in concentration units.
    pub totals: Vec<f64>,
    /// Newton iterations of the attempt that produced the answer.
    pub iterations: usize,
    pub method: Method,
    /// Time integrated (s) and accepted ODE steps, 0 when no integration ran.
    pub integrated_time: f64,
    pub ode_steps: usize,
    /// The species that only accumulate ([`Network::outputs`]), with their rates at the steady
    /// state of the rest; their entries in `conc` and `counts` hold their initial amount.
    pub outputs: Vec<Accumulation>,
}

/// A species that only accumulates, and how fast.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Accumulation {
    pub species: usize,
    /// d[X]/dt in X's own compartment (concentration per second; molecules per second
    /// without a volume).
    pub rate: f64,
    /// dx/dt in molecules per second.
    pub rate_per_s: f64,
}

impl Steady {
    /// Asymptotically stable.
    pub fn stable(&self) -> bool {
        self.stability == Stability::Stable
    }
}

/// A steady state is a fixed point of autonomous rate equations: a network driven in time
/// (doses, infusions, events, time in a law) has none, and a periodic drive settles, if at
/// all, on a stationary cycle rather than a point.
fn refuse_time_forcing(net: &Network) -> Result<()> {
    let Some(what) = net.time_forcing() else {
        return Ok(());
    };
    let msg = if net.periodic_drive() {
        format!(
            "{}: {what} with a periodic drive: its long-run behaviour is a stationary cycle, \
             not a point, so it has no steady state; follow the cycle with `simulate --method \
             ode` over several periods, or an ensemble with `simulate`",
            net.file
        )
    } else {
        format!(
            "{}: the network is driven in time ({what}), so no steady state of its rate \
             equations describes it; follow it with `simulate --method ode` or `simulate`",
            net.file
        )
    };
    Err(Error::usage(msg))
}

/// Everything Newton needs that does not change between iterations.
struct Ctx<'s, 'a> {
    sys: &'s System<'a>,
    red: Reduction,
    totals: Vec<f64>,
    /// Gross-turnover reference from the initial state.
    g_ref: f64,
    tol: f64,
    /// Absolute concentration scale below which differences do not matter (10⁻⁶ molecules).
    tiny: f64,
    /// A million times the largest amount at the start, plus one molecule.
    bound: f64,
}

struct Eval {
    f: Vec<f64>,
    /// max|f| over the larger of the turnover here and at the start.
    rel_rate: f64,
    /// max|f| over the turnover here alone.
    rel_own: f64,
    /// Largest amount.
    top: f64,
    rel_law: f64,
    law_res: Vec<f64>,
    law_scale: Vec<f64>,
    gmax: f64,
}

impl Ctx<'_, '_> {
    fn eval(&self, y: &[f64]) -> Option<Eval> {
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
    fn converged(&self, e: &Eval) -> bool {
        e.rel_law <= 1e-10
            && (e.rel_own <= self.tol || (e.rel_rate <= 1e-3 * self.tol && e.top <= self.bound))
    }

    /// Weighted residual vector [f_I / g; (Λx − T)/scale] with weights fixed by `w`.
    fn weighted(&self, e: &Eval, w: &Eval) -> Vec<f64> {
        let gw = if w.gmax > 0.0 { 1.0 / w.gmax } else { 1.0 };
        let mut out: Vec<f64> = self.red.independent.iter().map(|&k| e.f[k] * gw).collect();
        out.extend(e.law_res.iter().zip(&w.law_scale).map(|(r, s)| r / s));
        out
    }

    /// Largest difference between two states, each species relative to its own level, with
    /// differences below 10⁻⁶ of the largest level (or 10⁻⁶ molecules) not counted.
    fn distance(&self, a: &[f64], b: &[f64]) -> f64 {
        let top = b.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let floor = self.tiny.max(1e-6 * top);
        a.iter()
            .zip(b)
            .map(|(x, y)| (x - y).abs() / (x.abs().max(y.abs()) + floor))
            .fold(0.0, f64::max)
    }
}

/// max|a − b| relative to the largest level in either state (at least `floor`).
fn norm_distance(a: &[f64], b: &[f64], floor: f64) -> f64 {
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

struct NewtonRun {
    y: Vec<f64>,
    iterations: usize,
    converged: bool,
}

/// Newton from `start`. Guarded (`positive`): steps are shortened so that no positive
/// concentration falls below 10 % of its value, then halved until the weighted residual falls
/// (Armijo). Unguarded: full steps, wherever they lead (used only to locate an algebraic
/// solution with negative amounts for a diagnosis).
fn newton(ctx: &Ctx, start: &[f64], positive: bool, max_iter: usize) -> NewtonRun {
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
fn newton_step(ctx: &Ctx, y: &[f64], e: &Eval, positive: bool) -> Option<(Vec<f64>, Eval)> {
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

fn eigenvalues(m: &DMatrix<f64>) -> Result<Vec<Complex<f64>>> {
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

fn stability_of(ev: &[Complex<f64>]) -> Stability {
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
fn spectral_radius(ctx: &Ctx, y: &[f64]) -> f64 {
    let jr = ctx.red.reduced_jacobian(&ctx.sys.jacobian(y));
    eigenvalues(&jr)
        .map(|ev| ev.iter().fold(0.0f64, |m, z| m.max(z.norm())))
        .unwrap_or(0.0)
}

/// Slowest relaxation time 1/min|Re λ| of a set of eigenvalues, ignoring those with a real part
/// at rounding level (0 if there is none).
fn slowest_time(ev: &[Complex<f64>]) -> f64 {
    let rho = ev.iter().fold(0.0f64, |m, z| m.max(z.norm()));
    ev.iter()
        .filter(|z| z.re.abs() > 1e-9 * rho)
        .fold(0.0f64, |m, z| m.max(1.0 / z.re.abs()))
}

/// Finds the steady state reached from the network's initial state.
///
/// Species that only accumulate ([`Network::outputs`]) are held at their initial amount while
/// the rest is solved, and reported with their accumulation rate Σⱼ S_ij·vⱼ at that state.
pub fn solve(net: &Network, opts: &SteadyOptions) -> Result<Steady> {
    refuse_time_forcing(net)?;
    let outputs = net.outputs();
    if outputs.is_empty() {
        return solve_closed(net, opts);
    }
    let mut st = solve_closed(&net.holding(&outputs), opts)?;
    st.outputs = outputs
        .iter()
        .map(|&i| {
            let rate: f64 = net
                .stoichiometry
                .row(i)
                .iter()
                .map(|&(j, s)| s as f64 * st.rates[j])
                .sum();
            let rate_per_s = rate * net.omega;
            Accumulation {
                species: i,
                rate: rate_per_s / net.species_omega(i),
                rate_per_s,
            }
        })
        .collect();
    Ok(st)
}

fn solve_closed(net: &Network, opts: &SteadyOptions) -> Result<Steady> {
    let sys = System::new(net);
    let y0 = sys.initial();
    let red = Reduction::new(&sys);
    let totals = red.totals(&y0);
    let v0 = sys.rates(&y0);
    if let Some(j) = v0.iter().position(|v| !v.is_finite()) {
        return Err(bad_rate(net, j, v0[j], "at the initial state"));
    }
    let g_ref = sys.gross(&v0).into_iter().fold(0.0, f64::max);
    let top0 = y0.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let ctx = Ctx {
        sys: &sys,
        red,
        totals,
        g_ref,
        tol: opts.tol,
        tiny: (1e-6 / net.omega).max(1e-15 * top0),
        bound: 1e6 * (top0 + 1.0 / net.omega),
    };
    let guess = match &opts.guess {
        Some(g) if g.len() == net.species.len() => sys.restrict(g),
        Some(_) => {
            return Err(Error::Internal(
                "steady-state guess has the wrong number of species".into(),
            ))
        }
        None => y0.clone(),
    };
    let mut first = newton(&ctx, &guess, true, opts.max_newton);
    if !first.converged && opts.guess.is_some() {
        first = newton(&ctx, &y0, true, opts.max_newton);
    }
    let candidate = if first.converged {
        let st = finish(
            &ctx,
            first.y.clone(),
            Method::Newton,
            first.iterations,
            0.0,
            0,
        )?;
        Some(st)
    } else {
        None
    };
    if let Some(c) = &candidate {
        if !opts.verify && c.stability != Stability::Unstable {
            return Ok(c.clone());
        }
    }
    integrate_then_polish(&ctx, &y0, candidate, opts)
}

/// Samples per doubling segment of the time course.
const SAMPLES: usize = 48;

struct Segment {
    t_end: f64,
    y_end: Vec<f64>,
    samples: Vec<Vec<f64>>,
}

fn integrate_then_polish(
    ctx: &Ctx,
    y0: &[f64],
    candidate: Option<Steady>,
    opts: &SteadyOptions,
) -> Result<Steady> {
    let net = ctx.sys.net;
    let stable_candidate = candidate
        .as_ref()
        .filter(|c| c.stability == Stability::Stable);
    let cand_y = stable_candidate.map(|c| ctx.sys.restrict(&c.conc));
    // First segment: the fastest time scale at the start, from the Jacobian's spectral radius
    // and from each species' turnover relative to its level (plus one molecule).
    let v0 = ctx.sys.rates(y0);
    let turnover = ctx
        .sys
        .gross(&v0)
        .iter()
        .zip(y0)
        .fold(0.0f64, |m, (g, y)| m.max(g / (y.abs() + 1.0 / net.omega)));
    let mut t_fast = 1.0 / spectral_radius(ctx, y0).max(turnover);
    if let Some(c) = stable_candidate {
        let slow = c
            .eigenvalues
            .iter()
            .fold(f64::INFINITY, |m, z| m.min(z.re.abs()));
        if !t_fast.is_finite() && slow.is_finite() && slow > 0.0 {
            t_fast = 0.01 / slow;
        }
    }
    if !t_fast.is_finite() || t_fast <= 0.0 {
        t_fast = 1.0;
    }
    let t_max = opts.max_time.unwrap_or(t_fast * 2f64.powi(50));
    // No verdict on growth or oscillation before 20 of the slowest relaxation times at the start
    // or at Newton's fixed point: a transient can look like either.
    let ev0 = eigenvalues(&ctx.red.reduced_jacobian(&ctx.sys.jacobian(y0))).unwrap_or_default();
    let t_slow = slowest_time(&ev0).max(
        candidate
            .as_ref()
            .map_or(0.0, |c| slowest_time(&c.eigenvalues)),
    );
    let top0 = y0.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let top_c = cand_y
        .as_ref()
        .map_or(0.0, |c| c.iter().fold(0.0f64, |m, x| m.max(x.abs())));
    let watch = Watch {
        t_min: 20.0 * t_slow,
        ceiling: cand_y.clone(),
        huge: 1e6 * (top0.max(top_c) + 1.0 / net.omega),
    };
    let mut int = Integrator::new(ctx.sys, y0.to_vec(), &opts.ode);
    let mut history: Vec<Segment> = Vec::new();
    let mut t_prev = 0.0;
    let mut t_next = t_fast;
    loop {
        // Check the state at the start of each segment (also catches a start already steady).
        let y = int.y().to_vec();
        if let (Some(cy), Some(c)) = (&cand_y, &candidate) {
            if ctx.distance(&y, cy) < 1e-3 {
                let polished = newton(ctx, &y, true, opts.max_newton);
                if polished.converged && ctx.distance(&polished.y, cy) < 1e-6 {
                    let c = c.clone();
                    return Ok(Steady {
                        method: Method::NewtonConfirmed,
                        integrated_time: int.t(),
                        ode_steps: int.accepted,
                        ..c
                    });
                }
            }
        }
        if let Some(e) = ctx.eval(&y) {
            if e.rel_rate < 1e-6 {
                let polished = newton(ctx, &y, true, opts.max_newton);
                if polished.converged && norm_distance(&polished.y, &y, ctx.tiny) < 1e-3 {
                    return finish(
                        ctx,
                        polished.y,
                        Method::IntegrationThenNewton,
                        polished.iterations,
                        int.t(),
                        int.accepted,
                    );
                }
            }
        }
        if t_prev >= t_max {
            break;
        }
        let t_end = t_next.min(t_max);
        let mut samples = Vec::with_capacity(SAMPLES);
        for s in 1..=SAMPLES {
            let t = t_prev + (t_end - t_prev) * s as f64 / SAMPLES as f64;
            if let Err(fail) = int.advance_to(t) {
                let yy = int.y();
                if let Some(k) = (0..yy.len()).find(|&k| yy[k] < -ctx.tiny) {
                    return Err(negative_during_run(ctx, k, yy[k], int.t()));
                }
                return Err(no_steady_state(
                    ctx,
                    y0,
                    candidate.as_ref(),
                    &history,
                    Some(&fail),
                    int.y(),
                    int.t(),
                ));
            }
            let yy = int.y();
            let scale = top0.max(yy.iter().fold(0.0f64, |m, x| m.max(x.abs())));
            if let Some(k) = (0..yy.len()).find(|&k| yy[k] < -1e-6 * scale - ctx.tiny) {
                return Err(negative_during_run(ctx, k, yy[k], int.t()));
            }
            samples.push(yy.to_vec());
        }
        history.push(Segment {
            t_end,
            y_end: int.y().to_vec(),
            samples,
        });
        if let Some(reason) = classify(ctx, &history, &watch) {
            return Err(no_steady_state_because(
                ctx,
                y0,
                candidate.as_ref(),
                reason,
                int.t(),
            ));
        }
        t_prev = t_end;
        t_next = 2.0 * t_end;
    }
    let _ = net;
    Err(no_steady_state(
        ctx,
        y0,
        candidate.as_ref(),
        &history,
        None,
        int.y(),
        int.t(),
    ))
}

/// Builds the result at free concentrations `y`.
fn finish(
    ctx: &Ctx,
    mut y: Vec<f64>,
    method: Method,
    iterations: usize,
    integrated_time: f64,
    ode_steps: usize,
) -> Result<Steady> {
    let sys = ctx.sys;
    let net = sys.net;
    let top = y.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let floor = ctx.tiny.max(1e-12 * top);
    // Rounding residue just below zero is zero.
    for v in y.iter_mut() {
        if *v < 0.0 && *v > -floor {
            *v = 0.0;
        }
    }
    let conc = sys.embed(&y);
    let rates = sys.rates(&y);
    let f = sys.rhs_from_rates(&rates);
    let gmax = sys.gross(&rates).into_iter().fold(ctx.g_ref, f64::max);
    // A law may go negative where mass action cannot; the stochastic kernels refuse such a
    // rate, and so does the steady state (beyond rounding of the largest turnover).
    if let Some(j) = (0..rates.len()).find(|&j| rates[j] < -1e-9 * gmax.max(f64::MIN_POSITIVE)) {
        return Err(bad_rate(net, j, rates[j], "at the steady state"));
    }
    let max_abs = f.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let relative = if gmax > 0.0 { max_abs / gmax } else { 0.0 };
    let jr = ctx.red.reduced_jacobian(&sys.jacobian(&y));
    let eigenvalues = eigenvalues(&jr)?;
    let stability = stability_of(&eigenvalues);
    let totals = net
        .conservation_laws
        .iter()
        .map(|l| l.iter().zip(&conc).map(|(&c, x)| c as f64 * x).sum())
        .collect();
    Ok(Steady {
        omega: net.omega,
        counts: conc.iter().map(|x| x * net.omega).collect(),
        conc,
        fluxes_per_s: rates.iter().map(|v| v * net.omega).collect(),
        rates,
        residual: Residual {
            max_abs,
            max_abs_per_s: max_abs * net.omega,
            relative,
        },
        eigenvalues,
        stability,
        independent: ctx.red.independent.iter().map(|&k| sys.free[k]).collect(),
        totals,
        iterations,
        method,
        integrated_time,
        ode_steps,
        outputs: Vec::new(),
    })
}

// ---------------------------------------------------------------------------------------------
// Why there is no steady state
// ---------------------------------------------------------------------------------------------

/// What the time course shows.
enum Reason {
    /// Species slot still rising, with its rate of change (concentration/s).
    Growth { slot: usize, rate: f64 },
    /// Species slot swinging between `low` and `high` with about `period` seconds per cycle.
    Oscillation {
        slot: usize,
        low: f64,
        high: f64,
        period: f64,
    },
}

/// Turning points of a sampled series, ignoring wiggles below 10⁻⁹ of its range.
fn turning_points(xs: &[f64]) -> usize {
    let (lo, hi) = xs
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let eps = 1e-9 * (hi - lo).max(0.0);
    let mut last = 0i8;
    let mut count = 0;
    for w in xs.windows(2) {
        let d = w[1] - w[0];
        let s = if d > eps {
            1
        } else if d < -eps {
            -1
        } else {
            0
        };
        if s != 0 {
            if last != 0 && s != last {
                count += 1;
            }
            last = s;
        }
    }
    count
}

/// When the time course may be judged.
struct Watch {
    /// Earliest time for a verdict.
    t_min: f64,
    /// A stable fixed point: growth is claimed only for a species already past 10 times its
    /// level there.
    ceiling: Option<Vec<f64>>,
    /// A level no bounded transient reaches: a million times the largest amount at the start or
    /// at the fixed point, plus one molecule. A species still rising past it is growing without
    /// bound whatever the time.
    huge: f64,
}

fn classify(ctx: &Ctx, history: &[Segment], watch: &Watch) -> Option<Reason> {
    let n = ctx.sys.n();
    let h = history.len();
    if h >= 3 {
        for k in 0..n {
            let (a, b, c) = (
                history[h - 3].y_end[k],
                history[h - 2].y_end[k],
                history[h - 1].y_end[k],
            );
            if c > watch.huge && a > 0.0 && b >= 1.25 * a && c >= 1.25 * b {
                let f = ctx.sys.rhs(&history[h - 1].y_end);
                return Some(Reason::Growth {
                    slot: k,
                    rate: f[k],
                });
            }
        }
    }
    if history.last().is_none_or(|s| s.t_end < watch.t_min) {
        return None;
    }
    // Unbounded growth: rising ≥ 25 % per doubling over the last five doublings, and still
    // rising at a rate comparable to level/time (power-law or faster growth).
    if h >= 6 {
        for k in 0..n {
            let rising = (h - 5..h).all(|s| {
                let (a, b) = (history[s - 1].y_end[k], history[s].y_end[k]);
                a > 0.0 && b >= 1.25 * a
            });
            let past = watch
                .ceiling
                .as_ref()
                .is_none_or(|c| history[h - 1].y_end[k] > 10.0 * c[k] + ctx.tiny);
            if rising && past {
                let last = &history[h - 1];
                let f = ctx.sys.rhs(&last.y_end);
                if f[k] > 0.0 && f[k] * last.t_end / last.y_end[k] >= 0.2 {
                    return Some(Reason::Growth {
                        slot: k,
                        rate: f[k],
                    });
                }
            }
        }
    }
    // Sustained oscillation: ≥ 4 turning points in each of the last three segments, and the
    // swing not shrinking below half from one segment to the next.
    if h >= 3 {
        let swing = |s: &Segment, k: usize| -> (f64, f64) {
            s.samples
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), y| {
                    (a.min(y[k]), b.max(y[k]))
                })
        };
        let mut best: Option<(usize, f64)> = None;
        for k in 0..n {
            let ok = (h - 3..h).all(|s| {
                let series: Vec<f64> = history[s].samples.iter().map(|y| y[k]).collect();
                let (lo, hi) = swing(&history[s], k);
                let scale = hi.abs().max(lo.abs()).max(ctx.tiny);
                turning_points(&series) >= 4 && (hi - lo) > 1e-6 * scale
            }) && (h - 2..h).all(|s| {
                let (a0, a1) = swing(&history[s - 1], k);
                let (b0, b1) = swing(&history[s], k);
                (b1 - b0) >= 0.5 * (a1 - a0)
            });
            if ok {
                let (lo, hi) = swing(&history[h - 1], k);
                let rel = (hi - lo) / hi.abs().max(ctx.tiny);
                if best.is_none_or(|(_, r)| rel > r) {
                    best = Some((k, rel));
                }
            }
        }
        if let Some((k, _)) = best {
            let last = &history[h - 1];
            let (lo, hi) = swing(last, k);
            let series: Vec<f64> = last.samples.iter().map(|y| y[k]).collect();
            let span = last.t_end - history[h - 2].t_end;
            let tp = turning_points(&series).max(1) as f64;
            return Some(Reason::Oscillation {
                slot: k,
                low: lo,
                high: hi,
                period: 2.0 * span / tp,
            });
        }
    }
    None
}

/// `1234 molecules (2.05e-9 M)` style amount of a state value y (counts/Ω), with its
/// concentration where `own` (Ω_c of the compartment it refers to) is known.
fn amount(net: &Network, own: Option<f64>, y: f64) -> String {
    let count = y * net.omega;
    match own {
        Some(w) => format!(
            "{} molecules ({} {})",
            short(count),
            short(count / w),
            net.amount.concentration_unit
        ),
        None => format!("{} molecules", short(count)),
    }
}

/// [`amount`] per second.
fn rate_text(net: &Network, own: Option<f64>, rate: f64) -> String {
    let count = rate * net.omega;
    match own {
        Some(w) => format!(
            "{} molecules/s ({} {}/s)",
            short(count),
            short(count / w),
            net.amount.concentration_unit
        ),
        None => format!("{} molecules/s", short(count)),
    }
}

/// Ω of the only compartment, for figures that belong to no one species (a conserved total).
fn single_omega(net: &Network) -> Option<f64> {
    (net.compartments.len() == 1).then(|| net.compartments[0].omega)
}

/// Where the algebraic steady state exists only with a negative concentration: a sentence
/// naming it, and the conservation law it breaks if it belongs to one.
fn negative_root_note(ctx: &Ctx, starts: &[&[f64]]) -> Option<String> {
    let net = ctx.sys.net;
    for s in starts {
        let run = newton(ctx, s, false, 200);
        if !run.converged {
            continue;
        }
        let top = run.y.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let mut neg: Vec<usize> = (0..run.y.len())
            .filter(|&k| run.y[k] < -(1e-9 * top).max(ctx.tiny))
            .collect();
        if neg.is_empty() {
            continue;
        }
        neg.sort_by(|&a, &b| run.y[a].total_cmp(&run.y[b]));
        let listed: Vec<String> = neg
            .iter()
            .map(|&k| {
                format!(
                    "{} ({})",
                    net.species[ctx.sys.free[k]].name,
                    amount(net, net.species_molar_omega(ctx.sys.free[k]), run.y[k])
                )
            })
            .collect();
        let mut note = format!(
            " The rate equations balance only at a negative amount of {}",
            listed.join(" and ")
        );
        let law = net
            .conservation_laws
            .iter()
            .find(|l| neg.iter().any(|&k| l[ctx.sys.free[k]] != 0));
        if let Some(l) = law {
            let total: f64 = l
                .iter()
                .zip(&net.initial_concentrations())
                .map(|(&c, x)| c as f64 * x)
                .sum();
            note.push_str(&format!(
                ", so the conserved total {} = {} cannot hold with every amount at least 0.",
                crate::network::law_text(net, l),
                amount(net, single_omega(net), total)
            ));
        } else {
            note.push('.');
        }
        return Some(note);
    }
    None
}

fn candidate_note(net: &Network, candidate: Option<&Steady>) -> String {
    let Some(c) = candidate else {
        return String::new();
    };
    let ev: Vec<String> = c
        .eigenvalues
        .iter()
        .take(4)
        .map(|z| {
            if z.im.abs() > 0.0 {
                format!(
                    "{} {} {}i",
                    short(z.re),
                    if z.im < 0.0 { "-" } else { "+" },
                    short(z.im.abs())
                )
            } else {
                short(z.re)
            }
        })
        .collect();
    let at: Vec<String> = net
        .species
        .iter()
        .enumerate()
        .filter(|(_, s)| !s.clamped)
        .take(6)
        .map(|(i, s)| format!("{} = {}", s.name, short(c.counts[i])))
        .collect();
    format!(
        " The fixed point of the rate equations at {} (molecules) is {} (eigenvalues {}).",
        at.join(", "),
        c.stability.as_str(),
        ev.join(", ")
    )
}

fn no_steady_state_because(
    ctx: &Ctx,
    y0: &[f64],
    candidate: Option<&Steady>,
    reason: Reason,
    t: f64,
) -> Error {
    let net = ctx.sys.net;
    let msg = match reason {
        Reason::Growth { slot, rate } => {
            let i = ctx.sys.free[slot];
            let name = &net.species[i].name;
            let mut m = format!(
                "{}: no steady state is reached from the initial state: {name} grows without bound (still rising at {} at t = {} s; what makes it outpaces what removes it).",
                net.file,
                rate_text(net, net.species_molar_omega(i), rate),
                short(t)
            );
            if let Some(note) = negative_root_note(ctx, &[y0]) {
                m.push_str(&note);
            }
            m
        }
        Reason::Oscillation {
            slot,
            low,
            high,
            period,
        } => {
            let i = ctx.sys.free[slot];
            let name = &net.species[i].name;
            let own = net.species_molar_omega(i);
            format!(
                "{}: no steady state is reached from the initial state: sustained oscillation; {name} keeps swinging between {} and {} (about {} s per cycle at t = {} s).{}",
                net.file,
                amount(net, own, low),
                amount(net, own, high),
                short(period),
                short(t),
                candidate_note(net, candidate)
            )
        }
    };
    Error::Usage(msg)
}

/// A rate that is negative or not finite, located at its step.
fn bad_rate(net: &Network, j: usize, v: f64, where_: &str) -> Error {
    let r = &net.reactions[j];
    let d = crate::error::Diagnostic::at(
        &net.file,
        &net.source.source,
        r.span,
        format!(
            "step `{}`: its rate is {} {where_}; a rate must be finite and not negative",
            r.label,
            rate_text(net, net.reaction_molar_omega(j), v)
        ),
    )
    .with_help(
        "check the law for a subtraction or division that can go below zero or blow up \
         (e.g. write `max(0, 3 - A)` or use sat/inhib)",
    );
    Error::Input(vec![d])
}

fn negative_during_run(ctx: &Ctx, slot: usize, value: f64, t: f64) -> Error {
    let net = ctx.sys.net;
    let i = ctx.sys.free[slot];
    let name = &net.species[i].name;
    Error::Usage(format!(
        "{}: no steady state is reached from the initial state: {name} becomes negative ({} at t = {} s); a rate law keeps removing it when none is left (write the law so that it vanishes with {name}, e.g. with sat({name}, K)).",
        net.file,
        amount(net, net.species_molar_omega(i), value),
        short(t)
    ))
}

fn no_steady_state(
    ctx: &Ctx,
    y0: &[f64],
    candidate: Option<&Steady>,
    history: &[Segment],
    failure: Option<&OdeFailure>,
    y_last: &[f64],
    t_last: f64,
) -> Error {
    let net = ctx.sys.net;
    let head = format!(
        "{}: no steady state is reached from the initial state",
        net.file
    );
    if let Some(f) = failure {
        if let Some(reason) = classify(
            ctx,
            history,
            &Watch {
                t_min: 0.0,
                ceiling: None,
                huge: f64::INFINITY,
            },
        ) {
            return no_steady_state_because(ctx, y0, candidate, reason, t_last);
        }
        // The species that grew most relative to the start (plus one molecule).
        let one = 1.0 / net.omega;
        let big = (0..y_last.len()).max_by(|&a, &b| {
            let ga = y_last[a].abs() / (y0[a].abs() + one);
            let gb = y_last[b].abs() / (y0[b].abs() + one);
            ga.total_cmp(&gb)
        });
        let what = match big {
            Some(k) if y_last[k].abs() > 1e3 * (y0[k].abs() + one) => {
                let own = net.species_molar_omega(ctx.sys.free[k]);
                format!(
                    " {} has reached {} (from {} at the start), which points to unbounded growth.",
                    net.species[ctx.sys.free[k]].name,
                    amount(net, own, y_last[k]),
                    amount(net, own, y0[k])
                )
            }
            _ => {
                let f = ctx.sys.rhs(y_last);
                match (0..f.len()).max_by(|&a, &b| f[a].abs().total_cmp(&f[b].abs())) {
                    Some(k) => format!(
                        " At that time {} is changing at {}.",
                        net.species[ctx.sys.free[k]].name,
                        rate_text(net, net.species_molar_omega(ctx.sys.free[k]), f[k])
                    ),
                    None => String::new(),
                }
            }
        };
        let mut m = format!("{head}: {}.{what}", f.describe());
        if let Some(note) = negative_root_note(ctx, &[y0]) {
            m.push_str(&note);
        }
        m.push_str(&candidate_note(net, candidate));
        return Error::Usage(m);
    }
    let f = ctx.sys.rhs(y_last);
    let k = (0..f.len()).max_by(|&a, &b| f[a].abs().total_cmp(&f[b].abs()));
    let still = match k {
        Some(k) => format!(
            "; {} is still changing at {}",
            net.species[ctx.sys.free[k]].name,
            rate_text(net, net.species_molar_omega(ctx.sys.free[k]), f[k])
        ),
        None => String::new(),
    };
    let mut m = format!(
        "{head}: the rates of change have not settled by t = {} s{still} (the approach is slower than exponential, or there is none).",
        short(t_last)
    );
    if let Some(note) = negative_root_note(ctx, &[y0, y_last]) {
        m.push_str(&note);
    }
    m.push_str(&candidate_note(net, candidate));
    Error::Usage(m)
}
