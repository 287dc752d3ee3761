//! Step-size selection for explicit tau-leaping (Cao, Gillespie & Petzold 2006, J. Chem. Phys.
//! 124:044109 \[verified\]) and the critical-reaction rule (Cao, Gillespie & Petzold 2005,
//! J. Chem. Phys. 123:054104 \[verified\]).
//!
//! These are the pure parts of a leap, separate from the random ones so they can be checked
//! against hand computations:
//!
//! - A reaction j is *critical* when a_j > 0 and it could exhaust a reactant within n_c firings:
//!   L_j = min over species i consumed by j of ⌊x_i/|ν_ij|⌋ < n_c (n_c = 10).
//! - For every species i whose count some propensity reads — a reactant of any reaction,
//!   critical or not, whatever its count, or a species a `law` reads — with
//!   μ_i = Σ_j ν_ij a_j and σ²_i = Σ_j ν_ij² a_j over the non-critical j,
//!   τ' = min_i min( max(εx_i/g_i, 1)/|μ_i|, max(εx_i/g_i, 1)²/σ²_i ),
//!   where g_i comes from the highest order of reaction in which i is a reactant (HOR):
//!   HOR 1: g = 1; HOR 2: g = 2, or 2 + 1/(x_i − 1) if that reaction needs two i;
//!   HOR 3: g = 3, or (3/2)(2 + 1/(x_i − 1)) if it needs two, or 3 + 1/(x_i − 1) + 2/(x_i − 2)
//!   if it needs three.
//!
//! The set of bounded species is the paper's I_rs (every reactant species) widened by the
//! species that laws read: their propensities change with them as a reactant's does. A species
//! at count 0 stays in the set: its bound is then one molecule (the max(·, 1)), which keeps a
//! species that is only being produced from leaping straight past the moment its consumers
//! switch on.

use crate::network::Network;

/// The number of firings below which a reaction counts as critical (n_c = 10, the value the
/// 2005 paper recommends).
pub const N_CRITICAL: i64 = 10;

/// How g_i is computed for one species.
#[derive(Clone, Copy, Debug, PartialEq)]
enum GRule {
    /// The species is no reactant of any reaction.
    None,
    /// Highest order `order`, and the most copies of the species that reaction needs.
    Order { order: u32, copies: u32 },
}

/// What step selection needs from a network, in index form, built once.
#[derive(Clone, Debug)]
pub struct LeapPlan {
    g: Vec<GRule>,
    /// Per reaction, the species it consumes with their (negative) net change.
    consumes: Vec<Vec<(usize, i64)>>,
    /// The non-clamped species some propensity reads: reactants of every reaction (the set
    /// I_rs of the leap condition, whatever the sign of their net change: `A -> 2A` bounds A
    /// too) and the species laws read.
    bounded: Vec<usize>,
    /// Per reaction, its net change on non-clamped species.
    change: Vec<Vec<(usize, i64)>>,
}

impl LeapPlan {
    pub fn new(net: &Network) -> LeapPlan {
        let mut g = vec![GRule::None; net.species.len()];
        for r in &net.reactions {
            let order = r.order();
            for &(i, copies) in &r.reactants {
                if net.species[i].clamped {
                    continue;
                }
                let better = match g[i] {
                    GRule::None => true,
                    GRule::Order {
                        order: o,
                        copies: c,
                    } => order > o || (order == o && copies > c),
                };
                if better {
                    g[i] = GRule::Order { order, copies };
                }
            }
        }
        let change: Vec<Vec<(usize, i64)>> =
            net.reactions.iter().map(|r| r.change.clone()).collect();
        let consumes = change
            .iter()
            .map(|c| c.iter().copied().filter(|&(_, d)| d < 0).collect())
            .collect();
        let mut read = vec![false; net.species.len()];
        for r in &net.reactions {
            for i in r.reads() {
                read[i] = true;
            }
        }
        let bounded = (0..net.species.len())
            .filter(|&i| read[i] && !net.species[i].clamped)
            .collect();
        LeapPlan {
            g,
            consumes,
            bounded,
            change,
        }
    }

    pub fn reactions(&self) -> usize {
        self.change.len()
    }

    /// Net change of reaction j on non-clamped species.
    pub fn change(&self, j: usize) -> &[(usize, i64)] {
        &self.change[j]
    }

    /// g_i at count `x` (Cao, Gillespie & Petzold 2006, eq. 27 and the text after it).
    pub fn g(&self, i: usize, x: i64) -> f64 {
        let x1 = (x - 1).max(1) as f64;
        let x2 = (x - 2).max(1) as f64;
        match self.g[i] {
            GRule::None => 1.0,
            GRule::Order { order: 1, .. } => 1.0,
            GRule::Order {
                order: 2,
                copies: 1,
            } => 2.0,
            GRule::Order { order: 2, .. } => 2.0 + 1.0 / x1,
            GRule::Order {
                order: 3,
                copies: 1,
            } => 3.0,
            GRule::Order {
                order: 3,
                copies: 2,
            } => 1.5 * (2.0 + 1.0 / x1),
            GRule::Order { order: 3, .. } => 3.0 + 1.0 / x1 + 2.0 / x2,
            GRule::Order { .. } => 1.0,
        }
    }

    /// L_j: firings of reaction j before a reactant runs out (i64::MAX if it consumes none).
    pub fn firings_left(&self, j: usize, x: &[i64]) -> i64 {
        self.consumes[j]
            .iter()
            .map(|&(i, d)| x[i] / -d)
            .min()
            .unwrap_or(i64::MAX)
    }

    /// Marks the critical reactions: a_j > 0 and L_j < n_c.
    pub fn mark_critical(&self, x: &[i64], props: &[f64], n_c: i64, critical: &mut [bool]) {
        for (j, c) in critical.iter_mut().enumerate() {
            *c = props[j] > 0.0 && self.firings_left(j, x) < n_c;
        }
    }

    /// τ' of the leap condition over the bounded species (see the module docs), using `mu` and
    /// `sigma2` as scratch (length = species). Infinite when no non-critical reaction changes a
    /// bounded species.
    pub fn tau_prime(
        &self,
        x: &[i64],
        props: &[f64],
        critical: &[bool],
        epsilon: f64,
        mu: &mut [f64],
        sigma2: &mut [f64],
    ) -> f64 {
        mu.iter_mut().for_each(|m| *m = 0.0);
        sigma2.iter_mut().for_each(|s| *s = 0.0);
        for (j, ch) in self.change.iter().enumerate() {
            if critical[j] || props[j] <= 0.0 {
                continue;
            }
            for &(i, d) in ch {
                let d = d as f64;
                mu[i] += d * props[j];
                sigma2[i] += d * d * props[j];
            }
        }
        let mut tau = f64::INFINITY;
        for &i in &self.bounded {
            let bound = (epsilon * x[i] as f64 / self.g(i, x[i])).max(1.0);
            if mu[i] != 0.0 {
                tau = tau.min(bound / mu[i].abs());
            }
            if sigma2[i] > 0.0 {
                tau = tau.min(bound * bound / sigma2[i]);
            }
        }
        tau
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{load_source, Overrides};

    fn plan(src: &str) -> (Network, LeapPlan) {
        let n = load_source("t.crn", src.as_bytes(), &Overrides::default()).unwrap();
        let p = LeapPlan::new(&n);
        (n, p)
    }

    fn props(n: &Network, x: &[i64]) -> Vec<f64> {
        n.propensities().iter().map(|p| p.eval(x)).collect()
    }

    // docs/references.md §3 unit test [C by hand]: decay A -> 0, c = 1, x = 1000, ε = 0.03:
    // g = 1, μ = −1000, σ² = 1000, τ' = min(30/1000, 900/1000) = 0.03.
    #[test]
    fn decay_step_size() {
        let (n, p) = plan("species A = 1000\nstep d A -> 0 @ 1\n");
        let x = [1000];
        let a = props(&n, &x);
        let crit = [false];
        let (mut mu, mut s2) = ([0.0], [0.0]);
        let tau = p.tau_prime(&x, &a, &crit, 0.03, &mut mu, &mut s2);
        assert!((tau - 0.03).abs() < 1e-15);
    }

    // docs/references.md §3 unit test [C by hand]: dimerisation 2A -> B, c = 0.002, x = 1000:
    // g = 2 + 1/999, bound = 14.99250, a = 999, μ = −1998, σ² = 3996, τ' = 0.0075038.
    #[test]
    fn dimerisation_step_size() {
        let (n, p) = plan("species A = 1000\nspecies B = 0\nstep d 2 A -> B @ 0.002\n");
        let x = [1000, 0];
        assert!((p.g(0, 1000) - 2.001_001).abs() < 1e-6);
        let a = props(&n, &x);
        assert!((a[0] - 999.0).abs() < 1e-12);
        let (mut mu, mut s2) = ([0.0; 2], [0.0; 2]);
        let tau = p.tau_prime(&x, &a, &[false], 0.03, &mut mu, &mut s2);
        let bound = 0.03 * 1000.0 / (2.0 + 1.0 / 999.0);
        assert!((tau - bound / 1998.0).abs() < 1e-15);
        assert!((tau - 0.007_503_8).abs() < 1e-7);
    }

    // The leap condition covers every reactant species (Cao, Gillespie & Petzold 2006 [M]),
    // also one that a step makes more of: A -> 2A, c = 1, x = 1000: μ = +1000, σ² = 1000,
    // τ' = min(30/1000, 900/1000) = 0.03 [C by hand].
    #[test]
    fn autocatalysis_is_bounded() {
        let (n, p) = plan("species A = 1000\nstep b A -> 2 A @ 1\n");
        let x = [1000];
        let a = props(&n, &x);
        let (mut mu, mut s2) = ([0.0], [0.0]);
        let tau = p.tau_prime(&x, &a, &[false], 0.03, &mut mu, &mut s2);
        assert!((tau - 0.03).abs() < 1e-15, "{tau}");
    }

    // g for order-3 reactions, from the formulas of Cao, Gillespie & Petzold 2006 [M].
    #[test]
    fn third_order_g() {
        let (_, p) = plan(
            "species A = 10\nspecies B = 10\nspecies C = 10\nspecies D = 0\n\
             step t 3 A -> D @ 1\nstep u 2 B + C -> D @ 1\n",
        );
        assert!((p.g(0, 10) - (3.0 + 1.0 / 9.0 + 2.0 / 8.0)).abs() < 1e-15);
        assert!((p.g(1, 10) - 1.5 * (2.0 + 1.0 / 9.0)).abs() < 1e-15);
        assert_eq!(p.g(2, 10), 3.0);
        assert_eq!(p.g(3, 10), 1.0);
    }

    // Critical reactions (Cao, Gillespie & Petzold 2005 [verified]): A + B -> C with A = 3,
    // B = 1000 can fire only 3 more times, so it is critical; A -> 0 with A = 5 too.
    #[test]
    fn critical_reactions() {
        let (n, p) = plan(
            "species A = 3\nspecies B = 1000\nspecies C = 0\nstep r A + B -> C @ 0.01\nstep s B -> 0 @ 1\n",
        );
        let x = [3, 1000, 0];
        let a = props(&n, &x);
        let mut crit = [false; 2];
        p.mark_critical(&x, &a, N_CRITICAL, &mut crit);
        assert_eq!(crit, [true, false]);
        assert_eq!(p.firings_left(0, &x), 3);
        assert_eq!(p.firings_left(1, &x), 1000);
    }

    // A species at 0 that is only being produced still bounds the leap (Cao, Gillespie &
    // Petzold 2006 [M]: I_rs holds every reactant species): immigration–death 0 -> X at 10,
    // X -> 0 at 0.1, from X = 0: the decay has a = 0, yet X is its reactant, so the bound is
    // max(0, 1) = 1 molecule, μ = 10, σ² = 10 and τ' = min(1/10, 1/10) = 0.1 [C by hand].
    #[test]
    fn produced_species_at_zero_is_bounded() {
        let (n, p) = plan(
            "species X = 0
step make 0 -> X @ 10
step decay X -> 0 @ 0.1
",
        );
        let x = [0];
        let a = props(&n, &x);
        let mut crit = [false; 2];
        p.mark_critical(&x, &a, N_CRITICAL, &mut crit);
        let (mut mu, mut s2) = ([0.0], [0.0]);
        let tau = p.tau_prime(&x, &a, &crit, 0.03, &mut mu, &mut s2);
        assert!((tau - 0.1).abs() < 1e-15, "{tau}");
    }

    // A species whose only consumer is critical is still bounded by its producers: X = 1,
    // 0 -> X at 50 (non-critical), X -> 0 at 0.5 (critical, L = 1 < 10): μ = 50, σ² = 50,
    // bound 1, τ' = min(1/50, 1/50) = 0.02 [C by hand].
    #[test]
    fn species_consumed_only_by_a_critical_reaction_is_bounded() {
        let (n, p) = plan(
            "species X = 1
step make 0 -> X @ 50
step decay X -> 0 @ 0.5
",
        );
        let x = [1];
        let a = props(&n, &x);
        let mut crit = [false; 2];
        p.mark_critical(&x, &a, N_CRITICAL, &mut crit);
        assert_eq!(crit, [false, true]);
        let (mut mu, mut s2) = ([0.0], [0.0]);
        let tau = p.tau_prime(&x, &a, &crit, 0.03, &mut mu, &mut s2);
        assert!((tau - 0.02).abs() < 1e-15, "{tau}");
    }

    // A species that only a law reads is bounded too (its propensity changes with it): A = 0,
    // 0 -> A at 5, 0 -> A at law 3 - A: μ = 8, σ² = 8, bound 1, τ' = 1/8 [C by hand].
    #[test]
    fn species_read_by_a_law_is_bounded() {
        let (n, p) = plan(
            "species A = 0
step a 0 -> A @ 5
step b 0 -> A @ law 3 - A
",
        );
        let x = [0];
        let a = props(&n, &x);
        let (mut mu, mut s2) = ([0.0], [0.0]);
        let tau = p.tau_prime(&x, &a, &[false, false], 0.03, &mut mu, &mut s2);
        assert!((tau - 0.125).abs() < 1e-15, "{tau}");
    }

    // Clamped species never limit a leap.
    #[test]
    fn clamped_species_are_ignored() {
        let (n, p) = plan("species S = 3 clamped\nspecies P = 0\nstep c S -> P @ 1\n");
        let x = [3, 0];
        let a = props(&n, &x);
        let mut crit = [false];
        p.mark_critical(&x, &a, N_CRITICAL, &mut crit);
        assert_eq!(crit, [false]);
        let (mut mu, mut s2) = ([0.0; 2], [0.0; 2]);
        assert!(p
            .tau_prime(&x, &a, &crit, 0.03, &mut mu, &mut s2)
            .is_infinite());
    }
}
