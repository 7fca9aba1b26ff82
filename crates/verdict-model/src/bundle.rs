//! The fitted model as one value: both heads, the optional four-label head, the default
//! policy and the card; prediction with feature-name checks and head choice.

use serde::{Deserialize, Serialize};

use crate::fit::HeadModel;
use crate::logistic::MultinomialModel;
use crate::verdict::VerdictPolicy;
use crate::{Head, ModelCard, ModelError, Prediction, SpecIdentity};

/// The four-label head; reads the full head's standardised columns.
#[derive(Debug, Serialize, Deserialize)]
pub struct FineHead {
    /// Softmax regression over the fine labels.
    pub model: MultinomialModel,
}

/// A trained classifier, ready to predict and to be written as a model file.
#[derive(Debug, Serialize, Deserialize)]
pub struct ModelBundle {
    /// Feature names in the training column order.
    pub feature_names: Vec<String>,
    /// Hash of the feature schema the model was trained under.
    pub schema_hash: String,
    /// The simulator spec it was trained from.
    pub spec: SpecIdentity,
    /// Head over every column.
    pub full: HeadModel,
    /// Head over the curve-only columns, if any were named.
    pub curve_only: Option<HeadModel>,
    /// Four-label head, if fitted.
    pub fine: Option<FineHead>,
    /// Policy the model was validated with.
    pub policy: VerdictPolicy,
    /// Model card.
    pub card: ModelCard,
}

impl ModelBundle {
    /// The policy stored at training time (the caller may override its band).
    pub fn default_policy(&self) -> VerdictPolicy {
        self.policy
    }

    /// The model card.
    pub fn card(&self) -> &ModelCard {
        &self.card
    }

    /// Errors with [`ModelError::SchemaMismatch`] unless `schema_hash` is the model's.
    pub fn check_schema(&self, schema_hash: &str) -> Result<(), ModelError> {
        if schema_hash == self.schema_hash {
            Ok(())
        } else {
            Err(ModelError::SchemaMismatch {
                expected: self.schema_hash.clone(),
                found: schema_hash.to_string(),
            })
        }
    }

    /// Scores one row given by name. Names must be known to the model (any order, any
    /// subset); an absent name counts as unavailable. The full head answers when all its
    /// features are present, else the curve-only head, else [`ModelError::MissingFeatures`].
    pub fn predict(
        &self,
        feature_names: &[String],
        row: &[Option<f64>],
    ) -> Result<Prediction, ModelError> {
        if feature_names.len() != row.len() {
            return Err(ModelError::RowLength {
                expected: feature_names.len(),
                found: row.len(),
            });
        }
        let mut values: Vec<Option<f64>> = vec![None; self.feature_names.len()];
        let mut seen = vec![false; self.feature_names.len()];
        for (name, v) in feature_names.iter().zip(row) {
            let k = self
                .feature_names
                .iter()
                .position(|n| n == name)
                .ok_or_else(|| ModelError::UnknownFeature { name: name.clone() })?;
            if seen[k] {
                return Err(ModelError::DuplicateFeature { name: name.clone() });
            }
            seen[k] = true;
            if let Some(x) = v
                && !x.is_finite()
            {
                return Err(ModelError::NonFinite {
                    row: 0,
                    column: name.clone(),
                });
            }
            values[k] = *v;
        }
        let gather = |h: &HeadModel| -> Result<Vec<f64>, Vec<String>> {
            let missing: Vec<String> = h
                .columns
                .iter()
                .filter(|&&c| values[c].is_none())
                .map(|&c| self.feature_names[c].clone())
                .collect();
            if missing.is_empty() {
                Ok(h.columns
                    .iter()
                    .map(|&c| values[c].expect("present"))
                    .collect())
            } else {
                Err(missing)
            }
        };
        let (head, x) = match gather(&self.full) {
            Ok(x) => (&self.full, x),
            Err(missing_full) => match self.curve_only.as_ref().map(|h| (h, gather(h))) {
                Some((h, Ok(x))) => (h, x),
                Some((_, Err(missing))) => return Err(ModelError::MissingFeatures { missing }),
                None => {
                    return Err(ModelError::MissingFeatures {
                        missing: missing_full,
                    });
                }
            },
        };
        let (p, d) = head.score(std::slice::from_ref(&x))?;
        let fine = match (&self.fine, head.head) {
            (Some(f), Head::Full) => Some(f.model.probabilities(&head.standardiser.apply(&x))),
            _ => None,
        };
        Ok(Prediction {
            p_causal: p[0],
            head: head.head,
            ood_score: d[0],
            ood: head.ood.is_unfamiliar(d[0]),
            ood_threshold: head.ood.threshold,
            fine,
        })
    }
}
