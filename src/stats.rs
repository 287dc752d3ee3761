//! Streaming statistics for ensembles and the reconciler.
//!
//! - [`Welford`]: one-pass mean and variance with an exact pairwise merge, so replicate
//!   ensembles can be reduced in any grouping (threads, shards) with memory independent of the
//!   number of replicates.
//! - [`Bivariate`], [`DeltaEstimate`]: covariances and delta-method errors of ratios.
//! - [`t_quantile`], [`ci95`]: Student-t intervals for ensemble means.
//!
//! The tests' own statistics (histograms, chi-square and Kolmogorov–Smirnov tests) live with
//! the tests, in tests/support/stats.rs: the shipped library does not carry them.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

// ---------------------------------------------------------------------------------------------
// Mean and variance
// ---------------------------------------------------------------------------------------------

/// Running count, mean and sum of squared deviations of a stream of numbers.
///
/// Update (Welford 1962, Technometrics 4(3):419-420 \[M\]): with δ = x − x̄ₙ₋₁,
/// x̄ₙ = x̄ₙ₋₁ + δ/n and M2ₙ = M2ₙ₋₁ + δ·(x − x̄ₙ). Unlike Σx² − n·x̄², this does not
/// lose precision when the mean is large compared with the spread.
///
/// For n = 0 the mean is NaN; for n < 2 the sample variance, SD and standard error are NaN
/// (undefined, serialised by serde_json as `null`), never a misleading 0.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct Welford {
    n: u64,
    mean: f64,
    m2: f64,
}

impl Welford {
    /// An empty accumulator.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds one observation.
    pub fn push(&mut self, x: f64) {
        self.n += 1;
        let delta = x - self.mean;
        self.mean += delta / self.n as f64;
        self.m2 += delta * (x - self.mean);
    }

    /// Combines another accumulator into this one, as if all its observations had been pushed.
    ///
    /// Pairwise formula (Chan, Golub & LeVeque 1979, "Updating formulae and a pairwise
    /// algorithm for computing sample variances", Stanford STAN-CS-79-773 \[M\]): with
    /// n = n_a + n_b and δ = x̄_b − x̄_a,
    /// x̄ = x̄_a + δ·n_b/n and M2 = M2_a + M2_b + δ²·n_a·n_b/n.
    pub fn merge(&mut self, other: &Welford) {
        if other.n == 0 {
            return;
        }
        if self.n == 0 {
            *self = other.clone();
            return;
        }
        let na = self.n as f64;
        let nb = other.n as f64;
        let n = na + nb;
        let delta = other.mean - self.mean;
        self.mean += delta * (nb / n);
        self.m2 += other.m2 + delta * delta * (na * nb / n);
        self.n += other.n;
    }

    /// Number of observations.
    pub fn count(&self) -> u64 {
        self.n
    }

    /// Sample mean x̄ (NaN when empty).
    pub fn mean(&self) -> f64 {
        if self.n == 0 {
            f64::NAN
        } else {
            self.mean
        }
    }

    /// Sample variance s² = M2/(n − 1) (NaN for n < 2).
    pub fn variance(&self) -> f64 {
        if self.n < 2 {
            f64::NAN
        } else {
            self.m2 / (self.n - 1) as f64
        }
    }

    /// Sample standard deviation s = √s² (NaN for n < 2).
    pub fn sd(&self) -> f64 {
        self.variance().sqrt()
    }

    /// Standard error of the mean s/√n (NaN for n < 2).
    pub fn stderr(&self) -> f64 {
        self.sd() / (self.n as f64).sqrt()
    }

    /// Two-sided 95 % Student-t interval for the mean; see [`ci95`].
    pub fn ci95(&self) -> [f64; 2] {
        ci95(self.mean(), self.sd(), self.n)
    }
}

impl Extend<f64> for Welford {
    fn extend<I: IntoIterator<Item = f64>>(&mut self, iter: I) {
        for x in iter {
            self.push(x);
        }
    }
}

impl FromIterator<f64> for Welford {
    fn from_iter<I: IntoIterator<Item = f64>>(iter: I) -> Self {
        let mut w = Welford::new();
        w.extend(iter);
        w
    }
}

/// Running means, variances and covariance of a stream of pairs (x, y).
///
/// The bivariate form of [`Welford`]: with δx = x − x̄ₙ₋₁, the co-moment updates as
/// Cₙ = Cₙ₋₁ + δx·(y − ȳₙ) (Welford 1962 \[M\]), and two accumulators merge with
/// C = C_a + C_b + δx·δy·n_a·n_b/n (Chan, Golub & LeVeque 1979 \[M\]). Sample covariance
/// C/(n − 1).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct Bivariate {
    x: Welford,
    y: Welford,
    c: f64,
}

impl Bivariate {
    /// An empty accumulator.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds one pair.
    pub fn push(&mut self, x: f64, y: f64) {
        let dx = x - self.x.mean;
        self.x.push(x);
        self.y.push(y);
        self.c += dx * (y - self.y.mean);
    }

    /// Combines another accumulator into this one, as if all its pairs had been pushed.
    pub fn merge(&mut self, other: &Bivariate) {
        if other.x.n == 0 {
            return;
        }
        if self.x.n == 0 {
            *self = other.clone();
            return;
        }
        let (na, nb) = (self.x.n as f64, other.x.n as f64);
        let (dx, dy) = (other.x.mean - self.x.mean, other.y.mean - self.y.mean);
        self.c += other.c + dx * dy * (na * nb / (na + nb));
        self.x.merge(&other.x);
        self.y.merge(&other.y);
    }

    /// The x values alone.
    pub fn x(&self) -> &Welford {
        &self.x
    }

    /// The y values alone.
    pub fn y(&self) -> &Welford {
        &self.y
    }

    /// Sample covariance C/(n − 1) (NaN for n < 2).
    pub fn covariance(&self) -> f64 {
        if self.x.n < 2 {
            f64::NAN
        } else {
            self.c / (self.x.n - 1) as f64
        }
    }
}

/// The variance of a stationary quantity from R replicates' window averages m_r and time-
/// averaged squares q_r (the pairs of `b`): by the law of total variance,
/// Var(X) = E[q_r − m_r²] + Var(m_r), estimated without bias by (q̄ − m̄²) + s²_m/R
/// (common practice); never negative.
pub fn total_variance(b: &Bivariate) -> f64 {
    let r = b.x().count() as f64;
    let m = b.x().mean();
    let between = if r > 1.0 { b.x().variance() / r } else { 0.0 };
    (b.y().mean() - m * m + between).max(0.0)
}

/// An estimate of a smooth function f(x̄, ȳ) of two means, with its delta-method standard
/// error and Student-t 95 % interval.
///
/// SE² = gᵀ·Σ·g / n with g = (∂f/∂x̄, ∂f/∂ȳ) at the means and Σ the sample covariance matrix
/// of (x, y) (the delta method: e.g. Casella & Berger 2002, Statistical Inference, §5.5.4
/// \[M\]); the interval is f ± t_{0.975, n−1}·SE.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DeltaEstimate {
    pub value: f64,
    pub stderr: f64,
    pub ci95: [f64; 2],
}

impl DeltaEstimate {
    /// f at the means of `b`, given f's value there and its gradient `grad` = (∂f/∂x̄, ∂f/∂ȳ).
    pub fn new(b: &Bivariate, value: f64, grad: [f64; 2]) -> DeltaEstimate {
        let n = b.x.count();
        let var = grad[0] * grad[0] * b.x.variance()
            + 2.0 * grad[0] * grad[1] * b.covariance()
            + grad[1] * grad[1] * b.y.variance();
        let stderr = (var.max(0.0) / n as f64).sqrt();
        let half = if n >= 2 {
            t_quantile(0.975, (n - 1) as f64) * stderr
        } else {
            f64::NAN
        };
        DeltaEstimate {
            value,
            stderr,
            ci95: [value - half, value + half],
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Student-t intervals
// ---------------------------------------------------------------------------------------------

/// Degrees of freedom above which [`t_quantile`] uses the Cornish–Fisher expansion instead of
/// statrs: statrs 0.19's incomplete-beta inversion agrees with the expansion within 1e-8 at
/// 10⁴ degrees of freedom but drifts beyond (measured errors of 7e-6 at 10⁵ and 0.13 at 10⁷
/// for p = 0.975), and at 10⁸ it did not finish within 5 s; the expansion's first omitted
/// term is below 1e-15 from 10⁴ on.
const T_EXPANSION_FROM: f64 = 1e4;

/// Quantile t_{p, dof} of Student's t distribution: the t with P(T ≤ t) = p.
///
/// Up to 10⁴ degrees of freedom: statrs' `StudentsT::inverse_cdf` (inversion of the
/// regularised incomplete beta function, t = √(ν(1 − y)/y), y = I⁻¹_{2 min(p, 1−p)}(ν/2, 1/2)).
/// Above: the Cornish–Fisher expansion about the normal quantile z = Φ⁻¹(p),
/// t = z + g₁/ν + g₂/ν² + g₃/ν³ + g₄/ν⁴ with g₁ = (z³ + z)/4, g₂ = (5z⁵ + 16z³ + 3z)/96,
/// g₃ = (3z⁷ + 19z⁵ + 17z³ − 15z)/384,
/// g₄ = (79z⁹ + 776z⁷ + 1482z⁵ − 1920z³ − 945z)/92160
/// (Abramowitz & Stegun 1964, Handbook of Mathematical Functions, 26.7.5 \[M\]); ν = ∞ gives z.
/// Checked against standard t tables in the tests.
/// Returns NaN when p is outside (0, 1) or dof is not a positive number.
pub fn t_quantile(p: f64, dof: f64) -> f64 {
    let valid = p > 0.0 && p < 1.0 && dof > 0.0;
    if !valid {
        return f64::NAN;
    }
    if dof > T_EXPANSION_FROM {
        return t_quantile_expansion(p, dof);
    }
    match StudentsT::new(0.0, 1.0, dof) {
        Ok(t) => t.inverse_cdf(p),
        Err(_) => f64::NAN,
    }
}

/// Cornish–Fisher expansion of the t quantile (A&S 26.7.5 \[M\]); see [`t_quantile`].
fn t_quantile_expansion(p: f64, dof: f64) -> f64 {
    let z = match Normal::new(0.0, 1.0) {
        Ok(normal) => normal.inverse_cdf(p),
        Err(_) => return f64::NAN,
    };
    let z2 = z * z;
    let g1 = z * (z2 + 1.0) / 4.0;
    let g2 = z * ((5.0 * z2 + 16.0) * z2 + 3.0) / 96.0;
    let g3 = z * (((3.0 * z2 + 19.0) * z2 + 17.0) * z2 - 15.0) / 384.0;
    let g4 = z * ((((79.0 * z2 + 776.0) * z2 + 1482.0) * z2 - 1920.0) * z2 - 945.0) / 92160.0;
    let v = 1.0 / dof;
    z + v * (g1 + v * (g2 + v * (g3 + v * g4)))
}

/// Two-sided 95 % confidence interval for a mean from n observations with sample SD `sd`:
/// x̄ ± t_{0.975, n−1} · sd/√n (Student 1908 \[M\]; any statistics handbook).
///
/// Returns `[NaN, NaN]` for n < 2 (no spread estimate); a zero SD gives a zero-width interval.
pub fn ci95(mean: f64, sd: f64, n: u64) -> [f64; 2] {
    if n < 2 {
        return [f64::NAN, f64::NAN];
    }
    let half = t_quantile(0.975, (n - 1) as f64) * sd / (n as f64).sqrt();
    [mean - half, mean + half]
}

#[cfg(test)]
mod bivariate_tests {
    use super::*;

    // The streaming covariance and its merge equal the two-pass textbook formula
    // Σ(x − x̄)(y − ȳ)/(n − 1) (common practice).
    #[test]
    fn covariance_matches_two_pass() {
        let xs: Vec<f64> = (0..50)
            .map(|i| (i as f64 * 0.37).sin() * 10.0 + 100.0)
            .collect();
        let ys: Vec<f64> = xs
            .iter()
            .enumerate()
            .map(|(i, x)| x * x + i as f64)
            .collect();
        let n = xs.len() as f64;
        let (mx, my) = (xs.iter().sum::<f64>() / n, ys.iter().sum::<f64>() / n);
        let two_pass: f64 = xs
            .iter()
            .zip(&ys)
            .map(|(x, y)| (x - mx) * (y - my))
            .sum::<f64>()
            / (n - 1.0);
        let mut a = Bivariate::new();
        let mut b = Bivariate::new();
        for (i, (&x, &y)) in xs.iter().zip(&ys).enumerate() {
            if i < 17 {
                a.push(x, y)
            } else {
                b.push(x, y)
            }
        }
        a.merge(&b);
        assert!((a.covariance() - two_pass).abs() < 1e-9 * two_pass.abs());
        assert!((a.x().mean() - mx).abs() < 1e-12 * mx);
    }

    // For f = x̄ the delta method reduces to the standard error of the mean s/√n.
    #[test]
    fn delta_method_of_a_mean_is_the_standard_error() {
        let mut b = Bivariate::new();
        for i in 0..30 {
            b.push(i as f64, (i * i) as f64);
        }
        let d = DeltaEstimate::new(&b, b.x().mean(), [1.0, 0.0]);
        assert!((d.stderr - b.x().stderr()).abs() < 1e-12);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_xoshiro::Xoshiro256PlusPlus;

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
    }

    fn two_pass(xs: &[f64]) -> (f64, f64) {
        let n = xs.len() as f64;
        let mean = xs.iter().sum::<f64>() / n;
        let ss: f64 = xs.iter().map(|x| (x - mean) * (x - mean)).sum();
        (mean, ss / (n - 1.0))
    }

    #[test]
    fn welford_textbook_data() {
        // Classic example: 2,4,4,4,5,5,7,9 has mean 5, population SD 2, so sample variance
        // 32/7 (hand computation, common practice).
        let w: Welford = [2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0]
            .into_iter()
            .collect();
        assert_eq!(w.count(), 8);
        assert!((w.mean() - 5.0).abs() < 1e-15);
        assert!((w.variance() - 32.0 / 7.0).abs() < 1e-14);
        assert!((w.sd() - (32.0f64 / 7.0).sqrt()).abs() < 1e-14);
        assert!((w.stderr() - (32.0f64 / 7.0 / 8.0).sqrt()).abs() < 1e-14);
    }

    #[test]
    fn welford_large_offset_is_stable() {
        // 1e9 + (4, 7, 13, 16): variance 30 exactly (hand computation); the naive
        // Σx² − n·x̄² formula loses all digits here (common practice).
        let w: Welford = [4.0, 7.0, 13.0, 16.0].iter().map(|x| 1e9 + x).collect();
        assert!((w.mean() - (1e9 + 10.0)).abs() < 1e-6);
        assert!(rel(w.variance(), 30.0) < 1e-9, "{}", w.variance());
    }

    #[test]
    fn welford_matches_two_pass_and_merge_of_splits() {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(11);
        let xs: Vec<f64> = (0..10_000)
            .map(|_| 50.0 + 3.0 * rng.random::<f64>())
            .collect();
        let whole: Welford = xs.iter().copied().collect();
        let (m, v) = two_pass(&xs);
        assert!(rel(whole.mean(), m) < 1e-13);
        assert!(rel(whole.variance(), v) < 1e-11);
        for cuts in [
            vec![1],
            vec![5000],
            vec![3, 17, 9000],
            vec![1000, 2000, 9999],
        ] {
            let mut merged = Welford::new();
            let mut start = 0;
            for &c in cuts.iter().chain(std::iter::once(&xs.len())) {
                let part: Welford = xs[start..c].iter().copied().collect();
                merged.merge(&part);
                start = c;
            }
            assert_eq!(merged.count(), whole.count());
            assert!(rel(merged.mean(), whole.mean()) < 1e-13);
            assert!(rel(merged.variance(), whole.variance()) < 1e-11);
        }
        let mut a = Welford::new();
        a.merge(&Welford::new());
        assert_eq!(a.count(), 0);
        a.merge(&whole);
        assert_eq!(a, whole);
    }

    #[test]
    fn welford_small_n() {
        let mut w = Welford::new();
        assert!(w.mean().is_nan() && w.variance().is_nan());
        w.push(3.0);
        assert_eq!(w.mean(), 3.0);
        assert!(w.variance().is_nan() && w.sd().is_nan() && w.stderr().is_nan());
        assert!(w.ci95()[0].is_nan());
        w.push(3.0);
        assert_eq!(w.variance(), 0.0);
        assert_eq!(w.ci95(), [3.0, 3.0]);
    }

    #[test]
    fn t_quantiles_match_tables() {
        // Two-sided 95 % points of Student's t (standard t tables; recomputed with scipy in
        // tests/reference/tables.py [C]): 2.306004 for 8 dof.
        assert!((t_quantile(0.975, 8.0) - 2.306004).abs() < 1e-6);
        assert!((t_quantile(0.975, 1.0) - 12.7062).abs() < 5e-5);
        assert!((t_quantile(0.975, 2.0) - 4.3027).abs() < 5e-5);
        assert!((t_quantile(0.975, 30.0) - 2.0423).abs() < 5e-5);
        assert!((t_quantile(0.995, 10.0) - 3.1693).abs() < 5e-5);
        // Symmetry and the normal limit z_{0.975} = 1.959964 (tests/reference/tables.py [C]).
        assert!((t_quantile(0.025, 8.0) + 2.306004).abs() < 1e-6);
        assert!((t_quantile(0.975, 1e9) - 1.959964).abs() < 1e-6);
        assert!((t_quantile(0.975, f64::INFINITY) - 1.959964).abs() < 1e-6);
        // Where the method switches, statrs and the expansion agree; further out the quantile
        // follows z + (z³ + z)/(4ν) (A&S 26.7.5 [M]) within the next term's size.
        for p in [0.6, 0.975, 0.995, 1e-6] {
            let a = StudentsT::new(0.0, 1.0, T_EXPANSION_FROM)
                .unwrap()
                .inverse_cdf(p);
            let b = t_quantile_expansion(p, T_EXPANSION_FROM);
            assert!((a - b).abs() < 1e-8, "p {p}: {a} vs {b}");
        }
        let z = 1.959_963_984_540_054_f64;
        let first_order = z + (z * z * z + z) / 4e5;
        assert!((t_quantile(0.975, 1e5) - first_order).abs() < 1e-9);
        assert!(t_quantile(0.975, 1e4) > t_quantile(0.975, 1.0001e4));
        assert!(t_quantile(1.0, 5.0).is_nan());
        assert!(t_quantile(0.5, 0.0).is_nan());
        assert!(t_quantile(f64::NAN, 5.0).is_nan());
    }

    #[test]
    fn ci95_half_width() {
        // n = 9 → 8 dof: half-width 2.306004 · sd / 3.
        let [lo, hi] = ci95(10.0, 3.0, 9);
        assert!((hi - 10.0 - 2.306004).abs() < 1e-6);
        assert!((10.0 - lo - 2.306004).abs() < 1e-6);
        assert!(ci95(1.0, 1.0, 1)[1].is_nan());
    }
}
