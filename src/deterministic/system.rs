//! The reaction-rate equations of a network on its free (non-clamped) species.
//!
//! dy/dt = S·v(y, t), with y = n/Ω the free species' counts over the network's reference Ω
//! (their concentrations for a network of one compartment, counts without a volume; with
//! several compartments, amounts per compartment in one common unit: each reaction's flux is
//! its rate in its own compartment times Ω_c/Ω, so molecules are conserved by transport), S
//! their rows of the stoichiometry matrix, and v_j the deterministic rate of reaction j
//! ([`Network::rate`]: k·Π\[Xᵢ\]^νᵢ for mass action, the law's value for `law` steps).
//! Clamped species are held at their initial value and have no row: they enter the rates as
//! constants. Varying params enter with the values the system holds ([`System::params`]); the
//! plain methods evaluate at t = 0, the `_at` ones at a given time.
//!
//! The Jacobian J = S·∂v/∂x is exact: each column is one forward-mode pass of dual numbers
//! through the rates that read that species (for mass action this is the analytic derivative; for
//! a `law` it differentiates the compiled expression).

use crate::network::{Dual, Network, Scalar};
use nalgebra::DMatrix;

/// The rate equations of one network, in index form.
#[derive(Clone, Debug)]
pub struct System<'a> {
    pub net: &'a Network,
    /// Network indices of the free species; position k in this list is "slot" k.
    pub free: Vec<usize>,
    /// Concentrations of every species with the clamped ones at their fixed value; the free
    /// entries are overwritten on each evaluation.
    template: Vec<f64>,
    /// Per reaction, the net change of each free slot it moves.
    changes: Vec<Vec<(usize, f64)>>,
    /// Per free slot, the reactions whose rate reads that species.
    readers: Vec<Vec<usize>>,
    /// The params' current values (canonical units), read by varying-param programs.
    pub params: Vec<f64>,
}

impl<'a> System<'a> {
    pub fn new(net: &'a Network) -> System<'a> {
        let free: Vec<usize> = (0..net.species.len())
            .filter(|&i| !net.species[i].clamped)
            .collect();
        let mut slot = vec![usize::MAX; net.species.len()];
        for (k, &i) in free.iter().enumerate() {
            slot[i] = k;
        }
        let changes = net
            .reactions
            .iter()
            .map(|r| {
                r.change
                    .iter()
                    .filter(|&&(i, _)| slot[i] != usize::MAX)
                    .map(|&(i, d)| (slot[i], d as f64))
                    .collect()
            })
            .collect();
        let mut readers = vec![Vec::new(); free.len()];
        for (j, r) in net.reactions.iter().enumerate() {
            for i in r.reads() {
                if slot[i] != usize::MAX {
                    readers[slot[i]].push(j);
                }
            }
        }
        System {
            net,
            free,
            template: net.initial_concentrations(),
            changes,
            readers,
            params: net.initial_params(),
        }
    }

    /// Number of free species.
    pub fn n(&self) -> usize {
        self.free.len()
    }

    /// Number of reactions.
    pub fn m(&self) -> usize {
        self.net.reactions.len()
    }

    /// The free species' initial concentrations.
    pub fn initial(&self) -> Vec<f64> {
        self.free.iter().map(|&i| self.template[i]).collect()
    }

    /// Slot of species `i` among the free species, if it is free.
    pub fn slot(&self, i: usize) -> Option<usize> {
        self.free.binary_search(&i).ok()
    }

    /// The state value of species `i` (counts/Ω): `y` for a free one, the fixed value for a
    /// clamped one.
    pub fn value(&self, y: &[f64], i: usize) -> f64 {
        match self.slot(i) {
            Some(k) => y[k],
            None => self.template[i],
        }
    }

    /// The free part of a vector over all species.
    pub fn restrict(&self, full: &[f64]) -> Vec<f64> {
        self.free.iter().map(|&i| full[i]).collect()
    }

    /// Concentrations of every species: `y` on the free ones, the clamped ones fixed.
    pub fn embed(&self, y: &[f64]) -> Vec<f64> {
        let mut full = self.template.clone();
        for (k, &i) in self.free.iter().enumerate() {
            full[i] = y[k];
        }
        full
    }

    /// Reaction rates v_j (state units per second; concentration per second for one
    /// compartment) at free state `y` and t = 0.
    pub fn rates(&self, y: &[f64]) -> Vec<f64> {
        self.rates_at(0.0, y)
    }

    /// Reaction rates at free state `y` and time `t`.
    pub fn rates_at(&self, t: f64, y: &[f64]) -> Vec<f64> {
        self.rates_with(t, y, &self.params)
    }

    /// Reaction rates at free state `y`, time `t` and param values `params`.
    pub fn rates_with(&self, t: f64, y: &[f64], params: &[f64]) -> Vec<f64> {
        let full = self.embed(y);
        (0..self.m())
            .map(|j| self.net.rate::<f64>(j, |i| full[i], params, t))
            .collect()
    }

    /// dy/dt with param values `params`.
    pub fn rhs_with(&self, t: f64, y: &[f64], params: &[f64]) -> Vec<f64> {
        self.rhs_from_rates(&self.rates_with(t, y, params))
    }

    /// dy/dt = S·v(y) on the free species, at t = 0.
    pub fn rhs(&self, y: &[f64]) -> Vec<f64> {
        self.rhs_from_rates(&self.rates(y))
    }

    /// dy/dt = S·v(y, t).
    pub fn rhs_at(&self, t: f64, y: &[f64]) -> Vec<f64> {
        self.rhs_from_rates(&self.rates_at(t, y))
    }

    /// ∂(dy/dt)/∂t at (t, y): one dual-number pass with the clock as the variable, over the
    /// reactions whose rate depends on time.
    pub fn time_derivative(&self, t: f64, y: &[f64], params: &[f64]) -> Vec<f64> {
        let full = self.embed(y);
        let mut f = vec![0.0; self.n()];
        for (j, ch) in self.changes.iter().enumerate() {
            if self.net.reactions[j].time_use() != crate::network::TimeUse::Smooth {
                continue;
            }
            let dv = self
                .net
                .rate::<Dual>(j, |i| Dual::constant(full[i]), params, Dual::variable(t))
                .d;
            for &(k, d) in ch {
                f[k] += d * dv;
            }
        }
        f
    }

    /// S·v for given rates.
    pub fn rhs_from_rates(&self, v: &[f64]) -> Vec<f64> {
        let mut f = vec![0.0; self.n()];
        for (j, ch) in self.changes.iter().enumerate() {
            for &(k, d) in ch {
                f[k] += d * v[j];
            }
        }
        f
    }

    /// Gross turnover of each free species, Σ_j |S_ij|·v_j: how fast it is made plus how fast it
    /// is used. The scale against which a net rate of change counts as small.
    pub fn gross(&self, v: &[f64]) -> Vec<f64> {
        let mut g = vec![0.0; self.n()];
        for (j, ch) in self.changes.iter().enumerate() {
            for &(k, d) in ch {
                g[k] += d.abs() * v[j].abs();
            }
        }
        g
    }

    /// The exact Jacobian J_kl = ∂(dy_k/dt)/∂y_l on the free species at t = 0 (one
    /// dual-number pass per column).
    pub fn jacobian(&self, y: &[f64]) -> DMatrix<f64> {
        self.jacobian_at(0.0, y)
    }

    /// The exact Jacobian at time `t`.
    pub fn jacobian_at(&self, t: f64, y: &[f64]) -> DMatrix<f64> {
        self.jacobian_with(t, y, &self.params)
    }

    /// The exact Jacobian at time `t` with param values `params`.
    pub fn jacobian_with(&self, t: f64, y: &[f64], params: &[f64]) -> DMatrix<f64> {
        let n = self.n();
        let full = self.embed(y);
        let mut jac = DMatrix::zeros(n, n);
        for l in 0..n {
            let var = self.free[l];
            for &j in &self.readers[l] {
                let dv = self
                    .net
                    .rate::<Dual>(
                        j,
                        |i| {
                            if i == var {
                                Dual::variable(full[i])
                            } else {
                                Dual::constant(full[i])
                            }
                        },
                        params,
                        Dual::constant(t),
                    )
                    .d;
                for &(k, d) in &self.changes[j] {
                    jac[(k, l)] += d * dv;
                }
            }
        }
        jac
    }

    /// The free species' rows of the stoichiometry matrix (n × m), as moved by the kernels.
    pub fn stoichiometry(&self) -> DMatrix<f64> {
        let mut s = DMatrix::zeros(self.n(), self.m());
        for (j, ch) in self.changes.iter().enumerate() {
            for &(k, d) in ch {
                s[(k, j)] = d;
            }
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{load_source, Overrides};

    fn net(src: &str) -> Network {
        load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap()
    }

    // Michaelis–Menten mass action (Briggs & Haldane 1925 [M]): dS/dt = −k1·E·S + k₋₁·C, and
    // the Jacobian entries follow by hand differentiation.
    #[test]
    fn rhs_and_jacobian_by_hand() {
        let n = net(
            "species E = 10\nspecies S = 100\nspecies C = 2\nspecies P = 0\n\
                     step bind E + S <-> C @ 0.5, 3\nstep cat C -> E + P @ 2\n",
        );
        let sys = System::new(&n);
        let y = sys.initial();
        let f = sys.rhs(&y);
        let (e, s, c) = (10.0, 100.0, 2.0);
        assert_eq!(f[0], -0.5 * e * s + 3.0 * c + 2.0 * c);
        assert_eq!(f[1], -0.5 * e * s + 3.0 * c);
        assert_eq!(f[2], 0.5 * e * s - 5.0 * c);
        assert_eq!(f[3], 2.0 * c);
        let j = sys.jacobian(&y);
        assert_eq!(j[(1, 0)], -0.5 * s);
        assert_eq!(j[(1, 1)], -0.5 * e);
        assert_eq!(j[(0, 2)], 5.0);
        assert_eq!(j[(3, 2)], 2.0);
        assert_eq!(j[(3, 3)], 0.0);
    }

    #[test]
    fn clamped_species_have_no_row_and_enter_as_constants() {
        let n = net("species L = 40 clamped\nspecies R = 10\nspecies RL = 0\n\
                     step b R + L <-> RL @ 0.01, 0.5\n");
        let sys = System::new(&n);
        assert_eq!(sys.n(), 2);
        let f = sys.rhs(&[10.0, 0.0]);
        assert!((f[0] + 0.01 * 10.0 * 40.0).abs() < 1e-15);
        let j = sys.jacobian(&[10.0, 0.0]);
        assert!((j[(0, 0)] + 0.4).abs() < 1e-15);
    }
}
