//! Column standardisation (zero mean, unit variance) fitted on training rows only.

use serde::{Deserialize, Serialize};

/// Per-column mean and scale learned from training rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Standardiser {
    /// Column means.
    pub mean: Vec<f64>,
    /// Column population standard deviations (1 where a column is constant, so it maps to 0).
    pub scale: Vec<f64>,
}

impl Standardiser {
    /// Learns means and population standard deviations (ddof 0, as scikit-learn's
    /// `StandardScaler`) from `rows`, all of width `width`.
    pub fn fit(rows: &[Vec<f64>], width: usize) -> Self {
        let n = rows.len().max(1) as f64;
        let mut mean = vec![0.0; width];
        for r in rows {
            for (m, v) in mean.iter_mut().zip(r) {
                *m += v;
            }
        }
        mean.iter_mut().for_each(|m| *m /= n);
        let mut var = vec![0.0; width];
        for r in rows {
            for ((s, v), m) in var.iter_mut().zip(r).zip(&mean) {
                *s += (v - m) * (v - m);
            }
        }
        // A constant column carries no information; scale 1 keeps it at 0 instead of NaN.
        let scale = var
            .into_iter()
            .map(|s| {
                let sd = (s / n).sqrt();
                if sd > 1e-12 { sd } else { 1.0 }
            })
            .collect();
        Standardiser { mean, scale }
    }

    /// Standardises one row.
    pub fn apply(&self, row: &[f64]) -> Vec<f64> {
        row.iter()
            .zip(&self.mean)
            .zip(&self.scale)
            .map(|((v, m), s)| (v - m) / s)
            .collect()
    }

    /// Standardises many rows.
    pub fn apply_all(&self, rows: &[Vec<f64>]) -> Vec<Vec<f64>> {
        rows.iter().map(|r| self.apply(r)).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn standardised_columns_have_zero_mean_unit_variance() {
        let rows = vec![
            vec![1.0, 5.0],
            vec![2.0, 5.0],
            vec![3.0, 5.0],
            vec![6.0, 5.0],
        ];
        let s = Standardiser::fit(&rows, 2);
        let z = s.apply_all(&rows);
        let m: f64 = z.iter().map(|r| r[0]).sum::<f64>() / 4.0;
        let v: f64 = z.iter().map(|r| r[0] * r[0]).sum::<f64>() / 4.0;
        assert_abs_diff_eq!(m, 0.0, epsilon = 1e-12);
        assert_abs_diff_eq!(v, 1.0, epsilon = 1e-12);
        // Constant column maps to zero rather than NaN.
        assert!(z.iter().all(|r| r[1] == 0.0));
    }
}
