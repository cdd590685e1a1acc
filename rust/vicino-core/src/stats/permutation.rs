//! Reproducible random permutations for conditional-free permutation tests.
//!
//! Draw r of a test with seed s uses its own generator, xoshiro256++ seeded
//! from (s, r) through SplitMix64, so draws can run on any thread in any
//! order and the results are the same bit for bit. Shuffles are
//! Fisher-Yates with Lemire's unbiased bounded integers.

use rand_core::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// The generator of draw `draw` under `seed`.
pub fn stream(seed: u64, draw: u64) -> Xoshiro256PlusPlus {
    // golden-ratio increment spreads draw numbers before SplitMix64 mixing
    Xoshiro256PlusPlus::seed_from_u64(seed ^ draw.wrapping_mul(0x9E37_79B9_7F4A_7C15).rotate_left(17))
}

/// Unbiased integer in [0, bound), Lemire (2019), bound >= 1.
#[inline]
pub fn below(rng: &mut impl Rng, bound: u64) -> u64 {
    let mut m = (rng.next_u64() as u128) * (bound as u128);
    let mut low = m as u64;
    if low < bound {
        let threshold = bound.wrapping_neg() % bound;
        while low < threshold {
            m = (rng.next_u64() as u128) * (bound as u128);
            low = m as u64;
        }
    }
    (m >> 64) as u64
}

/// Shuffle in place, uniformly over all orders.
#[inline]
pub fn shuffle<T>(rng: &mut impl Rng, v: &mut [T]) {
    for i in (1..v.len()).rev() {
        let j = below(rng, i as u64 + 1) as usize;
        v.swap(i, j);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shuffle_is_uniform_on_three() {
        // all 6 orders of 3 items should appear about equally often
        let mut counts = std::collections::HashMap::new();
        for r in 0..60_000u64 {
            let mut v = [0, 1, 2];
            shuffle(&mut stream(7, r), &mut v);
            *counts.entry(v).or_insert(0) += 1;
        }
        assert_eq!(counts.len(), 6);
        for &c in counts.values() {
            // expected 10_000, sd about 91
            assert!((c as i64 - 10_000).abs() < 500, "{c}");
        }
    }

    #[test]
    fn streams_are_reproducible() {
        let mut a = stream(42, 3);
        let mut b = stream(42, 3);
        assert_eq!(a.next_u64(), b.next_u64());
        assert_ne!(stream(42, 3).next_u64(), stream(42, 4).next_u64());
    }
}
