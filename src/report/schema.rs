//! The typed `--json` documents' JSON Schema (draft 2020-12), generated from the document
//! types themselves so that the schema cannot drift from what the commands print.
//!
//! JSON has no NaN or infinity: a figure that cannot be computed is printed as `null`. The
//! schema says so for every number: each `"type": "number"` becomes `["number", "null"]`.
//! docs/schema/ holds the generated files; the test `json_schema` checks that they are current
//! and that every command's output on the bundled networks conforms.

use schemars::{JsonSchema, Schema};
use serde::Serialize;
use serde_json::Value;

/// A JSON object whose keys are names (species, reactions, params) in the network's order.
pub type Named<T> = indexmap::IndexMap<String, T>;

/// A document as a JSON value. Serialising these types cannot fail (their keys are strings and
/// serde_json writes a non-finite number as `null`), so a failure is a bug in the type.
pub fn to_value<T: Serialize>(doc: &T) -> Value {
    serde_json::to_value(doc).expect("a report document serialises to JSON")
}

/// The schema of document type `T`, with every number nullable.
pub fn schema<T: JsonSchema>() -> Value {
    let schema: Schema = schemars::generate::SchemaSettings::draft2020_12()
        .into_generator()
        .into_root_schema_for::<T>();
    let mut value = schema.to_value();
    nullable_numbers(&mut value);
    value
}

/// Every command's schema by file stem: `check`, `simulate`, `steady`, …
pub fn all() -> Vec<(&'static str, Value)> {
    vec![
        ("check", schema::<super::check::CheckDocument>()),
        ("simulate", schema::<super::simulate::SimulateDocument>()),
        ("steady", schema::<super::steady::SteadyDocument>()),
        ("noise", schema::<crate::noise::NoiseReport>()),
        ("reconcile", schema::<crate::reconcile::Reconciliation>()),
        (
            "distribution",
            schema::<super::distribution::DistributionDocument>(),
        ),
        ("sweep", schema::<super::sweep::SweepDocument>()),
        ("merge", schema::<super::sweep::MergeDocument>()),
        ("sweep-initial", schema::<super::sweep::InitialDocument>()),
    ]
}

fn nullable_numbers(v: &mut Value) {
    match v {
        Value::Object(m) => {
            match m.get_mut("type") {
                Some(t) if t == "number" => *t = serde_json::json!(["number", "null"]),
                Some(Value::Array(a))
                    if a.iter().any(|x| x == "number") && !a.iter().any(|x| x == "null") =>
                {
                    a.push(Value::from("null"))
                }
                _ => {}
            }
            for x in m.values_mut() {
                nullable_numbers(x);
            }
        }
        Value::Array(a) => a.iter_mut().for_each(nullable_numbers),
        _ => {}
    }
}
