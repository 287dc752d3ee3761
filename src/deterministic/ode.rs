//! Stiff integration of the rate equations: the Rosenbrock method RODAS4 with error control.
//!
//! Method (Hairer & Wanner, *Solving Ordinary Differential Equations II*, 2nd ed., Springer
//! 1996, §IV.7; coefficients of their code RODAS): a six-stage, stiffly accurate, L-stable
//! Rosenbrock method of order 4 with an embedded solution of order 3. In the transformed
//! variables uᵢ each stage solves one linear system with the same matrix,
//!
//! ```text
//! (I/(h·γ) − J)·uᵢ = f(y₀ + Σ_{j<i} a_ij·u_j) + Σ_{j<i} (c_ij/h)·u_j ,   γ = 1/4,
//! ```
//!
//! with J the exact Jacobian at y₀. For rate equations that depend smoothly on time (a law with
//! sin, cos or time in its arithmetic) stage i is evaluated at t₀ + αᵢ·h and its right side
//! gains h·dᵢ·∂f/∂t (the non-autonomous form; α = (0, 0.386, 0.21, 0.63, 1, 1) and
//! d = (0.25, −0.1043, 0.1035, −0.0362, 0, 0), the row sums of the method's Γ, as in Hairer &
//! Wanner's RODAS), with ∂f/∂t by dual numbers. The embedded solution is y₀ + Σ a_6j·u_j and
//! the new solution adds u₆, so u₆ is the local error estimate. A linear conservation law l·x
//! is kept to rounding because every uᵢ lies in the range of S.
//!
//! Breakpoints and events (doses, edges of piecewise-constant laws, triggers;
//! [`crate::kernel::timeline`]): [`integrate`] integrates up to each breakpoint, applies it
//! and restarts there; between two breakpoints every evaluation takes its time inside the open
//! interval, so a law that jumps at an edge is never seen on the wrong side of it. A trigger
//! that reads species is checked after every accepted step; when its value changed, the
//! crossing is located by bisection on the step's cubic Hermite interpolant (from y₀, f₀, y₁,
//! f₁; third-order accurate, Hairer, Nørsett & Wanner, *Solving ODEs I*, §II.6), the step is
//! redone to end exactly there, and the event is executed.
//!
//! Step control: err = RMS(u₆ᵢ / (atol + rtol·max(|y₀ᵢ|, |y₁ᵢ|))); a step with err ≤ 1 is
//! accepted; the next step is h·min(5, max(0.2, 0.9·err^(−1/4))) (no increase right after a
//! rejection). Output times are hit exactly by shortening the step that would pass them.
//! Linear algebra: nalgebra LU with partial pivoting.

use super::system::System;
use nalgebra::{DMatrix, DVector};

/// γ of RODAS4.
const GAMMA: f64 = 0.25;
/// Stage times αᵢ (fractions of the step).
const ALPHA: [f64; 6] = [0.0, 0.386, 0.21, 0.63, 1.0, 1.0];
/// Coefficients dᵢ of ∂f/∂t in the stage equations (row sums of Γ).
const D: [f64; 6] = [0.25, -0.1043, 0.1035, -0.0362, 0.0, 0.0];
/// a_ij (transformed form), rows 2..6; row 6 equals row 5 plus a_65 = 1.
const A: [[f64; 5]; 5] = [
    [1.544, 0.0, 0.0, 0.0, 0.0],
    [
        0.946_678_528_081_582_6,
        0.255_701_169_898_328_4,
        0.0,
        0.0,
        0.0,
    ],
    [
        3.314_825_187_068_521,
        2.896_124_015_972_201,
        0.998_641_913_997_781_7,
        0.0,
        0.0,
    ],
    [
        1.221_224_509_226_641,
        6.019_134_481_288_629,
        12.537_083_329_320_87,
        -0.687_886_036_105_895,
        0.0,
    ],
    [
        1.221_224_509_226_641,
        6.019_134_481_288_629,
        12.537_083_329_320_87,
        -0.687_886_036_105_895,
        1.0,
    ],
];
/// c_ij (transformed form), rows 2..6.
const C: [[f64; 5]; 5] = [
    [-5.6688, 0.0, 0.0, 0.0, 0.0],
    [
        -2.430_093_356_833_875,
        -0.206_359_915_709_191_5,
        0.0,
        0.0,
        0.0,
    ],
    [
        -0.107_352_905_815_137_5,
        -9.594_562_251_023_355,
        -20.470_286_148_096_16,
        0.0,
        0.0,
    ],
    [
        7.496_443_313_967_647,
        -10.246_804_314_643_52,
        -33.999_903_528_199_05,
        11.708_908_932_061_6,
        0.0,
    ],
    [
        8.083_246_795_921_522,
        -7.981_132_988_064_893,
        -31.521_594_328_743_71,
        16.319_305_431_231_36,
        -6.058_818_238_834_054,
    ],
];

/// Tolerances and limits of one integration.
#[derive(Clone, Debug)]
pub struct OdeOptions {
    /// Relative tolerance per step.
    pub rtol: f64,
    /// Absolute tolerance in molecules (converted to the state's units with Ω).
    pub atol_molecules: f64,
    /// Largest number of steps (accepted and rejected) before giving up.
    pub max_steps: usize,
    /// Largest step, in seconds.
    pub h_max: f64,
}

impl Default for OdeOptions {
    fn default() -> OdeOptions {
        OdeOptions {
            rtol: 1e-8,
            atol_molecules: 1e-6,
            max_steps: 1_000_000,
            h_max: f64::INFINITY,
        }
    }
}

/// Why an integration stopped early.
#[derive(Clone, Debug, PartialEq)]
pub enum OdeFailure {
    /// A rate or the state stopped being a finite number (the solution blows up).
    NonFinite { t: f64 },
    /// The step size fell below what time resolution allows.
    StepTooSmall { t: f64, h: f64 },
    /// [`OdeOptions::max_steps`] was used up.
    TooManySteps { t: f64 },
}

impl OdeFailure {
    pub fn time(&self) -> f64 {
        match *self {
            OdeFailure::NonFinite { t }
            | OdeFailure::StepTooSmall { t, .. }
            | OdeFailure::TooManySteps { t } => t,
        }
    }

    /// A sentence for the user.
    pub fn describe(&self) -> String {
        match *self {
            OdeFailure::NonFinite { t } => format!(
                "the rate equations stop having finite values near t = {t:.6e} s (the solution blows up)"
            ),
            OdeFailure::StepTooSmall { t, h } => format!(
                "the integrator's step fell to {h:.3e} s at t = {t:.6e} s (the solution changes too fast to follow, or blows up)"
            ),
            OdeFailure::TooManySteps { t } => {
                format!("the step limit was reached at t = {t:.6e} s")
            }
        }
    }
}

/// A running integration of one [`System`], advanced to successive output times.
#[derive(Clone, Debug)]
pub struct Integrator<'s, 'a> {
    sys: &'s System<'a>,
    opts: OdeOptions,
    atol: f64,
    t: f64,
    y: Vec<f64>,
    /// Step to try next (not shortened for an output time).
    h: f64,
    pub accepted: usize,
    pub rejected: usize,
    /// The params' values the rates read (events may change them).
    pub params: Vec<f64>,
    /// Evaluations take their time inside this interval (the open interval between two
    /// breakpoints).
    window: (f64, f64),
    /// The rates depend smoothly on time (∂f/∂t enters the stages).
    timed: bool,
}

/// The last accepted step, for dense output and event location.
struct StepEnd {
    t0: f64,
    y0: Vec<f64>,
    f0: Vec<f64>,
    h: f64,
}

fn rms_scaled(err: &[f64], y0: &[f64], y1: &[f64], atol: f64, rtol: f64) -> f64 {
    if err.is_empty() {
        return 0.0;
    }
    let s: f64 = err
        .iter()
        .zip(y0.iter().zip(y1))
        .map(|(e, (a, b))| {
            let sc = atol + rtol * a.abs().max(b.abs());
            (e / sc).powi(2)
        })
        .sum();
    (s / err.len() as f64).sqrt()
}

fn all_finite(v: &[f64]) -> bool {
    v.iter().all(|x| x.is_finite())
}

impl<'s, 'a> Integrator<'s, 'a> {
    /// Starts at time 0 from free concentrations `y0`.
    pub fn new(sys: &'s System<'a>, y0: Vec<f64>, opts: &OdeOptions) -> Integrator<'s, 'a> {
        let atol = opts.atol_molecules / sys.net.omega;
        Integrator {
            sys,
            opts: opts.clone(),
            atol,
            t: 0.0,
            y: y0,
            h: 0.0,
            accepted: 0,
            rejected: 0,
            params: sys.params.clone(),
            window: (f64::NEG_INFINITY, f64::INFINITY),
            timed: sys.net.time_use() == crate::network::TimeUse::Smooth,
        }
    }

    /// Replaces the state (after a dose or an event) at the current time.
    pub fn set_y(&mut self, y: Vec<f64>) {
        self.y = y;
    }

    /// Evaluations from now on take their time inside (lo, hi).
    pub fn set_window(&mut self, lo: f64, hi: f64) {
        use crate::network::expr::{just_after, just_before};
        let (a, b) = (just_after(lo), just_before(hi));
        self.window = if a <= b { (a, b) } else { (lo, hi) };
    }

    fn at(&self, t: f64) -> f64 {
        t.clamp(self.window.0, self.window.1)
    }

    fn rhs(&self, t: f64, y: &[f64]) -> Vec<f64> {
        self.sys.rhs_with(self.at(t), y, &self.params)
    }

    pub fn t(&self) -> f64 {
        self.t
    }

    /// Current free concentrations.
    pub fn y(&self) -> &[f64] {
        &self.y
    }

    /// Starting step (Hairer, Nørsett & Wanner, *Solving ODEs I*, §II.4, with order 4): an
    /// explicit Euler probe of the scaled rates of change.
    fn initial_step(&self, f0: &[f64], span: f64) -> Result<f64, OdeFailure> {
        let rtol = self.opts.rtol;
        let sc: Vec<f64> = self.y.iter().map(|v| self.atol + rtol * v.abs()).collect();
        let norm = |v: &[f64]| -> f64 {
            (v.iter().zip(&sc).map(|(a, s)| (a / s).powi(2)).sum::<f64>() / v.len() as f64).sqrt()
        };
        let (d0, d1) = (norm(&self.y), norm(f0));
        let h0 = if d0 < 1e-5 || d1 < 1e-5 {
            1e-6 * span.max(1e-300)
        } else {
            0.01 * d0 / d1
        };
        let h0 = h0.min(span);
        let y1: Vec<f64> = self.y.iter().zip(f0).map(|(y, f)| y + h0 * f).collect();
        let f1 = self.rhs(self.t + h0, &y1);
        if !all_finite(&f1) {
            return Ok(h0 * 1e-3);
        }
        let diff: Vec<f64> = f1.iter().zip(f0).map(|(a, b)| (a - b) / h0).collect();
        let d2 = norm(&diff);
        let h1 = if d1.max(d2) <= 1e-15 {
            (h0 * 1e-3).max(1e-6 * h0)
        } else {
            (0.01 / d1.max(d2)).powf(0.2)
        };
        Ok((100.0 * h0).min(h1).min(span).min(self.opts.h_max))
    }

    /// Advances the solution to time `t_out` (≥ the current time), landing on it exactly.
    pub fn advance_to(&mut self, t_out: f64) -> Result<(), OdeFailure> {
        self.advance(t_out, &|_, _| false).map(|_| ())
    }

    /// Advances towards `t_out`; after every accepted step, `changed(t, y)` says whether some
    /// trigger changed its value. If one did, the first time it does (to a relative 1e-12 of
    /// the step, by bisection on the step's Hermite interpolant) is returned and the solution
    /// is advanced exactly to it; otherwise `None` at `t_out`.
    pub fn advance(
        &mut self,
        t_out: f64,
        changed: &dyn Fn(f64, &[f64]) -> bool,
    ) -> Result<Option<f64>, OdeFailure> {
        let n = self.sys.n();
        if n == 0 || t_out <= self.t {
            if n == 0 && t_out > self.t && changed(t_out, &self.y) {
                // Nothing to integrate: the first time the trigger changes, by bisection.
                let (mut lo, mut hi) = (self.t, t_out);
                for _ in 0..200 {
                    let mid = 0.5 * (lo + hi);
                    if hi - lo <= 1e-12 * hi.abs().max(f64::MIN_POSITIVE) || mid <= lo || mid >= hi
                    {
                        break;
                    }
                    if changed(mid, &self.y) {
                        hi = mid;
                    } else {
                        lo = mid;
                    }
                }
                self.t = hi;
                return Ok(Some(hi));
            }
            self.t = self.t.max(t_out);
            return Ok(None);
        }
        let mut f0 = self.rhs(self.t, &self.y);
        if !all_finite(&f0) || !all_finite(&self.y) {
            return Err(OdeFailure::NonFinite { t: self.t });
        }
        if self.h <= 0.0 {
            self.h = self.initial_step(&f0, t_out - self.t)?;
        }
        let mut jac = self
            .sys
            .jacobian_with(self.at(self.t), &self.y, &self.params);
        let mut last_rejected = false;
        while self.t < t_out {
            if self.accepted + self.rejected >= self.opts.max_steps {
                return Err(OdeFailure::TooManySteps { t: self.t });
            }
            let remaining = t_out - self.t;
            let mut h = self.h.min(self.opts.h_max);
            let landing = h >= remaining * (1.0 - 1e-12);
            if landing {
                h = remaining;
            }
            // A step that no longer moves the clock (or is subnormal) cannot make progress.
            if self.t + h == self.t || h < 1e-300 {
                return Err(OdeFailure::StepTooSmall { t: self.t, h });
            }
            match self.step(h, &f0, &jac) {
                Some((y1, err)) if err <= 1.0 => {
                    let t1 = if landing { t_out } else { self.t + h };
                    let f1 = self.rhs(t1, &y1);
                    if !all_finite(&f1) {
                        self.h = h * 0.25;
                        self.rejected += 1;
                        last_rejected = true;
                        continue;
                    }
                    self.accepted += 1;
                    let before = StepEnd {
                        t0: self.t,
                        y0: std::mem::replace(&mut self.y, y1),
                        f0: std::mem::replace(&mut f0, f1),
                        h: t1 - self.t,
                    };
                    self.t = t1;
                    let mut grow = if err == 0.0 {
                        5.0
                    } else {
                        (0.9 * err.powf(-0.25)).clamp(0.2, 5.0)
                    };
                    if last_rejected {
                        grow = grow.min(1.0);
                    }
                    last_rejected = false;
                    // Keep the untruncated proposal when the step was cut short for t_out.
                    let base = if landing { self.h.max(h) } else { h };
                    self.h = (base * grow).min(self.opts.h_max);
                    if changed(self.t, &self.y) {
                        let t_cross = self.locate(&before, &f0, changed);
                        // Redo the step from its start to end at the crossing.
                        self.t = before.t0;
                        self.y = before.y0;
                        if t_cross > self.t {
                            self.h = self.h.min(t_cross - self.t);
                            self.advance(t_cross, &|_, _| false)?;
                        }
                        self.t = t_cross;
                        return Ok(Some(t_cross));
                    }
                    if self.t < t_out {
                        jac = self
                            .sys
                            .jacobian_with(self.at(self.t), &self.y, &self.params);
                        if jac.iter().any(|v| !v.is_finite()) {
                            return Err(OdeFailure::NonFinite { t: self.t });
                        }
                    }
                }
                Some((_, err)) => {
                    self.rejected += 1;
                    last_rejected = true;
                    self.h = h * (0.9 * err.powf(-0.25)).clamp(0.2, 1.0);
                }
                None => {
                    self.rejected += 1;
                    last_rejected = true;
                    self.h = h * 0.25;
                }
            }
        }
        Ok(None)
    }

    /// The cubic Hermite interpolant of the step from (t₀, y₀, f₀) to the current (t, y, f₁)
    /// at time `t`.
    fn dense(&self, step: &StepEnd, f1: &[f64], t: f64) -> Vec<f64> {
        let s = (t - step.t0) / step.h;
        let (s2, s3) = (s * s, s * s * s);
        let h00 = 2.0 * s3 - 3.0 * s2 + 1.0;
        let h10 = s3 - 2.0 * s2 + s;
        let h01 = -2.0 * s3 + 3.0 * s2;
        let h11 = s3 - s2;
        (0..self.y.len())
            .map(|k| {
                h00 * step.y0[k]
                    + h10 * step.h * step.f0[k]
                    + h01 * self.y[k]
                    + h11 * step.h * f1[k]
            })
            .collect()
    }

    /// The earliest time in (t₀, t] at which `changed` holds on the interpolant, by bisection
    /// (it holds at t, not at t₀).
    fn locate(&self, step: &StepEnd, f1: &[f64], changed: &dyn Fn(f64, &[f64]) -> bool) -> f64 {
        let (mut lo, mut hi) = (step.t0, self.t);
        for _ in 0..200 {
            if hi - lo <= 1e-12 * step.h.abs().max(f64::MIN_POSITIVE) {
                break;
            }
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi {
                break;
            }
            if changed(mid, &self.dense(step, f1, mid)) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        hi
    }

    /// One RODAS4 step of size `h` from the current state: the new state and the scaled error,
    /// or `None` when a stage is not finite or the matrix is singular.
    fn step(&self, h: f64, f0: &[f64], jac: &DMatrix<f64>) -> Option<(Vec<f64>, f64)> {
        let n = self.sys.n();
        let mut m = -jac.clone();
        let fac = 1.0 / (h * GAMMA);
        for i in 0..n {
            m[(i, i)] += fac;
        }
        let lu = m.lu();
        let ft = self.timed.then(|| {
            self.sys
                .time_derivative(self.at(self.t), &self.y, &self.params)
        });
        let mut u: Vec<DVector<f64>> = Vec::with_capacity(6);
        let mut rhs = DVector::from_column_slice(f0);
        if let Some(ft) = &ft {
            rhs.axpy(h * D[0], &DVector::from_column_slice(ft), 1.0);
        }
        for stage in 0..6 {
            if stage > 0 {
                let a = &A[stage - 1];
                let c = &C[stage - 1];
                let mut ys = self.y.clone();
                for (j, uj) in u.iter().enumerate() {
                    if a[j] != 0.0 {
                        for (yi, ui) in ys.iter_mut().zip(uj.iter()) {
                            *yi += a[j] * ui;
                        }
                    }
                }
                let fs = self.rhs(self.t + ALPHA[stage] * h, &ys);
                if !all_finite(&fs) {
                    return None;
                }
                rhs = DVector::from_vec(fs);
                for (j, uj) in u.iter().enumerate() {
                    rhs.axpy(c[j] / h, uj, 1.0);
                }
                if let Some(ft) = &ft {
                    if D[stage] != 0.0 {
                        rhs.axpy(h * D[stage], &DVector::from_column_slice(ft), 1.0);
                    }
                }
            }
            let us = lu.solve(&rhs)?;
            if !us.iter().all(|v| v.is_finite()) {
                return None;
            }
            u.push(us);
        }
        let mut y1 = self.y.clone();
        for (j, uj) in u.iter().take(5).enumerate() {
            let a = A[4][j];
            for (yi, ui) in y1.iter_mut().zip(uj.iter()) {
                *yi += a * ui;
            }
        }
        for (yi, ui) in y1.iter_mut().zip(u[5].iter()) {
            *yi += ui;
        }
        let err = rms_scaled(u[5].as_slice(), &self.y, &y1, self.atol, self.opts.rtol);
        all_finite(&y1).then_some((y1, err))
    }
}

/// A solution sampled at requested times.
#[derive(Clone, Debug)]
pub struct Trajectory {
    pub times: Vec<f64>,
    /// State of every species at each time (counts/Ω: concentrations for one compartment,
    /// counts without a volume), clamped ones fixed; the state after every dose and event at
    /// or before the time.
    pub states: Vec<Vec<f64>>,
    /// Every param's value at each time (canonical units).
    pub params: Vec<Vec<f64>>,
    pub accepted_steps: usize,
    pub rejected_steps: usize,
    /// Event executions and doses applied.
    pub breakpoints: usize,
}

/// The ODE engine's state as the timeline sees it: counts n = y·Ω (real-valued).
struct OdeState<'s, 'a> {
    sys: &'s System<'a>,
    y: &'s mut Vec<f64>,
}

impl crate::kernel::timeline::EventState for OdeState<'_, '_> {
    fn count(&self, i: usize) -> f64 {
        self.sys.value(self.y, i) * self.sys.net.omega
    }

    fn set_count(&mut self, _t: f64, i: usize, count: f64) -> Result<(), String> {
        let Some(k) = self.sys.slot(i) else {
            return Err("a clamped species cannot change".into());
        };
        if !count.is_finite() {
            return Err(format!(
                "the amount would be {}",
                crate::numbers::plain(count)
            ));
        }
        if count < 0.0 {
            return Err(format!(
                "the amount would be {} molecules, below 0",
                crate::numbers::plain(count)
            ));
        }
        self.y[k] = count / self.sys.net.omega;
        Ok(())
    }

    fn dose_count(&self, d: &crate::network::Dose) -> f64 {
        d.amount * self.sys.net.amount.count_per_amount
    }
}

/// Integrates dy/dt = S·v(y, t) from the network's initial state (or `start`, the state of
/// every species) and samples it at `times` (non-decreasing, ≥ 0), stopping at every
/// breakpoint and event of the network (see the module docs).
pub fn integrate(
    net: &crate::Network,
    start: Option<&[f64]>,
    times: &[f64],
    opts: &OdeOptions,
) -> crate::Result<Trajectory> {
    use crate::kernel::timeline::{Inputs, Timeline};
    use crate::Error;
    if times.iter().any(|t| !t.is_finite() || *t < 0.0) || times.windows(2).any(|w| w[1] < w[0]) {
        return Err(Error::usage(
            "output times must be finite, at least 0 and non-decreasing",
        ));
    }
    if !(opts.rtol > 0.0 && opts.atol_molecules >= 0.0) {
        return Err(Error::usage("tolerances must be positive"));
    }
    let sys = System::new(net);
    let mut y = match start {
        Some(full) if full.len() == net.species.len() => sys.restrict(full),
        Some(_) => {
            return Err(Error::Internal(
                "start state has the wrong number of species".into(),
            ))
        }
        None => sys.initial(),
    };
    let fail = |e: OdeFailure| Error::usage(format!("{}: {}", net.file, e.describe()));
    let inputs = Inputs::new(net);
    let mut tl = Timeline::new(&inputs);
    let omega = net.omega;
    let mut breakpoints = 0;
    let c = tl.start(&mut OdeState {
        sys: &sys,
        y: &mut y,
    })?;
    breakpoints += usize::from(c.any());
    let mut int = Integrator::new(&sys, y, opts);
    int.params = tl.params().to_vec();
    let continuous = inputs.has_state_triggers();
    let mut states = Vec::with_capacity(times.len());
    let mut params = Vec::with_capacity(times.len());
    let mut from = 0.0;
    for &t_out in times {
        loop {
            let next = tl.next();
            let target = next.min(t_out);
            if int.t() < target {
                int.set_window(from, next);
                let crossed = if continuous {
                    let tl_ref = &tl;
                    let check =
                        |t: f64, yy: &[f64]| tl_ref.changed(t, |i| sys.value(yy, i) * omega);
                    int.advance(target, &check).map_err(fail)?
                } else {
                    int.advance_to(target).map_err(fail)?;
                    None
                };
                if let Some(t) = crossed {
                    let mut yy = int.y().to_vec();
                    let c = tl.settle(
                        t,
                        &mut OdeState {
                            sys: &sys,
                            y: &mut yy,
                        },
                    )?;
                    if c.any() {
                        breakpoints += 1;
                        int.set_y(yy);
                        int.params = tl.params().to_vec();
                        from = t;
                    }
                }
                continue;
            }
            if next <= t_out {
                let mut yy = int.y().to_vec();
                let c = tl.breakpoint(
                    next,
                    &mut OdeState {
                        sys: &sys,
                        y: &mut yy,
                    },
                )?;
                breakpoints += usize::from(c.any());
                int.set_y(yy);
                int.params = tl.params().to_vec();
                from = next;
                continue;
            }
            break;
        }
        states.push(sys.embed(int.y()));
        params.push(tl.params().to_vec());
    }
    Ok(Trajectory {
        times: times.to_vec(),
        states,
        params,
        accepted_steps: int.accepted,
        rejected_steps: int.rejected,
        breakpoints,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rosenbrock order conditions up to order 4 for exact Jacobians (Hairer & Wanner 1996,
    /// Table IV.7.1), checked on the coefficients after undoing the transformation:
    /// Γ = (diag(1/γ) − C)⁻¹, α = A·Γ, b = m·Γ. The main solution must satisfy all eight, the
    /// embedded one the first four.
    #[test]
    fn coefficients_satisfy_the_order_conditions() {
        let s = 6;
        let mut a = DMatrix::<f64>::zeros(s, s);
        let mut c = DMatrix::<f64>::zeros(s, s);
        for i in 1..s {
            for j in 0..i {
                a[(i, j)] = A[i - 1][j];
                c[(i, j)] = C[i - 1][j];
            }
        }
        let gi = DMatrix::<f64>::identity(s, s) / GAMMA - &c;
        let g = gi.try_inverse().unwrap();
        let alpha = &a * &g;
        let mut m_main = vec![0.0; s];
        let mut m_emb = vec![0.0; s];
        for j in 0..s {
            m_main[j] = a[(5, j)];
            m_emb[j] = a[(5, j)];
        }
        m_main[5] = 1.0;
        let gamma = GAMMA;
        // β_ij = α_ij + γ_ij for j < i.
        let mut beta = DMatrix::<f64>::zeros(s, s);
        for i in 0..s {
            for j in 0..i {
                beta[(i, j)] = alpha[(i, j)] + g[(i, j)];
            }
        }
        let ai: Vec<f64> = (0..s).map(|i| alpha.row(i).sum()).collect();
        let bp: Vec<f64> = (0..s).map(|i| beta.row(i).sum()).collect();
        let mv = |m: &DMatrix<f64>, v: &[f64]| -> Vec<f64> {
            (0..s)
                .map(|i| (0..s).map(|j| m[(i, j)] * v[j]).sum())
                .collect()
        };
        let dot = |x: &[f64], y: &[f64]| -> f64 { x.iter().zip(y).map(|(a, b)| a * b).sum() };
        let conditions = |mrow: &[f64]| -> Vec<f64> {
            let b: Vec<f64> = (0..s)
                .map(|j| (0..s).map(|i| mrow[i] * g[(i, j)]).sum())
                .collect();
            let a2: Vec<f64> = ai.iter().map(|x| x * x).collect();
            let a3: Vec<f64> = ai.iter().map(|x| x * x * x).collect();
            let bbp = mv(&beta, &bp);
            let abp: Vec<f64> = mv(&alpha, &bp)
                .iter()
                .zip(&ai)
                .map(|(x, a)| x * a)
                .collect();
            vec![
                b.iter().sum::<f64>() - 1.0,
                dot(&b, &bp) - (0.5 - gamma),
                dot(&b, &a2) - 1.0 / 3.0,
                dot(&b, &bbp) - (1.0 / 6.0 - gamma + gamma * gamma),
                dot(&b, &a3) - 0.25,
                dot(&b, &abp) - (1.0 / 8.0 - gamma / 3.0),
                dot(&b, &mv(&beta, &a2)) - (1.0 / 12.0 - gamma / 3.0),
                dot(&b, &mv(&beta, &bbp))
                    - (1.0 / 24.0 - gamma / 2.0 + 1.5 * gamma * gamma - gamma.powi(3)),
            ]
        };
        for (k, r) in conditions(&m_main).iter().enumerate() {
            assert!(r.abs() < 1e-12, "main condition {k}: {r}");
        }
        let emb = conditions(&m_emb);
        for (k, r) in emb.iter().take(4).enumerate() {
            assert!(r.abs() < 1e-12, "embedded condition {k}: {r}");
        }
        // The embedded solution is genuinely of order 3, not 4 (else the estimate is void).
        assert!(emb[4..].iter().any(|r| r.abs() > 1e-3));
        // Stage times c = (0, 0.386, 0.21, 0.63, 1, 1) of RODAS.
        let want = [0.0, 0.386, 0.21, 0.63, 1.0, 1.0];
        for (i, w) in want.iter().enumerate() {
            assert!((ai[i] - w).abs() < 1e-12);
        }
    }
}
