//! Observed steady levels given on the command line: `--observe NAME=VALUE[±SD]`.
//!
//! VALUE takes the network language's quantity syntax (`2nM`, `900 molecules`); a bare number
//! is in the unit the file declared the species with (`species H = 0 nM` makes `H=2` mean
//! 2 nM), as every option value is.

use crate::error::Error;
use crate::network::parser::{parse_quantity, Item};
use crate::network::{Dim, Network, Quantity};

/// An observed level of one species, in molecules (converted with Ω where a volume is set).
#[derive(Clone, Debug, PartialEq)]
pub struct Observation {
    pub name: String,
    pub species: usize,
    /// Observed level, molecules.
    pub value: f64,
    /// Its standard deviation, molecules (0 when none was given).
    pub sd: f64,
}

/// A quantity of species `i` as molecules: a concentration times Ω of its compartment, or a
/// count.
fn to_count(q: Quantity, net: &Network, i: usize, what: &str) -> Result<f64, Error> {
    if q.dim == Dim::CONC {
        let Some(omega) = net.species_molar_omega(i) else {
            return Err(Error::usage(format!(
                "{what} is a concentration, but the network has no volume; give it in molecules"
            )));
        };
        Ok(q.value * omega)
    } else if q.dim == Dim::COUNT || q.dim.is_none() {
        Ok(q.value)
    } else {
        Err(Error::usage(format!(
            "{what} must be a concentration or a count of molecules, not {}",
            q.dim
        )))
    }
}

/// The factor and dimension of the unit the file wrote for species `name`'s amount (`None`
/// when it wrote a bare count: molecules).
fn declared_unit(net: &Network, name: &str) -> Option<(f64, Dim)> {
    net.source.items.iter().find_map(|item| match item {
        Item::Species {
            name: n, amount, ..
        } if n.text == name && !amount.bare => Some((amount.unit_factor, amount.quantity.dim)),
        _ => None,
    })
}

/// Parses `NAME=VALUE[±SD]` (`+-` may stand for `±`), e.g. `H=2nM±0.2nM` or `Q=900+-30`.
pub fn parse_observation(text: &str, net: &Network) -> Result<Observation, Error> {
    let bad = |why: &str| {
        Error::usage(format!(
            "--observe {text}: {why}; write NAME=VALUE or NAME=VALUE±SD, e.g. H=2nM±0.2nM"
        ))
    };
    let (name, rest) = text.split_once('=').ok_or_else(|| bad("no `=`"))?;
    let name = name.trim();
    let species = net
        .species_index(name)
        .ok_or_else(|| bad(&format!("`{name}` is not a species of {}", net.file)))?;
    let (value, sd) = match rest.split_once('±').or_else(|| rest.split_once("+-")) {
        Some((v, s)) => (v, Some(s)),
        None => (rest, None),
    };
    let declared = declared_unit(net, name);
    let (q, unit) = parse_quantity(value.trim()).map_err(|e| bad(&e))?;
    // A bare value is in the declared unit.
    let (q, unit) = match (unit, declared) {
        (None, Some((factor, dim))) => (Quantity::new(q.value * factor, dim), Some(factor)),
        other => (q, other.0),
    };
    let level = to_count(q, net, species, &format!("the observed value of {name}"))?;
    let sd = match sd {
        Some(text) => {
            let (mut s, sd_unit) = parse_quantity(text.trim()).map_err(|e| bad(&e))?;
            // A bare SD takes the value's unit: `2nM±0.2` means ±0.2 nM.
            if let (None, Some(factor)) = (sd_unit, unit) {
                s = Quantity::new(s.value * factor, q.dim);
            }
            to_count(s, net, species, &format!("the SD of {name}"))?
        }
        None => 0.0,
    };
    let value = level;
    if !(value.is_finite() && value >= 0.0 && sd.is_finite() && sd >= 0.0) {
        return Err(bad("the level and its SD must be finite and not negative"));
    }
    Ok(Observation {
        name: name.to_string(),
        species,
        value,
        sd,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{load_source, Overrides};

    fn net() -> Network {
        let src = "volume 1 pL\nspecies H = 1 nM\nspecies Q = 0\nstep s H -> Q @ 1 /s\n";
        load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap()
    }

    #[test]
    fn forms_of_an_observation() {
        let n = net();
        let o = parse_observation("H=2nM±0.2nM", &n).unwrap();
        assert!((o.value - 2e-9 * n.omega).abs() < 1e-6);
        assert!((o.sd - 0.2e-9 * n.omega).abs() < 1e-6);
        let o2 = parse_observation("H=2 nM+-0.2", &n).unwrap();
        assert!((o2.sd - o.sd).abs() < 1e-6);
        let o = parse_observation("Q=900+-30", &n).unwrap();
        assert_eq!((o.value, o.sd), (900.0, 30.0));
        let o = parse_observation("Q=900", &n).unwrap();
        assert_eq!(o.sd, 0.0);
        // A bare value is in the declared unit: H was declared in nM.
        let o = parse_observation("H=2±0.2", &n).unwrap();
        assert!((o.value - 2e-9 * n.omega).abs() < 1e-6);
        assert!((o.sd - 0.2e-9 * n.omega).abs() < 1e-6);
    }

    #[test]
    fn bad_observations_are_usage_errors() {
        let n = net();
        for bad in ["H", "X=1", "H=2 parsecs", "H=2/s", "H=-1", "H=1±"] {
            let e = parse_observation(bad, &n).unwrap_err();
            assert_eq!(e.exit_code(), 2, "{bad}");
        }
    }
}
