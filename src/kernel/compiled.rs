//! The network in the flat form the event loop reads, built once per network.
//!
//! - Mass-action propensities become a product of at most three falling factors (a [`FlatRate`] of
//!   24 bytes with `u32` indices, its number of factors matched once per evaluation); `law`
//!   propensities stay in a side table as [`Network::propensities`] compiles them.
//! - State changes and the dependency graph are rows of flat arrays (an offset array and a value
//!   array).
//! - The state buffer holds one count per species and then a slot that always holds 1.
//! - A small network (fewer than [`SMALL_BELOW`] reactions) also gets [`SmallTables`]: rows of
//!   one fixed width, padded with changes of 0 to the constant slot and with an idle channel
//!   whose propensity is always 0, found by arithmetic on the channel index, whose propensity
//!   updates carry their [`FlatRate`] inline, so that an event reads no offset array and no second
//!   table, and its loops have the same trip count every time. Up to three mass-action
//!   reactions there is a [`DenseTables`] form as well.

use super::timeline::Inputs;
use crate::error::{Error, Result};
use crate::network::mass_action::{factorial, falling};
use crate::network::{Kinetics, Network, Propensity, TimeUse, MAX_COUNT};

/// Networks with fewer reactions than this get padded rows (and linear selection).
pub const SMALL_BELOW: usize = 32;

/// [`FlatRate::factors`] of a regulated rate law.
pub const LAW: u8 = u8::MAX;

/// A propensity in flat form (molecules per second).
///
/// Mass action, a = c·Π C(xᵢ, νᵢ) (Gillespie 1976, J. Comput. Phys. 22:403 \[verified\]; the
/// forms c·x, c·x₁x₂, c·x(x−1)/2, c·x(x−1)(x−2)/6 \[M\], docs/references.md §1), is written as
///
/// a = c′·(x\[i₀\] − o₀)·(x\[i₁\] − o₁)·(x\[i₂\] − o₂)   (the first `factors` of them),
///
/// with c′ = c/Π νᵢ! and one factor x − k (k = 0 … ν−1) per reactant molecule: A + B gives
/// x_A·x_B, 2A gives x_A(x_A − 1), 3A gives x_A(x_A − 1)(x_A − 2). Unused factors point at the
/// slot that holds 1, and a clamped reactant's C(x, ν) is folded into c′ (its count never
/// changes). With x < ν one factor is 0, so the product is 0 (or −0), exactly as C(x, ν) = 0.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FlatRate {
    /// c′ (unused for a law).
    pub c: f64,
    /// Species read by the three factors; for a law, `i[0]` is its entry in the law table.
    pub i: [u32; 3],
    /// Offsets o of the three factors.
    pub o: [u8; 3],
    /// Number of factors that read a species (the rest read the slot 1), or [`LAW`].
    pub factors: u8,
}

impl FlatRate {
    /// The channel that never fires (reads the constant slot `one`, constant 0).
    fn idle(one: u32) -> FlatRate {
        FlatRate {
            c: 0.0,
            i: [one; 3],
            o: [0; 3],
            factors: 0,
        }
    }
}

/// Rows of a flat table: row j is `values[start[j]..start[j+1]]`.
#[derive(Clone, Debug, PartialEq)]
pub struct Rows<T> {
    start: Vec<u32>,
    values: Vec<T>,
}

impl<T: Copy> Rows<T> {
    fn new(rows: &[Vec<T>]) -> Result<Rows<T>> {
        let mut start = vec![0u32];
        let mut values = Vec::new();
        for r in rows {
            values.extend_from_slice(r);
            let end = u32::try_from(values.len())
                .map_err(|_| Error::usage("the network is too large for the kernel"))?;
            start.push(end);
        }
        Ok(Rows { start, values })
    }

    /// Row j.
    #[inline(always)]
    pub fn row(&self, j: usize) -> &[T] {
        &self.values[self.start[j] as usize..self.start[j + 1] as usize]
    }

    /// Row j without bounds checks.
    ///
    /// # Safety
    ///
    /// `j + 1 < start.len()`. `start` is non-decreasing and ends at `values.len()` by
    /// construction.
    #[inline(always)]
    pub(crate) unsafe fn row_unchecked(&self, j: usize) -> &[T] {
        debug_assert!(j + 1 < self.start.len());
        // SAFETY: see above.
        unsafe {
            let s = *self.start.get_unchecked(j) as usize;
            let e = *self.start.get_unchecked(j + 1) as usize;
            self.values.get_unchecked(s..e)
        }
    }
}

/// The dependency graph is kept as one row of dependents per reaction when that is at most
/// this many entries per species, reaction and state change on average; beyond, by species.
pub const WALK_PER_ENTRY: usize = 16;

/// Which propensities an event recomputes (the dependency graph of Gibson & Bruck 2000, J.
/// Phys. Chem. A 104:1876 \[verified\]).
#[derive(Clone, Debug, PartialEq)]
pub enum Updates {
    /// Row j: the reactions whose propensity may change when j fires, each once.
    ByReaction(Rows<u32>),
    /// `readers` row i: the reactions whose propensity reads species i; `changed` row j: the
    /// species reaction j changes. An event recomputes the readers of the species it changes
    /// (a reaction that reads two of them twice). Used where the graph by reaction would be
    /// far larger than the network (many reactions that change and read one species), so that
    /// memory stays linear.
    BySpecies {
        readers: Rows<u32>,
        changed: Rows<u32>,
    },
}

impl Updates {
    /// The rows an event of reaction `j` walks, and the keys of those rows in it: (the table
    /// by reaction, \[j\]) or (readers, the species j changes).
    ///
    /// # Safety
    ///
    /// `j` is below the number of reactions.
    #[inline(always)]
    pub(crate) unsafe fn walk<'a>(&'a self, j: &'a u32) -> (&'a Rows<u32>, &'a [u32]) {
        match self {
            Updates::ByReaction(rows) => (rows, std::slice::from_ref(j)),
            // SAFETY: the caller's contract; `changed` has one row per reaction.
            Updates::BySpecies { readers, changed } => {
                (readers, unsafe { changed.row_unchecked(*j as usize) })
            }
        }
    }
}

/// A network compiled for the kernels: flat arrays only.
#[derive(Clone, Debug)]
pub struct CompiledKernel {
    /// Number of species.
    pub species: usize,
    /// Initial counts.
    pub x0: Vec<i64>,
    /// One rate per reaction, then the idle channel.
    rates: Vec<FlatRate>,
    laws: Vec<Propensity>,
    /// Net change of each reaction: (species, change) for non-clamped species.
    change: Rows<(u32, i64)>,
    /// Which propensities an event recomputes.
    updates: Updates,
    small: Option<SmallTables>,
    clamped: Vec<bool>,
    /// Doses, events and the edges of piecewise-constant laws.
    inputs: Inputs,
    /// How the propensities depend on time.
    time_use: TimeUse,
    /// Channels whose propensity depends smoothly on time.
    smooth: Vec<u32>,
    /// Why the network's counts cannot be simulated, if they cannot.
    refusal: Option<String>,
    /// Params that events change.
    varying: Vec<usize>,
    /// Where messages point.
    file: String,
    labels: Vec<String>,
    reaction_at: Vec<(u32, u32)>,
    species_names: Vec<String>,
    species_at: Vec<(u32, u32)>,
}

impl CompiledKernel {
    /// Builds the flat form of `net`.
    pub fn new(net: &Network) -> Result<CompiledKernel> {
        let n = net.species.len();
        let m = net.reactions.len();
        if n >= u32::MAX as usize || m >= u32::MAX as usize {
            return Err(Error::usage("the network is too large for the kernel"));
        }
        let one = n as u32;
        let mut rates = Vec::with_capacity(m + 1);
        let mut laws = Vec::new();
        for (r, p) in net.reactions.iter().zip(net.propensities()) {
            let fixed = p.is_fixed_mass_action();
            rates.push(match r.kinetics {
                Kinetics::MassAction { c, .. } if fixed => mass_action(net, r, c, one)?,
                _ => {
                    laws.push(p);
                    FlatRate {
                        c: 0.0,
                        i: [(laws.len() - 1) as u32, one, one],
                        o: [0; 3],
                        factors: LAW,
                    }
                }
            });
        }
        rates.push(FlatRate::idle(one));
        let small = m < SMALL_BELOW;
        let changes: Vec<Vec<(u32, i64)>> = net
            .reactions
            .iter()
            .map(|r| r.change.iter().map(|&(i, d)| (i as u32, d)).collect())
            .collect();
        let graph = &net.dependents;
        if graph.reactions() != m {
            return Err(Error::Internal(
                "dependency graph does not match the reactions".into(),
            ));
        }
        let change = Rows::new(&changes)?;
        let by_reaction =
            small || graph.walk_size() <= WALK_PER_ENTRY * (n + m + change.values.len());
        let (updates, small) = if by_reaction {
            let deps: Vec<Vec<u32>> = (0..m)
                .map(|j| graph.of(j).into_iter().map(|k| k as u32).collect())
                .collect();
            let small = match small {
                true => Some(SmallTables::new(&rates, &change, &deps, one)?),
                false => None,
            };
            (Updates::ByReaction(Rows::new(&deps)?), small)
        } else {
            let readers: Vec<Vec<u32>> = (0..n)
                .map(|i| graph.readers(i).iter().map(|&k| k as u32).collect())
                .collect();
            let changed: Vec<Vec<u32>> = (0..m)
                .map(|j| graph.changed(j).iter().map(|&i| i as u32).collect())
                .collect();
            let updates = Updates::BySpecies {
                readers: Rows::new(&readers)?,
                changed: Rows::new(&changed)?,
            };
            (updates, None)
        };
        Ok(CompiledKernel {
            species: n,
            x0: net.initial_state(),
            rates,
            laws,
            change,
            updates,
            small,
            clamped: net.species.iter().map(|s| s.clamped).collect(),
            inputs: Inputs::new(net),
            time_use: net.time_use(),
            smooth: (0..m)
                .filter(|&j| net.reactions[j].time_use() == TimeUse::Smooth)
                .map(|j| j as u32)
                .collect(),
            refusal: net.amount.stochastic_refusal.clone(),
            varying: (0..net.params.len())
                .filter(|&p| net.params[p].varies)
                .collect(),
            file: net.file.clone(),
            labels: net.reactions.iter().map(|r| r.label.clone()).collect(),
            reaction_at: net
                .reactions
                .iter()
                .map(|r| (r.span.line, r.span.col))
                .collect(),
            species_names: net.species.iter().map(|s| s.name.clone()).collect(),
            species_at: net
                .species
                .iter()
                .map(|s| (s.span.line, s.span.col))
                .collect(),
        })
    }

    /// Number of reactions (channels), not counting the idle channel.
    pub fn reactions(&self) -> usize {
        self.rates.len() - 1
    }

    /// Whether the network has [`SmallTables`] (fewer than [`SMALL_BELOW`] reactions).
    pub fn is_small(&self) -> bool {
        self.small.is_some()
    }

    /// The fixed-width tables of a small network (fewer than [`SMALL_BELOW`] reactions).
    pub fn small(&self) -> Option<&SmallTables> {
        self.small.as_ref()
    }

    /// Propensity of reaction `j` (molecules per second; `j == reactions()` is the idle channel)
    /// at state `x`, which holds one count per species followed by the constant slot 1 (see
    /// [`CompiledKernel::state_buffer`]), at t = 0 with the params' initial values. A law's
    /// value is returned as it is, even if negative.
    #[inline(always)]
    pub fn propensity(&self, j: usize, x: &[i64]) -> f64 {
        self.propensity_at(j, x, self.inputs.initial_params(), 0.0)
    }

    /// As [`CompiledKernel::propensity`] with the run's param values and the clock at `t`.
    #[inline(always)]
    pub fn propensity_at(&self, j: usize, x: &[i64], params: &[f64], t: f64) -> f64 {
        let r = &self.rates[j];
        if r.factors == LAW {
            return self.laws[r.i[0] as usize].eval_at(x, params, t);
        }
        r.c * factor(x, r.i[0], r.o[0]) * factor(x, r.i[1], r.o[1]) * factor(x, r.i[2], r.o[2])
    }

    /// An interval enclosing the propensity of law channel `j` at state `x` over the times
    /// `time` (the direct method's thinning bound); `[0, 0]` for other channels.
    pub fn interval_propensity(
        &self,
        j: usize,
        x: &[i64],
        params: &[f64],
        time: crate::network::Interval,
    ) -> crate::network::Interval {
        let r = &self.rates[j];
        if r.factors != LAW {
            return crate::network::Interval::point(self.propensity_at(j, x, params, time.lo));
        }
        self.laws[r.i[0] as usize].eval_interval(x, params, time)
    }

    /// The doses, events and law edges runs act on.
    pub fn inputs(&self) -> &Inputs {
        &self.inputs
    }

    /// The params that events change.
    pub fn varying_params(&self) -> &[usize] {
        &self.varying
    }

    /// How the propensities depend on time.
    pub fn time_use(&self) -> TimeUse {
        self.time_use
    }

    /// The channels whose propensity varies smoothly with time.
    pub fn smooth_channels(&self) -> &[u32] {
        &self.smooth
    }

    /// Whether channel `j` is evaluated through the law table (a law, or a constant that
    /// follows a param).
    pub fn is_law(&self, j: usize) -> bool {
        self.rates[j].factors == LAW
    }

    /// An error if the network's counts cannot be simulated stochastically.
    pub fn check_simulable(&self) -> Result<()> {
        if let Some(why) = &self.refusal {
            return Err(Error::usage(format!("{}: {why}", self.file)));
        }
        if let Some(e) = self.inputs.smooth_trigger() {
            return Err(Error::usage(format!(
                "{}:{}: the trigger of event `{}` varies smoothly with time, so it can turn \
                 true between two reaction events; stochastic runs support triggers on the \
                 state and on comparisons of `time` with fixed times (use `simulate --method \
                 ode`)",
                self.file, e.span.line, e.label
            )));
        }
        Ok(())
    }

    /// As [`CompiledKernel::propensity`] without bounds checks, except that a law value that
    /// is negative, infinite or NaN comes back as NaN (so that the event loop sees it in a₀).
    ///
    /// # Safety
    ///
    /// `j ≤ reactions()` and `x.len() == species + 1`. Construction guarantees that every index
    /// stored in a [`FlatRate`] is at most `species` (the constant slot) and every law index is in
    /// the law table. `params` holds every param of the network.
    #[inline(always)]
    pub(crate) unsafe fn propensity_unchecked(
        &self,
        j: usize,
        x: &[i64],
        params: &[f64],
        t: f64,
    ) -> f64 {
        debug_assert!(j < self.rates.len() && x.len() == self.species + 1);
        // SAFETY: j ≤ reactions() by the caller's contract; the rate is this kernel's.
        unsafe { self.rate_unchecked(self.rates.get_unchecked(j), x, params, t) }
    }

    /// The flat rate of reaction `j` (`j == reactions()` is the idle channel).
    pub fn rate(&self, j: usize) -> FlatRate {
        self.rates[j]
    }

    /// The value of `r`, one of this kernel's rates (a copy kept elsewhere), at `x`, as
    /// [`CompiledKernel::propensity_unchecked`] gives it.
    ///
    /// # Safety
    ///
    /// `r` is a rate of this kernel and `x.len() == species + 1`.
    #[inline(always)]
    pub(crate) unsafe fn rate_unchecked(
        &self,
        r: &FlatRate,
        x: &[i64],
        params: &[f64],
        t: f64,
    ) -> f64 {
        debug_assert!(x.len() == self.species + 1);
        if r.factors == LAW {
            return self.law_unchecked(r.i[0] as usize, x, params, t);
        }
        // SAFETY: r.i[k] ≤ species < x.len() (construction and the caller's contract).
        let f = |k: usize| unsafe { (*x.get_unchecked(r.i[k] as usize) - r.o[k] as i64) as f64 };
        // Unused factors read the slot that holds 1 with offset 0, so they multiply by 1.0
        // exactly: the same value as a product of only the used factors, without a branch on
        // their number (which mixed networks mispredict).
        r.c * f(0) * f(1) * f(2)
    }

    /// A law's value with the run's `params` at time `t`, NaN if it is negative, infinite or
    /// NaN.
    #[cold]
    fn law_unchecked(&self, law: usize, x: &[i64], params: &[f64], t: f64) -> f64 {
        let v = self.laws[law].eval_at(x, params, t);
        if (0.0..f64::INFINITY).contains(&v) {
            v
        } else {
            f64::NAN
        }
    }

    /// A state buffer for the propensities: `x0` (one count per species), then the slot 1.
    pub fn state_buffer(&self, x0: &[i64]) -> Vec<i64> {
        let mut x = Vec::with_capacity(x0.len() + 1);
        x.extend_from_slice(x0);
        x.push(1);
        x
    }

    /// Whether species `i` is clamped (its count is folded into the constants).
    pub fn is_clamped(&self, i: usize) -> bool {
        self.clamped[i]
    }

    /// (species, change per firing) of reaction `j`.
    #[inline(always)]
    pub fn change(&self, j: usize) -> &[(u32, i64)] {
        self.change.row(j)
    }

    /// [`CompiledKernel::change`] without bounds checks.
    ///
    /// # Safety
    ///
    /// `j < reactions()`.
    #[inline(always)]
    pub(crate) unsafe fn change_unchecked(&self, j: usize) -> &[(u32, i64)] {
        // SAFETY: j < reactions() by the caller's contract; rows are valid by construction.
        unsafe { self.change.row_unchecked(j) }
    }

    /// Which propensities an event recomputes.
    pub fn updates(&self) -> &Updates {
        &self.updates
    }

    /// Label of reaction `j`.
    pub fn label(&self, j: usize) -> &str {
        &self.labels[j]
    }

    /// Name of species `i`.
    pub fn species_name(&self, i: usize) -> &str {
        &self.species_names[i]
    }

    /// The error for a propensity that is negative, infinite or NaN: names the step, where it
    /// is written, the value and the time.
    #[cold]
    pub fn bad_propensity(&self, j: usize, value: f64, t: f64) -> Error {
        let (line, col) = self.reaction_at[j];
        let why = if self.rates[j].factors == LAW {
            "check the law for a subtraction or division that can go below zero or blow up"
        } else {
            "its constant is too large for these counts"
        };
        Error::usage(format!(
            "{}:{line}:{col}: step `{}`: its propensity became {value} molecules/s at t = {} s; \
             a rate must be finite and not negative ({why})",
            self.file,
            self.labels[j],
            time(t)
        ))
    }

    /// The error for a count that would pass [`MAX_COUNT`].
    #[cold]
    pub fn overflow(&self, i: usize, j: usize, t: f64) -> Error {
        let (line, col) = self.species_at[i];
        Error::usage(format!(
            "{}:{line}:{col}: species `{}` would exceed the largest count copyloop holds \
             ({MAX_COUNT} molecules) when step `{}` fires at t = {} s; the network grows \
             without bound, or the run is far too long for it",
            self.file,
            self.species_names[i],
            self.labels[j],
            time(t)
        ))
    }
}

/// One propensity update of an event, read before the event's changes are applied:
/// a\[d\] = c′·Π (x\[iₖ\] − oₖ) over the first [`SmallTables::order`] factors, where x is the
/// state before the event and oₖ is the factor's offset less the event's change of species iₖ,
/// so the product is that of the state after it. Reading the state before the event keeps the
/// update from waiting on the store of the change.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Update {
    pub c: f64,
    pub o: [i64; 3],
    pub i: [u32; 3],
    /// The channel whose propensity this is (the idle channel in padding).
    pub d: u32,
}

/// The event tables of a small network, every row of one width w, the widest row of either
/// table (row j is `values[j·w .. (j+1)·w]`).
///
/// - `change`: as [`CompiledKernel::change`], padded with (constant slot, 0);
/// - `updates`: the mass-action dependents of j with their rates, padded with the idle
///   channel (constant 0);
/// - `law_dependents`: the dependents of j whose propensity is a `law` (rows of any length).
#[derive(Clone, Debug, PartialEq)]
pub struct SmallTables {
    order: usize,
    width: usize,
    change: Vec<(u32, i64)>,
    updates: Vec<Update>,
    law_dependents: Rows<u32>,
    has_laws: bool,
    dense: Option<DenseTables>,
}

/// Channels of a [`DenseTables`] network (the rest of the block of four are idle).
pub const DENSE_CHANNELS: usize = 3;

/// A network of at most [`DENSE_CHANNELS`] mass-action reactions, in a form where every event
/// recomputes all four propensities of the block (the last ones idle): a\[k\] = c_k·Π_f
/// (x[i_{k,f}] − o_{j,k,f}) after event j. The species a propensity reads depend on its
/// channel k only, not on the event, so the processor loads them before it knows which
/// channel fires; only the offsets (the rate's own, less the event's change, as in
/// [`Update`]) come from the event's row.
#[derive(Clone, Debug, PartialEq)]
pub struct DenseTables {
    /// c′ of each of the four channels.
    pub c: [f64; 4],
    /// Species read by the factors of each channel (the constant slot where unused).
    pub i: [[u32; 3]; 4],
    /// Row j holds the four channels' offsets after event j, as f64.
    pub offsets: Vec<[[f64; 3]; 4]>,
    /// Row j holds the state change of event j, padded to four with (constant slot, 0).
    pub change: Vec<[(u32, i64); 4]>,
    /// The widest row of `change` before padding (1 ..= 4): entries past it are padding in
    /// every row, so an event applies only this many.
    pub change_width: usize,
}

impl SmallTables {
    /// `rates` ends with the idle channel; `change` has one row per reaction.
    fn new(
        rates: &[FlatRate],
        change: &Rows<(u32, i64)>,
        deps: &[Vec<u32>],
        one: u32,
    ) -> Result<Self> {
        let m = deps.len();
        let is_law = |d: u32| rates[d as usize].factors == LAW;
        let mass: Vec<Vec<Update>> = deps
            .iter()
            .enumerate()
            .map(|(j, row)| {
                let delta = |i: u32| -> i64 {
                    change.row(j).iter().filter(|c| c.0 == i).map(|c| c.1).sum()
                };
                row.iter()
                    .filter(|&&d| !is_law(d))
                    .map(|&d| {
                        let r = rates[d as usize];
                        Update {
                            c: r.c,
                            o: [0, 1, 2].map(|f| i64::from(r.o[f]) - delta(r.i[f])),
                            i: r.i,
                            d,
                        }
                    })
                    .collect()
            })
            .collect();
        let changes: Vec<&[(u32, i64)]> = (0..m).map(|j| change.row(j)).collect();
        let width = changes
            .iter()
            .map(|r| r.len())
            .chain(mass.iter().map(Vec::len))
            .max()
            .unwrap_or(0)
            .max(1);
        let idle = Update {
            c: 0.0,
            o: [0; 3],
            i: [one; 3],
            d: m as u32,
        };
        let pad = |n: usize| width - n;
        let laws: Vec<Vec<u32>> = deps
            .iter()
            .map(|row| row.iter().copied().filter(|&d| is_law(d)).collect())
            .collect();
        Ok(SmallTables {
            order: rates
                .iter()
                .filter(|r| r.factors != LAW)
                .map(|r| r.factors as usize)
                .max()
                .unwrap_or(0)
                .max(1),
            width,
            change: changes
                .iter()
                .flat_map(|r| {
                    r.iter()
                        .copied()
                        .chain(std::iter::repeat_n((one, 0), pad(r.len())))
                })
                .collect(),
            updates: mass
                .iter()
                .flat_map(|r| {
                    r.iter()
                        .copied()
                        .chain(std::iter::repeat_n(idle, pad(r.len())))
                })
                .collect(),
            has_laws: laws.iter().any(|r| !r.is_empty()),
            law_dependents: Rows::new(&laws)?,
            dense: dense(rates, &changes, one),
        })
    }

    /// The dense form, for a network of at most [`DENSE_CHANNELS`] mass-action reactions.
    pub fn dense(&self) -> Option<&DenseTables> {
        self.dense.as_ref()
    }

    /// Largest number of falling factors of a mass-action rate (1 ..= 3; 1 when there is
    /// none, so that every update multiplies by at least one factor).
    pub fn order(&self) -> usize {
        self.order
    }

    /// The width of every row.
    pub fn width(&self) -> usize {
        self.width
    }

    /// Whether some propensity is a `law`.
    pub fn has_laws(&self) -> bool {
        self.has_laws
    }

    /// Row `j` of the state changes; `W` is the width if known when compiling, or 0.
    ///
    /// # Safety
    ///
    /// `j < reactions()`, and `W` is 0 or [`SmallTables::width`].
    #[inline(always)]
    pub(crate) unsafe fn change_unchecked<const W: usize>(&self, j: usize) -> &[(u32, i64)] {
        // SAFETY: as for `row`.
        unsafe { row::<W, _>(&self.change, self.width, j) }
    }

    /// Row `j` of the mass-action propensity updates; `W` as for
    /// [`SmallTables::change_unchecked`].
    ///
    /// # Safety
    ///
    /// As for [`SmallTables::change_unchecked`].
    #[inline(always)]
    pub(crate) unsafe fn updates_unchecked<const W: usize>(&self, j: usize) -> &[Update] {
        // SAFETY: as for `row`.
        unsafe { row::<W, _>(&self.updates, self.width, j) }
    }

    /// The dependents of `j` whose propensity is a `law`.
    #[inline(always)]
    pub fn law_dependents(&self, j: usize) -> &[u32] {
        self.law_dependents.row(j)
    }
}

/// The dense form of a network with at most [`DENSE_CHANNELS`] reactions, all mass action,
/// none changing more than four species; `rates` ends with the idle channel.
fn dense(rates: &[FlatRate], changes: &[&[(u32, i64)]], one: u32) -> Option<DenseTables> {
    let m = changes.len();
    if m > DENSE_CHANNELS || rates[..m].iter().any(|r| r.factors == LAW) {
        return None;
    }
    if changes.iter().any(|r| r.len() > 4) {
        return None;
    }
    let idle = FlatRate::idle(one);
    let rate = |k: usize| if k < m { rates[k] } else { idle };
    let delta = |j: usize, i: u32| -> i64 {
        changes
            .get(j)
            .map_or(0, |row| row.iter().filter(|c| c.0 == i).map(|c| c.1).sum())
    };
    let offset_row = |j: usize| -> [[f64; 3]; 4] {
        std::array::from_fn(|k| {
            let r = rate(k);
            std::array::from_fn(|f| (i64::from(r.o[f]) - delta(j, r.i[f])) as f64)
        })
    };
    let offsets: Vec<[[f64; 3]; 4]> = (0..m).map(offset_row).collect();
    let change = changes
        .iter()
        .map(|row| std::array::from_fn(|e| row.get(e).copied().unwrap_or((one, 0))))
        .collect();
    Some(DenseTables {
        c: std::array::from_fn(|k| rate(k).c),
        i: std::array::from_fn(|k| rate(k).i),
        offsets,
        change,
        change_width: changes.iter().map(|r| r.len()).max().unwrap_or(0).max(1),
    })
}

/// Row `j` of a table of rows `width` wide; `W` is that width when known at compile time
/// (the row is then a constant-length slice the compiler unrolls), or 0.
///
/// # Safety
///
/// The table has more than `j` rows, and `W` is 0 or `width`.
#[inline(always)]
unsafe fn row<const W: usize, T>(table: &[T], width: usize, j: usize) -> &[T] {
    debug_assert!(W == 0 || W == width);
    let w = if W == 0 { width } else { W };
    debug_assert!((j + 1) * w <= table.len());
    // SAFETY: the caller's contract.
    unsafe { table.get_unchecked(j * w..(j + 1) * w) }
}

/// A time for a message: four decimals, or four significant digits in scientific form.
fn time(t: f64) -> String {
    if t == 0.0 || (1e-3..1e6).contains(&t.abs()) {
        format!("{t:.4}")
    } else {
        format!("{t:.4e}")
    }
}

/// One falling factor x[i] − o as f64.
#[inline(always)]
fn factor(x: &[i64], i: u32, o: u8) -> f64 {
    (x[i as usize] - o as i64) as f64
}

/// The flat rate of a mass-action reaction with stochastic constant `c`.
fn mass_action(net: &Network, r: &crate::network::Reaction, c: f64, one: u32) -> Result<FlatRate> {
    let mut c = c;
    let mut factors = Vec::new();
    for &(i, nu) in &r.reactants {
        if net.species[i].clamped {
            c *= falling(net.species[i].initial, nu) / factorial(nu);
        } else {
            c /= factorial(nu);
            factors.extend((0..nu).map(|k| (i as u32, k as u8)));
        }
    }
    if factors.len() > 3 {
        return Err(Error::Internal(format!(
            "step `{}` has order above 3",
            r.label
        )));
    }
    let used = factors.len() as u8;
    // Keeps c′·x₁x₂x₃ finite for every count up to MAX_COUNT, so that a mass-action
    // propensity is never infinite and a₀ stays finite.
    let largest = c * (MAX_COUNT as f64).powi(used as i32);
    if largest.is_nan() || largest >= 1e290 {
        return Err(Error::usage(format!(
            "{}:{}:{}: step `{}`: the stochastic constant {c:e} is too large; propensities \
             would overflow",
            net.file, r.span.line, r.span.col, r.label
        )));
    }
    factors.resize(3, (one, 0));
    Ok(FlatRate {
        c,
        i: [factors[0].0, factors[1].0, factors[2].0],
        o: [factors[0].1, factors[1].1, factors[2].1],
        factors: used,
    })
}
