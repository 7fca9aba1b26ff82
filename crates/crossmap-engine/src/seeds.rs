//! Keyed random generators: each work unit's stream depends only on its key, never on scheduling.

use rand_chacha::ChaCha8Rng;
use rand_chacha::rand_core::{Rng, SeedableRng};

/// Domain tag for library draws, so library and surrogate streams never coincide.
pub(crate) const TAG_LIBRARY: u64 = 0x4c49_4252_4152_5931;
/// Domain tag for surrogate series.
pub(crate) const TAG_SURROGATE: u64 = 0x5355_5252_4f47_4154;
/// Domain tag for seasonal surrogate series.
pub(crate) const TAG_SEASONAL: u64 = 0x5345_4153_4f4e_414c;

/// SplitMix64 finaliser (Steele, Lea & Flood 2014): a cheap, well-mixing bijection on u64.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// A ChaCha8 generator whose 256-bit seed is a hash of `parts` (order matters).
pub(crate) fn keyed_rng(parts: &[u64]) -> ChaCha8Rng {
    let mut h = 0x6a09_e667_f3bc_c908_u64;
    for &p in parts {
        h = mix(h ^ mix(p));
    }
    let mut seed = [0u8; 32];
    for (i, chunk) in seed.chunks_mut(8).enumerate() {
        chunk.copy_from_slice(&mix(h ^ (i as u64 + 1)).to_le_bytes());
    }
    ChaCha8Rng::from_seed(seed)
}

/// Uniform integer in `0..n` by Lemire's (2019) multiply-and-reject method: exact, no modulo bias.
pub(crate) fn below(rng: &mut ChaCha8Rng, n: u64) -> u64 {
    debug_assert!(n > 0);
    let threshold = n.wrapping_neg() % n;
    loop {
        let m = u128::from(rng.next_u64()) * u128::from(n);
        if (m as u64) >= threshold {
            return (m >> 64) as u64;
        }
    }
}

/// Uniform f64 in [0, 1) from the top 53 bits.
pub(crate) fn unit(rng: &mut ChaCha8Rng) -> f64 {
    (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// `l` distinct values of `0..n` (in draw order) by a partial Fisher-Yates shuffle.
pub(crate) fn sample_without_replacement(rng: &mut ChaCha8Rng, n: usize, l: usize) -> Vec<u32> {
    assert!(l <= n, "sample larger than population");
    let mut pool: Vec<u32> = (0..n as u32).collect();
    for i in 0..l {
        let j = i + below(rng, (n - i) as u64) as usize;
        pool.swap(i, j);
    }
    pool.truncate(l);
    pool
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_key_same_stream_different_key_different_stream() {
        let a: Vec<u64> = (0..4).map(|_| keyed_rng(&[1, 2, 3]).next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        assert_ne!(
            keyed_rng(&[1, 2, 3]).next_u64(),
            keyed_rng(&[1, 3, 2]).next_u64()
        );
    }

    #[test]
    fn sample_is_distinct_and_in_range() {
        let mut rng = keyed_rng(&[7]);
        let s = sample_without_replacement(&mut rng, 50, 20);
        assert_eq!(s.len(), 20);
        let mut sorted = s.clone();
        sorted.sort_unstable();
        sorted.dedup();
        assert_eq!(sorted.len(), 20);
        assert!(s.iter().all(|&v| v < 50));
        let mut all = sample_without_replacement(&mut rng, 9, 9);
        all.sort_unstable();
        assert_eq!(all, (0..9).collect::<Vec<_>>());
    }

    #[test]
    fn below_is_roughly_uniform() {
        // Chi-square style sanity bound (common practice): 6 cells, 60k draws.
        let mut rng = keyed_rng(&[11]);
        let mut counts = [0usize; 6];
        for _ in 0..60_000 {
            counts[below(&mut rng, 6) as usize] += 1;
        }
        assert!(
            counts.iter().all(|&c| (9_500..10_500).contains(&c)),
            "{counts:?}"
        );
    }
}
