//! The exact distribution beside an ensemble: histograms of replicate states at chosen times,
//! and the discrete stochastic test suite's statistics of an ensemble grid against the exact
//! means and standard deviations (Evans, Gillespie & Wilkinson 2008, Bioinformatics
//! 24(2):285 \[verified\]):
//!
//! ```text
//! Z_t = √n·(x̄_t − μ_t)/σ_t                       (≈ N(0, 1) for a correct simulator)
//! Y_t = √(n/2)·(S²_t/σ²_t − 1),  S²_t = (1/n)·Σ (x_t⁽ⁱ⁾ − μ_t)²   (≈ N(0, 1))
//! ```
//!
//! S²_t is recovered from the ensemble's mean x̄ and unbiased variance s² as
//! ((n − 1)/n)·s² + (x̄ − μ)². Where σ_t = 0 both are undefined (NaN, null in JSON).

use super::{Named, Transient};
use crate::ensemble::{self, EnsembleResult, EnsembleSpec};
use crate::network::Network;
use schemars::JsonSchema;
use serde::Serialize;

/// An ensemble's histogram of one species at one time.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct Histogram {
    pub species: String,
    pub time: f64,
    pub replicates: u64,
    pub seed: u64,
    /// Relative frequency of each count, index = count.
    pub frequencies: Vec<f64>,
}

/// Relative frequencies of one species' count over `replicates` direct-method trajectories
/// run to `t` (> 0).
pub fn ensemble_histogram(
    net: &Network,
    species: usize,
    t: f64,
    replicates: u64,
    seed: u64,
    threads: Option<usize>,
) -> crate::Result<Histogram> {
    let spec = EnsembleSpec {
        replicates,
        seed,
        threads,
        keep_finals: true,
        grid_points: 2,
        ..EnsembleSpec::new(t)
    };
    let r = ensemble::run(net, &spec)?;
    let finals = r.finals.unwrap_or_default();
    let top = finals.iter().map(|x| x[species]).max().unwrap_or(0).max(0) as usize;
    let mut h = vec![0.0; top + 1];
    for x in &finals {
        h[x[species].max(0) as usize] += 1.0;
    }
    let n = finals.len().max(1) as f64;
    Ok(Histogram {
        species: net.species[species].name.clone(),
        time: t,
        replicates,
        seed,
        frequencies: h.into_iter().map(|c| c / n).collect(),
    })
}

/// One species: the exact moments and the two statistics at every grid time.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct SpeciesComparison {
    pub exact_mean: Vec<f64>,
    pub exact_sd: Vec<f64>,
    pub z: Vec<f64>,
    pub y: Vec<f64>,
    /// Largest |Z_t| and |Y_t| over the times where σ_t > 0.
    pub max_abs_z: f64,
    pub max_abs_y: f64,
    /// Times where |Z_t| ≥ 3 and where |Y_t| ≥ 5 (the suite's thresholds for evidence of an
    /// error).
    pub z_outside_3: usize,
    pub y_outside_5: usize,
}

/// An ensemble grid against the exact transient law on the same times.
#[derive(Clone, Debug, Serialize, JsonSchema, PartialEq)]
pub struct ExactComparison {
    pub replicates: u64,
    pub truncation_error: f64,
    pub states: usize,
    pub times: Vec<f64>,
    pub species: Named<SpeciesComparison>,
}

/// Z_t and Y_t of every species the exact law reports (the ensemble's grid times must be the
/// exact law's times).
pub fn compare(net: &Network, exact: &Transient, ens: &EnsembleResult) -> ExactComparison {
    let n = ens.spec.replicates as f64;
    let species = exact
        .species
        .0
        .iter()
        .filter_map(|(name, law)| {
            let i = net.species_index(name)?;
            let sd: Vec<f64> = law.variance.iter().map(|v| v.max(0.0).sqrt()).collect();
            let mut z = Vec::with_capacity(sd.len());
            let mut y = Vec::with_capacity(sd.len());
            for (p, (&mu, &sigma)) in law.mean.iter().zip(&sd).enumerate() {
                let w = &ens.grid[p][i];
                if sigma > 0.0 {
                    let s2 = (n - 1.0) / n * w.variance() + (w.mean() - mu).powi(2);
                    z.push(n.sqrt() * (w.mean() - mu) / sigma);
                    y.push((n / 2.0).sqrt() * (s2 / (sigma * sigma) - 1.0));
                } else {
                    z.push(f64::NAN);
                    y.push(f64::NAN);
                }
            }
            let finite = |v: &[f64]| {
                v.iter()
                    .filter(|x| x.is_finite())
                    .map(|x| x.abs())
                    .fold(0.0, f64::max)
            };
            Some((
                name.clone(),
                SpeciesComparison {
                    max_abs_z: finite(&z),
                    max_abs_y: finite(&y),
                    z_outside_3: z.iter().filter(|x| x.abs() >= 3.0).count(),
                    y_outside_5: y.iter().filter(|x| x.abs() >= 5.0).count(),
                    exact_mean: law.mean.clone(),
                    exact_sd: sd,
                    z,
                    y,
                },
            ))
        })
        .collect();
    ExactComparison {
        replicates: ens.spec.replicates,
        truncation_error: exact.truncation_error,
        states: exact.states,
        times: exact.times.clone(),
        species: Named(species),
    }
}
