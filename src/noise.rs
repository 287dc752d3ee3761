//! How noisy is the loop? Stationary mean, variance, coefficient of variation and Fano factor
//! of every species from an exact ensemble, beside the linear-noise prediction, optionally at
//! several volumes with amounts and constants kept as concentrations.
//!
//! Each replicate r contributes its window average m_r = ∫x dt/T and time-averaged square
//! q_r = ∫x² dt/T (exact time integrals). The variance of X at a random time of the window is,
//! by the law of total variance, Var(X) = E[q_r − m_r²] + Var(m_r), estimated without bias by
//! V = (q̄ − m̄²) + s²_m/R over R replicates (common practice); CV = √V/m̄ and Fano = V/m̄.
//! Their 95 % intervals come from the delta method over the replicates' pairs (m_r, q_r)
//! ([`crate::stats::DeltaEstimate`]): replicates are independent, so the spread of the pairs
//! carries every source of error, correlation along a trajectory included.
//!
//! The linear noise approximation solves J·Σ + Σ·Jᵀ + D = 0 at the deterministic steady state
//! (van Kampen 1976 \[M\]; Elf & Ehrenberg 2003 \[verified\]); it is exact for networks of zero-
//! and first-order steps, and its CV falls as 1/√N with copy number N.
//!
//! The figures are stationary only if the burn-in let the start-up fade and the window covers
//! a few relaxation times ([`crate::stationary::Coverage`]); the plan says so, and says when
//! copyloop shortened its own times to stay within its event budget.

use crate::deterministic::{self, solve, SteadyOptions};
use crate::distribution;
use crate::ensemble;
use crate::network::{Network, Overrides};
use crate::serial::{by_name, molar, Named};
use crate::stationary::{self, Plan};
use crate::stats::{total_variance, Bivariate, DeltaEstimate, Welford};
use crate::Result;
use schemars::JsonSchema;
use serde::Serialize;

#[derive(Clone, Debug)]
pub struct Options {
    pub replicates: u64,
    pub seed: u64,
    pub threads: Option<usize>,
    pub t_end: Option<f64>,
    pub burn_in: Option<f64>,
    /// Volumes (L) to repeat at; empty means the file's own.
    pub volumes: Vec<f64>,
    /// Most states of the exact stationary law solved beside the ensemble (0: none).
    pub exact_states: usize,
    pub progress: bool,
}

impl Default for Options {
    fn default() -> Options {
        Options {
            replicates: 100,
            seed: 0,
            threads: None,
            t_end: None,
            burn_in: None,
            volumes: Vec::new(),
            exact_states: distribution::EMBEDDED_MAX_STATES,
            progress: false,
        }
    }
}

/// Stationary noise of one species, counts in molecules; intervals are two-sided 95 %.
#[derive(Clone, Debug, PartialEq, Serialize, JsonSchema)]
pub struct SpeciesNoise {
    #[serde(skip)]
    pub name: String,
    pub clamped: bool,
    pub mean: f64,
    /// Standard error of the mean (over replicates' window averages).
    pub mean_stderr: f64,
    pub mean_ci95: [f64; 2],
    pub variance: f64,
    pub variance_ci95: [f64; 2],
    pub cv: f64,
    pub cv_ci95: [f64; 2],
    pub fano: f64,
    pub fano_ci95: [f64; 2],
    pub lna_mean: f64,
    pub lna_variance: f64,
    pub lna_cv: f64,
    /// From the exact stationary distribution where the network fits a finite state
    /// projection ([`crate::distribution::stationary_beside`]); null elsewhere.
    pub exact_mean: Option<f64>,
    pub exact_variance: Option<f64>,
    pub exact_fano: Option<f64>,
    pub mean_molar: Option<f64>,
    pub lna_mean_molar: Option<f64>,
}

impl Named for SpeciesNoise {
    fn name(&self) -> &str {
        &self.name
    }
}

/// A species that only accumulates: its rate, deterministic and in the ensemble.
#[derive(Clone, Debug, PartialEq, Serialize, JsonSchema)]
pub struct OutputRate {
    #[serde(skip)]
    pub name: String,
    /// dx/dt at the steady state of the rest (molecules/s).
    pub rate_per_s: f64,
    /// Mean net change over the window per second, with its 95 % interval.
    pub ensemble_rate_per_s: f64,
    pub ensemble_rate_ci95: [f64; 2],
    pub rate_molar_per_s: Option<f64>,
}

impl Named for OutputRate {
    fn name(&self) -> &str {
        &self.name
    }
}

/// The noise at one volume.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct VolumeNoise {
    pub volume_l: Option<f64>,
    /// Ω = N_A·V (null without a volume).
    pub omega: Option<f64>,
    pub plan: Plan,
    pub replicates: u64,
    #[serde(serialize_with = "by_name")]
    #[schemars(with = "std::collections::BTreeMap<String, SpeciesNoise>")]
    pub species: Vec<SpeciesNoise>,
    #[serde(serialize_with = "by_name")]
    #[schemars(with = "std::collections::BTreeMap<String, OutputRate>")]
    pub outputs: Vec<OutputRate>,
    pub events_total: u64,
    pub wall_seconds: f64,
    /// Why the LNA columns are missing, if they are.
    pub lna_note: Option<String>,
    /// The exact stationary law's boundary probability and projection size, where it fits.
    pub exact_truncation_error: Option<f64>,
    pub exact_states: Option<usize>,
    /// Why the exact columns are missing, if they are.
    pub exact_note: Option<String>,
}

/// Everything `copyloop noise` reports.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct NoiseReport {
    pub file: String,
    pub seed: u64,
    pub volumes: Vec<VolumeNoise>,
}

/// The exact stationary law (finite state projection) beside an ensemble of `noise` or
/// `reconcile`, on at most `max_states` states and [`distribution::EMBEDDED_MAX_DIMENSIONS`]
/// independent coordinates, or why there is none. `max_states` 0 skips it: its solve can
/// take seconds where the ensemble takes less (`--exact-states 0`).
pub fn exact_beside(
    net: &Network,
    max_states: usize,
    threads: Option<usize>,
) -> (Option<distribution::Stationary>, Option<String>) {
    if max_states == 0 {
        return (None, Some("not computed (--exact-states 0)".into()));
    }
    match distribution::stationary_beside(net, max_states, threads) {
        Ok(e) => (Some(e), None),
        Err(e) => (None, Some(e.to_string())),
    }
}

/// Runs the noise analysis of `net` at each requested volume.
pub fn noise(net: &Network, opts: &Options) -> Result<NoiseReport> {
    let nets: Vec<Network> = if opts.volumes.is_empty() {
        vec![net.clone()]
    } else {
        opts.volumes
            .iter()
            .map(|&v| {
                net.with_overrides(&Overrides {
                    rescale_volume: Some(v),
                    ..Overrides::default()
                })
            })
            .collect::<Result<_>>()?
    };
    Ok(NoiseReport {
        file: net.file.clone(),
        seed: opts.seed,
        volumes: nets
            .iter()
            .map(|n| at_volume(n, opts))
            .collect::<Result<_>>()?,
    })
}

/// V = (q̄ − m̄²) + s²_m/R, CV and Fano of one species with their delta-method intervals.
struct Moments {
    mean: DeltaEstimate,
    variance: DeltaEstimate,
    cv: DeltaEstimate,
    fano: DeltaEstimate,
}

fn moments(b: &Bivariate) -> Moments {
    let m = b.x().mean();
    let q = b.y().mean();
    let v = total_variance(b);
    let sd = v.sqrt();
    // Gradients in (m̄, q̄) of V = q̄ − m̄², CV = √V/m̄ and F = V/m̄ (the s²_m/R term is of
    // order 1/R and does not enter the first-order error).
    let variance = DeltaEstimate::new(b, v, [-2.0 * m, 1.0]);
    let cv = DeltaEstimate::new(
        b,
        sd / m,
        [-m / (m * sd) - sd / (m * m), 1.0 / (2.0 * m * sd)],
    );
    let fano = DeltaEstimate::new(b, v / m, [-q / (m * m) - 1.0, 1.0 / m]);
    Moments {
        mean: DeltaEstimate::new(b, m, [1.0, 0.0]),
        variance,
        cv,
        fano,
    }
}

fn at_volume(net: &Network, opts: &Options) -> Result<VolumeNoise> {
    let steady = solve(net, &SteadyOptions::default())?;
    let (lna, lna_note) = match deterministic::stationary(net, &steady) {
        Ok(l) => (Some(l), None),
        Err(e) => (None, Some(e.to_string())),
    };
    let (exact, exact_note) = exact_beside(net, opts.exact_states, opts.threads);
    let plan = stationary::plan(
        net,
        Some(&steady),
        opts.burn_in,
        opts.t_end,
        stationary::EVENT_BUDGET / opts.replicates.max(1) as f64,
    );
    let spec = plan.ensemble(opts.replicates, 0, opts.seed, opts.threads, opts.progress);
    let ens = ensemble::run(net, &spec)?;
    let omega = net.volume_l.map(|_| net.omega);
    // Molar figures of each species in its own compartment.
    let own = |i: usize| net.species_molar_omega(i);
    let window = ens.window_length();
    let outputs: Vec<OutputRate> = steady
        .outputs
        .iter()
        .map(|o| {
            let w: &Welford = &ens.window_change[o.species];
            let ci = w.ci95();
            OutputRate {
                name: net.species[o.species].name.clone(),
                rate_per_s: o.rate_per_s,
                ensemble_rate_per_s: w.mean() / window,
                ensemble_rate_ci95: [ci[0] / window, ci[1] / window],
                rate_molar_per_s: molar(o.rate_per_s, own(o.species)),
            }
        })
        .collect();
    let is_output = |i: usize| steady.outputs.iter().any(|o| o.species == i);
    let species = net
        .species
        .iter()
        .enumerate()
        .filter(|&(i, _)| !is_output(i))
        .map(|(i, s)| {
            let mo = moments(&ens.time_moments[i]);
            let (lna_mean, lna_variance, lna_cv) = match &lna {
                Some(l) => (l.mean[i], l.variance[i], l.cv[i]),
                None => (steady.counts[i], f64::NAN, f64::NAN),
            };
            let law = exact.as_ref().and_then(|e| e.species.get(&s.name));
            SpeciesNoise {
                name: s.name.clone(),
                clamped: s.clamped,
                mean: mo.mean.value,
                mean_stderr: mo.mean.stderr,
                mean_ci95: mo.mean.ci95,
                variance: mo.variance.value,
                variance_ci95: mo.variance.ci95,
                cv: mo.cv.value,
                cv_ci95: mo.cv.ci95,
                fano: mo.fano.value,
                fano_ci95: mo.fano.ci95,
                lna_mean,
                lna_variance,
                lna_cv,
                exact_mean: law.map(|l| l.mean),
                exact_variance: law.map(|l| l.variance),
                exact_fano: law.map(|l| l.fano),
                mean_molar: molar(mo.mean.value, own(i)),
                lna_mean_molar: molar(lna_mean, own(i)),
            }
        })
        .collect();
    Ok(VolumeNoise {
        volume_l: net.volume_l,
        omega,
        plan,
        replicates: opts.replicates,
        species,
        outputs,
        events_total: ens.events_total,
        wall_seconds: ens.wall_seconds,
        lna_note,
        exact_truncation_error: exact.as_ref().map(|e| e.truncation_error),
        exact_states: exact.as_ref().map(|e| e.states),
        exact_note,
    })
}
