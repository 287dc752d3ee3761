//! `copyloop noise FILE`: stationary mean, variance, CV and Fano factor of every species from
//! the ensemble, beside the linear-noise prediction, optionally at several volumes.

use crate::error::{Error, Result};
use crate::network::{load, parser::parse_quantity, Dim, Overrides};
use crate::noise::{self, Options};
use crate::report;
use clap::Args;
use std::io::IsTerminal;

#[derive(Debug, Args)]
pub struct NoiseArgs {
    /// Network file (.crn)
    pub file: String,
    /// Replicate trajectories per volume
    #[arg(long, default_value_t = 100)]
    pub replicates: u64,
    /// End time of each trajectory, e.g. 3600 or 1h (bare: seconds; default: burn-in + 20
    /// relaxation times)
    #[arg(long, value_parser = super::values::time, allow_negative_numbers = true)]
    pub t_end: Option<f64>,
    /// Statistics are taken over [burn-in, t-end] (default: 5 relaxation times, reported)
    #[arg(long, value_parser = super::values::time, allow_negative_numbers = true)]
    pub burn_in: Option<f64>,
    /// Repeat at these volumes, e.g. 0.1pL,1pL,10pL: amounts given as concentrations keep
    /// their concentration, amounts given in molecules keep their count, rate constants keep k
    #[arg(long, value_delimiter = ',', value_name = "V1,V2,…")]
    pub volumes: Vec<String>,
    /// Most states of the exact stationary law solved beside the ensemble (finite state
    /// projection; its columns are left out when the law needs more); 0 skips it
    #[arg(long, value_name = "N", default_value_t = crate::distribution::EMBEDDED_MAX_STATES)]
    pub exact_states: usize,
    /// Master seed; the same seed gives the same numbers whatever the thread count
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Worker threads (default: all cores)
    #[arg(long)]
    pub threads: Option<usize>,
    /// Print one JSON document instead of the table
    #[arg(long)]
    pub json: bool,
    /// Also draw CV against mean copy number (log–log; each point labelled with species and
    /// volume, with its 95 % interval; the linear-noise CV and the 1/√N line) to this SVG file
    #[arg(long, value_name = "FILE")]
    pub svg: Option<String>,
}

/// A volume given on the command line, in litres.
fn volume(text: &str) -> Result<f64> {
    let (q, unit) =
        parse_quantity(text.trim()).map_err(|e| Error::usage(format!("--volumes {text}: {e}")))?;
    if unit.is_none() || q.dim != Dim::VOLUME || !(q.value > 0.0 && q.value.is_finite()) {
        return Err(Error::usage(format!(
            "--volumes {text}: expected a positive volume with its unit, e.g. 1pL or 2 fL"
        )));
    }
    Ok(q.value)
}

fn options(a: &NoiseArgs) -> Result<Options> {
    let volumes = a
        .volumes
        .iter()
        .map(|v| volume(v))
        .collect::<Result<Vec<_>>>()?;
    let opts = Options {
        replicates: a.replicates,
        seed: a.seed,
        threads: a.threads,
        t_end: a.t_end,
        burn_in: a.burn_in,
        volumes,
        exact_states: a.exact_states,
        progress: std::io::stderr().is_terminal(),
    };
    Ok(opts)
}

/// What the options mean, for a sweep's fingerprint (the sweep owns the seed, the threads and
/// the output files): volumes in litres, however they were written.
pub(crate) fn identity(a: &NoiseArgs) -> Result<serde_json::Value> {
    let o = options(a)?;
    Ok(serde_json::json!({
        "replicates": o.replicates,
        "t_end": o.t_end,
        "burn_in": o.burn_in,
        "volumes": o.volumes,
        "exact_states": o.exact_states,
    }))
}

/// The `--json` document for one sweep point.
pub(crate) fn document(a: &NoiseArgs, p: &crate::sweep::Point) -> Result<serde_json::Value> {
    let opts = Options {
        seed: p.seed,
        threads: Some(p.threads),
        progress: false,
        ..options(a)?
    };
    let result = noise::noise(p.net, &opts)
        .map_err(|e| super::values::with_flags(e, super::values::STATIONARY_FLAGS))?;
    Ok(report::noise::json(&result))
}

/// Prints, for each `--volumes` value, the warnings the network gets there and not in its own
/// volume (amounts rounded to whole molecules), as a sweep over `volume` does.
fn rounding_warnings(net: &crate::Network, volumes: &[f64]) -> Result<()> {
    for &v in volumes {
        let at = net.with_overrides(&Overrides {
            rescale_volume: Some(v),
            ..Overrides::default()
        })?;
        for w in at.warnings.iter().filter(|w| !net.warnings.contains(w)) {
            let text = w.to_string();
            eprintln!("at volume {} L: {text}\n", crate::numbers::plain(v));
        }
    }
    Ok(())
}

pub fn run(a: &NoiseArgs) -> Result<()> {
    let net = load(&a.file, &Overrides::default())?;
    super::print_warnings(&net);
    let opts = options(a)?;
    rounding_warnings(&net, &opts.volumes)?;
    let result = noise::noise(&net, &opts)?;
    if let Some(path) = &a.svg {
        std::fs::write(path, report::noise::svg(&result)).map_err(|e| Error::io(path, e))?;
    }
    if a.json {
        super::print_json(&report::noise::json(&result))
    } else {
        super::print_stdout(&report::noise::table(&result))
    }
}
