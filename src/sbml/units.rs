//! SBML units ↔ copyloop's dimensions.
//!
//! An SBML unit is a product of factors (multiplier·10^scale·kind)^exponent over base kinds
//! (SBML Level 3 core specification, Hucka et al. 2019, §4.4) [verified: the specification
//! text]. copyloop's four dimensions are concentration (mol/L), time (s), molecules and volume
//! (L), so the kinds it reads are `mole` (= concentration·volume), `litre`, `metre` in whole
//! cubes (1 m³ = 1000 L), `second`, `item` and `dimensionless`; a unit of any other kind
//! (`gram`, `kelvin`, …) or with a fractional exponent has no copyloop dimension. Level 2's
//! predefined `substance`, `volume` and `time` are mole, litre and second unless the model
//! redefines them.
//!
//! Writing goes the other way: a dimension becomes the product mole^c·litre^(v−c)·second^t·
//! item^n, with an id built from its exponents.

use super::model::{Model, Unit, UnitDefinition};
use crate::network::Dim;

/// A unit's dimension and its factor to canonical units (value in the unit × factor = value in
/// mol/L, s, molecules, L).
pub type Canonical = (Dim, f64);

/// One base kind.
fn kind(name: &str) -> Option<Canonical> {
    Some(match name {
        "mole" => (Dim::CONC.times(Dim::VOLUME), 1.0),
        "litre" | "liter" => (Dim::VOLUME, 1.0),
        "second" => (Dim::TIME, 1.0),
        "item" => (Dim::COUNT, 1.0),
        "dimensionless" => (Dim::NONE, 1.0),
        _ => return None,
    })
}

/// The factors of a unit definition.
fn factors(units: &[Unit]) -> Result<Canonical, String> {
    let mut dim = Dim::NONE;
    let mut factor = 1.0;
    for u in units {
        if u.exponent.fract() != 0.0 || u.exponent.abs() > 12.0 {
            return Err(format!(
                "the exponent {} of `{}` is not a small whole number",
                u.exponent, u.kind
            ));
        }
        let e = u.exponent as i32;
        let scale = u.multiplier * 10f64.powi(u.scale);
        let (d, f) = if u.kind == "metre" || u.kind == "meter" {
            if e % 3 != 0 {
                return Err(format!(
                    "`metre` to the power {e}: copyloop reads lengths only as volumes (metre^3)"
                ));
            }
            // (scale·m)^e with e = 3j is (scale³·1000 L)^j.
            dim = dim.times(Dim::VOLUME.powi(e / 3));
            factor *= scale.powi(e) * 1000f64.powi(e / 3);
            continue;
        } else {
            kind(&u.kind).ok_or_else(|| {
                format!(
                    "the unit kind `{}` has no copyloop dimension (it reads mole, litre, metre^3, second, item and dimensionless)",
                    u.kind
                )
            })?
        };
        dim = dim.times(d.powi(e));
        factor *= (scale * f).powi(e);
    }
    if !(factor.is_finite() && factor > 0.0) {
        return Err(format!(
            "the unit's factor {factor} is not a positive number"
        ));
    }
    Ok((dim, factor))
}

/// The dimension and factor of the unit `id` in `model` (a unit definition, a predefined unit,
/// or a base kind).
pub fn canonical(model: &Model, level: u32, id: &str) -> Result<Canonical, String> {
    if let Some(d) = model.unit_definitions.iter().find(|d| d.id == id) {
        return factors(&d.units).map_err(|e| format!("unit `{id}`: {e}"));
    }
    if level == 2 {
        match id {
            "substance" => return Ok(kind("mole").unwrap()),
            "volume" => return Ok(kind("litre").unwrap()),
            "time" => return Ok(kind("second").unwrap()),
            _ => {}
        }
    }
    if id == "metre" || id == "meter" {
        return Err("`metre` is a length; copyloop reads lengths only as volumes".into());
    }
    kind(id).ok_or_else(|| {
        format!("the unit `{id}` is not defined in the model and is not a kind copyloop reads")
    })
}

/// The SBML unit written for a dimension: its id (a base kind where it is one) and, unless it
/// is a base kind, its definition.
pub fn unit_for(dim: Dim) -> (String, Option<UnitDefinition>) {
    let exps = [
        ("mole", dim.conc),
        ("litre", dim.volume - dim.conc),
        ("second", dim.time),
        ("item", dim.count),
    ];
    let nonzero: Vec<(&str, i8)> = exps.into_iter().filter(|e| e.1 != 0).collect();
    match nonzero.as_slice() {
        [] => return ("dimensionless".into(), None),
        [(k, 1)] => return (k.to_string(), None),
        _ => {}
    }
    let part = |k: &str, e: i8| {
        if e.abs() == 1 {
            k.to_string()
        } else {
            format!("{k}{}", e.abs())
        }
    };
    let num: Vec<String> = nonzero
        .iter()
        .filter(|e| e.1 > 0)
        .map(|e| part(e.0, e.1))
        .collect();
    let den: Vec<String> = nonzero
        .iter()
        .filter(|e| e.1 < 0)
        .map(|e| part(e.0, e.1))
        .collect();
    let top = if num.is_empty() {
        "one".to_string()
    } else {
        num.join("_")
    };
    let id = if den.is_empty() {
        top
    } else {
        format!("{top}_per_{}", den.join("_"))
    };
    let units = nonzero
        .iter()
        .map(|(k, e)| Unit {
            kind: k.to_string(),
            exponent: f64::from(*e),
            scale: 0,
            multiplier: 1.0,
        })
        .collect();
    let def = UnitDefinition {
        id: id.clone(),
        units,
        loc: Default::default(),
    };
    (id, Some(def))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn unit(kind: &str, exponent: f64, scale: i32, multiplier: f64) -> Unit {
        Unit {
            kind: kind.into(),
            exponent,
            scale,
            multiplier,
        }
    }

    fn model_with(units: Vec<Unit>) -> Model {
        Model {
            unit_definitions: vec![UnitDefinition {
                id: "u".into(),
                units,
                loc: Default::default(),
            }],
            ..Default::default()
        }
    }

    // Definitions of the SI prefixes and of the litre (1 L = 1 dm³ = 1e-3 m³) [verified: SI
    // brochure, 9th ed., 2019].
    #[test]
    fn factors_follow_the_sbml_formula() {
        // nM/s = (1e-9 mol)·litre^-1·second^-1
        let m = model_with(vec![
            unit("mole", 1.0, -9, 1.0),
            unit("litre", -1.0, 0, 1.0),
            unit("second", -1.0, 0, 1.0),
        ]);
        let (d, f) = canonical(&m, 3, "u").unwrap();
        assert_eq!(d, Dim::new(1, -1, 0, 0));
        assert!((f - 1e-9).abs() < 1e-24);
        // per minute = (60 s)^-1
        let m = model_with(vec![unit("second", -1.0, 0, 60.0)]);
        let (d, f) = canonical(&m, 3, "u").unwrap();
        assert_eq!(d, Dim::new(0, -1, 0, 0));
        assert!((f - 1.0 / 60.0).abs() < 1e-15);
        // µm³ = (1e-6 m)³ = 1e-18 m³ = 1e-15 L
        let m = model_with(vec![unit("metre", 3.0, -6, 1.0)]);
        let (d, f) = canonical(&m, 3, "u").unwrap();
        assert_eq!(d, Dim::VOLUME);
        assert!((f - 1e-15).abs() < 1e-28);
    }

    #[test]
    fn predefined_units_and_refusals() {
        let m = Model::default();
        assert_eq!(
            canonical(&m, 2, "substance").unwrap().0,
            Dim::new(1, 0, 0, 1)
        );
        assert!(canonical(&m, 3, "substance").is_err());
        assert!(canonical(&m, 3, "gram").unwrap_err().contains("gram"));
        let m = model_with(vec![unit("second", 0.5, 0, 1.0)]);
        assert!(canonical(&m, 3, "u").is_err());
        let m = model_with(vec![unit("metre", 2.0, 0, 1.0)]);
        assert!(canonical(&m, 3, "u").is_err());
    }

    #[test]
    fn written_units_read_back_as_the_same_dimension() {
        for d in [
            Dim::NONE,
            Dim::CONC,
            Dim::TIME.powi(-1),
            Dim::new(-1, -1, 0, 0),
            Dim::new(-2, -1, 0, 0),
            Dim::new(1, -1, 0, 0),
            Dim::new(0, -1, 1, 0),
            Dim::new(0, -1, -1, 0),
            Dim::VOLUME,
        ] {
            let (id, def) = unit_for(d);
            let m = Model {
                unit_definitions: def.into_iter().collect(),
                ..Default::default()
            };
            assert_eq!(canonical(&m, 3, &id).unwrap(), (d, 1.0), "{id}");
        }
    }
}
