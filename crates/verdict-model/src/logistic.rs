//! Binary and multinomial logistic regression with an L2 penalty, fitted by linfa-logistic.

use linfa::prelude::*;
use linfa_logistic::{LogisticRegression, MultiLogisticRegression};
use ndarray::{Array1, Array2};
use serde::{Deserialize, Serialize};

use crate::ModelError;

/// A fitted binary logistic model: `P(y = 1 | x) = sigmoid(intercept + coef . x)`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LogisticModel {
    /// Intercept (not penalised).
    pub intercept: f64,
    /// One coefficient per column.
    pub coef: Vec<f64>,
}

/// Numerically safe logistic function.
pub fn sigmoid(z: f64) -> f64 {
    if z >= 0.0 {
        1.0 / (1.0 + (-z).exp())
    } else {
        let e = z.exp();
        e / (1.0 + e)
    }
}

/// Log-odds of `p`, with `p` clipped away from 0 and 1.
pub fn logit(p: f64) -> f64 {
    let p = p.clamp(1e-12, 1.0 - 1e-12);
    (p / (1.0 - p)).ln()
}

fn to_array(rows: &[Vec<f64>]) -> Array2<f64> {
    let width = rows.first().map_or(0, Vec::len);
    Array2::from_shape_fn((rows.len(), width), |(i, j)| rows[i][j])
}

impl LogisticModel {
    /// Fits by minimising `sum log-loss + alpha/2 * |coef|^2` (the intercept is free), the same
    /// objective as scikit-learn's `LogisticRegression(C = 1/alpha)`; `alpha = 0` is the plain
    /// maximum-likelihood fit. Rows should be standardised for a well-conditioned solve.
    pub fn fit(rows: &[Vec<f64>], y: &[bool], alpha: f64) -> Result<Self, ModelError> {
        let x = to_array(rows);
        // usize targets: linfa needs `Ord` classes, and its positive class is read back below.
        let targets: Array1<usize> = y.iter().map(|&b| usize::from(b)).collect();
        let data = Dataset::new(x, targets);
        let fitted = LogisticRegression::default()
            .alpha(alpha)
            .max_iterations(500)
            .gradient_tolerance(1e-8)
            .fit(&data)
            .map_err(|e| ModelError::Fit {
                model: "logistic regression",
                message: e.to_string(),
            })?;
        let coef: Vec<f64> = fitted.params().to_vec();
        let intercept = fitted.intercept();
        // linfa's positive class is not necessarily `1`: flip the sign when it chose `0`.
        if fitted.labels().pos.class == 1 {
            Ok(LogisticModel { intercept, coef })
        } else {
            Ok(LogisticModel {
                intercept: -intercept,
                coef: coef.into_iter().map(|c| -c).collect(),
            })
        }
    }

    /// Linear score (log-odds) of one row.
    pub fn decision(&self, row: &[f64]) -> f64 {
        self.intercept + self.coef.iter().zip(row).map(|(c, v)| c * v).sum::<f64>()
    }

    /// Probability of the positive class for one row.
    pub fn probability(&self, row: &[f64]) -> f64 {
        sigmoid(self.decision(row))
    }
}

/// A fitted multinomial logistic model over the four fine labels.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MultinomialModel {
    /// Class index (into [`crate::FineLabel::ALL`]) of each fitted class.
    pub classes: Vec<usize>,
    /// Intercept per fitted class.
    pub intercept: Vec<f64>,
    /// Coefficients, one row per fitted class.
    pub coef: Vec<Vec<f64>>,
}

impl MultinomialModel {
    /// Fits softmax regression with an L2 penalty `alpha` on class indices `y`.
    pub fn fit(rows: &[Vec<f64>], y: &[usize], alpha: f64) -> Result<Self, ModelError> {
        let x = to_array(rows);
        let targets: Array1<usize> = y.iter().copied().collect();
        let data = Dataset::new(x, targets);
        let fitted = MultiLogisticRegression::default()
            .alpha(alpha)
            .max_iterations(300)
            .fit(&data)
            .map_err(|e| ModelError::Fit {
                model: "multinomial logistic regression",
                message: e.to_string(),
            })?;
        let classes = fitted.classes().to_vec();
        let params = fitted.params();
        let coef = (0..classes.len())
            .map(|k| params.column(k).to_vec())
            .collect();
        Ok(MultinomialModel {
            classes,
            intercept: fitted.intercept().to_vec(),
            coef,
        })
    }

    /// Probabilities over the four fine labels (zero for a label absent from training).
    pub fn probabilities(&self, row: &[f64]) -> [f64; 4] {
        let z: Vec<f64> = self
            .coef
            .iter()
            .zip(&self.intercept)
            .map(|(w, b)| b + w.iter().zip(row).map(|(c, v)| c * v).sum::<f64>())
            .collect();
        let m = z.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let e: Vec<f64> = z.iter().map(|v| (v - m).exp()).collect();
        let s: f64 = e.iter().sum();
        let mut out = [0.0; 4];
        for (k, &class) in self.classes.iter().enumerate() {
            if class < 4 {
                out[class] = e[k] / s;
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::standardise::Standardiser;
    use approx::assert_abs_diff_eq;

    // Challenger pre-launch flights: joint temperature (deg F) and any O-ring distress
    // (Dalal, Fowlkes & Hoadley 1989, 23 flights; values from memory).
    const TEMPS: [f64; 23] = [
        66., 70., 69., 68., 67., 72., 73., 70., 57., 63., 70., 78., 67., 53., 67., 75., 70., 81.,
        76., 79., 75., 76., 58.,
    ];
    const DISTRESS: [u8; 23] = [
        0, 1, 0, 0, 0, 0, 0, 0, 1, 1, 1, 0, 0, 1, 0, 0, 0, 0, 0, 0, 1, 0, 1,
    ];

    fn challenger_fit() -> (f64, f64) {
        let rows: Vec<Vec<f64>> = TEMPS.iter().map(|&t| vec![t]).collect();
        let y: Vec<bool> = DISTRESS.iter().map(|&d| d == 1).collect();
        let s = Standardiser::fit(&rows, 1);
        let m = LogisticModel::fit(&s.apply_all(&rows), &y, 0.0).unwrap();
        let slope = m.coef[0] / s.scale[0];
        (m.intercept - slope * s.mean[0], slope)
    }

    #[test]
    fn challenger_matches_published_fit() {
        // Dalal, Fowlkes & Hoadley 1989: intercept about 15.04, slope about -0.232 per deg F
        // (from memory).
        let (b0, b1) = challenger_fit();
        assert_abs_diff_eq!(b0, 15.04, epsilon = 0.02);
        assert_abs_diff_eq!(b1, -0.232, epsilon = 0.001);
    }

    #[test]
    fn challenger_matches_sklearn_unpenalised() {
        // scikit-learn 1.5.2 LogisticRegression(penalty=None), fixture from
        // tests/reference/classifier_sklearn.py.
        let fx = crate::tests_support::fixture();
        let (b0, b1) = challenger_fit();
        assert_abs_diff_eq!(
            b0,
            fx["challenger"]["intercept"].as_f64().unwrap(),
            epsilon = 1e-3
        );
        assert_abs_diff_eq!(
            b1,
            fx["challenger"]["slope"].as_f64().unwrap(),
            epsilon = 1e-5
        );
    }

    #[test]
    fn l2_penalty_matches_sklearn_c() {
        // scikit-learn 1.5.2 LogisticRegression(C=1/alpha) minimises the same objective.
        let fx = crate::tests_support::fixture();
        let l2 = &fx["logistic_l2"];
        let rows = crate::tests_support::rows(&l2["x"]);
        let y: Vec<bool> = l2["y"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_i64() == Some(1))
            .collect();
        let alpha = l2["alpha"].as_f64().unwrap();
        let m = LogisticModel::fit(&rows, &y, alpha).unwrap();
        assert_abs_diff_eq!(
            m.intercept,
            l2["intercept"].as_f64().unwrap(),
            epsilon = 1e-4
        );
        for (c, e) in m.coef.iter().zip(l2["coef"].as_array().unwrap()) {
            assert_abs_diff_eq!(*c, e.as_f64().unwrap(), epsilon = 1e-4);
        }
    }

    #[test]
    fn positive_class_is_one_whatever_row_order() {
        // Rows starting with a negative: linfa would take class 0 as positive.
        let rows = vec![
            vec![-1.0],
            vec![1.0],
            vec![-2.0],
            vec![2.0],
            vec![0.5],
            vec![-0.5],
        ];
        let y = [false, true, false, true, false, true];
        let a = LogisticModel::fit(&rows, &y, 1.0).unwrap();
        let mut rows_b = rows.clone();
        rows_b.reverse();
        let mut yb = y;
        yb.reverse();
        let b = LogisticModel::fit(&rows_b, &yb, 1.0).unwrap();
        assert!(a.coef[0] > 0.0 && b.coef[0] > 0.0);
        assert_abs_diff_eq!(a.coef[0], b.coef[0], epsilon = 1e-5);
    }

    #[test]
    fn multinomial_probabilities_sum_to_one() {
        let rows: Vec<Vec<f64>> = (0..40)
            .map(|i| vec![(i % 4) as f64 + 0.1 * (i as f64).sin()])
            .collect();
        let y: Vec<usize> = (0..40).map(|i| i % 4).collect();
        let m = MultinomialModel::fit(&rows, &y, 1.0).unwrap();
        let p = m.probabilities(&[3.0]);
        assert_abs_diff_eq!(p.iter().sum::<f64>(), 1.0, epsilon = 1e-9);
        assert!(p[3] > p[0]);
    }
}
