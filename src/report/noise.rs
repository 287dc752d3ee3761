//! The report of `copyloop noise`.

use super::svg::{Chart, Point, Series, Style};
use super::table::Table;
use super::{jnum, num};
use crate::noise::VolumeNoise;
use serde_json::{json, Map, Value};

/// The JSON document of CONTRACT §3 for `noise`.
pub fn json(file: &str, seed: u64, vols: &[VolumeNoise]) -> Value {
    let volumes: Vec<Value> = vols
        .iter()
        .map(|v| {
            let mut species = Map::new();
            for s in &v.species {
                species.insert(
                    s.name.clone(),
                    json!({
                        "mean": jnum(s.mean),
                        "mean_stderr": jnum(s.mean_stderr),
                        "variance": jnum(s.variance),
                        "cv": jnum(s.cv),
                        "fano": jnum(s.fano),
                        "lna_mean": jnum(s.lna_mean),
                        "lna_variance": jnum(s.lna_variance),
                        "lna_cv": jnum(s.lna_cv),
                        "exact_mean": s.exact_mean.map(jnum),
                        "exact_variance": s.exact_variance.map(jnum),
                        "exact_fano": s.exact_fano.map(jnum),
                        "clamped": s.clamped,
                        "mean_molar": v.volume_l.map(|_| jnum(s.mean / v.omega)),
                        "lna_mean_molar": v.volume_l.map(|_| jnum(s.lna_mean / v.omega)),
                    }),
                );
            }
            json!({
                "volume_l": v.volume_l,
                "omega": v.volume_l.map(|_| v.omega),
                "replicates": v.replicates,
                "t_end": v.plan.t_end,
                "burn_in": v.plan.burn_in,
                "burn_in_found": v.plan.burn_in_found,
                "relaxation_time": jnum(v.plan.relaxation_time),
                "started_from": v.plan.started_from,
                "events_total": v.events_total,
                "wall_seconds": v.wall_seconds,
                "lna_note": v.lna_note,
                "exact_truncation_error": v.exact_truncation_error,
                "exact_states": v.exact_states,
                "exact_note": v.exact_note,
                "species": Value::Object(species),
            })
        })
        .collect();
    json!({"file": file, "seed": seed, "volumes": volumes})
}

/// The readable report.
pub fn table(file: &str, vols: &[VolumeNoise]) -> String {
    let mut out = String::new();
    for v in vols {
        let vol = v
            .volume_l
            .map_or("no volume".to_string(), |l| format!("volume {} L", num(l)));
        out.push_str(&format!(
            "{file}: {vol}, {} replicates, statistics over [{}, {}] s (burn-in {}), started from the {}\n",
            v.replicates,
            num(v.plan.burn_in),
            num(v.plan.t_end),
            if v.plan.burn_in_found { "found from the slowest relaxation time" } else { "given" },
            v.plan.started_from
        ));
        let mut t = Table::new(&[
            "species",
            "mean",
            "variance",
            "CV",
            "Fano",
            "LNA mean",
            "LNA variance",
            "LNA CV",
            "exact mean",
            "exact variance",
            "exact Fano",
        ]);
        for s in v.species.iter().filter(|s| !s.clamped) {
            t.row(vec![
                s.name.clone(),
                format!("{} ± {}", num(s.mean), num(1.96 * s.mean_stderr)),
                num(s.variance),
                num(s.cv),
                num(s.fano),
                num(s.lna_mean),
                num(s.lna_variance),
                num(s.lna_cv),
                s.exact_mean.map_or("-".into(), num),
                s.exact_variance.map_or("-".into(), num),
                s.exact_fano.map_or("-".into(), num),
            ]);
        }
        out.push_str(&t.render());
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
        "counts in molecules; mean ± 95 % half-width; Poisson noise has Fano 1 and CV 1/√mean\n",
    );
    out
}

/// CV against mean copy number on log–log axes with the Poisson line CV = 1/√N.
pub fn svg(file: &str, vols: &[VolumeNoise]) -> String {
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
