//! `copyloop._native`: the thin pyo3 glue between the `copyloop` Python package and the
//! copyloop library. It loads networks with overrides, runs the library's entry points and
//! hands back the same JSON documents the command line prints, plus numpy grids built from
//! the result's own vectors. Typed Python objects are made in the pure-Python layer.

mod analyses;
mod ensemble;
mod errors;
mod overrides;

use copyloop::network::{self, Overrides};
use copyloop::{report, Network};
use numpy::{PyArray1, PyArrayMethods};
use pyo3::prelude::*;

/// A compiled network with the source and overrides it came from.
#[pyclass(module = "copyloop._native", frozen)]
struct NativeNetwork {
    net: Network,
}

/// Pretty JSON with a final newline: the bytes `copyloop COMMAND --json` prints.
fn pretty(value: &serde_json::Value) -> PyResult<String> {
    let mut text = serde_json::to_string_pretty(value)
        .map_err(|e| pyo3::exceptions::PyRuntimeError::new_err(format!("JSON encoding: {e}")))?;
    text.push('\n');
    Ok(text)
}

#[pymethods]
impl NativeNetwork {
    /// Compile warnings, rendered as the command line prints them.
    fn warnings(&self) -> Vec<String> {
        self.net
            .warnings
            .iter()
            .map(|w| w.to_string().replacen("error:", "warning:", 1))
            .collect()
    }

    /// The `check --json` document.
    fn check_json(&self) -> PyResult<String> {
        pretty(&report::check::json(&self.net))
    }

    /// The `steady --json` document.
    fn steady_json(&self, py: Python<'_>) -> PyResult<String> {
        let net = &self.net;
        let st = py
            .detach(|| copyloop::deterministic::solve(net, &Default::default()))
            .map_err(errors::to_py)?;
        pretty(&report::steady::json(net, &st))
    }

    /// The deterministic time course (`simulate --method ode --json`).
    fn ode_json(&self, py: Python<'_>, t_end: f64, grid: usize) -> PyResult<String> {
        let net = &self.net;
        let spec = copyloop::ensemble::EnsembleSpec {
            grid_points: grid,
            ..copyloop::ensemble::EnsembleSpec::new(t_end)
        };
        spec.validate().map_err(errors::to_py)?;
        let times = copyloop::kernel::observe::grid_times(t_end, grid);
        let started = std::time::Instant::now();
        let tr = py
            .detach(|| copyloop::deterministic::integrate(net, None, &times, &Default::default()))
            .map_err(errors::to_py)?;
        let wall = started.elapsed().as_secs_f64();
        pretty(&report::simulate::ode_json(net, &tr, t_end, wall))
    }

    /// A replicate ensemble: the `simulate --json` document, then the grid times and the
    /// mean and sd of every species at every grid point as (points × species) arrays.
    #[allow(clippy::too_many_arguments, clippy::type_complexity)]
    #[pyo3(signature = (t_end, replicates, method, epsilon, grid, window, seed, threads, progress))]
    fn simulate<'py>(
        &self,
        py: Python<'py>,
        t_end: f64,
        replicates: u64,
        method: &str,
        epsilon: f64,
        grid: usize,
        window: f64,
        seed: u64,
        threads: Option<usize>,
        progress: bool,
    ) -> PyResult<(
        String,
        Bound<'py, PyArray1<f64>>,
        Bound<'py, numpy::PyArray2<f64>>,
        Bound<'py, numpy::PyArray2<f64>>,
    )> {
        use copyloop::ensemble::{EnsembleSpec, Method};
        let method = match method {
            "direct" => Method::Direct,
            "tau" => Method::Tau { epsilon },
            "auto" => Method::Auto { epsilon },
            other => {
                return Err(pyo3::exceptions::PyValueError::new_err(format!(
                    "method: expected \"direct\", \"tau\", \"auto\" or \"ode\", got {other:?}"
                )))
            }
        };
        let spec = EnsembleSpec {
            replicates,
            seed,
            t_end,
            grid_points: grid,
            window,
            threads,
            keep_finals: false,
            progress: false,
            method,
            first_replicate: 0,
            initial: None,
        };
        let result = ensemble::run(py, &self.net, &spec, progress)?;
        let doc = pretty(&report::simulate::json(&self.net, &result))?;
        let species = self.net.species.len();
        let points = result.grid.len();
        let mut mean = Vec::with_capacity(points * species);
        let mut sd = Vec::with_capacity(points * species);
        for row in &result.grid {
            mean.extend(row.iter().map(|w| w.mean()));
            sd.extend(row.iter().map(|w| w.sd()));
        }
        let times = PyArray1::from_vec(py, result.grid_times);
        let mean = PyArray1::from_vec(py, mean).reshape([points, species])?;
        let sd = PyArray1::from_vec(py, sd).reshape([points, species])?;
        Ok((doc, times, mean, sd))
    }

    /// The `reconcile --json` document.
    #[allow(clippy::too_many_arguments)]
    #[pyo3(signature = (replicates, t_end, burn_in, observe, fit, precision, max_replicates, tolerance, from_initial, seed, threads, progress, exact_states))]
    fn reconcile_json(
        &self,
        py: Python<'_>,
        replicates: u64,
        t_end: Option<f64>,
        burn_in: Option<f64>,
        observe: Vec<String>,
        fit: Option<String>,
        precision: Option<f64>,
        max_replicates: u64,
        tolerance: f64,
        from_initial: bool,
        seed: u64,
        threads: Option<usize>,
        progress: bool,
        exact_states: usize,
    ) -> PyResult<String> {
        let args = analyses::ReconcileArgs {
            replicates,
            t_end,
            burn_in,
            observe,
            fit,
            precision,
            max_replicates,
            tolerance,
            from_initial,
            seed,
            threads,
            progress,
            exact_states,
        };
        pretty(&analyses::reconcile(py, &self.net, args)?)
    }

    /// The `noise --json` document.
    #[allow(clippy::too_many_arguments)]
    #[pyo3(signature = (replicates, t_end, burn_in, volumes, seed, threads, progress, exact_states))]
    fn noise_json(
        &self,
        py: Python<'_>,
        replicates: u64,
        t_end: Option<f64>,
        burn_in: Option<f64>,
        volumes: Vec<String>,
        seed: u64,
        threads: Option<usize>,
        progress: bool,
        exact_states: usize,
    ) -> PyResult<String> {
        pretty(&analyses::noise(
            py,
            &self.net,
            replicates,
            t_end,
            burn_in,
            &volumes,
            seed,
            threads,
            progress,
            exact_states,
        )?)
    }

    /// The `distribution --json` document.
    #[allow(clippy::too_many_arguments)]
    #[pyo3(signature = (t_end, grid, species, stationary, tolerance, max_states, threads))]
    fn distribution_json(
        &self,
        py: Python<'_>,
        t_end: Option<f64>,
        grid: usize,
        species: Vec<String>,
        stationary: bool,
        tolerance: f64,
        max_states: Option<usize>,
        threads: Option<usize>,
    ) -> PyResult<String> {
        let args = analyses::DistributionArgs {
            t_end,
            grid,
            species,
            stationary,
            tolerance,
            max_states,
            threads,
        };
        pretty(&analyses::distribution(py, &self.net, args)?)
    }
}

/// Loads a network file (`.crn`, or SBML by its extension) with overrides
/// `(name, value, unit or None)`.
#[pyfunction]
#[pyo3(signature = (path, overrides))]
fn load(path: &str, overrides: Vec<(String, f64, Option<String>)>) -> PyResult<NativeNetwork> {
    let o = overrides::build(&overrides)?;
    let net = network::load(path, &o).map_err(errors::to_py)?;
    Ok(NativeNetwork { net })
}

/// Compiles network text; `name` stands for the file name in messages (and picks SBML by its
/// extension).
#[pyfunction]
#[pyo3(signature = (text, name, overrides))]
fn parse(
    text: &str,
    name: &str,
    overrides: Vec<(String, f64, Option<String>)>,
) -> PyResult<NativeNetwork> {
    let o: Overrides = overrides::build(&overrides)?;
    let net = network::load_source(name, text.as_bytes(), &o).map_err(errors::to_py)?;
    Ok(NativeNetwork { net })
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<NativeNetwork>()?;
    m.add_function(wrap_pyfunction!(load, m)?)?;
    m.add_function(wrap_pyfunction!(parse, m)?)?;
    m.add("InputError", m.py().get_type::<errors::InputError>())?;
    Ok(())
}
