//! Reports of `copyloop sweep` and `copyloop merge`, and the document of the `initial` task.

pub mod response;

use super::schema::Named;
use crate::network::Network;
use crate::sweep::FailedPoint;
use schemars::JsonSchema;
use serde::Serialize;
use serde_json::Value;

/// The `initial` task's document: what a point compiles to — the volume, each species'
/// initial count (and concentration where a volume is set), each param in canonical units
/// (mol/L, s, molecules, L) and each reaction's stochastic constant.
pub fn initial(net: &Network) -> Value {
    super::schema::to_value(&initial_document(net))
}

/// The `initial` task's document.
#[derive(Serialize, JsonSchema)]
pub struct InitialDocument {
    pub volume_l: Option<f64>,
    pub omega: Option<f64>,
    pub species: Named<InitialSpecies>,
    pub params: Named<ParamValue>,
    /// c of each reaction in molecules and seconds; null for a `law`.
    pub stochastic_constants: Named<Option<f64>>,
}

/// A species' initial state at a sweep point.
#[derive(Serialize, JsonSchema)]
pub struct InitialSpecies {
    pub initial_count: i64,
    pub clamped: bool,
    /// In the species' own compartment, where it has a volume.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub initial_molar: Option<f64>,
}

/// A param's value in canonical units and its dimension.
#[derive(Serialize, JsonSchema)]
pub struct ParamValue {
    pub value: f64,
    pub dimension: String,
}

/// The typed `initial` document of a compiled point.
pub fn initial_document(net: &Network) -> InitialDocument {
    InitialDocument {
        volume_l: net.volume_l,
        omega: net.volume_l.map(|_| net.omega),
        species: net
            .species
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let entry = InitialSpecies {
                    initial_count: s.initial,
                    clamped: s.clamped,
                    initial_molar: net.species_molar_omega(i).map(|w| s.initial as f64 / w),
                };
                (s.name.clone(), entry)
            })
            .collect(),
        params: net
            .params
            .iter()
            .map(|p| {
                let v = ParamValue {
                    value: p.value.value,
                    dimension: p.value.dim.to_string(),
                };
                (p.name.clone(), v)
            })
            .collect(),
        stochastic_constants: net
            .reactions
            .iter()
            .map(|r| (r.label.clone(), r.stochastic_constant()))
            .collect(),
    }
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

/// The `--json` document of `sweep`: what the run wrote, what was there, what failed.
#[derive(Serialize, JsonSchema)]
pub struct SweepDocument {
    pub out: String,
    pub fingerprint: String,
    pub task: String,
    pub points_total: u64,
    pub shard: Option<String>,
    pub points_in_run: u64,
    pub already_done: u64,
    pub written: u64,
    pub done: u64,
    pub failed: Vec<FailedEntry>,
    pub stopped: bool,
    pub svg: Option<String>,
}

/// A point whose task failed, with the message its line carries.
#[derive(Serialize, JsonSchema)]
pub struct FailedEntry {
    pub point: u64,
    pub error: String,
}

/// The `--json` document of `sweep`.
pub fn sweep_json(s: &SweepSummary) -> Value {
    super::schema::to_value(&SweepDocument {
        out: s.out.to_string(),
        fingerprint: s.fingerprint.to_string(),
        task: s.task.to_string(),
        points_total: s.points_total,
        shard: s.shard.clone(),
        points_in_run: s.points_here,
        already_done: s.already_done,
        written: s.written,
        done: s.already_done + s.written,
        failed: s
            .failed
            .iter()
            .map(|f| FailedEntry {
                point: f.point,
                error: f.message.clone(),
            })
            .collect(),
        stopped: s.stopped,
        svg: s.svg.map(str::to_string),
    })
}

/// The readable report of `sweep`.
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

/// The `--json` document of `merge`.
#[derive(Serialize, JsonSchema)]
pub struct MergeDocument {
    pub out: String,
    pub fingerprint: String,
    pub files: usize,
    pub points: u64,
    pub points_total: u64,
    pub missing: u64,
    /// Lines that were cut short (a run killed while writing), left out of the merge.
    pub torn: Vec<String>,
    pub svg: Option<String>,
}

/// The `--json` document of `merge`.
pub fn merge_json(s: &MergeSummary) -> Value {
    super::schema::to_value(&MergeDocument {
        out: s.out.to_string(),
        fingerprint: s.fingerprint.to_string(),
        files: s.files,
        points: s.points,
        points_total: s.points_total,
        missing: s.points_total - s.points,
        torn: s.torn.to_vec(),
        svg: s.svg.map(str::to_string),
    })
}

/// The readable report of `merge`.
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
