//! The stationary analyses and the exact distributions, each run as its command runs it and
//! returned as the document its `--json` prints: `reconcile`, `noise`, `distribution`.
//!
//! Each runs on a thread of its own with the GIL released while the calling thread looks at
//! Python's signals; a Ctrl-C asks the job's ensembles to stop before their next replicate
//! (`copyloop::ensemble::stoppable`) and raises KeyboardInterrupt as soon as they have.

use copyloop::network::{parser::parse_quantity, Dim};
use copyloop::report::distribution::Results;
use copyloop::{distribution, ensemble, noise, reconcile, report, Error, Network};
use pyo3::prelude::*;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

/// Runs `job` on a scoped thread, with the GIL released, looking at Python's signals between
/// waits that grow from 1 to 50 ms (short jobs return at once). On a signal the job is asked
/// to stop, joined, and the signal's exception (KeyboardInterrupt for Ctrl-C) is raised.
fn interruptible<T: Send>(
    py: Python<'_>,
    job: impl FnOnce() -> copyloop::Result<T> + Send,
) -> PyResult<T> {
    let stop = Arc::new(AtomicBool::new(false));
    std::thread::scope(|s| {
        let flag = stop.clone();
        let handle = s.spawn(move || ensemble::stoppable(flag, job));
        let mut wait = Duration::from_millis(1);
        while !handle.is_finished() {
            py.detach(|| std::thread::sleep(wait));
            wait = (wait * 2).min(Duration::from_millis(50));
            if let Err(e) = py.check_signals() {
                stop.store(true, Ordering::Relaxed);
                py.detach(|| {
                    let _ = handle.join();
                });
                return Err(e);
            }
        }
        match py.detach(|| handle.join()) {
            Ok(r) => r.map_err(crate::errors::to_py),
            Err(_) => Err(pyo3::exceptions::PyRuntimeError::new_err(
                "internal error: the job's thread panicked",
            )),
        }
    })
}

/// What `reconcile` is asked for, as its command's flags.
pub struct ReconcileArgs {
    pub replicates: u64,
    pub t_end: Option<f64>,
    pub burn_in: Option<f64>,
    pub observe: Vec<String>,
    pub fit: Option<String>,
    pub precision: Option<f64>,
    pub max_replicates: u64,
    pub tolerance: f64,
    pub from_initial: bool,
    pub seed: u64,
    pub threads: Option<usize>,
    pub progress: bool,
    /// Most states of the exact stationary law solved beside the ensemble (0: none).
    pub exact_states: usize,
}

/// The `reconcile --json` document.
pub fn reconcile(py: Python<'_>, net: &Network, a: ReconcileArgs) -> PyResult<serde_json::Value> {
    let observations = a
        .observe
        .iter()
        .map(|o| reconcile::parse_observation(o, net))
        .collect::<Result<Vec<_>, Error>>()
        .map_err(crate::errors::to_py)?;
    let opts = reconcile::Options {
        replicates: a.replicates,
        seed: a.seed,
        threads: a.threads,
        t_end: a.t_end,
        burn_in: a.burn_in,
        precision: a.precision,
        max_replicates: a.max_replicates,
        tolerance: a.tolerance,
        observations,
        fit: a.fit,
        from_initial: a.from_initial,
        exact_states: a.exact_states,
        progress: a.progress,
    };
    opts.validate().map_err(crate::errors::to_py)?;
    let r = interruptible(py, || reconcile::reconcile(net, &opts))?;
    Ok(report::reconcile::json(&r))
}

/// A volume with its unit (`1pL`, `2 fL`), in litres.
fn volume(text: &str) -> PyResult<f64> {
    let bad = || {
        pyo3::exceptions::PyValueError::new_err(format!(
            "volumes: {text:?} is not a volume; expected a positive volume with its unit, e.g. \"1pL\" or \"2 fL\""
        ))
    };
    let (q, unit) = parse_quantity(text.trim()).map_err(|_| bad())?;
    if unit.is_none() || q.dim != Dim::VOLUME || !(q.value > 0.0 && q.value.is_finite()) {
        return Err(bad());
    }
    Ok(q.value)
}

/// The `noise --json` document.
#[allow(clippy::too_many_arguments)]
pub fn noise(
    py: Python<'_>,
    net: &Network,
    replicates: u64,
    t_end: Option<f64>,
    burn_in: Option<f64>,
    volumes: &[String],
    seed: u64,
    threads: Option<usize>,
    progress: bool,
    exact_states: usize,
) -> PyResult<serde_json::Value> {
    let opts = noise::Options {
        replicates,
        seed,
        threads,
        t_end,
        burn_in,
        volumes: volumes
            .iter()
            .map(|v| volume(v))
            .collect::<PyResult<Vec<_>>>()?,
        exact_states,
        progress,
    };
    let r = interruptible(py, || noise::noise(net, &opts))?;
    Ok(report::noise::json(&r))
}

/// What `distribution` is asked for, as its command's flags.
pub struct DistributionArgs {
    pub t_end: Option<f64>,
    pub grid: usize,
    pub species: Vec<String>,
    pub stationary: bool,
    pub tolerance: f64,
    pub max_states: Option<usize>,
    pub threads: Option<usize>,
}

/// The `distribution --json` document (without the ensemble histograms, which the command
/// draws only into its SVG).
pub fn distribution(
    py: Python<'_>,
    net: &Network,
    a: DistributionArgs,
) -> PyResult<serde_json::Value> {
    let usage = |m: String| crate::errors::to_py(Error::usage(m));
    if a.t_end.is_none() && !a.stationary {
        return Err(usage(
            "give t_end for the distribution on a time grid, stationary=True for the stationary law, or both".into(),
        ));
    }
    if let Some(t) = a.t_end {
        if !(t > 0.0 && t.is_finite()) {
            return Err(usage(format!(
                "t_end must be a finite time above 0 seconds, got {t}"
            )));
        }
    }
    if a.grid < 2 {
        return Err(usage(format!(
            "grid must be at least 2 (the points 0 and t_end), got {}",
            a.grid
        )));
    }
    let species = if a.species.is_empty() {
        None
    } else {
        Some(
            a.species
                .iter()
                .map(|name| {
                    net.species_index(name.trim()).ok_or_else(|| {
                        usage(format!(
                            "species: no species `{}` in {}",
                            name.trim(),
                            net.file
                        ))
                    })
                })
                .collect::<PyResult<Vec<_>>>()?,
        )
    };
    let opts = distribution::Options {
        tolerance: a.tolerance,
        max_states: a
            .max_states
            .unwrap_or_else(distribution::default_max_states),
        threads: a.threads,
        species,
        bounds: None,
    };
    let times: Vec<f64> = a.t_end.map_or_else(Vec::new, |t| {
        (0..a.grid)
            .map(|i| t * i as f64 / (a.grid - 1) as f64)
            .collect()
    });
    let (transient, stationary) = py
        .detach(|| -> Result<_, Error> {
            let transient = if times.is_empty() {
                None
            } else {
                Some(distribution::transient(net, &times, &opts)?)
            };
            let stationary = if a.stationary {
                Some(distribution::stationary(net, &opts)?)
            } else {
                None
            };
            Ok((transient, stationary))
        })
        .map_err(crate::errors::to_py)?;
    py.check_signals()?;
    Ok(report::distribution::json(&Results {
        file: &net.file,
        transient: transient.as_ref(),
        stationary: stationary.as_ref(),
        histograms: &[],
    }))
}
