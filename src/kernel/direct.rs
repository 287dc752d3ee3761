//! The Gillespie direct method: one exact trajectory of the chemical master equation.
//!
//! Each step (Gillespie 1977, J. Phys. Chem. 81:2340, and 1976, J. Comput. Phys. 22:403
//! [verified], REFERENCES.md §1): with a₀ = Σⱼ aⱼ(x), the waiting time is τ ~ Exp(a₀) and the
//! channel is the smallest μ with Σ_{j≤μ} aⱼ > u·a₀, u uniform on [0, 1); the joint density of
//! (τ, μ) is a_μ·e^(−a₀τ). After channel μ fires only the propensities in the dependency graph
//! row of μ are recomputed (the graph comes from the compiler).
//!
//! Below [`SMALL_BELOW`](super::compiled::SMALL_BELOW) channels the propensities sit in a
//! flat array: a₀ is summed afresh at every event (so rounding cannot drift) and selection is
//! a linear scan without early exit: it counts the cumulative sums at or below u·a₀, so the
//! selected channel is data, not a branch the processor must guess (with three channels this
//! runs about 30 % faster than an early-exit scan, whose exit branch is mispredicted on a large
//! share of events). An event's rows there have one fixed width and carry their rates inline
//! ([`SmallTables`](super::compiled::SmallTables)); up to three mass-action reactions, the dense
//! form keeps the propensities in registers ([`DenseTables`](super::compiled::DenseTables)).
//! From [`SMALL_BELOW`](super::compiled::SMALL_BELOW) channels on, selection goes through the
//! sum tree of [`crate::kernel::select`], which recomputes every sum on a changed path from its
//! children, so it never drifts either.
//!
//! The loop runs in legs that contain no call: a leg ends where the observer wants to see the
//! state ([`Observer::due`]) or where the waiting time's exponential leaves the ziggurat's
//! fast path ([`crate::kernel::ziggurat`]); both are handled between legs.
//!
//! Guarantees: clamped species never change (the compiler leaves them out of the state
//! changes); a count that would pass [`MAX_COUNT`] stops the run with an error naming the
//! species; a propensity that is negative, infinite or NaN (possible only for a `law`; mass
//! action constants are bounded when the kernel is built) stops it with an error naming the
//! step; a₀ = 0 (nothing can fire) ends the run at that time and
//! the observer's [`Observer::finish`] fills what remains of the grid. Nothing is allocated in
//! the event loop.

use super::compiled::{CompiledKernel, DenseTables, SmallTables, Updates};
use super::observe::Observer;
use super::rng::uniform;
use super::select::SumTree;
use super::ziggurat::{exp_ziggurat, Miss};
use crate::error::{Error, Result};
use crate::network::MAX_COUNT;
use rand::Rng;

/// The propensity array of a small network is a multiple of this long, so that a₀ and the
/// selection run in blocks of a fixed size.
const LANES: usize = 4;

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
    /// Propensities of a small network, one per channel, then at least one idle channel
    /// (always 0) up to a multiple of [`LANES`], then one more 0 that is never summed.
    Small(Vec<f64>),
    Tree(SumTree),
}

impl<'k> Direct<'k> {
    pub fn new(kernel: &'k CompiledKernel) -> Direct<'k> {
        let m = kernel.reactions();
        let selector = if kernel.is_small() {
            Selector::Small(vec![0.0; (m + 1).next_multiple_of(LANES) + 1])
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
        let x = &mut self.x[..];
        match &mut self.selector {
            Selector::Small(a) => {
                // Small is Some exactly when the selector is Small (Direct::new).
                let Some(tables) = k.small() else {
                    return Err(Error::Internal("small network without tables".into()));
                };
                if let Some(d) = tables.dense() {
                    return match tables.order() {
                        1 => run_loop(
                            k,
                            x,
                            Dense::<1> {
                                k,
                                d,
                                a: [0.0; LANES],
                            },
                            t_end,
                            rng,
                            obs,
                        ),
                        2 => run_loop(
                            k,
                            x,
                            Dense::<2> {
                                k,
                                d,
                                a: [0.0; LANES],
                            },
                            t_end,
                            rng,
                            obs,
                        ),
                        _ => run_loop(
                            k,
                            x,
                            Dense::<3> {
                                k,
                                d,
                                a: [0.0; LANES],
                            },
                            t_end,
                            rng,
                            obs,
                        ),
                    };
                }
                match tables.order() {
                    1 => run_small::<1, R, O>(k, tables, x, a, t_end, rng, obs),
                    2 => run_small::<2, R, O>(k, tables, x, a, t_end, rng, obs),
                    _ => run_small::<3, R, O>(k, tables, x, a, t_end, rng, obs),
                }
            }
            Selector::Tree(tree) => run_loop(k, x, Tree { k, tree }, t_end, rng, obs),
        }
    }
}

/// [`run_loop`] for a small network whose rates have `ORDER` factors, with the row width
/// fixed at compile time where it is 4 or less.
fn run_small<const ORDER: usize, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    tables: &SmallTables,
    x: &mut [i64],
    a: &mut [f64],
    t_end: f64,
    rng: &mut R,
    obs: &mut O,
) -> Result<RunSummary> {
    match tables.width() {
        1 => run_loop(k, x, Small::<ORDER, 1> { k, tables, a }, t_end, rng, obs),
        2 => run_loop(k, x, Small::<ORDER, 2> { k, tables, a }, t_end, rng, obs),
        3 => run_loop(k, x, Small::<ORDER, 3> { k, tables, a }, t_end, rng, obs),
        4 => run_loop(k, x, Small::<ORDER, 4> { k, tables, a }, t_end, rng, obs),
        _ => run_loop(k, x, Small::<ORDER, 0> { k, tables, a }, t_end, rng, obs),
    }
}

/// The channels as the event loop needs them: their propensities, selection, and what a
/// firing changes. Implemented by views that borrow the simulator's buffers for one run; the
/// loop holds a view by value, so its pointers stay in registers.
trait Channels {
    /// Sets every propensity from `x`, checking each.
    fn init(&mut self, x: &[i64]) -> Result<()>;
    /// a₀.
    fn total(&self) -> f64;
    /// The channel whose cumulative propensity first exceeds `target` = u·a₀ (a₀ the value
    /// [`Channels::total`] gave), or None where rounding put `target` at or above the summed
    /// propensities (a draw of probability about 2⁻⁵³, which the loop takes again).
    fn select(&self, target: f64, a0: f64) -> Option<usize>;
    /// Propensity of channel `j` < reactions() (for the tests).
    #[cfg(test)]
    fn get(&self, j: usize) -> f64;
    /// The same view as a new local value. A view passed by value may stay in its caller's
    /// memory; a view rebuilt field by field inside the event loop's function lives in
    /// registers (it matters for [`Dense`], whose propensities are registers).
    #[inline(always)]
    fn local(self) -> Self
    where
        Self: Sized,
    {
        self
    }
    /// Fires channel `j` < reactions() at `t`: applies its change to `x` (reporting each
    /// move to `obs`) and recomputes the propensities that depend on it. Returns true when
    /// some count may have passed [`MAX_COUNT`] (the caller checks), false when none did.
    fn fire<O: Observer>(&mut self, j: usize, x: &mut [i64], t: f64, obs: &mut O) -> bool;
}

/// A small network: propensities in a flat array, the fixed-width rows of [`SmallTables`],
/// mass-action rates with `ORDER` factors each, rows `W` wide (0: as wide as the tables say).
///
/// a₀ is summed afresh at every event, left to right, so no rounding drift accumulates. The
/// selection counts the cumulative sums at or below the target instead of leaving the scan
/// early, so the selected channel is data, not a branch the processor must guess.
struct Small<'a, const ORDER: usize, const W: usize> {
    k: &'a CompiledKernel,
    tables: &'a SmallTables,
    /// reactions() entries, then idle channels (always 0) up to a multiple of LANES, then
    /// one more 0 (the selection's answer when rounding puts the target at a₀).
    a: &'a mut [f64],
}

impl<const ORDER: usize, const W: usize> Channels for Small<'_, ORDER, W> {
    fn init(&mut self, x: &[i64]) -> Result<()> {
        init_flat(self.k, &mut self.a[..], x)
    }

    #[inline(always)]
    fn total(&self) -> f64 {
        block_total(self.a)
    }

    /// The count of [`block_find`]. a₀ is the last of its cumulative sums, so a target below
    /// a₀ selects a channel of positive propensity.
    #[inline(always)]
    fn select(&self, target: f64, a0: f64) -> Option<usize> {
        (target < a0).then(|| block_find(self.a, target))
    }

    #[cfg(test)]
    fn get(&self, j: usize) -> f64 {
        self.a[j]
    }

    #[inline(always)]
    fn fire<O: Observer>(&mut self, j: usize, x: &mut [i64], t: f64, obs: &mut O) -> bool {
        debug_assert!(j < self.k.reactions() && x.len() == self.k.species + 1);
        // The updates read the state before the change (their offsets include it), so they
        // come first.
        // SAFETY: j < reactions(); updates name channels ≤ reactions() < a.len() and species
        // ≤ species < x.len() (construction).
        for u in unsafe { self.tables.updates_unchecked::<W>(j) } {
            let mut a = u.c;
            for f in 0..ORDER {
                a *= unsafe { (*x.get_unchecked(u.i[f] as usize) - u.o[f]) as f64 };
            }
            unsafe { *self.a.get_unchecked_mut(u.d as usize) = a };
        }
        // SAFETY: j < reactions(); change rows name species or the constant slot, all below
        // x.len() = species + 1 (construction; checked by the caller).
        let over = unsafe { apply(self.tables.change_unchecked::<W>(j), x, t, obs) };
        if self.tables.has_laws() {
            for &d in self.tables.law_dependents(j) {
                // SAFETY: d < reactions() and x.len() == species + 1.
                self.a[d as usize] = unsafe { self.k.propensity_unchecked(d as usize, x) };
            }
        }
        over
    }
}

/// A network of at most three mass-action reactions in the form of [`DenseTables`]: every
/// event recomputes the whole block of four propensities from species loaded before the
/// selected channel is known; only offsets come from the event's row. The four propensities
/// are a value of the view, kept in registers by the event loop, so that a₀ and the
/// selection read no memory. Same numbers as [`Small`], bit for bit: the factors are
/// differences of integers below 2⁵³, exact in f64, and the sums run in the same order.
struct Dense<'a, const ORDER: usize> {
    k: &'a CompiledKernel,
    d: &'a DenseTables,
    /// The channels' propensities, the last ones idle (always 0).
    a: [f64; LANES],
}

impl<const ORDER: usize> Channels for Dense<'_, ORDER> {
    fn init(&mut self, x: &[i64]) -> Result<()> {
        init_flat(self.k, &mut self.a[..], x)
    }

    #[inline(always)]
    fn total(&self) -> f64 {
        block_total(&self.a)
    }

    #[inline(always)]
    fn select(&self, target: f64, a0: f64) -> Option<usize> {
        let mut sum = -0.0;
        let mut j = 0;
        for &v in &self.a {
            sum += v;
            j += (sum <= target) as usize;
        }
        (target < a0).then_some(j)
    }

    #[cfg(test)]
    fn get(&self, j: usize) -> f64 {
        self.a[j]
    }

    #[inline(always)]
    fn local(self) -> Self {
        let Dense { k, d, a } = self;
        Dense { k, d, a }
    }

    #[inline(always)]
    fn fire<O: Observer>(&mut self, j: usize, x: &mut [i64], t: f64, obs: &mut O) -> bool {
        debug_assert!(j < self.k.reactions() && x.len() == self.k.species + 1);
        let d = self.d;
        // SAFETY: the tables name species or the constant slot, below x.len() (construction;
        // checked by the caller); j < reactions() = number of rows.
        let factor = |k: usize, f: usize| unsafe { *x.get_unchecked(d.i[k][f] as usize) as f64 };
        let xs: [[f64; 3]; LANES] = std::array::from_fn(|k| std::array::from_fn(|f| factor(k, f)));
        let offsets = unsafe { d.offsets.get_unchecked(j) };
        for k in 0..LANES {
            let mut a = d.c[k];
            for f in 0..ORDER {
                a *= xs[k][f] - offsets[k][f];
            }
            self.a[k] = a;
        }
        // SAFETY: as for the factors.
        unsafe { apply(d.change.get_unchecked(j), x, t, obs) }
    }
}

/// A large network: the rows of [`CompiledKernel`] and the sum tree of
/// [`crate::kernel::select`], which recomputes every sum on a changed path from its children,
/// so it never drifts.
struct Tree<'a> {
    k: &'a CompiledKernel,
    tree: &'a mut SumTree,
}

impl Channels for Tree<'_> {
    fn init(&mut self, x: &[i64]) -> Result<()> {
        for j in 0..self.k.reactions() {
            let a = checked(self.k, j, self.k.propensity(j, x), 0.0)?;
            self.tree.set_leaf(j, a);
        }
        self.tree.rebuild();
        Ok(())
    }

    #[inline(always)]
    fn total(&self) -> f64 {
        self.tree.total()
    }

    /// The tree's walk, which only enters subtrees of positive sum.
    #[inline(always)]
    fn select(&self, target: f64, _a0: f64) -> Option<usize> {
        let j = self.tree.find(target);
        (self.tree.get(j) > 0.0).then_some(j)
    }

    #[cfg(test)]
    #[inline(always)]
    fn get(&self, j: usize) -> f64 {
        self.tree.get(j)
    }

    #[inline(always)]
    fn fire<O: Observer>(&mut self, j: usize, x: &mut [i64], t: f64, obs: &mut O) -> bool {
        debug_assert!(j < self.k.reactions() && x.len() == self.k.species + 1);
        // SAFETY: j < reactions(); change rows name species < x.len() (construction).
        let over = unsafe { apply(self.k.change_unchecked(j), x, t, obs) };
        let k = self.k;
        let tree = &mut *self.tree;
        // SAFETY: j < reactions() and species in change rows are below `species`, the row
        // counts of the two tables; the rows name reactions, and x.len() == species + 1.
        updates(k, j, |d| {
            tree.set(d, unsafe { k.propensity_unchecked(d, x) })
        });
        over
    }
}

/// Calls `f` with every reaction whose propensity may have changed when `j` fired: its row of
/// dependents, or the readers of each species it changed (some twice).
#[inline(always)]
fn updates(k: &CompiledKernel, j: usize, mut f: impl FnMut(usize)) {
    match k.updates() {
        // SAFETY (both arms): j < reactions() = rows of the table by reaction, and change rows
        // name species < species = rows of the table by species (construction).
        Updates::ByReaction(rows) => {
            for &d in unsafe { rows.row_unchecked(j) } {
                f(d as usize);
            }
        }
        Updates::BySpecies(rows) => {
            for &(i, _) in unsafe { k.change_unchecked(j) } {
                for &d in unsafe { rows.row_unchecked(i as usize) } {
                    f(d as usize);
                }
            }
        }
    }
}

/// a₀ as the last of the cumulative sums that [`block_find`] compares, so that the
/// two agree to the bit. (A pairwise sum would be a shorter chain, but the compiler
/// turns it into vector loads of values just stored one by one, which the processor
/// cannot forward from its store buffer: slower.)
#[inline(always)]
fn block_total(a: &[f64]) -> f64 {
    let blocks = a.len() / LANES;
    // −0.0 + a = a exactly, so the first addition folds away (0.0 + −0.0 would not).
    let mut sum = -0.0;
    for b in a[..blocks * LANES].chunks_exact(LANES) {
        for &a in b {
            sum += a;
        }
    }
    sum
}

/// Smallest j with a₀ + … + a_j > target, as j = #{k : a₀ + … + a_k ≤ target}: the sums
/// are non-decreasing, so the count is that index. If rounding puts the target at or above
/// every sum, an idle channel or the extra 0 comes back (the loop checks that the
/// propensity is positive).
#[inline(always)]
fn block_find(a: &[f64], target: f64) -> usize {
    let blocks = a.len() / LANES;
    let mut sum = -0.0;
    let mut j = 0;
    for block in a[..blocks * LANES].chunks_exact(LANES) {
        for &a in block {
            sum += a;
            j += (sum <= target) as usize;
        }
    }
    j
}

/// Sets a flat propensity array from `x`, checking each; idle entries are 0.
fn init_flat(k: &CompiledKernel, a: &mut [f64], x: &[i64]) -> Result<()> {
    a.fill(0.0);
    for (j, a) in a.iter_mut().enumerate().take(k.reactions()) {
        *a = checked(k, j, k.propensity(j, x), 0.0)?;
    }
    Ok(())
}

/// Applies one row of state changes to `x`, reporting each move to `obs`; true when some
/// count passed [`MAX_COUNT`].
///
/// # Safety
///
/// Every species index of `row` is below `x.len()`.
#[inline(always)]
unsafe fn apply<O: Observer>(row: &[(u32, i64)], x: &mut [i64], t: f64, obs: &mut O) -> bool {
    let mut over = false;
    for &(i, d) in row {
        // SAFETY: the caller's contract.
        let v = unsafe { x.get_unchecked_mut(i as usize) };
        obs.moved(t, i as usize, *v, d);
        *v += d;
        over |= *v > MAX_COUNT;
    }
    over
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
    /// The waiting time's exponential left the ziggurat's fast path; the loop finishes it
    /// outside the leg, which thus contains no call.
    Miss(Miss),
}

/// Where the next leg takes up an event the previous one began.
enum Resume {
    /// The exponential of the waiting time is drawn.
    Exp(f64),
    /// The event's time is drawn and due for the observer; its channel is still to select.
    Due(f64),
}

/// The running state of the event loop.
struct Clock {
    t: f64,
    events: u64,
}

/// Sets up the propensities, runs the event loop and turns its stop into a result. `x` holds
/// one count per species and then the constant slot 1.
fn run_loop<C: Channels, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    mut ch: C,
    t_end: f64,
    rng: &mut R,
    obs: &mut O,
) -> Result<RunSummary> {
    if x.len() != k.species + 1 {
        return Err(Error::Internal(
            "state buffer without the constant slot".into(),
        ));
    }
    ch.init(x)?;
    let n = k.species;
    obs.start(&x[..n]);
    let mut clock = Clock { t: 0.0, events: 0 };
    let mut pending = None;
    // Events run in legs between the observer's due times: a leg ends when the next event is
    // at or after Observer::due, and `reach` is called here, outside the leg, so the leg's
    // loop contains no call and keeps its values in registers.
    let stop = loop {
        let (l, c) = leg(k, x, ch, t_end, rng, obs, &mut clock, pending);
        ch = c;
        match l {
            Leg::Stop(s) => break s,
            Leg::Due(t_new) => {
                obs.reach(t_new, &x[..n]);
                pending = Some(Resume::Due(t_new));
            }
            Leg::Miss(miss) => pending = Some(Resume::Exp(exp_ziggurat().finish(miss, rng))),
        }
    };
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
                ch.total()
            )));
        }
    };
    obs.finish(t_end, &x[..n]);
    Ok(RunSummary {
        events: clock.events,
        absorbed_at,
    })
}

/// Runs events until the run stops or the next event is due for the observer (see the module
/// docs for one step). `pending` is an event the previous leg began. The channels come in and go out by value.
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn leg<C: Channels, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    ch: C,
    t_end: f64,
    rng_out: &mut R,
    obs: &mut O,
    clock: &mut Clock,
    mut pending: Option<Resume>,
) -> (Leg, C) {
    let mut ch = ch.local();
    let due = obs.due();
    // A local copy of the generator stays in registers; it is written back at the end.
    let mut local = rng_out.clone();
    let rng = &mut local;
    let mut t = clock.t;
    let mut events = clock.events;
    let zig = exp_ziggurat();
    let leg = loop {
        let a0 = ch.total();
        let t_new = match pending.take() {
            Some(Resume::Due(t_new)) => t_new,
            resume => {
                // a₀ cannot be +∞: mass-action constants are bounded when the kernel is
                // built and a law value that is not finite counts as NaN.
                if a0.is_nan() || a0 <= 0.0 {
                    break Leg::Stop(if a0 == 0.0 {
                        Stop::Absorbed(t)
                    } else {
                        Stop::BadRate(t)
                    });
                }
                let e = match resume {
                    Some(Resume::Exp(e)) => e,
                    _ => match zig.fast(rng) {
                        Ok(e) => e,
                        Err(miss) => break Leg::Miss(miss),
                    },
                };
                let t_new = t + e / a0;
                if t_new > t_end {
                    break Leg::Stop(Stop::End);
                }
                if t_new >= due {
                    break Leg::Due(t_new);
                }
                t_new
            }
        };
        let Some(j) = ch.select(uniform(rng) * a0, a0) else {
            continue;
        };
        debug_assert!(j < k.reactions());
        obs.fire(t_new, j, 1);
        if ch.fire(j, x, t_new, obs) {
            if let Some(&(i, _)) = k.change(j).iter().find(|c| x[c.0 as usize] > MAX_COUNT) {
                break Leg::Stop(Stop::Overflow {
                    i: i as usize,
                    j,
                    t: t_new,
                });
            }
        }
        t = t_new;
        events += 1;
    };
    clock.t = t;
    clock.events = events;
    *rng_out = local;
    (leg, ch)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::rng::replicate_rng;
    use crate::network::{load_source, Overrides};
    use rand::RngExt;

    /// Fires random channels of positive propensity through the small-network view and, after
    /// each, compares every kept propensity with a fresh evaluation of its rate law
    /// (REFERENCES.md §1, the combinatorial forms [M]); the kept values come from offsets
    /// shifted by the event's change, so they must agree exactly. Networks of at most three
    /// reactions are checked in their dense form too.
    fn kept_equal_fresh<const ORDER: usize, const W: usize>(src: &str) {
        let net = load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap();
        let k = CompiledKernel::new(&net).unwrap();
        let tables = k.small().expect("a small network");
        assert_eq!(tables.order(), ORDER);
        assert!(tables.width() == W || (W == 0 && tables.width() > 4));
        let mut a = vec![0.0; (k.reactions() + 1).next_multiple_of(LANES) + 1];
        check_kept(
            &k,
            Small::<ORDER, W> {
                k: &k,
                tables,
                a: &mut a,
            },
        );
        if let Some(d) = tables.dense() {
            check_kept(
                &k,
                Dense::<ORDER> {
                    k: &k,
                    d,
                    a: [0.0; LANES],
                },
            );
        }
    }

    fn check_kept<C: Channels>(k: &CompiledKernel, mut ch: C) {
        let mut x = k.state_buffer(&k.x0);
        ch.init(&x).unwrap();
        let mut rng = replicate_rng(3, 0);
        for _ in 0..2000 {
            let a0 = ch.total();
            assert!(a0 > 0.0, "the test network must not absorb");
            let j = ch.select(rng.random::<f64>() * a0, a0).unwrap();
            assert!(ch.get(j) > 0.0);
            assert!(!ch.fire(j, &mut x, 0.0, &mut ()));
            for d in 0..k.reactions() {
                assert_eq!(ch.get(d), k.propensity(d, &x), "channel {d} after {j}");
            }
        }
    }

    #[test]
    fn order_one_width_three() {
        kept_equal_fresh::<1, 3>(
            "species E = 10\nspecies S = 50 clamped\nspecies C = 0\nspecies P = 0\n\
             step bind E + S -> C @ 0.01\nstep unbind C -> E + S @ 1\nstep cat C -> E + P @ 2\n",
        );
    }

    #[test]
    fn order_two_width_two() {
        kept_equal_fresh::<2, 2>(
            "species A = 30\nspecies B = 0\nstep dim 2A -> B @ 0.01\nstep split B -> 2A @ 0.5\n",
        );
    }

    #[test]
    fn order_three_with_a_law_width_four() {
        kept_equal_fresh::<3, 4>(
            "species A = 20\nspecies B = 5\nspecies C = 3\nparam k = 2\n\
             step tri 3A -> B @ 0.001\nstep back B -> 3A @ 0.3\n\
             step mix A + B + C -> 2C @ 0.002\nstep out C -> 0 @ 0.1\n\
             step make 0 -> C @ law k * B / (1 + B)\n",
        );
    }

    #[test]
    fn wide_rows_use_the_run_time_width() {
        // One step changes six species: rows wider than 4 take the run-time width (W = 0).
        kept_equal_fresh::<2, 0>(
            "species A = 40\nspecies B = 40\nspecies C = 5\nspecies D = 5\nspecies E = 5\n\
             species F = 5\nstep all A + B -> C + D + E + F @ 0.001\n\
             step c C -> A @ 0.2\nstep d D -> B @ 0.2\nstep e E -> 0 @ 0.1\n\
             step f F -> 0 @ 0.1\nstep in 0 -> A + B @ 1\n",
        );
    }
}
