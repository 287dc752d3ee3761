//! Standard exponential numbers by the ziggurat method, with the fast path and the rare slow
//! path apart, so that an event loop can run the fast path inline and leave the loop for the
//! slow one (a call inside the loop would make every floating-point value live across it
//! wait in memory).
//!
//! The method (Marsaglia & Tsang 2000, "The ziggurat method for generating random
//! variables", J. Stat. Softw. 5(8) \[M\]): the density f(x) = e^(−x) is covered by 256 layers of
//! equal area v: a base strip [0, x₀) × [0, f(r)) holding the tail beyond r, and rectangles
//! [0, xᵢ) × [f(xᵢ), f(xᵢ₊₁)) for i = 1 … 255, with x₁ = r, xᵢ₊₁ = −ln(f(xᵢ) + v/xᵢ) and x₂₅₆ = 0.
//! A draw picks a layer i and a point x = u·xᵢ with u uniform on [0, 1):
//!
//! - x < xᵢ₊₁ lies under the density: x is the sample (the fast path, about 98.9 % of draws);
//! - in the base strip (i = 0), x ≥ r: the sample is r + Exp(1) (the exponential tail is
//!   memoryless);
//! - else x is in the wedge: a uniform height y in [f(xᵢ), f(xᵢ₊₁)) accepts x when y < f(x),
//!   and otherwise the whole draw starts again.
//!
//! r = 7.69711747013104972 and v = 0.0039496598225815571993 are the published constants for
//! 256 layers (Marsaglia & Tsang 2000, Table 1 \[M\]; r and v re-solved to 17 digits in
//! tests/reference/tables.py \[C\]); the tables are computed from them once.
//! One draw takes one 64-bit number: its low 8 bits choose the layer, its top 52 bits give u.

use rand::Rng;
use std::sync::LazyLock;

/// Start of the tail (x₁).
pub const R: f64 = 7.697_117_470_131_05;
/// Area of each layer.
pub const V: f64 = 0.003_949_659_822_581_557;

/// The layer tables: `x\[i\]` and `f\[i\]` = e^(−x\[i\]) for i = 0 … 256.
#[derive(Debug)]
pub struct ExpZiggurat {
    x: [f64; 257],
    f: [f64; 257],
}

/// A draw that left the fast path: its layer and point, for [`ExpZiggurat::finish`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Miss {
    layer: usize,
    x: f64,
}

static TABLES: LazyLock<ExpZiggurat> = LazyLock::new(ExpZiggurat::build);

/// The tables, computed on first use.
pub fn exp_ziggurat() -> &'static ExpZiggurat {
    &TABLES
}

impl ExpZiggurat {
    fn build() -> ExpZiggurat {
        let mut x = [0.0; 257];
        x[0] = V / (-R).exp();
        x[1] = R;
        for i in 1..255 {
            x[i + 1] = -((-x[i]).exp() + V / x[i]).ln();
        }
        x[256] = 0.0;
        ExpZiggurat {
            x,
            f: x.map(|v| (-v).exp()),
        }
    }

    /// The fast path: a sample, or the draw to finish with [`ExpZiggurat::finish`].
    #[inline(always)]
    pub fn fast<R: Rng + ?Sized>(&self, rng: &mut R) -> Result<f64, Miss> {
        let bits = rng.next_u64();
        let layer = (bits & 0xff) as usize;
        let u = (bits >> 12) as f64 * (1.0 / (1u64 << 52) as f64);
        // layer ≤ 255, so both indices are in the tables of 257 entries.
        let x = u * self.x[layer];
        if x < self.x[layer + 1] {
            Ok(x)
        } else {
            Err(Miss { layer, x })
        }
    }

    /// The slow path of a draw that missed: the tail, the wedge test, or a new draw.
    #[cold]
    #[inline(never)]
    pub fn finish<R: Rng + ?Sized>(&self, miss: Miss, rng: &mut R) -> f64 {
        let mut miss = miss;
        loop {
            let i = miss.layer;
            if i == 0 {
                return R + self.sample(rng);
            }
            let y = self.f[i] + (self.f[i + 1] - self.f[i]) * super::rng::uniform(rng);
            if y < (-miss.x).exp() {
                return miss.x;
            }
            match self.fast(rng) {
                Ok(x) => return x,
                Err(m) => miss = m,
            }
        }
    }

    /// A standard exponential number.
    #[inline(always)]
    pub fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        match self.fast(rng) {
            Ok(x) => x,
            Err(m) => self.finish(m, rng),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::rng::replicate_rng;
    use statrs::distribution::{ContinuousCDF, Exp};

    #[test]
    fn the_layers_close_at_zero_with_equal_areas() {
        // The recursion from the published r and v must end at the top of the density: the
        // last rectangle, x₂₅₅·(1 − f(x₂₅₅)), has area v (Marsaglia & Tsang 2000 [M]).
        let z = exp_ziggurat();
        assert!(((z.x[255] * (1.0 - z.f[255])) - V).abs() < 1e-12 * V);
        // The base strip holds r·f(r) plus the tail e^(−r): v = f(r)(r + 1).
        assert!((V - (-R).exp() * (R + 1.0)).abs() < 1e-12 * V);
        assert!(z.x.windows(2).all(|w| w[0] > w[1]));
    }

    #[test]
    fn samples_follow_the_standard_exponential() {
        // Against the exact law Exp(1): Kolmogorov–Smirnov distance of 200,000 samples below
        // the 1e-4 critical value 1.95/√n [M] (statrs's CDF), mean and variance 1 within 5 SE
        // (the SE of the variance of Exp(1) is √(8/n): fourth central moment 9, tests/reference/tables.py [C]), and the
        // share beyond r, reached only through the tail path, e^(−r) within 5 binomial SE.
        let z = exp_ziggurat();
        let mut rng = replicate_rng(11, 0);
        let n = 200_000;
        let mut s: Vec<f64> = (0..n).map(|_| z.sample(&mut rng)).collect();
        let mean = s.iter().sum::<f64>() / n as f64;
        let var = s.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        assert!((mean - 1.0).abs() < 5.0 / (n as f64).sqrt(), "mean {mean}");
        assert!(
            (var - 1.0).abs() < 5.0 * (8.0 / n as f64).sqrt(),
            "variance {var}"
        );
        s.sort_by(f64::total_cmp);
        let law = Exp::new(1.0).unwrap();
        let d = s
            .iter()
            .enumerate()
            .map(|(k, &x)| {
                let c = law.cdf(x);
                (c - k as f64 / n as f64).max((k + 1) as f64 / n as f64 - c)
            })
            .fold(0.0, f64::max);
        assert!(d < 1.95 / (n as f64).sqrt(), "KS distance {d}");
        let m = 2_000_000u64;
        let beyond = (0..m).filter(|_| z.sample(&mut rng) > R).count() as f64;
        let p = (-R).exp();
        let se = (m as f64 * p * (1.0 - p)).sqrt();
        assert!(
            (beyond - m as f64 * p).abs() < 5.0 * se,
            "{beyond} beyond r"
        );
    }
}
