//! Reconciliation: do the elementary rate constants, put together, reproduce the loop's
//! organ-level behaviour?
//!
//! For every carrier motif the compiler found, the flux its output step carries in a stationary
//! exact ensemble is compared with three predictions:
//!
//! - the Langmuir form k_out·X_T·L_T/(K + L_T), with K = (k_off + Σk_cat)/k_on (Briggs &
//!   Haldane 1925 \[M\]) and L_T the ligand available to the motif (its clamped level, or the
//!   ensemble's stationary mean of free plus bound ligand): the standard quasi-steady-state
//!   (sQSSA) law, valid when X_T ≪ L_T + K (Segel & Slemrod 1989 \[M\]);
//! - the total-QSSA form k_out·C(X_T, L_T) with C the smaller root of
//!   C² − (X_T + K + L_T)·C + X_T·L_T = 0 (Borghans, de Boer & Segel 1996; Tzafriri 2003 \[M\]),
//!   where the ligand is not clamped;
//! - the flux at the deterministic steady state of the full network.
//!
//! Each prediction gets its own verdict against a practical tolerance ([`verdict`]: agrees,
//! differs or undecided, with the plain significance test beside it and the causes that could
//! explain a difference, each with its expected size). The motif's own `verdict` is the
//! Langmuir form's: the organ-level law in question.

pub mod fit;
pub mod observe;
pub mod verdict;

use crate::deterministic::{langmuir, solve, Steady, SteadyOptions};
use crate::distribution;
use crate::ensemble::{self, EnsembleResult, EnsembleSpec};
use crate::network::{compile::Override, motif_chains, MotifKind, Network, Overrides};
use crate::serial::{by_name, molar, Named};
use crate::stationary::{self, Plan, Start};
use crate::stats::{total_variance, Welford};
use crate::{Error, Result};
pub use observe::{parse_observation, Observation};
use schemars::JsonSchema;
use serde::Serialize;
pub use verdict::{Cause, CauseKind, Judgement, Verdict};

/// The sQSSA is taken to fail when X_T/(L_T + K) exceeds this (Segel & Slemrod 1989 ask ≪ 1).
pub const QSSA_LIMIT: f64 = 0.1;
/// Two halves of the window disagree when their difference exceeds this many standard errors.
pub const HALVES_Z: f64 = 4.0;
/// Relative numerical error allowed to the closed-form and steady-state predictions.
pub const PREDICTION_TOLERANCE: f64 = 1e-6;
/// An observation is consistent when |z| is at most this (two-sided 95 %).
pub const OBSERVATION_Z: f64 = 1.96;
/// The default practical tolerance of a verdict (`--tolerance`).
pub const DEFAULT_TOLERANCE: f64 = 0.05;

/// What the user asked for.
#[derive(Clone, Debug)]
pub struct Options {
    pub replicates: u64,
    pub seed: u64,
    pub threads: Option<usize>,
    pub t_end: Option<f64>,
    pub burn_in: Option<f64>,
    /// Add replicates until each motif's interval half-width is below this fraction of its mean.
    pub precision: Option<f64>,
    /// Most replicates `precision` may use.
    pub max_replicates: u64,
    /// Relative difference within which a prediction agrees with the ensemble.
    pub tolerance: f64,
    pub observations: Vec<Observation>,
    /// Param to fit to the first observation.
    pub fit: Option<String>,
    /// Start replicates from the file's initial state instead of the rounded steady state.
    pub from_initial: bool,
    /// Most states of the exact stationary law solved beside the ensemble (0: none).
    pub exact_states: usize,
    pub progress: bool,
}

impl Default for Options {
    fn default() -> Options {
        Options {
            replicates: 200,
            seed: 0,
            threads: None,
            t_end: None,
            burn_in: None,
            precision: None,
            max_replicates: 20_000,
            tolerance: DEFAULT_TOLERANCE,
            observations: Vec::new(),
            fit: None,
            from_initial: false,
            exact_states: distribution::EMBEDDED_MAX_STATES,
            progress: false,
        }
    }
}

impl Options {
    /// Checks the values that need no simulation, so a bad one is refused before any run.
    pub fn validate(&self) -> Result<()> {
        if self.replicates == 0 {
            return Err(Error::usage("--replicates must be at least 1"));
        }
        if let Some(p) = self.precision {
            if !(p > 0.0 && p < 1.0) {
                return Err(Error::usage(format!(
                    "--precision must lie strictly between 0 and 1, got {}",
                    crate::numbers::round_trip(p)
                )));
            }
        }
        if !(self.tolerance > 0.0 && self.tolerance.is_finite()) {
            return Err(Error::usage(format!(
                "--tolerance must be a positive relative difference such as 0.05, got {}",
                crate::numbers::round_trip(self.tolerance)
            )));
        }
        if self.fit.is_some() && self.observations.is_empty() {
            return Err(Error::usage(
                "--fit needs an --observe level to fit, e.g. --observe H=2nM±0.2nM",
            ));
        }
        Ok(())
    }
}

/// An ensemble estimate of a mean with its standard error and Student-t 95 % interval.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Estimate {
    pub mean: f64,
    pub stderr: f64,
    pub ci95: [f64; 2],
    pub n: u64,
}

impl Estimate {
    /// The estimate of `w`'s mean scaled by `factor`.
    pub fn of(w: &Welford, factor: f64) -> Estimate {
        let ci = w.ci95();
        Estimate {
            mean: w.mean() * factor,
            stderr: w.stderr() * factor,
            ci95: [ci[0] * factor, ci[1] * factor],
            n: w.count(),
        }
    }

    pub fn half_width(&self) -> f64 {
        (self.ci95[1] - self.ci95[0]) / 2.0
    }

    /// Whether `prediction` lies in the interval widened by `tolerance` (absolute).
    pub fn contains(&self, prediction: f64, tolerance: f64) -> bool {
        prediction >= self.ci95[0] - tolerance && prediction <= self.ci95[1] + tolerance
    }
}

/// A flux as the ensemble measured it (molecules/s).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Flux {
    pub mean_per_s: f64,
    pub stderr_per_s: f64,
    pub ci95: [f64; 2],
    pub replicates: u64,
}

impl From<Estimate> for Flux {
    fn from(e: Estimate) -> Flux {
        Flux {
            mean_per_s: e.mean,
            stderr_per_s: e.stderr,
            ci95: e.ci95,
            replicates: e.n,
        }
    }
}

/// The three predictions of a motif's flux (molecules/s).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Predicted {
    pub langmuir_per_s: f64,
    /// `None` where the ligand is clamped (the tQSSA form is then the Langmuir form).
    pub tqssa_per_s: Option<f64>,
    pub ode_per_s: f64,
}

/// Each prediction's judgement.
#[derive(Clone, Debug, PartialEq, Serialize, JsonSchema)]
pub struct Verdicts {
    pub langmuir: Judgement,
    pub tqssa: Option<Judgement>,
    pub ode: Judgement,
}

fn kind_name<S: serde::Serializer>(k: &MotifKind, s: S) -> std::result::Result<S::Ok, S::Error> {
    s.serialize_str(k.as_str())
}

/// One carrier motif reconciled.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct MotifReport {
    #[serde(skip)]
    pub motif: usize,
    pub carrier: String,
    pub ligand: String,
    #[serde(serialize_with = "kind_name")]
    #[schemars(with = "String")]
    pub kind: MotifKind,
    /// The output step's label.
    pub output: String,
    /// K in molecules.
    pub k_half: f64,
    pub k_half_molar: Option<f64>,
    /// X_T (molecules).
    pub carrier_total: f64,
    /// k_out·X_T (molecules/s).
    pub capacity_per_s: f64,
    pub capacity_molar_per_s: Option<f64>,
    /// L_T (molecules): clamped level, or stationary mean of free + bound ligand.
    pub ligand_level: f64,
    pub ligand_level_molar: Option<f64>,
    pub ligand_clamped: bool,
    /// Stationary mean of the free ligand (molecules).
    pub ligand_free: f64,
    pub predicted: Predicted,
    pub ensemble: Flux,
    /// (ensemble − Langmuir)/Langmuir.
    pub relative_difference: f64,
    /// The Langmuir form's verdict.
    pub verdict: Verdict,
    pub verdicts: Verdicts,
    pub tolerance: f64,
    /// X_T/(L_T + K), the sQSSA validity parameter (Segel & Slemrod 1989).
    pub qssa_parameter: f64,
    /// z of (first half − second half) of the window's flux.
    pub halves_z: f64,
    /// The exact stationary mean flux of the output step (finite state projection), where the
    /// network fits one; null elsewhere.
    pub exact: Option<ExactFlux>,
}

/// A motif's exact stationary output flux beside the predictions and the ensemble.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct ExactFlux {
    pub mean_per_s: f64,
    /// (exact − Langmuir)/Langmuir: the low-copy shift of the mean flux, exactly.
    pub langmuir_relative_difference: f64,
    /// (ensemble − exact)/exact.
    pub ensemble_relative_difference: f64,
}

/// A chain of motifs in series, reconciled end to end.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct ChainReport {
    /// The carriers of the stages, in order.
    pub stages: Vec<String>,
    #[serde(skip)]
    pub stage_motifs: Vec<usize>,
    /// The last stage's flux in the ensemble.
    pub ensemble: Flux,
    pub ode_per_s: f64,
    /// The last stage's Langmuir form at the deterministic ligand levels of every stage.
    pub langmuir_per_s: f64,
    /// The end-to-end verdict: the ODE flux of the last stage against the ensemble.
    pub verdict: Verdict,
    pub verdicts: ChainVerdicts,
}

/// A chain's judgements.
#[derive(Clone, Debug, PartialEq, Serialize, JsonSchema)]
pub struct ChainVerdicts {
    pub ode: Judgement,
    pub langmuir: Judgement,
}

/// Whether an observed level fits the model (a z-test with the observation's own SD).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Consistency {
    Consistent,
    Deviates,
}

impl Consistency {
    pub fn as_str(self) -> &'static str {
        match self {
            Consistency::Consistent => "consistent",
            Consistency::Deviates => "deviates",
        }
    }
}

/// An observed steady level against the model (levels in molecules, `_molar` beside them).
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct ObservationReport {
    pub name: String,
    #[serde(skip)]
    pub observation: Observation,
    pub observed: f64,
    pub sd: f64,
    /// Deterministic steady level (molecules).
    pub deterministic: f64,
    pub ensemble_mean: f64,
    pub ci95: [f64; 2],
    #[serde(skip)]
    pub ensemble: Estimate,
    /// (ensemble mean − observed)/√(sd² + stderr²).
    pub z: f64,
    pub verdict: Consistency,
    pub observed_molar: Option<f64>,
    pub sd_molar: Option<f64>,
    pub deterministic_molar: Option<f64>,
    pub ensemble_mean_molar: Option<f64>,
    pub ci95_molar: Option<[f64; 2]>,
    /// d ln(level)/d ln(param) for every positive param, in param order.
    #[serde(serialize_with = "sensitivity_map")]
    #[schemars(with = "std::collections::BTreeMap<String, f64>")]
    pub sensitivities: Vec<(String, f64)>,
}

fn sensitivity_map<S: serde::Serializer>(
    v: &[(String, f64)],
    s: S,
) -> std::result::Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    let mut m = s.serialize_map(Some(v.len()))?;
    for (p, x) in v {
        m.serialize_entry(p, x)?;
    }
    m.end()
}

/// The outcome of `--fit`.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct FitReport {
    pub param: String,
    /// The unit the file wrote the param in (`/min` for `60 /min`); null where it wrote a
    /// bare number, whose unit is the canonical one (molecules, litres, seconds).
    pub unit: Option<String>,
    /// The file's value, the fitted value and its 95 % interval in that unit.
    pub original_in_unit: f64,
    pub value_in_unit: Option<f64>,
    pub ci95_in_unit: Option<[f64; 2]>,
    /// The file's value, canonical units.
    pub original: f64,
    /// The fitted value in canonical units, or `None` with `why`.
    pub value: Option<f64>,
    /// 95 % interval of the fitted value (canonical units): the values whose deterministic level
    /// is the observation ± 1.96 SD.
    pub ci95: Option<[f64; 2]>,
    pub why: Option<String>,
    /// The ensemble at the fitted value against the observation.
    pub confirmation: Option<ObservationReport>,
}

/// A species that only accumulates, deterministic and in the ensemble (molecules/s).
#[derive(Clone, Debug, PartialEq, Serialize, JsonSchema)]
pub struct OutputRate {
    #[serde(skip)]
    pub name: String,
    pub rate_per_s: f64,
    pub ensemble_rate_per_s: Option<f64>,
    pub ensemble_rate_ci95: Option<[f64; 2]>,
}

impl Named for OutputRate {
    fn name(&self) -> &str {
        &self.name
    }
}

/// The outputs of a steady state, with the ensemble's accumulation rates where there is one.
pub fn output_rates(
    net: &Network,
    steady: &Steady,
    ens: Option<&EnsembleResult>,
) -> Vec<OutputRate> {
    steady
        .outputs
        .iter()
        .map(|o| {
            let measured = ens.map(|e| {
                let w = &e.window_change[o.species];
                let t = e.window_length();
                let ci = w.ci95();
                (w.mean() / t, [ci[0] / t, ci[1] / t])
            });
            OutputRate {
                name: net.species[o.species].name.clone(),
                rate_per_s: o.rate_per_s,
                ensemble_rate_per_s: measured.map(|m| m.0),
                ensemble_rate_ci95: measured.map(|m| m.1),
            }
        })
        .collect()
}

/// Everything `copyloop reconcile` reports.
#[derive(Clone, Debug, Serialize, JsonSchema)]
pub struct Reconciliation {
    pub file: String,
    pub seed: u64,
    pub replicates: u64,
    pub plan: Plan,
    #[serde(skip)]
    pub steady: Steady,
    pub motifs: Vec<MotifReport>,
    pub chains: Vec<ChainReport>,
    pub observations: Vec<ObservationReport>,
    /// The first observation's sensitivities.
    #[serde(serialize_with = "sensitivity_map")]
    #[schemars(with = "std::collections::BTreeMap<String, f64>")]
    pub sensitivities: Vec<(String, f64)>,
    pub fit: Option<FitReport>,
    #[serde(serialize_with = "by_name")]
    #[schemars(with = "std::collections::BTreeMap<String, OutputRate>")]
    pub outputs: Vec<OutputRate>,
    pub tolerance: f64,
    pub events_total: u64,
    pub wall_seconds: f64,
    /// The exact stationary law's boundary probability and projection size, or why there is
    /// none.
    pub exact_truncation_error: Option<f64>,
    pub exact_states: Option<usize>,
    pub exact_note: Option<String>,
}

/// Runs the reconciliation of `net`.
pub fn reconcile(net: &Network, opts: &Options) -> Result<Reconciliation> {
    opts.validate()?;
    finite_constants(net)?;
    let steady = solve(net, &SteadyOptions::default())?;
    let plan = stationary::plan(
        net,
        Some(&steady),
        opts.burn_in,
        opts.t_end,
        stationary::EVENT_BUDGET / opts.replicates.max(1) as f64,
    );
    let plan = if opts.from_initial {
        Plan {
            start: net.initial_state(),
            started_from: Start::InitialState,
            ..plan
        }
    } else {
        plan
    };
    validate_plan(&plan)?;
    let (ens, replicates) = run_ensemble(net, &plan, opts)?;
    let (exact, exact_note) = if net.motifs.is_empty() {
        (None, None)
    } else {
        crate::noise::exact_beside(net, opts.exact_states, opts.threads)
    };
    let motifs: Vec<MotifReport> = (0..net.motifs.len())
        .map(|m| {
            let mut r = motif_report(net, m, &ens, &steady, opts);
            let label = &net.reactions[net.motifs[m].output].label;
            r.exact = exact.as_ref().and_then(|e| e.fluxes.get(label)).map(|&f| {
                let l = r.predicted.langmuir_per_s;
                ExactFlux {
                    mean_per_s: f,
                    langmuir_relative_difference: (f - l) / l,
                    ensemble_relative_difference: (r.ensemble.mean_per_s - f) / f,
                }
            });
            r
        })
        .collect();
    let chains = motif_chains(net)
        .into_iter()
        .map(|stages| chain_report(net, stages, &ens, &steady, opts.tolerance))
        .collect();
    let mut observations = Vec::new();
    for o in &opts.observations {
        observations.push(observation_report(net, o, &ens, &steady, true)?);
    }
    let fit = match (&opts.fit, opts.observations.first()) {
        (Some(p), Some(o)) => Some(fit_param(net, p, o, &plan, opts)?),
        _ => None,
    };
    Ok(Reconciliation {
        file: net.file.clone(),
        seed: opts.seed,
        replicates,
        sensitivities: observations
            .first()
            .map_or(Vec::new(), |o| o.sensitivities.clone()),
        outputs: output_rates(net, &steady, Some(&ens)),
        plan,
        steady,
        motifs,
        chains,
        observations,
        fit,
        tolerance: opts.tolerance,
        events_total: ens.events_total,
        wall_seconds: ens.wall_seconds,
        exact_truncation_error: exact.as_ref().map(|e| e.truncation_error),
        exact_states: exact.as_ref().map(|e| e.states),
        exact_note,
    })
}

fn validate_plan(plan: &Plan) -> Result<()> {
    if !(plan.t_end.is_finite() && plan.t_end > 0.0) {
        return Err(Error::usage(format!(
            "the end time must be a finite time above 0 (it came out as {} s: no finite relaxation time; give --t-end)",
            crate::numbers::plain(plan.t_end)
        )));
    }
    if !(plan.burn_in >= 0.0 && plan.burn_in < plan.t_end) {
        return Err(Error::usage(format!(
            "--burn-in must satisfy 0 <= burn-in < t-end ({} s), got {} s",
            crate::numbers::plain(plan.t_end),
            crate::numbers::plain(plan.burn_in)
        )));
    }
    Ok(())
}

fn spec(plan: &Plan, opts: &Options, replicates: u64, first: u64) -> EnsembleSpec {
    plan.ensemble(replicates, first, opts.seed, opts.threads, opts.progress)
}

/// The ensemble, grown in reproducible batches (replicates 0…N−1, then N…2N−1, …) until every
/// motif's flux interval is narrow enough when `precision` is asked.
fn run_ensemble(net: &Network, plan: &Plan, opts: &Options) -> Result<(EnsembleResult, u64)> {
    let mut ens = ensemble::run(net, &spec(plan, opts, opts.replicates, 0))?;
    let mut used = opts.replicates;
    let Some(p) = opts.precision else {
        return Ok((ens, used));
    };
    let wide = |e: &EnsembleResult| {
        net.motifs.iter().any(|m| {
            let est = Estimate::of(&e.firings[m.output], 1.0);
            est.half_width() > p * est.mean.abs()
        })
    };
    while wide(&ens) && used < opts.max_replicates {
        let batch = used.min(opts.max_replicates - used);
        let more = ensemble::run(net, &spec(plan, opts, batch, used))?;
        ens.merge(&more);
        used += batch;
    }
    Ok((ens, used))
}

/// The causes that could explain a motif's prediction missing the ensemble, with their
/// expected relative errors (see [`CauseKind`] for each estimate).
fn motif_causes(
    net: &Network,
    m: usize,
    ens: &EnsembleResult,
    langmuir: f64,
    tqssa: Option<f64>,
    precision: Option<f64>,
    flux: &Estimate,
) -> (Vec<Cause>, Vec<Cause>) {
    let motif = &net.motifs[m];
    let mut common = Vec::new();
    let clamped = net.species[motif.ligand].clamped;
    if !clamped {
        let l = ens.time_average[motif.ligand].mean();
        let var = total_variance(&ens.time_moments[motif.ligand]);
        let k = motif.k_half;
        if l > 0.0 {
            common.push(Cause {
                cause: CauseKind::LowCopyNumber,
                expected_relative_error: -k * var / (l * (k + l) * (k + l)),
            });
        }
    }
    let diff = &ens.half_difference[motif.output];
    let total = ens.firings[motif.output].mean();
    if diff.stderr() > 0.0 && (diff.mean() / diff.stderr()).abs() > HALVES_Z && total > 0.0 {
        common.push(Cause {
            cause: CauseKind::NotStationary,
            expected_relative_error: diff.mean() / total,
        });
    }
    if let Some(p) = precision {
        if flux.half_width() > p * flux.mean.abs() && flux.mean != 0.0 {
            common.push(Cause {
                cause: CauseKind::TooFewReplicates,
                expected_relative_error: flux.half_width() / flux.mean.abs(),
            });
        }
    }
    let mut for_langmuir = common.clone();
    if let Some(t) = tqssa {
        if langmuir != 0.0 {
            for_langmuir.insert(
                0,
                Cause {
                    cause: CauseKind::LigandDepletion,
                    expected_relative_error: (t - langmuir) / langmuir,
                },
            );
        }
    }
    (for_langmuir, common)
}

fn motif_report(
    net: &Network,
    m: usize,
    ens: &EnsembleResult,
    steady: &Steady,
    opts: &Options,
) -> MotifReport {
    let motif = &net.motifs[m];
    let window = ens.window_length();
    let mean = |i: usize| ens.time_average[i].mean();
    let clamped = net.species[motif.ligand].clamped;
    let carrier_total = mean(motif.carrier) + mean(motif.complex);
    let ligand_free = mean(motif.ligand);
    let ligand_level = if clamped {
        net.species[motif.ligand].initial as f64
    } else {
        ligand_free + mean(motif.complex)
    };
    let k = motif.k_half;
    let langmuir_per_s = langmuir::langmuir_flux(motif.c_out, carrier_total, ligand_level, k);
    let tqssa_per_s =
        (!clamped).then(|| langmuir::tqssa_flux(motif.c_out, carrier_total, ligand_level, k));
    let ode_per_s = steady.fluxes_per_s[motif.output];
    let flux = Estimate::of(&ens.firings[motif.output], 1.0 / window);
    let tol = |p: f64| PREDICTION_TOLERANCE * p.abs();
    let ode_tol = tol(ode_per_s) + steady.residual.relative * ode_per_s.abs();
    let (langmuir_causes, common) = motif_causes(
        net,
        m,
        ens,
        langmuir_per_s,
        tqssa_per_s,
        opts.precision,
        &flux,
    );
    let judge = |p: f64, numerical: f64, causes: &[Cause]| {
        verdict::judge(&flux, p, numerical, opts.tolerance, causes)
    };
    let verdicts = Verdicts {
        langmuir: judge(langmuir_per_s, tol(langmuir_per_s), &langmuir_causes),
        tqssa: tqssa_per_s.map(|t| judge(t, tol(t), &common)),
        ode: judge(ode_per_s, ode_tol, &common),
    };
    let diff = &ens.half_difference[motif.output];
    let halves_z = if diff.stderr() > 0.0 {
        diff.mean() / diff.stderr()
    } else {
        0.0
    };
    // Molar figures in the motif's own compartment: K and the ligand in the binding step's,
    // the capacity in the output step's.
    let omega = net.reaction_molar_omega(motif.bind);
    MotifReport {
        motif: m,
        kind: motif.kind,
        carrier: net.species[motif.carrier].name.clone(),
        ligand: net.species[motif.ligand].name.clone(),
        output: net.reactions[motif.output].label.clone(),
        k_half: k,
        k_half_molar: molar(k, omega),
        carrier_total,
        capacity_per_s: motif.c_out * carrier_total,
        capacity_molar_per_s: molar(
            motif.c_out * carrier_total,
            net.reaction_molar_omega(motif.output),
        ),
        ligand_level,
        ligand_level_molar: molar(ligand_level, net.species_molar_omega(motif.ligand)),
        ligand_clamped: clamped,
        ligand_free,
        predicted: Predicted {
            langmuir_per_s,
            tqssa_per_s,
            ode_per_s,
        },
        ensemble: flux.into(),
        relative_difference: verdicts.langmuir.relative_difference,
        verdict: verdicts.langmuir.verdict,
        verdicts,
        tolerance: opts.tolerance,
        qssa_parameter: carrier_total / (ligand_level + k),
        halves_z,
        exact: None,
    }
}

fn chain_report(
    net: &Network,
    stages: Vec<usize>,
    ens: &EnsembleResult,
    steady: &Steady,
    tolerance: f64,
) -> ChainReport {
    let last = &net.motifs[*stages.last().expect("chains have stages")];
    let ensemble = Estimate::of(&ens.firings[last.output], 1.0 / ens.window_length());
    let ode_per_s = steady.fluxes_per_s[last.output];
    let x = &steady.counts;
    let level = if net.species[last.ligand].clamped {
        x[last.ligand]
    } else {
        x[last.ligand] + x[last.complex]
    };
    let langmuir_per_s = langmuir::langmuir_flux(
        last.c_out,
        x[last.carrier] + x[last.complex],
        level,
        last.k_half,
    );
    let tol = PREDICTION_TOLERANCE * ode_per_s.abs() + steady.residual.relative * ode_per_s.abs();
    let ode = verdict::judge(&ensemble, ode_per_s, tol, tolerance, &[]);
    let langmuir = verdict::judge(
        &ensemble,
        langmuir_per_s,
        PREDICTION_TOLERANCE * langmuir_per_s.abs(),
        tolerance,
        &[],
    );
    ChainReport {
        stages: stages
            .iter()
            .map(|&s| net.species[net.motifs[s].carrier].name.clone())
            .collect(),
        stage_motifs: stages,
        verdict: ode.verdict,
        verdicts: ChainVerdicts { ode, langmuir },
        ensemble: ensemble.into(),
        ode_per_s,
        langmuir_per_s,
    }
}

fn observation_report(
    net: &Network,
    o: &Observation,
    ens: &EnsembleResult,
    steady: &Steady,
    with_sensitivities: bool,
) -> Result<ObservationReport> {
    let ensemble = Estimate::of(&ens.time_average[o.species], 1.0);
    let spread = (o.sd * o.sd + ensemble.stderr * ensemble.stderr).sqrt();
    let z = if spread > 0.0 {
        (ensemble.mean - o.value) / spread
    } else if ensemble.mean == o.value {
        0.0
    } else {
        f64::INFINITY
    };
    let sensitivities = if with_sensitivities {
        sensitivities(net, o.species, steady)?
    } else {
        Vec::new()
    };
    let omega = net.species_molar_omega(o.species);
    let deterministic = steady.counts[o.species];
    Ok(ObservationReport {
        name: o.name.clone(),
        observation: o.clone(),
        observed: o.value,
        sd: o.sd,
        deterministic,
        ensemble_mean: ensemble.mean,
        ci95: ensemble.ci95,
        ensemble,
        z,
        verdict: if z.abs() <= OBSERVATION_Z {
            Consistency::Consistent
        } else {
            Consistency::Deviates
        },
        observed_molar: molar(o.value, omega),
        sd_molar: molar(o.sd, omega),
        deterministic_molar: molar(deterministic, omega),
        ensemble_mean_molar: molar(ensemble.mean, omega),
        ci95_molar: omega.map(|w| [ensemble.ci95[0] / w, ensemble.ci95[1] / w]),
        sensitivities,
    })
}

/// Relative step of the central differences in ln(param).
const SENSITIVITY_STEP: f64 = 1e-3;

/// The network with param `name` set to `value` (canonical units).
fn with_param(net: &Network, name: &str, value: f64) -> Result<Network> {
    let p = net
        .params
        .iter()
        .find(|p| p.name == name)
        .ok_or_else(|| Error::usage(format!("`{name}` is not a param of {}", net.file)))?;
    let q = crate::network::Quantity::new(value, p.value.dim);
    net.with_overrides(&Overrides::default().set(name, Override::Quantity(q)))
}

/// The steady state of `net`, solved from `guess` first and from the initial state if that
/// fails.
fn steady_near(net: &Network, guess: &Steady) -> Result<Steady> {
    solve(net, &SteadyOptions::near(guess.conc.clone()))
        .or_else(|_| solve(net, &SteadyOptions::default()))
}

/// The deterministic steady level (molecules) of species `i` with param `name` = `value`.
pub fn level_at(net: &Network, name: &str, value: f64, i: usize, guess: &Steady) -> Result<f64> {
    Ok(steady_near(&with_param(net, name, value)?, guess)?.counts[i])
}

/// d ln(level of species i)/d ln(p) for every positive param p, by central differences of the
/// steady state in ln p (step 1e-3; truncation error O(h²)).
pub fn sensitivities(net: &Network, i: usize, steady: &Steady) -> Result<Vec<(String, f64)>> {
    let base = steady.counts[i];
    let mut out = Vec::new();
    for p in net.params.iter().filter(|p| p.value.value > 0.0) {
        let h = SENSITIVITY_STEP;
        let up = level_at(net, &p.name, p.value.value * h.exp(), i, steady)?;
        let down = level_at(net, &p.name, p.value.value * (-h).exp(), i, steady)?;
        let s = if base > 0.0 && up > 0.0 && down > 0.0 {
            (up.ln() - down.ln()) / (2.0 * h)
        } else {
            f64::NAN
        };
        out.push((p.name.clone(), s));
    }
    Ok(out)
}

/// Refuses a motif whose half-saturation constant overflows (`check` warns of it): its
/// predictions and its relaxation times would be infinite, and the failure would otherwise
/// surface far from its cause.
fn finite_constants(net: &Network) -> Result<()> {
    if let Some(r) = net
        .reactions
        .iter()
        .find(|r| r.stochastic_constant().is_some_and(|c| !c.is_finite()))
    {
        return Err(Error::usage(format!(
            "{}:{}: the constant of step `{}` overflows to infinity; give a finite constant",
            net.file, r.span.line, r.label
        )));
    }
    if let Some(m) = net.motifs.iter().find(|m| !m.k_half.is_finite()) {
        let r = &net.reactions[m.unbind.unwrap_or(m.output)];
        return Err(Error::usage(format!(
            "{}:{}: the half-saturation constant K of motif {}·{} overflows (K = (unbind + output constant) / bind is not finite), so its fluxes cannot be reconciled; give step `{}` a smaller constant",
            net.file,
            r.span.line,
            net.species[m.carrier].name,
            net.species[m.ligand].name,
            r.label
        )));
    }
    Ok(())
}

fn fit_param(
    net: &Network,
    name: &str,
    o: &Observation,
    plan: &Plan,
    opts: &Options,
) -> Result<FitReport> {
    let p = net
        .params
        .iter()
        .find(|p| p.name == name)
        .ok_or_else(|| Error::usage(format!("--fit {name}: not a param of {}", net.file)))?;
    if p.value.value <= 0.0 {
        return Err(Error::usage(format!(
            "--fit {name}: the param must be positive to be searched in log space"
        )));
    }
    let original = p.value.value;
    let guess = solve(net, &SteadyOptions::default())?;
    let root = |target: f64| {
        let mut g = |v: f64| -> std::result::Result<f64, String> {
            level_at(net, name, v, o.species, &guess)
                .map(|level| level - target)
                .map_err(|e| e.to_string())
        };
        fit::root_in_log_space(&mut g, original, 6.0, 1e-10)
    };
    let found = root(o.value);
    // The level is monotone in the param near the fit, so the values whose level is the
    // observation ± 1.96 SD bound a 95 % interval (an inversion of the observation's own
    // interval through the deterministic level).
    let ci95 = match (&found, o.sd > 0.0) {
        (Ok(_), true) => {
            match (
                root(o.value - OBSERVATION_Z * o.sd),
                root(o.value + OBSERVATION_Z * o.sd),
            ) {
                (Ok(a), Ok(b)) => Some([a.min(b), a.max(b)]),
                _ => None,
            }
        }
        _ => None,
    };
    let (unit, factor) = match net.source.written_unit(name) {
        Some((u, f)) => (Some(u), f),
        None => (None, 1.0),
    };
    let in_unit = |x: f64| match &unit {
        Some(u) => format!("{} {u}", crate::numbers::plain(x / factor)),
        None => crate::numbers::plain(x),
    };
    let (value, why) = match found {
        Ok(v) => (Some(v), None),
        Err(f) => (None, Some(f.describe(&in_unit))),
    };
    let confirmation = match value {
        Some(v) => {
            let fitted = with_param(net, name, v)?;
            let st = steady_near(&fitted, &guess)?;
            let plan2 = stationary::plan(
                &fitted,
                Some(&st),
                Some(plan.burn_in),
                Some(plan.t_end),
                f64::INFINITY,
            );
            let ens = ensemble::run(&fitted, &spec(&plan2, opts, opts.replicates, 0))?;
            Some(observation_report(&fitted, o, &ens, &st, false)?)
        }
        None => None,
    };
    Ok(FitReport {
        param: name.to_string(),
        unit,
        original_in_unit: original / factor,
        value_in_unit: value.map(|v| v / factor),
        ci95_in_unit: ci95.map(|c| [c[0] / factor, c[1] / factor]),
        original,
        value,
        ci95,
        why,
        confirmation,
    })
}
