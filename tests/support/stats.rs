//! The statistics the tests judge ensembles by: histograms of counts and their distance,
//! chi-square goodness-of-fit and two-sample tests, and the one-sample Kolmogorov–Smirnov
//! test. Test support only: the shipped library keeps the streaming moments
//! (`copyloop::stats`). Their own tests are in tests/statistics.rs.

use std::collections::BTreeMap;
use std::f64::consts::PI;

use statrs::distribution::{ChiSquared, ContinuousCDF};

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
// Histograms and the histogram distance
// ---------------------------------------------------------------------------------------------

/// Counts of integer-valued samples in equal-width bins.
///
/// Bin i holds the values origin + i·width ..= origin + (i+1)·width − 1. Values below the
/// first bin or above the last are counted in `below` / `above`, so no mass is lost; the
/// histogram distance treats them as two extra bins.
#[derive(Clone, Debug, PartialEq)]
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
#[derive(Clone, Copy, Debug, PartialEq)]
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
pub fn chi_square_sf(x: f64, dof: u64) -> f64 {
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
pub fn kolmogorov_cdf_small(lambda: f64) -> f64 {
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
pub fn kolmogorov_sf_large(lambda: f64) -> f64 {
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
