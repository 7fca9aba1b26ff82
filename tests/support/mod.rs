//! Helpers of the sharding, resume and Slurm tests.
#![allow(dead_code)]

use std::path::Path;

/// Result files that a scan and a merge must write byte for byte alike.
pub const RESULT_FILES: [&str; 7] = [
    "curves.csv",
    "embedding.csv",
    "features.csv",
    "labels.csv",
    "lags.csv",
    "surrogates.csv",
    "report.html",
];

/// Flags that keep the cross maps small enough for tests.
pub const SMALL: [&str; 7] = [
    "--replicates",
    "10",
    "--sizes",
    "5",
    "--surrogates",
    "5",
    "--quiet",
];

/// A ring of `vars` logistic maps, each forced by its neighbour: the coupled logistic maps of
/// Sugihara et al. (2012), x(t+1) = x(t) (r - r x(t) - beta y(t)), extended to a ring with
/// r from 3.6 to 3.875 and beta = 0.05 (values stay in (0, 1) for these settings); the first
/// 100 iterations are discarded.
pub fn logistic_ring_csv(vars: usize, n: usize) -> String {
    let mut x: Vec<f64> = (0..vars).map(|j| 0.2 + 0.05 * (j % 12) as f64).collect();
    let r: Vec<f64> = (0..vars).map(|j| 3.6 + 0.025 * (j % 12) as f64).collect();
    let mut out = String::from("t");
    for j in 0..vars {
        out.push_str(&format!(",v{:03}", j + 1));
    }
    out.push('\n');
    for t in 0..(n + 100) {
        let prev = x.clone();
        for j in 0..vars {
            let y = prev[(j + vars - 1) % vars];
            x[j] = prev[j] * (r[j] - r[j] * prev[j] - 0.05 * y);
        }
        if t >= 100 {
            out.push_str(&(t - 100).to_string());
            for v in &x {
                out.push_str(&format!(",{v}"));
            }
            out.push('\n');
        }
    }
    out
}

/// run.json without the fields that legitimately differ between a scan and a merge (the
/// process that wrote it: its command line, start time and timing).
pub fn run_record(dir: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(dir.join("run.json")).expect("run.json");
    let mut v: serde_json::Value = serde_json::from_str(&text).expect("run.json is JSON");
    let obj = v.as_object_mut().expect("object");
    for key in ["timing", "command", "shards", "invocation"] {
        obj.remove(key);
    }
    v
}

/// Assert that two output directories hold the same results, byte for byte, and the same
/// run record apart from timing, command and shard list.
pub fn assert_same_outputs(expected: &Path, actual: &Path) {
    for name in RESULT_FILES {
        let a = std::fs::read(expected.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        let b = std::fs::read(actual.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!(
            a == b,
            "{name} differs between {} and {}",
            expected.display(),
            actual.display()
        );
    }
    assert_eq!(run_record(expected), run_record(actual), "run.json differs");
}
