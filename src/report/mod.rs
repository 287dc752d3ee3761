//! Output for people (aligned tables) and for programs (JSON with the keys of docs/json.md).
//! Reports only format; they compute nothing.

pub mod check;
pub mod distribution;
pub mod noise;
pub mod plot;
pub mod reconcile;
pub mod schema;
pub mod simulate;
pub mod steady;
pub mod sweep;
pub mod table;
pub mod units;

/// `2 A + B`, or `0` for an empty side.
pub fn side(net: &crate::Network, terms: &[(usize, u32)]) -> String {
    if terms.is_empty() {
        return "0".to_string();
    }
    terms
        .iter()
        .map(|&(i, n)| {
            let name = &net.species[i].name;
            if n == 1 {
                name.clone()
            } else {
                format!("{n} {name}")
            }
        })
        .collect::<Vec<_>>()
        .join(" + ")
}

/// A number in a short readable form: four significant digits ([`crate::numbers::short`]).
pub fn num(x: f64) -> String {
    crate::numbers::short(x)
}
