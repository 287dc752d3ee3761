//! Replicate ensembles: many independent trajectories of one network, run in parallel, reduced
//! to streaming statistics.
//!
//! - Seeds: replicate r of master seed s draws from [`crate::kernel::rng::replicate_rng`]`(s, r)`
//!   alone.
//! - Parallelism: rayon, in a pool of the requested number of threads.
//! - Reproducibility: replicates are grouped in fixed blocks of [`BLOCK`] consecutive replicates
//!   (a block pushes its replicates in order into its own accumulators), and blocks are merged
//!   in block order. Neither depends on the thread count, so every figure is bit-for-bit the
//!   same for any `threads`. Blocks run in waves of a few per thread, so memory holds a few
//!   block accumulators at a time, never one per replicate.
//! - Statistics: Welford accumulators with the pairwise merge ([`crate::stats::Welford`]);
//!   memory grows with species × grid points, not with replicates (unless `keep_finals`).
//!   Student-t intervals come from [`crate::stats::Welford::ci95`].
//! - Progress: with `progress`, an indicatif bar with elapsed time and ETA on stderr; the
//!   caller decides (the command line asks for it only when stderr is a terminal).
//! - Observers: every replicate records its grid, its firing counts and its time integrals
//!   ([`Recorder`] and [`Integrals`]).

use crate::error::{Error, Result};
use crate::kernel::observe::grid_times;
use crate::kernel::rng::replicate_rng;
use crate::kernel::tau::{Switch, Tau};
use crate::kernel::{CompiledKernel, Direct, Integrals, RecordSpec, Recorder};
use crate::network::Network;
use crate::numbers::plain;
use crate::stats::{Bivariate, Welford};
use std::cell::RefCell;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;

thread_local! {
    /// The stop flag of the innermost [`stoppable`] call on this thread.
    static STOP: RefCell<Option<Arc<AtomicBool>>> = const { RefCell::new(None) };
}

/// Runs `f` so that every ensemble it starts on this thread stops before its next replicate,
/// with [`Error::Interrupted`], once `stop` is set (by another thread: a signal watcher, a
/// notebook binding's Ctrl-C). Jobs built on ensembles (reconcile, noise, sweeps of them) become
/// interruptible without a flag of their own. A replicate already running finishes first.
pub fn stoppable<R>(stop: Arc<AtomicBool>, f: impl FnOnce() -> R) -> R {
    struct Restore(Option<Arc<AtomicBool>>);
    impl Drop for Restore {
        fn drop(&mut self) {
            STOP.with(|s| *s.borrow_mut() = self.0.take());
        }
    }
    let _restore = Restore(STOP.with(|s| s.borrow_mut().replace(stop)));
    f()
}

/// Replicates per block, the unit of work and of merging.
pub const BLOCK: u64 = 16;

/// Blocks per thread in one wave of parallel work.
const WAVE_PER_THREAD: usize = 8;

/// Memory the block accumulators of one wave may take, in bytes (at least one block per
/// thread is always in flight).
const WAVE_MEMORY: usize = 512 << 20;

/// Most grid points an ensemble records (each costs one count per species per thread, and one
/// accumulator per species in every block in flight).
pub const MAX_GRID_POINTS: usize = 1_000_000;

/// Most worker threads an ensemble starts.
pub const MAX_THREADS: usize = 1024;

/// The default ε of `tau` and `auto` (`--epsilon`).
pub const DEFAULT_EPSILON: f64 = 0.03;

/// The simulation method.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Method {
    /// The exact Gillespie direct method.
    Direct,
    /// Tau-leaping with error-control parameter ε (Cao, Gillespie & Petzold 2006).
    Tau { epsilon: f64 },
    /// Tau-leaping with error-control parameter ε where a leap pays, exact steps elsewhere.
    Auto { epsilon: f64 },
}

impl Method {
    /// The name used on the command line and in JSON.
    pub fn name(&self) -> &'static str {
        match self {
            Method::Direct => "direct",
            Method::Tau { .. } => "tau",
            Method::Auto { .. } => "auto",
        }
    }
}

/// What to run.
#[derive(Clone, Debug, PartialEq)]
pub struct EnsembleSpec {
    /// Number of trajectories (≥ 1).
    pub replicates: u64,
    /// Master seed.
    pub seed: u64,
    /// End time of every trajectory (s), finite and > 0.
    pub t_end: f64,
    /// Grid points evenly spaced from 0 to t_end inclusive (≥ 2).
    pub grid_points: usize,
    /// Start of the window for firing counts and time averages (s), 0 ≤ window < t_end.
    pub window: f64,
    /// Worker threads (`None`: all cores).
    pub threads: Option<usize>,
    /// Keep every replicate's final state (for whole-distribution tests).
    pub keep_finals: bool,
    /// Draw a progress bar on stderr (the caller decides whether stderr is a terminal).
    pub progress: bool,
    pub method: Method,
    /// Index of the first replicate: replicates `first_replicate ..` are run, each seeded from
    /// (seed, index), so a later batch continues an earlier one reproducibly.
    pub first_replicate: u64,
    /// Initial counts of every species (`None`: the network's initial state). Clamped species
    /// must keep their network value.
    pub initial: Option<Vec<i64>>,
}

impl EnsembleSpec {
    /// One replicate to `t_end` with the defaults of `copyloop simulate` (seed 0, 101 grid
    /// points, window 0, all cores, direct method).
    pub fn new(t_end: f64) -> EnsembleSpec {
        EnsembleSpec {
            replicates: 1,
            seed: 0,
            t_end,
            grid_points: 101,
            window: 0.0,
            threads: None,
            keep_finals: false,
            progress: false,
            method: Method::Direct,
            first_replicate: 0,
            initial: None,
        }
    }

    /// Checks every value; a bad one is an [`Error::Invalid`] naming the field.
    pub fn validate(&self) -> Result<()> {
        if !(self.t_end > 0.0 && self.t_end.is_finite()) {
            return Err(Error::invalid(
                "t_end",
                format!(
                    "the end time must be a finite time above 0 s, got {} s",
                    plain(self.t_end)
                ),
            ));
        }
        if self.replicates == 0 {
            return Err(Error::invalid(
                "replicates",
                "at least 1 replicate is needed",
            ));
        }
        if !(2..=MAX_GRID_POINTS).contains(&self.grid_points) {
            return Err(Error::invalid(
                "grid_points",
                format!(
                    "the grid needs 2 to {MAX_GRID_POINTS} points (0 and the end time included), got {}",
                    self.grid_points
                ),
            ));
        }
        if !(self.window >= 0.0 && self.window < self.t_end) {
            return Err(Error::invalid(
                "window",
                format!(
                    "the measurement window must start at or after 0 s and before the end time ({} s), got {} s",
                    plain(self.t_end),
                    plain(self.window)
                ),
            ));
        }
        match self.threads {
            Some(0) => return Err(Error::invalid("threads", "at least 1 thread is needed")),
            Some(n) if n > MAX_THREADS => {
                return Err(Error::invalid(
                    "threads",
                    format!("at most {MAX_THREADS} threads, got {n}"),
                ))
            }
            _ => {}
        }
        match self.method {
            Method::Tau { epsilon } | Method::Auto { epsilon }
                if !(epsilon > 0.0 && epsilon < 1.0) =>
            {
                Err(Error::invalid(
                    "epsilon",
                    format!(
                        "ε must lie strictly between 0 and 1, got {}",
                        plain(epsilon)
                    ),
                ))
            }
            _ => Ok(()),
        }
    }
}

/// Ensemble statistics. Every per-species vector is in the network's species order, every
/// per-reaction vector in its reaction order; each Welford has one entry per replicate.
#[derive(Clone, Debug, PartialEq)]
pub struct EnsembleResult {
    pub spec: EnsembleSpec,
    /// Count of each species at t_end.
    pub final_state: Vec<Welford>,
    /// Time average ∫x dt / T over the window (T = t_end − window), per replicate.
    pub time_average: Vec<Welford>,
    /// Within-replicate variance over the window, ∫x² dt / T − (∫x dt / T)², per replicate.
    pub within_variance: Vec<Welford>,
    /// Pairs (∫x dt / T, ∫x² dt / T) over the window, per replicate: the time average and the
    /// time-averaged square, with their covariance (for intervals on variances and Fano
    /// factors).
    pub time_moments: Vec<Bivariate>,
    /// Firings of each reaction in [window, t_end].
    pub firings: Vec<Welford>,
    /// Firings of each reaction in [window, (window + t_end)/2).
    pub firings_first_half: Vec<Welford>,
    /// First-half minus second-half firings of each reaction, per replicate (a stationary
    /// window has mean 0).
    pub half_difference: Vec<Welford>,
    /// Net change of each species over the window, x(t_end) − x(window), per replicate (0 for
    /// clamped species): with the window length, the accumulation rate of an output.
    pub window_change: Vec<Welford>,
    /// Grid times 0 … t_end.
    pub grid_times: Vec<f64>,
    /// `grid[p][i]`: count of species i at grid point p.
    pub grid: Vec<Vec<Welford>>,
    /// The params that events change (network indices), and `grid_params[p][k]`: the value
    /// of the k-th of them at grid point p.
    pub varying_params: Vec<usize>,
    pub grid_params: Vec<Vec<Welford>>,
    /// Every replicate's final state, in replicate order (when `keep_finals`).
    pub finals: Option<Vec<Vec<i64>>>,
    /// Firings over all replicates and all of [0, t_end].
    pub events_total: u64,
    /// Tau leaps and exact steps taken by `tau` and `auto` (0 for `direct`).
    pub leaps: u64,
    pub exact_steps: u64,
    /// Replicates in which nothing could fire any more before t_end.
    pub absorbed: u64,
    pub wall_seconds: f64,
}

impl EnsembleResult {
    /// Adds the replicates of `other`, a later batch of the same spec (the next replicate
    /// indices), as if they had been run together.
    pub fn merge(&mut self, other: &EnsembleResult) {
        let pairs = [
            (&mut self.final_state, &other.final_state),
            (&mut self.time_average, &other.time_average),
            (&mut self.within_variance, &other.within_variance),
            (&mut self.firings, &other.firings),
            (&mut self.firings_first_half, &other.firings_first_half),
            (&mut self.half_difference, &other.half_difference),
            (&mut self.window_change, &other.window_change),
        ];
        for (a, b) in pairs {
            a.iter_mut().zip(b).for_each(|(a, b)| a.merge(b));
        }
        for (a, b) in self.time_moments.iter_mut().zip(&other.time_moments) {
            a.merge(b);
        }
        for (a, b) in self.grid.iter_mut().zip(&other.grid) {
            a.iter_mut().zip(b).for_each(|(a, b)| a.merge(b));
        }
        for (a, b) in self.grid_params.iter_mut().zip(&other.grid_params) {
            a.iter_mut().zip(b).for_each(|(a, b)| a.merge(b));
        }
        if let (Some(a), Some(b)) = (&mut self.finals, &other.finals) {
            a.extend(b.iter().cloned());
        }
        self.spec.replicates += other.spec.replicates;
        self.events_total += other.events_total;
        self.leaps += other.leaps;
        self.exact_steps += other.exact_steps;
        self.absorbed += other.absorbed;
        self.wall_seconds += other.wall_seconds;
    }

    /// Length of the measurement window, t_end − window (s).
    pub fn window_length(&self) -> f64 {
        self.spec.t_end - self.spec.window
    }

    /// Events per second of wall time.
    pub fn events_per_second(&self) -> f64 {
        self.events_total as f64 / self.wall_seconds
    }
}

/// Accumulating a block of replicates (or all blocks merged so far) uses the result type
/// itself, so that merging is written once ([`EnsembleResult::merge`]).
impl EnsembleResult {
    /// No replicates yet: `spec` with `replicates` 0, accumulators sized for `kernel`.
    fn empty(kernel: &CompiledKernel, spec: &EnsembleSpec) -> EnsembleResult {
        let (species, reactions) = (kernel.species, kernel.reactions());
        let points = spec.grid_points;
        let varying = kernel.varying_params().to_vec();
        EnsembleResult {
            spec: EnsembleSpec {
                replicates: 0,
                ..spec.clone()
            },
            final_state: vec![Welford::new(); species],
            time_average: vec![Welford::new(); species],
            within_variance: vec![Welford::new(); species],
            time_moments: vec![Bivariate::new(); species],
            firings: vec![Welford::new(); reactions],
            firings_first_half: vec![Welford::new(); reactions],
            half_difference: vec![Welford::new(); reactions],
            window_change: vec![Welford::new(); species],
            grid_times: grid_times(spec.t_end, points),
            grid: vec![vec![Welford::new(); species]; points],
            grid_params: vec![vec![Welford::new(); varying.len()]; points],
            varying_params: varying,
            finals: spec.keep_finals.then(Vec::new),
            events_total: 0,
            leaps: 0,
            exact_steps: 0,
            absorbed: 0,
            wall_seconds: 0.0,
        }
    }

    /// Adds one replicate's observers and final state.
    fn push(&mut self, kernel: &CompiledKernel, (rec, int): &(Recorder, Integrals), last: &[i64]) {
        let t = int.window_length();
        let mut change = vec![0i64; last.len()];
        for (j, &n) in rec.firings().iter().enumerate() {
            for &(i, d) in kernel.change(j) {
                change[i as usize] += d * n as i64;
            }
        }
        for (w, c) in self.window_change.iter_mut().zip(change) {
            w.push(c as f64);
        }
        for (i, &v) in last.iter().enumerate() {
            self.final_state[i].push(v as f64);
            let mean = int.x()[i] / t;
            let square = int.x2()[i] / t;
            self.time_average[i].push(mean);
            self.time_moments[i].push(mean, square);
            self.within_variance[i].push(within_variance(mean, square));
        }
        for (j, (&n, &h)) in rec
            .firings()
            .iter()
            .zip(rec.firings_first_half())
            .enumerate()
        {
            self.firings[j].push(n as f64);
            self.firings_first_half[j].push(h as f64);
            self.half_difference[j].push(2.0 * h as f64 - n as f64);
        }
        for (p, row) in self.grid.iter_mut().enumerate() {
            for (w, &v) in row.iter_mut().zip(rec.grid_state(p)) {
                w.push(v as f64);
            }
        }
        for (p, row) in self.grid_params.iter_mut().enumerate() {
            let values = rec.grid_params(p);
            for (w, &k) in row.iter_mut().zip(&self.varying_params) {
                w.push(values[k]);
            }
        }
        if let Some(f) = &mut self.finals {
            f.push(last.to_vec());
        }
        self.spec.replicates += 1;
    }
}

/// The variance within one replicate's window, ⟨x²⟩ − ⟨x⟩², from its time average and time-
/// averaged square. A difference below the rounding of the two terms (64 ulps of ⟨x⟩²) is
/// indistinguishable from 0 in f64 and is reported as 0, so that a count that never moves has
/// variance 0, not rounding noise.
fn within_variance(mean: f64, square: f64) -> f64 {
    let v = square - mean * mean;
    if v <= 64.0 * f64::EPSILON * mean * mean {
        0.0
    } else {
        v
    }
}

/// Per-thread working memory, reused across blocks.
struct Workspace<'k> {
    sim: Sim<'k>,
    observers: (Recorder, Integrals),
}

/// The kernel a worker runs.
enum Sim<'k> {
    Direct(Direct<'k>),
    /// Boxed: a tau workspace is several times the size of a direct one.
    Tau(Box<Tau<'k>>),
}

/// Runs replicates `first .. first + count` in order into one block's accumulators.
fn run_block(
    kernel: &CompiledKernel,
    spec: &EnsembleSpec,
    ws: &mut Workspace,
    first: u64,
    count: u64,
    bar: Option<&indicatif::ProgressBar>,
    stop: Option<&AtomicBool>,
) -> Result<EnsembleResult> {
    let mut part = EnsembleResult::empty(kernel, spec);
    let x0 = spec.initial.as_deref().unwrap_or(&kernel.x0);
    for r in first..first + count {
        if stop.is_some_and(|s| s.load(Ordering::Relaxed)) {
            return Err(Error::Interrupted);
        }
        let mut rng = replicate_rng(spec.seed, spec.first_replicate + r);
        let (absorbed, state) = match &mut ws.sim {
            Sim::Direct(d) => {
                let summary = d.run(x0, spec.t_end, &mut rng, &mut ws.observers)?;
                part.events_total += summary.events;
                (summary.absorbed_at.is_some(), d.state())
            }
            Sim::Tau(tau) => {
                let summary = tau.run(x0, spec.t_end, &mut rng, &mut ws.observers)?;
                part.events_total += summary.events;
                part.leaps += summary.leaps;
                part.exact_steps += summary.exact_steps;
                (summary.absorbed_at.is_some(), tau.state())
            }
        };
        part.absorbed += u64::from(absorbed);
        part.push(kernel, &ws.observers, state);
        if let Some(b) = bar {
            b.inc(1);
        }
    }
    Ok(part)
}

/// Runs the ensemble described by `spec` on `net`.
pub fn run(net: &Network, spec: &EnsembleSpec) -> Result<EnsembleResult> {
    spec.validate()?;
    let kernel = CompiledKernel::new(net)?;
    let mut builder = rayon::ThreadPoolBuilder::new();
    if let Some(n) = spec.threads {
        builder = builder.num_threads(n);
    }
    let pool = builder
        .build()
        .map_err(|e| Error::Internal(format!("cannot start worker threads: {e}")))?;
    let bar = spec.progress.then(|| progress_bar(spec.replicates));
    let started = Instant::now();
    let stop = STOP.with(|s| s.borrow().clone());
    let total = pool.install(|| run_blocks(net, &kernel, spec, bar.as_ref(), stop.as_deref()));
    let wall_seconds = started.elapsed().as_secs_f64();
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let mut total = total?;
    total.spec = spec.clone();
    total.wall_seconds = wall_seconds;
    Ok(total)
}

fn record_spec(spec: &EnsembleSpec) -> RecordSpec {
    RecordSpec {
        t_end: spec.t_end,
        grid_points: spec.grid_points,
        window: spec.window,
    }
}

/// Runs all blocks in waves inside the current rayon pool and merges them in block order.
fn run_blocks(
    net: &Network,
    kernel: &CompiledKernel,
    spec: &EnsembleSpec,
    bar: Option<&indicatif::ProgressBar>,
    stop: Option<&AtomicBool>,
) -> Result<EnsembleResult> {
    use rayon::prelude::*;
    let blocks = spec.replicates.div_ceil(BLOCK);
    // A wave holds one block's accumulators per block in flight: fewer blocks per thread when
    // the grid makes them large (the results do not depend on the wave size).
    let threads = rayon::current_num_threads();
    let block_bytes = (spec.grid_points * kernel.species).max(1) * std::mem::size_of::<Welford>();
    let by_memory = (WAVE_MEMORY / block_bytes).max(threads);
    let wave = (threads * WAVE_PER_THREAD).min(by_memory) as u64;
    let mut total = EnsembleResult::empty(kernel, spec);
    let mut start = 0u64;
    while start < blocks {
        if stop.is_some_and(|s| s.load(Ordering::Relaxed)) {
            return Err(Error::Interrupted);
        }
        let end = (start + wave).min(blocks);
        let parts: Vec<Result<EnsembleResult>> = (start..end)
            .into_par_iter()
            .map_init(
                || Workspace {
                    sim: match spec.method {
                        Method::Direct => Sim::Direct(Direct::new(kernel)),
                        Method::Tau { epsilon } => {
                            Sim::Tau(Box::new(Tau::new(kernel, net, epsilon, Switch::Tau)))
                        }
                        Method::Auto { epsilon } => {
                            Sim::Tau(Box::new(Tau::new(kernel, net, epsilon, Switch::Auto)))
                        }
                    },
                    observers: (
                        Recorder::new(record_spec(spec), kernel),
                        Integrals::new(spec.t_end, spec.window, kernel),
                    ),
                },
                |ws, b| {
                    let first = b * BLOCK;
                    let count = BLOCK.min(spec.replicates - first);
                    run_block(kernel, spec, ws, first, count, bar, stop)
                },
            )
            .collect();
        for p in parts {
            total.merge(&p?);
        }
        start = end;
    }
    Ok(total)
}

fn progress_bar(replicates: u64) -> indicatif::ProgressBar {
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(replicates),
        indicatif::ProgressDrawTarget::stderr(),
    );
    if let Ok(style) = indicatif::ProgressStyle::with_template(
        "{elapsed_precise} [{bar:40}] {pos}/{len} replicates, ETA {eta}",
    ) {
        bar.set_style(style.progress_chars("=> "));
    }
    bar
}
