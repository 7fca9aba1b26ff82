//! Seeded splits of row indices that keep every system whole, and the index helpers they share.

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;

/// splitmix64 step: derives independent seeds from one.
pub(crate) fn mix(seed: u64, k: u64) -> u64 {
    let mut z = seed.wrapping_add(k.wrapping_mul(0x9E37_79B9_7F4A_7C15));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

pub(crate) fn unique_sorted(v: &[&str]) -> Vec<String> {
    let mut u: Vec<String> = v.iter().map(|s| s.to_string()).collect();
    u.sort();
    u.dedup();
    u
}

pub(crate) fn both_classes(idx: &[usize], y: &[bool]) -> bool {
    let pos = idx.iter().filter(|&&i| y[i]).count();
    pos > 0 && pos < idx.len()
}

/// Indices `0..n` not in `test` (linear time, for large training sets).
pub(crate) fn complement(n: usize, test: &[usize]) -> Vec<usize> {
    let mut held = vec![false; n];
    for &i in test {
        held[i] = true;
    }
    (0..n).filter(|&i| !held[i]).collect()
}

pub(crate) fn take<T: Clone>(v: &[T], idx: &[usize]) -> Vec<T> {
    idx.iter().map(|&i| v[i].clone()).collect()
}

/// Splits row indices into groups of whole systems: `k` folds after a seeded shuffle.
pub(crate) fn system_folds(systems: &[&str], k: usize, seed: u64) -> Vec<Vec<usize>> {
    let mut sys = unique_sorted(systems);
    sys.shuffle(&mut ChaCha8Rng::seed_from_u64(seed));
    let k = k.clamp(1, sys.len().max(1));
    let mut folds = vec![Vec::new(); k];
    for (i, s) in systems.iter().enumerate() {
        let pos = sys.iter().position(|t| t == s).expect("system listed");
        folds[pos % k].push(i);
    }
    folds
}
