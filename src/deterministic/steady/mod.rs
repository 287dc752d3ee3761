//! The deterministic steady state reached from the initial state.
//!
//! Newton's method on F(x) = 0, where F stacks the rate equations of the independent species
//! and the conservation laws Λ·x − T (T from the initial state) in place of the dependent rows
//! (Reder 1988 \[M\]; common practice in metabolic control analysis), with the linear system
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

mod diagnose;
mod newton;
mod verify;

use super::ode::OdeOptions;
use super::reduce::Reduction;
use super::system::System;
use crate::network::Network;
use crate::{Error, Result};
use diagnose::bad_rate;
use nalgebra::Complex;
use newton::{eigenvalues, newton, stability_of, Ctx};
use verify::integrate_then_polish;

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
pub enum Route {
    /// Newton's method alone (no check by integration was asked for).
    Newton,
    /// Newton's method, and the trajectory from the initial state was seen to approach it.
    NewtonConfirmed,
    /// Integration in time from the initial state, then Newton to polish.
    IntegrationThenNewton,
}

impl Route {
    pub fn as_str(self) -> &'static str {
        match self {
            Route::Newton => "newton",
            Route::NewtonConfirmed => "newton, confirmed by integration",
            Route::IntegrationThenNewton => "integration, then newton",
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
    pub method: Route,
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
    /// d\[X\]/dt in X's own compartment (concentration per second; molecules per second
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
            Route::Newton,
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

/// Builds the result at free concentrations `y`.
fn finish(
    ctx: &Ctx,
    mut y: Vec<f64>,
    method: Route,
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
