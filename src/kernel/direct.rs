//! The Gillespie direct method: one exact trajectory of the chemical master equation.
//!
//! Each step (Gillespie 1977, J. Phys. Chem. 81:2340, and 1976, J. Comput. Phys. 22:403
//! \[verified\], docs/references.md §1): with a₀ = Σⱼ aⱼ(x), the waiting time is τ ~ Exp(a₀) and the
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
//! ([`SmallTables`]); up to three mass-action reactions, the dense
//! form keeps the propensities in registers ([`DenseTables`]).
//! From [`SMALL_BELOW`](super::compiled::SMALL_BELOW) channels on, selection goes through the
//! sum tree of [`crate::kernel::select`], which recomputes every sum on a changed path from its
//! children, so it never drifts either; from [`REJECTION_FROM`] channels on, through
//! composition–rejection ([`crate::kernel::select::Rejection`]), whose cost per event does not
//! grow with the number of channels and whose group sums are exact integers. There each
//! channel's rate sits beside its propensity, so that recomputing a dependent reads and writes
//! one place.
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

use super::compiled::{CompiledKernel, DenseTables, FlatRate, SmallTables, Updates};
use super::observe::Observer;
use super::rng::uniform;
use super::select::{Rejection, SumTree};
use super::timeline::{Counts, Timeline};
use super::ziggurat::{exp_ziggurat, Miss};
use crate::error::{Error, Result};
use crate::network::expr::just_after;
use crate::network::{TimeUse, MAX_COUNT};
use crate::numbers::round_trip;
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
    /// The network's doses, law edges and events, where it has any.
    timeline: Option<Box<Timeline<'k>>>,
    /// Propensities of the thinning loop (networks whose laws vary smoothly with time).
    thin: Vec<f64>,
}

#[derive(Clone, Debug)]
enum Selector {
    /// Propensities of a small network, one per channel, then at least one idle channel
    /// (always 0) up to a multiple of [`LANES`], then one more 0 that is never summed.
    Small(Vec<f64>),
    Tree(SumTree),
    /// Boxed: the groups are several times the size of the other forms.
    Rejection(Box<RejectionState>),
}

/// How the direct method selects the channel that fires.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Selection {
    /// By size: the small-network forms below [`SMALL_BELOW`](super::compiled::SMALL_BELOW)
    /// reactions, the sum tree up to [`REJECTION_FROM`], composition–rejection from there on.
    Auto,
    /// The sum tree of [`crate::kernel::select::SumTree`], O(log M) per update and selection.
    Tree,
    /// Composition–rejection ([`crate::kernel::select::Rejection`]), O(1) in M.
    Rejection,
}

/// Networks with at least this many reactions select by composition–rejection. Where
/// propensities are of one size it measured faster than the sum tree from 40 channels on;
/// where they spread over twelve orders of magnitude (forty groups to scan) the tree stayed
/// faster up to about a thousand (`cargo bench --bench scale`).
pub const REJECTION_FROM: usize = 2048;

impl<'k> Direct<'k> {
    /// A simulator that selects channels as [`Selection::Auto`] says.
    pub fn new(kernel: &'k CompiledKernel) -> Direct<'k> {
        Direct::with_selection(kernel, Selection::Auto)
    }

    /// A simulator with the given selection (any of them is exact; the forced ones serve tests
    /// and benchmarks).
    pub fn with_selection(kernel: &'k CompiledKernel, selection: Selection) -> Direct<'k> {
        let m = kernel.reactions();
        let selection = match selection {
            Selection::Auto if kernel.is_small() => None,
            Selection::Auto if m < REJECTION_FROM => Some(Selection::Tree),
            Selection::Auto => Some(Selection::Rejection),
            forced => Some(forced),
        };
        let selector = match selection {
            None => Selector::Small(vec![0.0; (m + 1).next_multiple_of(LANES) + 1]),
            Some(Selection::Rejection) => {
                Selector::Rejection(Box::new(RejectionState::new(kernel)))
            }
            Some(_) => Selector::Tree(SumTree::new(&vec![0.0; m])),
        };
        let inputs = kernel.inputs();
        let smooth = kernel.time_use() == TimeUse::Smooth;
        Direct {
            kernel,
            x: kernel.state_buffer(&kernel.x0),
            selector,
            timeline: (!inputs.is_empty() || smooth).then(|| Box::new(Timeline::new(inputs))),
            thin: if smooth { vec![0.0; m] } else { Vec::new() },
        }
    }

    /// Whether channels are selected through the sum tree.
    pub fn uses_tree(&self) -> bool {
        matches!(self.selector, Selector::Tree(_))
    }

    /// The selection in use ([`Selection::Auto`] for the small-network forms).
    pub fn selection(&self) -> Selection {
        match self.selector {
            Selector::Small(_) => Selection::Auto,
            Selector::Tree(_) => Selection::Tree,
            Selector::Rejection(_) => Selection::Rejection,
        }
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
        k.check_simulable()?;
        self.x[..k.species].copy_from_slice(x0);
        let x = &mut self.x[..];
        let run = Run {
            t_end,
            rng,
            obs,
            tl: self.timeline.as_deref_mut(),
        };
        if k.time_use() == TimeUse::Smooth {
            return run_thinned(k, x, &mut self.thin, run);
        }
        if k.inputs().has_state_triggers() {
            dispatch::<StateTriggers, R, O>(k, x, &mut self.selector, run)
        } else {
            dispatch::<NoTriggers, R, O>(k, x, &mut self.selector, run)
        }
    }
}

/// What a run needs besides its state and channels.
struct Run<'a, 'k, R, O> {
    t_end: f64,
    rng: &'a mut R,
    obs: &'a mut O,
    /// Breakpoints and events (`None`: the network has none).
    tl: Option<&'a mut Timeline<'k>>,
}

/// Whether the event loop checks state triggers after every firing.
trait Triggers {
    const CHECK: bool;
}

/// A network without species-reading triggers: nothing is checked per firing.
struct NoTriggers;

impl Triggers for NoTriggers {
    const CHECK: bool = false;
}

/// A network with a trigger on species: checked after every firing.
struct StateTriggers;

impl Triggers for StateTriggers {
    const CHECK: bool = true;
}

/// Picks the view of the channels for the network's form and runs the loop.
fn dispatch<Tr: Triggers, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    selector: &mut Selector,
    run: Run<R, O>,
) -> Result<RunSummary> {
    match selector {
        Selector::Small(a) => {
            // Small is Some exactly when the selector is Small (Direct::new).
            let Some(tables) = k.small() else {
                return Err(Error::Internal("small network without tables".into()));
            };
            if let Some(d) = tables.dense() {
                return match (tables.order(), d.change_width) {
                    (1, ..=2) => run_dense::<1, 2, Tr, R, O>(k, d, x, run),
                    (1, 3) => run_dense::<1, 3, Tr, R, O>(k, d, x, run),
                    (1, _) => run_dense::<1, 4, Tr, R, O>(k, d, x, run),
                    (2, ..=2) => run_dense::<2, 2, Tr, R, O>(k, d, x, run),
                    (2, 3) => run_dense::<2, 3, Tr, R, O>(k, d, x, run),
                    (2, _) => run_dense::<2, 4, Tr, R, O>(k, d, x, run),
                    (_, ..=2) => run_dense::<3, 2, Tr, R, O>(k, d, x, run),
                    (_, 3) => run_dense::<3, 3, Tr, R, O>(k, d, x, run),
                    _ => run_dense::<3, 4, Tr, R, O>(k, d, x, run),
                };
            }
            match tables.order() {
                1 => run_small::<1, Tr, R, O>(k, tables, x, a, run),
                2 => run_small::<2, Tr, R, O>(k, tables, x, a, run),
                _ => run_small::<3, Tr, R, O>(k, tables, x, a, run),
            }
        }
        Selector::Tree(tree) => run_loop::<_, _, _, Tr>(k, x, Tree { k, tree }, run),
        Selector::Rejection(state) => {
            let RejectionState {
                groups,
                kept,
                events,
            } = &mut **state;
            let events = events.as_ref();
            run_loop::<_, _, _, Tr>(
                k,
                x,
                Groups {
                    k,
                    groups,
                    kept,
                    events,
                },
                run,
            )
        }
    }
}

/// [`run_loop`] for a network in the form of [`DenseTables`] whose rates have `ORDER` factors
/// and whose state changes are `CW` wide.
fn run_dense<const ORDER: usize, const CW: usize, Tr: Triggers, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    d: &DenseTables,
    x: &mut [i64],
    run: Run<R, O>,
) -> Result<RunSummary> {
    let a = [0.0; LANES];
    run_loop::<_, _, _, Tr>(k, x, Dense::<ORDER, CW> { k, d, a }, run)
}

/// [`run_loop`] for a small network whose rates have `ORDER` factors, with the row width
/// fixed at compile time where it is 4 or less.
fn run_small<const ORDER: usize, Tr: Triggers, R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    tables: &SmallTables,
    x: &mut [i64],
    a: &mut [f64],
    run: Run<R, O>,
) -> Result<RunSummary> {
    match tables.width() {
        1 => run_loop::<_, _, _, Tr>(k, x, Small::<ORDER, 1> { k, tables, a }, run),
        2 => run_loop::<_, _, _, Tr>(k, x, Small::<ORDER, 2> { k, tables, a }, run),
        3 => run_loop::<_, _, _, Tr>(k, x, Small::<ORDER, 3> { k, tables, a }, run),
        4 => run_loop::<_, _, _, Tr>(k, x, Small::<ORDER, 4> { k, tables, a }, run),
        _ => run_loop::<_, _, _, Tr>(k, x, Small::<ORDER, 0> { k, tables, a }, run),
    }
}

/// The channels as the event loop needs them: their propensities, selection, and what a
/// firing changes. Implemented by views that borrow the simulator's buffers for one run; the
/// loop holds a view by value, so its pointers stay in registers.
trait Channels {
    /// Sets every propensity from `x` with the run's params at time `t`, checking each.
    fn init(&mut self, x: &[i64], params: &[f64], t: f64) -> Result<()>;
    /// a₀.
    fn total(&self) -> f64;
    /// The channel whose cumulative propensity first exceeds `target` = u·a₀ (a₀ the value
    /// [`Channels::total`] gave), or None where rounding put `target` at or above the summed
    /// propensities (a draw of probability about 2⁻⁵³, which the loop takes again). A view
    /// that selects in two stages may draw more numbers from `rng`.
    fn select<R: Rng>(&self, target: f64, a0: f64, rng: &mut R) -> Option<usize>;
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
    /// move to `obs`) and recomputes the propensities that depend on it (laws with the run's
    /// `params`). Returns true when some count may have passed [`MAX_COUNT`] (the caller
    /// checks), false when none did.
    fn fire<O: Observer>(
        &mut self,
        j: usize,
        x: &mut [i64],
        t: f64,
        obs: &mut O,
        params: &[f64],
    ) -> bool;
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
    fn init(&mut self, x: &[i64], params: &[f64], t: f64) -> Result<()> {
        init_flat(self.k, &mut self.a[..], x, params, t)
    }

    #[inline(always)]
    fn total(&self) -> f64 {
        block_total(self.a)
    }

    /// The count of [`block_find`]. a₀ is the last of its cumulative sums, so a target below
    /// a₀ selects a channel of positive propensity.
    #[inline(always)]
    fn select<R: Rng>(&self, target: f64, a0: f64, _rng: &mut R) -> Option<usize> {
        (target < a0).then(|| block_find(self.a, target))
    }

    #[cfg(test)]
    fn get(&self, j: usize) -> f64 {
        self.a[j]
    }

    #[inline(always)]
    fn fire<O: Observer>(
        &mut self,
        j: usize,
        x: &mut [i64],
        t: f64,
        obs: &mut O,
        params: &[f64],
    ) -> bool {
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
                self.a[d as usize] =
                    unsafe { self.k.propensity_unchecked(d as usize, x, params, t) };
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
struct Dense<'a, const ORDER: usize, const CW: usize> {
    k: &'a CompiledKernel,
    d: &'a DenseTables,
    /// The channels' propensities, the last ones idle (always 0).
    a: [f64; LANES],
}

impl<const ORDER: usize, const CW: usize> Channels for Dense<'_, ORDER, CW> {
    fn init(&mut self, x: &[i64], params: &[f64], t: f64) -> Result<()> {
        init_flat(self.k, &mut self.a[..], x, params, t)
    }

    #[inline(always)]
    fn total(&self) -> f64 {
        block_total(&self.a)
    }

    #[inline(always)]
    fn select<R: Rng>(&self, target: f64, a0: f64, _rng: &mut R) -> Option<usize> {
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
    fn fire<O: Observer>(
        &mut self,
        j: usize,
        x: &mut [i64],
        t: f64,
        obs: &mut O,
        _params: &[f64],
    ) -> bool {
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
        // SAFETY: as for the factors; CW ≤ 4.
        unsafe { apply(&d.change.get_unchecked(j)[..CW], x, t, obs) }
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
    fn init(&mut self, x: &[i64], params: &[f64], t: f64) -> Result<()> {
        for j in 0..self.k.reactions() {
            let a = checked(self.k, j, self.k.propensity_at(j, x, params, t), t)?;
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
    fn select<R: Rng>(&self, target: f64, _a0: f64, _rng: &mut R) -> Option<usize> {
        let j = self.tree.find(target);
        (self.tree.get(j) > 0.0).then_some(j)
    }

    #[cfg(test)]
    #[inline(always)]
    fn get(&self, j: usize) -> f64 {
        self.tree.get(j)
    }

    #[inline(always)]
    fn fire<O: Observer>(
        &mut self,
        j: usize,
        x: &mut [i64],
        t: f64,
        obs: &mut O,
        params: &[f64],
    ) -> bool {
        debug_assert!(j < self.k.reactions() && x.len() == self.k.species + 1);
        // SAFETY: j < reactions(); change rows name species < x.len() (construction).
        let over = unsafe { apply(self.k.change_unchecked(j), x, t, obs) };
        let k = self.k;
        let tree = &mut *self.tree;
        // SAFETY: j < reactions() and species in change rows are below `species`, the row
        // counts of the two tables; the rows name reactions, and x.len() == species + 1.
        updates(k, j, |d| {
            tree.set(d, unsafe { k.propensity_unchecked(d, x, params, t) })
        });
        over
    }
}

/// A rate of the kernel with its current propensity beside it, so that an update reads and
/// writes one place (two of them share a cache line).
#[derive(Clone, Copy, Debug, PartialEq)]
#[repr(C, align(32))]
struct Kept {
    rate: FlatRate,
    a: f64,
}

/// The buffers of composition–rejection selection: the groups, each channel's rate with
/// its propensity, and each reaction's event in one row.
#[derive(Clone, Debug)]
struct RejectionState {
    groups: Rejection,
    kept: Vec<Kept>,
    events: Option<EventRows>,
}

impl RejectionState {
    fn new(k: &CompiledKernel) -> RejectionState {
        RejectionState {
            groups: Rejection::new(k.reactions()),
            kept: (0..k.reactions())
                .map(|j| Kept {
                    rate: k.rate(j),
                    a: 0.0,
                })
                .collect(),
            events: EventRows::new(k),
        }
    }
}

/// One entry of an [`EventRows`] row: a species and its change, or a dependent reaction
/// (`delta` 0), or the row's header (`index` the number of changes).
#[derive(Clone, Copy, Debug, PartialEq)]
#[repr(C)]
struct Entry {
    index: u32,
    delta: i32,
}

/// Everything a firing of reaction j reads besides the propensities, in one contiguous row:
/// a header with the number of changes, the state changes, then the dependents (each once,
/// in the order of the dependency row). In a large network the rows of changes and of
/// dependents lie far apart, and each costs two loads of its offsets; one row costs one
/// pair and, for the usual handful of entries, one or two cache lines. Built only where the
/// graph is kept by reaction (by species it would grow beyond the network) and every change
/// fits an i32.
#[derive(Clone, Debug, PartialEq)]
struct EventRows {
    start: Vec<u32>,
    entries: Vec<Entry>,
}

impl EventRows {
    fn new(k: &CompiledKernel) -> Option<EventRows> {
        let Updates::ByReaction(deps) = k.updates() else {
            return None;
        };
        let mut start = vec![0u32];
        let mut entries = Vec::new();
        for j in 0..k.reactions() {
            // SAFETY: j < reactions().
            let change = unsafe { k.change_unchecked(j) };
            entries.push(Entry {
                index: u32::try_from(change.len()).ok()?,
                delta: 0,
            });
            for &(i, d) in change {
                entries.push(Entry {
                    index: i,
                    delta: i32::try_from(d).ok()?,
                });
            }
            for &d in deps.row(j) {
                entries.push(Entry { index: d, delta: 0 });
            }
            start.push(u32::try_from(entries.len()).ok()?);
        }
        Some(EventRows { start, entries })
    }

    /// Row j's changes and dependents.
    ///
    /// # Safety
    ///
    /// j < the number of reactions of the kernel the rows were built from.
    #[inline(always)]
    unsafe fn row(&self, j: usize) -> (&[Entry], &[Entry]) {
        // SAFETY: start has reactions() + 1 non-decreasing offsets ending at entries.len(),
        // and each row begins with its header, whose count of changes fits the row.
        unsafe {
            let s = *self.start.get_unchecked(j) as usize;
            let e = *self.start.get_unchecked(j + 1) as usize;
            let n = self.entries.get_unchecked(s).index as usize;
            (
                self.entries.get_unchecked(s + 1..s + 1 + n),
                self.entries.get_unchecked(s + 1 + n..e),
            )
        }
    }
}

/// A large network: the rows of [`CompiledKernel`] and the composition–rejection groups of
/// [`crate::kernel::select::Rejection`], whose sums are exact, so they never drift.
struct Groups<'a> {
    k: &'a CompiledKernel,
    groups: &'a mut Rejection,
    kept: &'a mut [Kept],
    events: Option<&'a EventRows>,
}

impl Channels for Groups<'_> {
    fn init(&mut self, x: &[i64], params: &[f64], t: f64) -> Result<()> {
        for j in 0..self.k.reactions() {
            let a = checked(self.k, j, self.k.propensity_at(j, x, params, t), t)?;
            let kept = &mut self.kept[j];
            self.groups.set(j, kept.a, a);
            kept.a = a;
        }
        Ok(())
    }

    #[inline(always)]
    fn total(&self) -> f64 {
        self.groups.total()
    }

    #[inline(always)]
    fn select<R: Rng>(&self, target: f64, _a0: f64, rng: &mut R) -> Option<usize> {
        let kept = &*self.kept;
        // SAFETY: the groups hold channels < reactions() = kept.len().
        self.groups
            .select(target, rng, |j| unsafe { kept.get_unchecked(j).a })
    }

    #[cfg(test)]
    #[inline(always)]
    fn get(&self, j: usize) -> f64 {
        self.kept[j].a
    }

    #[inline(always)]
    fn fire<O: Observer>(
        &mut self,
        j: usize,
        x: &mut [i64],
        t: f64,
        obs: &mut O,
        params: &[f64],
    ) -> bool {
        debug_assert!(j < self.k.reactions() && x.len() == self.k.species + 1);
        let k = self.k;
        let groups = &mut *self.groups;
        let kept = &mut *self.kept;
        if let Some(events) = self.events {
            // SAFETY: j < reactions(); the rows are k's (construction), so they name species
            // < x.len() and reactions < kept.len().
            let (change, deps) = unsafe { events.row(j) };
            let mut over = false;
            for c in change {
                let v = unsafe { x.get_unchecked_mut(c.index as usize) };
                let d = i64::from(c.delta);
                obs.moved(t, c.index as usize, *v, d);
                *v += d;
                over |= *v > MAX_COUNT;
            }
            for dep in deps {
                let d = dep.index as usize;
                let e = unsafe { kept.get_unchecked_mut(d) };
                let a = unsafe { k.rate_unchecked(&e.rate, x, params, t) };
                groups.set(d, e.a, a);
                e.a = a;
            }
            return over;
        }
        // SAFETY: j < reactions(); change rows name species < x.len() (construction).
        let over = unsafe { apply(k.change_unchecked(j), x, t, obs) };
        // SAFETY: as for the sum tree; kept.len() == reactions(), and its rates are k's.
        updates(k, j, |d| {
            let e = unsafe { kept.get_unchecked_mut(d) };
            let a = unsafe { k.rate_unchecked(&e.rate, x, params, t) };
            groups.set(d, e.a, a);
            e.a = a;
        });
        over
    }
}

/// Calls `f` with every reaction whose propensity may have changed when `j` fired: its row of
/// dependents, or the readers of each species it changed (some twice). One loop for both, so
/// that `f` has one call site and is inlined.
#[inline(always)]
fn updates(k: &CompiledKernel, j: usize, mut f: impl FnMut(usize)) {
    let key = j as u32;
    // SAFETY: j < reactions(); the keys are rows of the table (construction).
    let (rows, keys) = unsafe { k.updates().walk(&key) };
    for &r in keys {
        for &d in unsafe { rows.row_unchecked(r as usize) } {
            f(d as usize);
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

/// Sets a flat propensity array from `x` with `params` at time `t`, checking each; idle
/// entries are 0.
fn init_flat(k: &CompiledKernel, a: &mut [f64], x: &[i64], params: &[f64], t: f64) -> Result<()> {
    a.fill(0.0);
    for (j, a) in a.iter_mut().enumerate().take(k.reactions()) {
        *a = checked(k, j, k.propensity_at(j, x, params, t), t)?;
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
    /// The next event, at this time, is due for the observer's [`Observer::reach`] or falls
    /// at or after the next breakpoint; it has not been selected yet.
    Due(f64),
    /// The waiting time's exponential left the ziggurat's fast path; the loop finishes it
    /// outside the leg, which thus contains no call.
    Miss(Miss),
    /// The firing at this time changed the value of a state trigger.
    Trigger(f64),
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
///
/// Breakpoints (doses, edges of piecewise-constant laws, time triggers, delayed events) are
/// the timeline's: a leg ends where the next event would fall at or after the next breakpoint;
/// the drawn time is then dropped, the run moves to the breakpoint, applies it, recomputes the
/// propensities and draws afresh. Between breakpoints the propensities depend on the state
/// alone, so the waiting time is exponential and dropping a draw at a breakpoint leaves the
/// process exact (memorylessness).
fn run_loop<C: Channels, R: Rng + Clone, O: Observer, Tr: Triggers>(
    k: &CompiledKernel,
    x: &mut [i64],
    mut ch: C,
    run: Run<R, O>,
) -> Result<RunSummary> {
    let Run {
        t_end,
        rng,
        obs,
        mut tl,
    } = run;
    if x.len() != k.species + 1 {
        return Err(Error::Internal(
            "state buffer without the constant slot".into(),
        ));
    }
    let n = k.species;
    obs.start(&x[..n]);
    match tl.as_deref_mut() {
        Some(tl) => {
            tl.start(&mut Counts {
                x: &mut x[..n],
                obs: &mut *obs,
            })?;
            ch.init(x, tl.params(), just_after(0.0))?;
        }
        None => ch.init(x, &[], 0.0)?,
    }
    let mut clock = Clock { t: 0.0, events: 0 };
    let mut pending = None;
    // Events run in legs between the observer's due times: a leg ends when the next event is
    // at or after Observer::due, and `reach` is called here, outside the leg, so the leg's
    // loop contains no call and keeps its values in registers.
    let stop = loop {
        let brk = match tl.as_deref() {
            Some(tl) if tl.next() <= t_end => tl.next(),
            _ => f64::INFINITY,
        };
        let (params, trig): (&[f64], _) = match tl.as_deref() {
            Some(tl) => (tl.params(), Some(tl)),
            None => (&[], None),
        };
        let (l, c) = leg::<C, R, O, Tr>(
            k,
            x,
            ch,
            t_end,
            rng,
            obs,
            &mut clock,
            pending.take(),
            brk,
            params,
            trig,
        );
        ch = c;
        let at_break = match l {
            Leg::Stop(Stop::Absorbed(_)) if brk.is_finite() => true,
            Leg::Stop(s) => break s,
            Leg::Due(t_new) if t_new >= brk => true,
            Leg::Due(t_new) => {
                obs.reach(t_new, &x[..n]);
                pending = Some(Resume::Due(t_new));
                false
            }
            Leg::Miss(miss) => {
                pending = Some(Resume::Exp(exp_ziggurat().finish(miss, rng)));
                false
            }
            Leg::Trigger(t) => {
                let Some(tl) = tl.as_deref_mut() else {
                    return Err(Error::Internal("a trigger without a timeline".into()));
                };
                let changed = tl.settle(
                    t,
                    &mut Counts {
                        x: &mut x[..n],
                        obs: &mut *obs,
                    },
                )?;
                if changed.any() {
                    ch.init(x, tl.params(), t)?;
                }
                false
            }
        };
        if at_break {
            let Some(tl) = tl.as_deref_mut() else {
                return Err(Error::Internal("a breakpoint without a timeline".into()));
            };
            if brk >= obs.due() {
                obs.reach(brk, &x[..n]);
            }
            clock.t = brk;
            tl.breakpoint(
                brk,
                &mut Counts {
                    x: &mut x[..n],
                    obs: &mut *obs,
                },
            )?;
            ch.init(x, tl.params(), just_after(brk))?;
        }
    };
    let absorbed_at = match stop {
        Stop::End => None,
        Stop::Absorbed(t) => Some(t),
        Stop::Overflow { i, j, t } => return Err(k.overflow(i, j, t)),
        Stop::BadRate(t) => {
            let params = tl.as_deref().map_or(&[][..], |tl| tl.params());
            for j in 0..k.reactions() {
                checked(k, j, k.propensity_at(j, x, params, t), t)?;
            }
            return Err(Error::Internal(format!(
                "the total propensity became {} at t = {} s",
                round_trip(ch.total()),
                round_trip(t)
            )));
        }
    };
    obs.finish(t_end, &x[..n]);
    Ok(RunSummary {
        events: clock.events,
        absorbed_at,
    })
}

/// Runs events until the run stops, the next event is due for the observer or falls at or
/// after the breakpoint `brk`, or (with `Tr::CHECK`) a firing changes a state trigger of
/// `trig` (see the module docs for one step). `pending` is an event the previous leg began.
/// The channels come in and go out by value.
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn leg<C: Channels, R: Rng + Clone, O: Observer, Tr: Triggers>(
    k: &CompiledKernel,
    x: &mut [i64],
    ch: C,
    t_end: f64,
    rng_out: &mut R,
    obs: &mut O,
    clock: &mut Clock,
    mut pending: Option<Resume>,
    brk: f64,
    params: &[f64],
    trig: Option<&Timeline>,
) -> (Leg, C) {
    let mut ch = ch.local();
    let due = obs.due().min(brk);
    // t_new ≥ limit ⇔ t_new ≥ due or t_new > t_end (one comparison per event).
    let limit = due.min(f64::from_bits(t_end.abs().to_bits() + 1));
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
                if t_new >= limit {
                    if t_new > t_end && t_new < brk {
                        break Leg::Stop(Stop::End);
                    }
                    break Leg::Due(t_new);
                }
                t_new
            }
        };
        let target = uniform(rng) * a0;
        let Some(j) = ch.select(target, a0, rng) else {
            continue;
        };
        debug_assert!(j < k.reactions());
        obs.fire(t_new, j, 1);
        if ch.fire(j, x, t_new, obs, params) {
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
        if Tr::CHECK {
            if let Some(tl) = trig {
                if tl.changed(t, |i| x[i] as f64) {
                    break Leg::Trigger(t);
                }
            }
        }
    };
    clock.t = t;
    clock.events = events;
    *rng_out = local;
    (leg, ch)
}

/// The direct method for a network whose propensities vary smoothly with time (a `law`
/// with sin, cos or time in its arithmetic), by thinning (Lewis & Shedler 1979, Naval Res.
/// Logist. Q. 26:403 \[M\]): over a window [t, t + h] with the state fixed, B bounds the total
/// propensity a₀(t′) for every t′ in the window (the constant channels plus, for each
/// time-varying one, the upper end of its interval evaluation over [t, t + h], widened by
/// 1e-9 for rounding); candidates arrive at rate B, and a candidate at t′ is an event with
/// probability a₀(t′)/B, then of channel j with probability a_j(t′)/a₀(t′) (one uniform
/// u·B decides both: it selects j where the cumulative propensities pass it, or rejects when
/// it is above a₀). A candidate past the window moves the clock to the window's end. This is
/// exact for any valid bound; a tight bound only makes it faster, so h shrinks when B is
/// loose (more than 1.5 × a₀(t)) and grows when it is tight. Thinning was chosen over
/// integrating the propensity (Anderson 2007) because it needs only values and bounds of the
/// compiled program, where the integrated form needs the inverse of ∫a dt, which has no
/// closed form for a general law.
fn run_thinned<R: Rng + Clone, O: Observer>(
    k: &CompiledKernel,
    x: &mut [i64],
    a: &mut [f64],
    run: Run<R, O>,
) -> Result<RunSummary> {
    use crate::network::Interval;
    let Run {
        t_end,
        rng,
        obs,
        tl,
    } = run;
    let Some(tl) = tl else {
        return Err(Error::Internal(
            "a time-varying network without a timeline".into(),
        ));
    };
    let n = k.species;
    let m = k.reactions();
    let smooth = k.smooth_channels();
    obs.start(&x[..n]);
    tl.start(&mut Counts {
        x: &mut x[..n],
        obs: &mut *obs,
    })?;
    let fresh = |a: &mut [f64], x: &[i64], params: &[f64], t: f64| -> Result<()> {
        for (j, a) in a.iter_mut().enumerate() {
            *a = checked(k, j, k.propensity_at(j, x, params, t), t)?;
        }
        Ok(())
    };
    fresh(a, x, tl.params(), just_after(0.0))?;
    let mut t = 0.0;
    let mut events = 0u64;
    let mut horizon = t_end / 100.0;
    while t < t_end {
        let brk = tl.next();
        let hi = (t + horizon).min(brk).min(t_end);
        // The bound over [t, hi] with the state fixed, and a₀ at t.
        let params = tl.params();
        let mut bound = 0.0;
        let mut now = 0.0;
        for (j, aj) in a.iter_mut().enumerate().take(m) {
            if smooth.contains(&(j as u32)) {
                *aj = checked(k, j, k.propensity_at(j, x, params, t), t)?;
                let v = k.interval_propensity(j, x, params, Interval::new(t, hi));
                bound += if v.hi >= 0.0 { v.hi } else { f64::INFINITY };
            } else {
                bound += *aj;
            }
            now += *aj;
        }
        if !bound.is_finite() {
            if hi - t < 1e-12 * t_end.max(1.0) {
                return Err(Error::usage(format!(
                    "the time-varying propensities have no finite bound near t = {} s \
                     (a law that grows without limit, or divides by zero)",
                    round_trip(t)
                )));
            }
            horizon = (hi - t) / 8.0;
            continue;
        }
        let bound = bound * (1.0 + 1e-9);
        if bound > 1.5 * now && hi - t > 1e-9 * t_end {
            horizon = (hi - t) / 2.0;
        } else if bound < 1.1 * now {
            horizon = (horizon * 2.0).min(t_end);
        }
        let mut candidate = t;
        let mut fired = None;
        if bound > 0.0 {
            loop {
                candidate += super::rng::exp1(rng) / bound;
                if candidate >= hi {
                    break;
                }
                for &j in smooth {
                    let j = j as usize;
                    a[j] = checked(k, j, k.propensity_at(j, x, params, candidate), candidate)?;
                }
                let target = uniform(rng) * bound;
                let mut sum = 0.0;
                for (j, &v) in a.iter().enumerate() {
                    sum += v;
                    if sum > target && v > 0.0 {
                        fired = Some(j);
                        break;
                    }
                }
                if fired.is_some() {
                    break;
                }
            }
        }
        let Some(j) = fired else {
            t = hi;
            if hi == brk {
                if t >= obs.due() {
                    obs.reach(t, &x[..n]);
                }
                tl.breakpoint(
                    t,
                    &mut Counts {
                        x: &mut x[..n],
                        obs: &mut *obs,
                    },
                )?;
                fresh(a, x, tl.params(), just_after(t))?;
            }
            continue;
        };
        t = candidate;
        if t >= obs.due() {
            obs.reach(t, &x[..n]);
        }
        obs.fire(t, j, 1);
        for &(i, d) in k.change(j) {
            let v = &mut x[i as usize];
            obs.moved(t, i as usize, *v, d);
            *v += d;
            if *v > MAX_COUNT {
                return Err(k.overflow(i as usize, j, t));
            }
        }
        events += 1;
        let mut bad = Ok(());
        updates(k, j, |d| {
            if bad.is_ok() {
                match checked(k, d, k.propensity_at(d, x, tl.params(), t), t) {
                    Ok(v) => a[d] = v,
                    Err(e) => bad = Err(e),
                }
            }
        });
        bad?;
        if tl.changed(t, |i| x[i] as f64) {
            let c = tl.settle(
                t,
                &mut Counts {
                    x: &mut x[..n],
                    obs: &mut *obs,
                },
            )?;
            if c.any() {
                fresh(a, x, tl.params(), t)?;
            }
        }
    }
    obs.finish(t_end, &x[..n]);
    Ok(RunSummary {
        events,
        absorbed_at: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::compiled::Updates;
    use crate::kernel::rng::replicate_rng;
    use crate::network::{load_source, Overrides};
    use rand::RngExt;

    /// Fires random channels of positive propensity through the small-network view and, after
    /// each, compares every kept propensity with a fresh evaluation of its rate law
    /// (docs/references.md §1, the combinatorial forms \[M\]); the kept values come from offsets
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
            match d.change_width {
                ..=2 => check_dense::<ORDER, 2>(&k, d),
                3 => check_dense::<ORDER, 3>(&k, d),
                _ => check_dense::<ORDER, 4>(&k, d),
            }
        }
    }

    /// The dense form of a network, its change rows `CW` wide.
    fn check_dense<const ORDER: usize, const CW: usize>(k: &CompiledKernel, d: &DenseTables) {
        check_kept(
            k,
            Dense::<ORDER, CW> {
                k,
                d,
                a: [0.0; LANES],
            },
        );
    }

    fn check_kept<C: Channels>(k: &CompiledKernel, mut ch: C) {
        let mut x = k.state_buffer(&k.x0);
        ch.init(&x, &[], 0.0).unwrap();
        let mut rng = replicate_rng(3, 0);
        for _ in 0..2000 {
            let a0 = ch.total();
            assert!(a0 > 0.0, "the test network must not absorb");
            // a₀ against the sum of fresh propensities: any order of summing m terms errs
            // by at most (m − 1)·ε·Σ|a| (Higham 2002, "Accuracy and Stability of Numerical
            // Algorithms", §4.2 [M]); the flat forms sum left to right and agree to the bit.
            let fresh = (0..k.reactions()).fold(-0.0, |s, d| s + k.propensity(d, &x));
            let bound = k.reactions() as f64 * f64::EPSILON * fresh;
            assert!((a0 - fresh).abs() <= bound, "a0 {a0} against {fresh}");
            let target = rng.random::<f64>() * a0;
            let j = ch.select(target, a0, &mut rng).unwrap();
            assert!(ch.get(j) > 0.0);
            assert!(!ch.fire(j, &mut x, 0.0, &mut (), &[]));
            for d in 0..k.reactions() {
                assert_eq!(ch.get(d), k.propensity(d, &x), "channel {d} after {j}");
            }
        }
    }

    /// The exact-propensity test through the large-network views: the sum tree and
    /// composition–rejection, with updates by reaction and by species.
    fn kept_equal_fresh_large(src: &str, by_species: bool) {
        let net = load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap();
        let k = CompiledKernel::new(&net).unwrap();
        assert_eq!(
            matches!(k.updates(), Updates::BySpecies { .. }),
            by_species,
            "updates by species"
        );
        let mut tree = SumTree::new(&vec![0.0; k.reactions()]);
        check_kept(
            &k,
            Tree {
                k: &k,
                tree: &mut tree,
            },
        );
        let mut state = RejectionState::new(&k);
        assert!(state.events.is_some() == matches!(k.updates(), Updates::ByReaction(_)));
        check_kept(
            &k,
            Groups {
                k: &k,
                groups: &mut state.groups,
                kept: &mut state.kept,
                events: state.events.as_ref(),
            },
        );
    }

    /// A network of `m` steps from a fixed sequence: conversions, binding, dimerisation,
    /// third-order steps, synthesis, degradation and a law, over m/3 species.
    fn random_large(m: usize) -> String {
        let n = m / 3;
        let mut s = 17u64;
        let mut next = |k: usize| {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((s >> 33) as usize) % k
        };
        let mut src = String::new();
        for i in 0..n {
            src.push_str(&format!("species X{i} = {}\n", 20 + next(200)));
        }
        for j in 0..m {
            let (a, b, c) = (next(n), next(n), next(n));
            src.push_str(&match next(7) {
                0 | 1 => format!("step r{j} X{a} -> X{b} @ 0.{}\n", 1 + next(9)),
                2 if a != b => format!("step r{j} X{a} + X{b} -> X{c} @ 0.001\n"),
                3 => format!("step r{j} 2 X{a} -> X{b} @ 0.002\n"),
                4 if a != b => format!("step r{j} 2 X{a} + X{b} -> 3 X{c} @ 0.00001\n"),
                5 => format!("step r{j} 0 -> X{a} @ 3\n"),
                _ => format!("step r{j} X{a} -> 0 @ law 0.5 * X{a} / (1 + 0.01 * X{b})\n"),
            });
        }
        src
    }

    #[test]
    fn large_views_keep_exact_propensities() {
        kept_equal_fresh_large(&random_large(300), false);
    }

    #[test]
    fn updates_by_species_keep_exact_propensities() {
        // 100 steps A -> B_i and their way back: every step changes A, read by 100 steps.
        let mut src = String::from("species A = 500\n");
        for i in 0..100 {
            src.push_str(&format!(
                "species B{i} = 5\nstep s{i} A -> B{i} @ 0.01\nstep t{i} B{i} -> A @ 1\n"
            ));
        }
        kept_equal_fresh_large(&src, true);
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
