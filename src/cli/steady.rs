//! `copyloop steady FILE`: the deterministic steady state reached from the initial state.

use crate::deterministic::{self, SteadyOptions};
use crate::error::Result;
use crate::network::{load, Overrides};
use crate::report;
use clap::Args;

#[derive(Debug, Args)]
pub struct SteadyArgs {
    /// Network file (.crn)
    pub file: String,
    /// Print one JSON document instead of the table
    #[arg(long)]
    pub json: bool,
}

/// The `--json` document for one sweep point.
pub(crate) fn document(_: &SteadyArgs, p: &crate::sweep::Point) -> Result<serde_json::Value> {
    let st = deterministic::solve(p.net, &SteadyOptions::default())?;
    Ok(report::steady::json(p.net, &st))
}

pub fn run(a: &SteadyArgs) -> Result<()> {
    let net = load(&a.file, &Overrides::default())?;
    super::print_warnings(&net);
    let st = deterministic::solve(&net, &SteadyOptions::default())?;
    if a.json {
        super::print_json(&report::steady::json(&net, &st))
    } else {
        super::print_stdout(&report::steady::table(&net, &st))
    }
}
