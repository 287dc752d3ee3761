//! "Reached from the initial state", checked: the rate equations integrated over doubling
//! segments until the trajectory meets Newton's answer or comes to rest, or shows why it
//! cannot (see the parent module's doc for the criteria).

use super::diagnose::{
    classify, negative_during_run, no_steady_state, no_steady_state_because, Watch,
};
use super::newton::{eigenvalues, newton, norm_distance, slowest_time, spectral_radius, Ctx};
use super::{finish, Route, Stability, Steady, SteadyOptions};
use crate::deterministic::ode::Integrator;
use crate::Result;
/// Samples per doubling segment of the time course.
pub(super) const SAMPLES: usize = 48;

pub(super) struct Segment {
    pub(super) t_end: f64,
    pub(super) y_end: Vec<f64>,
    pub(super) samples: Vec<Vec<f64>>,
}

pub(super) fn integrate_then_polish(
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
                        method: Route::NewtonConfirmed,
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
                        Route::IntegrationThenNewton,
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
