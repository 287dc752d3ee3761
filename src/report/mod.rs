//! Output for people (aligned tables) and for programs (JSON with the keys of CONTRACT §3).
//! Reports only format; they compute nothing.

pub mod check;
pub mod distribution;
pub mod noise;
pub mod reconcile;
pub mod simulate;
pub mod steady;
pub mod svg;
pub mod sweep;
pub mod table;

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

/// A number in a short readable form: 4 significant digits, scientific when very large or
/// small.
pub fn num(x: f64) -> String {
    if x.is_nan() {
        return "nan".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    let a = x.abs();
    if !(1e-3..1e6).contains(&a) {
        format!("{x:.3e}")
    } else {
        let digits = (3 - a.log10().floor() as i32).max(0) as usize;
        let s = format!("{x:.digits$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    }
}

/// A JSON number, or null when not finite (JSON has no NaN or infinity).
pub fn jnum(x: f64) -> serde_json::Value {
    if x.is_finite() {
        serde_json::json!(x)
    } else {
        serde_json::Value::Null
    }
}

#[cfg(test)]
mod tests {
    use super::num;

    #[test]
    fn numbers_read_well() {
        assert_eq!(num(1234.5678), "1235");
        assert_eq!(num(0.5), "0.5");
        assert_eq!(num(2.0), "2");
        assert_eq!(num(1.660539e-3), "0.001661");
        assert_eq!(num(6.02214076e8), "6.022e8");
    }
}
