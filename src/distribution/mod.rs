//! Exact distributions at low copy number: the chemical master equation solved by finite state
//! projection (Munsky & Khammash 2006, "The finite state projection algorithm for the solution
//! of the chemical master equation", J. Chem. Phys. 124:044104 \[M\]).
//!
//! The master equation dP/dt = A·P is solved on a finite set J of states. The projected
//! solution is never above the true one, state by state, and the probability that has left J
//! by time t bounds the ℓ¹ distance between the two (the finite state projection theorem). J is
//! grown until that probability is below the tolerance, and every figure is reported with it.
//!
//! ```text
//! space.rs      states reachable from x₀ in a box; conservation laws remove dimensions
//! schedule.rs   breakpoints, doses and `when` resets: what the projection can follow exactly
//! generator.rs  A in compressed sparse rows (by destination), one sink per bound
//! transient.rs  uniformization on the time grid, with its exact series bound
//! stationary.rs closed classes, then a sparse LU solve of π·A = 0
//! summary.rs    marginals, mean, variance, Fano factor, p(0), mean reaction fluxes
//! ```
//!
//! Growth: each free, independent species has an upper bound; a transition crossing bound k
//! goes to sink k, so the leaked probability says which bounds to raise. After a solve whose
//! leak exceeds the tolerance, every bound whose sink holds more than tolerance/(2·d) (and at
//! least the one holding most) is raised, and the solve is repeated: the part of the bound
//! above the initial count grows by half, or by (t_end/t_fail)^(1/2d) (at most 3; d
//! coordinates) when a transient solve leaked too much already at t_fail, its first grid time
//! past the tolerance (where it stops early), so that the state count grows by about
//! √(t_end/t_fail) per round.
//! Past `max_states` states the request is refused with the count reached.
//!
//! Species that only accumulate (produced, read by no propensity, law or event, in no
//! conservation law, set by no dose or event: a product of an enzyme, a counter) would make
//! the projection unbounded, and nothing they do reaches the rest of the chain: they are left
//! out of the state space (space.rs). Their exact transient mean and variance follow from the
//! projected chain with its firing counts (transient.rs); their marginal law and p(0) are not
//! computed (null in JSON, empty marginals), and they have no stationary law: the stationary
//! report gives their exact mean accumulation rate Σ_j ν_j E[a_j(X)] instead.
//!
//! Time-dependent inputs (schedule.rs): between breakpoints the generator is constant and one
//! [`transient::Series`] runs across the interval (its end vector is one more weighted sum of
//! the same v_k); a dose is a map of states to states applied to that vector at its
//! breakpoint, inside the same projection, and the next interval starts from the result; a
//! triggered reset redirects the transitions into the states where its trigger holds. The
//! projection holds the states reachable by reactions in any interval and by the doses.
//!
//! Numerical modules produce no prose: results are typed and serialisable, errors are
//! [`FspError`].

pub mod compare;
pub mod generator;
pub mod schedule;
pub mod space;
pub mod stationary;
pub mod summary;
pub mod transient;

use crate::network::Network;
use generator::Generator;
use schedule::Forcing;
use schemars::JsonSchema;
use serde::ser::SerializeMap;
use serde::{Serialize, Serializer};
use space::{Projection, Reduction};
use summary::Columns;

/// Default bound on the projection's error (leaked probability).
pub const DEFAULT_TOLERANCE: f64 = 1e-6;

/// Approximate bytes a state costs during a transient solve (generator rows of a few
/// reactions, four probability vectors, coordinates, index table, count columns).
const BYTES_PER_STATE: u64 = 320;

/// The default state limit: a quarter of the memory available now, at `BYTES_PER_STATE` per
/// state, between 10⁵ and 10⁷.
pub fn default_max_states() -> usize {
    let available = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|m| {
            m.lines()
                .find(|l| l.starts_with("MemAvailable:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<u64>().ok())
        })
        .map_or(8 << 30, |kib| kib * 1024);
    (available / 4 / BYTES_PER_STATE).clamp(100_000, 10_000_000) as usize
}

/// Largest projection `noise` and `reconcile` solve for their exact columns, and the most
/// independent coordinates they try (the sparse LU's fill grows fast with the dimension); a
/// network beyond either gets no exact column, so those commands stay fast beside their
/// ensembles.
pub const EMBEDDED_MAX_STATES: usize = 50_000;
pub const EMBEDDED_MAX_DIMENSIONS: usize = 3;

/// The exact stationary law for the columns beside the ensembles of `noise` and `reconcile`:
/// default tolerance, at most `max_states` states (their default [`EMBEDDED_MAX_STATES`]) in at
/// most [`EMBEDDED_MAX_DIMENSIONS`] coordinates.
pub fn stationary_beside(
    net: &Network,
    max_states: usize,
    threads: Option<usize>,
) -> Result<Stationary, FspError> {
    let dims = Reduction::from_start(net, net.initial_state(), &[], &net.outputs()).dim();
    if dims > EMBEDDED_MAX_DIMENSIONS {
        return Err(FspError::TooManyDimensions {
            dims,
            max: EMBEDDED_MAX_DIMENSIONS,
        });
    }
    let opts = Options {
        max_states,
        threads,
        ..Options::default()
    };
    stationary(net, &opts)
}

/// What a projection is asked for.
#[derive(Clone, Debug)]
pub struct Options {
    /// Bound on the leaked probability (transient) or the boundary probability (stationary).
    pub tolerance: f64,
    pub max_states: usize,
    /// Threads for the sparse products (None: the current pool).
    pub threads: Option<usize>,
    /// Species to report (indices); None: all.
    pub species: Option<Vec<usize>>,
    /// First bounds of the independent coordinates, in [`ProjectionInfo::bounds`] order (None:
    /// twice the initial counts, at least the initial count + 10); growth starts from them.
    pub bounds: Option<Vec<u32>>,
}

impl Default for Options {
    fn default() -> Options {
        Options {
            tolerance: DEFAULT_TOLERANCE,
            max_states: default_max_states(),
            threads: None,
            species: None,
            bounds: None,
        }
    }
}

/// Why a projection could not be solved.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FspError {
    /// The projection needed more states than allowed.
    #[error("the projection needs more than {max} states (it reached {found}{})", leak_text(*.leaked))]
    TooManyStates {
        found: usize,
        max: usize,
        /// Leaked (or boundary) probability of the last projection solved, if any.
        leaked: Option<f64>,
        stationary: bool,
    },
    /// More independent coordinates than an exact column beside an ensemble tries.
    #[error("the network has {dims} independent coordinates; the exact columns are solved for at most {max}")]
    TooManyDimensions { dims: usize, max: usize },
    /// The projected chain has more than one closed class away from its boundary.
    #[error("the chain has {count} closed classes: its long-run law depends on the start")]
    ClosedClasses { count: usize },
    /// A rate law gave a negative or non-finite propensity, or a firing would make a count negative.
    #[error("reaction {reaction} has propensity {} at {state}", crate::numbers::round_trip(*.value))]
    BadPropensity {
        reaction: String,
        state: String,
        value: f64,
    },
    /// The network is driven in time (doses, events, time in a law) or its amounts cannot be
    /// counted: its chain is not the autonomous one the projection solves.
    #[error("{0}")]
    NotAutonomous(String),
    /// Bad options.
    #[error("{0}")]
    Options(String),
    /// The linear algebra failed.
    #[error("{0}")]
    Solver(String),
}

fn leak_text(leaked: Option<f64>) -> String {
    leaked.map_or(String::new(), |l| {
        format!("; the last projection solved still lost probability {l:.3e}")
    })
}

impl From<FspError> for crate::Error {
    fn from(e: FspError) -> crate::Error {
        match e {
            FspError::Solver(m) => crate::Error::Internal(m),
            FspError::TooManyStates { stationary, .. } => {
                let why = if stationary {
                    " If the probability keeps moving outward as the projection grows, the process has no stationary law."
                } else {
                    ""
                };
                crate::Error::usage(format!(
                    "{e}.{why} Raise --max-states, loosen --tolerance, or estimate with `copyloop simulate` (an ensemble has no state limit)."
                ))
            }
            other => crate::Error::usage(other.to_string()),
        }
    }
}

/// A list of named values that serialises as a JSON object in its own order.
#[derive(Clone, Debug, PartialEq)]
pub struct Named<T>(pub Vec<(String, T)>);

impl<T: Serialize> Serialize for Named<T> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut m = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            m.serialize_entry(k, v)?;
        }
        m.end()
    }
}

/// A JSON object of `T` under free keys (the names).
impl<T: JsonSchema> JsonSchema for Named<T> {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        format!("Named_{}", T::schema_name()).into()
    }

    fn json_schema(generator: &mut schemars::SchemaGenerator) -> schemars::Schema {
        schemars::json_schema!({
            "type": "object",
            "additionalProperties": generator.subschema_for::<T>(),
        })
    }
}

impl<T> Named<T> {
    pub fn get(&self, name: &str) -> Option<&T> {
        self.0.iter().find(|(k, _)| k == name).map(|(_, v)| v)
    }
}

/// One species' law on the time grid.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct SpeciesLaw {
    pub clamped: bool,
    /// Left out of the state space because it only accumulates: mean, variance and Fano
    /// factor are exact, p(0) is NaN (null in JSON) and the marginals are empty.
    pub accumulates: bool,
    pub mean: Vec<f64>,
    pub variance: Vec<f64>,
    pub fano: Vec<f64>,
    pub p_zero: Vec<f64>,
    /// [p(0), p(1), …] per time.
    pub marginal: Vec<Vec<f64>>,
}

/// The bound of one independent coordinate in the final projection.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct Bound {
    pub species: String,
    pub max_count: u32,
    /// Set by a conservation law: the coordinate cannot exceed it.
    pub capped: bool,
}

/// The size and cost of the final projection.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct ProjectionInfo {
    pub states: usize,
    /// Independent coordinates (species left once conservation laws are used).
    pub dimensions: usize,
    pub bounds: Vec<Bound>,
    pub nonzeros: usize,
    pub generator_bytes: usize,
    /// Projections solved while growing, the final one included.
    pub rounds: usize,
}

/// The transient solution on a time grid.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct Transient {
    /// Bound on the ℓ¹ error of the distribution at every reported time (the leaked probability
    /// at the last time, which is the largest).
    pub truncation_error: f64,
    pub truncation_error_by_time: Vec<f64>,
    /// The part of the bound from cutting the uniformization series.
    pub series_error: f64,
    pub states: usize,
    pub projection: ProjectionInfo,
    /// Uniformization rate q (per second) and the number of sparse products.
    pub uniformization_rate: f64,
    pub products: u64,
    pub times: Vec<f64>,
    pub species: Named<SpeciesLaw>,
}

/// One species' stationary law.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct SpeciesStationary {
    pub clamped: bool,
    /// It only accumulates: it has no stationary law (mean, variance, Fano, p(0) NaN, null in
    /// JSON; empty marginal), and grows at `accumulation_per_s`.
    pub accumulates: bool,
    /// Exact mean accumulation rate Σ_j ν_j E[a_j(X)] (molecules per second) of an
    /// accumulating species; None otherwise.
    pub accumulation_per_s: Option<f64>,
    pub mean: f64,
    pub variance: f64,
    pub fano: f64,
    pub p_zero: f64,
    pub marginal: Vec<f64>,
}

/// The stationary law of the projected chain.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct Stationary {
    /// Stationary probability of the states with a transition out of the projection.
    pub truncation_error: f64,
    pub states: usize,
    pub projection: ProjectionInfo,
    /// States of the closed class the law lives on (the rest are transient).
    pub class_states: usize,
    /// ‖A·π‖₁ of the solved law.
    pub residual: f64,
    pub species: Named<SpeciesStationary>,
    /// Mean flux E[a_j(X)] of every reaction, events per second.
    pub fluxes: Named<f64>,
}

/// Everything fixed for one network: coordinates, propensities, the species reported.
struct Setup {
    first_bounds: Option<Vec<u32>>,
    red: Reduction,
    props: Vec<crate::network::Propensity>,
    /// Species reported, in the order asked.
    reported: Vec<usize>,
    /// The reported species that are coordinates or follow from them (marginals computed).
    species: Vec<usize>,
    /// The reported species left out of the state space, counted in a transient solve.
    counted: Vec<usize>,
    /// `increments[i][j]`: the change of `counted[i]` when reaction j fires.
    increments: Vec<Vec<f64>>,
    /// Reactions whose self-transitions are kept (they change a counted species).
    loops: Vec<bool>,
    n_species: usize,
    forcing: Forcing,
}

impl Setup {
    /// `t_end`: the last time of a transient solve (None: the stationary law, which refuses a
    /// network driven in time).
    fn new(net: &Network, opts: &Options, t_end: Option<f64>) -> Result<Setup, FspError> {
        if !(opts.tolerance > 0.0 && opts.tolerance < 1.0) {
            return Err(FspError::Options(format!(
                "the tolerance must lie in (0, 1), got {}",
                opts.tolerance
            )));
        }
        if opts.max_states == 0 || opts.max_states > (u32::MAX / 2) as usize {
            return Err(FspError::Options(format!(
                "the state limit must lie in 1..={}, got {}",
                u32::MAX / 2,
                opts.max_states
            )));
        }
        if let Some(why) = &net.amount.stochastic_refusal {
            return Err(FspError::NotAutonomous(format!("{}: {why}", net.file)));
        }
        let forcing = match (net.time_forcing(), t_end) {
            (None, _) => Forcing::none(net),
            (Some(what), None) => {
                return Err(FspError::NotAutonomous(format!(
                    "{}: {what} drives the network in time, so it has no stationary law; ask for the transient law at chosen times instead",
                    net.file
                )))
            }
            (Some(_), Some(t)) => Forcing::new(net, t)?,
        };
        let mut reported = opts
            .species
            .clone()
            .unwrap_or_else(|| (0..net.species.len()).collect());
        let mut seen = vec![false; net.species.len()];
        reported.retain(|&i| !std::mem::replace(&mut seen[i], true));
        let touched = Forcing::touched(net);
        let outputs: Vec<usize> = net
            .outputs()
            .into_iter()
            .filter(|i| !touched.contains(i))
            .collect();
        let red = Reduction::from_start(net, forcing.start(net)?, &touched, &outputs);
        let (counted, species): (Vec<usize>, Vec<usize>) =
            reported.iter().partition(|i| outputs.contains(i));
        let counted = if t_end.is_some() { counted } else { Vec::new() };
        let increments: Vec<Vec<f64>> = counted
            .iter()
            .map(|&i| {
                net.reactions
                    .iter()
                    .map(|r| {
                        r.change
                            .iter()
                            .filter(|c| c.0 == i)
                            .map(|c| c.1 as f64)
                            .sum()
                    })
                    .collect()
            })
            .collect();
        let loops = (0..net.reactions.len())
            .map(|j| increments.iter().any(|inc| inc[j] != 0.0))
            .collect();
        if let Some(b) = &opts.bounds {
            if b.len() != red.dim() {
                return Err(FspError::Options(format!(
                    "{} bounds given for {} independent coordinates",
                    b.len(),
                    red.dim()
                )));
            }
        }
        Ok(Setup {
            first_bounds: opts.bounds.clone(),
            red,
            props: net.propensities(),
            reported,
            species,
            counted,
            increments,
            loops,
            n_species: net.species.len(),
            forcing,
        })
    }

    /// First bounds: twice the initial count, at least the initial count + 10, never past a
    /// conservation cap.
    fn initial_bounds(&self) -> Vec<u32> {
        if let Some(b) = &self.first_bounds {
            return b
                .iter()
                .zip(&self.red.caps)
                .map(|(&b, cap)| cap.map_or(b as u64, |c| (b as u64).min(c)) as u32)
                .collect();
        }
        self.red
            .initial_coords()
            .iter()
            .zip(&self.red.caps)
            .map(|(&x, cap)| {
                let b = (x as u64 * 2).max(x as u64 + 10);
                cap.map_or(b, |c| b.min(c)).min(u32::MAX as u64 / 2) as u32
            })
            .collect()
    }

    /// Raises the bounds whose sinks hold more than their share of the tolerance: the part of
    /// each bound above the initial count is multiplied by `factor` (at least 1.5), plus 4.
    fn grow(&self, bounds: &mut [u32], sink_mass: &[f64], tolerance: f64, factor: f64) {
        let x0 = self.red.initial_coords();
        let d = bounds.len().max(1) as f64;
        let largest = (0..sink_mass.len()).max_by(|&a, &b| sink_mass[a].total_cmp(&sink_mass[b]));
        for k in 0..bounds.len() {
            if sink_mass[k] > tolerance / (2.0 * d) || Some(k) == largest {
                let (b, x) = (bounds[k] as f64, x0[k] as f64);
                let mut nb = (x + (b - x) * factor.max(1.5)).ceil() as u64 + 4;
                if let Some(c) = self.red.caps[k] {
                    nb = nb.min(c);
                }
                bounds[k] = nb.min(u32::MAX as u64 / 2) as u32;
            }
        }
    }

    fn info(&self, net: &Network, bounds: &[u32], g: &Generator, rounds: usize) -> ProjectionInfo {
        ProjectionInfo {
            states: g.states,
            dimensions: self.red.dim(),
            bounds: self
                .red
                .independent
                .iter()
                .zip(bounds)
                .zip(&self.red.caps)
                .map(|((&i, &b), cap)| Bound {
                    species: net.species[i].name.clone(),
                    max_count: b,
                    capped: cap.is_some_and(|c| b as u64 >= c),
                })
                .collect(),
            nonzeros: g.nonzeros(),
            generator_bytes: g.bytes(),
            rounds,
        }
    }

    fn project(
        &self,
        net: &Network,
        bounds: &[u32],
        max: usize,
        leaked: Option<f64>,
        stationary: bool,
    ) -> Result<Projected, FspError> {
        let p: Projection = space::enumerate(
            net,
            &self.red,
            &self.props,
            bounds,
            max,
            &self.forcing,
            &self.loops,
        )
        .map_err(|e| match e {
            FspError::TooManyStates { found, max, .. } => FspError::TooManyStates {
                found,
                max,
                leaked,
                stationary,
            },
            other => other,
        })?;
        let g = (0..p.phases)
            .map(|phase| Generator::new(&p, self.red.dim(), phase))
            .collect();
        Ok((p.coords, g, p.jumps))
    }
}

/// The distribution after a jump: the values of each state (`w` per state: the probability
/// and the counted species' partial moments, which a dose leaves as they are) move to `to[s]`
/// (a state or a sink); the sinks keep theirs.
fn jump(p: &[f64], to: &[u32], states: usize, w: usize) -> Vec<f64> {
    let mut q = vec![0.0; p.len()];
    q[states * w..].copy_from_slice(&p[states * w..]);
    for (s, &t) in to.iter().enumerate().take(states) {
        for b in 0..w {
            q[t as usize * w + b] += p[s * w + b];
        }
    }
    q
}

/// A projection's coordinates, its generator in every phase, and each dose's jump.
type Projected = (Vec<u32>, Vec<Generator>, Vec<Vec<u32>>);

/// Runs `f` on a pool of `threads` threads (or on the current pool).
fn with_threads<T: Send>(
    threads: Option<usize>,
    f: impl FnOnce() -> T + Send,
) -> Result<T, FspError> {
    match threads {
        None => Ok(f()),
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build()
            .map_err(|e| FspError::Solver(format!("thread pool: {e}")))
            .map(|pool| pool.install(f)),
    }
}

/// The distribution of `net` from its initial state at each of `times` (non-decreasing, ≥ 0),
/// with the projection grown until its leaked probability at the last time is at most the
/// tolerance.
pub fn transient(net: &Network, times: &[f64], opts: &Options) -> Result<Transient, FspError> {
    if times.is_empty()
        || times.iter().any(|t| !(t.is_finite() && *t >= 0.0))
        || times.windows(2).any(|w| w[1] < w[0])
    {
        return Err(FspError::Options(
            "the times must be finite, non-negative and non-decreasing".into(),
        ));
    }
    let setup = Setup::new(net, opts, Some(times[times.len() - 1]))?;
    let parallel = opts.threads != Some(1);
    with_threads(opts.threads, || {
        transient_in(net, times, opts, &setup, parallel)
    })?
}

fn transient_in(
    net: &Network,
    times: &[f64],
    opts: &Options,
    setup: &Setup,
    parallel: bool,
) -> Result<Transient, FspError> {
    let tol = opts.tolerance;
    let series_budget = 1e-2 * tol / times.len() as f64;
    let mut bounds = setup.initial_bounds();
    let mut leaked = None;
    for round in 1.. {
        let (coords, gens, jumps) = setup.project(net, &bounds, opts.max_states, leaked, false)?;
        let g = &gens[0];
        let columns = Columns::new(
            &setup.red,
            &coords,
            g.states,
            &setup.species,
            setup.n_species,
        );
        let w = transient::width(setup.counted.len());
        let mut p: Vec<f64> = vec![0.0; g.len() * w];
        p[0] = 1.0;
        let mut laws: Vec<Vec<summary::Moments>> = vec![Vec::new(); setup.species.len()];
        // (E[P − P(0)], E[(P − P(0))²]) of each counted species per time.
        let mut counted: Vec<Vec<[f64; 2]>> = vec![Vec::new(); setup.counted.len()];
        let mut by_time = Vec::with_capacity(times.len());
        let mut series_error = 0.0f64;
        let mut sinks = Vec::new();
        let mut failed_at = times[times.len() - 1];
        let mut completed = true;
        let (mut rate, mut products) = (0.0f64, 0u64);
        let segments = &setup.forcing.segments;
        let mut first_time = 0;
        for (n, seg) in segments.iter().enumerate() {
            for &dose in &seg.doses {
                p = jump(&p, &jumps[dose], g.states, w);
            }
            let next = segments.get(n + 1).map(|s| s.start);
            let count = times[first_time..].partition_point(|&t| next.is_none_or(|e| t < e));
            let offsets: Vec<f64> = times[first_time..first_time + count]
                .iter()
                .map(|&t| t - seg.start)
                .collect();
            let mut series =
                transient::Series::new(&gens[seg.phase], &columns, &setup.increments, parallel);
            let (ran, end) = series.run(
                &p,
                &offsets,
                next.map(|e| e - seg.start),
                series_budget,
                |i, o, tail| {
                    let deficit = (1.0 - o.mass).max(0.0);
                    if deficit > tol {
                        leaked = Some(deficit);
                        failed_at = times[first_time + i];
                        sinks = o.sinks.clone();
                        return false;
                    }
                    series_error = series_error.max(tail);
                    by_time.push(deficit);
                    for (k, law) in laws.iter_mut().enumerate() {
                        let end = columns.offsets.get(k + 1).copied().unwrap_or(columns.len);
                        law.push(summary::from_marginal(
                            &o.marginals[columns.offsets[k]..end],
                        ));
                    }
                    for (c, m) in counted.iter_mut().zip(&o.counted) {
                        c.push([m[0] / o.mass, m[1] / o.mass]);
                    }
                    true
                },
            );
            rate = rate.max(series.rate());
            products += series.products;
            first_time += count;
            if !ran {
                completed = false;
                break;
            }
            if first_time == times.len() {
                break;
            }
            p = end;
        }
        if !completed {
            // Leaking long before the end means the law travels far: grow more, but keep the
            // state count's growth per round near √(t_end/t_fail) whatever the dimension.
            let d = setup.red.dim().max(1) as f64;
            let factor = (times[times.len() - 1] / failed_at)
                .powf(0.5 / d)
                .clamp(1.5, 3.0);
            setup.grow(&mut bounds, &sinks, tol, factor);
            continue;
        }
        let mut laws: Vec<Option<Vec<summary::Moments>>> = laws.into_iter().map(Some).collect();
        let x0 = setup.red.initial_full();
        let species = setup
            .reported
            .iter()
            .map(|&i| {
                let law = if let Some(k) = setup.counted.iter().position(|&c| c == i) {
                    counted_law(x0[i] as f64, &counted[k])
                } else {
                    let k = setup
                        .species
                        .iter()
                        .position(|&c| c == i)
                        .expect("reported");
                    let law = laws[k].take().expect("each species once");
                    SpeciesLaw {
                        clamped: net.species[i].clamped,
                        accumulates: false,
                        mean: law.iter().map(|m| m.mean).collect(),
                        variance: law.iter().map(|m| m.variance).collect(),
                        fano: law.iter().map(|m| m.fano).collect(),
                        p_zero: law.iter().map(|m| m.p_zero).collect(),
                        marginal: law.into_iter().map(|m| m.marginal).collect(),
                    }
                };
                (net.species[i].name.clone(), law)
            })
            .collect();
        return Ok(Transient {
            truncation_error: by_time.iter().copied().fold(0.0, f64::max),
            truncation_error_by_time: by_time,
            series_error,
            states: g.states,
            projection: setup.info(net, &bounds, g, round),
            uniformization_rate: rate,
            products,
            times: times.to_vec(),
            species: Named(species),
        });
    }
    unreachable!("the loop returns")
}

/// The law of a counted species from its start count `p0` and its (E[P − P(0)], E[(P − P(0))²])
/// per time: mean = p0 + E[Δ], variance = E[Δ²] − E[Δ]², Fano = variance/mean (NaN at mean 0).
fn counted_law(p0: f64, moments: &[[f64; 2]]) -> SpeciesLaw {
    let mean: Vec<f64> = moments.iter().map(|m| p0 + m[0]).collect();
    let variance: Vec<f64> = moments
        .iter()
        .map(|m| (m[1] - m[0] * m[0]).max(0.0))
        .collect();
    SpeciesLaw {
        clamped: false,
        accumulates: true,
        fano: mean
            .iter()
            .zip(&variance)
            .map(|(&m, &v)| if m > 0.0 { v / m } else { f64::NAN })
            .collect(),
        p_zero: vec![f64::NAN; mean.len()],
        marginal: vec![Vec::new(); mean.len()],
        mean,
        variance,
    }
}

/// The stationary law of `net` reached from its initial state, with the projection grown
/// until the stationary probability of its boundary is at most the tolerance.
pub fn stationary(net: &Network, opts: &Options) -> Result<Stationary, FspError> {
    let setup = Setup::new(net, opts, None)?;
    with_threads(opts.threads, || stationary_in(net, opts, &setup))?
}

fn stationary_in(net: &Network, opts: &Options, setup: &Setup) -> Result<Stationary, FspError> {
    let tol = opts.tolerance;
    let mut bounds = setup.initial_bounds();
    let mut leaked = None;
    let d = setup.red.dim();
    for round in 1.. {
        let (coords, gens, _) = setup.project(net, &bounds, opts.max_states, leaked, true)?;
        let g = &gens[0];
        // Which sinks each state feeds.
        let mut feeds: Vec<u64> = vec![0; g.states];
        for k in 0..g.sinks {
            let r = g.states + k;
            for e in g.row_ptr[r]..g.row_ptr[r + 1] {
                feeds[g.col[e] as usize] |= 1 << k.min(63);
            }
        }
        let classes = stationary::classes(g);
        let mut on_edge = vec![false; classes.count];
        for s in 0..g.states {
            if feeds[s] != 0 {
                on_edge[classes.of[s] as usize] = true;
            }
        }
        let closed: Vec<u32> = (0..classes.count as u32)
            .filter(|&c| classes.closed[c as usize])
            .collect();
        let inner: Vec<u32> = closed
            .iter()
            .copied()
            .filter(|&c| !on_edge[c as usize])
            .collect();
        if inner.len() > 1 {
            return Err(FspError::ClosedClasses { count: inner.len() });
        }
        if closed.len() > 1 {
            // Classes closed only because the projection cut their way out: grow past them.
            let mut mass = vec![0.0; d];
            for (&c, &f) in classes.of.iter().zip(&feeds) {
                if closed.contains(&c) && on_edge[c as usize] {
                    for (k, m) in mass.iter_mut().enumerate() {
                        if f & (1 << k.min(63)) != 0 {
                            *m = 1.0;
                        }
                    }
                }
            }
            leaked = Some(1.0);
            setup.grow(&mut bounds, &mass, tol, 1.5);
            continue;
        }
        let (pi, residual) = match stationary::solve(g, &classes, closed[0]) {
            Ok(solved) => solved,
            // A projection far smaller than the law (its mass piled up on the cut) can leave the
            // balance equations without a finite non-negative solution at any reference state:
            // treat it as a leak through every bound and solve a larger one. Growth ends, at
            // worst, at `max_states` with its own clear refusal.
            Err(FspError::Solver(_)) => {
                leaked = Some(1.0);
                setup.grow(&mut bounds, &vec![1.0; d], tol, 1.5);
                continue;
            }
            Err(e) => return Err(e),
        };
        let mut sink_mass = vec![0.0; d];
        let mut boundary = 0.0;
        for s in 0..g.states {
            if feeds[s] != 0 && pi[s] > 0.0 {
                boundary += pi[s];
                for (k, m) in sink_mass.iter_mut().enumerate() {
                    if feeds[s] & (1 << k.min(63)) != 0 {
                        *m += pi[s];
                    }
                }
            }
        }
        if boundary > tol {
            leaked = Some(boundary);
            setup.grow(&mut bounds, &sink_mass, tol, 1.5);
            continue;
        }
        let columns = Columns::new(
            &setup.red,
            &coords,
            g.states,
            &setup.species,
            setup.n_species,
        );
        let flux = summary::fluxes(&setup.red, &coords, &setup.props, &pi, setup.n_species);
        let species = setup
            .reported
            .iter()
            .map(|&i| {
                let law = match setup.species.iter().position(|&c| c == i) {
                    Some(k) => {
                        let m = summary::moments(&columns.counts[k], &pi);
                        SpeciesStationary {
                            clamped: net.species[i].clamped,
                            accumulates: false,
                            accumulation_per_s: None,
                            mean: m.mean,
                            variance: m.variance,
                            fano: m.fano,
                            p_zero: m.p_zero,
                            marginal: m.marginal,
                        }
                    }
                    None => SpeciesStationary {
                        clamped: false,
                        accumulates: true,
                        accumulation_per_s: Some(
                            net.reactions
                                .iter()
                                .zip(&flux)
                                .map(|(r, f)| {
                                    let nu: i64 =
                                        r.change.iter().filter(|c| c.0 == i).map(|c| c.1).sum();
                                    nu as f64 * f
                                })
                                .sum(),
                        ),
                        mean: f64::NAN,
                        variance: f64::NAN,
                        fano: f64::NAN,
                        p_zero: f64::NAN,
                        marginal: Vec::new(),
                    },
                };
                (net.species[i].name.clone(), law)
            })
            .collect();
        let fluxes = net
            .reactions
            .iter()
            .zip(flux)
            .map(|(r, f)| (r.label.clone(), f))
            .collect();
        return Ok(Stationary {
            truncation_error: boundary,
            states: g.states,
            projection: setup.info(net, &bounds, g, round),
            class_states: classes.of.iter().filter(|&&c| c == closed[0]).count(),
            residual,
            species: Named(species),
            fluxes: Named(fluxes),
        });
    }
    unreachable!("the loop returns")
}
