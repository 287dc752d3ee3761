//! Option values as the network language writes quantities: `--t-end 2h`, `--burn-in 90 s`,
//! `--t-end 1e4` (a bare number is in seconds, the unit every time is reported in), and the
//! names of the library's fields as each command's flags.

use crate::error::Error;
use crate::network::{parser::parse_quantity, Dim};

/// A time in seconds from `text`: a number with a time unit (`s`, `min`, `h`, `d`), or a bare
/// number of seconds. Negative and non-finite values pass, so that the job can say what is
/// wrong with them in its own terms.
pub fn time(text: &str) -> Result<f64, String> {
    let (q, unit) = parse_quantity(text.trim())?;
    if unit.is_some() && q.dim != Dim::TIME {
        return Err(format!(
            "`{text}` is not a time; write e.g. `600`, `10 min` or `2h` (units s, min, h, d)"
        ));
    }
    Ok(q.value)
}

/// The library's field names and the flags a command shows for them.
pub type FlagNames = &'static [(&'static str, &'static str)];

/// `simulate`'s flags.
pub const SIMULATE_FLAGS: FlagNames = &[
    ("t_end", "--t-end"),
    ("replicates", "--replicates"),
    ("grid_points", "--grid"),
    ("window", "--window"),
    ("threads", "--threads"),
    ("epsilon", "--epsilon"),
];

/// The flags of the stationary commands (`noise`, `reconcile`): their window starts at the
/// burn-in.
pub const STATIONARY_FLAGS: FlagNames = &[
    ("t_end", "--t-end"),
    ("replicates", "--replicates"),
    ("window", "--burn-in"),
    ("threads", "--threads"),
];

/// Rewrites an [`Error::Invalid`] to name the command's flag instead of the library's field.
pub fn with_flags(e: Error, names: FlagNames) -> Error {
    match e {
        Error::Invalid { field, reason } => match names.iter().find(|(f, _)| *f == field) {
            Some((_, flag)) => Error::usage(format!("{flag}: {reason}")),
            None => Error::usage(reason),
        },
        other => other,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn times_take_units_and_bare_seconds() {
        assert_eq!(time("600").unwrap(), 600.0);
        assert_eq!(time("10 min").unwrap(), 600.0);
        assert_eq!(time("2h").unwrap(), 7200.0);
        // A day is 86,400 s (SI Brochure, 9th ed., table 8 [M]).
        assert_eq!(time("2 d").unwrap(), 172_800.0);
        assert_eq!(time("-1").unwrap(), -1.0);
        assert!(time("3 nM").is_err());
        assert!(time("soon").is_err());
    }
}
