//! Exact stationary distributions of small networks from the chemical master equation,
//! for checking ensembles: the state space reachable from the initial state is enumerated
//! (each free species capped at a bound), the generator Q is assembled from the propensities,
//! and πQ = 0 with Σπ = 1 is solved with nalgebra's LU (general-purpose reference library).
//! Transitions that would leave the box are dropped; choose the bound so that the mass near it
//! is negligible (the solver reports it).

use copyloop::network::Network;
use std::collections::HashMap;

pub struct Stationary {
    /// Reachable states (counts of every species, clamped ones fixed).
    pub states: Vec<Vec<i64>>,
    pub probability: Vec<f64>,
    /// Probability on states where some free species is at its bound.
    pub edge_mass: f64,
}

impl Stationary {
    /// E[f(x)] under the stationary law.
    pub fn expect(&self, f: impl Fn(&[i64]) -> f64) -> f64 {
        self.states
            .iter()
            .zip(&self.probability)
            .map(|(s, p)| p * f(s))
            .sum()
    }
}

/// Stationary law of `net` from its initial state, each free species capped at `bound`.
pub fn stationary(net: &Network, bound: i64, max_states: usize) -> Stationary {
    let props = net.propensities();
    let x0 = net.initial_state();
    let mut index: HashMap<Vec<i64>, usize> = HashMap::new();
    let mut states = vec![x0.clone()];
    index.insert(x0, 0);
    let mut edges: Vec<(usize, usize, f64)> = Vec::new();
    let mut k = 0;
    while k < states.len() {
        let x = states[k].clone();
        for (j, r) in net.reactions.iter().enumerate() {
            let a = props[j].eval(&x);
            if a <= 0.0 {
                continue;
            }
            let mut y = x.clone();
            for &(i, d) in &r.change {
                y[i] += d;
            }
            if y.iter().any(|&c| c < 0 || c > bound) {
                continue;
            }
            let t = match index.get(&y) {
                Some(&t) => t,
                None => {
                    states.push(y.clone());
                    index.insert(y, states.len() - 1);
                    assert!(
                        states.len() <= max_states,
                        "state space larger than {max_states}"
                    );
                    states.len() - 1
                }
            };
            if t != k {
                edges.push((k, t, a));
            }
        }
        k += 1;
    }
    let n = states.len();
    // Qᵀπ = 0 with the last equation replaced by Σπ = 1.
    let mut m = nalgebra::DMatrix::<f64>::zeros(n, n);
    for &(from, to, a) in &edges {
        m[(to, from)] += a;
        m[(from, from)] -= a;
    }
    for j in 0..n {
        m[(n - 1, j)] = 1.0;
    }
    let mut rhs = nalgebra::DVector::<f64>::zeros(n);
    rhs[n - 1] = 1.0;
    let pi = m
        .lu()
        .solve(&rhs)
        .expect("the generator is irreducible on the box");
    let free: Vec<usize> = (0..net.species.len())
        .filter(|&i| !net.species[i].clamped)
        .collect();
    let edge_mass = states
        .iter()
        .zip(pi.iter())
        .filter(|(s, _)| free.iter().any(|&i| s[i] == bound))
        .map(|(_, p)| *p)
        .sum();
    Stationary {
        states,
        probability: pi.iter().copied().collect(),
        edge_mass,
    }
}
