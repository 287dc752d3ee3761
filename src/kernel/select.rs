//! Channel selection for the Gillespie direct method: given propensities a₁ … a_M with total
//! a₀ and a target u·a₀ (u uniform on [0, 1)), pick the smallest j with Σ_{i≤j} aᵢ > u·a₀
//! (Gillespie 1977, J. Phys. Chem. 81:2340-2361, step 3 of the direct method \[M\]).
//!
//! Two implementations of that rule, and one of the same law:
//!
//! - [`select_linear`]: a cumulative scan with early exit, O(M): the plain statement of the
//!   rule, which the tests hold the tree to. (The event loop's scan for small networks, in
//!   [`crate::kernel::direct`], counts instead of exiting early, in blocks of four.)
//! - [`SumTree`]: a binary tree of partial sums over a flat array, O(log M) per update and per
//!   selection, for large networks (common practice; the same idea as a Fenwick tree).
//! - [`Rejection`]: composition–rejection (Slepoy, Thompson & Plimpton 2008, J. Chem. Phys.
//!   128:205101 \[M\]), for very large networks: channels grouped by the binary exponent of
//!   their propensity, a group chosen with u·a₀ by a scan over the few non-empty groups, and
//!   a channel in it by rejection. Its cost per update and per selection does not grow with
//!   M. It picks channel j with probability a_j/a₀, as the rule does, but not the same j for
//!   the same u, and it draws more random numbers.
//!
//! The first two are robust to rounding: they never return a channel of zero propensity while
//! some channel is positive, even when rounding makes u·a₀ reach or exceed the summed
//! propensities (they then return the last positive channel).
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
    ///
    /// The new sum of each node is carried up in a register and added to its sibling's (f64
    /// addition is commutative, so this is the same sum as left + right), so that no level
    /// waits for the store of the level below.
    #[inline]
    pub fn set(&mut self, i: usize, w: f64) {
        debug_assert!(w >= 0.0, "negative weight {w}");
        assert!(i < self.len, "leaf {i} out of range {}", self.len);
        let mut k = self.leaves + i;
        let mut v = w;
        self.nodes[k] = v;
        while k > 1 {
            v += self.nodes[k ^ 1];
            k /= 2;
            self.nodes[k] = v;
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

/// Groups of the composition–rejection selector: one per value of the 11-bit exponent field
/// of an f64.
const GROUPS: usize = 2048;

/// Composition–rejection selection over M channels (Slepoy, Thompson & Plimpton 2008, J.
/// Chem. Phys. 128:205101 \[M\]).
///
/// Group g holds the channels whose propensity has exponent field g, i.e. lies in
/// [2^(g−1023), 2^(g−1022)) (group 0: the subnormal numbers below 2^−1022). Then
///
/// - composition: group g is chosen with probability G_g/a₀, G_g = Σ_{j∈g} a_j, by scanning
///   the non-empty groups, largest exponent first, for the first cumulative sum above u·a₀;
/// - rejection: a member j of g is drawn uniformly and accepted with probability
///   a_j/2^(g−1022), else drawn again; since every member is at least half that bound, at
///   most two draws are needed on average, and j is accepted with probability
///   a_j/Σ_{k∈g} a_k.
///
/// So j is chosen with probability a_j/a₀. Each group's sum is kept exactly, as the integer
/// sum of its members' 53-bit significands (all members share one exponent), and G_g is a
/// fixed function of that integer: an update changes it exactly, so rounding never
/// accumulates and no rebuild is needed; a₀ is the sum of the few G_g. The acceptance test
/// compares a uniform 53-bit integer with the member's significand, exactly.
///
/// The propensities themselves are the caller's (the event loop keeps each beside its rate):
/// [`Rejection::set`] takes the old and the new value, [`Rejection::select`] reads them
/// through a function. Updates are O(1) (moving a channel between groups swaps it out of one
/// list and into another); a selection costs O(number of non-empty groups), about log₂ of the
/// spread of the propensities, whatever M.
#[derive(Clone, Debug, PartialEq)]
pub struct Rejection {
    /// Index of each channel in its group's member list (meaningful where a > 0).
    slot: Vec<u32>,
    /// Members of each group.
    members: Vec<Vec<u32>>,
    /// Sum of the members' significands, per group.
    exact: Vec<u128>,
    /// `exact` in propensity units as f64, per group.
    sums: Vec<f64>,
    /// The non-empty groups, largest exponent first.
    active: Vec<u16>,
    /// Channels whose propensity is not a finite number ≥ 0 (then a₀ is NaN).
    bad: usize,
}

/// Exponent field of a positive f64.
#[inline(always)]
fn group_of(a: f64) -> usize {
    ((a.to_bits() >> 52) & 0x7ff) as usize
}

/// The 53-bit significand of a positive f64 (with its leading 1, except for subnormals), the
/// number of units of 2^(max(g, 1)−1075) that it holds.
#[inline(always)]
fn significand(a: f64) -> u64 {
    let bits = a.to_bits();
    let frac = bits & ((1 << 52) - 1);
    frac | (u64::from((bits >> 52) & 0x7ff != 0) << 52)
}

/// Whether a propensity is a finite number ≥ 0.
#[inline(always)]
fn valid(a: f64) -> bool {
    (0.0..f64::INFINITY).contains(&a)
}

impl Rejection {
    /// M channels, all of propensity 0.
    pub fn new(m: usize) -> Rejection {
        Rejection {
            slot: vec![0; m],
            members: vec![Vec::new(); GROUPS],
            exact: vec![0; GROUPS],
            sums: vec![0.0; GROUPS],
            active: Vec::new(),
            bad: 0,
        }
    }

    /// Number of channels M.
    pub fn len(&self) -> usize {
        self.slot.len()
    }

    /// Whether there are no channels.
    pub fn is_empty(&self) -> bool {
        self.slot.is_empty()
    }

    /// a₀: the group sums added largest exponent first (the order of the scan), or NaN if
    /// some propensity is not a finite number ≥ 0.
    #[inline(always)]
    pub fn total(&self) -> f64 {
        if self.bad > 0 {
            return f64::NAN;
        }
        let mut sum = -0.0;
        for &g in &self.active {
            sum += self.sums[g as usize];
        }
        sum
    }

    /// Channel j's propensity changes from `old` (0 at the start) to `new`, O(1). A value
    /// that is not a finite number ≥ 0 belongs to no group, and makes [`Rejection::total`]
    /// NaN while it lasts.
    #[inline(always)]
    pub fn set(&mut self, j: usize, old: f64, new: f64) {
        let (ob, nb) = (old.to_bits(), new.to_bits());
        let g = group_of(old);
        // Same sign and exponent field, both positive, and not infinite or NaN (field 0x7ff):
        // the channel stays in its group.
        if (ob ^ nb) >> 52 == 0 && old > 0.0 && new > 0.0 && g != 0x7ff {
            let e = self.exact[g] - u128::from(significand(old)) + u128::from(significand(new));
            self.exact[g] = e;
            self.sums[g] = to_f64(e) * unit(g);
        } else if ob != nb {
            self.regroup(j, old, new);
        }
    }

    /// [`Rejection::set`] where the channel changes group (or enters or leaves every group):
    /// rarer, and kept out of the event loop's own code.
    #[cold]
    #[inline(never)]
    fn regroup(&mut self, j: usize, old: f64, new: f64) {
        if !valid(old) {
            self.bad -= 1;
        } else if old > 0.0 {
            self.leave(j, group_of(old), significand(old));
        }
        if !valid(new) {
            self.bad += 1;
        } else if new > 0.0 {
            self.join(j, group_of(new), significand(new));
        }
    }

    fn leave(&mut self, j: usize, g: usize, m: u64) {
        let k = self.slot[j] as usize;
        let list = &mut self.members[g];
        list.swap_remove(k);
        if let Some(&moved) = list.get(k) {
            self.slot[moved as usize] = k as u32;
        }
        self.exact[g] -= u128::from(m);
        if list.is_empty() {
            self.exact[g] = 0;
            self.sums[g] = 0.0;
            if let Some(p) = self.active.iter().position(|&h| h as usize == g) {
                self.active.remove(p);
            }
        } else {
            self.sums[g] = to_f64(self.exact[g]) * unit(g);
        }
    }

    fn join(&mut self, j: usize, g: usize, m: u64) {
        let list = &mut self.members[g];
        if list.is_empty() {
            let p = self.active.partition_point(|&h| h as usize > g);
            self.active.insert(p, g as u16);
        }
        self.slot[j] = list.len() as u32;
        list.push(j as u32);
        self.exact[g] += u128::from(m);
        self.sums[g] = to_f64(self.exact[g]) * unit(g);
    }

    /// A channel drawn with probability a_j/a₀ (`a` gives each channel's propensity, as last
    /// [`Rejection::set`]): the group whose cumulative sum in scan order first exceeds
    /// `target` = u·a₀, then a member by rejection with draws from `rng`. None where rounding
    /// put `target` at or above every cumulative sum (the caller draws again).
    #[inline(always)]
    pub fn select<R: rand::Rng + ?Sized>(
        &self,
        target: f64,
        rng: &mut R,
        a: impl Fn(usize) -> f64,
    ) -> Option<usize> {
        let mut sum = -0.0;
        let g = *self.active.iter().find(|&&g| {
            sum += self.sums[g as usize];
            sum > target
        })? as usize;
        let list = &self.members[g];
        // Subnormals' significands lie below 2^52, the others' in [2^52, 2^53).
        let shift = if g == 0 { 12 } else { 11 };
        loop {
            let j = list[below(rng, list.len() as u64) as usize] as usize;
            if rng.next_u64() >> shift < significand(a(j)) {
                return Some(j);
            }
        }
    }
}

/// A u128 below 2^115 as f64 without the library call: correctly rounded below 2^62, within
/// one rounding of it above. A group's sum is a
/// fixed function of its exact integer either way, so nothing drifts.
#[inline(always)]
fn to_f64(x: u128) -> f64 {
    // Two signed conversions (single instructions; unsigned ones are not on x86-64): the part
    // above 2^62 (below 2^53 for every sum a group can reach, so exact) and the rest.
    let high = (x >> 62) as i64 as f64;
    let low = (x as u64 & ((1 << 62) - 1)) as i64 as f64;
    high * 4_611_686_018_427_387_904.0 + low
}

/// 2^(max(g, 1)−1075): the value of one unit of a significand of group g (a subnormal power
/// of two for g ≤ 52).
#[inline(always)]
fn unit(g: usize) -> f64 {
    if g > 52 {
        f64::from_bits(((g - 52) as u64) << 52)
    } else {
        f64::from_bits(1 << (g.max(1) - 1))
    }
}

/// A uniform integer in [0, n), n ≥ 1, exactly (Lemire 2019, ACM Trans. Model. Comput. Simul.
/// 29(1):3, multiply-and-shift with the rare rejection that removes its bias \[M\]).
#[inline(always)]
fn below<R: rand::Rng + ?Sized>(rng: &mut R, n: u64) -> u64 {
    let mut m = u128::from(rng.next_u64()) * u128::from(n);
    if (m as u64) < n {
        let threshold = n.wrapping_neg() % n;
        while (m as u64) < threshold {
            m = u128::from(rng.next_u64()) * u128::from(n);
        }
    }
    (m >> 64) as u64
}

/// The tests' chi-square test, shared with the integration tests (not part of the library).
#[cfg(test)]
#[path = "../../tests/support/stats.rs"]
#[allow(dead_code)]
mod test_stats;

#[cfg(test)]
mod tests {
    use super::test_stats::chi_square_gof;
    use super::*;
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

    /// Propensities held by the caller, as the event loop holds them, beside the groups.
    struct Held {
        a: Vec<f64>,
        groups: Rejection,
    }

    impl Held {
        fn new(w: &[f64]) -> Held {
            let mut h = Held {
                a: vec![0.0; w.len()],
                groups: Rejection::new(w.len()),
            };
            for (j, &v) in w.iter().enumerate() {
                h.set(j, v);
            }
            h
        }

        fn set(&mut self, j: usize, v: f64) {
            self.groups.set(j, self.a[j], v);
            self.a[j] = v;
        }

        fn select(&self, target: f64, rng: &mut Xoshiro256PlusPlus) -> Option<usize> {
            self.groups.select(target, rng, |j| self.a[j])
        }
    }

    #[test]
    fn rejection_frequencies_are_multinomial() {
        // Channels spread over several groups (0.05 … 3.5) and zeros, plus a subnormal and a
        // huge weight in a second set: counts must follow the multinomial law a_j/a₀
        // (Slepoy, Thompson & Plimpton 2008 [M]; Gillespie 1977 [M]), zero channels never.
        let huge = [1e-310, 3.0, 0.0, 2.5e300, 1e300, 7e299];
        for w in [&WEIGHTS[..], &huge[..]] {
            let h = Held::new(w);
            let a0 = h.groups.total();
            let exact: f64 = w.iter().sum();
            assert!((a0 - exact).abs() <= 1e-15 * exact);
            let mut rng = Xoshiro256PlusPlus::seed_from_u64(9);
            let mut counts = vec![0u64; w.len()];
            for _ in 0..200_000 {
                let target = rng.random::<f64>() * a0;
                if let Some(j) = h.select(target, &mut rng) {
                    counts[j] += 1;
                }
            }
            let positive: Vec<usize> = (0..w.len()).filter(|&j| w[j] > 0.0).collect();
            for j in (0..w.len()).filter(|j| !positive.contains(j)) {
                assert_eq!(counts[j], 0, "zero channel {j} chosen");
            }
            // Channels whose expected count is at least 5 (the subnormal one never is).
            let big: Vec<usize> = positive
                .iter()
                .copied()
                .filter(|&j| w[j] / a0 * 200_000.0 >= 5.0)
                .collect();
            let mass: f64 = big.iter().map(|&j| w[j]).sum();
            let observed: Vec<u64> = big.iter().map(|&j| counts[j]).collect();
            let probs: Vec<f64> = big.iter().map(|&j| w[j] / mass).collect();
            let r = chi_square_gof(&observed, &probs).unwrap();
            assert!(r.p_value > 1e-4, "{r:?} {counts:?}");
        }
    }

    #[test]
    fn rejection_bad_values_make_the_total_nan() {
        let mut h = Held::new(&[1.0, 2.0, 3.0]);
        assert_eq!(h.groups.total(), 6.0);
        h.set(1, f64::NAN);
        assert!(h.groups.total().is_nan());
        h.set(1, 0.0);
        assert_eq!(h.groups.total(), 4.0);
        h.set(0, -0.0);
        h.set(2, 0.0);
        assert_eq!(h.groups.total(), 0.0);
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(1);
        assert_eq!(h.select(0.0, &mut rng), None);
    }

    fn weight() -> impl Strategy<Value = f64> {
        prop_oneof![Just(0.0), 0.0..1e3f64, 1e-9..1e-6f64]
    }

    proptest! {
        /// After any sequence of updates the groups are exactly those of a fresh build: the
        /// same a₀ to the bit (no drift), and every selection lands on a positive channel.
        #[test]
        fn rejection_updates_do_not_drift(
            initial in prop::collection::vec(weight(), 1..150),
            updates in prop::collection::vec((any::<prop::sample::Index>(), weight()), 0..600),
            targets in prop::collection::vec(0.0..1.0f64, 1..50),
        ) {
            let mut h = Held::new(&initial);
            for (idx, value) in updates {
                let i = idx.index(h.a.len());
                h.set(i, value);
            }
            let fresh = Held::new(&h.a);
            prop_assert_eq!(h.groups.total().to_bits(), fresh.groups.total().to_bits());
            prop_assert_eq!(&h.groups.exact, &fresh.groups.exact);
            let exact: f64 = h.a.iter().sum();
            prop_assert!((h.groups.total() - exact).abs() <= 1e-13 * exact);
            let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
            if h.groups.total() > 0.0 {
                for u in targets {
                    if let Some(j) = h.select(u * h.groups.total(), &mut rng) {
                        prop_assert!(h.a[j] > 0.0);
                    }
                }
            }
        }

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
