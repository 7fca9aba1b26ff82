//! Probability calibration: Platt scaling (Platt 1999) and isotonic regression by
//! pool-adjacent-violators (Zadrozny & Elkan 2002).

use serde::{Deserialize, Serialize};

use crate::logistic::{logit, sigmoid};

/// Platt's smoothed targets `((N+ + 1)/(N+ + 2), 1/(N- + 2))` for positives and negatives
/// (Platt 1999), which keep the fit finite on separable scores.
pub fn platt_targets(n_pos: usize, n_neg: usize) -> (f64, f64) {
    (
        (n_pos as f64 + 1.0) / (n_pos as f64 + 2.0),
        1.0 / (n_neg as f64 + 2.0),
    )
}

/// Platt scaling `p = 1 / (1 + exp(a * s + b))` of a score `s`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PlattModel {
    /// Slope (negative when higher scores mean more likely positive).
    pub a: f64,
    /// Offset.
    pub b: f64,
}

impl PlattModel {
    /// Fits `a`, `b` by Newton's method with backtracking on the smoothed targets, following
    /// the numerically careful version of Platt's procedure (Lin, Lin & Weng 2007).
    pub fn fit(scores: &[f64], y: &[bool]) -> Self {
        let n_pos = y.iter().filter(|&&v| v).count();
        let n_neg = y.len() - n_pos;
        let (hi, lo) = platt_targets(n_pos, n_neg);
        let t: Vec<f64> = y.iter().map(|&v| if v { hi } else { lo }).collect();
        let objective = |a: f64, b: f64| -> f64 {
            scores
                .iter()
                .zip(&t)
                .map(|(&s, &ti)| {
                    let f = s * a + b;
                    if f >= 0.0 {
                        ti * f + (-f).exp().ln_1p()
                    } else {
                        (ti - 1.0) * f + f.exp().ln_1p()
                    }
                })
                .sum()
        };
        let mut a = 0.0;
        let mut b = ((n_neg as f64 + 1.0) / (n_pos as f64 + 1.0)).ln();
        let mut fval = objective(a, b);
        for _ in 0..100 {
            let (mut h11, mut h22, mut h21, mut g1, mut g2) = (1e-12, 1e-12, 0.0, 0.0, 0.0);
            for (&s, &ti) in scores.iter().zip(&t) {
                let f = s * a + b;
                // p = P(positive), q = 1 - p, computed without overflow.
                let (p, q) = if f >= 0.0 {
                    let e = (-f).exp();
                    (e / (1.0 + e), 1.0 / (1.0 + e))
                } else {
                    let e = f.exp();
                    (1.0 / (1.0 + e), e / (1.0 + e))
                };
                let d2 = p * q;
                h11 += s * s * d2;
                h22 += d2;
                h21 += s * d2;
                let d1 = ti - p;
                g1 += s * d1;
                g2 += d1;
            }
            if g1.abs() < 1e-9 && g2.abs() < 1e-9 {
                break;
            }
            let det = h11 * h22 - h21 * h21;
            let da = -(h22 * g1 - h21 * g2) / det;
            let db = -(-h21 * g1 + h11 * g2) / det;
            let gd = g1 * da + g2 * db;
            let mut step = 1.0;
            while step >= 1e-10 {
                let (na, nb) = (a + step * da, b + step * db);
                let nf = objective(na, nb);
                if nf < fval + 1e-4 * step * gd {
                    a = na;
                    b = nb;
                    fval = nf;
                    break;
                }
                step /= 2.0;
            }
            if step < 1e-10 {
                break;
            }
        }
        PlattModel { a, b }
    }

    /// Calibrated probability of a score.
    pub fn apply(&self, score: f64) -> f64 {
        sigmoid(-(self.a * score + self.b))
    }
}

/// Pool-adjacent-violators: the non-decreasing sequence closest to `y` in weighted least
/// squares (Ayer et al. 1955; used for calibration by Zadrozny & Elkan 2002).
pub fn pav(y: &[f64], w: &[f64]) -> Vec<f64> {
    // Blocks of (weighted mean, weight, count), merged while the order is violated.
    let mut blocks: Vec<(f64, f64, usize)> = Vec::with_capacity(y.len());
    for (&v, &wi) in y.iter().zip(w) {
        blocks.push((v, wi, 1));
        while blocks.len() > 1 {
            let (m2, w2, c2) = blocks[blocks.len() - 1];
            let (m1, w1, c1) = blocks[blocks.len() - 2];
            if m1 <= m2 {
                break;
            }
            blocks.pop();
            let wsum = w1 + w2;
            *blocks.last_mut().expect("two blocks") = ((m1 * w1 + m2 * w2) / wsum, wsum, c1 + c2);
        }
    }
    blocks
        .into_iter()
        .flat_map(|(m, _, c)| std::iter::repeat_n(m, c))
        .collect()
}

/// Isotonic regression of outcomes on scores, predicted by linear interpolation between the
/// fitted points and clipped to their range outside it (as scikit-learn's
/// `IsotonicRegression(out_of_bounds="clip")`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IsotonicModel {
    /// Distinct scores, increasing.
    pub x: Vec<f64>,
    /// Fitted non-decreasing values at `x`.
    pub y: Vec<f64>,
}

impl IsotonicModel {
    /// Fits on scores `x` and outcomes `y` (0/1 or any reals), equal weights.
    pub fn fit(x: &[f64], y: &[f64]) -> Self {
        let mut order: Vec<usize> = (0..x.len()).collect();
        order.sort_by(|&i, &j| x[i].total_cmp(&x[j]).then(y[i].total_cmp(&y[j])));
        // Tied scores are merged into their mean outcome with summed weight first.
        let (mut ux, mut uy, mut uw) = (Vec::new(), Vec::new(), Vec::new());
        for &i in &order {
            if ux.last() == Some(&x[i]) {
                let k = uy.len() - 1;
                uy[k] += y[i];
                uw[k] += 1.0;
            } else {
                ux.push(x[i]);
                uy.push(y[i]);
                uw.push(1.0);
            }
        }
        for (s, w) in uy.iter_mut().zip(&uw) {
            *s /= w;
        }
        let fitted = pav(&uy, &uw);
        IsotonicModel { x: ux, y: fitted }
    }

    /// Interpolated value at `v`.
    pub fn predict(&self, v: f64) -> f64 {
        let n = self.x.len();
        if n == 0 {
            return 0.5;
        }
        if v <= self.x[0] {
            return self.y[0];
        }
        if v >= self.x[n - 1] {
            return self.y[n - 1];
        }
        let k = self.x.partition_point(|&t| t <= v);
        let (x0, x1, y0, y1) = (self.x[k - 1], self.x[k], self.y[k - 1], self.y[k]);
        y0 + (y1 - y0) * (v - x0) / (x1 - x0)
    }
}

/// A fitted map from raw model probability to calibrated probability.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum Calibrator {
    /// Platt scaling applied to the log-odds of the raw probability.
    Platt(PlattModel),
    /// Isotonic regression on the raw probability, kept within `[floor, 1 - floor]` with
    /// `floor = 1 / (n + 2)` so that a single surprise cannot cost infinite log-loss.
    Isotonic {
        /// The fitted step function.
        model: IsotonicModel,
        /// Smallest probability returned.
        floor: f64,
    },
}

impl Calibrator {
    /// Fits Platt scaling on the raw probabilities' log-odds.
    pub fn fit_platt(raw: &[f64], y: &[bool]) -> Self {
        let s: Vec<f64> = raw.iter().map(|&p| logit(p)).collect();
        Calibrator::Platt(PlattModel::fit(&s, y))
    }

    /// Fits isotonic regression on the raw probabilities.
    pub fn fit_isotonic(raw: &[f64], y: &[bool]) -> Self {
        let t: Vec<f64> = y.iter().map(|&v| f64::from(u8::from(v))).collect();
        Calibrator::Isotonic {
            model: IsotonicModel::fit(raw, &t),
            floor: 1.0 / (raw.len() as f64 + 2.0),
        }
    }

    /// Calibrated probability of a raw probability.
    pub fn apply(&self, raw: f64) -> f64 {
        match self {
            Calibrator::Platt(m) => m.apply(logit(raw)),
            Calibrator::Isotonic { model, floor } => model.predict(raw).clamp(*floor, 1.0 - floor),
        }
    }

    /// Name used in the model card.
    pub fn name(&self) -> &'static str {
        match self {
            Calibrator::Platt(_) => "platt",
            Calibrator::Isotonic { .. } => "isotonic",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tests_support::{fixture, floats};
    use approx::assert_abs_diff_eq;

    #[test]
    fn pav_pools_the_single_violation() {
        // Worked example: [1, 3, 2, 4] -> [1, 2.5, 2.5, 4] (pool-adjacent-violators,
        // Ayer et al. 1955; common textbook example).
        let out = pav(&[1.0, 3.0, 2.0, 4.0], &[1.0; 4]);
        for (a, b) in out.iter().zip([1.0, 2.5, 2.5, 4.0]) {
            assert_abs_diff_eq!(*a, b, epsilon = 1e-12);
        }
    }

    #[test]
    fn isotonic_matches_sklearn() {
        // scikit-learn 1.5.2 IsotonicRegression(out_of_bounds="clip"); fixture from
        // tests/reference/classifier_sklearn.py.
        let fx = fixture();
        let iso = &fx["isotonic"];
        let m = IsotonicModel::fit(&floats(&iso["x"]), &floats(&iso["y"]));
        for (q, e) in floats(&iso["query"]).iter().zip(floats(&iso["predicted"])) {
            assert_abs_diff_eq!(m.predict(*q), e, epsilon = 1e-10);
        }
    }

    #[test]
    fn platt_targets_follow_platt_1999() {
        // Platt 1999: targets (N+ + 1)/(N+ + 2) and 1/(N- + 2).
        let (hi, lo) = platt_targets(8, 18);
        assert_abs_diff_eq!(hi, 9.0 / 10.0, epsilon = 1e-15);
        assert_abs_diff_eq!(lo, 1.0 / 20.0, epsilon = 1e-15);
    }

    #[test]
    fn platt_fit_meets_smoothed_targets_on_average() {
        // At the optimum of the cross-entropy against Platt's targets the gradient in b is
        // zero, so the mean fitted probability equals the mean target (Platt 1999). Here the
        // scores separate perfectly; without smoothing the fit would diverge.
        let s = [-3.0, -2.0, -1.5, -1.0, 1.0, 2.0, 2.5];
        let y = [false, false, false, false, true, true, true];
        let m = PlattModel::fit(&s, &y);
        let (hi, lo) = platt_targets(3, 4);
        let mean_p: f64 = s.iter().map(|&v| m.apply(v)).sum::<f64>() / 7.0;
        assert_abs_diff_eq!(mean_p, (3.0 * hi + 4.0 * lo) / 7.0, epsilon = 1e-8);
        assert!(m.a.is_finite() && m.a < 0.0);
    }

    #[test]
    fn platt_matches_sklearn_sigmoid_calibration() {
        // scikit-learn 1.5.2 sklearn.calibration._sigmoid_calibration (Platt's method with the
        // same targets), fixture from tests/reference/classifier_sklearn.py.
        let fx = fixture();
        let pl = &fx["platt"];
        let y: Vec<bool> = floats(&pl["y"]).iter().map(|&v| v > 0.5).collect();
        let m = PlattModel::fit(&floats(&pl["scores"]), &y);
        assert_abs_diff_eq!(m.a, pl["a"].as_f64().unwrap(), epsilon = 1e-4);
        assert_abs_diff_eq!(m.b, pl["b"].as_f64().unwrap(), epsilon = 1e-4);
    }
}
