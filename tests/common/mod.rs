//! Helpers shared by the end-to-end tests.
// Each test binary compiles this module and uses only part of it.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::Path;

/// A fresh temporary directory, removed when dropped.
pub fn temp() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary directory")
}

/// Coupled logistic maps in the form of Sugihara et al. (2012): r_x = 3.8, r_y = 3.5,
/// beta_yx = 0.1 (X drives Y), beta_xy = 0; the first 100 iterations are discarded.
pub fn coupled_logistic_csv(n: usize) -> String {
    logistic_pair_csv(n, 0.0, 0.1)
}

/// Two-species logistic maps of Sugihara et al. (2012): `x' = x (3.8 - 3.8 x - beta_xy y)`,
/// `y' = y (3.5 - 3.5 y - beta_yx x)` from (0.4, 0.2), the first 100 iterations discarded
/// (r and the start from memory).
pub fn logistic_pair_csv(n: usize, beta_xy: f64, beta_yx: f64) -> String {
    let (mut x, mut y) = (0.4_f64, 0.2_f64);
    let mut out = String::from("t,x,y\n");
    for t in 0..(n + 100) {
        let (nx, ny) = (
            x * (3.8 - 3.8 * x - beta_xy * y),
            y * (3.5 - 3.5 * y - beta_yx * x),
        );
        x = nx;
        y = ny;
        if t >= 100 {
            out.push_str(&format!("{},{x},{y}\n", t - 100));
        }
    }
    out
}

/// An uncoupled chaotic logistic map (r = 3.8) beside a sine of period 7.3 steps with Gaussian
/// noise of half its amplitude (seeded xorshift and Box-Muller, Box & Muller 1958).
pub fn logistic_and_noisy_sine_csv(n: usize) -> String {
    let mut x = 0.4_f64;
    let mut h = 0x9E37_79B9_7F4A_7C15_u64;
    let mut uniform = move || {
        h ^= h << 13;
        h ^= h >> 7;
        h ^= h << 17;
        ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    };
    let mut out = String::from("t,x,s\n");
    for t in 0..(n + 100) {
        x = x * (3.8 - 3.8 * x);
        if t >= 100 {
            let k = (t - 100) as f64;
            let z = (-2.0 * uniform().ln()).sqrt() * (std::f64::consts::TAU * uniform()).cos();
            let s = (std::f64::consts::TAU * k / 7.3).sin() + 0.5 * z;
            out.push_str(&format!("{},{x},{s}\n", t - 100));
        }
    }
    out
}

/// A CSV file as rows of column -> value.
pub fn read_csv(path: &Path) -> Vec<BTreeMap<String, String>> {
    let mut rdr = csv::Reader::from_path(path).expect("csv");
    let header: Vec<String> = rdr.headers().unwrap().iter().map(String::from).collect();
    rdr.records()
        .map(|r| {
            let r = r.unwrap();
            header
                .iter()
                .cloned()
                .zip(r.iter().map(String::from))
                .collect()
        })
        .collect()
}
