//! Mass-action combinatorics, in one place for the compiler, the propensities and the kernel.
//!
//! A step with reactant coefficients νᵢ fires in Π C(xᵢ, νᵢ) distinct ways, so its propensity
//! is a = c·Π C(xᵢ, νᵢ) = c·Π (xᵢ)_νᵢ / νᵢ!, with the falling factorial
//! (x)_ν = x(x−1)…(x−ν+1) (Gillespie 1977 \[M\]), and the stochastic constant is
//! c = k·Π νᵢ! / Ω^(m−1) (see [`super::units::stochastic_constant`]).

/// ν! as f64 (exact for every coefficient the compiler accepts, ν ≤ 3).
pub fn factorial(nu: u32) -> f64 {
    (1..=nu).map(f64::from).product()
}

/// The falling factorial (x)_ν = x(x−1)…(x−ν+1) as f64: 1 for ν = 0, and 0 whenever
/// 0 ≤ x < ν (fewer molecules than the step consumes).
pub fn falling(x: i64, nu: u32) -> f64 {
    (0..i64::from(nu)).map(|k| (x - k) as f64).product()
}

/// Π νᵢ! over the reactant coefficients.
pub fn factorial_product(coefficients: &[u32]) -> f64 {
    coefficients.iter().map(|&n| factorial(n)).product()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Handbook values: 0! = 1, 3! = 6; (5)₂ = 20, (5)₃ = 60, (1)₂ = 0 (common practice).
    #[test]
    fn factorials_and_falling_factorials_have_their_handbook_values() {
        assert_eq!(factorial(0), 1.0);
        assert_eq!(factorial(3), 6.0);
        assert_eq!(falling(5, 0), 1.0);
        assert_eq!(falling(5, 2), 20.0);
        assert_eq!(falling(5, 3), 60.0);
        assert_eq!(falling(1, 2), 0.0);
        assert_eq!(factorial_product(&[2, 1, 3]), 12.0);
    }

    // The number of ways C(x, ν) = (x)_ν / ν! against Pascal's rule (common practice).
    #[test]
    fn falling_over_factorial_is_the_binomial_coefficient() {
        for x in 0..30i64 {
            for nu in 1..=3u32 {
                let c = falling(x, nu) / factorial(nu);
                let pascal =
                    falling(x - 1, nu) / factorial(nu) + falling(x - 1, nu - 1) / factorial(nu - 1);
                if x >= 1 {
                    assert_eq!(c, pascal, "x = {x}, ν = {nu}");
                }
            }
        }
    }
}
