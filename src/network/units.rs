//! Quantities, dimensions and the conversions between concentration and molecule counts.
//!
//! Every number with a unit is stored in canonical units: mol/L for concentration, seconds for
//! time, molecules for amounts, litres for volume. A [`Dim`] carries the exponents of those four
//! base dimensions, so that a rate constant's dimension can be checked against its reaction order.
//!
//! Rate convention (Gillespie 1977; Higham 2008, SIAM Rev. 50:347): a reaction with reactant
//! coefficients νᵢ and order m = Σνᵢ has deterministic rate v = k·Π\[Xᵢ\]^νᵢ (events per volume per
//! time); its stochastic constant is c = k·Π(νᵢ!)/Ω^(m−1), with Ω = N_A·V, and its propensity is
//! a = c·Π C(xᵢ, νᵢ).

use std::fmt;

/// The Avogadro constant N_A in 1/mol: exact since the 2019 SI revision.
pub const AVOGADRO: f64 = 6.022_140_76e23;

/// Exponents of the four base dimensions: concentration (mol/L), time (s), amount (molecules),
/// volume (L).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct Dim {
    pub conc: i8,
    pub time: i8,
    pub count: i8,
    pub volume: i8,
}

impl Dim {
    pub const NONE: Dim = Dim::new(0, 0, 0, 0);
    pub const CONC: Dim = Dim::new(1, 0, 0, 0);
    pub const TIME: Dim = Dim::new(0, 1, 0, 0);
    pub const COUNT: Dim = Dim::new(0, 0, 1, 0);
    pub const VOLUME: Dim = Dim::new(0, 0, 0, 1);

    pub const fn new(conc: i8, time: i8, count: i8, volume: i8) -> Dim {
        Dim {
            conc,
            time,
            count,
            volume,
        }
    }

    pub fn times(self, o: Dim) -> Dim {
        Dim::new(
            self.conc + o.conc,
            self.time + o.time,
            self.count + o.count,
            self.volume + o.volume,
        )
    }

    pub fn per(self, o: Dim) -> Dim {
        self.times(o.powi(-1))
    }

    pub fn powi(self, n: i32) -> Dim {
        let n = n as i8;
        Dim::new(
            self.conc.saturating_mul(n),
            self.time.saturating_mul(n),
            self.count.saturating_mul(n),
            self.volume.saturating_mul(n),
        )
    }

    pub fn is_none(self) -> bool {
        self == Dim::NONE
    }

    /// The same dimension with molecule counts treated as pure numbers, as they are in a network
    /// without a volume.
    pub fn without_count(self) -> Dim {
        Dim { count: 0, ..self }
    }

    /// Dimension a mass-action constant of order `m` must have in concentration units:
    /// concentration^(1−m) / time.
    pub fn mass_action_molar(order: u32) -> Dim {
        Dim::new(1 - order as i8, -1, 0, 0)
    }

    /// Dimension of a stochastic constant of order `m` in count units: molecules^(1−m) / time.
    pub fn mass_action_count(order: u32) -> Dim {
        Dim::new(0, -1, 1 - order as i8, 0)
    }
}

impl fmt::Display for Dim {
    /// Reads like `1/(concentration·time)` or `concentration/time`; `dimensionless` for none.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let parts = [
            ("concentration", self.conc),
            ("time", self.time),
            ("molecules", self.count),
            ("volume", self.volume),
        ];
        let term = |name: &str, e: i8| {
            if e.abs() == 1 {
                name.to_string()
            } else {
                format!("{name}^{}", e.abs())
            }
        };
        let num: Vec<String> = parts
            .iter()
            .filter(|p| p.1 > 0)
            .map(|p| term(p.0, p.1))
            .collect();
        let den: Vec<String> = parts
            .iter()
            .filter(|p| p.1 < 0)
            .map(|p| term(p.0, p.1))
            .collect();
        if num.is_empty() && den.is_empty() {
            return write!(f, "dimensionless");
        }
        let top = if num.is_empty() {
            "1".to_string()
        } else {
            num.join("·")
        };
        match den.len() {
            0 => write!(f, "{top}"),
            1 => write!(f, "{top}/{}", den[0]),
            _ => write!(f, "{top}/({})", den.join("·")),
        }
    }
}

/// A number in canonical units with its dimension.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Quantity {
    pub value: f64,
    pub dim: Dim,
}

impl Quantity {
    pub fn new(value: f64, dim: Dim) -> Quantity {
        Quantity { value, dim }
    }

    pub fn bare(value: f64) -> Quantity {
        Quantity::new(value, Dim::NONE)
    }
}

/// A named unit: its factor to canonical units and its dimension, or `None` if `name` is not a
/// unit. The names are those of the network language (the README's network language).
pub fn unit(name: &str) -> Option<(f64, Dim)> {
    let u = match name {
        "M" => (1.0, Dim::CONC),
        "mM" => (1e-3, Dim::CONC),
        "uM" | "µM" | "μM" => (1e-6, Dim::CONC),
        "nM" => (1e-9, Dim::CONC),
        "pM" => (1e-12, Dim::CONC),
        "fM" => (1e-15, Dim::CONC),
        "molecules" | "molecule" => (1.0, Dim::COUNT),
        "L" => (1.0, Dim::VOLUME),
        "mL" => (1e-3, Dim::VOLUME),
        "uL" | "µL" | "μL" => (1e-6, Dim::VOLUME),
        "nL" => (1e-9, Dim::VOLUME),
        "pL" => (1e-12, Dim::VOLUME),
        "fL" => (1e-15, Dim::VOLUME),
        "um3" | "µm3" | "μm3" => (1e-15, Dim::VOLUME),
        "s" => (1.0, Dim::TIME),
        "min" => (60.0, Dim::TIME),
        "h" => (3600.0, Dim::TIME),
        // A day of 86,400 s (SI Brochure, 9th ed., table 8: non-SI units accepted for use
        // with the SI [M]); dosing schedules are written in days.
        "d" => (86_400.0, Dim::TIME),
        _ => return None,
    };
    Some(u)
}

/// Whether `name` is a unit (and so cannot name a species or param).
pub fn is_unit(name: &str) -> bool {
    unit(name).is_some()
}

/// Ω = N_A·V: molecules per mol/L in a volume of `volume_l` litres.
///
/// One molar in one femtolitre is 6.022e8 molecules, so 1 nM in 1 fL is about 0.602 molecules.
pub fn omega(volume_l: f64) -> f64 {
    AVOGADRO * volume_l
}

pub use super::mass_action::factorial_product;

/// Stochastic constant c = k·Π(νᵢ!)/Ω^(m−1) of a mass-action step with macroscopic constant `k`
/// (concentration units, seconds), reactant coefficients `coefficients` and Ω = N_A·V
/// (Gillespie 1977; Higham 2008). For order 0 this is c = k·Ω.
pub fn stochastic_constant(k: f64, coefficients: &[u32], omega: f64) -> f64 {
    let order: u32 = coefficients.iter().sum();
    k * factorial_product(coefficients) / omega.powi(order as i32 - 1)
}

/// Inverse of [`stochastic_constant`]: k = c·Ω^(m−1)/Π(νᵢ!).
pub fn macroscopic_constant(c: f64, coefficients: &[u32], omega: f64) -> f64 {
    let order: u32 = coefficients.iter().sum();
    c * omega.powi(order as i32 - 1) / factorial_product(coefficients)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    // N_A = 6.02214076e23 /mol, exact (SI 2019) [verified, docs/references.md §12].
    // Numbers below are docs/references.md §12 [C], hand-computable.
    #[test]
    fn omega_of_one_femtolitre() {
        let om = omega(1e-15);
        assert!(rel(om, 6.022_140_76e8) < 1e-15);
        // 1 nM in 1 fL is about 0.6 molecules (common practice).
        assert!(rel(1e-9 * om, 0.602_214_076) < 1e-15);
    }

    #[test]
    fn second_order_conversion() {
        let om = omega(1e-15);
        // A + B: c = k/(N_A V) = 1e6 / 6.02214076e8 = 1.660539067e-3 /s  [C, docs/references.md §12]
        let c = stochastic_constant(1e6, &[1, 1], om);
        assert!(rel(c, 1e6 / 6.022_140_76e8) < 1e-15);
        assert!(rel(c, 1.660_539_067e-3) < 1e-9);
        // A + A: c = 2k/(N_A V) = 3.321078134e-3 /s  [C, docs/references.md §12]
        let c2 = stochastic_constant(1e6, &[2], om);
        assert!(rel(c2, 2e6 / 6.022_140_76e8) < 1e-15);
        assert!(rel(c2, 3.321_078_134e-3) < 1e-9);
        assert!(rel(macroscopic_constant(c2, &[2], om), 1e6) < 1e-15);
    }

    #[test]
    fn zero_first_and_third_order_conversion() {
        let om = omega(1e-15);
        // zero order: c = k0·N_A·V; 1e-9 M/s in 1 fL = 0.602214076 /s  [C, docs/references.md §12]
        assert!(rel(stochastic_constant(1e-9, &[], om), 0.602_214_076) < 1e-15);
        // first order: c = k
        assert_eq!(stochastic_constant(0.5, &[1], om), 0.5);
        // 2A + B: c = k·2!·1!/Ω²  (Gillespie 1977 convention)
        let c = stochastic_constant(3.0, &[2, 1], om);
        assert!(rel(c, 6.0 / (om * om)) < 1e-15);
        // 3A: c = k·3!/Ω²
        assert!(rel(stochastic_constant(1.0, &[3], om), 6.0 / (om * om)) < 1e-15);
    }

    #[test]
    fn unit_factors() {
        assert_eq!(unit("nM"), Some((1e-9, Dim::CONC)));
        assert_eq!(unit("µM"), unit("uM"));
        assert_eq!(unit("min"), Some((60.0, Dim::TIME)));
        // 1 d = 86,400 s (SI Brochure, 9th ed., table 8 [M]).
        assert_eq!(unit("d"), Some((86_400.0, Dim::TIME)));
        assert_eq!(unit("um3"), Some((1e-15, Dim::VOLUME)));
        assert_eq!(unit("parsec"), None);
    }

    #[test]
    fn dimension_names_read_naturally() {
        assert_eq!(
            Dim::mass_action_molar(2).to_string(),
            "1/(concentration·time)"
        );
        assert_eq!(Dim::mass_action_molar(0).to_string(), "concentration/time");
        assert_eq!(
            Dim::mass_action_molar(3).to_string(),
            "1/(concentration^2·time)"
        );
        assert_eq!(Dim::NONE.to_string(), "dimensionless");
    }
}
