//! Reconciliation: do the elementary rate constants, put together, reproduce the loop's
//! organ-level behaviour?
//!
//! For every carrier motif the compiler found, the flux its output step carries in a stationary
//! exact ensemble is compared with three predictions:
//!
//! - the Langmuir form k_out·X_T·L_T/(K + L_T), with K = (k_off + Σk_cat)/k_on (Briggs &
//!   Haldane 1925 [M]) and L_T the ligand available to the motif (its clamped level, or the
//!   ensemble's stationary mean of free plus bound ligand): the standard quasi-steady-state
//!   (sQSSA) law, valid when X_T ≪ L_T + K (Segel & Slemrod 1989 [M]);
//! - the total-QSSA form k_out·C(X_T, L_T) with C the smaller root of
//!   C² − (X_T + K + L_T)·C + X_T·L_T = 0 (Borghans, de Boer & Segel 1996; Tzafriri 2003 [M]),
//!   where the ligand is not clamped;
//! - the flux at the deterministic steady state of the full network.
//!
//! A prediction is "consistent" when it lies inside the ensemble's Student-t 95 % interval,
//! widened by the prediction's own numerical error; otherwise it "deviates", and the report
//! names the causes it can see: the QSSA condition fails, the window was not stationary (its
//! halves disagree), copy numbers are low, or the interval is wider than asked.

pub mod fit;
pub mod observe;

use crate::deterministic::{langmuir, solve, Steady, SteadyOptions};
use crate::distribution;
use crate::ensemble::{self, EnsembleResult, EnsembleSpec};
use crate::network::{compile::Override, motif_chains, MotifKind, Network, Overrides};
use crate::stationary::{self, Plan};
use crate::stats::Welford;
use crate::{Error, Result};
pub use observe::{parse_observation, Observation};

/// Below this mean count a carrier or ligand is "low copy number" (DESIGN.md: about 10).
pub const LOW_COPY: f64 = 10.0;
/// The sQSSA is taken to fail when X_T/(L_T + K) exceeds this (Segel & Slemrod 1989 ask ≪ 1).
pub const QSSA_LIMIT: f64 = 0.1;
/// Two halves of the window disagree when their difference exceeds this many standard errors.
pub const HALVES_Z: f64 = 4.0;
/// Relative numerical error allowed to the closed-form and steady-state predictions.
pub const PREDICTION_TOLERANCE: f64 = 1e-6;
/// An observation is consistent when |z| is at most this (two-sided 95 %).
pub const OBSERVATION_Z: f64 = 1.96;

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
    pub observations: Vec<Observation>,
    /// Param to fit to the first observation.
    pub fit: Option<String>,
    /// Start replicates from the file's initial state instead of the rounded steady state.
    pub from_initial: bool,
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
            observations: Vec::new(),
            fit: None,
            from_initial: false,
            progress: false,
        }
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

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Verdict {
    Consistent,
    Deviates,
}

impl Verdict {
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Consistent => "consistent",
            Verdict::Deviates => "deviates",
        }
    }

    fn from(consistent: bool) -> Verdict {
        if consistent {
            Verdict::Consistent
        } else {
            Verdict::Deviates
        }
    }
}

/// One carrier motif reconciled.
#[derive(Clone, Debug)]
pub struct MotifReport {
    pub motif: usize,
    pub kind: MotifKind,
    pub carrier: String,
    pub ligand: String,
    pub output: String,
    /// K in molecules.
    pub k_half: f64,
    /// X_T (molecules).
    pub carrier_total: f64,
    /// k_out·X_T (molecules/s).
    pub capacity_per_s: f64,
    /// L_T (molecules): clamped level, or stationary mean of free + bound ligand.
    pub ligand_level: f64,
    pub ligand_clamped: bool,
    /// Stationary mean of the free ligand (molecules).
    pub ligand_free: f64,
    pub langmuir_per_s: f64,
    /// `None` where the ligand is clamped (the tQSSA form is then the Langmuir form).
    pub tqssa_per_s: Option<f64>,
    pub ode_per_s: f64,
    pub ensemble: Estimate,
    /// (ensemble − Langmuir)/Langmuir.
    pub relative_difference: f64,
    /// The Langmuir form's verdict.
    pub verdict: Verdict,
    pub tqssa_verdict: Option<Verdict>,
    pub ode_verdict: Verdict,
    /// X_T/(L_T + K), the sQSSA validity parameter (Segel & Slemrod 1989).
    pub qssa_parameter: f64,
    /// z of (first half − second half) of the window's flux.
    pub halves_z: f64,
    pub causes: Vec<String>,
    /// The exact stationary mean flux of the output reaction (finite state projection), where
    /// the network fits one.
    pub exact_per_s: Option<f64>,
}

/// A chain of motifs in series, reconciled end to end.
#[derive(Clone, Debug)]
pub struct ChainReport {
    pub stages: Vec<usize>,
    /// The last stage's flux in the ensemble.
    pub ensemble: Estimate,
    pub ode_per_s: f64,
    /// The last stage's Langmuir form at the deterministic ligand levels of every stage.
    pub langmuir_per_s: f64,
    pub verdict: Verdict,
}

/// An observed steady level against the model.
#[derive(Clone, Debug)]
pub struct ObservationReport {
    pub observation: Observation,
    /// Deterministic steady level (molecules).
    pub deterministic: f64,
    pub ensemble: Estimate,
    /// (ensemble mean − observed)/√(sd² + stderr²).
    pub z: f64,
    pub verdict: Verdict,
    /// d ln(level)/d ln(param) for every positive param, in param order.
    pub sensitivities: Vec<(String, f64)>,
}

/// The outcome of `--fit`.
#[derive(Clone, Debug)]
pub struct FitReport {
    pub param: String,
    /// The file's value, canonical units.
    pub original: f64,
    /// The fitted value, or `None` with `why`.
    pub value: Option<f64>,
    pub why: Option<String>,
    /// The ensemble at the fitted value against the observation.
    pub confirmation: Option<ObservationReport>,
}

/// Everything `copyloop reconcile` reports.
#[derive(Clone, Debug)]
pub struct Reconciliation {
    pub seed: u64,
    pub plan: Plan,
    pub steady: Steady,
    pub replicates: u64,
    pub motifs: Vec<MotifReport>,
    pub chains: Vec<ChainReport>,
    pub observations: Vec<ObservationReport>,
    pub fit: Option<FitReport>,
    pub events_total: u64,
    pub wall_seconds: f64,
    pub notes: Vec<String>,
    /// The exact stationary law's truncation figure and states, or why there is none.
    pub exact_truncation_error: Option<f64>,
    pub exact_states: Option<usize>,
    pub exact_note: Option<String>,
}

/// Runs the reconciliation of `net`.
pub fn reconcile(net: &Network, opts: &Options) -> Result<Reconciliation> {
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
            started_from: "initial state",
            ..plan
        }
    } else {
        plan
    };
    validate_plan(&plan)?;
    let (ens, replicates) = run_ensemble(net, &plan, opts)?;
    let mut notes = Vec::new();
    if plan.burn_in_found {
        notes.push(stationary_note(&plan));
    }
    if net.motifs.is_empty() {
        notes.push("no carrier motif found: only observations are reconciled".into());
    }
    let (exact, exact_note) = if net.motifs.is_empty() {
        (None, None)
    } else {
        match distribution::stationary_beside(net, opts.threads) {
            Ok(e) => (Some(e), None),
            Err(e) => (None, Some(e.to_string())),
        }
    };
    let motifs: Vec<MotifReport> = (0..net.motifs.len())
        .map(|m| {
            let mut r = motif_report(net, m, &ens, &steady, opts.precision);
            let label = &net.reactions[net.motifs[m].output].label;
            r.exact_per_s = exact.as_ref().and_then(|e| e.fluxes.get(label).copied());
            r
        })
        .collect();
    let chains = motif_chains(net)
        .into_iter()
        .map(|stages| chain_report(net, stages, &ens, &steady))
        .collect();
    let mut observations = Vec::new();
    for o in &opts.observations {
        observations.push(observation_report(net, o, &ens, &steady, true)?);
    }
    let fit = match (&opts.fit, opts.observations.first()) {
        (Some(p), Some(o)) => Some(fit_param(net, p, o, &plan, opts)?),
        (Some(_), None) => return Err(Error::usage("--fit needs an --observe level to fit")),
        _ => None,
    };
    Ok(Reconciliation {
        seed: opts.seed,
        plan,
        steady,
        replicates,
        motifs,
        chains,
        observations,
        fit,
        events_total: ens.events_total,
        wall_seconds: ens.wall_seconds,
        notes,
        exact_truncation_error: exact.as_ref().map(|e| e.truncation_error),
        exact_states: exact.as_ref().map(|e| e.states),
        exact_note,
    })
}

/// How the burn-in and window were chosen, for the report.
pub fn stationary_note(plan: &Plan) -> String {
    let num = crate::report::num;
    let full = stationary::BURN_IN_TAUS * plan.relaxation_time;
    let how = if (plan.burn_in - full).abs() <= 1e-9 * full {
        format!(
            "5 × the slowest relaxation time, {} s",
            num(plan.relaxation_time)
        )
    } else {
        format!(
            "shortened from 5 × the slowest relaxation time ({} s) to keep the run within {} events; give --burn-in and --t-end to lengthen it",
            num(plan.relaxation_time),
            num(stationary::EVENT_BUDGET)
        )
    };
    format!(
        "burn-in {} s ({how}); measured over [{}, {}] s, starting from the {}",
        num(plan.burn_in),
        num(plan.burn_in),
        num(plan.t_end),
        plan.started_from
    )
}

fn validate_plan(plan: &Plan) -> Result<()> {
    if !(plan.t_end.is_finite() && plan.t_end > 0.0) {
        return Err(Error::usage("--t-end must be a finite time above 0"));
    }
    if !(plan.burn_in >= 0.0 && plan.burn_in < plan.t_end) {
        return Err(Error::usage(format!(
            "--burn-in must satisfy 0 <= burn-in < t-end ({} s), got {} s",
            plan.t_end, plan.burn_in
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
    if !(p > 0.0 && p < 1.0) {
        return Err(Error::usage(format!(
            "--precision must lie between 0 and 1, got {p}"
        )));
    }
    let wide = |e: &EnsembleResult| {
        net.motifs.iter().any(|m| {
            let w = &e.firings[m.output];
            let est = Estimate::of(w, 1.0);
            let narrow = est.half_width() <= p * est.mean.abs();
            !narrow
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

fn motif_report(
    net: &Network,
    m: usize,
    ens: &EnsembleResult,
    steady: &Steady,
    precision: Option<f64>,
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
    let verdict = Verdict::from(flux.contains(langmuir_per_s, tol(langmuir_per_s)));
    let tqssa_verdict = tqssa_per_s.map(|t| Verdict::from(flux.contains(t, tol(t))));
    let ode_verdict = Verdict::from(flux.contains(ode_per_s, ode_tol));
    let qssa_parameter = carrier_total / (ligand_level + k);
    let diff = &ens.half_difference[motif.output];
    let halves_z = if diff.stderr() > 0.0 {
        diff.mean() / diff.stderr()
    } else {
        0.0
    };
    let mut causes = Vec::new();
    let any_deviates = verdict == Verdict::Deviates
        || tqssa_verdict == Some(Verdict::Deviates)
        || ode_verdict == Verdict::Deviates;
    if any_deviates {
        let depletion = qssa_parameter > QSSA_LIMIT || tqssa_verdict == Some(Verdict::Consistent);
        if verdict == Verdict::Deviates && !clamped && depletion {
            causes.push(format!(
                "the quasi-steady-state condition fails: the Langmuir form counts all ligand as free, \
                 valid only when X_T/(L_T + K) ≪ 1 (Segel & Slemrod 1989), and here it is {}; \
                 the total-QSSA form accounts for the bound ligand",
                crate::report::num(qssa_parameter)
            ));
        }
        if halves_z.abs() > HALVES_Z {
            causes.push(format!(
                "not stationary: the flux in the first and second halves of the window differs by {} standard errors; lengthen --burn-in or --t-end",
                crate::report::num(halves_z.abs())
            ));
        }
        let low: Vec<String> = [
            (carrier_total, &net.species[motif.carrier].name, "carrier"),
            (ligand_level, &net.species[motif.ligand].name, "ligand"),
        ]
        .iter()
        .filter(|(n, _, _)| *n < LOW_COPY)
        .map(|(n, name, role)| format!("{role} {name} ≈ {}", crate::report::num(*n)))
        .collect();
        if !low.is_empty() {
            causes.push(format!(
                "low copy number ({}): fluctuations shift the mean flux away from the deterministic forms",
                low.join(", ")
            ));
        }
    }
    if let Some(p) = precision {
        if flux.half_width() > p * flux.mean.abs() {
            causes.push(format!(
                "too few replicates: the interval half-width is {} of the mean, more than the {} asked",
                crate::report::num(flux.half_width() / flux.mean.abs()),
                crate::report::num(p)
            ));
        }
    }
    MotifReport {
        motif: m,
        kind: motif.kind,
        carrier: net.species[motif.carrier].name.clone(),
        ligand: net.species[motif.ligand].name.clone(),
        output: net.reactions[motif.output].label.clone(),
        k_half: k,
        carrier_total,
        capacity_per_s: motif.c_out * carrier_total,
        ligand_level,
        ligand_clamped: clamped,
        ligand_free,
        langmuir_per_s,
        tqssa_per_s,
        ode_per_s,
        relative_difference: (flux.mean - langmuir_per_s) / langmuir_per_s,
        ensemble: flux,
        verdict,
        tqssa_verdict,
        ode_verdict,
        qssa_parameter,
        halves_z,
        causes,
        exact_per_s: None,
    }
}

fn chain_report(
    net: &Network,
    stages: Vec<usize>,
    ens: &EnsembleResult,
    steady: &Steady,
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
    ChainReport {
        stages,
        verdict: Verdict::from(ensemble.contains(ode_per_s, tol)),
        ensemble,
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
    Ok(ObservationReport {
        observation: o.clone(),
        deterministic: steady.counts[o.species],
        ensemble,
        z,
        verdict: Verdict::from(z.abs() <= OBSERVATION_Z),
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
    let mut g = |v: f64| -> std::result::Result<f64, String> {
        level_at(net, name, v, o.species, &guess)
            .map(|level| level - o.value)
            .map_err(|e| e.to_string())
    };
    let found = fit::root_in_log_space(&mut g, original, 6.0, 1e-10);
    let (value, why) = match found {
        Ok(v) => (Some(v), None),
        Err(fit::FitFailure::NoSignChange { lo, hi }) => (
            None,
            Some(format!(
                "no value of {name} between {} and {} gives the observed level",
                crate::report::num(lo),
                crate::report::num(hi)
            )),
        ),
        Err(fit::FitFailure::Failed { at, why }) => (
            None,
            Some(format!(
                "the steady state could not be found at {name} = {}: {why}",
                crate::report::num(at)
            )),
        ),
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
        original,
        value,
        why,
        confirmation,
    })
}
