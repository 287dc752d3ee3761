//! Conservation laws, independent species and the link matrix.
//!
//! With conservation laws Λ·x = T (Λ: n_c × n over the free species, rank n_c), the free
//! species split into r = n − n_c independent ones x_I and n_c dependent ones x_D with Λ_D
//! invertible:
//!
//! ```text
//! x_D = Λ_D⁻¹ (T − Λ_I x_I),     dx = L₀ · dx_I,     L₀ = [ I ; −Λ_D⁻¹ Λ_I ]
//! ```
//!
//! L₀ is the link matrix (Reder 1988, "Metabolic control theory: a structural approach",
//! J. Theor. Biol. 135:175-201 \[M\]; Elf & Ehrenberg 2003 use the same reduction for the linear
//! noise approximation). The reduced Jacobian J_r = J_II-rows · L₀ (r × r) carries every
//! eigenvalue of J except the n_c zeros the laws force.

use super::system::System;
use nalgebra::DMatrix;

/// The split of the free species into independent and dependent ones.
#[derive(Clone, Debug)]
pub struct Reduction {
    /// Slots (positions in [`System::free`]) of the independent species, ascending.
    pub independent: Vec<usize>,
    /// Slots of the dependent species, one per law.
    pub dependent: Vec<usize>,
    /// The conservation laws on the free species (n_c × n).
    pub laws: DMatrix<f64>,
    /// The link matrix L₀ (n × r).
    pub link: DMatrix<f64>,
}

fn rank(m: &DMatrix<f64>) -> usize {
    if m.is_empty() {
        return 0;
    }
    let scale = m.amax().max(1.0);
    m.clone().svd(false, false).rank(1e-10 * scale)
}

impl Reduction {
    /// Builds the reduction from the network's conservation laws. Dependent species are chosen
    /// from the last-declared species backwards, each one kept when it raises the rank of Λ_D.
    pub fn new(sys: &System<'_>) -> Reduction {
        let n = sys.n();
        let rows: Vec<Vec<f64>> = sys
            .net
            .conservation_laws
            .iter()
            .map(|l| sys.free.iter().map(|&i| l[i] as f64).collect())
            .collect();
        // Keep only laws that are independent (the compiler gives a basis; this is a guard).
        let mut kept: Vec<Vec<f64>> = Vec::new();
        for r in rows {
            let mut trial = kept.clone();
            trial.push(r.clone());
            let m = DMatrix::from_fn(trial.len(), n, |i, j| trial[i][j]);
            if rank(&m) == trial.len() {
                kept.push(r);
            }
        }
        let nc = kept.len();
        let laws = DMatrix::from_fn(nc, n, |i, j| kept[i][j]);
        let mut dependent: Vec<usize> = Vec::new();
        for slot in (0..n).rev() {
            if dependent.len() == nc {
                break;
            }
            let mut cols = dependent.clone();
            cols.push(slot);
            let sub = DMatrix::from_fn(nc, cols.len(), |i, j| laws[(i, cols[j])]);
            if rank(&sub) == cols.len() {
                dependent = cols;
            }
        }
        dependent.sort_unstable();
        let independent: Vec<usize> = (0..n).filter(|k| !dependent.contains(k)).collect();
        let r = independent.len();
        let mut link = DMatrix::zeros(n, r);
        for (c, &k) in independent.iter().enumerate() {
            link[(k, c)] = 1.0;
        }
        if nc > 0 {
            let ld = DMatrix::from_fn(nc, nc, |i, j| laws[(i, dependent[j])]);
            let li = DMatrix::from_fn(nc, r, |i, j| laws[(i, independent[j])]);
            // Λ_D is invertible by construction; a failed solve leaves the dependent rows zero.
            if let Some(x) = ld.lu().solve(&li) {
                for (a, &k) in dependent.iter().enumerate() {
                    for c in 0..r {
                        link[(k, c)] = -x[(a, c)];
                    }
                }
            }
        }
        Reduction {
            independent,
            dependent,
            laws,
            link,
        }
    }

    /// Number of independent species.
    pub fn r(&self) -> usize {
        self.independent.len()
    }

    /// Conserved totals Λ·y.
    pub fn totals(&self, y: &[f64]) -> Vec<f64> {
        (0..self.laws.nrows())
            .map(|i| (0..y.len()).map(|j| self.laws[(i, j)] * y[j]).sum())
            .collect()
    }

    /// The reduced Jacobian J_r = (rows of J for the independent species) · L₀.
    pub fn reduced_jacobian(&self, jac: &DMatrix<f64>) -> DMatrix<f64> {
        let rows = DMatrix::from_fn(self.r(), jac.ncols(), |i, j| jac[(self.independent[i], j)]);
        rows * &self.link
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{load_source, Overrides};

    // Michaelis–Menten: E + C and S + C + P conserved (docs/references.md §6), so of E, S, C, P two
    // are independent; every column of L₀ must satisfy Λ·L₀ = 0 (a move along L₀ keeps the
    // totals).
    #[test]
    fn link_matrix_keeps_the_totals() {
        let net = load_source(
            "t.crn",
            b"species E = 10\nspecies S = 100\nspecies C = 0\nspecies P = 0\n\
              step bind E + S <-> C @ 1, 1\nstep cat C -> E + P @ 1\n",
            &Overrides::default(),
        )
        .unwrap();
        let sys = System::new(&net);
        let red = Reduction::new(&sys);
        assert_eq!(red.r(), 2);
        assert_eq!(red.dependent.len(), 2);
        let prod = &red.laws * &red.link;
        assert!(prod.amax() < 1e-14);
        // The reduced Jacobian has the non-zero eigenvalues of J.
        let j = sys.jacobian(&[5.0, 50.0, 5.0, 45.0]);
        let jr = red.reduced_jacobian(&j);
        let ev_full = j.complex_eigenvalues();
        let ev_red = jr.complex_eigenvalues();
        let tr_full: f64 = ev_full.iter().map(|z| z.re).sum();
        let tr_red: f64 = ev_red.iter().map(|z| z.re).sum();
        assert!((tr_full - tr_red).abs() < 1e-9 * tr_full.abs());
    }
}
