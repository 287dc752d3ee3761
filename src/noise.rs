//! How noisy is the loop? Stationary mean, variance, coefficient of variation and Fano factor
//! of every species from an exact ensemble, beside the linear-noise prediction, optionally at
//! several volumes with amounts and constants kept as concentrations.
//!
//! Variance is estimated by the law of total variance over replicates r with window averages
//! m_r and within-window variances w_r (from the exact time integrals ∫x dt and ∫x² dt):
//! Var(X) = E[w_r] + Var(m_r) (common practice). CV = √Var/mean, Fano = Var/mean.
//! The linear noise approximation solves J·Σ + Σ·Jᵀ + D = 0 at the deterministic steady state
//! (van Kampen 1976 [M]; Elf & Ehrenberg 2003 [verified]); it is exact for networks of zero-
//! and first-order steps, and its CV falls as 1/√N with copy number N. Where the network fits a
//! finite state projection, the exact stationary law stands beside both
//! ([`crate::distribution`]).

use crate::deterministic::{self, solve, SteadyOptions};
use crate::distribution;
use crate::ensemble;
use crate::network::{Network, Overrides};
use crate::stationary::{self, Plan};
use crate::Result;

#[derive(Clone, Debug)]
pub struct Options {
    pub replicates: u64,
    pub seed: u64,
    pub threads: Option<usize>,
    pub t_end: Option<f64>,
    pub burn_in: Option<f64>,
    /// Volumes (L) to repeat at; empty means the file's own.
    pub volumes: Vec<f64>,
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
            progress: false,
        }
    }
}

/// Stationary noise of one species, counts in molecules.
#[derive(Clone, Debug, PartialEq)]
pub struct SpeciesNoise {
    pub name: String,
    pub clamped: bool,
    pub mean: f64,
    /// Standard error of the mean (over replicates' window averages).
    pub mean_stderr: f64,
    pub variance: f64,
    pub cv: f64,
    pub fano: f64,
    pub lna_mean: f64,
    pub lna_variance: f64,
    pub lna_cv: f64,
    /// The exact stationary law's figures, where the network fits a finite state projection.
    pub exact_mean: Option<f64>,
    pub exact_variance: Option<f64>,
    pub exact_fano: Option<f64>,
}

/// The noise at one volume.
#[derive(Clone, Debug)]
pub struct VolumeNoise {
    pub volume_l: Option<f64>,
    pub omega: f64,
    pub plan: Plan,
    pub replicates: u64,
    pub species: Vec<SpeciesNoise>,
    pub events_total: u64,
    pub wall_seconds: f64,
    /// Why the LNA columns are missing, if they are.
    pub lna_note: Option<String>,
    /// The exact stationary law's truncation figure and states, where it fits.
    pub exact_truncation_error: Option<f64>,
    pub exact_states: Option<usize>,
    /// Why the exact columns are missing, if they are.
    pub exact_note: Option<String>,
}

/// Runs the noise analysis of `net` at each requested volume.
pub fn noise(net: &Network, opts: &Options) -> Result<Vec<VolumeNoise>> {
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
    nets.iter().map(|n| at_volume(n, opts)).collect()
}

fn at_volume(net: &Network, opts: &Options) -> Result<VolumeNoise> {
    let steady = solve(net, &SteadyOptions::default())?;
    let (lna, lna_note) = match deterministic::stationary(net, &steady) {
        Ok(l) => (Some(l), None),
        Err(e) => (None, Some(e.to_string())),
    };
    let (exact, exact_note) = match distribution::stationary_beside(net, opts.threads) {
        Ok(e) => (Some(e), None),
        Err(e) => (None, Some(e.to_string())),
    };
    let plan = stationary::plan(
        net,
        Some(&steady),
        opts.burn_in,
        opts.t_end,
        stationary::EVENT_BUDGET / opts.replicates.max(1) as f64,
    );
    let spec = plan.ensemble(opts.replicates, 0, opts.seed, opts.threads, opts.progress);
    let ens = ensemble::run(net, &spec)?;
    let r = ens.time_average.first().map_or(0, |w| w.count()) as f64;
    let species = net
        .species
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let avg = &ens.time_average[i];
            let mean = avg.mean();
            let between = if r > 1.0 {
                avg.variance() * (r - 1.0) / r
            } else {
                0.0
            };
            let variance = ens.within_variance[i].mean() + between;
            let (lna_mean, lna_variance, lna_cv) = match &lna {
                Some(l) => (l.mean[i], l.variance[i], l.cv[i]),
                None => (steady.counts[i], f64::NAN, f64::NAN),
            };
            let law = exact.as_ref().and_then(|e| e.species.get(&s.name));
            SpeciesNoise {
                exact_mean: law.map(|l| l.mean),
                exact_variance: law.map(|l| l.variance),
                exact_fano: law.map(|l| l.fano),
                name: s.name.clone(),
                clamped: s.clamped,
                mean,
                mean_stderr: avg.stderr(),
                variance,
                cv: variance.sqrt() / mean,
                fano: variance / mean,
                lna_mean,
                lna_variance,
                lna_cv,
            }
        })
        .collect();
    Ok(VolumeNoise {
        volume_l: net.volume_l,
        omega: net.omega,
        plan,
        replicates: opts.replicates,
        species,
        events_total: ens.events_total,
        wall_seconds: ens.wall_seconds,
        lna_note,
        exact_truncation_error: exact.as_ref().map(|e| e.truncation_error),
        exact_states: exact.as_ref().map(|e| e.states),
        exact_note,
    })
}
