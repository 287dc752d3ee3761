//! The report of `copyloop simulate`: table, JSON (docs/json.md) and the CSV grid.
//!
//! Count figures are molecules and seconds (`amount_unit`). Where a species sits in a
//! compartment with a volume, each count figure has a molar twin with the suffix `_molar`
//! (count/Ω_c in mol/L, Ω_c = N_A·V of the species' own compartment; a reaction's rates use
//! its compartment's Ω_c), and the grid gives `concentration_mean` / `concentration_sd` in
//! the unit named by `concentration_unit`. Params that events change appear in the grid
//! beside the species, with `mean` and `sd` of their value (canonical units).
//!
//! CSV layout (`--out`): one header row, then one row per grid time:
//! `time_s,<A>_mean,<A>_sd,<B>_mean,<B>_sd,…` with species in file order, counts in molecules
//! across replicates (sd is the sample SD over replicates; `NaN` with a single replicate),
//! then `<A>_<unit>_mean,<A>_<unit>_sd,…` for every species in a compartment, in the
//! concentration unit the file declared it with (`H_nM_mean`; `uM` for µM), then
//! `<p>_mean,<p>_sd` for every param that events change. Numbers are written by
//! [`crate::numbers::csv`] (fifteen significant digits, no rounding noise), so the file loads
//! as is in pandas (`read_csv`) and R (`read.csv`).
//!
//! `--method ode` has its own report ([`ode_json`], [`ode_table`], [`ode_csv`]): the same
//! grid keys with the deterministic value under `mean` and no `sd`.

use super::num;
use super::schema::Named;
use super::table::Table;
use crate::deterministic::Trajectory;
use crate::ensemble::EnsembleResult;
use crate::network::Network;
use crate::stats::Welford;
use schemars::JsonSchema;
use serde::Serialize;
use serde_json::Value;

/// 1/Ω_c of species `i`'s compartment, where it has one.
fn molar_factor(net: &Network, i: usize) -> Option<f64> {
    net.concentration_factor(i)
}

/// 1/Ω_c of reaction `j`'s compartment, where it has one.
fn reaction_molar(net: &Network, j: usize) -> Option<f64> {
    net.reactions[j]
        .compartment
        .map(|c| 1.0 / net.compartments[c].omega)
}

/// The name of species `i`'s compartment, if any.
fn compartment_name(net: &Network, i: usize) -> Option<&str> {
    net.species[i]
        .compartment
        .map(|c| net.compartments[c].name.as_str())
}

/// The `--json` document of `simulate`: an ensemble's, or (`--method ode`) the
/// deterministic time course's.
#[derive(Serialize, JsonSchema)]
#[serde(untagged)]
pub enum SimulateDocument<'a> {
    Ensemble(Box<EnsembleDocument<'a>>),
    Ode(Box<OdeDocument>),
}

/// The ensemble's document (docs/json.md): moments over replicates of the final state, the
/// time averages over the window, the firings, and the grid.
#[derive(Serialize, JsonSchema)]
pub struct EnsembleDocument<'a> {
    pub method: String,
    pub amount_unit: String,
    pub replicates: u64,
    pub seed: u64,
    pub t_end: f64,
    /// Start of the averaging window, s.
    pub window: f64,
    pub grid_points: usize,
    pub events_total: u64,
    pub leaps: u64,
    pub exact_steps: u64,
    pub wall_seconds: f64,
    pub events_per_second: f64,
    /// Replicates that reached a state where nothing can fire before `t_end`.
    pub absorbed_replicates: u64,
    #[serde(rename = "final")]
    pub final_state: Named<Moments>,
    pub time_average: Named<Average>,
    /// Firings of each reaction in the averaging window.
    pub firings: Named<Firings>,
    pub firings_first_half: Named<MeanSd>,
    pub grid: Grid,
    /// An imported SBML model's own units (the grid then holds every species, parameter and
    /// compartment of the model by id).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_units: Option<ModelUnits>,
    /// What of an imported model the grid leaves out, and why.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_note: Option<String>,
    /// The comparison with the exact distribution (`--exact`); null where the network does
    /// not fit a finite state projection, with `exact_note` saying why.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub exact: Option<Exact<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub exact_note: Option<String>,
}

/// The comparison with the exact distribution, where `--exact` asked for it.
#[derive(Serialize, JsonSchema)]
#[serde(untagged)]
pub enum Exact<'a> {
    /// The network does not fit a finite state projection (printed as `null`).
    Unavailable,
    /// Z and Y statistics per species and grid time.
    Compared(&'a crate::distribution::compare::ExactComparison),
}

/// Mean, SD, standard error and 95 % interval over replicates, in molecules, with their
/// molar twins where the species (or reaction) has a compartment with a volume.
#[derive(Serialize, JsonSchema)]
pub struct Moments {
    pub mean: f64,
    pub sd: f64,
    pub stderr: f64,
    pub ci95: [f64; 2],
    #[serde(flatten)]
    pub molar: Option<MolarMoments>,
}

/// The molar twins of [`Moments`]: count/Ω_c in mol/L.
#[derive(Serialize, JsonSchema)]
pub struct MolarMoments {
    pub mean_molar: f64,
    pub sd_molar: f64,
    pub stderr_molar: f64,
    pub ci95_molar: [f64; 2],
}

/// A species' time average over the window, with the mean within-trajectory variance.
#[derive(Serialize, JsonSchema)]
pub struct Average {
    #[serde(flatten)]
    pub moments: Moments,
    pub within_variance: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub within_variance_molar: Option<f64>,
}

/// A reaction's firings in the window and the rate they imply.
#[derive(Serialize, JsonSchema)]
pub struct Firings {
    #[serde(flatten)]
    pub moments: Moments,
    pub rate_per_s: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rate_molar_per_s: Option<f64>,
}

/// A mean and SD over replicates.
#[derive(Serialize, JsonSchema)]
pub struct MeanSd {
    pub mean: f64,
    pub sd: f64,
}

/// The units of an imported model, as its unit attributes name them (`unspecified` where it
/// declares none): the grid's `amount_mean`, params and compartments are in these.
#[derive(Serialize, JsonSchema, Clone, Debug)]
pub struct ModelUnits {
    pub substance: String,
    pub volume: String,
    pub time: String,
}

/// The grid: `time`, then one series per species and per param that changes during the run.
#[derive(Serialize, JsonSchema)]
pub struct Grid {
    pub time: Vec<f64>,
    #[serde(flatten)]
    pub series: Named<Series>,
}

/// One column of the grid. Species: the mean (and, for an ensemble, the SD) in molecules,
/// and in concentration where the compartment has a volume. Params: `kind` is `"param"`.
#[derive(Serialize, JsonSchema, Default)]
pub struct Series {
    pub mean: Vec<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sd: Option<Vec<f64>>,
    #[serde(flatten)]
    pub concentration: Option<Concentration>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub kind: Option<SeriesKind>,
    /// An imported model's species: its amount in the model's own substance unit
    /// (`model_units`), which `mean` gives in `amount_unit`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub amount_mean: Option<Vec<f64>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub amount_sd: Option<Vec<f64>>,
    /// Computed by an SBML assignment rule rather than held as a state.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub assigned: Option<bool>,
}

/// What a grid series that is not a species holds.
#[derive(Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum SeriesKind {
    Param,
    /// An imported model's compartment: its size in the model's volume unit.
    Compartment,
}

/// A species series in concentration (mol/L under `_molar`, the file's unit under
/// `concentration_`).
#[derive(Serialize, JsonSchema)]
pub struct Concentration {
    pub mean_molar: Vec<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sd_molar: Option<Vec<f64>>,
    pub concentration_mean: Vec<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub concentration_sd: Option<Vec<f64>>,
    pub concentration_unit: String,
    pub compartment: Option<String>,
}

/// The deterministic time course's document (`--method ode`).
#[derive(Serialize, JsonSchema)]
pub struct OdeDocument {
    /// Always `ode`.
    pub method: String,
    pub amount_unit: String,
    pub t_end: f64,
    pub grid_points: usize,
    pub wall_seconds: f64,
    pub steps_accepted: usize,
    pub steps_rejected: usize,
    pub breakpoints: usize,
    #[serde(rename = "final")]
    pub final_state: Named<OdeFinal>,
    pub grid: Grid,
    /// An imported SBML model's own units (the grid then holds every species, parameter and
    /// compartment of the model by id).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_units: Option<ModelUnits>,
    /// What of an imported model the grid leaves out, and why.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_note: Option<String>,
}

/// A species' final deterministic value, in the amount unit and in concentration.
#[derive(Serialize, JsonSchema)]
pub struct OdeFinal {
    pub mean: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mean_molar: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub concentration_mean: Option<f64>,
}

fn moments(w: &Welford, molar: Option<f64>) -> Moments {
    let ci = w.ci95();
    Moments {
        mean: w.mean(),
        sd: w.sd(),
        stderr: w.stderr(),
        ci95: ci,
        molar: molar.map(|f| MolarMoments {
            mean_molar: w.mean() * f,
            sd_molar: w.sd() * f,
            stderr_molar: w.stderr() * f,
            ci95_molar: [ci[0] * f, ci[1] * f],
        }),
    }
}

/// The typed document of an ensemble run.
pub fn document<'a>(net: &Network, r: &EnsembleResult) -> EnsembleDocument<'a> {
    let t = r.window_length();
    let mut final_state = Named::new();
    let mut time_average = Named::new();
    for (i, s) in net.species.iter().enumerate() {
        let molar = molar_factor(net, i);
        final_state.insert(s.name.clone(), moments(&r.final_state[i], molar));
        let wv = r.within_variance[i].mean();
        time_average.insert(
            s.name.clone(),
            Average {
                moments: moments(&r.time_average[i], molar),
                within_variance: wv,
                within_variance_molar: molar.map(|f| wv * f * f),
            },
        );
    }
    let mut firings = Named::new();
    let mut halves = Named::new();
    for (j, rx) in net.reactions.iter().enumerate() {
        let molar = reaction_molar(net, j);
        let w = &r.firings[j];
        firings.insert(
            rx.label.clone(),
            Firings {
                moments: moments(w, molar),
                rate_per_s: w.mean() / t,
                rate_molar_per_s: molar.map(|f| w.mean() / t * f),
            },
        );
        let h = &r.firings_first_half[j];
        halves.insert(
            rx.label.clone(),
            MeanSd {
                mean: h.mean(),
                sd: h.sd(),
            },
        );
    }
    let mut series = Named::new();
    for (i, s) in net.species.iter().enumerate() {
        let col = |f: &dyn Fn(&Welford) -> f64| -> Vec<f64> {
            r.grid.iter().map(|row| f(&row[i])).collect()
        };
        series.insert(
            s.name.clone(),
            Series {
                mean: col(&|w| w.mean()),
                sd: Some(col(&|w| w.sd())),
                concentration: molar_factor(net, i).map(|f| {
                    let mean = col(&|w| w.mean() * f);
                    let sd = col(&|w| w.sd() * f);
                    Concentration {
                        mean_molar: mean.clone(),
                        sd_molar: Some(sd.clone()),
                        concentration_mean: mean,
                        concentration_sd: Some(sd),
                        concentration_unit: net.amount.concentration_unit.clone(),
                        compartment: compartment_name(net, i).map(str::to_string),
                    }
                }),
                kind: None,
                ..Series::default()
            },
        );
    }
    for (k, &p) in r.varying_params.iter().enumerate() {
        let col = |f: &dyn Fn(&Welford) -> f64| -> Vec<f64> {
            r.grid_params.iter().map(|row| f(&row[k])).collect()
        };
        series.insert(
            net.params[p].name.clone(),
            Series {
                mean: col(&|w| w.mean()),
                sd: Some(col(&|w| w.sd())),
                concentration: None,
                kind: Some(SeriesKind::Param),
                ..Series::default()
            },
        );
    }
    EnsembleDocument {
        method: r.spec.method.name().to_string(),
        amount_unit: net.amount.name.clone(),
        replicates: r.spec.replicates,
        seed: r.spec.seed,
        t_end: r.spec.t_end,
        window: r.spec.window,
        grid_points: r.spec.grid_points,
        events_total: r.events_total,
        leaps: r.leaps,
        exact_steps: r.exact_steps,
        wall_seconds: r.wall_seconds,
        events_per_second: r.events_per_second(),
        absorbed_replicates: r.absorbed,
        final_state,
        time_average,
        firings,
        firings_first_half: halves,
        grid: Grid {
            time: r.grid_times.clone(),
            series,
        },
        model_units: None,
        model_note: None,
        exact: None,
        exact_note: None,
    }
}

/// The JSON document of docs/json.md for `simulate`, with a few more keys (`window`,
/// `grid_points`, `absorbed_replicates`, `firings_first_half`, `within_variance`, `ci95`,
/// `rate_per_s`).
pub fn json(net: &Network, r: &EnsembleResult) -> Value {
    super::schema::to_value(&document(net, r))
}

fn pm(w: &Welford) -> String {
    if w.count() < 2 {
        num(w.mean())
    } else {
        format!("{} ± {}", num(w.mean()), num(w.sd()))
    }
}

fn interval(ci: [f64; 2]) -> String {
    if ci[0].is_finite() && ci[1].is_finite() {
        format!("[{}, {}]", num(ci[0]), num(ci[1]))
    } else {
        "-".into()
    }
}

/// The table for people.
pub fn table(net: &Network, r: &EnsembleResult) -> String {
    let s = &r.spec;
    let mut out = format!(
        "{}: {} method, {} replicate{}, seed {}, t_end {} s, window [{}, {}] s\n\
         {} events in {} s ({} events/s){}\n\n",
        net.file,
        s.method.name(),
        s.replicates,
        if s.replicates == 1 { "" } else { "s" },
        s.seed,
        num(s.t_end),
        num(s.window),
        num(s.t_end),
        r.events_total,
        num(r.wall_seconds),
        num(r.events_per_second()),
        if r.absorbed > 0 {
            format!(
                "; {} replicate(s) stopped early: nothing could fire any more",
                r.absorbed
            )
        } else {
            String::new()
        },
    );
    if r.leaps + r.exact_steps > 0 {
        out.insert_str(
            out.len() - 1,
            &format!("{} leaps and {} exact steps\n", r.leaps, r.exact_steps),
        );
    }
    let any_molar = (0..net.species.len()).any(|i| molar_factor(net, i).is_some());
    let mut header = vec![
        "species",
        "final mean ± sd (molecules)",
        "95 % CI of mean",
        "time average ± sd (molecules)",
    ];
    if any_molar {
        header.push("final mean");
        header.push("time average");
    }
    let mut t = Table::new(&header);
    for i in 0..net.species.len() {
        let mut row = vec![
            species_label(net, i),
            pm(&r.final_state[i]),
            interval(r.final_state[i].ci95()),
            pm(&r.time_average[i]),
        ];
        if any_molar {
            match molar_factor(net, i) {
                Some(f) => {
                    row.push(super::units::level(net, i, r.final_state[i].mean() * f));
                    row.push(super::units::level(net, i, r.time_average[i].mean() * f));
                }
                None => row.extend(["-".to_string(), "-".to_string()]),
            }
        }
        t.row(row);
    }
    out.push_str(&t.render());
    out.push('\n');
    let mut t = Table::new(&["reaction", "firings in window (mean ± sd)", "rate (/s)"]);
    let len = r.window_length();
    for (j, rx) in net.reactions.iter().enumerate() {
        t.row(vec![
            rx.label.clone(),
            pm(&r.firings[j]),
            num(r.firings[j].mean() / len),
        ]);
    }
    out.push_str(&t.render());
    out
}

/// `H (clamped) [plasma]`: a species' name with what the reader must know about it.
fn species_label(net: &Network, i: usize) -> String {
    let sp = &net.species[i];
    let mut s = sp.name.clone();
    if sp.clamped {
        s.push_str(" (clamped)");
    }
    if net.compartments.len() > 1 {
        if let Some(c) = compartment_name(net, i) {
            s.push_str(&format!(" [{c}]"));
        }
    }
    s
}

/// The grid as CSV (layout in the module docs).
pub fn csv(net: &Network, r: &EnsembleResult) -> String {
    let mut out = String::from("time_s");
    for s in &net.species {
        out.push_str(&format!(",{0}_mean,{0}_sd", s.name));
    }
    let conc = csv_concentrations(net);
    for (i, _, unit) in &conc {
        out.push_str(&format!(
            ",{0}_{unit}_mean,{0}_{unit}_sd",
            net.species[*i].name
        ));
    }
    for &p in &r.varying_params {
        out.push_str(&format!(",{0}_mean,{0}_sd", net.params[p].name));
    }
    out.push('\n');
    let n = crate::numbers::csv;
    for (p, &time) in r.grid_times.iter().enumerate() {
        out.push_str(&n(time));
        for w in &r.grid[p] {
            out.push_str(&format!(",{},{}", n(w.mean()), n(w.sd())));
        }
        for &(i, f, _) in &conc {
            let w = &r.grid[p][i];
            out.push_str(&format!(",{},{}", n(w.mean() * f), n(w.sd() * f)));
        }
        for w in &r.grid_params[p] {
            out.push_str(&format!(",{},{}", n(w.mean()), n(w.sd())));
        }
        out.push('\n');
    }
    out
}

/// Counts of every species at each output time of an ODE trajectory (real-valued
/// molecules: the state times Ω).
fn ode_counts(net: &Network, tr: &Trajectory) -> Vec<Vec<f64>> {
    tr.states
        .iter()
        .map(|y| y.iter().map(|v| v * net.omega).collect())
        .collect()
}

/// Amounts in the network's amount unit from counts.
fn amount(net: &Network, count: f64) -> f64 {
    count / net.amount.count_per_amount
}

/// The typed document of `simulate --method ode`: the grid of the deterministic time
/// course (amounts under `mean`, concentrations under `concentration_mean`, no `sd`), the
/// final state, the params that events change, and the integrator's work.
pub fn ode_document(net: &Network, tr: &Trajectory, t_end: f64, wall_seconds: f64) -> OdeDocument {
    let counts = ode_counts(net, tr);
    let mut series = Named::new();
    let mut final_state = Named::new();
    for (i, s) in net.species.iter().enumerate() {
        let col =
            |f: &dyn Fn(f64) -> f64| -> Vec<f64> { counts.iter().map(|row| f(row[i])).collect() };
        let last = counts.last().map_or(f64::NAN, |row| row[i]);
        let factor = molar_factor(net, i);
        series.insert(
            s.name.clone(),
            Series {
                mean: col(&|c| amount(net, c)),
                sd: None,
                concentration: factor.map(|f| {
                    let molar = col(&|c| c * f);
                    Concentration {
                        mean_molar: molar.clone(),
                        sd_molar: None,
                        concentration_mean: molar,
                        concentration_sd: None,
                        concentration_unit: net.amount.concentration_unit.clone(),
                        compartment: compartment_name(net, i).map(str::to_string),
                    }
                }),
                kind: None,
                ..Series::default()
            },
        );
        final_state.insert(
            s.name.clone(),
            OdeFinal {
                mean: amount(net, last),
                mean_molar: factor.map(|f| last * f),
                concentration_mean: factor.map(|f| last * f),
            },
        );
    }
    for (p, param) in net.params.iter().enumerate().filter(|(_, p)| p.varies) {
        series.insert(
            param.name.clone(),
            Series {
                mean: tr.params.iter().map(|row| row[p]).collect(),
                sd: None,
                concentration: None,
                kind: Some(SeriesKind::Param),
                ..Series::default()
            },
        );
    }
    OdeDocument {
        method: "ode".to_string(),
        amount_unit: net.amount.name.clone(),
        t_end,
        grid_points: tr.times.len(),
        wall_seconds,
        steps_accepted: tr.accepted_steps,
        steps_rejected: tr.rejected_steps,
        breakpoints: tr.breakpoints,
        final_state,
        grid: Grid {
            time: tr.times.clone(),
            series,
        },
        model_units: None,
        model_note: None,
    }
}

/// The `--json` document of `simulate --method ode` ([`ode_document`]).
pub fn ode_json(net: &Network, tr: &Trajectory, t_end: f64, wall_seconds: f64) -> Value {
    super::schema::to_value(&ode_document(net, tr, t_end, wall_seconds))
}

/// The table of `simulate --method ode`: the final state and the integrator's work.
pub fn ode_table(net: &Network, tr: &Trajectory, t_end: f64, wall_seconds: f64) -> String {
    let counts = ode_counts(net, tr);
    let mut out = format!(
        "{}: ode (RODAS4), t_end {} s, {} grid points, {} steps ({} rejected), {} doses and \
         events applied, {} s\n\n",
        net.file,
        num(t_end),
        tr.times.len(),
        tr.accepted_steps,
        tr.rejected_steps,
        tr.breakpoints,
        num(wall_seconds),
    );
    let any_molar = (0..net.species.len()).any(|i| molar_factor(net, i).is_some());
    let mut header = vec!["species", "final (molecules)"];
    if any_molar {
        header.push("final");
    }
    let mut t = Table::new(&header);
    let last = counts.last();
    for i in 0..net.species.len() {
        let c = last.map_or(f64::NAN, |row| row[i]);
        let mut row = vec![species_label(net, i), num(amount(net, c))];
        if any_molar {
            row.push(
                molar_factor(net, i).map_or("-".into(), |f| super::units::level(net, i, c * f)),
            );
        }
        t.row(row);
    }
    out.push_str(&t.render());
    out
}

/// Species with a concentration in the CSV: index, factor from a count to the file's unit,
/// and the unit's ASCII name.
fn csv_concentrations(net: &Network) -> Vec<(usize, f64, String)> {
    (0..net.species.len())
        .filter_map(|i| {
            molar_factor(net, i).map(|f| {
                let u = super::units::species_unit(net, i);
                (i, f / u.factor, u.ascii())
            })
        })
        .collect()
}

/// The grid of `simulate --method ode` as CSV: `time_s,<A>_mean,…`, then
/// `<A>_<unit>_mean,…` for species in a compartment, then `<p>_mean` for params that
/// events change.
pub fn ode_csv(net: &Network, tr: &Trajectory) -> String {
    let counts = ode_counts(net, tr);
    let mut out = String::from("time_s");
    for s in &net.species {
        out.push_str(&format!(",{}_mean", s.name));
    }
    let conc = csv_concentrations(net);
    for (i, _, unit) in &conc {
        out.push_str(&format!(",{}_{unit}_mean", net.species[*i].name));
    }
    let varying: Vec<usize> = (0..net.params.len())
        .filter(|&p| net.params[p].varies)
        .collect();
    for &p in &varying {
        out.push_str(&format!(",{}_mean", net.params[p].name));
    }
    out.push('\n');
    for (k, &time) in tr.times.iter().enumerate() {
        let n = crate::numbers::csv;
        out.push_str(&n(time));
        for &c in &counts[k] {
            out.push_str(&format!(",{}", n(amount(net, c))));
        }
        for &(i, f, _) in &conc {
            out.push_str(&format!(",{}", n(counts[k][i] * f)));
        }
        for &p in &varying {
            out.push_str(&format!(",{}", n(tr.params[k][p])));
        }
        out.push('\n');
    }
    out
}

/// A time course to draw: at each grid time, a level per species.
#[derive(Clone, Copy, Debug)]
pub enum Course<'a> {
    /// A replicate ensemble: the mean across replicates, with its SD as a band.
    Ensemble(&'a EnsembleResult),
    /// A deterministic time course (the ODE): `counts[p][i]` is species i at `times[p]`, in
    /// molecules; drawn as lines without bands.
    Deterministic {
        times: &'a [f64],
        counts: &'a [Vec<f64>],
    },
}

impl<'a> From<&'a EnsembleResult> for Course<'a> {
    fn from(r: &'a EnsembleResult) -> Course<'a> {
        Course::Ensemble(r)
    }
}

/// The species a time course shows unless told otherwise: every species that is not clamped.
pub fn default_species(net: &Network) -> Vec<usize> {
    (0..net.species.len())
        .filter(|&i| !net.species[i].clamped)
        .collect()
}

/// The unit a time axis reads best in for a run to `t_end` seconds: seconds up to 10 min,
/// minutes up to 10 h, hours beyond; with its length in seconds.
fn time_unit(t_end: f64) -> (&'static str, f64) {
    if t_end <= 600.0 {
        ("s", 1.0)
    } else if t_end <= 36_000.0 {
        ("min", 60.0)
    } else {
        ("h", 3600.0)
    }
}

/// The time course of `species` (indices into `net.species`, in the order given) as an SVG
/// chart: a line per species through its level at every grid time, in molecules, and for an
/// ensemble of two or more replicates a band of mean ± SD.
pub fn svg(net: &Network, course: Course, species: &[usize]) -> String {
    use super::plot::{AxisSpec, Chart, Dash, Datum, Interval, Series};
    let (times, title, banded) = match course {
        Course::Ensemble(r) => {
            let n = r.spec.replicates;
            let what = if n >= 2 {
                format!("mean ± SD of {n} replicates")
            } else {
                "one trajectory".to_string()
            };
            let title = format!(
                "{}: time course, {what} ({})",
                net.file,
                r.spec.method.name()
            );
            (r.grid_times.as_slice(), title, n >= 2)
        }
        Course::Deterministic { times, .. } => (
            times,
            format!("{}: deterministic time course (ODE)", net.file),
            false,
        ),
    };
    let t_end = times.iter().copied().fold(0.0, f64::max);
    let (unit, per) = time_unit(t_end);
    let series = species
        .iter()
        .filter(|&&i| i < net.species.len())
        .map(|&i| {
            let points: Vec<Datum> = times
                .iter()
                .enumerate()
                .map(|(p, &t)| match course {
                    Course::Ensemble(r) => {
                        let w = &r.grid[p][i];
                        let pt = Datum::new(t / per, w.mean());
                        if banded {
                            pt.with_interval(w.mean() - w.sd(), w.mean() + w.sd())
                        } else {
                            pt
                        }
                    }
                    Course::Deterministic { counts, .. } => Datum::new(
                        t / per,
                        counts
                            .get(p)
                            .and_then(|c| c.get(i))
                            .copied()
                            .unwrap_or(f64::NAN),
                    ),
                })
                .collect();
            let sp = &net.species[i];
            let clamped = if sp.clamped { ", clamped" } else { "" };
            let name = if banded {
                format!("{} (mean ± SD{clamped})", sp.name)
            } else if clamped.is_empty() {
                sp.name.clone()
            } else {
                format!("{} (clamped)", sp.name)
            };
            Series {
                line: Some(Dash::Solid),
                interval: if banded {
                    Interval::Band
                } else {
                    Interval::None
                },
                ..Series::new(name, points)
            }
        })
        .collect();
    let notes = if banded {
        vec!["bands: mean ± 1 SD across replicates at each grid time".to_string()]
    } else {
        Vec::new()
    };
    Chart {
        title,
        x: AxisSpec {
            label: format!("time ({unit})"),
            log: false,
            from_zero: true,
        },
        y: AxisSpec {
            label: "count (molecules)".into(),
            log: false,
            from_zero: true,
        },
        categories: Vec::new(),
        series,
        notes,
    }
    .render()
}

/// The ODE time course of `species` as an SVG chart (lines, in molecules).
pub fn ode_svg(net: &Network, tr: &Trajectory, species: &[usize]) -> String {
    let counts = ode_counts(net, tr);
    let course = Course::Deterministic {
        times: &tr.times,
        counts: &counts,
    };
    svg(net, course, species)
}

/// The JSON document of an ensemble run with, where `--exact` asked for it, the comparison
/// with the exact law under `exact` (null, with `exact_note`, where the network does not fit
/// a finite state projection).
pub fn json_with_exact(
    net: &Network,
    r: &EnsembleResult,
    exact: Option<&Result<crate::distribution::compare::ExactComparison, String>>,
) -> Value {
    super::schema::to_value(&document_with_exact(net, r, exact))
}

/// The typed document of [`json_with_exact`].
pub fn document_with_exact<'a>(
    net: &Network,
    r: &EnsembleResult,
    exact: Option<&'a Result<crate::distribution::compare::ExactComparison, String>>,
) -> EnsembleDocument<'a> {
    let mut doc = document(net, r);
    match exact {
        Some(Ok(c)) => doc.exact = Some(Exact::Compared(c)),
        Some(Err(note)) => {
            doc.exact = Some(Exact::Unavailable);
            doc.exact_note = Some(note.clone());
        }
        None => {}
    }
    doc
}

/// The comparison with the exact law: per species the largest |Z| and |Y| over the grid and
/// how many points pass the suite's thresholds (|Z| ≥ 3, |Y| ≥ 5).
pub fn exact_table(
    exact: &Result<crate::distribution::compare::ExactComparison, String>,
) -> String {
    let c = match exact {
        Ok(c) => c,
        Err(note) => return format!("\nexact comparison unavailable: {note}\n"),
    };
    let mut out = format!(
        "\nagainst the exact distribution ({} states, error bound {}): \
         Z = √n(mean − μ)/σ, Y = √(n/2)(S²/σ² − 1) at each of {} grid times\n",
        c.states,
        num(c.truncation_error),
        c.times.len()
    );
    let mut t = Table::new(&["species", "max |Z|", "|Z| ≥ 3", "max |Y|", "|Y| ≥ 5"]);
    for (name, s) in &c.species.0 {
        t.row(vec![
            name.clone(),
            num(s.max_abs_z),
            s.z_outside_3.to_string(),
            num(s.max_abs_y),
            s.y_outside_5.to_string(),
        ]);
    }
    out.push_str(&t.render());
    out.push_str(
        "a correct simulator gives |Z| < 3 at nearly every point (about 1 in 370 by chance) and |Y| < 5\n",
    );
    out
}

/// A run's grid as an imported model's symbols read it ([`crate::sbml::output`]): at grid
/// point `k`, the counts of the network's species (means over replicates), the values of all
/// its params, and, for an ensemble, the SD of network species `i` and param `p`.
pub struct ModelGrid<'a> {
    pub times: &'a [f64],
    pub counts: Vec<Vec<f64>>,
    pub params: Vec<Vec<f64>>,
    /// `(species SD by index, param SD by index)` per grid point; none for the ODE.
    pub sd: Option<Vec<(Vec<f64>, Vec<f64>)>>,
    pub replicates: u64,
}

impl<'a> ModelGrid<'a> {
    /// The grid of an ensemble: means and SDs over replicates.
    pub fn ensemble(net: &Network, r: &'a EnsembleResult) -> ModelGrid<'a> {
        let base: Vec<f64> = net.params.iter().map(|p| p.value.value).collect();
        let mut counts = Vec::new();
        let mut params = Vec::new();
        let mut sd = Vec::new();
        for (k, row) in r.grid.iter().enumerate() {
            counts.push(row.iter().map(Welford::mean).collect());
            let mut p = base.clone();
            let mut p_sd = vec![0.0; base.len()];
            for (q, &index) in r.varying_params.iter().enumerate() {
                p[index] = r.grid_params[k][q].mean();
                p_sd[index] = r.grid_params[k][q].sd();
            }
            params.push(p);
            sd.push((row.iter().map(Welford::sd).collect(), p_sd));
        }
        ModelGrid {
            times: &r.grid_times,
            counts,
            params,
            sd: Some(sd),
            replicates: r.spec.replicates,
        }
    }

    /// The grid of an ODE trajectory.
    pub fn ode(net: &Network, tr: &'a Trajectory) -> ModelGrid<'a> {
        ModelGrid {
            times: &tr.times,
            counts: ode_counts(net, tr),
            params: tr.params.clone(),
            sd: None,
            replicates: 1,
        }
    }
}

/// Puts every species (amount and concentration), parameter and compartment of an imported
/// model into `series` by SBML id, in the model's own units; returns the units and a note
/// naming what is left out. A rule-computed value is left out of an ensemble of several
/// replicates: the mean of a nonlinear rule over replicates is not the rule at the mean
/// state, and the replicates' own values are not kept.
pub fn model_series(
    net: &Network,
    out: &crate::sbml::output::Output,
    grid: &ModelGrid,
    series: &mut Named<Series>,
) -> (ModelUnits, Option<String>) {
    use crate::sbml::output::{Held, SymbolKind};
    let rows: Vec<Vec<crate::sbml::output::Value>> = (0..grid.times.len())
        .map(|k| out.values(&grid.counts[k], &grid.params[k], grid.times[k]))
        .collect();
    let mut left_out = Vec::new();
    let per_count = crate::sbml::map::model_amount_per_count(net);
    let Some(first) = rows.first() else {
        let u = out.units();
        return (
            ModelUnits {
                substance: u.substance,
                volume: u.volume,
                time: u.time,
            },
            None,
        );
    };
    for (n, v) in first.iter().enumerate() {
        if v.ruled && grid.replicates > 1 {
            left_out.push(v.id.clone());
            continue;
        }
        let col = |f: &dyn Fn(&crate::sbml::output::Value) -> f64| -> Vec<f64> {
            rows.iter().map(|row| f(&row[n])).collect()
        };
        let sd = grid.sd.as_ref().map(|sd| {
            sd.iter()
                .map(|(s, p)| match v.held {
                    Some(Held::Species { index, scale }) => s[index] * scale,
                    Some(Held::Param { index, scale }) => p[index] * scale,
                    None => 0.0,
                })
                .collect::<Vec<f64>>()
        });
        let entry = match v.kind {
            SymbolKind::Species => {
                let amount = col(&|x| x.value);
                let conc = col(&|x| x.concentration.unwrap_or(f64::NAN));
                let size = out.species_size(&v.id).unwrap_or(f64::NAN);
                let conc_sd = sd
                    .as_ref()
                    .map(|sd| sd.iter().map(|s| s / size).collect::<Vec<f64>>());
                let compartment = out.compartment_of(&v.id);
                let to_unit = 1.0 / (per_count * net.amount.count_per_amount);
                Series {
                    mean: amount.iter().map(|a| a * to_unit).collect(),
                    sd: sd.as_ref().map(|s| s.iter().map(|a| a * to_unit).collect()),
                    concentration: Some(Concentration {
                        mean_molar: conc.clone(),
                        sd_molar: conc_sd.clone(),
                        concentration_mean: conc,
                        concentration_sd: conc_sd,
                        concentration_unit: net.amount.concentration_unit.clone(),
                        compartment,
                    }),
                    kind: None,
                    amount_mean: Some(amount),
                    amount_sd: sd,
                    assigned: v.ruled.then_some(true),
                }
            }
            SymbolKind::Parameter | SymbolKind::Compartment => Series {
                mean: col(&|x| x.value),
                sd,
                concentration: None,
                kind: Some(if v.kind == SymbolKind::Parameter {
                    SeriesKind::Param
                } else {
                    SeriesKind::Compartment
                }),
                assigned: v.ruled.then_some(true),
                ..Series::default()
            },
        };
        series.insert(v.id.clone(), entry);
    }
    let u = out.units();
    let note = (!left_out.is_empty()).then(|| {
        format!(
            "left out of an ensemble of {} replicates: {} (set by assignment rules, whose mean over replicates is not the rule at the mean state; a single replicate or --method ode reports them)",
            grid.replicates,
            left_out.join(", ")
        )
    });
    (
        ModelUnits {
            substance: u.substance,
            volume: u.volume,
            time: u.time,
        },
        note,
    )
}
