//! The model card: what the model was trained on, what was chosen and how well it did out
//! of family, as JSON, Markdown and a reliability diagram in SVG.

use std::fmt::Write as _;

use plotters::prelude::*;
use serde::{Deserialize, Serialize};

use crate::metrics::{ReliabilityBin, Summary};
use crate::verdict::VerdictPolicy;
use crate::{FineLabel, Head, ModelError, SpecIdentity};

/// Rows of one label in one family.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CountRow {
    /// Family.
    pub family: String,
    /// Label.
    pub label: FineLabel,
    /// Rows.
    pub count: usize,
}

/// Validation result of one candidate model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CandidateScore {
    /// Candidate name.
    pub name: String,
    /// Pooled held-out log-loss of the calibrated probabilities (absent when no fold could
    /// be scored).
    pub cv_log_loss: Option<f64>,
    /// Pooled held-out ROC AUC.
    pub cv_roc_auc: Option<f64>,
    /// Folds scored.
    pub folds_used: usize,
    /// Folds skipped (training side lacked a class or rows).
    pub folds_skipped: usize,
    /// Log-loss on the validation suite of the candidate fitted on every training row.
    pub suite_log_loss: Option<f64>,
    /// ROC AUC on the validation suite.
    pub suite_roc_auc: Option<f64>,
}

/// Held-out scores of the chosen candidate on one fold.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FoldScore {
    /// The held-out family (or system fold).
    pub held_out: String,
    /// Rows held out.
    pub n: usize,
    /// Log-loss.
    pub log_loss: f64,
    /// ROC AUC (absent with one class).
    pub roc_auc: Option<f64>,
    /// Accuracy.
    pub accuracy: f64,
}

/// One head's section of the card.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HeadCard {
    /// Which head.
    pub head: Head,
    /// Feature columns it reads.
    pub columns: Vec<String>,
    /// Complete rows it was trained on.
    pub rows_used: usize,
    /// Rows dropped because a needed feature was unavailable.
    pub rows_dropped_unavailable: usize,
    /// Validation scheme.
    pub validation: String,
    /// Every candidate's validation figures.
    pub candidates: Vec<CandidateScore>,
    /// Chosen candidate.
    pub chosen: String,
    /// Chosen calibration (`platt` or `isotonic`).
    pub calibration: String,
    /// Data the calibrator was fitted on.
    pub calibration_data: String,
    /// Cross-fitted log-loss of Platt scaling on the calibration rows.
    pub calibration_platt_log_loss: Option<f64>,
    /// Cross-fitted log-loss of isotonic regression on the calibration rows.
    pub calibration_isotonic_log_loss: Option<f64>,
    /// Out-of-distribution distance threshold.
    pub ood_threshold: f64,
    /// Training percentile of that threshold.
    pub ood_percentile: f64,
    /// Pooled held-out figures of the chosen candidate.
    pub cv: Option<Summary>,
    /// Per-fold figures of the chosen candidate.
    pub per_fold: Vec<FoldScore>,
    /// Reliability bins of the pooled held-out predictions.
    pub reliability: Vec<ReliabilityBin>,
    /// How the model was chosen.
    pub selection: String,
    /// Figures of the chosen model on the validation suite, when one was given.
    pub suite: Option<Summary>,
    /// Reliability bins on the validation suite.
    pub suite_reliability: Vec<ReliabilityBin>,
}

/// A quality target and whether validation met it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TargetCheck {
    /// Figure.
    pub name: String,
    /// Target, e.g. `>= 0.95`.
    pub target: String,
    /// Measured value.
    pub value: Option<f64>,
    /// Whether it was met.
    pub met: bool,
    /// The same figure out of family (leave-one-family-out), for comparison.
    pub out_of_family: Option<f64>,
}

/// The validation suite a model was chosen on.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SuiteIdentity {
    /// The suite's name (its spec).
    pub name: String,
    /// Pairs in the suite.
    pub rows: usize,
    /// Share of causal pairs in the suite.
    pub causal_share: f64,
}

/// The model card.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelCard {
    /// Model file format version.
    pub format_version: u16,
    /// Training spec.
    pub spec: SpecIdentity,
    /// Feature-schema hash.
    pub schema_hash: String,
    /// Number of features in the schema.
    pub feature_count: usize,
    /// Fit seed.
    pub seed: u64,
    /// Which fine labels count as causal.
    pub positive_class: String,
    /// Training rows.
    pub rows: usize,
    /// Rows per family and label.
    pub counts: Vec<CountRow>,
    /// Per-head sections, full head first.
    pub heads: Vec<HeadCard>,
    /// Description of the four-label head, if attempted.
    pub fine_head: Option<String>,
    /// Policy used for the review rate.
    pub policy: VerdictPolicy,
    /// Quality targets against the full head's validation figures.
    pub targets: Vec<TargetCheck>,
    /// Share of causal pairs in the training rows: the base rate the probabilities assume.
    pub causal_share: f64,
    /// The validation suite the model was chosen on, if any.
    pub suite: Option<SuiteIdentity>,
}

fn opt4(v: Option<f64>) -> String {
    v.map_or_else(|| "n/a".to_string(), |x| format!("{x:.4}"))
}

fn opt(v: Option<f64>) -> String {
    v.map_or_else(|| "n/a".to_string(), |x| format!("{x:.3}"))
}

impl ModelCard {
    /// Pretty JSON.
    pub fn to_json(&self) -> Result<String, ModelError> {
        Ok(serde_json::to_string_pretty(self)?)
    }

    /// Markdown for people.
    pub fn to_markdown(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "# Model card\n");
        let _ = writeln!(
            s,
            "- Training spec: `{}` (hash `{}`)",
            self.spec.name, self.spec.hash
        );
        let _ = writeln!(
            s,
            "- Feature schema: `{}` ({} features)",
            self.schema_hash, self.feature_count
        );
        let _ = writeln!(s, "- Model file format version: {}", self.format_version);
        let _ = writeln!(s, "- Seed: {}", self.seed);
        let _ = writeln!(s, "- Causal means: {}", self.positive_class);
        let _ = writeln!(
            s,
            "- Review band: {:.2} <= p <= {:.2}; curve-only predictions reviewed: {}",
            self.policy.band.0,
            self.policy.band.1,
            if self.policy.review_curve_only {
                "yes"
            } else {
                "no"
            }
        );
        let _ = writeln!(
            s,
            "- Four-label head: {}\n",
            self.fine_head.as_deref().unwrap_or("none")
        );

        let _ = writeln!(
            s,
            "- Base rate: {:.1}% of training pairs are causal; the probabilities assume a share \
             like it, so on data with far more or fewer causal pairs they shift",
            100.0 * self.causal_share
        );
        if let Some(v) = &self.suite {
            let _ = writeln!(
                s,
                "- Validation suite: `{}`, {} pairs ({:.1}% causal), never trained on",
                v.name,
                v.rows,
                100.0 * v.causal_share
            );
        }
        let _ = writeln!(s, "\n## Training rows ({})\n", self.rows);
        let _ = writeln!(
            s,
            "| family | direct | indirect | confounded | independent |"
        );
        let _ = writeln!(s, "|---|---:|---:|---:|---:|");
        let mut fams: Vec<&String> = self.counts.iter().map(|c| &c.family).collect();
        fams.dedup();
        for f in fams {
            let n = |l: FineLabel| {
                self.counts
                    .iter()
                    .find(|c| &c.family == f && c.label == l)
                    .map_or(0, |c| c.count)
            };
            let _ = writeln!(
                s,
                "| {f} | {} | {} | {} | {} |",
                n(FineLabel::Direct),
                n(FineLabel::Indirect),
                n(FineLabel::Confounded),
                n(FineLabel::Independent)
            );
        }

        if !self.targets.is_empty() {
            let judged = if self.suite.is_some() {
                "validation suite"
            } else {
                "out of family"
            };
            let _ = writeln!(s, "\n## Quality targets (full head, {judged})\n");
            let _ = writeln!(
                s,
                "| figure | target | {judged} | met | leave-one-family-out |"
            );
            let _ = writeln!(s, "|---|---|---:|---|---:|");
            for t in &self.targets {
                let _ = writeln!(
                    s,
                    "| {} | {} | {} | {} | {} |",
                    t.name,
                    t.target,
                    opt(t.value),
                    if t.met { "yes" } else { "no" },
                    opt(t.out_of_family)
                );
            }
        }

        for h in &self.heads {
            let _ = writeln!(s, "\n## Head: {}\n", h.head.as_str());
            let _ = writeln!(
                s,
                "- Columns ({}): {}",
                h.columns.len(),
                h.columns.join(", ")
            );
            let _ = writeln!(
                s,
                "- Rows used: {}; dropped for unavailable features: {}",
                h.rows_used, h.rows_dropped_unavailable
            );
            let _ = writeln!(s, "- Validation: {}", h.validation);
            let _ = writeln!(s, "- Selection: {}", h.selection);
            let _ = writeln!(s, "- Chosen model: {}", h.chosen);
            let _ = writeln!(
                s,
                "- Calibration: {} on {} (cross-fitted log-loss: Platt {}, isotonic {})",
                h.calibration,
                h.calibration_data,
                opt(h.calibration_platt_log_loss),
                opt(h.calibration_isotonic_log_loss)
            );
            let _ = writeln!(
                s,
                "- Unfamiliar when distance > {:.3} (training percentile {})\n",
                h.ood_threshold, h.ood_percentile
            );
            let _ = writeln!(
                s,
                "| candidate | suite log-loss | suite ROC AUC | out-of-family log-loss | out-of-family ROC AUC | folds used | skipped |"
            );
            let _ = writeln!(s, "|---|---:|---:|---:|---:|---:|---:|");
            for c in &h.candidates {
                let _ = writeln!(
                    s,
                    "| {} | {} | {} | {} | {} | {} | {} |",
                    c.name,
                    opt4(c.suite_log_loss),
                    opt(c.suite_roc_auc),
                    opt4(c.cv_log_loss),
                    opt(c.cv_roc_auc),
                    c.folds_used,
                    c.folds_skipped
                );
            }
            for (title, summary) in [
                ("Validation-suite figures of the chosen model", &h.suite),
                ("Out-of-family figures of the chosen model", &h.cv),
            ] {
                let Some(cv) = summary else {
                    continue;
                };
                let _ = writeln!(s, "\n{title} ({} rows, {} causal):\n", cv.n, cv.n_causal);
                let _ = writeln!(s, "| figure | value |");
                let _ = writeln!(s, "|---|---:|");
                for (k, v) in [
                    ("ROC AUC", cv.roc_auc),
                    ("accuracy", Some(cv.accuracy)),
                    ("Brier score", Some(cv.brier)),
                    ("expected calibration error", Some(cv.ece)),
                    ("log-loss", Some(cv.log_loss)),
                    (
                        "false-positive rate on confounded (p >= 0.5)",
                        cv.fpr_confounded,
                    ),
                    ("recall on direct (p >= 0.5)", cv.recall_direct),
                    (
                        "confounded called causal (verdict)",
                        cv.fpr_confounded_verdict,
                    ),
                    ("direct called causal (verdict)", cv.recall_direct_verdict),
                    ("review rate", Some(cv.review_rate)),
                ] {
                    let _ = writeln!(s, "| {k} | {} |", opt(v));
                }
                if !std::ptr::eq(summary, &h.cv) {
                    let _ = writeln!(s, "\n| form | rows | accuracy |");
                    let _ = writeln!(s, "|---|---:|---:|");
                    for f in &cv.per_family {
                        let _ = writeln!(s, "| {} | {} | {:.3} |", f.family, f.n, f.accuracy);
                    }
                    continue;
                }
                let _ = writeln!(s, "\n| held out | rows | log-loss | ROC AUC | accuracy |");
                let _ = writeln!(s, "|---|---:|---:|---:|---:|");
                for f in &h.per_fold {
                    let _ = writeln!(
                        s,
                        "| {} | {} | {:.4} | {} | {:.3} |",
                        f.held_out,
                        f.n,
                        f.log_loss,
                        opt(f.roc_auc),
                        f.accuracy
                    );
                }
            }
        }
        s
    }

    /// Reliability diagram of a head's pooled held-out predictions, as an SVG document.
    pub fn reliability_svg(&self, head: Head) -> Result<String, ModelError> {
        let bins = self
            .heads
            .iter()
            .find(|h| h.head == head)
            .map(|h| h.reliability.clone())
            .unwrap_or_default();
        reliability_svg(
            &bins,
            &format!("Reliability ({} head, held out)", head.as_str()),
        )
    }
}

/// Draws observed share against mean predicted probability per non-empty bin, with the
/// diagonal of perfect calibration.
pub fn reliability_svg(bins: &[ReliabilityBin], title: &str) -> Result<String, ModelError> {
    let plot = |e: &dyn std::fmt::Display| ModelError::Plot(e.to_string());
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (480, 480)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| plot(&e))?;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(48)
            .build_cartesian_2d(0.0f64..1.0, 0.0f64..1.0)
            .map_err(|e| plot(&e))?;
        chart
            .configure_mesh()
            .x_desc("mean predicted probability")
            .y_desc("observed share causal")
            .draw()
            .map_err(|e| plot(&e))?;
        chart
            .draw_series(LineSeries::new([(0.0, 0.0), (1.0, 1.0)], BLACK.mix(0.4)))
            .map_err(|e| plot(&e))?;
        let pts: Vec<(f64, f64)> = bins
            .iter()
            .filter(|b| b.count > 0)
            .map(|b| (b.mean_predicted, b.observed))
            .collect();
        chart
            .draw_series(LineSeries::new(pts.clone(), BLUE.stroke_width(2)))
            .map_err(|e| plot(&e))?;
        chart
            .draw_series(pts.into_iter().map(|p| Circle::new(p, 4, BLUE.filled())))
            .map_err(|e| plot(&e))?;
        root.present().map_err(|e| plot(&e))?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tests_support::small_bundle;

    #[test]
    fn card_renders_in_every_form() {
        let (m, _) = small_bundle(3);
        let card = m.card();
        let md = card.to_markdown();
        assert!(md.contains("## Head: full") && md.contains("## Head: curve-only"));
        let json = card.to_json().unwrap();
        let back: ModelCard = serde_json::from_str(&json).unwrap();
        assert_eq!(back.to_markdown(), md);
        let svg = card.reliability_svg(Head::Full).unwrap();
        assert!(svg.starts_with("<svg") && svg.contains("</svg>"));
    }
}
