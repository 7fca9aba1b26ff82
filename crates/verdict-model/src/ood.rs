//! Out-of-distribution score: Mahalanobis distance (Mahalanobis 1936) of a standardised row
//! from the training rows, with the covariance shrunk towards the identity
//! (Ledoit & Wolf 2004 style, fixed weight) so near-collinear features stay invertible.

use serde::{Deserialize, Serialize};

/// Training mean, regularised precision matrix and the distance threshold.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OodModel {
    /// Mean of the standardised training rows.
    pub mean: Vec<f64>,
    /// Row-major inverse of the shrunk covariance.
    pub precision: Vec<f64>,
    /// Distance above which a row counts as unfamiliar.
    pub threshold: f64,
    /// The training percentile `threshold` was taken at.
    pub percentile: f64,
}

/// Inverse of a symmetric positive-definite matrix by Cholesky factorisation; `None` when it
/// is not positive definite.
fn spd_inverse(a: &[f64], d: usize) -> Option<Vec<f64>> {
    let mut l = vec![0.0; d * d];
    for i in 0..d {
        for j in 0..=i {
            let mut s = a[i * d + j];
            for k in 0..j {
                s -= l[i * d + k] * l[j * d + k];
            }
            if i == j {
                if s <= 0.0 {
                    return None;
                }
                l[i * d + i] = s.sqrt();
            } else {
                l[i * d + j] = s / l[j * d + j];
            }
        }
    }
    // Solve L L^T X = I column by column.
    let mut inv = vec![0.0; d * d];
    for c in 0..d {
        let mut z = vec![0.0; d];
        for i in 0..d {
            let mut s = if i == c { 1.0 } else { 0.0 };
            for k in 0..i {
                s -= l[i * d + k] * z[k];
            }
            z[i] = s / l[i * d + i];
        }
        for i in (0..d).rev() {
            let mut s = z[i];
            for k in i + 1..d {
                s -= l[k * d + i] * inv[k * d + c];
            }
            inv[i * d + c] = s / l[i * d + i];
        }
    }
    Some(inv)
}

/// Linear-interpolation percentile (`q` in 0..=100) of `v`, as numpy's default.
/// Infinite for an empty sample (nothing is familiar).
pub fn percentile(v: &[f64], q: f64) -> f64 {
    sample_stats::quantile(v, q / 100.0).unwrap_or(f64::INFINITY)
}

impl OodModel {
    /// Fits on standardised rows with shrinkage weight `shrink` in (0, 1] and sets the
    /// threshold at the `percentile` of the training rows' own distances.
    pub fn fit(rows: &[Vec<f64>], shrink: f64, percentile_q: f64) -> Self {
        let d = rows.first().map_or(0, Vec::len);
        let n = rows.len().max(1) as f64;
        let mut mean = vec![0.0; d];
        for r in rows {
            for (m, v) in mean.iter_mut().zip(r) {
                *m += v / n;
            }
        }
        let mut cov = vec![0.0; d * d];
        for r in rows {
            for i in 0..d {
                for j in 0..d {
                    cov[i * d + j] += (r[i] - mean[i]) * (r[j] - mean[j]) / n;
                }
            }
        }
        let mut shrink = shrink.clamp(1e-6, 1.0);
        let precision = loop {
            let mut a = cov.clone();
            for i in 0..d {
                for j in 0..d {
                    a[i * d + j] *= 1.0 - shrink;
                }
                a[i * d + i] += shrink;
            }
            if let Some(p) = spd_inverse(&a, d) {
                break p;
            }
            // Rounding can leave a tiny negative pivot; more shrinkage always cures it.
            shrink = (shrink * 2.0).min(1.0);
        };
        let mut m = OodModel {
            mean,
            precision,
            threshold: f64::INFINITY,
            percentile: percentile_q,
        };
        let dist: Vec<f64> = rows.iter().map(|r| m.distance(r)).collect();
        m.threshold = percentile(&dist, percentile_q);
        m
    }

    /// Regularised Mahalanobis distance of a standardised row.
    pub fn distance(&self, row: &[f64]) -> f64 {
        let d = self.mean.len();
        let c: Vec<f64> = row.iter().zip(&self.mean).map(|(v, m)| v - m).collect();
        let s: f64 = self
            .precision
            .chunks(d.max(1))
            .zip(&c)
            .map(|(prow, ci)| ci * prow.iter().zip(&c).map(|(a, b)| a * b).sum::<f64>())
            .sum();
        s.max(0.0).sqrt()
    }

    /// Whether a standardised row lies beyond the threshold.
    pub fn is_unfamiliar(&self, distance: f64) -> bool {
        distance > self.threshold
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn identity_covariance_gives_euclidean_distance() {
        // With full shrinkage the precision is the identity, so the distance is Euclidean
        // from the mean (definition of the Mahalanobis distance, Mahalanobis 1936).
        let rows = vec![
            vec![1.0, 0.0],
            vec![-1.0, 0.0],
            vec![0.0, 1.0],
            vec![0.0, -1.0],
        ];
        let m = OodModel::fit(&rows, 1.0, 99.0);
        assert_abs_diff_eq!(m.distance(&[3.0, 4.0]), 5.0, epsilon = 1e-12);
        assert!(m.is_unfamiliar(m.distance(&[3.0, 4.0])));
        assert!(!m.is_unfamiliar(m.distance(&[0.5, 0.0])));
    }

    #[test]
    fn inverse_of_known_matrix() {
        // [[4, 2], [2, 3]]^-1 = [[3, -2], [-2, 4]] / 8 (hand computation).
        let inv = spd_inverse(&[4.0, 2.0, 2.0, 3.0], 2).unwrap();
        for (a, b) in inv.iter().zip([0.375, -0.25, -0.25, 0.5]) {
            assert_abs_diff_eq!(*a, b, epsilon = 1e-12);
        }
    }

    #[test]
    fn percentile_matches_numpy_linear() {
        // numpy.percentile([1, 2, 3, 4], 90) = 3.7 (numpy default linear method).
        assert_abs_diff_eq!(
            percentile(&[4.0, 1.0, 3.0, 2.0], 90.0),
            3.7,
            epsilon = 1e-12
        );
    }
}
