//! Serialisation helpers for the typed results (their JSON is the output contract).

use serde::ser::{SerializeMap, Serializer};
use serde::Serialize;

/// An item reported in a JSON object keyed by its name (species, reactions, params).
pub trait Named {
    fn name(&self) -> &str;
}

/// Serialises `items` as one JSON object, `{name: item, …}`, in their order.
pub fn by_name<T: Named + Serialize, S: Serializer>(items: &[T], s: S) -> Result<S::Ok, S::Error> {
    let mut m = s.serialize_map(Some(items.len()))?;
    for item in items {
        m.serialize_entry(item.name(), item)?;
    }
    m.end()
}

/// `x / omega` where a volume gives the network an Ω, else None: the `_molar` figures beside
/// the counts.
pub fn molar(x: f64, omega: Option<f64>) -> Option<f64> {
    omega.map(|o| x / o)
}
