//! Seed derivation and the few random draws the simulator needs.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// SplitMix64 finaliser (Steele, Lea & Flood 2014): a cheap bijective mixer, used so that
/// nearby seeds and indices give unrelated generator streams.
pub fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Seed of one system's drawing stream, from the master seed, the system's index and the
/// redraw attempt; independent of the order in which systems are simulated.
pub fn system_seed(master: u64, index: usize, attempt: u32) -> u64 {
    splitmix64(splitmix64(splitmix64(master) ^ index as u64) ^ ((attempt as u64) << 32 | 0x5157))
}

/// A seeded generator with the draws the simulator uses.
pub struct Draw {
    rng: ChaCha8Rng,
    spare: Option<f64>,
}

impl Draw {
    /// A generator seeded from `seed`.
    pub fn new(seed: u64) -> Self {
        Self {
            rng: ChaCha8Rng::seed_from_u64(seed),
            spare: None,
        }
    }

    /// A fresh 64-bit value (used to seed sub-streams).
    pub fn next_seed(&mut self) -> u64 {
        self.rng.next_u64()
    }

    /// Uniform on [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Uniform on [lo, hi]; exactly `lo` when the range is a point.
    pub fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        if hi > lo {
            lo + (hi - lo) * self.unit()
        } else {
            lo
        }
    }

    /// Uniform whole number in [lo, hi].
    pub fn int(&mut self, lo: u64, hi: u64) -> u64 {
        if hi > lo {
            lo + self.rng.next_u64() % (hi - lo + 1)
        } else {
            lo
        }
    }

    /// True with probability `p`.
    pub fn chance(&mut self, p: f64) -> bool {
        self.unit() < p
    }

    /// Index drawn with probability proportional to `weights` (not all zero).
    pub fn weighted(&mut self, weights: &[f64]) -> usize {
        let total: f64 = weights.iter().sum();
        let mut u = self.unit() * total;
        for (i, w) in weights.iter().enumerate() {
            if u < *w {
                return i;
            }
            u -= w;
        }
        weights.iter().rposition(|w| *w > 0.0).unwrap_or(0)
    }

    /// Standard normal deviate (Box–Muller, Box & Muller 1958).
    pub fn normal(&mut self) -> f64 {
        if let Some(v) = self.spare.take() {
            return v;
        }
        let u1 = 1.0 - self.unit();
        let u2 = self.unit();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (std::f64::consts::TAU * u2).sin_cos();
        self.spare = Some(r * s);
        r * c
    }

    /// Fisher–Yates shuffle.
    pub fn shuffle<T>(&mut self, items: &mut [T]) {
        for i in (1..items.len()).rev() {
            let j = self.int(0, i as u64) as usize;
            items.swap(i, j);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn seeds_differ_by_index_and_attempt() {
        let a = system_seed(7, 0, 0);
        assert_ne!(a, system_seed(7, 1, 0));
        assert_ne!(a, system_seed(7, 0, 1));
        assert_ne!(a, system_seed(8, 0, 0));
        assert_eq!(a, system_seed(7, 0, 0));
    }

    #[test]
    fn normal_has_unit_moments() {
        let mut d = Draw::new(3);
        let xs: Vec<f64> = (0..100_000).map(|_| d.normal()).collect();
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / xs.len() as f64;
        approx::assert_abs_diff_eq!(mean, 0.0, epsilon = 0.02);
        approx::assert_abs_diff_eq!(var, 1.0, epsilon = 0.02);
    }
}
