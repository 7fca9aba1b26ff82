//! The fitted model as one value: both heads, the optional four-label head, the default
//! policy and the card; prediction with feature-name checks and head choice.

use serde::{Deserialize, Serialize};

use crate::heads::HeadModel;
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
        // Extreme inputs can overflow a standardised value; a probability that is not a
        // number is refused here rather than written into a result file.
        if !(0.0..=1.0).contains(&p[0]) {
            return Err(ModelError::Inconsistent {
                part: format!("the {} head", head.head.as_str()),
                reason: format!(
                    "it gave the probability {} for this row, whose values are far outside the training range",
                    p[0]
                ),
            });
        }
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

/// Load-time checks of a decoded bundle: every size and index the prediction code trusts.
///
/// A payload can pass its checksum (anyone can recompute it) and still describe a model whose
/// parts do not fit together; prediction indexes by these numbers without further checks, so
/// each one is checked here once, when the file is read.
mod checks {
    use crate::ModelError;
    use crate::calibrate::Calibrator;
    use crate::forest::BaggedTree;
    use crate::heads::{HeadModel, Scorer};

    pub(super) fn bad(part: impl Into<String>, reason: impl Into<String>) -> ModelError {
        ModelError::Inconsistent {
            part: part.into(),
            reason: reason.into(),
        }
    }

    pub(super) fn finite(part: &str, what: &str, v: &[f64]) -> Result<(), ModelError> {
        match v.iter().position(|x| !x.is_finite()) {
            None => Ok(()),
            Some(k) => Err(bad(part, format!("{what} entry {k} is {}", v[k]))),
        }
    }

    fn len(part: &str, what: &str, found: usize, expected: usize) -> Result<(), ModelError> {
        if found == expected {
            Ok(())
        } else {
            Err(bad(
                part,
                format!("{what} has {found} entries, the head reads {expected} columns"),
            ))
        }
    }

    /// One head against the bundle's `n_features` feature names.
    pub(super) fn head(h: &HeadModel, part: &str, n_features: usize) -> Result<(), ModelError> {
        let width = h.columns.len();
        if width == 0 {
            return Err(bad(part, "the head reads no columns"));
        }
        let mut seen = vec![false; n_features];
        for &c in &h.columns {
            if c >= n_features {
                return Err(bad(
                    part,
                    format!("column index {c} is beyond the {n_features} feature names"),
                ));
            }
            if std::mem::replace(&mut seen[c], true) {
                return Err(bad(part, format!("column index {c} appears twice")));
            }
        }
        let s = &h.standardiser;
        len(part, "the standardiser's means", s.mean.len(), width)?;
        len(part, "the standardiser's scales", s.scale.len(), width)?;
        finite(part, "the standardiser's means", &s.mean)?;
        // The fitter never stores a scale at or below 1e-12 (it uses 1 for a constant column).
        if let Some(k) = s.scale.iter().position(|&x| !(x.is_finite() && x > 1e-12)) {
            return Err(bad(
                part,
                format!(
                    "standardiser scale {k} is {}, not a number above 1e-12",
                    s.scale[k]
                ),
            ));
        }
        let logistic = |m: &crate::logistic::LogisticModel| -> Result<(), ModelError> {
            len(part, "the logistic coefficients", m.coef.len(), width)?;
            finite(part, "the logistic coefficients", &m.coef)?;
            finite(part, "the logistic intercept", &[m.intercept])
        };
        let boost = |b: &crate::boost::BoostModel| -> Result<(), ModelError> {
            if b.trees.is_empty() {
                return Err(bad(part, "the boosted trees have no trees"));
            }
            b.check(width).map_err(|e| bad(part, e))
        };
        match &h.scorer {
            Scorer::Logistic(m) => logistic(m)?,
            Scorer::Boost(b) => boost(b)?,
            Scorer::Blend(m, b) => {
                logistic(m)?;
                boost(b)?;
            }
            Scorer::Forest(f) => {
                if f.trees.is_empty() {
                    return Err(bad(part, "the tree ensemble has no trees"));
                }
                for (k, t) in f.trees.iter().enumerate() {
                    tree(t, &format!("{part}, tree {k}"), width)?;
                }
            }
        }
        match &h.calibrator {
            Calibrator::Platt(m) => finite(part, "the Platt parameters", &[m.a, m.b])?,
            Calibrator::Isotonic { model, floor } => {
                if !(0.0..0.5).contains(floor) {
                    return Err(bad(
                        part,
                        format!("isotonic floor {floor} is outside [0, 0.5)"),
                    ));
                }
                if model.x.len() != model.y.len() || model.x.is_empty() {
                    return Err(bad(
                        part,
                        format!(
                            "the isotonic table has {} scores and {} values; it needs the same positive number of each",
                            model.x.len(),
                            model.y.len()
                        ),
                    ));
                }
                finite(part, "the isotonic scores", &model.x)?;
                if model.x.windows(2).any(|w| w[0] >= w[1]) {
                    return Err(bad(part, "the isotonic scores do not increase"));
                }
                if model.y.iter().any(|v| !(0.0..=1.0).contains(v))
                    || model.y.windows(2).any(|w| w[0] > w[1])
                {
                    return Err(bad(
                        part,
                        "the isotonic values are not non-decreasing probabilities",
                    ));
                }
            }
        }
        let o = &h.ood;
        len(part, "the familiarity mean", o.mean.len(), width)?;
        if o.precision.len() != width * width {
            return Err(bad(
                part,
                format!(
                    "the familiarity matrix has {} entries, {width} x {width} expected",
                    o.precision.len()
                ),
            ));
        }
        finite(part, "the familiarity mean", &o.mean)?;
        finite(part, "the familiarity matrix", &o.precision)?;
        if o.threshold.is_nan() || o.threshold < 0.0 || !(0.0..=100.0).contains(&o.percentile) {
            return Err(bad(
                part,
                format!(
                    "familiarity threshold {} at percentile {} is out of range",
                    o.threshold, o.percentile
                ),
            ));
        }
        Ok(())
    }

    /// One bagged tree reading a standardised row of `width` columns.
    ///
    /// smartcore keeps its nodes private, so they are read through the tree's own serde form.
    /// Prediction walks from node 0 by child indices: each child must lie after its parent
    /// (which also rules out cycles) and inside the node list, each split must read one of
    /// the tree's columns, and each leaf's output must name a class 0 or 1.
    fn tree(t: &BaggedTree, part: &str, width: usize) -> Result<(), ModelError> {
        if t.columns.is_empty() {
            return Err(bad(part, "the tree reads no columns"));
        }
        if let Some(&c) = t.columns.iter().find(|&&c| c >= width) {
            return Err(bad(
                part,
                format!("column index {c} is beyond the head's {width} columns"),
            ));
        }
        if t.columns.windows(2).any(|w| w[0] >= w[1]) {
            return Err(bad(part, "the tree's column indices do not increase"));
        }
        let v = serde_json::to_value(&t.tree).map_err(|e| bad(part, e.to_string()))?;
        let num = |v: &serde_json::Value| v.as_u64().map(|x| x as usize);
        let classes = v["classes"]
            .as_array()
            .ok_or_else(|| bad(part, "no class list"))?;
        if classes.is_empty()
            || classes.len() > 2
            || classes.iter().any(|c| num(c).is_none_or(|c| c > 1))
        {
            return Err(bad(part, "the class list must hold the classes 0 and 1"));
        }
        let width_seen = v["num_features"].as_u64();
        if width_seen != Some(t.columns.len() as u64) {
            return Err(bad(
                part,
                format!(
                    "the tree was grown on {} columns but reads {}",
                    width_seen.map_or("an unknown number of".into(), |w| w.to_string()),
                    t.columns.len()
                ),
            ));
        }
        let nodes = v["nodes"]
            .as_array()
            .ok_or_else(|| bad(part, "no node list"))?;
        if nodes.is_empty() {
            return Err(bad(part, "the tree has no nodes"));
        }
        for (i, n) in nodes.iter().enumerate() {
            let node = format!("{part}, node {i}");
            if num(&n["output"]).is_none_or(|o| o >= classes.len()) {
                return Err(bad(node, "its output is not one of the tree's classes"));
            }
            let child = |key: &str| -> Result<Option<usize>, ModelError> {
                match &n[key] {
                    serde_json::Value::Null => Ok(None),
                    c => match num(c) {
                        Some(c) if c > i && c < nodes.len() => Ok(Some(c)),
                        _ => Err(bad(
                            node.clone(),
                            format!(
                                "child {c} is not a later node of the {} in the tree",
                                nodes.len()
                            ),
                        )),
                    },
                }
            };
            match (child("true_child")?, child("false_child")?) {
                (None, None) => {}
                (Some(_), Some(_)) => {
                    if num(&n["split_feature"]).is_none_or(|f| f >= t.columns.len()) {
                        return Err(bad(
                            node,
                            format!(
                                "it splits on feature {} of a tree that reads {} columns",
                                n["split_feature"],
                                t.columns.len()
                            ),
                        ));
                    }
                    if n["split_value"].as_f64().is_none_or(|x| !x.is_finite()) {
                        return Err(bad(node, "its split value is not a finite number"));
                    }
                }
                _ => return Err(bad(node, "it has one child; a split needs two")),
            }
        }
        Ok(())
    }
}

impl ModelBundle {
    /// Checks every internal size and index against the feature names and each head's
    /// dimensions, so that prediction can never index out of range or return a non-finite
    /// probability; [`ModelBundle::from_bytes`] calls it on every model it reads.
    pub fn validate(&self) -> Result<(), ModelError> {
        let n = self.feature_names.len();
        if n == 0 {
            return Err(checks::bad("feature names", "the model names no features"));
        }
        let mut names: Vec<&String> = self.feature_names.iter().collect();
        names.sort();
        if let Some(w) = names.windows(2).find(|w| w[0] == w[1]) {
            return Err(checks::bad(
                "feature names",
                format!("`{}` appears twice", w[0]),
            ));
        }
        if self.full.head != Head::Full {
            return Err(checks::bad("full head", "it is labelled as another head"));
        }
        checks::head(&self.full, "full head", n)?;
        if let Some(h) = &self.curve_only {
            if h.head != Head::CurveOnly {
                return Err(checks::bad(
                    "curve-only head",
                    "it is labelled as another head",
                ));
            }
            checks::head(h, "curve-only head", n)?;
        }
        if let Some(f) = &self.fine {
            let m = &f.model;
            let width = self.full.columns.len();
            if m.classes.is_empty()
                || m.classes.len() != m.intercept.len()
                || m.classes.len() != m.coef.len()
            {
                return Err(checks::bad(
                    "four-label head",
                    format!(
                        "{} classes, {} intercepts and {} coefficient rows",
                        m.classes.len(),
                        m.intercept.len(),
                        m.coef.len()
                    ),
                ));
            }
            if let Some(&c) = m.classes.iter().find(|&&c| c >= 4) {
                return Err(checks::bad(
                    "four-label head",
                    format!("class index {c} is not one of the four labels"),
                ));
            }
            checks::finite("four-label head", "the intercepts", &m.intercept)?;
            for (k, row) in m.coef.iter().enumerate() {
                if row.len() != width {
                    return Err(checks::bad(
                        "four-label head",
                        format!(
                            "coefficient row {k} has {} entries, the full head reads {width} columns",
                            row.len()
                        ),
                    ));
                }
                checks::finite("four-label head", "the coefficients", row)?;
            }
        }
        let (lo, hi) = self.policy.band;
        if !(0.0 <= lo && lo <= hi && hi <= 1.0) {
            return Err(checks::bad(
                "verdict policy",
                format!("review band {lo},{hi} is not within 0 <= LO <= HI <= 1"),
            ));
        }
        Ok(())
    }
}
