//! The Gillespie direct method: one exact trajectory of the chemical master equation.
//!
//! Each step (Gillespie 1977, J. Phys. Chem. 81:2340, and 1976, J. Comput. Phys. 22:403
//! [verified], REFERENCES.md §1): with a₀ = Σⱼ aⱼ(x), the waiting time is τ ~ Exp(a₀) and the
//! channel is the smallest μ with Σ_{j≤μ} aⱼ > u·a₀, u uniform on [0, 1); the joint density of
//! (τ, μ) is a_μ·e^(−a₀τ). After channel μ fires only the propensities in the dependency graph
//! row of μ are recomputed (the graph comes from the compiler).
//!
//! Selection is a linear scan below [`SMALL_BELOW`](super::compiled::SMALL_BELOW) channels and
//! the sum tree of [`crate::kernel::select`] from there on. The scan here has no early exit:
//! it counts the cumulative sums at or below u·a₀, so the selected channel is data, not a
//! branch the processor must guess (with three channels this runs about 30 % faster than an
//! early-exit scan, whose exit branch is mispredicted on a large share of events). With the
//! scan, a₀ is kept by adding each propensity's change and recomputed from scratch every
//! [`REFRESH_EVERY`] events so rounding cannot drift; the sum tree recomputes every sum on a
//! changed path from its children, so it never drifts.
//!
//! Guarantees: clamped species never change (the compiler leaves them out of the state
//! changes); a count that would pass [`MAX_COUNT`] stops the run with an error naming the
//! species; a propensity that is negative, infinite or NaN (possible only for a `law`; mass
//! action constants are bounded when the kernel is built) stops it with an error naming the
//! step; a₀ = 0 (nothing can fire) ends the run at that time and
//! the observer's [`Observer::finish`] fills what remains of the grid. Nothing is allocated in
//! the event loop.

use super::compiled::CompiledKernel;
use super::observe::Observer;
use super::rng::{exp1, uniform};
use super::select::SumTree;
use crate::error::{Error, Result};
use crate::network::MAX_COUNT;
use rand::Rng;

/// How often a₀ is recomputed from scratch with linear selection (in events).
pub const REFRESH_EVERY: u64 = 1 << 12;

/// How one run went.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RunSummary {
    /// Channel firings in [0, t_end].
    pub events: u64,
    /// Time at which a₀ reached 0 (no channel could fire any more), if it did before t_end.
    pub absorbed_at: Option<f64>,
}

/// A direct-method simulator for one network, reusable across runs (its buffers are
/// allocated once).
#[derive(Clone, Debug)]
pub struct Direct<'k> {
    kernel: &'k CompiledKernel,
    x: Vec<i64>,
    selector: Selector,
}

#[derive(Clone, Debug)]
enum Selector {
    Linear(Linear),
    Tree(SumTree),
}

impl<'k> Direct<'k> {
    pub fn new(kernel: &'k CompiledKernel) -> Direct<'k> {
        let m = kernel.reactions();
        let selector = if kernel.is_small() {
            Selector::Linear(Linear {
                a: vec![0.0; m + 1],
                a0: 0.0,
            })
        } else {
            Selector::Tree(SumTree::new(&vec![0.0; m]))
        };
        Direct {
            kernel,
            x: kernel.state_buffer(&kernel.x0),
            selector,
        }
    }

    /// Whether channels are selected through the sum tree.
    pub fn uses_tree(&self) -> bool {
        matches!(self.selector, Selector::Tree(_))
    }

    /// The state at the end of the last run, one count per species.
    pub fn state(&self) -> &[i64] {
        &self.x[..self.kernel.species]
    }

    /// Runs one trajectory from `x0` over [0, `t_end`], reporting to `obs`.
    ///
    /// `x0` must have one count per species, each in 0 ..= [`MAX_COUNT`]; clamped species
    /// must hold the network's value (it is folded into the kernel's constants).
    pub fn run<R: Rng + Clone, O: Observer>(
        &mut self,
        x0: &[i64],
        t_end: f64,
        rng: &mut R,
        obs: &mut O,
    ) -> Result<RunSummary> {
        let k = self.kernel;
        if x0.len() != k.species {
            return Err(Error::Internal(format!(
                "initial state has {} counts for {} species",
                x0.len(),
                k.species
            )));
        }
        if let Some(i) = x0.iter().position(|&v| !(0..=MAX_COUNT).contains(&v)) {
            return Err(Error::usage(format!(
                "initial count {} of species `{}` is outside 0 ..= {MAX_COUNT}",
                x0[i],
                k.species_name(i)
            )));
        }
        if let Some(i) = (0..x0.len()).find(|&i| k.is_clamped(i) && x0[i] != k.x0[i]) {
            return Err(Error::Internal(format!(
                "clamped species `{}` must start at its network value {}",
                k.species_name(i),
                k.x0[i]
            )));
        }
        if !(t_end >= 0.0 && t_end.is_finite()) {
            return Err(Error::usage(format!(
                "the end time must be finite and not negative, got {t_end}"
            )));
        }
        self.x[..k.species].copy_from_slice(x0);
        match &mut self.selector {
            Selector::Linear(s) => run_loop(k, &mut self.x, s, t_end, rng, obs),
            Selector::Tree(s) => run_loop(k, &mut self.x, s, t_end, rng, obs),
        }
    }
}

/// Channel selection as the event loop needs it.
///
/// # Safety
///
/// `set` and `get` may skip bounds checks: callers pass `j` at most `reactions()` for
/// [`Linear`] (the idle channel included) and below `reactions()` for the tree.
trait Select {
    unsafe fn set(&mut self, j: usize, a: f64);
    unsafe fn get(&self, j: usize) -> f64;
    fn total(&self) -> f64;
    /// A channel whose cumulative propensity first exceeds `target` ∈ [0, total).
    fn find(&self, target: f64) -> usize;
    /// Recomputes the total from the propensities.
    fn refresh(&mut self);
}

/// Propensities in a flat array (the last entry is the idle channel, always 0) with an
/// incrementally kept total.
#[derive(Clone, Debug)]
struct Linear {
    a: Vec<f64>,
    a0: f64,
}

impl Select for Linear {
    #[inline(always)]
    unsafe fn set(&mut self, j: usize, a: f64) {
        debug_assert!(j < self.a.len());
        // SAFETY: j ≤ reactions() < a.len() (trait contract).
        let old = std::mem::replace(unsafe { self.a.get_unchecked_mut(j) }, a);
        self.a0 += a - old;
    }
    #[inline(always)]
    unsafe fn get(&self, j: usize) -> f64 {
        debug_assert!(j < self.a.len());
        // SAFETY: as for `set`.
        unsafe { *self.a.get_unchecked(j) }
    }
    #[inline(always)]
    fn total(&self) -> f64 {
        self.a0
    }
    /// Smallest j with a₀ + … + a_j > target, counted without branches: j = #{k < M−1 :
    /// a₀ + … + a_k ≤ target}. The sums are non-decreasing, so the count is that index; if
    /// rounding puts the target at or above every sum, M−1 comes back (the caller checks that
    /// its propensity is positive).
    #[inline(always)]
    fn find(&self, target: f64) -> usize {
        let m = self.a.len().saturating_sub(2);
        let mut sum = 0.0;
        let mut j = 0;
        for &a in &self.a[..m] {
            sum += a;
            j += (sum <= target) as usize;
        }
        j
    }
    fn refresh(&mut self) {
        self.a0 = self.a.iter().sum();
    }
}

impl Select for SumTree {
    #[inline(always)]
    unsafe fn set(&mut self, j: usize, a: f64) {
        SumTree::set(self, j, a)
    }
    #[inline(always)]
    unsafe fn get(&self, j: usize) -> f64 {
        SumTree::get(self, j)
    }
    #[inline(always)]
    fn total(&self) -> f64 {
        SumTree::total(self)
    }
    #[inline(always)]
    fn find(&self, target: f64) -> usize {
        SumTree::find(self, target)
    }
    fn refresh(&mut self) {}
}

/// Checks a freshly computed propensity: finite and not negative.
fn checked(k: &CompiledKernel, j: usize, a: f64, t: f64) -> Result<f64> {
    if (0.0..f64::INFINITY).contains(&a) {
        Ok(a)
    } else {
        Err(k.bad_propensity(j, a, t))
    }
}

/// Why the event loop stopped.
enum Stop {
    /// The next event would fall after t_end.
    End,
    /// a₀ = 0 at this time.
    Absorbed(f64),
    /// a₀ is not a positive finite number at this time: some propensity is negative, infinite
    /// or NaN.
    BadRate(f64),
    /// Species `i` would pass MAX_COUNT when reaction `j` fires at `t`.
    Overflow { i: usize, j: usize, t: f64 },
}

/// Why a stretch of events ended.
enum Leg {
    /// The run is over.
    Stop(Stop),
    /// The next event, at this time, is due for the observer's [`Observer::reach`]; it has not
    /// been selected yet.
    Due(f64),
}

/// The running state of the event loop.
struct Clock {
    t: f64,
    events: u64,
}

/// Sets up the propensities, runs the event loop and turns its stop into a result. `x` holds
/// one count per species and then the constant slot 1.
fn run_loop<S: Select, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    sel: &mut S,
    t_end: f64,
    rng: &mut R,
    obs: &mut O,
) -> Result<RunSummary> {
    for j in 0..k.reactions() {
        let a = checked(k, j, k.propensity(j, x), 0.0)?;
        // SAFETY: j < reactions().
        unsafe { sel.set(j, a) };
    }
    sel.refresh();
    let n = k.species;
    obs.start(&x[..n]);
    let (stop, events) = event_loop(k, x, sel, t_end, rng, obs);
    let absorbed_at = match stop {
        Stop::End => None,
        Stop::Absorbed(t) => Some(t),
        Stop::Overflow { i, j, t } => return Err(k.overflow(i, j, t)),
        Stop::BadRate(t) => {
            for j in 0..k.reactions() {
                checked(k, j, k.propensity(j, x), t)?;
            }
            return Err(Error::Internal(format!(
                "the total propensity became {} at t = {t} s",
                sel.total()
            )));
        }
    };
    obs.finish(t_end, &x[..n]);
    Ok(RunSummary {
        events,
        absorbed_at,
    })
}

/// The direct method's event loop (see the module docs); returns why it stopped and the
/// number of events.
///
/// Events run in legs between the observer's due times: a leg ends when the next event is at
/// or after [`Observer::due`], and `reach` is called here, outside the leg, so the leg's loop
/// contains no call and keeps its values in registers.
fn event_loop<S: Select, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    sel: &mut S,
    t_end: f64,
    rng: &mut R,
    obs: &mut O,
) -> (Stop, u64) {
    assert_eq!(
        x.len(),
        k.species + 1,
        "state buffer without the constant slot"
    );
    let mut clock = Clock { t: 0.0, events: 0 };
    let mut pending = None;
    let stop = loop {
        match leg(k, x, sel, t_end, rng, obs, &mut clock, pending) {
            Leg::Stop(s) => break s,
            Leg::Due(t_new) => {
                obs.reach(t_new, &x[..k.species]);
                pending = Some(t_new);
            }
        }
    };
    (stop, clock.events)
}

/// Runs events until the run stops or the next event is due for the observer. `pending` is an
/// event time already drawn (by the previous leg) whose channel is still to be selected.
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn leg<S: Select, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    sel: &mut S,
    t_end: f64,
    rng_out: &mut R,
    obs: &mut O,
    clock: &mut Clock,
    mut pending: Option<f64>,
) -> Leg {
    let n = k.species;
    debug_assert_eq!(x.len(), n + 1);
    let due = obs.due();
    // A local copy of the generator stays in registers; it is written back at the end.
    let mut local = rng_out.clone();
    let rng = &mut local;
    let mut t = clock.t;
    let mut events = clock.events;
    let leg = loop {
        let a0 = sel.total();
        let t_new = match pending.take() {
            Some(t_new) => t_new,
            None => {
                if a0.is_nan() || a0 <= 0.0 {
                    sel.refresh();
                    let a0 = sel.total();
                    if a0 == 0.0 {
                        break Leg::Stop(Stop::Absorbed(t));
                    }
                    if !(a0 > 0.0 && a0 < f64::INFINITY) {
                        break Leg::Stop(Stop::BadRate(t));
                    }
                    continue;
                }
                let t_new = t + exp1(rng) / a0;
                if t_new > t_end {
                    break Leg::Stop(Stop::End);
                }
                if t_new >= due {
                    break Leg::Due(t_new);
                }
                t_new
            }
        };
        let j = sel.find(uniform(rng) * a0);
        debug_assert!(j < k.reactions());
        // SAFETY: `find` returns a channel below reactions().
        let a_j = unsafe { sel.get(j) };
        if a_j.is_nan() || a_j <= 0.0 {
            // Only reachable when rounding left a₀ above the sum of the propensities.
            sel.refresh();
            continue;
        }
        obs.fire(t_new, j, 1);
        let mut over = false;
        // SAFETY: j < reactions(); change rows name species ≤ n < x.len() (construction).
        for &(i, d) in unsafe { k.change_unchecked(j) } {
            let v = unsafe { x.get_unchecked_mut(i as usize) };
            obs.moved(t_new, i as usize, *v, d);
            *v += d;
            over |= *v > MAX_COUNT;
        }
        if over {
            let i = k.change(j).iter().find(|c| x[c.0 as usize] > MAX_COUNT);
            break Leg::Stop(Stop::Overflow {
                i: i.map_or(0, |c| c.0 as usize),
                j,
                t: t_new,
            });
        }
        // SAFETY: j < reactions(); dependents are reactions or the idle channel (small networks,
        // linear selection only), x.len() == n + 1 (asserted above).
        for &d in unsafe { k.dependents_unchecked(j) } {
            let d = d as usize;
            unsafe { sel.set(d, k.propensity_unchecked(d, x)) };
        }
        t = t_new;
        events += 1;
        if events % REFRESH_EVERY == 0 {
            sel.refresh();
        }
    };
    clock.t = t;
    clock.events = events;
    *rng_out = local;
    leg
}
