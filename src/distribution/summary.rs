//! What a distribution over the projection's states says per species: the marginal law, its
//! mean, variance, Fano factor and probability of zero; and the mean flux of each reaction.
//!
//! Marginals are sums of state probabilities as computed (not renormalised), so each entry is
//! within the truncation error of the true probability and never above it (Munsky & Khammash
//! 2006, J. Chem. Phys. 124:044104 \[M\]). Moments are those of the law conditioned on the
//! projection, m_k/M with M = Σ_k m_k: mean = Σ k·m_k/M, variance = Σ (k − mean)²·m_k/M (two
//! passes, so no cancellation), Fano factor = variance/mean (undefined, NaN, at mean 0).

use super::space::Reduction;
use crate::network::Propensity;

/// Counts of each reported species in every state of a projection, one column per species.
pub struct Columns {
    pub species: Vec<usize>,
    pub counts: Vec<Vec<u32>>,
    /// Where each species' marginal starts in a flattened array of all marginals, and that
    /// array's length (each marginal runs from 0 to the column's largest count).
    pub offsets: Vec<usize>,
    pub len: usize,
}

impl Columns {
    pub fn new(
        red: &Reduction,
        coords: &[u32],
        states: usize,
        species: &[usize],
        n_species: usize,
    ) -> Columns {
        let d = red.dim();
        let mut counts = vec![Vec::with_capacity(states); species.len()];
        let mut x = vec![0i64; n_species];
        for s in 0..states {
            red.expand(&coords[s * d..(s + 1) * d], &mut x);
            for (c, &i) in counts.iter_mut().zip(species) {
                c.push(x[i] as u32);
            }
        }
        let mut offsets = Vec::with_capacity(counts.len());
        let mut len = 0;
        for c in &counts {
            offsets.push(len);
            len += c.iter().copied().max().unwrap_or(0) as usize + 1;
        }
        Columns {
            species: species.to_vec(),
            counts,
            offsets,
            len,
        }
    }
}

/// One species' law at one time.
#[derive(Clone, Debug, PartialEq)]
pub struct Moments {
    pub mean: f64,
    pub variance: f64,
    pub fano: f64,
    pub p_zero: f64,
    /// p(0), p(1), … up to the largest count with positive probability.
    pub marginal: Vec<f64>,
}

/// The law given by an untrimmed marginal `m` (index = count).
pub fn from_marginal(m: &[f64]) -> Moments {
    let top = m.iter().rposition(|&q| q > 0.0).unwrap_or(0);
    let m = m[..=top].to_vec();
    let total: f64 = m.iter().sum();
    let mean = m
        .iter()
        .enumerate()
        .map(|(k, &q)| k as f64 * q)
        .sum::<f64>()
        / total;
    let variance = m
        .iter()
        .enumerate()
        .map(|(k, &q)| (k as f64 - mean).powi(2) * q)
        .sum::<f64>()
        / total;
    Moments {
        mean,
        variance,
        fano: if mean > 0.0 {
            variance / mean
        } else {
            f64::NAN
        },
        p_zero: m[0],
        marginal: m,
    }
}

/// The law of column `c` under the state probabilities `p` (states only).
pub fn moments(counts: &[u32], p: &[f64]) -> Moments {
    let top = counts.iter().copied().max().unwrap_or(0) as usize;
    let mut m = vec![0.0; top + 1];
    for (&c, &q) in counts.iter().zip(p) {
        m[c as usize] += q;
    }
    from_marginal(&m)
}

/// Mean propensity E[a_j(X)] of every reaction under `p`, in events per second.
pub fn fluxes(
    red: &Reduction,
    coords: &[u32],
    props: &[Propensity],
    p: &[f64],
    n_species: usize,
) -> Vec<f64> {
    let d = red.dim();
    let mut x = vec![0i64; n_species];
    let mut out = vec![0.0; props.len()];
    for (s, &q) in p.iter().enumerate() {
        if q == 0.0 {
            continue;
        }
        red.expand(&coords[s * d..(s + 1) * d], &mut x);
        for (o, a) in out.iter_mut().zip(props) {
            *o += q * a.eval(&x);
        }
    }
    let total: f64 = p.iter().sum();
    out.iter().map(|f| f / total).collect()
}

#[cfg(test)]
mod tests {
    use super::moments;

    // Binomial(4, 1/2): mean 2, variance 1, p(0) = 1/16 (handbook formulas).
    #[test]
    fn moments_of_a_binomial() {
        let p = [1.0, 4.0, 6.0, 4.0, 1.0].map(|v| v / 16.0);
        let m = moments(&[0, 1, 2, 3, 4], &p);
        assert!((m.mean - 2.0).abs() < 1e-15 && (m.variance - 1.0).abs() < 1e-15);
        assert_eq!(m.p_zero, 1.0 / 16.0);
        assert!((m.fano - 0.5).abs() < 1e-15);
    }
}
