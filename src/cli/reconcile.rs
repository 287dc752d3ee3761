//! `copyloop reconcile FILE`: ensemble fluxes of every carrier motif against the Langmuir-form,
//! total-QSSA and ODE predictions; observed levels; sensitivities; fits.

use crate::error::{Error, Result};
use crate::network::{load, Overrides};
use crate::reconcile::{self, parse_observation, Options};
use crate::report;
use clap::Args;
use std::io::IsTerminal;

#[derive(Debug, Args)]
pub struct ReconcileArgs {
    /// Network file (.crn)
    pub file: String,
    /// Replicate trajectories (the first batch, with --precision)
    #[arg(long, default_value_t = 200)]
    pub replicates: u64,
    /// End time of each trajectory, e.g. 3600 or 1h (bare: seconds; default: burn-in + 20
    /// relaxation times)
    #[arg(long, value_parser = super::values::time, allow_negative_numbers = true)]
    pub t_end: Option<f64>,
    /// Fluxes and levels are measured over [burn-in, t-end] (default: 5 relaxation times)
    #[arg(long, value_parser = super::values::time, allow_negative_numbers = true)]
    pub burn_in: Option<f64>,
    /// Observed steady level NAME=VALUE[±SD], e.g. H=2nM±0.2nM (`+-` may stand for `±`); repeatable
    #[arg(long, value_name = "NAME=VALUE[±SD]")]
    pub observe: Vec<String>,
    /// Find the value of this param that makes the deterministic level match the first observation
    #[arg(long, value_name = "PARAM")]
    pub fit: Option<String>,
    /// Add replicates in batches until every motif's 95 % half-width is below P × its mean
    #[arg(long, value_name = "P")]
    pub precision: Option<f64>,
    /// Most replicates --precision may use
    #[arg(long, default_value_t = 20_000)]
    pub max_replicates: u64,
    /// A prediction agrees with the ensemble when the 95 % interval of their relative
    /// difference lies within ±REL (0.05: 5 %)
    #[arg(long, default_value_t = reconcile::DEFAULT_TOLERANCE, value_name = "REL")]
    pub tolerance: f64,
    /// Start every replicate from the file's initial state (default: the rounded steady state)
    #[arg(long)]
    pub from_initial: bool,
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
    /// Also draw each motif's ensemble flux with its 95 % interval beside the Langmuir,
    /// total-QSSA and ODE predictions, to this SVG file
    #[arg(long, value_name = "FILE")]
    pub svg: Option<String>,
}

fn options(a: &ReconcileArgs, net: &crate::Network) -> Result<Options> {
    let observations = a
        .observe
        .iter()
        .map(|o| parse_observation(o, net))
        .collect::<Result<Vec<_>>>()?;
    let opts = Options {
        replicates: a.replicates,
        seed: a.seed,
        threads: a.threads,
        t_end: a.t_end,
        burn_in: a.burn_in,
        precision: a.precision,
        max_replicates: a.max_replicates,
        tolerance: a.tolerance,
        observations,
        fit: a.fit.clone(),
        from_initial: a.from_initial,
        exact_states: a.exact_states,
        progress: std::io::stderr().is_terminal(),
    };
    opts.validate()?;
    Ok(opts)
}

/// What the options mean, for a sweep's fingerprint (the sweep owns the seed, the threads and
/// the output files). Observations are read against each point's network, so they enter as
/// written, without surrounding blanks.
pub(crate) fn identity(a: &ReconcileArgs) -> Result<serde_json::Value> {
    Ok(serde_json::json!({
        "replicates": a.replicates,
        "t_end": a.t_end,
        "burn_in": a.burn_in,
        "observations": a.observe.iter().map(|o| o.trim()).collect::<Vec<_>>(),
        "fit": a.fit,
        "precision": a.precision,
        "max_replicates": a.max_replicates,
        "tolerance": a.tolerance,
        "from_initial": a.from_initial,
        "exact_states": a.exact_states,
    }))
}

/// The `--json` document for one sweep point.
pub(crate) fn document(a: &ReconcileArgs, p: &crate::sweep::Point) -> Result<serde_json::Value> {
    let opts = Options {
        seed: p.seed,
        threads: Some(p.threads),
        progress: false,
        ..options(a, p.net)?
    };
    let result = reconcile::reconcile(p.net, &opts)
        .map_err(|e| super::values::with_flags(e, super::values::STATIONARY_FLAGS))?;
    Ok(report::reconcile::json(&result))
}

pub fn run(a: &ReconcileArgs) -> Result<()> {
    let net = load(&a.file, &Overrides::default())?;
    super::print_warnings(&net);
    let opts = options(a, &net)?;
    let r = reconcile::reconcile(&net, &opts)?;
    if let Some(path) = &a.svg {
        std::fs::write(path, report::reconcile::svg(&net, &r)).map_err(|e| Error::io(path, e))?;
    }
    if a.json {
        super::print_json(&report::reconcile::json(&r))
    } else {
        super::print_stdout(&report::reconcile::table(&net, &r))
    }
}
