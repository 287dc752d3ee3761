//! The semantic (deterministic) cases of the SBML test suite, compared with their expected
//! time courses.
//!
//! Each case gives a grid (`start`, `duration`, `steps`), the variables to report, which of
//! them are compared as amounts and which as concentrations, and two tolerances: a value passes
//! when |sim − expected| ≤ absolute + relative·|expected| (the suite's own criterion, Keating et
//! al. 2020, Mol. Syst. Biol. 16:e9110 [M]). The model is integrated with the deterministic
//! engine through the library at the times of the case's results file, read by column name.
//! The integrator's own absolute tolerance is set a thousand times below the case's (the
//! comparison's tolerance is never changed).

use super::sbml_suite::Case;
use copyloop::deterministic::{integrate, OdeOptions};
use copyloop::network::Overrides;
use copyloop::sbml;
use std::collections::HashMap;
use std::path::Path;

/// A semantic case's `-settings.txt`.
#[derive(Clone, Debug)]
pub struct Settings {
    pub variables: Vec<String>,
    pub amount: Vec<String>,
    pub concentration: Vec<String>,
    pub absolute: f64,
    pub relative: f64,
}

fn list(v: &str) -> Vec<String> {
    v.split(',')
        .map(|x| x.trim().to_string())
        .filter(|x| !x.is_empty())
        .collect()
}

impl Settings {
    pub fn read(path: &Path) -> Result<Settings, String> {
        let text = std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let kv: HashMap<&str, &str> = text
            .lines()
            .filter_map(|l| l.split_once(':'))
            .map(|(k, v)| (k.trim(), v.trim()))
            .collect();
        let num = |k: &str| -> Result<f64, String> {
            kv.get(k)
                .ok_or(format!("no `{k}`"))?
                .parse()
                .map_err(|_| format!("bad `{k}`"))
        };
        Ok(Settings {
            variables: list(kv.get("variables").ok_or("no `variables`")?),
            amount: list(kv.get("amount").unwrap_or(&"")),
            concentration: list(kv.get("concentration").unwrap_or(&"")),
            absolute: num("absolute")?,
            relative: num("relative")?,
        })
    }
}

/// The comparison of one case.
#[derive(Clone, Debug)]
pub struct Outcome {
    pub id: String,
    /// Values compared (variables × grid points).
    pub values: usize,
    /// The first value outside the tolerance, if any: variable, time, simulated, expected.
    pub first_bad: Option<String>,
    /// Values outside the tolerance.
    pub bad: usize,
}

impl Outcome {
    pub fn passed(&self) -> bool {
        self.first_bad.is_none()
    }
}

/// Runs case `c`'s newest-level file (`file`) on its grid and compares every value.
pub fn run(root: &Path, c: &Case, file: &Path) -> Result<Outcome, String> {
    let dir = c.dir(root);
    let settings = Settings::read(&dir.join(format!("{}-settings.txt", c.id)))?;
    let table = super::sbml_stochastic::Table::read(&dir.join(format!("{}-results.csv", c.id)))?;
    let times = table
        .column("time")
        .or_else(|_| table.column("Time"))?
        .to_vec();
    let bytes = std::fs::read(file).map_err(|e| e.to_string())?;
    let name = file.display().to_string();
    let net = sbml::load_source(&name, &bytes, &Overrides::default()).map_err(|e| e.to_string())?;
    let doc = sbml::import(&bytes).map_err(|e| format!("{e:?}"))?.document;
    let values = sbml::initial::initial_values(&doc.model).map_err(|e| e.to_string())?;
    let per_count = sbml::map::model_amount_per_count(&net);
    let opts = OdeOptions {
        rtol: 1e-10,
        atol_molecules: 1e-3 * settings.absolute / per_count,
        ..OdeOptions::default()
    };
    let tr = integrate(&net, None, &times, &opts).map_err(|e| e.to_string())?;
    let m = &doc.model;
    let size_of = |compartment: &str| -> Option<f64> {
        let k = m.compartments.iter().position(|x| x.id == compartment)?;
        values.compartments[k]
    };
    let mut out = Outcome {
        id: c.id.clone(),
        values: 0,
        first_bad: None,
        bad: 0,
    };
    for var in &settings.variables {
        let expected = table.column(var)?;
        // A function of the grid point giving the variable in the model's own units.
        let ruled = m.rules.iter().any(|r| {
            r.kind == sbml::model::RuleKind::Assignment
                && r.variable.as_deref() == Some(var)
                && r.math.is_some()
        });
        let series: Vec<f64> = if ruled {
            // An assignment rule's parameter or species holds no state: its formula on the
            // trajectory. A species' formula gives its symbol; the case may compare the other
            // reading (amount = concentration × size).
            let scale = match m.species.iter().position(|s| &s.id == var) {
                Some(j) => {
                    let size = size_of(&m.species[j].compartment).unwrap_or(f64::NAN);
                    let symbol_amount = sbml::initial::symbol_is_amount(m, j);
                    match (symbol_amount, settings.concentration.contains(var)) {
                        (true, true) => 1.0 / size,
                        (false, false) if settings.amount.contains(var) => size,
                        _ => 1.0,
                    }
                }
                None => 1.0,
            };
            (0..times.len())
                .map(|k| {
                    let value = |id: &str| symbol_value(&net, &doc, &values, &tr, k, id);
                    sbml::map::rules::rule_values(&doc, &value, times[k])
                        .into_iter()
                        .find(|(v, _)| v == var)
                        .and_then(|(_, x)| x)
                        .map_or(f64::NAN, |x| x * scale)
                })
                .collect()
        } else if let Some(i) = net.species_index(var) {
            // A rate rule's parameter is a state of the network, as an amount.
            let s = m.species.iter().find(|s| &s.id == var);
            let as_concentration = s.is_some() && settings.concentration.contains(var);
            let size = s.and_then(|s| size_of(&s.compartment));
            tr.states
                .iter()
                .map(|y| {
                    let amount = y[i] * net.omega * per_count;
                    match (as_concentration, size) {
                        (false, _) => amount,
                        (true, Some(v)) if v != 0.0 => amount / v,
                        (true, _) => f64::NAN,
                    }
                })
                .collect()
        } else if let Some(p) = net.param_index(var) {
            let f = sbml::map::param_unit_factor(&doc, &net, var);
            tr.params.iter().map(|row| row[p] / f).collect()
        } else if let Some(k) = m.compartments.iter().position(|x| &x.id == var) {
            vec![values.compartments[k].unwrap_or(f64::NAN); times.len()]
        } else if let Some(k) = m.parameters.iter().position(|x| &x.id == var) {
            vec![values.parameters[k].unwrap_or(f64::NAN); times.len()]
        } else if let Some(x) = symbol_value(&net, &doc, &values, &tr, 0, var) {
            // A constant stoichiometry.
            vec![x; times.len()]
        } else {
            return Err(format!("variable `{var}` is not in the network"));
        };
        for (k, (&sim, &want)) in series.iter().zip(expected).enumerate() {
            out.values += 1;
            let ok = if want.is_nan() {
                sim.is_nan()
            } else if want.is_infinite() {
                sim == want
            } else {
                (sim - want).abs() <= settings.absolute + settings.relative * want.abs()
            };
            if !ok {
                out.bad += 1;
                if out.first_bad.is_none() {
                    out.first_bad = Some(format!(
                        "{var} at t = {}: {sim:e}, expected {want:e}",
                        times[k]
                    ));
                }
            }
        }
    }
    Ok(out)
}

/// Every semantic time-course case (of `cases`) whose newest file imports, with its comparison
/// (or why it could not be run). Its other-level files that import are compared too; the
/// first one that fails stands for the case.
pub fn imported_outcomes(root: &Path, cases: &[Case]) -> Vec<(Case, Result<Outcome, String>)> {
    use super::sbml_suite::{outcome, Outcome as Import};
    cases
        .iter()
        .filter(|c| c.suite == "semantic" && c.kind == "TimeCourse")
        .filter_map(|c| {
            let files = c.files(root);
            let newest = files.first()?;
            if !matches!(outcome(newest), Import::Imported) {
                return None;
            }
            let mut result = run(root, c, newest);
            for f in &files[1..] {
                if !result.as_ref().is_ok_and(|o| o.passed()) {
                    break;
                }
                if !matches!(outcome(f), Import::Imported) {
                    continue;
                }
                let name = f.file_name().unwrap().to_string_lossy().into_owned();
                let mut values = result.as_ref().map_or(0, |o| o.values);
                result = run(root, c, f)
                    .map(|mut o| {
                        values += o.values;
                        o.values = values;
                        o.first_bad = o.first_bad.map(|b| format!("{name}: {b}"));
                        o
                    })
                    .map_err(|e| format!("{name}: {e}"));
            }
            Some((c.clone(), result))
        })
        .collect()
}

/// Symbol `id` at grid point `k` as SBML reads it: a species' amount or concentration, a
/// parameter's value (held by the network, or constant), a compartment's size.
fn symbol_value(
    net: &copyloop::network::Network,
    doc: &sbml::Document,
    values: &sbml::initial::InitialValues,
    tr: &copyloop::deterministic::Trajectory,
    k: usize,
    id: &str,
) -> Option<f64> {
    let m = &doc.model;
    let per_count = sbml::map::model_amount_per_count(net);
    if let Some(i) = net.species_index(id) {
        let amount = tr.states[k][i] * net.omega * per_count;
        return match m.species.iter().position(|s| s.id == id) {
            Some(j) if !sbml::initial::symbol_is_amount(m, j) => {
                let c = m
                    .compartments
                    .iter()
                    .position(|c| c.id == m.species[j].compartment)?;
                Some(amount / values.compartments[c]?)
            }
            _ => Some(amount),
        };
    }
    if let Some(p) = net.param_index(id) {
        let f = sbml::map::param_unit_factor(doc, net, id);
        return Some(tr.params[k][p] / f);
    }
    if let Some(c) = m.compartments.iter().position(|c| c.id == id) {
        return values.compartments[c];
    }
    if let Some(p) = m.parameters.iter().position(|p| p.id == id) {
        return values.parameters[p];
    }
    // A reaction's rate: its kinetic law, with its local parameters.
    if let Some(rx) = m.reactions.iter().find(|r| r.id == id) {
        let law = rx.kinetic_law.as_ref()?;
        let lookup = |x: &str| match law.local_parameters.iter().find(|p| p.id == x) {
            Some(p) => p.value,
            None => symbol_value(net, doc, values, tr, k, x),
        };
        return sbml::eval::eval(law.math.as_ref()?, &lookup, tr.times[k]).ok();
    }
    // A stoichiometry (constant in every model the network runs).
    m.reactions.iter().enumerate().find_map(|(r, rx)| {
        let j = rx
            .reactants
            .iter()
            .chain(&rx.products)
            .position(|s| s.id.as_deref() == Some(id))?;
        values.stoichiometries[r][j]
    })
}
