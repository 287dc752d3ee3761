//! Reports of `copyloop sweep` and `copyloop merge`, and the document of the `initial` task.

pub mod response;

use super::jnum;
use crate::network::Network;
use crate::sweep::FailedPoint;
use serde_json::{json, Map, Value};

/// The `initial` task's document: what a point compiles to — the volume, each species'
/// initial count (and concentration where a volume is set), each param in canonical units
/// (mol/L, s, molecules, L) and each reaction's stochastic constant.
pub fn initial(net: &Network) -> Value {
    let mut species = Map::new();
    for (i, s) in net.species.iter().enumerate() {
        let mut v = json!({"initial_count": s.initial, "clamped": s.clamped});
        if let Some(w) = net.species_molar_omega(i) {
            // In the species' own compartment.
            v["initial_molar"] = jnum(s.initial as f64 / w);
        }
        species.insert(s.name.clone(), v);
    }
    let mut params = Map::new();
    for p in &net.params {
        params.insert(
            p.name.clone(),
            json!({"value": jnum(p.value.value), "dimension": p.value.dim.to_string()}),
        );
    }
    let mut constants = Map::new();
    for r in &net.reactions {
        constants.insert(r.label.clone(), json!(r.stochastic_constant().map(jnum)));
    }
    json!({
        "volume_l": net.volume_l.map(jnum),
        "omega": net.volume_l.map(|_| jnum(net.omega)),
        "species": species,
        "params": params,
        "stochastic_constants": constants,
    })
}

/// What one run of `copyloop sweep` did.
#[derive(Debug)]
pub struct SweepSummary<'a> {
    pub out: &'a str,
    pub fingerprint: &'a str,
    pub task: &'a str,
    pub points_total: u64,
    pub shard: Option<String>,
    /// Points this run is responsible for (its shard, or all).
    pub points_here: u64,
    pub already_done: u64,
    pub written: u64,
    pub failed: &'a [FailedPoint],
    pub stopped: bool,
    pub svg: Option<&'a str>,
}

pub fn sweep_json(s: &SweepSummary) -> Value {
    let failed: Vec<Value> = s
        .failed
        .iter()
        .map(|f| json!({"point": f.point, "error": f.message}))
        .collect();
    json!({
        "out": s.out,
        "fingerprint": s.fingerprint,
        "task": s.task,
        "points_total": s.points_total,
        "shard": s.shard,
        "points_in_run": s.points_here,
        "already_done": s.already_done,
        "written": s.written,
        "done": s.already_done + s.written,
        "failed": failed,
        "stopped": s.stopped,
        "svg": s.svg,
    })
}

pub fn sweep_text(s: &SweepSummary) -> String {
    let share = match &s.shard {
        Some(sh) => format!(
            "shard {sh}: {} of the {} points",
            s.points_here, s.points_total
        ),
        None => format!("{} points", s.points_total),
    };
    let mut out = format!(
        "sweep {} ({}, task {}): {share}\n  written now     {}\n  already there   {}\n  done            {} of {}\n",
        s.out,
        s.fingerprint,
        s.task,
        s.written,
        s.already_done,
        s.already_done + s.written,
        s.points_here
    );
    if !s.failed.is_empty() {
        out.push_str(&format!(
            "  failed          {} (their lines carry `error`; first: point {}: {})\n",
            s.failed.len(),
            s.failed[0].point,
            s.failed[0].message.lines().next().unwrap_or("")
        ));
    }
    if s.stopped {
        out.push_str("  stopped early: run the same command with --resume to finish\n");
    }
    if let Some(svg) = s.svg {
        out.push_str(&format!("  plot            {svg}\n"));
    }
    out
}

/// What `copyloop merge` did.
#[derive(Debug)]
pub struct MergeSummary<'a> {
    pub out: &'a str,
    pub fingerprint: &'a str,
    pub files: usize,
    pub points: u64,
    pub points_total: u64,
    pub torn: &'a [String],
    pub svg: Option<&'a str>,
}

pub fn merge_json(s: &MergeSummary) -> Value {
    json!({
        "out": s.out,
        "fingerprint": s.fingerprint,
        "files": s.files,
        "points": s.points,
        "points_total": s.points_total,
        "missing": s.points_total - s.points,
        "torn": s.torn,
        "svg": s.svg,
    })
}

pub fn merge_text(s: &MergeSummary) -> String {
    let mut out = format!(
        "merged {} files into {} ({}): {} of {} points\n",
        s.files, s.out, s.fingerprint, s.points, s.points_total
    );
    if s.points < s.points_total {
        out.push_str(&format!(
            "  {} points are missing: finish the shards with --resume, or run the merged file \
             with --resume (no --shard)\n",
            s.points_total - s.points
        ));
    }
    for t in s.torn {
        out.push_str(&format!(
            "  {t} ended in a torn line (an unfinished point), left out\n"
        ));
    }
    if let Some(svg) = s.svg {
        out.push_str(&format!("  plot {svg}\n"));
    }
    out
}
