//! Training settings: the candidate model families and the fit configuration, with defaults.
//!
//! `validate` checks a training set against the settings once, before any fitting.

use serde::{Deserialize, Serialize};

use crate::boost::BoostParams;
use crate::forest::ForestParams;
use crate::verdict::VerdictPolicy;
use crate::{ModelError, SpecIdentity, TrainingSet};

/// A model family tried during selection.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Candidate {
    /// Logistic regression with L2 penalty `alpha` (linfa-logistic).
    Logistic {
        /// Penalty weight on the summed log-loss (scikit-learn's `C = 1/alpha`).
        alpha: f64,
    },
    /// Bagged smartcore decision trees with vote-fraction probabilities.
    Forest(ForestParams),
    /// Gradient-boosted regression trees on the log-loss.
    Boost(BoostParams),
    /// The mean of a logistic regression's and boosted trees' probabilities: the linear model
    /// carries the trends that hold across systems, the trees the interactions.
    Blend {
        /// The logistic regression's L2 penalty.
        alpha: f64,
        /// The boosted trees' settings.
        boost: BoostParams,
    },
}

impl Candidate {
    /// Human-readable name used in the model card.
    pub fn name(&self) -> String {
        match self {
            Candidate::Logistic { alpha } => format!("logistic regression (L2, alpha = {alpha})"),
            Candidate::Forest(p) => format!(
                "tree ensemble ({} trees, depth <= {}, leaf >= {}, {:.0}% of columns per tree)",
                p.trees,
                p.max_depth,
                p.min_leaf,
                100.0 * p.feature_fraction
            ),
            Candidate::Boost(b) => boost_name(b),
            Candidate::Blend { alpha, boost } => format!(
                "mean of logistic regression (L2, alpha = {alpha}) and {}",
                boost_name(boost)
            ),
        }
    }
}

fn boost_name(b: &BoostParams) -> String {
    format!(
        "boosted trees ({} trees, depth <= {}, rate {}, L2 {}, {:.0}% of rows per tree)",
        b.trees,
        b.max_depth,
        b.learning_rate,
        b.l2,
        100.0 * b.subsample
    )
}

/// Settings of [`fit`](fn@super::fit).
#[derive(Debug, Clone, PartialEq)]
pub struct FitConfig {
    /// Seed of every random choice (splits, bootstraps).
    pub seed: u64,
    /// Columns of the curve-only head, by feature name; empty = no curve-only head.
    pub curve_only_names: Vec<String>,
    /// Candidate models; the first wins ties.
    pub candidates: Vec<Candidate>,
    /// Share of systems held out for calibration (0 < f < 1).
    pub calibration_fraction: f64,
    /// Training percentile of the out-of-distribution distance used as threshold.
    pub ood_percentile: f64,
    /// Shrinkage of the covariance towards the identity for the distance (0 < s <= 1).
    pub ood_shrinkage: f64,
    /// Verdict policy stored in the bundle and used for the review rate in validation.
    pub policy: VerdictPolicy,
    /// Whether to fit the four-label head.
    pub fine_head: bool,
    /// L2 penalty of the four-label head.
    pub fine_alpha: f64,
    /// The simulator spec the rows came from.
    pub spec: SpecIdentity,
    /// Fewest complete rows a head may be trained on.
    pub min_rows: usize,
    /// Name of the validation suite given to [`fit_with_suite`](crate::fit_with_suite) (for the card).
    pub suite_name: String,
}

impl FitConfig {
    /// Steps a fit reports to [`fit_with_progress`](crate::fit_with_progress): one per
    /// candidate of each head (the full head, and the curve-only head when it has columns).
    pub fn fit_steps(&self) -> usize {
        let heads = 1 + usize::from(!self.curve_only_names.is_empty());
        heads * self.candidates.len()
    }
}

impl Default for FitConfig {
    fn default() -> Self {
        FitConfig {
            seed: 1,
            curve_only_names: Vec::new(),
            candidates: vec![
                Candidate::Logistic { alpha: 10.0 },
                Candidate::Logistic { alpha: 100.0 },
                Candidate::Forest(ForestParams {
                    trees: 60,
                    max_depth: 6,
                    min_leaf: 3,
                    feature_fraction: 0.6,
                }),
                Candidate::Boost(BoostParams::default()),
                Candidate::Blend {
                    alpha: 100.0,
                    boost: BoostParams::default(),
                },
            ],
            calibration_fraction: 0.3,
            ood_percentile: 99.0,
            ood_shrinkage: 0.1,
            policy: VerdictPolicy::default(),
            fine_head: true,
            fine_alpha: 1.0,
            spec: SpecIdentity::default(),
            min_rows: 20,
            suite_name: String::new(),
        }
    }
}

/// Checks the training set and the settings once, before any fitting.
pub(crate) fn validate(set: &TrainingSet, cfg: &FitConfig) -> Result<(), ModelError> {
    let n = set.rows.len();
    if n == 0 {
        return Err(ModelError::EmptyTrainingSet);
    }
    for (what, len) in [
        ("labels", set.labels.len()),
        ("families", set.families.len()),
        ("systems", set.systems.len()),
    ] {
        if len != n {
            return Err(ModelError::LengthMismatch {
                what,
                expected: n,
                found: len,
            });
        }
    }
    let d = set.feature_names.len();
    for (i, name) in set.feature_names.iter().enumerate() {
        if set.feature_names[..i].contains(name) {
            return Err(ModelError::DuplicateFeature { name: name.clone() });
        }
    }
    for (r, row) in set.rows.iter().enumerate() {
        if row.len() != d {
            return Err(ModelError::RowWidth {
                row: r,
                expected: d,
                found: row.len(),
            });
        }
        for (c, v) in row.iter().enumerate() {
            if let Some(v) = v
                && !v.is_finite()
            {
                return Err(ModelError::NonFinite {
                    row: r,
                    column: set.feature_names[c].clone(),
                });
            }
        }
    }
    for name in &cfg.curve_only_names {
        if !set.feature_names.contains(name) {
            return Err(ModelError::UnknownCurveOnlyFeature { name: name.clone() });
        }
    }
    let bad = |option: &'static str, reason: &str| {
        Err(ModelError::InvalidConfig {
            option,
            reason: reason.to_string(),
        })
    };
    if cfg.candidates.is_empty() {
        return bad("candidates", "list at least one candidate model");
    }
    if !(cfg.calibration_fraction > 0.0 && cfg.calibration_fraction < 1.0) {
        return bad(
            "calibration_fraction",
            "must lie strictly between 0 and 1, e.g. 0.3",
        );
    }
    if !(cfg.ood_percentile > 0.0 && cfg.ood_percentile <= 100.0) {
        return bad("ood_percentile", "must lie in (0, 100], e.g. 99");
    }
    if !(cfg.ood_shrinkage > 0.0 && cfg.ood_shrinkage <= 1.0) {
        return bad("ood_shrinkage", "must lie in (0, 1], e.g. 0.1");
    }
    let (lo, hi) = cfg.policy.band;
    if !(0.0..=0.5).contains(&lo) || !(0.5..=1.0).contains(&hi) {
        return bad(
            "policy.band",
            "needs 0 <= lo <= 0.5 <= hi <= 1, e.g. (0.3, 0.7)",
        );
    }
    for c in &cfg.candidates {
        match c {
            Candidate::Logistic { alpha } if !(*alpha >= 0.0 && alpha.is_finite()) => {
                return bad("candidates", "a logistic alpha must be finite and >= 0");
            }
            Candidate::Forest(p)
                if p.trees == 0
                    || p.max_depth == 0
                    || !(p.feature_fraction > 0.0 && p.feature_fraction <= 1.0) =>
            {
                return bad(
                    "candidates",
                    "a tree ensemble needs trees >= 1, depth >= 1, 0 < feature_fraction <= 1",
                );
            }
            Candidate::Boost(b) | Candidate::Blend { boost: b, .. }
                if b.trees == 0
                    || b.max_depth == 0
                    || !(b.learning_rate > 0.0 && b.learning_rate <= 1.0)
                    || !(b.l2 >= 0.0 && b.l2.is_finite())
                    || !(b.subsample > 0.0 && b.subsample <= 1.0)
                    || b.bins < 2 =>
            {
                return bad(
                    "candidates",
                    "boosted trees need trees >= 1, depth >= 1, 0 < rate <= 1, l2 >= 0, 0 < subsample <= 1, bins >= 2",
                );
            }
            Candidate::Blend { alpha, .. } if !(*alpha >= 0.0 && alpha.is_finite()) => {
                return bad("candidates", "a logistic alpha must be finite and >= 0");
            }
            _ => {}
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tests_support::synthetic;

    #[test]
    fn bad_inputs_are_typed_errors() {
        let mut set = synthetic(1, 2, 3);
        let cfg = FitConfig::default();
        set.systems.pop();
        assert!(matches!(
            validate(&set, &cfg),
            Err(ModelError::LengthMismatch {
                what: "systems",
                ..
            })
        ));
        let set = synthetic(1, 2, 3);
        let cfg2 = FitConfig {
            curve_only_names: vec!["nope".into()],
            ..FitConfig::default()
        };
        assert!(matches!(
            validate(&set, &cfg2),
            Err(ModelError::UnknownCurveOnlyFeature { .. })
        ));
        let cfg3 = FitConfig {
            calibration_fraction: 1.5,
            ..FitConfig::default()
        };
        assert!(matches!(
            validate(&set, &cfg3),
            Err(ModelError::InvalidConfig {
                option: "calibration_fraction",
                ..
            })
        ));
        assert!(matches!(
            validate(&TrainingSet::default(), &cfg),
            Err(ModelError::EmptyTrainingSet)
        ));
    }
}
