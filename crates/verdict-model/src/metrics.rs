//! Scores of probabilistic binary predictions: ROC AUC, Brier score, calibration error,
//! log-loss, accuracy, and the summary figures a model card and `evaluate` report.

use serde::{Deserialize, Serialize};

use crate::FineLabel;

/// Area under the ROC curve by the Mann-Whitney rank statistic, ties counted half
/// (Hanley & McNeil 1982). `None` when `y` holds a single class.
pub fn roc_auc(p: &[f64], y: &[bool]) -> Option<f64> {
    let n_pos = y.iter().filter(|&&v| v).count();
    let n_neg = y.len() - n_pos;
    if n_pos == 0 || n_neg == 0 {
        return None;
    }
    let mut order: Vec<usize> = (0..p.len()).collect();
    order.sort_by(|&i, &j| p[i].total_cmp(&p[j]));
    // Mid-ranks (1-based) of tied groups.
    let mut rank_sum_pos = 0.0;
    let mut i = 0;
    while i < order.len() {
        let mut j = i;
        while j + 1 < order.len() && p[order[j + 1]] == p[order[i]] {
            j += 1;
        }
        let mid = (i + j) as f64 / 2.0 + 1.0;
        for &k in &order[i..=j] {
            if y[k] {
                rank_sum_pos += mid;
            }
        }
        i = j + 1;
    }
    let u = rank_sum_pos - (n_pos * (n_pos + 1)) as f64 / 2.0;
    Some(u / (n_pos as f64 * n_neg as f64))
}

/// Mean squared difference between probability and outcome (Brier 1950).
pub fn brier(p: &[f64], y: &[bool]) -> f64 {
    let n = p.len().max(1) as f64;
    p.iter()
        .zip(y)
        .map(|(&pi, &yi)| (pi - f64::from(u8::from(yi))).powi(2))
        .sum::<f64>()
        / n
}

/// Mean negative log-likelihood, probabilities clipped to `[eps, 1 - eps]` with machine
/// epsilon (as scikit-learn 1.5's `log_loss`).
pub fn log_loss(p: &[f64], y: &[bool]) -> f64 {
    let n = p.len().max(1) as f64;
    let eps = f64::EPSILON;
    p.iter()
        .zip(y)
        .map(|(&pi, &yi)| {
            let q = pi.clamp(eps, 1.0 - eps);
            if yi { -q.ln() } else { -(1.0 - q).ln() }
        })
        .sum::<f64>()
        / n
}

/// Share of rows where `p >= 0.5` agrees with the outcome.
pub fn accuracy(p: &[f64], y: &[bool]) -> f64 {
    let n = p.len().max(1) as f64;
    p.iter()
        .zip(y)
        .filter(|(pi, yi)| (**pi >= 0.5) == **yi)
        .count() as f64
        / n
}

/// One bin of a reliability diagram.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ReliabilityBin {
    /// Lower edge.
    pub lo: f64,
    /// Upper edge.
    pub hi: f64,
    /// Rows in the bin.
    pub count: usize,
    /// Mean predicted probability in the bin (0 when empty).
    pub mean_predicted: f64,
    /// Share of positives in the bin (0 when empty).
    pub observed: f64,
}

/// Equal-width bins on [0, 1]; a probability on an inner edge goes to the lower bin, as in
/// scikit-learn's `calibration_curve(strategy="uniform")`.
pub fn reliability_bins(p: &[f64], y: &[bool], bins: usize) -> Vec<ReliabilityBin> {
    let bins = bins.max(1);
    let mut count = vec![0usize; bins];
    let mut sum_p = vec![0.0; bins];
    let mut sum_y = vec![0.0; bins];
    for (&pi, &yi) in p.iter().zip(y) {
        let b = (1..bins).filter(|&k| (k as f64 / bins as f64) < pi).count();
        count[b] += 1;
        sum_p[b] += pi;
        sum_y[b] += f64::from(u8::from(yi));
    }
    (0..bins)
        .map(|b| {
            let c = count[b];
            let d = c.max(1) as f64;
            ReliabilityBin {
                lo: b as f64 / bins as f64,
                hi: (b + 1) as f64 / bins as f64,
                count: c,
                mean_predicted: sum_p[b] / d,
                observed: sum_y[b] / d,
            }
        })
        .collect()
}

/// Expected calibration error over `bins` equal-width bins: the row-weighted mean of
/// |mean predicted - observed share| (Naeini, Cooper & Hauskrecht 2015).
pub fn expected_calibration_error(p: &[f64], y: &[bool], bins: usize) -> f64 {
    let n = p.len().max(1) as f64;
    reliability_bins(p, y, bins)
        .iter()
        .map(|b| b.count as f64 / n * (b.mean_predicted - b.observed).abs())
        .sum()
}

/// Accuracy within one family.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FamilyScore {
    /// Family name.
    pub family: String,
    /// Rows.
    pub n: usize,
    /// Share of rows where `p >= 0.5` agrees with the truth.
    pub accuracy: f64,
}

/// The figures a model card and `evaluate` report for a set of predictions.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Summary {
    /// Rows scored.
    pub n: usize,
    /// Causal rows among them.
    pub n_causal: usize,
    /// ROC AUC (absent with a single class).
    pub roc_auc: Option<f64>,
    /// Accuracy of `p >= 0.5`.
    pub accuracy: f64,
    /// Brier score.
    pub brier: f64,
    /// Expected calibration error, 10 equal-width bins.
    pub ece: f64,
    /// Log-loss.
    pub log_loss: f64,
    /// Share of confounded pairs with `p >= 0.5` (absent without confounded pairs).
    pub fpr_confounded: Option<f64>,
    /// Share of direct pairs with `p >= 0.5` (absent without direct pairs).
    pub recall_direct: Option<f64>,
    /// Share of confounded pairs whose verdict is `causal` (review counts as not called).
    pub fpr_confounded_verdict: Option<f64>,
    /// Share of direct pairs whose verdict is `causal` (review counts as not called).
    pub recall_direct_verdict: Option<f64>,
    /// Share of rows sent to review.
    pub review_rate: f64,
    /// Accuracy per family, families in sorted order.
    pub per_family: Vec<FamilyScore>,
}

fn share(it: impl Iterator<Item = bool>) -> Option<f64> {
    let (mut n, mut k) = (0usize, 0usize);
    for b in it {
        n += 1;
        k += usize::from(b);
    }
    (n > 0).then(|| k as f64 / n as f64)
}

/// Summarises calibrated probabilities `p` against fine labels; `review[i]` says whether row
/// `i`'s verdict was `review`. Causal truth is [`FineLabel::is_causal`].
pub fn summarise(p: &[f64], labels: &[FineLabel], families: &[String], review: &[bool]) -> Summary {
    let y: Vec<bool> = labels.iter().map(|l| l.is_causal()).collect();
    let called = |i: usize| p[i] >= 0.5 && !review[i];
    let of = |lab: FineLabel| (0..p.len()).filter(move |&i| labels[i] == lab);
    let mut fams: Vec<&String> = families.iter().collect();
    fams.sort();
    fams.dedup();
    let per_family = fams
        .into_iter()
        .map(|f| {
            let idx: Vec<usize> = (0..p.len()).filter(|&i| &families[i] == f).collect();
            FamilyScore {
                family: f.clone(),
                n: idx.len(),
                accuracy: share(idx.iter().map(|&i| (p[i] >= 0.5) == y[i])).unwrap_or(0.0),
            }
        })
        .collect();
    Summary {
        n: p.len(),
        n_causal: y.iter().filter(|&&v| v).count(),
        roc_auc: roc_auc(p, &y),
        accuracy: accuracy(p, &y),
        brier: brier(p, &y),
        ece: expected_calibration_error(p, &y, 10),
        log_loss: log_loss(p, &y),
        fpr_confounded: share(of(FineLabel::Confounded).map(|i| p[i] >= 0.5)),
        recall_direct: share(of(FineLabel::Direct).map(|i| p[i] >= 0.5)),
        fpr_confounded_verdict: share(of(FineLabel::Confounded).map(called)),
        recall_direct_verdict: share(of(FineLabel::Direct).map(called)),
        review_rate: share(review.iter().copied()).unwrap_or(0.0),
        per_family,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tests_support::{fixture, floats};
    use approx::assert_abs_diff_eq;

    fn scored() -> (Vec<f64>, Vec<bool>, serde_json::Value) {
        let fx = fixture();
        let m = fx["metrics"].clone();
        let p = floats(&m["p"]);
        let y = floats(&m["y"]).iter().map(|&v| v > 0.5).collect();
        (p, y, m)
    }

    #[test]
    fn roc_auc_matches_sklearn() {
        // scikit-learn 1.5.2 roc_auc_score, with tied scores in the fixture.
        let (p, y, m) = scored();
        assert_abs_diff_eq!(
            roc_auc(&p, &y).unwrap(),
            m["roc_auc"].as_f64().unwrap(),
            epsilon = 1e-12
        );
    }

    #[test]
    fn brier_and_log_loss_match_sklearn() {
        // scikit-learn 1.5.2 brier_score_loss and log_loss.
        let (p, y, m) = scored();
        assert_abs_diff_eq!(brier(&p, &y), m["brier"].as_f64().unwrap(), epsilon = 1e-12);
        assert_abs_diff_eq!(
            log_loss(&p, &y),
            m["log_loss"].as_f64().unwrap(),
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(
            accuracy(&p, &y),
            m["accuracy"].as_f64().unwrap(),
            epsilon = 1e-12
        );
    }

    #[test]
    fn calibration_error_matches_sklearn_calibration_curve() {
        // ECE from scikit-learn 1.5.2 calibration_curve(n_bins=10, strategy="uniform") and the
        // per-bin counts, computed in tests/reference/classifier_sklearn.py.
        let (p, y, m) = scored();
        assert_abs_diff_eq!(
            expected_calibration_error(&p, &y, 10),
            m["ece"].as_f64().unwrap(),
            epsilon = 1e-12
        );
        let bins = reliability_bins(&p, &y, 10);
        let nonempty: Vec<&ReliabilityBin> = bins.iter().filter(|b| b.count > 0).collect();
        for (b, (t, q)) in nonempty.iter().zip(
            floats(&m["prob_true"])
                .into_iter()
                .zip(floats(&m["prob_pred"])),
        ) {
            assert_abs_diff_eq!(b.observed, t, epsilon = 1e-12);
            assert_abs_diff_eq!(b.mean_predicted, q, epsilon = 1e-12);
        }
    }

    #[test]
    fn auc_extremes() {
        // Definition of ROC AUC: perfect ranking gives 1, all ties give 0.5.
        let y = [false, false, true, true];
        assert_abs_diff_eq!(roc_auc(&[0.1, 0.2, 0.8, 0.9], &y).unwrap(), 1.0);
        assert_abs_diff_eq!(roc_auc(&[0.5; 4], &y).unwrap(), 0.5);
        assert!(roc_auc(&[0.5; 2], &[true, true]).is_none());
    }
}
