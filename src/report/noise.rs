//! The report of `copyloop noise`.

use super::num;
use super::plot::{AxisSpec, Chart, Dash, Datum, Interval, Marker, Series};
use super::table::Table;
use crate::noise::NoiseReport;
use crate::stationary::{self, Plan};
use serde_json::Value;

/// The JSON document of `noise` (the report's own serialisation).
pub fn json(report: &NoiseReport) -> Value {
    serde_json::to_value(report).unwrap_or(Value::Null)
}

/// `x [lo, hi]` with the interval's bounds.
fn with_interval(x: f64, ci: [f64; 2]) -> String {
    if ci[0].is_finite() && ci[1].is_finite() {
        format!("{} [{}, {}]", num(x), num(ci[0]), num(ci[1]))
    } else {
        num(x)
    }
}

/// The lines that say how the window was chosen and whether its figures can be trusted.
pub fn plan_lines(plan: &Plan) -> Vec<String> {
    let mut out = Vec::new();
    let how = if plan.burn_in_found {
        "found from the slowest relaxation time"
    } else {
        "given"
    };
    out.push(format!(
        "statistics over [{}, {}] s (burn-in {how}), started from the {}; slowest relaxation time {} s",
        num(plan.burn_in),
        num(plan.t_end),
        plan.started_from.describe(),
        num(plan.relaxation_time)
    ));
    if let Some(sh) = &plan.shortened {
        out.push(format!(
            "SHORTENED: the rule asks for a burn-in of {} s and an end at {} s; both were cut in \
             proportion to stay within {} events per replicate. Give --burn-in and --t-end to run \
             the full window.",
            num(sh.full_burn_in),
            num(sh.full_t_end),
            num(sh.event_budget)
        ));
    }
    let c = plan.coverage();
    if !c.reliable {
        let why = match (c.burn_in_relaxation_times, c.window_relaxation_times) {
            (Some(b), Some(w)) => format!(
                "the burn-in covers {} and the window {} relaxation times (at least {} each are needed)",
                num(b),
                num(w),
                num(stationary::RELIABLE_TAUS)
            ),
            _ => "the relaxation time is unknown (no stable steady state)".to_string(),
        };
        out.push(format!(
            "UNRELIABLE: {why}; the replicates may not have reached their stationary law, so \
             variances and Fano factors can be far off."
        ));
    }
    out
}

/// The readable report.
pub fn table(report: &NoiseReport) -> String {
    let mut out = String::new();
    for v in &report.volumes {
        let vol = v
            .volume_l
            .map_or("no volume".to_string(), |l| format!("volume {} L", num(l)));
        out.push_str(&format!(
            "{}: {vol}, {} replicates\n",
            report.file, v.replicates
        ));
        for line in plan_lines(&v.plan) {
            out.push_str(&format!("  {line}\n"));
        }
        let mut t = Table::new(&[
            "species",
            "mean [95 % CI]",
            "variance [95 % CI]",
            "CV [95 % CI]",
            "Fano [95 % CI]",
            "LNA mean",
            "LNA variance",
            "LNA CV",
            "exact mean",
            "exact variance",
            "exact Fano",
        ]);
        let mark = if v.plan.coverage().reliable {
            ""
        } else {
            " (!)"
        };
        for s in v.species.iter().filter(|s| !s.clamped) {
            t.row(vec![
                s.name.clone(),
                with_interval(s.mean, s.mean_ci95),
                format!("{}{mark}", with_interval(s.variance, s.variance_ci95)),
                format!("{}{mark}", with_interval(s.cv, s.cv_ci95)),
                format!("{}{mark}", with_interval(s.fano, s.fano_ci95)),
                num(s.lna_mean),
                num(s.lna_variance),
                num(s.lna_cv),
                s.exact_mean.map_or("-".into(), num),
                s.exact_variance.map_or("-".into(), num),
                s.exact_fano.map_or("-".into(), num),
            ]);
        }
        out.push_str(&t.render());
        if !v.outputs.is_empty() {
            let mut t = Table::new(&["accumulates", "rate (molecules/s)", "ensemble [95 % CI]"]);
            for o in &v.outputs {
                t.row(vec![
                    o.name.clone(),
                    num(o.rate_per_s),
                    with_interval(o.ensemble_rate_per_s, o.ensemble_rate_ci95),
                ]);
            }
            out.push_str(&t.render());
        }
        if let Some(n) = &v.lna_note {
            out.push_str(&format!("  linear noise approximation unavailable: {n}\n"));
        }
        match (&v.exact_note, v.exact_truncation_error, v.exact_states) {
            (Some(n), _, _) => out.push_str(&format!("  exact columns unavailable: {n}\n")),
            (None, Some(e), Some(states)) => out.push_str(&format!(
                "  exact: stationary master equation on {states} states (finite state projection, boundary probability {})\n",
                num(e)
            )),
            _ => {}
        }
        out.push('\n');
    }
    out.push_str(
        "counts in molecules; intervals are 95 %; Poisson noise has Fano 1 and CV 1/√mean; (!) marks figures from a window too short to trust\n",
    );
    out
}

/// A volume in the largest of L, mL, µL, nL, pL, fL that shows it as 1 or more.
fn volume_text(litres: f64) -> String {
    const UNITS: [(&str, f64); 6] = [
        ("L", 1.0),
        ("mL", 1e-3),
        ("µL", 1e-6),
        ("nL", 1e-9),
        ("pL", 1e-12),
        ("fL", 1e-15),
    ];
    let (unit, f) = UNITS
        .iter()
        .copied()
        .find(|&(_, f)| litres >= f * (1.0 - 1e-9))
        .unwrap_or(UNITS[UNITS.len() - 1]);
    format!("{} {unit}", num(litres / f))
}

/// CV against mean copy number on log–log axes: the ensemble's CV of every species at every
/// volume with its 95 % interval, each point labelled with species and volume; the
/// linear-noise CV; and the Poisson line CV = 1/√N.
pub fn svg(report: &NoiseReport) -> String {
    let drawable = |x: f64, y: f64| x > 0.0 && y > 0.0 && x.is_finite() && y.is_finite();
    let (mut ensemble, mut lna) = (Vec::new(), Vec::new());
    let mut notes = Vec::new();
    for v in &report.volumes {
        let vol = v.volume_l.map(volume_text);
        let mut absent = Vec::new();
        for s in v.species.iter().filter(|s| !s.clamped) {
            let name = match &vol {
                Some(t) => format!("{}, {t}", s.name),
                None => s.name.clone(),
            };
            if drawable(s.mean, s.cv) {
                ensemble.push(
                    Datum::new(s.mean, s.cv)
                        .with_interval(s.cv_ci95[0], s.cv_ci95[1])
                        .with_label(name.clone()),
                );
            } else {
                absent.push(name.clone());
            }
            if drawable(s.lna_mean, s.lna_cv) {
                lna.push(Datum::new(s.lna_mean, s.lna_cv));
            }
        }
        let at = vol.as_deref().unwrap_or("the file's volume");
        if !v.plan.coverage().reliable {
            notes.push(format!(
                "at {at} the window is too short to trust (see the table): those CVs may be far off"
            ));
        }
        if !absent.is_empty() {
            notes.push(format!(
                "not drawn (no copies on average, or no variation): {}",
                absent.join("; ")
            ));
        }
    }
    let xs = ensemble.iter().chain(&lna).map(|p| p.x);
    let (lo, hi) = xs.fold((f64::INFINITY, 0.0f64), |(a, b), x| (a.min(x), b.max(x)));
    let poisson = if lo.is_finite() {
        vec![
            Datum::new(lo, 1.0 / lo.sqrt()),
            Datum::new(hi, 1.0 / hi.sqrt()),
        ]
    } else {
        Vec::new()
    };
    notes.push("error bars: 95 % intervals of the ensemble's CV".into());
    Chart {
        title: format!("{}: noise against copy number", report.file),
        x: AxisSpec {
            label: "mean copy number (molecules)".into(),
            log: true,
            from_zero: false,
        },
        y: AxisSpec {
            label: "coefficient of variation (SD / mean)".into(),
            log: true,
            from_zero: false,
        },
        categories: Vec::new(),
        series: vec![
            Series {
                marker: Some(Marker::Circle),
                interval: Interval::Bars,
                ..Series::new("ensemble (95 % CI)", ensemble)
            },
            Series {
                marker: Some(Marker::Ring),
                ..Series::new("linear noise (LNA)", lna)
            },
            Series {
                line: Some(Dash::Dashed),
                ..Series::new("1/√N (Poisson)", poisson)
            },
        ],
        notes,
    }
    .render()
}
