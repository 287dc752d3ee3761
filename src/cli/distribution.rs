//! `copyloop distribution FILE --t-end T`: exact distributions by finite state projection.

use crate::distribution::{self, compare, Options};
use crate::error::{Error, Result};
use crate::network::{load, Overrides};
use crate::report;
use crate::report::distribution::Results;
use clap::Args;

#[derive(Debug, Args)]
pub struct DistributionArgs {
    /// Network file (.crn)
    pub file: String,
    /// End of the time grid (bare: seconds; required unless --stationary)
    #[arg(long, value_name = "T", value_parser = super::values::time, allow_negative_numbers = true)]
    pub t_end: Option<f64>,
    /// Grid points evenly spaced from 0 to T inclusive
    #[arg(long, default_value_t = 51, value_name = "K")]
    pub grid: usize,
    /// Species to report (default: all)
    #[arg(long, value_delimiter = ',', value_name = "X,…")]
    pub species: Vec<String>,
    /// Also solve for the stationary law (unique closed class required)
    #[arg(long)]
    pub stationary: bool,
    /// Bound on the projection's error: the probability allowed to leave it
    #[arg(long, default_value_t = distribution::DEFAULT_TOLERANCE, value_name = "E")]
    pub tolerance: f64,
    /// Largest projection accepted (default: sized to the memory available, at most 10^7)
    #[arg(long, value_name = "N")]
    pub max_states: Option<usize>,
    /// Threads for the sparse products (default: all cores)
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Print one JSON document instead of the table
    #[arg(long)]
    pub json: bool,
    /// Write the marginals as CSV (time_s,species,count,probability)
    #[arg(long, value_name = "F.csv")]
    pub out: Option<String>,
    /// Draw the marginal of the first reported species (that has one) at --svg-times to this SVG file
    #[arg(long, value_name = "FILE")]
    pub svg: Option<String>,
    /// Times drawn in the SVG (nearest grid points; bare: seconds; default: the last)
    #[arg(long, value_delimiter = ',', value_name = "T1,…", value_parser = super::values::time)]
    pub svg_times: Vec<f64>,
    /// Run this many direct-method replicates to each drawn time and show their histogram
    #[arg(long, default_value_t = 0, value_name = "N")]
    pub ensemble: u64,
    /// Master seed of that ensemble
    #[arg(long, default_value_t = 0, value_name = "S")]
    pub seed: u64,
}

pub fn run(a: &DistributionArgs) -> Result<()> {
    if a.t_end.is_none() && !a.stationary {
        return Err(Error::usage(
            "give --t-end T for the distribution on a time grid, --stationary for the stationary law, or both",
        ));
    }
    if let Some(t) = a.t_end {
        if !(t > 0.0 && t.is_finite()) {
            return Err(Error::usage(format!(
                "--t-end must be a finite time above 0 seconds, got {}",
                crate::numbers::round_trip(t)
            )));
        }
    }
    if a.grid < 2 {
        return Err(Error::usage(format!(
            "--grid must be at least 2 (the points 0 and t-end), got {}",
            a.grid
        )));
    }
    if a.threads == Some(0) {
        return Err(Error::usage("--threads must be at least 1"));
    }
    let net = load(&a.file, &Overrides::default())?;
    super::print_warnings(&net);
    let species = if a.species.is_empty() {
        None
    } else {
        Some(
            a.species
                .iter()
                .map(|name| {
                    net.species_index(name.trim()).ok_or_else(|| {
                        Error::usage(format!(
                            "--species: no species `{}` in {}",
                            name.trim(),
                            net.file
                        ))
                    })
                })
                .collect::<Result<Vec<_>>>()?,
        )
    };
    let opts = Options {
        tolerance: a.tolerance,
        max_states: a
            .max_states
            .unwrap_or_else(distribution::default_max_states),
        threads: a.threads,
        species: species.clone(),
        bounds: None,
    };
    let times: Vec<f64> = a.t_end.map_or_else(Vec::new, |t| {
        (0..a.grid)
            .map(|i| t * i as f64 / (a.grid - 1) as f64)
            .collect()
    });
    let transient = if times.is_empty() {
        None
    } else {
        Some(distribution::transient(&net, &times, &opts)?)
    };
    let stationary = if a.stationary {
        Some(distribution::stationary(&net, &opts)?)
    } else {
        None
    };
    // The first reported species whose marginal is computed (an accumulating one has none).
    let has_marginal = |name: &str| {
        transient
            .as_ref()
            .and_then(|t| t.species.get(name))
            .map(|l| !l.accumulates)
            .or(stationary
                .as_ref()
                .and_then(|s| s.species.get(name))
                .map(|l| !l.accumulates))
            .unwrap_or(false)
    };
    let reported = species.unwrap_or_else(|| (0..net.species.len()).collect());
    let drawn = reported
        .iter()
        .copied()
        .find(|&i| has_marginal(&net.species[i].name));
    let at: Vec<usize> = if times.is_empty() {
        Vec::new()
    } else if a.svg_times.is_empty() {
        vec![times.len() - 1]
    } else {
        a.svg_times
            .iter()
            .map(|&t| {
                (0..times.len())
                    .min_by(|&i, &j| (times[i] - t).abs().total_cmp(&(times[j] - t).abs()))
                    .expect("a grid")
            })
            .collect()
    };
    let mut histograms = Vec::new();
    if let (Some(drawn), true, true) = (drawn, a.ensemble > 0, a.svg.is_some()) {
        for &i in at.iter().filter(|&&i| times[i] > 0.0) {
            histograms.push(compare::ensemble_histogram(
                &net, drawn, times[i], a.ensemble, a.seed, a.threads,
            )?);
        }
    }
    let results = Results {
        file: &net.file,
        transient: transient.as_ref(),
        stationary: stationary.as_ref(),
        histograms: &histograms,
    };
    if let Some(path) = &a.out {
        std::fs::write(path, report::distribution::csv(&results))
            .map_err(|e| Error::io(path.clone(), e))?;
    }
    if let (Some(path), Some(drawn)) = (&a.svg, drawn) {
        let name = &net.species[drawn].name;
        std::fs::write(path, report::distribution::svg(&results, name, &at))
            .map_err(|e| Error::io(path.clone(), e))?;
    }
    if a.json {
        super::print_json(&report::distribution::json(&results))?;
    } else {
        super::print_stdout(&report::distribution::table(&results))?;
    }
    if let (Some(path), None) = (&a.svg, drawn) {
        return Err(Error::usage(format!(
            "--svg {path}: no reported species has a computed distribution (a species that only \
             accumulates is left out of the state space); name another species with --species"
        )));
    }
    Ok(())
}
