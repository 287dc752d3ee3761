//! What a sweep runs at every point.
//!
//! A task turns one point — its compiled network, its seed and its share of the cores — into the
//! JSON document that `copyloop <task> --json` prints for that network and seed. Anything that
//! implements [`Task`] can be swept; [`FnTask`] wraps a closure.

use crate::error::{Error, Result};
use crate::network::parser::Ast;
use crate::network::{compile, Network, Overrides};
use serde_json::Value;

/// One point of a sweep, as a task sees it.
pub struct Point<'a> {
    /// The point's number in the design (0-based).
    pub index: u64,
    /// The point's seed, derived from (sweep seed, index) alone: `copyloop <task> --seed <seed>`
    /// on the same network reproduces the point.
    pub seed: u64,
    /// Threads this point may use (≥ 1); the sweep never hands out more than it has.
    pub threads: usize,
    /// The network compiled with the point's values.
    pub net: &'a Network,
    /// The values that made `net` from the file.
    pub overrides: &'a Overrides,
    pub(crate) ast: &'a std::sync::Arc<Ast>,
}

impl Point<'_> {
    /// Compiles the file again with the point's values and `extra` on top (a value in `extra`
    /// wins; its `rescale_volume` applies), for tasks that need neighbouring networks:
    /// sensitivities, or the same point at other volumes.
    pub fn recompile(&self, extra: &Overrides) -> Result<Network> {
        let mut o = self.overrides.clone();
        for (name, v) in &extra.values {
            o = o.set(name, *v);
        }
        o.rescale_volume = extra.rescale_volume.or(o.rescale_volume);
        compile(self.ast, &o).map_err(Error::Input)
    }
}

/// A computation a sweep runs at every point.
pub trait Task: Send + Sync {
    /// The task's name, as given to `--task`.
    fn name(&self) -> &str;
    /// The task's options in a form that identifies them: part of the sweep's fingerprint, so
    /// that `--resume` and `merge` refuse files made with other options.
    fn options(&self) -> Value;
    /// The task's JSON document for one point.
    fn run(&self, point: &Point) -> Result<Value>;
}

/// The closure a [`FnTask`] runs.
pub type TaskFn = dyn Fn(&Point) -> Result<Value> + Send + Sync;

/// A task made of a name, its options and a closure.
pub struct FnTask {
    name: String,
    options: Value,
    run: Box<TaskFn>,
}

impl FnTask {
    pub fn new(
        name: impl Into<String>,
        options: Value,
        run: impl Fn(&Point) -> Result<Value> + Send + Sync + 'static,
    ) -> FnTask {
        FnTask {
            name: name.into(),
            options,
            run: Box::new(run),
        }
    }
}

impl Task for FnTask {
    fn name(&self) -> &str {
        &self.name
    }

    fn options(&self) -> Value {
        self.options.clone()
    }

    fn run(&self, point: &Point) -> Result<Value> {
        (self.run)(point)
    }
}

/// The pointer to species `name`'s headline figure in the document of `task`: the final mean
/// (simulate), the steady count (steady), the Fano factor at the first volume (noise).
pub fn species_metric(task: &str, name: &str) -> Option<String> {
    let k = escape(name);
    match task {
        "simulate" => Some(format!("/final/{k}/mean")),
        "steady" => Some(format!("/state/{k}/count")),
        "noise" => Some(format!("/volumes/0/species/{k}/fano")),
        _ => None,
    }
}

/// The result key a sweep plot draws when none is asked for and the sweep file names none:
/// the headline figure of each task's document (docs/json.md), found in `result` itself (for
/// the tasks keyed by species, the first species not marked `clamped` there); for any other
/// task, the first number in the document. A JSON pointer (RFC 6901) into the point's
/// `result`.
pub fn default_metric(task: &str, result: &Value) -> Option<String> {
    let species = match task {
        "simulate" => &result["final"],
        "steady" => &result["state"],
        "noise" => &result["volumes"][0]["species"],
        _ => &Value::Null,
    };
    let first = species.as_object().and_then(|m| {
        m.iter()
            .find(|(_, v)| v["clamped"] != Value::Bool(true))
            .or_else(|| m.iter().next())
            .map(|(k, _)| k.clone())
    });
    let found = match task {
        "simulate" | "steady" | "noise" => first.and_then(|k| species_metric(task, &k)),
        "reconcile" if !result["motifs"][0].is_null() => {
            Some("/motifs/0/ensemble/mean_per_s".to_string())
        }
        "reconcile" if !result["observations"][0].is_null() => {
            Some("/observations/0/ensemble_mean".to_string())
        }
        _ => None,
    };
    found.or_else(|| first_number(result, String::new()))
}

/// The pointer to the first number met depth-first in `v`.
fn first_number(v: &Value, at: String) -> Option<String> {
    match v {
        Value::Number(_) => Some(at),
        Value::Array(a) => a
            .iter()
            .enumerate()
            .find_map(|(i, x)| first_number(x, format!("{at}/{i}"))),
        Value::Object(m) => m
            .iter()
            .find_map(|(k, x)| first_number(x, format!("{at}/{}", escape(k)))),
        _ => None,
    }
}

/// A key escaped for a JSON pointer: `~` → `~0`, `/` → `~1` (RFC 6901 §3).
fn escape(key: &str) -> String {
    key.replace('~', "~0").replace('/', "~1")
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn default_metrics_point_at_numbers() {
        let sim = json!({"final": {"H": {"mean": 3.0}}});
        assert_eq!(default_metric("simulate", &sim).unwrap(), "/final/H/mean");
        assert_eq!(sim.pointer("/final/H/mean"), Some(&json!(3.0)));
        let other = json!({"name": "x", "a": [{"b": "s", "c/d": 2}]});
        let p = default_metric("check", &other).unwrap();
        assert_eq!(p, "/a/0/c~1d");
        assert_eq!(other.pointer(&p), Some(&json!(2)));
        assert_eq!(default_metric("check", &json!({"a": "b"})), None);
    }
}
