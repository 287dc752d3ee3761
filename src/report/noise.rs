//! The report of `copyloop noise`.

use super::num;
use super::svg::{Chart, Point, Series, Style};
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

/// CV against mean copy number on log–log axes with the Poisson line CV = 1/√N.
pub fn svg(report: &NoiseReport) -> String {
    let (file, vols) = (&report.file, &report.volumes);
    let pts = |f: &dyn Fn(&crate::noise::SpeciesNoise) -> (f64, f64)| -> Vec<Point> {
        vols.iter()
            .flat_map(|v| v.species.iter().filter(|s| !s.clamped))
            .map(|s| {
                let (x, y) = f(s);
                Point {
                    x,
                    y,
                    interval: None,
                }
            })
            .filter(|p| p.x > 0.0 && p.y > 0.0 && p.x.is_finite() && p.y.is_finite())
            .collect()
    };
    let ensemble = pts(&|s| (s.mean, s.cv));
    let lna = pts(&|s| (s.lna_mean, s.lna_cv));
    let (lo, hi) = ensemble
        .iter()
        .chain(&lna)
        .fold((f64::INFINITY, 0.0f64), |(a, b), p| {
            (a.min(p.x), b.max(p.x))
        });
    let line = if lo.is_finite() && hi > 0.0 {
        (0..=20)
            .map(|k| {
                let x = lo * (hi / lo).powf(k as f64 / 20.0);
                Point {
                    x,
                    y: 1.0 / x.sqrt(),
                    interval: None,
                }
            })
            .collect()
    } else {
        Vec::new()
    };
    Chart {
        title: format!("{file}: noise against copy number"),
        x_label: "mean copy number (molecules)".into(),
        y_label: "coefficient of variation".into(),
        x_log: true,
        y_log: true,
        series: vec![
            Series {
                name: "ensemble".into(),
                style: Style::Markers,
                points: ensemble,
            },
            Series {
                name: "linear noise".into(),
                style: Style::Markers,
                points: lna,
            },
            Series {
                name: "1/√N (Poisson)".into(),
                style: Style::Dashed,
                points: line,
            },
        ],
        x_categories: Vec::new(),
    }
    .render()
}
