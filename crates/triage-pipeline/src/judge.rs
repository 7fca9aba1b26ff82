//! Verdicts: a model's calibrated probability plus the data-quality review rules.

use verdict_model::{ModelBundle, Reason, Verdict, VerdictPolicy, decide, decide_unusable};

use crate::PairRecord;

/// The call on one pair.
#[derive(Debug, Clone, PartialEq)]
pub struct Judgement {
    /// Calibrated probability that the driver drives the response (NaN when no head could
    /// score the pair; the verdict is then `review` with reason `missing-features`).
    pub p_causal: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// Why the pair goes to review (empty otherwise).
    pub reasons: Vec<Reason>,
    /// Which model head answered (`full`, `curve-only`), or `none`.
    pub head: &'static str,
    /// Distance from the training data (the model's own scale).
    pub ood_score: f64,
    /// Distance above which the pair counts as unfamiliar (the head's training percentile).
    pub ood_threshold: f64,
    /// Probabilities of direct, indirect, confounded, independent, when the model has that head.
    pub fine: Option<[f64; 4]>,
}

/// Judge every record with `model` under `policy`.
pub fn judge(
    records: &[PairRecord],
    model: &ModelBundle,
    policy: &VerdictPolicy,
) -> Result<Vec<Judgement>, verdict_model::ModelError> {
    model.check_schema(&ensemble_features::schema_hash())?;
    let names: Vec<String> = ensemble_features::names()
        .into_iter()
        .map(String::from)
        .collect();
    records
        .iter()
        .map(|record| match model.predict(&names, &record.features) {
            Ok(pred) => {
                let (verdict, reasons) = decide(&pred, &record.quality, policy);
                Ok(Judgement {
                    p_causal: pred.p_causal,
                    verdict,
                    reasons,
                    head: pred.head.as_str(),
                    ood_score: pred.ood_score,
                    ood_threshold: pred.ood_threshold,
                    fine: pred.fine,
                })
            }
            Err(verdict_model::ModelError::MissingFeatures { .. }) => {
                let (verdict, reasons) = decide_unusable(&record.quality);
                Ok(Judgement {
                    p_causal: f64::NAN,
                    verdict,
                    reasons,
                    head: "none",
                    ood_score: f64::NAN,
                    ood_threshold: f64::NAN,
                    fine: None,
                })
            }
            Err(e) => Err(e),
        })
        .collect()
}

/// The conventional rule of thumb (common practice): causal when the mean skill at the largest
/// library size is above 0.1 and the mean curve rises significantly with library size by a
/// Kendall trend test (tau > 0, two-sided p < 0.05).
pub fn rule_of_thumb(record: &PairRecord) -> bool {
    let ens = &record.evidence.forward;
    let means: Vec<f64> = ens
        .skills
        .iter()
        .map(|row| {
            let v: Vec<f64> = row.iter().copied().filter(|s| s.is_finite()).collect();
            if v.is_empty() {
                f64::NAN
            } else {
                v.iter().sum::<f64>() / v.len() as f64
            }
        })
        .collect();
    let sizes: Vec<f64> = ens.library_sizes.iter().map(|&l| l as f64).collect();
    let (x, y): (Vec<f64>, Vec<f64>) = sizes
        .iter()
        .zip(&means)
        .filter(|(_, m)| m.is_finite())
        .map(|(a, b)| (*a, *b))
        .unzip();
    let Some(last) = y.last() else {
        return false;
    };
    let trend = ensemble_features::trend::kendall_tau_b(&x, &y);
    *last > 0.1 && trend.is_some_and(|t| t.tau > 0.0 && t.p_value < 0.05)
}
