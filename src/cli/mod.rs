//! Command-line definitions (clap) and the thin glue from each command to the library.
//!
//! What the user typed lives here and nowhere else: each command turns its flags into the
//! library's own option types, calls the library, and hands the result to `report`.

mod check;
mod distribution;
mod export;
mod merge;
mod noise;
mod reconcile;
mod simulate;
mod steady;
mod sweep;
mod values;

use crate::error::Result;
use clap::{Parser, Subcommand};

const ABOUT: &str = "Stochastic molecular-level simulation of endocrine and pharmacological \
feedback loops, reconciled with the deterministic (Langmuir / Michaelis-Menten) description.";

const CAUTION: &str = "copyloop is a research instrument. Its output is not a basis for \
diagnosis or treatment of any person; clinical decisions belong to licensed clinical practice.";

#[derive(Debug, Parser)]
#[command(name = "copyloop", version, about = ABOUT, long_about = None, after_help = CAUTION)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Compile a network and print species, reactions, stoichiometry, conservation laws and motifs
    #[command(after_help = CAUTION)]
    Check(check::CheckArgs),
    /// Run replicate trajectories and report final states, time averages, firings and a grid
    #[command(after_help = CAUTION)]
    Simulate(simulate::SimulateArgs),
    /// Deterministic steady state reached from the initial state: amounts, fluxes, stability
    #[command(after_help = CAUTION)]
    Steady(steady::SteadyArgs),
    /// Carrier-motif fluxes of an exact ensemble against the Langmuir-form, total-QSSA and ODE
    /// predictions; observed levels, sensitivities and fits
    #[command(after_help = CAUTION)]
    Reconcile(reconcile::ReconcileArgs),
    /// Stationary mean, variance, CV and Fano factor of every species beside the linear-noise
    /// prediction, optionally at several volumes
    #[command(after_help = CAUTION)]
    Noise(noise::NoiseArgs),
    /// Exact distributions by finite state projection: marginals, mean, variance, Fano factor
    /// and p(0) of every species on a time grid, or the stationary law, with an error bound
    #[command(after_help = CAUTION)]
    Distribution(distribution::DistributionArgs),
    /// Run a task at many parameter points: resumable, shardable, one JSON line per point
    #[command(after_help = CAUTION)]
    Sweep(sweep::SweepArgs),
    /// Merge sweep shards into one sweep file, ordered by point
    #[command(after_help = CAUTION)]
    Merge(merge::MergeArgs),
    /// Write the network as SBML Level 3 Version 2
    #[command(after_help = CAUTION)]
    Export(export::ExportArgs),
}

/// Runs one parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Check(a) => check::run(&a),
        Command::Simulate(a) => {
            simulate::run(&a).map_err(|e| values::with_flags(e, values::SIMULATE_FLAGS))
        }
        Command::Steady(a) => steady::run(&a),
        Command::Reconcile(a) => {
            reconcile::run(&a).map_err(|e| values::with_flags(e, values::STATIONARY_FLAGS))
        }
        Command::Noise(a) => {
            noise::run(&a).map_err(|e| values::with_flags(e, values::STATIONARY_FLAGS))
        }
        Command::Distribution(a) => distribution::run(&a),
        Command::Sweep(a) => sweep::run(a),
        Command::Merge(a) => merge::run(&a),
        Command::Export(a) => export::run(&a),
    }
}

/// Writes `text` to stdout, treating a closed pipe (`| head`) as success.
pub(crate) fn print_stdout(text: &str) -> Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(crate::Error::io("stdout", e)),
        _ => Ok(()),
    }
}

/// Prints a JSON document on stdout.
pub(crate) fn print_json(value: &serde_json::Value) -> Result<()> {
    let mut text = serde_json::to_string_pretty(value)
        .map_err(|e| crate::Error::Internal(format!("JSON encoding failed: {e}")))?;
    text.push('\n');
    print_stdout(&text)
}

/// Prints a network's compile warnings on stderr.
pub(crate) fn print_warnings(net: &crate::Network) {
    for w in &net.warnings {
        let text = w.to_string();
        eprintln!("{text}\n");
    }
}
