//! The units reports show: each species' levels in the concentration unit the file declared it
//! with (`species H = 2 nM` → nM, not 2e-9 M), and mass-action constants with their units
//! written out (`/M/s`).

use crate::network::parser::Item;
use crate::network::{units, Dim, Network};

/// A concentration unit to show figures in: its name and its size in mol/L.
#[derive(Clone, Debug, PartialEq)]
pub struct Shown {
    pub name: String,
    /// mol/L per unit: a molar figure divided by this is in the unit.
    pub factor: f64,
}

impl Shown {
    fn molar() -> Shown {
        Shown {
            name: "M".into(),
            factor: 1.0,
        }
    }

    /// `x` mol/L in this unit.
    pub fn of(&self, molar: f64) -> f64 {
        molar / self.factor
    }

    /// The unit's name in plain ASCII (`uM` for µM), for CSV headers.
    pub fn ascii(&self) -> String {
        self.name.replace(['µ', 'μ'], "u")
    }
}

/// The concentration units of the network language, by size.
const NAMES: &[(&str, f64)] = &[
    ("M", 1.0),
    ("mM", 1e-3),
    ("µM", 1e-6),
    ("nM", 1e-9),
    ("pM", 1e-12),
    ("fM", 1e-15),
];

/// The unit species `name`'s amount was written in, if a concentration unit of the language.
fn declared(net: &Network, name: &str) -> Option<Shown> {
    let (unit, factor) = net.source.written_unit(name)?;
    match units::unit(&unit) {
        Some((_, d)) if d == Dim::CONC => Some(Shown { name: unit, factor }),
        _ => NAMES
            .iter()
            .find(|(_, f)| *f == factor && d_conc(net, name))
            .map(|(n, _)| Shown {
                name: n.to_string(),
                factor,
            }),
    }
}

/// Whether species `name` was declared with a concentration.
fn d_conc(net: &Network, name: &str) -> bool {
    net.source.items.iter().any(|item| {
        matches!(item, Item::Species { name: n, amount, .. }
            if n.text == name && !amount.bare && amount.quantity.dim == Dim::CONC)
    })
}

/// A param's value in the unit the file wrote it in: `58.91 /min`; canonical units where the
/// file wrote it bare.
pub fn param_value(net: &Network, name: &str, canonical: f64) -> String {
    match net.source.written_unit(name) {
        Some((unit, factor)) => format!("{} {unit}", super::num(canonical / factor)),
        None => super::num(canonical),
    }
}

/// The unit species `i`'s concentrations are shown in: the one the file declared it with;
/// for a species written in molecules, the unit of the file's first species written as a
/// concentration; M where the file wrote none (or for an imported model, whose
/// concentrations keep their own unit: [`None`] there means "as the engine reports").
pub fn species_unit(net: &Network, i: usize) -> Shown {
    if net.amount.count_per_amount != 1.0 || net.amount.concentration_unit != "M" {
        return Shown {
            name: net.amount.concentration_unit.clone(),
            factor: 1.0,
        };
    }
    declared(net, &net.species[i].name)
        .or_else(|| net.species.iter().find_map(|s| declared(net, &s.name)))
        .unwrap_or_else(Shown::molar)
}

/// A molar figure of species `i` with its unit: `9.091 nM`.
pub fn level(net: &Network, i: usize, molar: f64) -> String {
    let u = species_unit(net, i);
    format!("{} {}", super::num(u.of(molar)), u.name)
}

/// A molar figure of reaction `j` (a flux over its compartment) in the unit of its first
/// reactant, or of its first product for a zero-order step.
pub fn reaction_level(net: &Network, j: usize, molar: f64) -> String {
    let r = &net.reactions[j];
    match r.reactants.first().or(r.products.first()) {
        Some(&(i, _)) => level(net, i, molar),
        None => format!("{} M", super::num(molar)),
    }
}

/// The canonical unit of a mass-action constant of `order` where a volume is set:
/// `M/s`, `/s`, `/M/s`, `/M^2/s`.
pub fn mass_action_unit(order: u32) -> String {
    match order {
        0 => "M/s".into(),
        1 => "/s".into(),
        2 => "/M/s".into(),
        m => format!("/M^{}/s", m - 1),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{load_source, Overrides};

    fn net(src: &str) -> Network {
        load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap()
    }

    #[test]
    fn levels_are_shown_in_the_declared_unit() {
        let n = net(
            "volume 1 pL\nspecies H = 2 nM\nspecies R = 5 uM\nspecies Q = 30\n\
                     step a H + R -> Q @ 1 /M/s\n",
        );
        assert_eq!(species_unit(&n, 0).name, "nM");
        assert_eq!(species_unit(&n, 1).name, "uM");
        assert_eq!(species_unit(&n, 1).ascii(), "uM");
        // Q was written in molecules: the file's first concentration unit.
        assert_eq!(species_unit(&n, 2).name, "nM");
        // 1.162e-9 M is 1.162 nM.
        assert_eq!(level(&n, 0, 1.162e-9), "1.162 nM");
    }

    #[test]
    fn params_are_shown_in_the_written_unit() {
        let n = net(
            "param kcat = 60 /min\nparam k2 = 1e-3 /s\nparam b = 2\nspecies A = 5\n\
                     step a A -> 0 @ kcat\nstep c A -> 0 @ k2\nstep d A -> 0 @ b\n",
        );
        // 0.9819 /s is 58.91 /min (1 min = 60 s).
        assert_eq!(param_value(&n, "kcat", 0.9819), "58.91 /min");
        assert_eq!(param_value(&n, "k2", 2e-3), "0.002 /s");
        assert_eq!(param_value(&n, "b", 3.0), "3");
    }

    #[test]
    fn molar_without_a_written_concentration() {
        let n = net("volume 1 pL\nspecies Q = 30\nstep a Q -> 0 @ 1 /s\n");
        assert_eq!(species_unit(&n, 0).name, "M");
    }

    #[test]
    fn mass_action_units_follow_the_order() {
        // k of order m has units M^(1−m)/s (IUPAC Gold Book, "rate constant" [M]).
        assert_eq!(mass_action_unit(0), "M/s");
        assert_eq!(mass_action_unit(1), "/s");
        assert_eq!(mass_action_unit(2), "/M/s");
        assert_eq!(mass_action_unit(3), "/M^2/s");
    }
}
