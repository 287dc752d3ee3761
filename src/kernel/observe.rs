//! What a trajectory reports, chosen per run: grid samples, firing counts in a window, exact
//! time integrals. A run never stores its events, so memory does not grow with their number.
//!
//! A kernel drives an [`Observer`] through these calls, in this order:
//!
//! 1. [`Observer::start`] once, with the initial state at t = 0;
//! 2. for every time t at which the state changes (t ≤ t_end): if t ≥ [`Observer::due`],
//!    [`Observer::reach`] with the state held since the previous change; then
//!    [`Observer::fire`] once per channel that fires at t (a tau leap fires several channels,
//!    each possibly many times, at one t), and [`Observer::moved`] once per species change as
//!    the kernel applies it;
//! 3. [`Observer::finish`] once, with the final state, at t_end (also when the run stopped early
//!    because nothing could fire any more).
//!
//! A dose or an event assignment is a change of the state without a firing: `reach` (when
//! due) and `moved`, no `fire`. Where the network has params that events change,
//! [`Observer::params`] gives their values at the start and after every change.
//!
//! Observers are type parameters of the kernels, so what is not asked for is not compiled in:
//! the unit type `()` observes nothing, [`Recorder`] keeps grid samples and firing counts,
//! [`Integrals`] keeps ∫x dt and ∫x² dt, and a pair `(A, B)` of observers observes with both.

use super::compiled::CompiledKernel;

/// Receives a trajectory from a kernel (see the module docs for the call order).
pub trait Observer {
    /// The run starts at t = 0 in state `x`.
    #[inline(always)]
    fn start(&mut self, _x: &[i64]) {}
    /// The earliest change time for which the observer needs [`Observer::reach`] (∞: never).
    #[inline(always)]
    fn due(&self) -> f64 {
        f64::INFINITY
    }
    /// The state changes next at time `t`, and t ≥ [`Observer::due`]; `x` has held since the
    /// previous change. Kernels may also call it for earlier changes.
    #[inline(always)]
    fn reach(&mut self, _t: f64, _x: &[i64]) {}
    /// The first time after `t` at which the observer samples the state (a grid time; ∞:
    /// none). An approximate kernel ends a leap there, so that the sample shows the state at
    /// that time rather than the state before a leap across it; exact kernels need not ask.
    #[inline(always)]
    fn sample_after(&self, _t: f64) -> f64 {
        f64::INFINITY
    }
    /// Channel `j` fires `k` times at time `t`.
    #[inline(always)]
    fn fire(&mut self, _t: f64, _j: usize, _k: u64) {}
    /// Species `i` goes from `before` to `before + dx` at time `t`. Kernels may also report
    /// a change `dx` = 0, possibly with `i` equal to the number of species (a padding entry of
    /// their tables); such a call changes nothing and must be accepted.
    #[inline(always)]
    fn moved(&mut self, _t: f64, _i: usize, _before: i64, _dx: i64) {}
    /// The run ends at `t_end` in state `x`.
    #[inline(always)]
    fn finish(&mut self, _t_end: f64, _x: &[i64]) {}
    /// The params (every one, canonical units) hold `p` from time `t` on.
    #[inline(always)]
    fn params(&mut self, _t: f64, _p: &[f64]) {}
}

/// Observes nothing.
impl Observer for () {}

/// Observes with both.
impl<A: Observer, B: Observer> Observer for (A, B) {
    #[inline(always)]
    fn start(&mut self, x: &[i64]) {
        self.0.start(x);
        self.1.start(x);
    }
    #[inline(always)]
    fn due(&self) -> f64 {
        self.0.due().min(self.1.due())
    }
    #[inline(always)]
    fn reach(&mut self, t: f64, x: &[i64]) {
        if t >= self.0.due() {
            self.0.reach(t, x);
        }
        if t >= self.1.due() {
            self.1.reach(t, x);
        }
    }
    #[inline(always)]
    fn sample_after(&self, t: f64) -> f64 {
        self.0.sample_after(t).min(self.1.sample_after(t))
    }
    #[inline(always)]
    fn fire(&mut self, t: f64, j: usize, k: u64) {
        self.0.fire(t, j, k);
        self.1.fire(t, j, k);
    }
    #[inline(always)]
    fn moved(&mut self, t: f64, i: usize, before: i64, dx: i64) {
        self.0.moved(t, i, before, dx);
        self.1.moved(t, i, before, dx);
    }
    #[inline(always)]
    fn finish(&mut self, t_end: f64, x: &[i64]) {
        self.0.finish(t_end, x);
        self.1.finish(t_end, x);
    }
    #[inline(always)]
    fn params(&mut self, t: f64, p: &[f64]) {
        self.0.params(t, p);
        self.1.params(t, p);
    }
}

/// `points` times evenly spaced from 0 to `t_end` inclusive: gₚ = t_end·p/(points − 1), the
/// last exactly t_end (none for `points` = 0; just 0 for 1).
pub fn grid_times(t_end: f64, points: usize) -> Vec<f64> {
    (0..points)
        .map(|p| {
            if p == 0 {
                0.0
            } else if p + 1 == points {
                t_end
            } else {
                t_end * p as f64 / (points - 1) as f64
            }
        })
        .collect()
}

/// The smallest f64 above `g` (g ≥ 0): an event at t is after time g exactly when
/// t ≥ above(g).
fn above(g: f64) -> f64 {
    f64::from_bits(g.to_bits() + 1)
}

/// What a [`Recorder`] records.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RecordSpec {
    /// End of the run (s).
    pub t_end: f64,
    /// Number of grid points, evenly spaced from 0 to t_end inclusive (0: no grid).
    pub grid_points: usize,
    /// Start of the window for firing counts (s), 0 ≤ window < t_end.
    pub window: f64,
}

/// Grid samples and firing counts of one trajectory.
///
/// - Grid: the state at grid time g is the state after every event at or before g
///   (common practice for sampling a piecewise-constant jump process).
/// - Firings: a firing at time t counts when window ≤ t ≤ t_end, and in the first half when
///   also t < (window + t_end)/2. Every firing increments one counter; the counters are copied
///   when the run reaches the window start and the midpoint, and the window counts are the
///   differences, so an event pays one increment.
///
/// Everything that happens at given times (grid samples, the two counter copies) waits behind
/// one threshold, [`Observer::due`], so an event that passes none of them costs nothing more.
#[derive(Clone, Debug)]
pub struct Recorder {
    spec: RecordSpec,
    species: usize,
    grid_times: Vec<f64>,
    grid: Vec<i64>,
    /// The params' values now, and at each grid point (points × params).
    params_now: Vec<f64>,
    grid_params: Vec<f64>,
    /// Next grid point to fill.
    next: usize,
    /// The earliest pending action is due for an event at t ≥ `due`.
    due: f64,
    grid_due: f64,
    window_due: f64,
    mid_due: f64,
    /// Firings since t = 0, and copies at the window start and at the midpoint.
    counts: Vec<u64>,
    at_window: Vec<u64>,
    at_mid: Vec<u64>,
    firings: Vec<u64>,
    first_half: Vec<u64>,
}

impl Recorder {
    /// A recorder for runs of `kernel`'s network.
    pub fn new(spec: RecordSpec, kernel: &CompiledKernel) -> Recorder {
        let (species, m) = (kernel.species, kernel.reactions());
        let params = kernel.inputs().initial_params().to_vec();
        let mut r = Recorder {
            spec,
            species,
            grid_times: grid_times(spec.t_end, spec.grid_points),
            grid: vec![0; spec.grid_points * species],
            grid_params: vec![0.0; spec.grid_points * params.len()],
            params_now: params,
            next: 0,
            due: 0.0,
            grid_due: 0.0,
            window_due: 0.0,
            mid_due: 0.0,
            counts: vec![0; m],
            at_window: vec![0; m],
            at_mid: vec![0; m],
            firings: vec![0; m],
            first_half: vec![0; m],
        };
        r.reset();
        r
    }

    fn reset(&mut self) {
        self.next = 0;
        self.grid_due = self.grid_times.first().map_or(f64::INFINITY, |&g| above(g));
        self.window_due = self.spec.window;
        self.mid_due = 0.5 * (self.spec.window + self.spec.t_end);
        self.due = self.grid_due.min(self.window_due).min(self.mid_due);
        self.counts.iter_mut().for_each(|c| *c = 0);
    }

    pub fn spec(&self) -> &RecordSpec {
        &self.spec
    }

    /// Grid times, 0 … t_end.
    pub fn grid_times(&self) -> &[f64] {
        &self.grid_times
    }

    /// The state at grid point `p`.
    pub fn grid_state(&self, p: usize) -> &[i64] {
        &self.grid[p * self.species..(p + 1) * self.species]
    }

    /// Every param's value at grid point `p`.
    pub fn grid_params(&self, p: usize) -> &[f64] {
        let n = self.params_now.len();
        &self.grid_params[p * n..(p + 1) * n]
    }

    /// Firings per channel in [window, t_end].
    pub fn firings(&self) -> &[u64] {
        &self.firings
    }

    /// Firings per channel in [window, (window + t_end)/2).
    pub fn firings_first_half(&self) -> &[u64] {
        &self.first_half
    }

    /// Does every time-triggered action due before an event at `t` (grid samples take `x`).
    fn catch_up(&mut self, t: f64, x: &[i64]) {
        while self.next < self.grid_times.len() && t >= self.grid_due {
            let p = self.next;
            self.grid[p * self.species..(p + 1) * self.species].copy_from_slice(x);
            let n = self.params_now.len();
            self.grid_params[p * n..(p + 1) * n].copy_from_slice(&self.params_now);
            self.next += 1;
            self.grid_due = self
                .grid_times
                .get(self.next)
                .map_or(f64::INFINITY, |&g| above(g));
        }
        if t >= self.window_due {
            self.at_window.copy_from_slice(&self.counts);
            self.window_due = f64::INFINITY;
        }
        if t >= self.mid_due {
            self.at_mid.copy_from_slice(&self.counts);
            self.mid_due = f64::INFINITY;
        }
        self.due = self.grid_due.min(self.window_due).min(self.mid_due);
    }
}

impl Observer for Recorder {
    fn start(&mut self, _x: &[i64]) {
        self.reset();
    }

    #[inline(always)]
    fn due(&self) -> f64 {
        self.due
    }

    fn reach(&mut self, t: f64, x: &[i64]) {
        if t >= self.due {
            self.catch_up(t, x);
        }
    }

    /// The first grid time after `t` (a change exactly at a grid time counts in its sample).
    fn sample_after(&self, t: f64) -> f64 {
        let rest = &self.grid_times[self.next.min(self.grid_times.len())..];
        rest.get(rest.partition_point(|&g| g <= t))
            .copied()
            .unwrap_or(f64::INFINITY)
    }

    #[inline(always)]
    fn fire(&mut self, _t: f64, j: usize, k: u64) {
        self.counts[j] += k;
    }

    fn params(&mut self, _t: f64, p: &[f64]) {
        if p.len() == self.params_now.len() {
            self.params_now.copy_from_slice(p);
        }
    }

    fn finish(&mut self, _t_end: f64, x: &[i64]) {
        // Pending copies happen at the end (nothing fired after them); f64::MAX is above every
        // finite due time and leaves ∞ (done) alone.
        self.catch_up(f64::MAX, x);
        for j in 0..self.counts.len() {
            self.firings[j] = self.counts[j] - self.at_window[j];
            self.first_half[j] = self.at_mid[j] - self.at_window[j];
        }
    }
}

/// Exact time integrals ∫x dt and ∫x² dt per species over [window, t_end].
///
/// The state is piecewise constant, so integration by parts is exact:
/// ∫₀ᵀ x dt = x(T)·T − Σₑ tₑ·Δxₑ and ∫₀ᵀ x² dt = x(T)²·T − Σₑ tₑ·Δ(x²)ₑ, summed over the
/// changes e of x (Δ(x²) = Δx·(2x + Δx), x before the change); the window's integral is the
/// difference of these at t_end and at the window start (common practice for piecewise-constant
/// paths). An event costs two multiply-adds per species it moves, nothing for the others.
#[derive(Clone, Debug)]
pub struct Integrals {
    t_end: f64,
    window: f64,
    window_due: f64,
    /// (Σ t·Δx, Σ t·Δ(x²)) per species, since t = 0, and a spare slot for padding entries.
    sums: Vec<[f64; 2]>,
    /// x(w)·w − Σ t·Δx and x(w)²·w − Σ t·Δ(x²) at the window start w.
    at_window_x: Vec<f64>,
    at_window_x2: Vec<f64>,
    int_x: Vec<f64>,
    int_x2: Vec<f64>,
}

impl Integrals {
    /// Integrals over [window, t_end] for runs of `kernel`'s network.
    pub fn new(t_end: f64, window: f64, kernel: &CompiledKernel) -> Integrals {
        let n = kernel.species;
        Integrals {
            t_end,
            window,
            window_due: window,
            sums: vec![[0.0; 2]; n + 1],
            at_window_x: vec![0.0; n],
            at_window_x2: vec![0.0; n],
            int_x: vec![0.0; n],
            int_x2: vec![0.0; n],
        }
    }

    /// ∫x dt over [window, t_end] per species (molecule·s).
    pub fn x(&self) -> &[f64] {
        &self.int_x
    }

    /// ∫x² dt over [window, t_end] per species (molecule²·s).
    pub fn x2(&self) -> &[f64] {
        &self.int_x2
    }

    /// Length of the window, t_end − window (s).
    pub fn window_length(&self) -> f64 {
        self.t_end - self.window
    }

    fn mark_window(&mut self, x: &[i64]) {
        let w = self.window;
        for (i, &v) in x.iter().enumerate() {
            let v = v as f64;
            self.at_window_x[i] = v * w - self.sums[i][0];
            self.at_window_x2[i] = v * v * w - self.sums[i][1];
        }
        self.window_due = f64::INFINITY;
    }
}

impl Observer for Integrals {
    fn start(&mut self, _x: &[i64]) {
        self.window_due = self.window;
        self.sums.iter_mut().for_each(|s| *s = [0.0; 2]);
    }

    #[inline(always)]
    fn due(&self) -> f64 {
        self.window_due
    }

    fn reach(&mut self, t: f64, x: &[i64]) {
        if t >= self.window_due {
            self.mark_window(x);
        }
    }

    #[inline(always)]
    fn moved(&mut self, t: f64, i: usize, before: i64, dx: i64) {
        let (v, d) = (before as f64, dx as f64);
        // An index past the species (a padding entry, dx = 0) lands on the spare slot; the
        // index is clamped rather than checked, so that an event pays no branch per entry.
        let slot = i.min(self.sums.len() - 1);
        // SAFETY: `sums` has species + 1 ≥ 1 entries (Integrals::new), so slot < len.
        let s = unsafe { self.sums.get_unchecked_mut(slot) };
        let td = t * d;
        s[0] += td;
        s[1] += td * (2.0 * v + d);
    }

    fn finish(&mut self, t_end: f64, x: &[i64]) {
        if self.window_due < f64::INFINITY {
            self.mark_window(x);
        }
        for (i, &v) in x.iter().enumerate() {
            let v = v as f64;
            self.int_x[i] = (v * t_end - self.sums[i][0]) - self.at_window_x[i];
            self.int_x2[i] = (v * v * t_end - self.sums[i][1]) - self.at_window_x2[i];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{load_source, Overrides};

    /// One species A, reaction 0 makes it, reaction 1 removes it.
    fn kernel() -> CompiledKernel {
        let src = "species A = 3\nstep up 0 -> A @ 1\nstep down A -> 0 @ 1\n";
        let net = load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap();
        CompiledKernel::new(&net).unwrap()
    }

    fn spec() -> RecordSpec {
        RecordSpec {
            t_end: 4.0,
            grid_points: 5,
            window: 1.0,
        }
    }

    fn observers(k: &CompiledKernel) -> (Recorder, Integrals) {
        (Recorder::new(spec(), k), Integrals::new(4.0, 1.0, k))
    }

    /// Drives `o` through a hand-made path of one species: 3 on [0, 0.5), 4 on [0.5, 2), 2 on
    /// [2, 4], as a kernel would.
    fn hand_path<O: Observer>(o: &mut O) {
        o.start(&[3]);
        o.reach(0.5, &[3]);
        o.fire(0.5, 0, 1);
        o.moved(0.5, 0, 3, 1);
        o.moved(0.5, 1, 1, 0);
        o.reach(2.0, &[4]);
        o.fire(2.0, 1, 2);
        o.moved(2.0, 0, 4, -2);
        o.finish(4.0, &[2]);
    }

    /// Each expected figure is the elementary integral or count of the step function.
    #[test]
    fn hand_path_gives_exact_figures() {
        let k = kernel();
        let mut o = observers(&k);
        hand_path(&mut o);
        let (r, i) = &o;
        // Grid 0,1,2,3,4: the event at exactly t = 2 is included in the sample at 2.
        let g: Vec<i64> = (0..5).map(|p| r.grid_state(p)[0]).collect();
        assert_eq!(g, vec![3, 4, 2, 2, 2]);
        // Window [1, 4]: 4 on [1, 2) and 2 on [2, 4].
        assert_eq!(i.x(), &[4.0 + 2.0 * 2.0]);
        assert_eq!(i.x2(), &[16.0 + 4.0 * 2.0]);
        // The firing at 0.5 is before the window; the one at 2 (k = 2) is in the window and
        // in the first half [1, 2.5).
        assert_eq!(r.firings(), &[0, 2]);
        assert_eq!(r.firings_first_half(), &[0, 2]);
    }

    #[test]
    fn a_firing_at_the_window_start_counts_and_grid_edges_hold() {
        let k = kernel();
        let mut o = observers(&k);
        o.start(&[3]);
        o.reach(1.0, &[3]);
        o.fire(1.0, 0, 1);
        o.moved(1.0, 0, 3, 1);
        o.reach(2.5, &[4]);
        o.fire(2.5, 1, 1);
        o.moved(2.5, 0, 4, -1);
        o.finish(4.0, &[3]);
        assert_eq!(o.0.firings(), &[1, 1]);
        // t = 2.5 is the midpoint: not in the first half.
        assert_eq!(o.0.firings_first_half(), &[1, 0]);
        let g: Vec<i64> = (0..5).map(|p| o.0.grid_state(p)[0]).collect();
        assert_eq!(g, vec![3, 4, 4, 3, 3]);
        // 4 on [1, 2.5), 3 on [2.5, 4].
        assert_eq!(o.1.x(), &[4.0 * 1.5 + 3.0 * 1.5]);
    }

    #[test]
    fn restart_clears_everything() {
        let k = kernel();
        let mut o = observers(&k);
        hand_path(&mut o);
        o.start(&[5]);
        o.finish(4.0, &[5]);
        assert_eq!(o.0.firings(), &[0, 0]);
        assert_eq!(o.1.x(), &[15.0]);
        assert_eq!(o.1.x2(), &[75.0]);
        assert_eq!(o.0.grid_state(4), &[5]);
    }

    #[test]
    fn grid_times_are_even_and_end_exactly() {
        assert_eq!(grid_times(1.0, 5), vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        assert_eq!(grid_times(0.3, 4)[3], 0.3);
        assert!(grid_times(1.0, 0).is_empty());
    }
}
