//! Random streams of the kernels: one generator per replicate, and the two draws a step needs.
//!
//! # The stream (stable; results depend on it)
//!
//! Generator: Xoshiro256++ (Blackman & Vigna 2021, "Scrambled linear pseudorandom number
//! generators", ACM Trans. Math. Softw. 47(4):36 \[M\]) from `rand_xoshiro`.
//!
//! Replicate `r` of master seed `s` starts from the 256-bit state
//! `[m(s), m(r ⊕ K₁), m(s ⊕ K₂), m(r ⊕ K₃)]`, where `m` is the SplitMix64 output function
//! (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number generators", OOPSLA \[M\]) and
//! K₁, K₂, K₃ are fixed odd constants. `m` is a bijection of u64, so the first two words alone
//! determine (s, r): no two (seed, replicate) pairs share a starting state, and the state is never
//! all zero. A replicate's numbers depend on (s, r) alone, never on threads, scheduling or shards.
//!
//! Draws: a uniform is the top 53 bits of one `next_u64` scaled by 2⁻⁵³; an exponential
//! waiting time uses the ziggurat of [`super::ziggurat`] (256 layers), which usually consumes
//! one `next_u64`.

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// The generator every kernel uses.
pub type KernelRng = Xoshiro256PlusPlus;

const K1: u64 = 0x9E37_79B9_7F4A_7C15;
const K2: u64 = 0xD1B5_4A32_D192_ED03;
const K3: u64 = 0x8CB9_2BA7_2F3D_8DD7;

/// SplitMix64 output function: a bijective 64-bit mixer (Steele, Lea & Flood 2014 \[M\]).
pub fn splitmix64(x: u64) -> u64 {
    let mut z = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The master seed of point `i` of a sweep with master seed `seed`: the i-th output of the
/// SplitMix64 stream started at `seed`, splitmix64(seed + i·γ) with γ = ⌊2⁶⁴/φ⌋ (Steele, Lea
/// & Flood 2014 \[M\]), so a point's numbers depend on (seed, i) alone. Its replicates are then
/// seeded from (point seed, r) by [`replicate_rng`].
pub fn point_seed(seed: u64, i: u64) -> u64 {
    splitmix64(seed.wrapping_add(i.wrapping_mul(0x9E37_79B9_7F4A_7C15)))
}

/// The generator of replicate `replicate` under master seed `seed` (see the module docs).
pub fn replicate_rng(seed: u64, replicate: u64) -> KernelRng {
    let words = [
        splitmix64(seed),
        splitmix64(replicate ^ K1),
        splitmix64(seed ^ K2),
        splitmix64(replicate ^ K3),
    ];
    let mut bytes = [0u8; 32];
    for (chunk, w) in bytes.chunks_exact_mut(8).zip(words) {
        chunk.copy_from_slice(&w.to_le_bytes());
    }
    KernelRng::from_seed(bytes)
}

/// A uniform number on [0, 1): u = ⌊b/2¹¹⌋·2⁻⁵³ for one 64-bit draw b.
#[inline(always)]
pub fn uniform<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// A standard exponential number (mean 1), by the ziggurat of [`super::ziggurat`].
///
/// τ = exp1/a₀ is the direct method's waiting time (Gillespie 1977: τ = ln(1/r₁)/a₀, of which
/// this is an exact-in-distribution and faster sampler).
#[inline(always)]
pub fn exp1<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    super::ziggurat::exp_ziggurat().sample(rng)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replicate_streams_are_fixed_and_distinct() {
        let mut a = replicate_rng(0, 0);
        let mut b = replicate_rng(0, 0);
        let mut c = replicate_rng(0, 1);
        let mut d = replicate_rng(1, 0);
        let (x, y, z, w) = (a.next_u64(), b.next_u64(), c.next_u64(), d.next_u64());
        assert_eq!(x, y);
        assert_ne!(x, z);
        assert_ne!(x, w);
        assert_ne!(z, w);
    }

    #[test]
    fn splitmix_is_the_published_mixer() {
        // SplitMix64 seeded with 0 gives 0xE220A8397B1DCDAF as its first output (the
        // reference implementation's value, recomputed in tests/reference/tables.py [C]).
        assert_eq!(splitmix64(0), 0xE220_A839_7B1D_CDAF);
    }

    #[test]
    fn uniform_is_in_the_unit_interval() {
        let mut r = replicate_rng(7, 7);
        let mut sum = 0.0;
        for _ in 0..10_000 {
            let u = uniform(&mut r);
            assert!((0.0..1.0).contains(&u));
            sum += u;
        }
        // Mean 1/2, SD of the mean √(1/12)/100 = 0.00289; 5 SE.
        assert!((sum / 10_000.0 - 0.5).abs() < 5.0 * 0.00289);
    }
}
