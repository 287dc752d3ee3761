//! Explicit Poisson tau-leaping with the step selection of Cao, Gillespie & Petzold (2006,
//! J. Chem. Phys. 124:044109 \[verified\]) and the critical-reaction rule of Cao, Gillespie &
//! Petzold (2005, J. Chem. Phys. 123:054104 \[verified\]); docs/references.md §3 steps 1–6:
//!
//! 1. reactions that could exhaust a reactant within n_c = 10 firings are critical;
//! 2. τ' bounds by ε the relative change of every species a propensity reads (every reactant
//!    of every reaction, and every species a law reads, also at count 0:
//!    [`LeapPlan::tau_prime`]), and every Poisson mean a_j·τ by [`LAMBDA_MAX`] (the sampler is
//!    not trusted beyond it);
//! 3. if a leap would replace fewer than `threshold` exact events (τ'·a₀ < 10 for `tau`),
//!    up to 100 exact direct-method steps are taken instead;
//! 4. τ'' ~ Exp(a₀c) over the critical reactions;
//! 5. the leap is min(τ', τ''), cut where it would cross t_end or a time the observer samples
//!    (a grid point): non-critical reactions fire Poisson(a_j τ) times and, when τ'' is the
//!    shorter and the leap was not cut, exactly one critical reaction fires;
//! 6. a leap that would make a count negative is rejected and τ' halved.
//!
//! Breakpoints and triggers (doses, law edges, events; see [`super::timeline`]): a leap never
//! crosses the next breakpoint (it is shortened to end there, and exact steps stop there); a
//! leap after which a state trigger would change its value is rejected and τ' halved, down
//! to exact steps, which are followed by the trigger check, so the event fires at the state
//! where it becomes true. Propensities that vary smoothly with time are taken at the middle
//! of a leap, whose length also bounds their change by ε; exact steps draw them by thinning
//! against an interval bound, as the direct method does.
//!
//! Guarantees: counts never go negative; clamped species never change; every propensity is
//! checked at every state a run reaches, the last included, so a law that turns negative
//! stops a tau run with the same error as the direct method. Tau-leaping is
//! approximate: its bias is controlled by ε (0.03 by default) and measured against the exact
//! method in the tests. `auto` is the same machinery with `threshold` = 100: it leaps only where
//! a leap replaces about a hundred exact events, so it is exact wherever leaping would not pay.

use super::compiled::CompiledKernel;
use super::leap::{LeapPlan, N_CRITICAL};
use super::observe::Observer;
use super::rng::{exp1, uniform};
use super::select::select_linear;
use super::timeline::{Counts, Timeline};
use crate::error::{Error, Result};
use crate::network::expr::just_after;
use crate::network::{Interval, Network, TimeUse, MAX_COUNT};
use rand::Rng;
use rand_distr::{Distribution, Poisson};

/// Largest Poisson mean a_j·τ a leap may ask for.
pub const LAMBDA_MAX: f64 = 1e9;
/// Exact steps taken when leaping does not pay.
pub const EXACT_BURST: usize = 100;
/// τ'·a₀ below which `tau` takes exact steps (Cao, Gillespie & Petzold 2006, step 3).
pub const TAU_THRESHOLD: f64 = 10.0;
/// τ'·a₀ below which `auto` takes exact steps.
pub const AUTO_THRESHOLD: f64 = 100.0;

/// How one run went.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct TauSummary {
    /// Channel firings in [0, t_end].
    pub events: u64,
    pub leaps: u64,
    pub exact_steps: u64,
    /// Time at which a₀ reached 0, if it did before t_end.
    pub absorbed_at: Option<f64>,
}

/// When a leap is taken instead of exact steps.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Switch {
    /// Leap when the leap replaces at least [`TAU_THRESHOLD`] exact events (`--method tau`).
    Tau,
    /// Leap only when it replaces at least [`AUTO_THRESHOLD`] exact events (`--method auto`).
    Auto,
}

impl Switch {
    fn threshold(self) -> f64 {
        match self {
            Switch::Tau => TAU_THRESHOLD,
            Switch::Auto => AUTO_THRESHOLD,
        }
    }
}

/// A tau-leaping simulator for one network; its buffers are allocated once.
#[derive(Clone, Debug)]
pub struct Tau<'k> {
    kernel: &'k CompiledKernel,
    plan: LeapPlan,
    epsilon: f64,
    threshold: f64,
    x: Vec<i64>,
    props: Vec<f64>,
    critical: Vec<bool>,
    mu: Vec<f64>,
    sigma2: Vec<f64>,
    counts: Vec<u64>,
    dx: Vec<i64>,
    timeline: Option<Timeline<'k>>,
    /// Window of the thinning bound (networks whose laws vary smoothly with time), and the
    /// shortest it may become.
    horizon: f64,
    horizon_floor: f64,
}

/// What the next step of a run is.
enum Step {
    /// Nothing can fire any more.
    Absorbed,
    /// A leap of at most τ' (s).
    Leap { tau_prime: f64 },
    /// Exact direct-method steps.
    Exact,
}

/// Where a stretch of exact steps or a leap left the run.
enum Progress {
    /// The run goes on from this time.
    At(f64),
    /// The run is over: t_end is reached, or nothing can fire (absorbed at the time given).
    Over(Option<f64>),
}

impl<'k> Tau<'k> {
    pub fn new(kernel: &'k CompiledKernel, net: &Network, epsilon: f64, switch: Switch) -> Tau<'k> {
        let n = kernel.species;
        let m = kernel.reactions();
        Tau {
            kernel,
            plan: LeapPlan::new(net),
            epsilon,
            threshold: switch.threshold(),
            x: kernel.state_buffer(&kernel.x0),
            props: vec![0.0; m],
            critical: vec![false; m],
            mu: vec![0.0; n],
            sigma2: vec![0.0; n],
            counts: vec![0; m],
            dx: vec![0; n + 1],
            timeline: (!kernel.inputs().is_empty() || kernel.time_use() == TimeUse::Smooth)
                .then(|| Timeline::new(kernel.inputs())),
            horizon: 0.0,
            horizon_floor: 0.0,
        }
    }

    /// The state at the end of the last run.
    pub fn state(&self) -> &[i64] {
        &self.x[..self.kernel.species]
    }

    /// Runs one trajectory from `x0` over [0, `t_end`], reporting to `obs`.
    pub fn run<R: Rng + ?Sized, O: Observer>(
        &mut self,
        x0: &[i64],
        t_end: f64,
        rng: &mut R,
        obs: &mut O,
    ) -> Result<TauSummary> {
        let n = self.kernel.species;
        self.check_start(x0)?;
        self.kernel.check_simulable()?;
        self.x[..n].copy_from_slice(x0);
        obs.start(&self.x[..n]);
        if let Some(tl) = self.timeline.as_mut() {
            tl.start(&mut Counts {
                x: &mut self.x[..n],
                obs: &mut *obs,
            })?;
        }
        self.horizon = t_end / 100.0;
        self.horizon_floor = t_end * 1e-9;
        let mut s = TauSummary::default();
        let mut t = 0.0;
        let mut a0 = self.propensities(just_after(t))?;
        while t < t_end {
            let progress = match self.next_step(a0) {
                Step::Absorbed => match self.next_break(t_end) {
                    // Nothing fires until the next breakpoint.
                    brk if brk.is_finite() => {
                        self.move_to_break(brk, obs)?;
                        Progress::At(brk)
                    }
                    _ => Progress::Over(Some(t)),
                },
                Step::Exact => self.exact_steps(t, t_end, a0, rng, obs, &mut s)?,
                Step::Leap { tau_prime } => self.leap(t, t_end, tau_prime, a0, rng, obs, &mut s)?,
            };
            match progress {
                Progress::At(t_new) => t = t_new,
                Progress::Over(absorbed) => {
                    s.absorbed_at = absorbed;
                    break;
                }
            }
            // Every state the run reaches is checked, the last one too (conditions at a
            // breakpoint as they are just after it).
            a0 = self.propensities(just_after(t))?;
        }
        obs.finish(t_end, &self.x[..n]);
        Ok(s)
    }

    fn check_start(&self, x0: &[i64]) -> Result<()> {
        let n = self.kernel.species;
        if x0.len() != n {
            return Err(Error::Internal(format!(
                "initial state has {} counts for {n} species",
                x0.len()
            )));
        }
        if let Some(i) = x0.iter().position(|&v| !(0..=MAX_COUNT).contains(&v)) {
            return Err(Error::usage(format!(
                "initial count {} of species `{}` is outside 0 ..= {MAX_COUNT}",
                x0[i],
                self.kernel.species_name(i)
            )));
        }
        Ok(())
    }

    /// Propensities at the current state at time `t` and their sum; an error for a bad law
    /// value.
    fn propensities(&mut self, t: f64) -> Result<f64> {
        let mut a0 = 0.0;
        let params = self.timeline.as_ref().map_or(&[][..], |tl| tl.params());
        for j in 0..self.props.len() {
            let a = self.kernel.propensity_at(j, &self.x, params, t);
            if !(0.0..f64::INFINITY).contains(&a) {
                return Err(self.kernel.bad_propensity(j, a, t));
            }
            self.props[j] = a;
            a0 += a;
        }
        Ok(a0)
    }

    /// Steps 1–3: marks the critical reactions, computes τ' (capped so that no Poisson mean
    /// passes [`LAMBDA_MAX`]) and decides between a leap and exact steps.
    fn next_step(&mut self, a0: f64) -> Step {
        let smooth = self.kernel.time_use() == TimeUse::Smooth;
        if a0 == 0.0 {
            // A propensity that varies smoothly with time may become positive again.
            return if smooth { Step::Exact } else { Step::Absorbed };
        }
        let n = self.kernel.species;
        let x = &self.x[..n];
        self.plan
            .mark_critical(x, &self.props, N_CRITICAL, &mut self.critical);
        let mut tau_prime = self.plan.tau_prime(
            x,
            &self.props,
            &self.critical,
            self.epsilon,
            &mut self.mu,
            &mut self.sigma2,
        );
        for (j, &a) in self.props.iter().enumerate() {
            if !self.critical[j] && a > 0.0 {
                tau_prime = tau_prime.min(LAMBDA_MAX / a);
            }
        }
        if tau_prime * a0 < self.threshold {
            Step::Exact
        } else {
            Step::Leap { tau_prime }
        }
    }

    /// Step 3's alternative: up to [`EXACT_BURST`] direct-method steps from `t`, the first with
    /// the propensities already computed (total `a0`), stopping at the next breakpoint (which
    /// is applied) and followed each by the trigger check. Smoothly time-varying propensities
    /// are drawn by thinning.
    #[allow(clippy::too_many_arguments)]
    fn exact_steps<R: Rng + ?Sized, O: Observer>(
        &mut self,
        mut t: f64,
        t_end: f64,
        mut a0: f64,
        rng: &mut R,
        obs: &mut O,
        s: &mut TauSummary,
    ) -> Result<Progress> {
        let smooth = self.kernel.time_use() == TimeUse::Smooth;
        for step in 0..EXACT_BURST {
            if step > 0 || smooth {
                // (A rejected leap may have left the propensities of its midpoint.)
                a0 = self.propensities(just_after(t))?;
            }
            let brk = self.next_break(t_end);
            let (t_new, j) = if smooth {
                let hi = brk.min(t_end).min(t + self.horizon);
                match self.thinned(t, hi, a0, rng)? {
                    Some(fired) => fired,
                    None => {
                        if hi == brk {
                            self.move_to_break(brk, obs)?;
                        }
                        return Ok(Progress::At(hi));
                    }
                }
            } else {
                if a0 == 0.0 {
                    if brk.is_finite() {
                        self.move_to_break(brk, obs)?;
                        return Ok(Progress::At(brk));
                    }
                    return Ok(Progress::Over(Some(t)));
                }
                let t_new = t + exp1(rng) / a0;
                if t_new >= brk {
                    self.move_to_break(brk, obs)?;
                    return Ok(Progress::At(brk));
                }
                if t_new > t_end {
                    return Ok(Progress::Over(None));
                }
                (t_new, select_linear(&self.props, uniform(rng) * a0))
            };
            self.clear();
            self.add_firings(j, 1);
            s.events += self.apply(t_new, obs)?;
            s.exact_steps += 1;
            t = t_new;
            self.after_change(t, obs)?;
        }
        Ok(Progress::At(t))
    }

    /// Steps 4–6: one leap of length min(τ', τ'') (τ'' ~ Exp(a₀c) over the critical
    /// reactions), cut at t_end, at the observer's next sample time and at the next
    /// breakpoint (applied at its end); a leap that would make a count negative or change a
    /// state trigger is redrawn with τ' halved, going back to exact steps when τ' becomes too
    /// short to pay.
    #[allow(clippy::too_many_arguments)]
    fn leap<R: Rng + ?Sized, O: Observer>(
        &mut self,
        t: f64,
        t_end: f64,
        mut tau_prime: f64,
        a0: f64,
        rng: &mut R,
        obs: &mut O,
        s: &mut TauSummary,
    ) -> Result<Progress> {
        let a0c: f64 = self
            .props
            .iter()
            .zip(&self.critical)
            .filter(|(_, &c)| c)
            .map(|(a, _)| a)
            .sum();
        let smooth = self.kernel.time_use() == TimeUse::Smooth;
        let brk = self.next_break(t_end);
        let mut first = true;
        loop {
            if tau_prime * a0 < self.threshold {
                return self.exact_steps(t, t_end, a0, rng, obs, s);
            }
            if smooth && !first {
                // A rejected leap left the propensities of its midpoint.
                self.propensities(just_after(t))?;
            }
            first = false;
            let tau_critical = if a0c > 0.0 {
                exp1(rng) / a0c
            } else {
                f64::INFINITY
            };
            let (mut tau, mut one_critical) = if tau_prime < tau_critical {
                (tau_prime, false)
            } else {
                (tau_critical, true)
            };
            // A leap ends at t_end and at the observer's next sample time, so that the sample
            // is the state at that time, not the state before a leap across it.
            let stop = t_end.min(obs.sample_after(t));
            if t + tau > stop {
                tau = stop - t;
                one_critical = false;
            }
            if smooth {
                let capped = self.smooth_cap(t, tau);
                if capped < tau {
                    if capped * a0 < self.threshold {
                        // Too short to pay: exact steps instead.
                        tau_prime = capped;
                        continue;
                    }
                    tau = capped;
                    one_critical = false;
                }
            }
            // Never leap across a breakpoint.
            let at_break = t + tau >= brk;
            if at_break {
                tau = brk - t;
                one_critical = false;
                if tau * a0 < self.threshold {
                    // Cut short by the breakpoint, the leap no longer pays: exact steps.
                    tau_prime = tau;
                    continue;
                }
            }
            if smooth {
                // Smoothly varying propensities at the middle of the leap.
                self.propensities(t + 0.5 * tau)?;
            }
            self.draw_firings(tau, one_critical, a0c, rng);
            let n = self.kernel.species;
            if (0..n).any(|i| self.x[i] + self.dx[i] < 0) {
                tau_prime /= 2.0;
                continue;
            }
            let t_new = t + tau;
            if let Some(tl) = self.timeline.as_ref() {
                let (x, dx) = (&self.x, &self.dx);
                if self.kernel.inputs().has_state_triggers()
                    && tl.changed(t_new, |i| (x[i] + dx[i]) as f64)
                {
                    // The leap would change a trigger: redo it shorter.
                    tau_prime = tau / 2.0;
                    continue;
                }
            }
            s.events += self.apply(t_new, obs)?;
            s.leaps += 1;
            if at_break {
                self.move_to_break(brk, obs)?;
            }
            return Ok(Progress::At(t_new));
        }
    }

    /// Step 5: Poisson(a_j·τ) firings of every non-critical reaction and, with
    /// `one_critical`, one firing of a critical reaction chosen with probability a_j/a₀c.
    fn draw_firings<R: Rng + ?Sized>(
        &mut self,
        tau: f64,
        one_critical: bool,
        a0c: f64,
        rng: &mut R,
    ) {
        self.clear();
        for j in 0..self.props.len() {
            let a = self.props[j];
            if self.critical[j] || a <= 0.0 {
                continue;
            }
            let k = match Poisson::new(a * tau) {
                Ok(p) => p.sample(rng) as u64,
                Err(_) => 0,
            };
            if k > 0 {
                self.add_firings(j, k);
            }
        }
        if one_critical {
            let target = uniform(rng) * a0c;
            let mut acc = 0.0;
            let mut pick = None;
            for (j, (&a, &c)) in self.props.iter().zip(&self.critical).enumerate() {
                if c && a > 0.0 {
                    acc += a;
                    pick = Some(j);
                    if acc > target {
                        break;
                    }
                }
            }
            if let Some(j) = pick {
                self.add_firings(j, 1);
            }
        }
    }

    /// Applies `counts` firings (already in `dx`) at `t_new`, reporting them to `obs`.
    fn apply<O: Observer>(&mut self, t_new: f64, obs: &mut O) -> Result<u64> {
        let n = self.kernel.species;
        if t_new >= obs.due() {
            obs.reach(t_new, &self.x[..n]);
        }
        let mut events = 0;
        for (j, k) in self.counts.iter().enumerate() {
            if *k > 0 {
                obs.fire(t_new, j, *k);
                events += *k;
            }
        }
        for i in 0..n {
            let d = self.dx[i];
            if d != 0 {
                obs.moved(t_new, i, self.x[i], d);
                self.x[i] += d;
                if self.x[i] > MAX_COUNT {
                    let j = (0..self.counts.len())
                        .find(|&j| {
                            self.counts[j] > 0
                                && self.kernel.change(j).iter().any(|c| c.0 as usize == i)
                        })
                        .unwrap_or(0);
                    return Err(self.kernel.overflow(i, j, t_new));
                }
            }
        }
        Ok(events)
    }

    /// The next breakpoint if it is at or before `t_end`, else ∞.
    fn next_break(&self, t_end: f64) -> f64 {
        match self.timeline.as_ref() {
            Some(tl) if tl.next() <= t_end => tl.next(),
            _ => f64::INFINITY,
        }
    }

    /// The longest τ ≤ `tau` (by halving) over which every smoothly time-varying propensity
    /// stays within ε of its value at t, relative to the total a₀ (its interval enclosure over
    /// [t, t + τ] is at most ε·a₀ wide): the leap condition applied to the clock.
    fn smooth_cap(&self, t: f64, tau: f64) -> f64 {
        let k = self.kernel;
        let params = self.timeline.as_ref().map_or(&[][..], |tl| tl.params());
        let a0: f64 = self.props.iter().sum();
        let mut tau = tau;
        for _ in 0..64 {
            let wide = k.smooth_channels().iter().any(|&j| {
                let v =
                    k.interval_propensity(j as usize, &self.x, params, Interval::new(t, t + tau));
                v.hi - v.lo > self.epsilon * a0 || (v.hi - v.lo).is_nan()
            });
            if !wide {
                break;
            }
            tau /= 2.0;
        }
        tau
    }

    /// Moves the run to breakpoint `brk` and applies it.
    fn move_to_break<O: Observer>(&mut self, brk: f64, obs: &mut O) -> Result<()> {
        let n = self.kernel.species;
        if brk >= obs.due() {
            obs.reach(brk, &self.x[..n]);
        }
        if let Some(tl) = self.timeline.as_mut() {
            tl.breakpoint(
                brk,
                &mut Counts {
                    x: &mut self.x[..n],
                    obs,
                },
            )?;
        }
        Ok(())
    }

    /// After an exact step at `t`: the events of triggers it changed.
    fn after_change<O: Observer>(&mut self, t: f64, obs: &mut O) -> Result<()> {
        let n = self.kernel.species;
        if let Some(tl) = self.timeline.as_mut() {
            if tl.changed(t, |i| self.x[i] as f64) {
                tl.settle(
                    t,
                    &mut Counts {
                        x: &mut self.x[..n],
                        obs,
                    },
                )?;
            }
        }
        Ok(())
    }

    /// One exact step by thinning over [t, hi] (see [`super::direct`]'s thinning loop):
    /// the event's time and channel, or `None` when the window ends first. `self.props`
    /// holds the propensities at t, whose total is `a0`.
    fn thinned<R: Rng + ?Sized>(
        &mut self,
        t: f64,
        hi: f64,
        a0: f64,
        rng: &mut R,
    ) -> Result<Option<(f64, usize)>> {
        let k = self.kernel;
        let params = self.timeline.as_ref().map_or(&[][..], |tl| tl.params());
        let smooth = k.smooth_channels();
        let mut bound = 0.0;
        for (j, &a) in self.props.iter().enumerate() {
            bound += if smooth.contains(&(j as u32)) {
                let v = k.interval_propensity(j, &self.x, params, Interval::new(t, hi));
                if v.hi >= 0.0 {
                    v.hi
                } else {
                    f64::INFINITY
                }
            } else {
                a
            };
        }
        if !bound.is_finite() {
            if hi - t < 1e-12 * hi.abs().max(1.0) {
                return Err(Error::usage(format!(
                    "the time-varying propensities have no finite bound near t = {t} s"
                )));
            }
            self.horizon = (hi - t) / 8.0;
            return self.thinned(t, t + self.horizon, a0, rng);
        }
        if bound > 1.5 * a0 && hi - t > self.horizon_floor {
            self.horizon = (hi - t) / 2.0;
        } else if bound < 1.1 * a0 {
            self.horizon *= 2.0;
        }
        let bound = bound * (1.0 + 1e-9);
        let mut c = t;
        if bound <= 0.0 {
            return Ok(None);
        }
        loop {
            c += exp1(rng) / bound;
            if c >= hi {
                return Ok(None);
            }
            for &j in smooth {
                let j = j as usize;
                let a = k.propensity_at(j, &self.x, params, c);
                if !(0.0..f64::INFINITY).contains(&a) {
                    return Err(k.bad_propensity(j, a, c));
                }
                self.props[j] = a;
            }
            let target = uniform(rng) * bound;
            let mut acc = 0.0;
            for (j, &a) in self.props.iter().enumerate() {
                acc += a;
                if acc > target && a > 0.0 {
                    return Ok(Some((c, j)));
                }
            }
        }
    }

    fn clear(&mut self) {
        self.counts.iter_mut().for_each(|c| *c = 0);
        self.dx.iter_mut().for_each(|d| *d = 0);
    }

    fn add_firings(&mut self, j: usize, k: u64) {
        self.counts[j] += k;
        for &(i, d) in self.kernel.change(j) {
            self.dx[i as usize] += d * k as i64;
        }
    }
}
