//! Planning an ensemble that measures stationary behaviour (for `reconcile` and `noise`): where
//! each replicate starts, how long it burns in, and how long it is measured.
//!
//! Replicates start at the deterministic steady state rounded to whole molecules, with every
//! conservation law kept exactly, so that only the fluctuations have to build up. The slowest
//! relaxation time τ = 1/min|Re λ| over the eigenvalues λ of the reduced Jacobian at the steady
//! state sets the clock: fluctuations relax like e^(−t/τ) (linear noise approximation; van Kampen
//! 1976 \[M\]), so a burn-in of [`BURN_IN_TAUS`]·τ leaves e^(−5) ≈ 0.7 % of any start-up offset,
//! and a window of [`WINDOW_TAUS`]·τ holds about that many independent stretches per replicate.

use crate::deterministic::Steady;
use crate::ensemble::EnsembleSpec;
use crate::network::Network;
use schemars::JsonSchema;
use serde::Serialize;

/// Burn-in in units of the slowest relaxation time.
pub const BURN_IN_TAUS: f64 = 5.0;
/// Measurement window in units of the slowest relaxation time.
pub const WINDOW_TAUS: f64 = 20.0;
/// Fewest relaxation times of burn-in and of window for stationary figures to be trusted: after
/// a burn-in of 3τ, e^(−3) ≈ 5 % of a start-up offset in the mean and e^(−6) ≈ 0.25 % of the
/// missing variance remain (linear relaxation; common practice).
pub const RELIABLE_TAUS: f64 = 3.0;

/// Where replicates start.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Start {
    /// The deterministic steady state rounded to whole molecules, conservation laws kept.
    SteadyState,
    /// The file's initial state.
    InitialState,
}

impl Start {
    /// The words the reports use.
    pub fn describe(self) -> &'static str {
        match self {
            Start::SteadyState => "steady state",
            Start::InitialState => "initial state",
        }
    }
}

/// Why copyloop measured over a shorter stretch than its rule asks.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Shortening {
    /// The burn-in and end time the rule asked for (s).
    pub full_burn_in: f64,
    pub full_t_end: f64,
    /// Events each replicate may spend (at the steady state's event rate).
    pub event_budget: f64,
}

/// Where and how long replicates run.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    /// Initial counts of every species.
    pub start: Vec<i64>,
    pub started_from: Start,
    /// Slowest relaxation time τ (s), infinite when no free species relaxes.
    pub relaxation_time: f64,
    pub burn_in: f64,
    pub t_end: f64,
    /// Whether the burn-in was chosen by copyloop rather than given.
    pub burn_in_found: bool,
    /// Set when copyloop chose the times and cut them to stay within its event budget.
    pub shortened: Option<Shortening>,
}

/// How many relaxation times a plan's burn-in and window cover.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Coverage {
    /// burn-in/τ and (t_end − burn-in)/τ (null where τ is unknown).
    pub burn_in_relaxation_times: Option<f64>,
    pub window_relaxation_times: Option<f64>,
    /// Both at least [`RELIABLE_TAUS`]; false also where τ is unknown.
    pub reliable: bool,
}

impl Plan {
    /// The burn-in and window in relaxation times, and whether they are long enough for
    /// stationary figures ([`RELIABLE_TAUS`] each).
    pub fn coverage(&self) -> Coverage {
        let tau = self.relaxation_time;
        if !(tau.is_finite() && tau > 0.0) {
            return Coverage {
                burn_in_relaxation_times: None,
                window_relaxation_times: None,
                reliable: false,
            };
        }
        let b = self.burn_in / tau;
        let w = (self.t_end - self.burn_in) / tau;
        Coverage {
            burn_in_relaxation_times: Some(b),
            window_relaxation_times: Some(w),
            reliable: b >= RELIABLE_TAUS && w >= RELIABLE_TAUS,
        }
    }

    /// The exact ensemble that measures this plan: replicates `first ..` of `seed`, each
    /// starting at [`Plan::start`], measured over [burn-in, t_end], with no grid beyond its ends.
    pub fn ensemble(
        &self,
        replicates: u64,
        first: u64,
        seed: u64,
        threads: Option<usize>,
        progress: bool,
    ) -> EnsembleSpec {
        EnsembleSpec {
            replicates,
            first_replicate: first,
            seed,
            grid_points: 2,
            window: self.burn_in,
            threads,
            progress,
            initial: Some(self.start.clone()),
            ..EnsembleSpec::new(self.t_end)
        }
    }
}

/// The plan as reports show it: `burn_in`, `t_end`, `shortened` and its `reason` (null, or
/// `"event_budget"` with the times the rule asked for), where replicates started, the
/// relaxation time and the coverage.
#[derive(Serialize, JsonSchema)]
pub struct PlanView {
    pub burn_in: f64,
    pub t_end: f64,
    pub shortened: bool,
    pub reason: Option<ShortenReason>,
    #[serde(flatten)]
    pub full: Option<Shortening>,
    pub burn_in_found: bool,
    pub started_from: Start,
    pub relaxation_time: f64,
    #[serde(flatten)]
    pub coverage: Coverage,
}

/// Why a plan is shorter than its rule asks.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum ShortenReason {
    /// The rule's window would have cost more events than the budget allows.
    EventBudget,
}

impl Plan {
    /// What reports print of the plan.
    pub fn view(&self) -> PlanView {
        PlanView {
            burn_in: self.burn_in,
            t_end: self.t_end,
            shortened: self.shortened.is_some(),
            reason: self.shortened.map(|_| ShortenReason::EventBudget),
            full: self.shortened,
            burn_in_found: self.burn_in_found,
            started_from: self.started_from,
            relaxation_time: self.relaxation_time,
            coverage: self.coverage(),
        }
    }
}

impl Serialize for Plan {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        self.view().serialize(s)
    }
}

impl JsonSchema for Plan {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        PlanView::schema_name()
    }

    fn json_schema(generator: &mut schemars::SchemaGenerator) -> schemars::Schema {
        PlanView::json_schema(generator)
    }
}

/// The slowest relaxation time 1/min|Re λ| of a stable steady state.
pub fn relaxation_time(steady: &Steady) -> f64 {
    let slowest = steady
        .eigenvalues
        .iter()
        .map(|l| l.re.abs())
        .filter(|r| *r > 0.0)
        .fold(f64::INFINITY, f64::min);
    1.0 / slowest
}

/// The steady state rounded to whole molecules with every conservation law of the network
/// holding exactly at its initial total; `None` when rounding cannot be repaired simply (then
/// the file's initial state is used).
pub fn integer_start(net: &Network, steady: &Steady) -> Option<Vec<i64>> {
    let x0 = net.initial_state();
    let mut x: Vec<i64> = net
        .species
        .iter()
        .enumerate()
        .map(|(i, s)| {
            if s.clamped {
                s.initial
            } else {
                steady.counts[i].round().max(0.0) as i64
            }
        })
        .collect();
    let laws = &net.conservation_laws;
    let total = |l: &[i64], v: &[i64]| -> i64 { l.iter().zip(v).map(|(a, b)| a * b).sum() };
    for (k, law) in laws.iter().enumerate() {
        let deficit = total(law, &x0) - total(law, &x);
        if deficit == 0 {
            continue;
        }
        // A species in this law alone, with coefficient ±1, absorbs the rounding.
        let own = (0..x.len()).find(|&i| {
            law[i].abs() == 1 && laws.iter().enumerate().all(|(m, l)| m == k || l[i] == 0)
        })?;
        x[own] += deficit * law[own];
        if x[own] < 0 {
            return None;
        }
    }
    laws.iter()
        .all(|l| total(l, &x) == total(l, &x0))
        .then_some(x)
}

/// Events an ensemble may spend by default when the user gives no times (a few seconds of
/// work on two cores).
pub const EVENT_BUDGET: f64 = 6e7;

/// A plan from the steady state and the user's `--burn-in` and `--t-end`, if given. When the
/// times are chosen here and 25 relaxation times would cost more than `max_events` per
/// replicate (at the steady state's event rate), both are shortened in proportion; the
/// stationarity check of the window halves then tells whether that was enough.
pub fn plan(
    net: &Network,
    steady: Option<&Steady>,
    burn_in: Option<f64>,
    t_end: Option<f64>,
    max_events: f64,
) -> Plan {
    let tau = steady.map_or(f64::INFINITY, relaxation_time);
    let start = steady.and_then(|s| integer_start(net, s));
    let started_from = if start.is_some() {
        Start::SteadyState
    } else {
        Start::InitialState
    };
    let start = start.unwrap_or_else(|| net.initial_state());
    // Without a finite relaxation time, fall back to 100 s of burn-in and 400 s of window.
    let mut tau_or = if tau.is_finite() { tau } else { 20.0 };
    let rate: f64 = steady.map_or(0.0, |s| s.fluxes_per_s.iter().map(|f| f.abs()).sum());
    let wanted = (BURN_IN_TAUS + WINDOW_TAUS) * tau_or * rate;
    let mut shortened = None;
    if burn_in.is_none() && t_end.is_none() && wanted > max_events {
        shortened = Some(Shortening {
            full_burn_in: BURN_IN_TAUS * tau_or,
            full_t_end: (BURN_IN_TAUS + WINDOW_TAUS) * tau_or,
            event_budget: max_events,
        });
        tau_or *= max_events / wanted;
    }
    let found = burn_in.is_none();
    let burn_in = burn_in.unwrap_or_else(|| match t_end {
        Some(t) => (BURN_IN_TAUS * tau_or).min(t / 5.0),
        None => BURN_IN_TAUS * tau_or,
    });
    let t_end = t_end.unwrap_or(burn_in + WINDOW_TAUS * tau_or);
    Plan {
        start,
        started_from,
        relaxation_time: tau,
        burn_in,
        t_end,
        burn_in_found: found,
        shortened,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::deterministic::{solve, SteadyOptions};
    use crate::network::{load_source, Overrides};

    #[test]
    fn rounded_start_keeps_conservation_laws() {
        // E + C = 7 and S + C + P held by inflow/outflow: rounding must keep E + C = 7.
        let src = "species E = 7\nspecies S = 0\nspecies C = 0\nspecies P = 0\n\
                   step in 0 -> S @ 3.3\nstep b E + S <-> C @ 0.05, 0.7\nstep c C -> E + P @ 1.1\nstep out P -> 0 @ 0.9\n";
        let net = load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap();
        let st = solve(&net, &SteadyOptions::default()).unwrap();
        let x = integer_start(&net, &st).unwrap();
        assert_eq!(x[0] + x[2], 7);
        for (i, &c) in x.iter().enumerate() {
            assert!(
                (c as f64 - st.counts[i]).abs() <= 1.0,
                "{x:?} vs {:?}",
                st.counts
            );
        }
        // Immigration–death: τ = 1/γ exactly (the only eigenvalue is −γ; common practice).
        let net = load_source(
            "t.crn",
            b"species A = 0\nstep i 0 -> A @ 10\nstep d A -> 0 @ 0.25\n",
            &Overrides::default(),
        )
        .unwrap();
        let st = solve(&net, &SteadyOptions::default()).unwrap();
        assert!((relaxation_time(&st) - 4.0).abs() < 1e-9);
        let p = plan(&net, Some(&st), None, None, f64::INFINITY);
        assert_eq!(p.start, vec![40]);
        assert!((p.burn_in - 20.0).abs() < 1e-9 && (p.t_end - 100.0).abs() < 1e-9);
    }
}
