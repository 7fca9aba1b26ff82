//! Helpers shared by the end-to-end tests.

use std::collections::BTreeMap;
use std::path::Path;

/// A fresh temporary directory, removed when dropped.
pub fn temp() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary directory")
}

/// Coupled logistic maps in the form of Sugihara et al. (2012): r_x = 3.8, r_y = 3.5,
/// beta_yx = 0.1 (X drives Y), beta_xy = 0; the first 100 iterations are discarded.
pub fn coupled_logistic_csv(n: usize) -> String {
    let (mut x, mut y) = (0.4_f64, 0.2_f64);
    let mut out = String::from("t,x,y\n");
    for t in 0..(n + 100) {
        let (nx, ny) = (x * (3.8 - 3.8 * x), y * (3.5 - 3.5 * y - 0.1 * x));
        x = nx;
        y = ny;
        if t >= 100 {
            out.push_str(&format!("{},{x},{y}\n", t - 100));
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
