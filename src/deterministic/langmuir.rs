//! Langmuir-form and total-QSSA predictions for carrier motifs.
//!
//! A carrier X binds a ligand L into C (k_on), C falls apart (k_off) or releases X after the
//! output step (k_cat). Quasi-steady state of C gives (Briggs & Haldane 1925 \[M\]; docs/references.md
//! §6 [verified formula]):
//!
//! ```text
//! K = (k_off + k_cat)/k_on,   θ = L/(K + L),   flux = k_out·X_T·θ
//! ```
//!
//! with L the free ligand. Where the ligand is not clamped and its total L_T = L + C is what is
//! known, the total quasi-steady-state approximation (Borghans, de Boer & Segel 1996 \[M\];
//! Tzafriri 2003 \[M\]) takes the smaller root of C² − (X_T + K + L_T)·C + X_T·L_T = 0,
//!
//! ```text
//! C = ((X_T + K + L_T) − √((X_T + K + L_T)² − 4·X_T·L_T))/2
//!   = 2·X_T·L_T / (s + √(s² − 4·X_T·L_T)),   s = X_T + K + L_T,
//! ```
//!
//! evaluated in the second form, which has no cancellation when X_T·L_T ≪ s². Any consistent
//! units work (all molecules, or all mol/L).

use crate::network::{Motif, Network};

/// K = (k_off + k_cat)/k_on (Briggs & Haldane 1925).
pub fn k_half(k_on: f64, k_off: f64, k_cat: f64) -> f64 {
    (k_off + k_cat) / k_on
}

/// Occupancy θ = L/(K + L) of the carrier at free ligand level `ligand` (Langmuir form).
pub fn occupancy(ligand: f64, k: f64) -> f64 {
    if ligand <= 0.0 {
        return 0.0;
    }
    ligand / (k + ligand)
}

/// Langmuir-form flux k_out·X_T·θ.
pub fn langmuir_flux(k_out: f64, carrier_total: f64, ligand: f64, k: f64) -> f64 {
    k_out * carrier_total * occupancy(ligand, k)
}

/// Total-QSSA complex C = 2·X_T·L_T/(s + √(s² − 4·X_T·L_T)), s = X_T + K + L_T.
pub fn tqssa_complex(carrier_total: f64, ligand_total: f64, k: f64) -> f64 {
    let p = carrier_total * ligand_total;
    if p <= 0.0 {
        return 0.0;
    }
    let s = carrier_total + k + ligand_total;
    let disc = (s * s - 4.0 * p).max(0.0);
    2.0 * p / (s + disc.sqrt())
}

/// Total-QSSA flux k_out·C.
pub fn tqssa_flux(k_out: f64, carrier_total: f64, ligand_total: f64, k: f64) -> f64 {
    k_out * tqssa_complex(carrier_total, ligand_total, k)
}

/// The predictions for one carrier motif at given species counts, all in molecules.
#[derive(Clone, Debug, PartialEq)]
pub struct MotifPrediction {
    /// K in molecules.
    pub k_half: f64,
    /// X_T = X + C.
    pub carrier_total: f64,
    /// Free ligand L.
    pub ligand_free: f64,
    /// L + C, the ligand this motif can hold.
    pub ligand_total: f64,
    /// k_out·X_T, the flux at full occupancy (molecules/s).
    pub capacity_per_s: f64,
    /// θ = L/(K + L).
    pub occupancy: f64,
    /// k_out·X_T·θ (molecules/s).
    pub langmuir_per_s: f64,
    /// k_out·C_tQSSA(X_T, L + C) (molecules/s); equal to the Langmuir form when the ligand is
    /// clamped, since then the free level is fixed and the quadratic gives back θ exactly.
    pub tqssa_per_s: f64,
}

/// Langmuir-form and tQSSA predictions for `motif` at `counts` (every species, molecules), such
/// as a steady state's counts or an ensemble's mean counts. The output constant k_out is the
/// stochastic constant of the motif's output step (a first-order rate, per second).
pub fn predict(net: &Network, motif: &Motif, counts: &[f64]) -> MotifPrediction {
    let x = counts[motif.carrier];
    let c = counts[motif.complex];
    let l = counts[motif.ligand];
    let k = motif.k_half;
    let carrier_total = x + c;
    let ligand_total = l + c;
    let langmuir = langmuir_flux(motif.c_out, carrier_total, l, k);
    let tqssa = if net.species[motif.ligand].clamped {
        langmuir
    } else {
        tqssa_flux(motif.c_out, carrier_total, ligand_total, k)
    };
    MotifPrediction {
        k_half: k,
        carrier_total,
        ligand_free: l,
        ligand_total,
        capacity_per_s: motif.c_out * carrier_total,
        occupancy: occupancy(l, k),
        langmuir_per_s: langmuir,
        tqssa_per_s: tqssa,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hand values: K = (1 + 1)/100 = 0.02; θ at L = 0.02 is 1/2 (Briggs & Haldane 1925 [M]).
    #[test]
    fn hand_formulas() {
        let k = k_half(100.0, 1.0, 1.0);
        assert_eq!(k, 0.02);
        assert_eq!(occupancy(0.02, k), 0.5);
        assert_eq!(langmuir_flux(3.0, 10.0, 0.02, k), 15.0);
    }

    // The tQSSA complex is the smaller root of C² − s·C + X_T·L_T = 0 (Borghans et al. 1996
    // [M]): check by substitution, and against the textbook form where it does not cancel.
    #[test]
    fn tqssa_root() {
        for &(x, l, k) in &[
            (10.0, 1.0, 0.02),
            (1.0, 1.0, 1.0),
            (0.01, 1.0, 2.0),
            (5.0, 5e3, 1.0),
        ] {
            let c = tqssa_complex(x, l, k);
            let s: f64 = x + k + l;
            assert!((c * c - s * c + x * l).abs() < 1e-12 * s * s);
            let textbook = (s - (s * s - 4.0 * x * l).sqrt()) / 2.0;
            assert!((c - textbook).abs() < 1e-12 * s);
            assert!(c <= x.min(l));
        }
        assert_eq!(tqssa_complex(0.0, 5.0, 1.0), 0.0);
    }

    // Where X_T·L_T ≪ s² the textbook difference loses every digit; the stable form keeps the
    // first-order value C ≈ X_T·L_T/s (common practice).
    #[test]
    fn tqssa_is_stable_without_cancellation() {
        let (x, l, k) = (1e-6, 1e-6, 1e6);
        let c = tqssa_complex(x, l, k);
        let s = x + k + l;
        let approx = x * l / s * (1.0 + x * l / (s * s));
        assert!((c - approx).abs() < 1e-15 * approx);
        let textbook = (s - (s * s - 4.0 * x * l).sqrt()) / 2.0;
        assert!((textbook - approx).abs() > 0.1 * approx);
    }
}
