//! `copyloop simulate FILE --t-end T`: a replicate ensemble of one network.

use crate::distribution::{self, compare};
use crate::ensemble::{self, EnsembleSpec, Method};
use crate::error::{Error, Result};
use crate::network::{load, Overrides};
use crate::report;
use clap::{Args, ValueEnum};
use std::io::IsTerminal;

/// The simulation method as typed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum MethodArg {
    /// Exact Gillespie direct method; cost grows with the number of events
    Direct,
    /// Approximate tau-leaping (Cao-Gillespie-Petzold 2006 step selection, error set by
    /// --epsilon); counts never go negative; far fewer steps than events at large copy numbers
    Tau,
    /// Tau-leaping (error set by --epsilon) only where a leap replaces about 100 events or
    /// more, exact steps elsewhere
    Auto,
    /// The deterministic time course (rate equations, RODAS4), on the same grid
    Ode,
}

#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// Network file (.crn)
    pub file: String,
    /// End time of every trajectory: a time such as 600, 10min or 2h (bare: seconds)
    #[arg(long, value_name = "T", value_parser = super::values::time, allow_negative_numbers = true)]
    pub t_end: f64,
    /// Number of independent trajectories
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub replicates: u64,
    /// Simulation method
    #[arg(long, value_enum, default_value_t = MethodArg::Direct)]
    pub method: MethodArg,
    /// Tau-leaping error control for tau and auto (relative change of a reactant per leap)
    #[arg(long, default_value_t = 0.03, value_name = "E")]
    pub epsilon: f64,
    /// Sample points evenly spaced from 0 to T inclusive
    #[arg(long, default_value_t = 101, value_name = "K")]
    pub grid: usize,
    /// Start of the window for firing counts and time averages (bare: seconds)
    #[arg(long, default_value = "0", value_name = "T0", value_parser = super::values::time, allow_negative_numbers = true)]
    pub window: f64,
    /// Write the grid (mean and sd of every species at every sample time) as CSV
    #[arg(long, value_name = "F.csv")]
    pub out: Option<String>,
    /// Master seed; replicate r draws from a stream fixed by (seed, r)
    #[arg(long, default_value_t = 0, value_name = "S")]
    pub seed: u64,
    /// Worker threads (default: all cores); results do not depend on it
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Print one JSON document instead of the table
    #[arg(long)]
    pub json: bool,
    /// Compare the grid with the exact distribution (finite state projection, where the
    /// network fits): the Z and Y statistics of the discrete stochastic test suite
    #[arg(long)]
    pub exact: bool,
    /// Also draw the time course (mean ± SD band per species) to this SVG file
    #[arg(long, value_name = "F.svg")]
    pub svg: Option<String>,
    /// Species the SVG shows, comma-separated (default: every species that is not clamped)
    #[arg(long, value_name = "X,Y", value_delimiter = ',', requires = "svg")]
    pub species: Vec<String>,
}

impl SimulateArgs {
    /// The ensemble this command line asks for.
    pub fn spec(&self) -> EnsembleSpec {
        EnsembleSpec {
            replicates: self.replicates,
            seed: self.seed,
            t_end: self.t_end,
            grid_points: self.grid,
            window: self.window,
            threads: self.threads,
            keep_finals: false,
            progress: std::io::stderr().is_terminal(),
            method: match self.method {
                MethodArg::Direct => Method::Direct,
                MethodArg::Tau => Method::Tau {
                    epsilon: self.epsilon,
                },
                MethodArg::Auto => Method::Auto {
                    epsilon: self.epsilon,
                },
                MethodArg::Ode => Method::Direct,
            },
            first_replicate: 0,
            initial: None,
        }
    }
}

/// The deterministic time course on the grid this command line asks for.
fn ode(a: &SimulateArgs, net: &crate::Network) -> Result<(crate::deterministic::Trajectory, f64)> {
    if a.exact {
        return Err(Error::usage(
            "--exact compares an ensemble with the exact distribution; --method ode runs no ensemble",
        ));
    }
    let spec = a.spec();
    spec.validate()?;
    let times = crate::kernel::observe::grid_times(spec.t_end, spec.grid_points);
    let started = std::time::Instant::now();
    let tr = crate::deterministic::integrate(net, None, &times, &Default::default())?;
    Ok((tr, started.elapsed().as_secs_f64()))
}

/// What the options mean, for a sweep's fingerprint (the sweep owns the seed, the threads and
/// the output files).
pub(crate) fn identity(a: &SimulateArgs) -> Result<serde_json::Value> {
    let method = match a.method {
        MethodArg::Ode => serde_json::json!({"name": "ode"}),
        MethodArg::Direct => serde_json::json!({"name": "direct"}),
        MethodArg::Tau => serde_json::json!({"name": "tau", "epsilon": a.epsilon}),
        MethodArg::Auto => serde_json::json!({"name": "auto", "epsilon": a.epsilon}),
    };
    Ok(serde_json::json!({
        "t_end": a.t_end,
        "replicates": a.replicates,
        "method": method,
        "grid_points": a.grid,
        "window": a.window,
        "exact": a.exact,
    }))
}

/// The `--json` document for one sweep point.
pub(crate) fn document(a: &SimulateArgs, p: &crate::sweep::Point) -> Result<serde_json::Value> {
    if a.method == MethodArg::Ode {
        let (tr, wall) = ode(a, p.net)?;
        return Ok(report::simulate::ode_json(p.net, &tr, a.t_end, wall));
    }
    let spec = EnsembleSpec {
        seed: p.seed,
        threads: Some(p.threads),
        progress: false,
        ..a.spec()
    };
    let result = ensemble::run(p.net, &spec)
        .map_err(|e| super::values::with_flags(e, super::values::SIMULATE_FLAGS))?;
    let compared = a.exact.then(|| exact(p.net, &result, Some(p.threads)));
    Ok(report::simulate::json_with_exact(
        p.net,
        &result,
        compared.as_ref(),
    ))
}

/// `--exact`: the grid against the transient law, with the defaults of `copyloop distribution`.
fn exact(
    net: &crate::Network,
    result: &ensemble::EnsembleResult,
    threads: Option<usize>,
) -> std::result::Result<compare::ExactComparison, String> {
    let opts = distribution::Options {
        threads,
        ..distribution::Options::default()
    };
    distribution::transient(net, &result.grid_times, &opts)
        .map(|law| compare::compare(net, &law, result))
        .map_err(|e| e.to_string())
}

/// The species `--species` names, in the order given (default: the non-clamped ones); an
/// unknown name is refused before anything runs.
fn plotted(a: &SimulateArgs, net: &crate::Network) -> Result<Vec<usize>> {
    if a.species.is_empty() {
        return Ok(report::simulate::default_species(net));
    }
    a.species
        .iter()
        .map(|name| {
            let name = name.trim();
            net.species_index(name).ok_or_else(|| {
                let known: Vec<&str> = net.species.iter().map(|s| s.name.as_str()).collect();
                Error::usage(format!(
                    "--species: {name:?} is not a species of {}; it has {}",
                    net.file,
                    known.join(", ")
                ))
            })
        })
        .collect()
}

/// Adds an imported model's symbols (`doc`) to a grid, with its units and what is left out.
fn add_model(
    net: &crate::Network,
    doc: &crate::sbml::Document,
    grid: &report::simulate::ModelGrid,
    series: &mut report::schema::Named<report::simulate::Series>,
) -> Result<(report::simulate::ModelUnits, Option<String>)> {
    let out = crate::sbml::output::Output::new(doc, net).map_err(Error::usage)?;
    Ok(report::simulate::model_series(net, &out, grid, series))
}

/// Writes `text` to `path`.
fn write(path: &str, text: String) -> Result<()> {
    std::fs::write(path, text).map_err(|e| Error::io(path.to_string(), e))
}

pub fn run(a: &SimulateArgs) -> Result<()> {
    let spec = a.spec();
    spec.validate()?;
    // An imported model's JSON grid also reports its own symbols by id, from its document.
    let (net, sbml) = if a.json && crate::sbml::is_sbml_path(&a.file) {
        let (net, doc) = crate::sbml::load_with_document(&a.file, &Overrides::default())?;
        (net, Some(doc))
    } else {
        (load(&a.file, &Overrides::default())?, None)
    };
    super::print_warnings(&net);
    let species = plotted(a, &net)?;
    if a.method == MethodArg::Ode {
        let (tr, wall) = ode(a, &net)?;
        if let Some(path) = &a.svg {
            write(path, report::simulate::ode_svg(&net, &tr, &species))?;
        }
        if let Some(path) = &a.out {
            std::fs::write(path, report::simulate::ode_csv(&net, &tr))
                .map_err(|e| Error::io(path.clone(), e))?;
        }
        return if a.json {
            let mut d = report::simulate::ode_document(&net, &tr, a.t_end, wall);
            if let Some(doc) = &sbml {
                let grid = report::simulate::ModelGrid::ode(&net, &tr);
                let (units, note) = add_model(&net, doc, &grid, &mut d.grid.series)?;
                d.model_units = Some(units);
                d.model_note = note;
            }
            super::print_json(&report::schema::to_value(&d))
        } else {
            super::print_stdout(&report::simulate::ode_table(&net, &tr, a.t_end, wall))
        };
    }
    let result = ensemble::run(&net, &spec)?;
    let exact = a.exact.then(|| exact(&net, &result, a.threads));
    if let Some(path) = &a.out {
        std::fs::write(path, report::simulate::csv(&net, &result))
            .map_err(|e| Error::io(path.clone(), e))?;
    }
    if let Some(path) = &a.svg {
        write(
            path,
            report::simulate::svg(&net, (&result).into(), &species),
        )?;
    }
    if a.json {
        let mut d = report::simulate::document_with_exact(&net, &result, exact.as_ref());
        if let Some(doc) = &sbml {
            let grid = report::simulate::ModelGrid::ensemble(&net, &result);
            let (units, note) = add_model(&net, doc, &grid, &mut d.grid.series)?;
            d.model_units = Some(units);
            d.model_note = note;
        }
        super::print_json(&report::schema::to_value(&d))
    } else {
        let mut text = report::simulate::table(&net, &result);
        if let Some(e) = &exact {
            text.push_str(&report::simulate::exact_table(e));
        }
        super::print_stdout(&text)
    }
}
