//! Streaming statistics for ensembles and the reconciler.
//!
//! - [`Welford`]: one-pass mean and variance with an exact pairwise merge, so replicate
//!   ensembles can be reduced in any grouping (threads, shards) with memory independent of the
//!   number of replicates.
//! - [`t_quantile`], [`ci95`]: Student-t intervals for ensemble means.
//! - [`Histogram`], [`histogram_distance`], [`expected_self_distance`]: whole-distribution
//!   comparison of integer-valued samples (molecule counts).
//! - [`chi_square_gof`], [`chi_square_two_sample`]: chi-square tests on counts.
//! - [`ks_statistic`]: one-sample Kolmogorov–Smirnov test for continuous samples (waiting times).

use std::collections::BTreeMap;
use std::f64::consts::PI;

use serde::{Deserialize, Serialize};
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal, StudentsT};

/// Why a statistic could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StatsError {
    /// No samples (or a histogram holding none).
    #[error("no samples")]
    Empty,
    /// Two inputs that must have the same length do not.
    #[error("length mismatch: {0} observed bins but {1} probabilities")]
    LengthMismatch(usize, usize),
    /// A probability is negative or not finite, or the probabilities do not sum to 1.
    #[error("invalid probabilities: {0}")]
    InvalidProbabilities(String),
    /// Histograms compared on different binnings.
    #[error("histograms have different binnings")]
    BinningMismatch,
    /// Bin width or bin count of zero.
    #[error("invalid binning: {0}")]
    InvalidBinning(String),
    /// After merging bins to reach the minimum expected count fewer than two remain.
    #[error("fewer than two bins remain after merging to expected count >= {MIN_EXPECTED}")]
    TooFewBins,
    /// More fitted parameters than the merged bins leave degrees of freedom for.
    #[error("no degrees of freedom left ({bins} bins, {fitted} fitted parameters)")]
    NoDegreesOfFreedom { bins: usize, fitted: u64 },
}

// ---------------------------------------------------------------------------------------------
// Mean and variance
// ---------------------------------------------------------------------------------------------

/// Running count, mean and sum of squared deviations of a stream of numbers.
///
/// Update (Welford 1962, Technometrics 4(3):419-420 [M]): with δ = x − x̄ₙ₋₁,
/// x̄ₙ = x̄ₙ₋₁ + δ/n and M2ₙ = M2ₙ₋₁ + δ·(x − x̄ₙ). Unlike Σx² − n·x̄², this does not
/// lose precision when the mean is large compared with the spread.
///
/// For n = 0 the mean is NaN; for n < 2 the sample variance, SD and standard error are NaN
/// (undefined, serialised by serde_json as `null`), never a misleading 0.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
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
    /// algorithm for computing sample variances", Stanford STAN-CS-79-773 [M]): with
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
/// Cₙ = Cₙ₋₁ + δx·(y − ȳₙ) (Welford 1962 [M]), and two accumulators merge with
/// C = C_a + C_b + δx·δy·n_a·n_b/n (Chan, Golub & LeVeque 1979 [M]). Sample covariance
/// C/(n − 1).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
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
/// [M]); the interval is f ± t_{0.975, n−1}·SE.
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
/// (Abramowitz & Stegun 1964, Handbook of Mathematical Functions, 26.7.5 [M]); ν = ∞ gives z.
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

/// Cornish–Fisher expansion of the t quantile (A&S 26.7.5 [M]); see [`t_quantile`].
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
/// x̄ ± t_{0.975, n−1} · sd/√n (Student 1908 [M]; any statistics handbook).
///
/// Returns `[NaN, NaN]` for n < 2 (no spread estimate); a zero SD gives a zero-width interval.
pub fn ci95(mean: f64, sd: f64, n: u64) -> [f64; 2] {
    if n < 2 {
        return [f64::NAN, f64::NAN];
    }
    let half = t_quantile(0.975, (n - 1) as f64) * sd / (n as f64).sqrt();
    [mean - half, mean + half]
}

// ---------------------------------------------------------------------------------------------
// Histograms and the histogram distance
// ---------------------------------------------------------------------------------------------

/// Counts of integer-valued samples in equal-width bins.
///
/// Bin i holds the values origin + i·width ..= origin + (i+1)·width − 1. Values below the
/// first bin or above the last are counted in `below` / `above`, so no mass is lost; the
/// histogram distance treats them as two extra bins.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Histogram {
    origin: i64,
    width: u64,
    counts: Vec<u64>,
    below: u64,
    above: u64,
}

impl Histogram {
    /// Empty histogram with `bins` bins of `width` integer values each, the first starting at
    /// `origin`.
    pub fn new(origin: i64, width: u64, bins: usize) -> Result<Self, StatsError> {
        if width == 0 {
            return Err(StatsError::InvalidBinning("bin width 0".into()));
        }
        if bins == 0 {
            return Err(StatsError::InvalidBinning("no bins".into()));
        }
        Ok(Self {
            origin,
            width,
            counts: vec![0; bins],
            below: 0,
            above: 0,
        })
    }

    /// Empty histogram with one bin per integer in lo ..= hi.
    pub fn unit(lo: i64, hi: i64) -> Result<Self, StatsError> {
        if hi < lo {
            return Err(StatsError::InvalidBinning(format!(
                "empty range {lo}..={hi}"
            )));
        }
        let bins = usize::try_from(i128::from(hi) - i128::from(lo) + 1)
            .map_err(|_| StatsError::InvalidBinning("range too wide".into()))?;
        Self::new(lo, 1, bins)
    }

    /// Counts one sample.
    pub fn push(&mut self, x: i64) {
        let offset = i128::from(x) - i128::from(self.origin);
        if offset < 0 {
            self.below += 1;
            return;
        }
        let bin = offset / i128::from(self.width);
        match usize::try_from(bin) {
            Ok(b) if b < self.counts.len() => self.counts[b] += 1,
            _ => self.above += 1,
        }
    }

    /// Counts every sample of a slice.
    pub fn push_all(&mut self, samples: &[i64]) {
        for &x in samples {
            self.push(x);
        }
    }

    /// Number of samples counted, including those outside the bins.
    pub fn total(&self) -> u64 {
        self.counts.iter().sum::<u64>() + self.below + self.above
    }

    /// Counts per bin.
    pub fn counts(&self) -> &[u64] {
        &self.counts
    }

    /// Samples below the first bin.
    pub fn below(&self) -> u64 {
        self.below
    }

    /// Samples above the last bin.
    pub fn above(&self) -> u64 {
        self.above
    }

    /// Smallest and largest integer value of bin i (inclusive).
    pub fn bin_range(&self, i: usize) -> (i64, i64) {
        let lo = i128::from(self.origin) + i as i128 * i128::from(self.width);
        let hi = lo + i128::from(self.width) - 1;
        let clamp = |v: i128| v.clamp(i128::from(i64::MIN), i128::from(i64::MAX)) as i64;
        (clamp(lo), clamp(hi))
    }

    /// Fraction of all samples in each bin, p(i) = count(i)/total (all zero when empty).
    pub fn probabilities(&self) -> Vec<f64> {
        let total = self.total();
        if total == 0 {
            return vec![0.0; self.counts.len()];
        }
        let t = total as f64;
        self.counts.iter().map(|&c| c as f64 / t).collect()
    }

    /// Whether two histograms have the same bins.
    pub fn same_binning(&self, other: &Histogram) -> bool {
        self.origin == other.origin
            && self.width == other.width
            && self.counts.len() == other.counts.len()
    }
}

/// Histogram distance D = Σᵢ |p₁(i) − p₂(i)| between two histograms on the same binning,
/// p(i) = count(i)/N (Cao & Petzold 2006, J. Comput. Phys. 212:6-24 [M]). The below- and
/// above-range counts enter as two extra bins. 0 ≤ D ≤ 2.
pub fn histogram_distance(h1: &Histogram, h2: &Histogram) -> Result<f64, StatsError> {
    if !h1.same_binning(h2) {
        return Err(StatsError::BinningMismatch);
    }
    let (n1, n2) = (h1.total(), h2.total());
    if n1 == 0 || n2 == 0 {
        return Err(StatsError::Empty);
    }
    let (t1, t2) = (n1 as f64, n2 as f64);
    let term = |a: u64, b: u64| (a as f64 / t1 - b as f64 / t2).abs();
    let inner: f64 = h1
        .counts
        .iter()
        .zip(&h2.counts)
        .map(|(&a, &b)| term(a, b))
        .sum();
    Ok(inner + term(h1.below, h2.below) + term(h1.above, h2.above))
}

/// Expected histogram distance between two independent samples of N each from the same law
/// with bin probabilities pᵢ, for large N:
/// E[D] ≈ √(4/(πN)) · Σᵢ √(pᵢ(1 − pᵢ)) ≤ √(4(B − 1)/(πN)).
///
/// Derivation (docs/references.md §11 [C]): p̂₁(i) − p̂₂(i) is approximately normal with variance
/// 2pᵢ(1 − pᵢ)/N, and E|Z| = σ√(2/π). This is the scale against which an observed distance is
/// judged (Cao & Petzold 2006 [M]). Returns NaN for N = 0.
pub fn expected_self_distance(probs: &[f64], n: u64) -> f64 {
    expected_distance_between(probs, n, n)
}

/// [`expected_self_distance`] for samples of different sizes N₁, N₂:
/// E[D] ≈ √(2/π) · √(1/N₁ + 1/N₂) · Σᵢ √(pᵢ(1 − pᵢ)) (same derivation, variance
/// pᵢ(1 − pᵢ)(1/N₁ + 1/N₂)). Returns NaN if either size is 0.
pub fn expected_distance_between(probs: &[f64], n1: u64, n2: u64) -> f64 {
    if n1 == 0 || n2 == 0 {
        return f64::NAN;
    }
    let spread: f64 = probs.iter().map(|&p| (p * (1.0 - p)).sqrt()).sum();
    (2.0 / PI).sqrt() * (1.0 / n1 as f64 + 1.0 / n2 as f64).sqrt() * spread
}

/// Builds two histograms of integer samples on one common binning: at most `bins` equal-width
/// bins spanning the pooled range min ..= max (unit bins when the range has at most `bins`
/// values; otherwise width ⌈range/bins⌉, the last bin possibly reaching past max).
pub fn common_histograms(
    a: &[i64],
    b: &[i64],
    bins: usize,
) -> Result<(Histogram, Histogram), StatsError> {
    if bins == 0 {
        return Err(StatsError::InvalidBinning("no bins".into()));
    }
    let pooled = a.iter().chain(b);
    let (lo, hi) = match (pooled.clone().min(), pooled.max()) {
        (Some(&lo), Some(&hi)) if !a.is_empty() && !b.is_empty() => (lo, hi),
        _ => return Err(StatsError::Empty),
    };
    let span = (i128::from(hi) - i128::from(lo) + 1) as u128;
    let width = span.div_ceil(bins as u128);
    let n_bins = span.div_ceil(width) as usize;
    let width =
        u64::try_from(width).map_err(|_| StatsError::InvalidBinning("range too wide".into()))?;
    let mut ha = Histogram::new(lo, width, n_bins)?;
    let mut hb = ha.clone();
    ha.push_all(a);
    hb.push_all(b);
    Ok((ha, hb))
}

/// Histogram distance between two raw integer samples on the common binning of
/// [`common_histograms`] (Cao & Petzold 2006 [M]).
pub fn sample_distance(a: &[i64], b: &[i64], bins: usize) -> Result<f64, StatsError> {
    let (ha, hb) = common_histograms(a, b, bins)?;
    histogram_distance(&ha, &hb)
}

// ---------------------------------------------------------------------------------------------
// Chi-square tests
// ---------------------------------------------------------------------------------------------

/// Minimum expected count per bin after merging (common practice; Cochran 1954,
/// Biometrics 10:417-451 [M]).
pub const MIN_EXPECTED: f64 = 5.0;

/// Result of a chi-square test.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ChiSquare {
    /// X² = Σ (O − E)²/E over the merged bins.
    pub statistic: f64,
    /// Degrees of freedom of the reference χ² law.
    pub dof: u64,
    /// P(χ²_dof ≥ X²).
    pub p_value: f64,
    /// Number of bins after merging.
    pub bins: usize,
}

/// Upper tail P(χ²_dof ≥ x) from statrs' `ChiSquared` (regularised upper incomplete gamma).
fn chi_square_sf(x: f64, dof: u64) -> f64 {
    match ChiSquared::new(dof as f64) {
        Ok(d) => d.sf(x),
        Err(_) => f64::NAN,
    }
}

/// Groups consecutive indices 0..weights.len() so each group's weight is at least `min`;
/// a short remainder at the end joins the last group. Returns the group start indices.
fn merge_groups(weights: impl Iterator<Item = f64>, min: f64) -> Vec<usize> {
    let mut starts = Vec::new();
    let mut acc = 0.0;
    let mut open = false;
    for (i, w) in weights.enumerate() {
        if !open {
            starts.push(i);
            open = true;
            acc = 0.0;
        }
        acc += w;
        if acc >= min {
            open = false;
        }
    }
    if open && starts.len() > 1 {
        starts.pop();
    }
    starts
}

/// Sums `values` over the groups starting at `starts`.
fn group_sums(values: &[f64], starts: &[usize]) -> Vec<f64> {
    let mut sums = Vec::with_capacity(starts.len());
    for (g, &s) in starts.iter().enumerate() {
        let e = starts.get(g + 1).copied().unwrap_or(values.len());
        sums.push(values[s..e].iter().sum());
    }
    sums
}

/// Pearson chi-square goodness of fit of observed bin counts to bin probabilities:
/// X² = Σₖ (Oₖ − n·pₖ)²/(n·pₖ), n = Σ Oₖ, referred to χ² with K − 1 degrees of freedom
/// (Pearson 1900 [M]; any statistics handbook).
///
/// Adjacent bins are merged, left to right, until each expected count n·pₖ ≥ 5
/// ([`MIN_EXPECTED`], common practice); a short remainder joins the last bin. The
/// probabilities must be finite, non-negative and sum to 1 within 1e-6 — put any tail mass
/// into an explicit last bin.
pub fn chi_square_gof(observed: &[u64], expected_probs: &[f64]) -> Result<ChiSquare, StatsError> {
    chi_square_gof_fitted(observed, expected_probs, 0)
}

/// [`chi_square_gof`] when `fitted` parameters of the law were estimated from the same data:
/// K − 1 − fitted degrees of freedom (Fisher 1924 [M]).
pub fn chi_square_gof_fitted(
    observed: &[u64],
    expected_probs: &[f64],
    fitted: u64,
) -> Result<ChiSquare, StatsError> {
    if observed.len() != expected_probs.len() {
        return Err(StatsError::LengthMismatch(
            observed.len(),
            expected_probs.len(),
        ));
    }
    if let Some(p) = expected_probs
        .iter()
        .find(|p| !(p.is_finite() && **p >= 0.0))
    {
        return Err(StatsError::InvalidProbabilities(format!("p = {p}")));
    }
    let sum: f64 = expected_probs.iter().sum();
    if (sum - 1.0).abs() > 1e-6 {
        return Err(StatsError::InvalidProbabilities(format!("sum {sum} ≠ 1")));
    }
    let n: u64 = observed.iter().sum();
    if n == 0 {
        return Err(StatsError::Empty);
    }
    let nf = n as f64;
    let starts = merge_groups(expected_probs.iter().map(|p| p * nf), MIN_EXPECTED);
    let observed: Vec<f64> = observed.iter().map(|&o| o as f64).collect();
    let obs = group_sums(&observed, &starts);
    let exp: Vec<f64> = group_sums(expected_probs, &starts)
        .into_iter()
        .map(|p| p * nf)
        .collect();
    let bins = starts.len();
    if bins < 2 || exp.iter().any(|&e| e < MIN_EXPECTED) {
        return Err(StatsError::TooFewBins);
    }
    let dof = (bins as u64 - 1)
        .checked_sub(fitted)
        .filter(|&d| d > 0)
        .ok_or(StatsError::NoDegreesOfFreedom { bins, fitted })?;
    let statistic: f64 = obs
        .iter()
        .zip(&exp)
        .map(|(o, e)| (o - e) * (o - e) / e)
        .sum();
    Ok(ChiSquare {
        statistic,
        dof,
        p_value: chi_square_sf(statistic, dof),
        bins,
    })
}

/// Two-sample chi-square test of homogeneity: do integer samples a and b come from the same
/// law? On the 2 × K table of counts per value, X² = Σᵣ Σₖ (Oᵣₖ − Eᵣₖ)²/Eᵣₖ with
/// Eᵣₖ = nᵣ·cₖ/(n_a + n_b) (cₖ the pooled count of value k), referred to χ² with K − 1 degrees
/// of freedom (Pearson 1900 / Fisher 1922 [M]; any statistics handbook).
///
/// Values are merged into adjacent groups, in increasing order, until every expected cell
/// count is at least 5 ([`MIN_EXPECTED`], common practice).
pub fn chi_square_two_sample(a: &[i64], b: &[i64]) -> Result<ChiSquare, StatsError> {
    if a.is_empty() || b.is_empty() {
        return Err(StatsError::Empty);
    }
    let mut table: BTreeMap<i64, (u64, u64)> = BTreeMap::new();
    for &x in a {
        table.entry(x).or_default().0 += 1;
    }
    for &x in b {
        table.entry(x).or_default().1 += 1;
    }
    let ca: Vec<f64> = table.values().map(|v| v.0 as f64).collect();
    let cb: Vec<f64> = table.values().map(|v| v.1 as f64).collect();
    let (na, nb) = (a.len() as f64, b.len() as f64);
    let n = na + nb;
    let smaller = na.min(nb);
    let starts = merge_groups(
        ca.iter().zip(&cb).map(|(x, y)| (x + y) * smaller / n),
        MIN_EXPECTED,
    );
    let ga = group_sums(&ca, &starts);
    let gb = group_sums(&cb, &starts);
    let bins = starts.len();
    let mut statistic = 0.0;
    for (oa, ob) in ga.iter().zip(&gb) {
        let pooled = oa + ob;
        let (ea, eb) = (na * pooled / n, nb * pooled / n);
        if ea.min(eb) < MIN_EXPECTED {
            return Err(StatsError::TooFewBins);
        }
        statistic += (oa - ea) * (oa - ea) / ea + (ob - eb) * (ob - eb) / eb;
    }
    if bins < 2 {
        return Err(StatsError::TooFewBins);
    }
    let dof = bins as u64 - 1;
    Ok(ChiSquare {
        statistic,
        dof,
        p_value: chi_square_sf(statistic, dof),
        bins,
    })
}

// ---------------------------------------------------------------------------------------------
// Kolmogorov–Smirnov
// ---------------------------------------------------------------------------------------------

/// One-sample Kolmogorov–Smirnov test of continuous samples against a CDF F.
///
/// D = maxᵢ max(i/n − F(x₍ᵢ₎), F(x₍ᵢ₎) − (i − 1)/n) over the sorted sample (Kolmogorov 1933
/// [M]). p-value from the asymptotic Kolmogorov distribution with Stephens' small-sample
/// correction, p = Q_KS((√n + 0.12 + 0.11/√n)·D) (Stephens 1970, J. R. Stat. Soc. B
/// 32:115-122; Press et al., Numerical Recipes 3rd ed. §14.3.3 [M]); see [`kolmogorov_sf`].
///
/// Returns `(D, p)`; `(NaN, NaN)` for an empty sample or one containing NaN.
pub fn ks_statistic<F: Fn(f64) -> f64>(samples: &[f64], cdf: F) -> (f64, f64) {
    if samples.is_empty() || samples.iter().any(|x| x.is_nan()) {
        return (f64::NAN, f64::NAN);
    }
    let mut sorted = samples.to_vec();
    sorted.sort_by(f64::total_cmp);
    let n = sorted.len() as f64;
    let mut d: f64 = 0.0;
    for (i, &x) in sorted.iter().enumerate() {
        let f = cdf(x);
        let upper = (i + 1) as f64 / n - f;
        let lower = f - i as f64 / n;
        d = d.max(upper).max(lower);
    }
    let sqrt_n = n.sqrt();
    let p = kolmogorov_sf((sqrt_n + 0.12 + 0.11 / sqrt_n) * d);
    (d, p)
}

/// Upper tail of the Kolmogorov distribution, Q_KS(λ) = P(K > λ)
/// = 2 Σ_{k≥1} (−1)^{k−1} e^{−2k²λ²} (Kolmogorov 1933 [M]).
///
/// For λ < 1.18, where that alternating series converges slowly, the equivalent form
/// P(K ≤ λ) = (√(2π)/λ) Σ_{k≥1} e^{−(2k−1)²π²/(8λ²)} is used (Press et al., Numerical Recipes
/// 3rd ed. §6.14.12 [M]). Returns 1 for λ ≤ 0 and NaN for NaN.
pub fn kolmogorov_sf(lambda: f64) -> f64 {
    if lambda.is_nan() {
        return f64::NAN;
    }
    if lambda <= 0.0 {
        return 1.0;
    }
    if lambda < 1.18 {
        1.0 - kolmogorov_cdf_small(lambda)
    } else {
        kolmogorov_sf_large(lambda)
    }
}

/// P(K ≤ λ) = (√(2π)/λ) Σ_{k≥1} e^{−(2k−1)²π²/(8λ²)}.
fn kolmogorov_cdf_small(lambda: f64) -> f64 {
    let c = PI * PI / (8.0 * lambda * lambda);
    let mut sum = 0.0;
    for k in 1..=100u32 {
        let m = f64::from(2 * k - 1);
        let term = (-m * m * c).exp();
        sum += term;
        if term < 1e-17 * sum {
            break;
        }
    }
    ((2.0 * PI).sqrt() / lambda * sum).min(1.0)
}

/// Q_KS(λ) = 2 Σ_{k≥1} (−1)^{k−1} e^{−2k²λ²}.
fn kolmogorov_sf_large(lambda: f64) -> f64 {
    let l2 = lambda * lambda;
    let mut sum = 0.0;
    let mut sign = 1.0;
    for k in 1..=100u32 {
        let kf = f64::from(k);
        let term = (-2.0 * kf * kf * l2).exp();
        sum += sign * term;
        if term < 1e-17 * sum.abs() {
            break;
        }
        sign = -sign;
    }
    (2.0 * sum).clamp(0.0, 1.0)
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
    use rand_distr::weighted::WeightedIndex;
    use rand_distr::Distribution;
    use rand_xoshiro::Xoshiro256PlusPlus;
    use statrs::distribution::{Discrete, Exp, Poisson};

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

    #[test]
    fn histogram_binning_and_distance() {
        let mut h = Histogram::new(0, 2, 3).unwrap();
        h.push_all(&[-1, 0, 1, 2, 5, 6, 100]);
        assert_eq!(h.counts(), &[2, 1, 1]);
        assert_eq!((h.below(), h.above(), h.total()), (1, 2, 7));
        assert_eq!(h.bin_range(2), (4, 5));
        let mut g = Histogram::new(0, 2, 3).unwrap();
        g.push_all(&[0, 0, 2, 3]);
        // p_h = (2,1,1)/7, tails 1/7, 2/7; p_g = (2,2,0)/4, tails 0.
        let expect = (2.0 / 7.0 - 0.5f64).abs()
            + (1.0 / 7.0 - 0.5f64).abs()
            + 1.0 / 7.0
            + 1.0 / 7.0
            + 2.0 / 7.0;
        assert!((histogram_distance(&h, &g).unwrap() - expect).abs() < 1e-15);
        assert_eq!(histogram_distance(&g, &g).unwrap(), 0.0);
        let other = Histogram::unit(0, 5).unwrap();
        assert_eq!(
            histogram_distance(&h, &other),
            Err(StatsError::BinningMismatch)
        );
        assert!(Histogram::new(0, 0, 3).is_err());
        assert!(Histogram::unit(3, 2).is_err());
    }

    #[test]
    fn common_histograms_span_pooled_range() {
        let (a, b) = common_histograms(&[0, 1, 2], &[3, 4], 10).unwrap();
        assert_eq!(a.counts(), &[1, 1, 1, 0, 0]);
        assert_eq!(b.counts(), &[0, 0, 0, 1, 1]);
        // Disjoint supports: D = 2 (its maximum).
        assert_eq!(sample_distance(&[0, 1, 2], &[3, 4], 10).unwrap(), 2.0);
        // Range 0..=9 (10 values) into 3 bins → width 4: bins 0-3, 4-7, 8-11.
        let (a, _) = common_histograms(&[0, 9], &[4, 5], 3).unwrap();
        assert_eq!(a.counts(), &[1, 0, 1]);
        assert_eq!(a.bin_range(2), (8, 11));
        assert_eq!(a.above() + a.below(), 0);
        assert!(common_histograms(&[], &[1], 3).is_err());
        assert!(common_histograms(&[i64::MIN], &[i64::MAX], 4).is_ok());
    }

    #[test]
    fn expected_self_distance_formula() {
        // docs/references.md §11 [C]: B = 5, p = (.1,.2,.3,.25,.15), N = 1000 → 0.06952;
        // N = 10⁴ → 0.02198; N = 100 → 0.2199.
        let p = [0.1, 0.2, 0.3, 0.25, 0.15];
        assert!((expected_self_distance(&p, 1000) - 0.06952).abs() < 5e-6);
        assert!((expected_self_distance(&p, 10_000) - 0.02198).abs() < 1e-5);
        assert!((expected_self_distance(&p, 100) - 0.2199).abs() < 1e-4);
        let bound = (4.0 * 4.0 / (PI * 1000.0)).sqrt();
        assert!(expected_self_distance(&p, 1000) <= bound);
        assert!(expected_self_distance(&p, 0).is_nan());
    }

    /// Mean histogram distance over `pairs` pairs of independent samples of n from `p`.
    fn monte_carlo_self_distance(p: &[f64], n: usize, pairs: usize, seed: u64) -> Welford {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let law = WeightedIndex::new(p).unwrap();
        let top = p.len() as i64 - 1;
        let mut acc = Welford::new();
        for _ in 0..pairs {
            let mut h1 = Histogram::unit(0, top).unwrap();
            let mut h2 = h1.clone();
            for _ in 0..n {
                h1.push(law.sample(&mut rng) as i64);
                h2.push(law.sample(&mut rng) as i64);
            }
            acc.push(histogram_distance(&h1, &h2).unwrap());
        }
        acc
    }

    #[test]
    fn self_distance_monte_carlo() {
        // docs/references.md §11 test (i) [C]: the mean distance of two seeded exact samples agrees
        // with the prediction within 5 % (MC there: 0.06972 at N = 1000, 0.02202 at N = 10⁴).
        // With 4000 pairs the SE of the MC mean is ≈ 0.6 % of it, so 5 % exceeds 4 SE plus
        // the small-N bias of the asymptotic formula (≈ 0.3 % at N = 1000).
        let p = [0.1, 0.2, 0.3, 0.25, 0.15];
        for (n, seed) in [(1000usize, 1u64), (10_000, 2)] {
            let mc = monte_carlo_self_distance(&p, n, 4000, seed);
            let predicted = expected_self_distance(&p, n as u64);
            assert!(4.0 * mc.stderr() < 0.05 * predicted, "SE {}", mc.stderr());
            assert!(
                rel(mc.mean(), predicted) < 0.05,
                "N = {n}: MC {} vs predicted {predicted}",
                mc.mean()
            );
        }
    }

    #[test]
    fn chi_square_hand_computed() {
        // O = (10, 20, 30), equal p, n = 60, E = 20: X² = (100 + 0 + 100)/20 = 10, 2 dof,
        // p = e^{−10/2} (closed form of the χ²₂ tail).
        let r = chi_square_gof(&[10, 20, 30], &[1.0 / 3.0; 3]).unwrap();
        assert!((r.statistic - 10.0).abs() < 1e-12);
        assert_eq!(r.dof, 2);
        assert!(rel(r.p_value, (-5.0f64).exp()) < 1e-9);
        // O = (10, 20, 30, 40), E = 25: X² = (225 + 25 + 25 + 225)/25 = 20, 3 dof.
        let r = chi_square_gof(&[10, 20, 30, 40], &[0.25; 4]).unwrap();
        assert!((r.statistic - 20.0).abs() < 1e-12);
        assert_eq!(r.dof, 3);
        // χ²₃ 95 % point 7.8147 (standard χ² tables; tests/reference/tables.py [C]): p = 0.05.
        assert!((chi_square_sf(7.8147, 3) - 0.05).abs() < 1e-5);
    }

    #[test]
    fn chi_square_merges_small_bins() {
        // n = 100, expected (50, 30, 12, 5, 2, 1): bins 4..6 merge to 8 → 4 bins, 3 dof.
        // Observed (48, 33, 10, 4, 3, 2) → (48, 33, 10, 9):
        // X² = 4/50 + 9/30 + 4/12 + 1/8 (hand computation).
        let p = [0.5, 0.3, 0.12, 0.05, 0.02, 0.01];
        let r = chi_square_gof(&[48, 33, 10, 4, 3, 2], &p).unwrap();
        assert_eq!((r.bins, r.dof), (4, 3));
        assert!((r.statistic - (0.08 + 0.3 + 1.0 / 3.0 + 0.125)).abs() < 1e-12);
        // Leading small bins merge forward: expected (1, 2, 3, 44, 50) → (6, 44, 50).
        let r = chi_square_gof(&[1, 1, 1, 47, 50], &[0.01, 0.02, 0.03, 0.44, 0.5]).unwrap();
        assert_eq!(r.bins, 3);
        let r = chi_square_gof_fitted(&[48, 33, 10, 4, 3, 2], &p, 1).unwrap();
        assert_eq!(r.dof, 2);
    }

    #[test]
    fn chi_square_rejects_bad_input() {
        assert!(matches!(
            chi_square_gof(&[1, 2], &[0.5]),
            Err(StatsError::LengthMismatch(2, 1))
        ));
        assert!(chi_square_gof(&[5, 5], &[0.6, 0.6]).is_err());
        assert!(chi_square_gof(&[5, 5], &[f64::NAN, 1.0]).is_err());
        assert!(chi_square_gof(&[0, 0], &[0.5, 0.5]).is_err());
        assert_eq!(
            chi_square_gof(&[3, 3], &[0.5, 0.5]),
            Err(StatsError::TooFewBins)
        );
        assert!(chi_square_gof_fitted(&[50, 50], &[0.5, 0.5], 1).is_err());
    }

    #[test]
    fn chi_square_gof_poisson_samples() {
        // Seeded Poisson(4) samples (rand_distr) against the Poisson pmf (statrs), last bin
        // holding the tail: a correct pair gives a p-value that is not extreme; a law with a
        // shifted mean is rejected.
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
        let sampler = rand_distr::Poisson::new(4.0).unwrap();
        let mut counts = [0u64; 16];
        for _ in 0..20_000 {
            let k: f64 = sampler.sample(&mut rng);
            counts[(k as usize).min(15)] += 1;
        }
        let probs = |lambda: f64| {
            let law = Poisson::new(lambda).unwrap();
            let mut p: Vec<f64> = (0..15).map(|k| law.pmf(k)).collect();
            p.push(1.0 - p.iter().sum::<f64>());
            p
        };
        let good = chi_square_gof(&counts, &probs(4.0)).unwrap();
        assert!(good.p_value > 1e-4, "{good:?}");
        let bad = chi_square_gof(&counts, &probs(4.2)).unwrap();
        assert!(bad.p_value < 1e-6, "{bad:?}");
    }

    #[test]
    fn chi_square_two_sample_hand_and_seeded() {
        // a: 10 zeros, 20 ones; b: 20 zeros, 10 ones. Every expected cell is 15:
        // X² = 4 · 25/15 = 20/3 with 1 dof (hand computation).
        let a: Vec<i64> = [vec![0; 10], vec![1; 20]].concat();
        let b: Vec<i64> = [vec![0; 20], vec![1; 10]].concat();
        let r = chi_square_two_sample(&a, &b).unwrap();
        assert!((r.statistic - 20.0 / 3.0).abs() < 1e-12);
        assert_eq!(r.dof, 1);
        // Seeded Poisson samples: same law accepted, means 10 vs 11 rejected.
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(9);
        let mut draw = |lambda: f64, n: usize| -> Vec<i64> {
            let law = rand_distr::Poisson::new(lambda).unwrap();
            (0..n)
                .map(|_| {
                    let k: f64 = law.sample(&mut rng);
                    k as i64
                })
                .collect()
        };
        let (x, y, z) = (draw(10.0, 5000), draw(10.0, 5000), draw(11.0, 5000));
        let same = chi_square_two_sample(&x, &y).unwrap();
        assert!(same.p_value > 1e-4, "{same:?}");
        let diff = chi_square_two_sample(&x, &z).unwrap();
        assert!(diff.p_value < 1e-6, "{diff:?}");
        assert!(chi_square_two_sample(&[], &[1]).is_err());
        assert_eq!(
            chi_square_two_sample(&[1; 10], &[1; 10]),
            Err(StatsError::TooFewBins)
        );
    }

    #[test]
    fn kolmogorov_distribution_table_values() {
        // Asymptotic critical values of the Kolmogorov distribution (Smirnov 1948 table;
        // standard KS tables; scipy's kstwobign in tests/reference/tables.py [C]): P(K > 1.2238) = 0.10, P(K > 1.3581) = 0.05,
        // P(K > 1.6276) = 0.01.
        assert!((kolmogorov_sf(1.2238) - 0.10).abs() < 1e-4);
        assert!((kolmogorov_sf(1.3581) - 0.05).abs() < 1e-4);
        assert!((kolmogorov_sf(1.6276) - 0.01).abs() < 1e-4);
        // The two series agree where they are switched.
        let a = 1.0 - kolmogorov_cdf_small(1.18);
        let b = kolmogorov_sf_large(1.18);
        assert!((a - b).abs() < 1e-14);
        assert_eq!(kolmogorov_sf(0.0), 1.0);
        assert!(kolmogorov_sf(0.1) > 0.999_999);
        assert!(kolmogorov_sf(5.0) < 1e-20);
    }

    #[test]
    fn ks_statistic_hand_computed() {
        // Samples 0.1, 0.5, 0.9 against U(0, 1): D⁺ = max(1/3 − 0.1, 2/3 − 0.5, 1 − 0.9),
        // D⁻ = max(0.1, 0.5 − 1/3, 0.9 − 2/3); D = 0.7/3 (hand computation).
        let (d, p) = ks_statistic(&[0.9, 0.1, 0.5], |x| x.clamp(0.0, 1.0));
        assert!((d - 0.7 / 3.0).abs() < 1e-15);
        assert!(p > 0.5);
        assert!(ks_statistic(&[], |x| x).0.is_nan());
        assert!(ks_statistic(&[f64::NAN], |x| x).1.is_nan());
    }

    #[test]
    fn ks_against_exponential_law() {
        // Seeded Exp(2) samples (rand_distr) against the Exp(2) CDF (statrs): accepted;
        // against Exp(2.4): rejected (D ≈ 0.067 at n = 5000, √n·D ≈ 4.7).
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
        let law = rand_distr::Exp::new(2.0).unwrap();
        let xs: Vec<f64> = (0..5000).map(|_| law.sample(&mut rng)).collect();
        let exact = Exp::new(2.0).unwrap();
        let (_, p) = ks_statistic(&xs, |x| exact.cdf(x));
        assert!(p > 1e-4, "p = {p}");
        let wrong = Exp::new(2.4).unwrap();
        let (d, p) = ks_statistic(&xs, |x| wrong.cdf(x));
        assert!(d > 0.04 && p < 1e-6, "D = {d}, p = {p}");
    }

    #[test]
    fn ks_p_values_are_uniform_under_the_null() {
        // Under the null the p-value is U(0, 1); 400 seeded tests of n = 100 uniform samples,
        // their p-values tested against U(0, 1) with the KS test itself.
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(4);
        let ps: Vec<f64> = (0..400)
            .map(|_| {
                let xs: Vec<f64> = (0..100).map(|_| rng.random::<f64>()).collect();
                ks_statistic(&xs, |x| x).1
            })
            .collect();
        let (_, p) = ks_statistic(&ps, |x| x.clamp(0.0, 1.0));
        assert!(p > 1e-4, "p = {p}");
    }
}
