//! Channel selection for the Gillespie direct method: given propensities a₁ … a_M with total
//! a₀ and a target u·a₀ (u uniform on [0, 1)), pick the smallest j with Σ_{i≤j} aᵢ > u·a₀
//! (Gillespie 1977, J. Phys. Chem. 81:2340-2361, step 3 of the direct method [M]).
//!
//! Two implementations of the same rule:
//!
//! - [`select_linear`]: a cumulative scan with early exit, O(M): the plain statement of the
//!   rule, which the tests hold the tree to. (The event loop's scan for small networks, in
//!   [`crate::kernel::direct`], counts instead of exiting early, in blocks of four.)
//! - [`SumTree`]: a binary tree of partial sums over a flat array, O(log M) per update and per
//!   selection, for large networks (common practice; the same idea as a Fenwick tree).
//!
//! Both are robust to rounding: they never return a channel of zero propensity while some
//! channel is positive, even when rounding makes u·a₀ reach or exceed the summed propensities
//! (they then return the last positive channel).
//!
//! # Why not rand_distr's `WeightedTreeIndex`
//!
//! rand_distr 0.6 has `weighted::WeightedTreeIndex<W>`, a weight tree with O(log M) `update`
//! and sampling. It does not fit the event loop:
//!
//! - the step needs a₀ every event (for the waiting time τ = −ln u₁/a₀), but the tree keeps its
//!   total in a private field with no accessor (`get(0)` is the weight of item 0 only);
//! - it samples only through its own `sample`/`try_sample(rng)`, which draw a fresh uniform
//!   internally; a target derived from our own u₂·a₀ cannot be passed in;
//! - `update` changes ancestors by the difference new − old, so f64 rounding accumulates over
//!   millions of updates, and the only way to recompute exact sums is `new` from an iterator,
//!   which allocates a new vector;
//! - `update` and `new` return `Result` (weight validation, overflow check) in the hot loop,
//!   and `try_sample` ends in `assert!`s on the selected weight recomputed by subtraction,
//!   which f64 rounding does not guarantee.
//!
//! [`SumTree`] recomputes each ancestor as the sum of its two children on every update, so
//! its internal sums are at all times exactly what a full rebuild gives: no drift accumulates.
//! [`SumTree::rebuild`] recomputes everything from the leaves after bulk changes through
//! [`SumTree::set_leaf`].

/// Smallest j with a₀ + … + a_j > `target`, never a zero-propensity channel.
///
/// If rounding leaves the running sum at or below `target` (u·a₀ rounded up to a₀), the last
/// positive channel is returned. Precondition: some propensity is positive (a₀ > 0; when
/// a₀ = 0 nothing can fire and the caller stops); otherwise 0 is returned.
#[inline]
pub fn select_linear(props: &[f64], target: f64) -> usize {
    let mut sum = 0.0;
    let mut last_positive = 0;
    for (j, &a) in props.iter().enumerate() {
        if a > 0.0 {
            sum += a;
            if sum > target {
                return j;
            }
            last_positive = j;
        }
    }
    last_positive
}

/// Binary sum tree over M non-negative weights.
///
/// Flat array of 2L entries, L the smallest power of two ≥ M: leaves at L … L+M−1 (padding
/// leaves hold 0), node k > 0 holds the sum of nodes 2k and 2k+1, node 1 is the total; entry 0
/// is unused. `set` and `find` walk one root-to-leaf path and do not allocate.
#[derive(Clone, Debug, PartialEq)]
pub struct SumTree {
    nodes: Vec<f64>,
    leaves: usize,
    len: usize,
}

impl SumTree {
    /// Tree over `weights` (each must be finite and ≥ 0; propensities are).
    pub fn new(weights: &[f64]) -> Self {
        let leaves = weights.len().max(1).next_power_of_two();
        let mut nodes = vec![0.0; 2 * leaves];
        nodes[leaves..leaves + weights.len()].copy_from_slice(weights);
        let mut tree = Self {
            nodes,
            leaves,
            len: weights.len(),
        };
        tree.rebuild();
        tree
    }

    /// Number of weights M.
    pub fn len(&self) -> usize {
        self.len
    }

    /// Whether the tree holds no weights.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Weight i.
    #[inline]
    pub fn get(&self, i: usize) -> f64 {
        self.nodes[self.leaves + i]
    }

    /// The weights in index order.
    pub fn weights(&self) -> &[f64] {
        &self.nodes[self.leaves..self.leaves + self.len]
    }

    /// Sum of all weights (a₀), as the pairwise sum of the tree.
    #[inline]
    pub fn total(&self) -> f64 {
        self.nodes[1]
    }

    /// Sets weight i and recomputes the sums on its path to the root from their children,
    /// O(log M). Panics if i ≥ M (an internal indexing error, not user input).
    #[inline]
    pub fn set(&mut self, i: usize, w: f64) {
        debug_assert!(w >= 0.0, "negative weight {w}");
        assert!(i < self.len, "leaf {i} out of range {}", self.len);
        let mut k = self.leaves + i;
        self.nodes[k] = w;
        while k > 1 {
            k /= 2;
            self.nodes[k] = self.nodes[2 * k] + self.nodes[2 * k + 1];
        }
    }

    /// Sets weight i without updating the sums; call [`SumTree::rebuild`] afterwards.
    #[inline]
    pub fn set_leaf(&mut self, i: usize, w: f64) {
        debug_assert!(w >= 0.0, "negative weight {w}");
        assert!(i < self.len, "leaf {i} out of range {}", self.len);
        self.nodes[self.leaves + i] = w;
    }

    /// Recomputes every internal sum from the leaves, O(M).
    pub fn rebuild(&mut self) {
        for k in (1..self.leaves).rev() {
            self.nodes[k] = self.nodes[2 * k] + self.nodes[2 * k + 1];
        }
    }

    /// Index of the weight selected by `target` ∈ [0, total): the smallest j whose cumulative
    /// weight exceeds `target`, O(log M).
    ///
    /// At each node it descends right (subtracting the left sum) when the right sum is positive
    /// and either `target` ≥ the left sum or the left sum is zero, else left. It thus only
    /// enters positive subtrees (a positive sum has a positive child), so the walk ends on a
    /// positive leaf for any target, including target ≥ total after rounding (then the last
    /// positive leaf) and a negative or NaN target. Precondition: total() > 0; otherwise 0 is
    /// returned.
    #[inline]
    pub fn find(&self, target: f64) -> usize {
        let mut t = target;
        let mut k = 1;
        while k < self.leaves {
            let left = self.nodes[2 * k];
            let right = self.nodes[2 * k + 1];
            if right > 0.0 && (t >= left || left <= 0.0) {
                t -= left;
                k = 2 * k + 1;
            } else {
                k *= 2;
            }
        }
        let i = k - self.leaves;
        if i < self.len {
            i
        } else {
            0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::chi_square_gof;
    use proptest::prelude::*;
    use rand::{RngExt, SeedableRng};
    use rand_xoshiro::Xoshiro256PlusPlus;

    const WEIGHTS: [f64; 11] = [0.5, 0.0, 2.0, 1.0, 0.0, 3.5, 0.25, 0.0, 1.75, 0.05, 0.0];

    /// Cumulative sums c_j = a_0 + … + a_j, summed left to right.
    fn cumulative(w: &[f64]) -> Vec<f64> {
        w.iter()
            .scan(0.0, |s, &a| {
                *s += a;
                Some(*s)
            })
            .collect()
    }

    /// `i` and `j` are both correct answers up to rounding: equal, or the target lies within
    /// `tol` of every cumulative boundary between them.
    fn agree_up_to_rounding(w: &[f64], target: f64, i: usize, j: usize, tol: f64) -> bool {
        if i == j {
            return true;
        }
        let c = cumulative(w);
        let (lo, hi) = (i.min(j), i.max(j));
        (lo..hi).all(|k| (c[k] - target).abs() <= tol)
    }

    fn w_positive(w: &[f64], j: usize) -> bool {
        w[j] > 0.0
    }

    #[test]
    fn linear_scan_basics() {
        let w = [0.0, 1.0, 0.0, 2.0, 0.0];
        assert_eq!(select_linear(&w, 0.0), 1);
        assert_eq!(select_linear(&w, 0.999), 1);
        assert_eq!(select_linear(&w, 1.0), 3);
        assert_eq!(select_linear(&w, 2.999), 3);
        // Rounding: a target at or beyond the total gives the last positive channel.
        assert_eq!(select_linear(&w, 3.0), 3);
        assert_eq!(select_linear(&w, 1e9), 3);
        // A (never legitimate) negative target still avoids the zero channel 0.
        assert_eq!(select_linear(&w, -1.0), 1);
    }

    #[test]
    fn tree_basics() {
        let mut t = SumTree::new(&[0.0, 1.0, 0.0, 2.0, 0.0]);
        assert_eq!((t.len(), t.total()), (5, 3.0));
        assert_eq!(t.find(0.0), 1);
        assert_eq!(t.find(1.0), 3);
        assert_eq!(t.find(3.0), 3);
        assert_eq!(t.find(1e9), 3);
        assert_eq!(t.find(-1.0), 1);
        assert!(t.get(t.find(f64::NAN)) > 0.0);
        assert!(w_positive(
            &[0.0, 1.0, 0.0, 2.0, 0.0],
            select_linear(&[0.0, 1.0, 0.0, 2.0, 0.0], f64::NAN)
        ));
        t.set(4, 5.0);
        assert_eq!(t.total(), 8.0);
        assert_eq!(t.find(3.0), 4);
        t.set(3, 0.0);
        assert_eq!(t.find(1.5), 4);
        assert_eq!(t.weights(), &[0.0, 1.0, 0.0, 0.0, 5.0]);
        t.set_leaf(0, 4.0);
        assert_eq!(t.total(), 6.0);
        t.rebuild();
        assert_eq!(t.total(), 10.0);
        let one = SumTree::new(&[2.5]);
        assert_eq!((one.find(0.0), one.find(2.5), one.total()), (0, 0, 2.5));
        assert!(SumTree::new(&[]).is_empty());
    }

    #[test]
    fn selection_frequencies_are_multinomial() {
        // Targets u·a₀ with u from a seeded Xoshiro256++: channel counts must follow the
        // multinomial law with probabilities a_j/a₀ (Gillespie 1977 [M]); chi-square goodness of
        // fit over the positive channels, and zero channels never chosen.
        let tree = SumTree::new(&WEIGHTS);
        let a0 = tree.total();
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
        let mut by_tree = [0u64; WEIGHTS.len()];
        let mut by_scan = [0u64; WEIGHTS.len()];
        for _ in 0..200_000 {
            let target = rng.random::<f64>() * a0;
            by_tree[tree.find(target)] += 1;
            by_scan[select_linear(&WEIGHTS, target)] += 1;
        }
        for (j, &w) in WEIGHTS.iter().enumerate() {
            if w == 0.0 {
                assert_eq!((by_tree[j], by_scan[j]), (0, 0), "zero channel {j} chosen");
            }
        }
        let positive: Vec<usize> = (0..WEIGHTS.len()).filter(|&j| WEIGHTS[j] > 0.0).collect();
        let probs: Vec<f64> = positive.iter().map(|&j| WEIGHTS[j] / a0).collect();
        for counts in [by_tree, by_scan] {
            let observed: Vec<u64> = positive.iter().map(|&j| counts[j]).collect();
            let r = chi_square_gof(&observed, &probs).unwrap();
            assert_eq!(r.dof, positive.len() as u64 - 1);
            assert!(r.p_value > 1e-4, "{r:?}");
        }
        // A wrong law is detected at this size: the same counts against uniform probabilities.
        let observed: Vec<u64> = positive.iter().map(|&j| by_tree[j]).collect();
        let uniform = vec![1.0 / positive.len() as f64; positive.len()];
        assert!(chi_square_gof(&observed, &uniform).unwrap().p_value < 1e-6);
    }

    #[test]
    fn tree_agrees_with_linear_scan() {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(8);
        for m in [1usize, 2, 3, 7, 8, 9, 31, 33, 100, 1000] {
            let w: Vec<f64> = (0..m)
                .map(|_| {
                    if rng.random::<f64>() < 0.3 {
                        0.0
                    } else {
                        rng.random::<f64>() * 10.0
                    }
                })
                .collect();
            let tree = SumTree::new(&w);
            if tree.total() == 0.0 {
                continue;
            }
            let tol = 1e-12 * tree.total();
            for _ in 0..2000 {
                let target = rng.random::<f64>() * tree.total();
                let (i, j) = (tree.find(target), select_linear(&w, target));
                assert!(w[i] > 0.0 && w[j] > 0.0);
                assert!(
                    agree_up_to_rounding(&w, target, i, j, tol),
                    "m {m}: {i} vs {j}"
                );
            }
        }
    }

    #[test]
    fn integer_weights_agree_exactly() {
        // Small integer weights: every partial sum is exact in f64, so tree and scan must give
        // the same channel for every target, including each boundary.
        let w = [3.0, 0.0, 1.0, 4.0, 0.0, 0.0, 2.0, 5.0, 1.0];
        let tree = SumTree::new(&w);
        let mut t = 0.0;
        while t < tree.total() + 2.0 {
            assert_eq!(tree.find(t), select_linear(&w, t), "target {t}");
            t += 0.25;
        }
    }

    fn weight() -> impl Strategy<Value = f64> {
        prop_oneof![Just(0.0), 0.0..1e3f64, 1e-9..1e-6f64]
    }

    proptest! {
        #[test]
        fn updates_keep_sums_and_selection(
            initial in prop::collection::vec(weight(), 1..150),
            updates in prop::collection::vec((any::<prop::sample::Index>(), weight()), 0..300),
            targets in prop::collection::vec(0.0..1.0f64, 1..50),
        ) {
            let mut tree = SumTree::new(&initial);
            let mut w = initial.clone();
            for (idx, value) in updates {
                let i = idx.index(w.len());
                w[i] = value;
                tree.set(i, value);
            }
            prop_assert_eq!(tree.weights(), &w[..]);
            // The path updates leave the tree identical to a full rebuild (no drift).
            let mut rebuilt = tree.clone();
            rebuilt.rebuild();
            prop_assert_eq!(&rebuilt, &tree);
            // Pairwise summation error bound: depth · ε · Σ w (Higham 2002, Accuracy and
            // Stability of Numerical Algorithms, §4.2 [M]).
            let exact: f64 = w.iter().sum();
            let depth = (tree.nodes.len() as f64).log2() + 1.0;
            prop_assert!((tree.total() - exact).abs() <= 2.0 * depth * f64::EPSILON * exact);
            if tree.total() > 0.0 {
                let tol = 1e-12 * tree.total();
                for u in targets {
                    let target = u * tree.total();
                    let (i, j) = (tree.find(target), select_linear(&w, target));
                    prop_assert!(w[i] > 0.0 && w[j] > 0.0);
                    prop_assert!(agree_up_to_rounding(&w, target, i, j, tol));
                }
            }
        }
    }
}
