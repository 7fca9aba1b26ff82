//! Reviewer decisions as extra labelled training rows: each decided pair takes its features
//! from the `features.csv` of the scan it was reviewed in.

use series_io::{Decision, DecisionFile};
use verdict_model::{FineLabel, TrainingSet};

/// The family name reviewed rows carry in the training set (and in the model card's counts
/// and leave-one-family-out folds, where they are reported apart from simulated systems).
pub const REVIEWED_FAMILY: &str = "reviewed";

/// One reviewed pair with its features, in the feature schema's column order.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewedRow {
    /// Driver name as in the scan's CSV files.
    pub driver: String,
    /// Response name.
    pub response: String,
    /// `Causal` or `NonCausal` (unsure decisions are not training rows).
    pub decision: Decision,
    /// Feature values in schema order.
    pub features: Vec<Option<f64>>,
    /// Input checksum of the scan the pair was reviewed in.
    pub input_sha256: String,
}

/// The training rows one decisions file yields, and what it could not use.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ReviewedRows {
    /// Causal and non-causal decisions, with features.
    pub rows: Vec<ReviewedRow>,
    /// Decisions marked unsure (not used).
    pub unsure: usize,
}

/// Join `decisions` with the scan's feature rows (`features.csv`, read by
/// [`series_io::read_feature_rows`]); refuses a feature table of another schema and decided
/// pairs the scan does not hold.
pub fn reviewed_rows(
    decisions: &DecisionFile,
    features: &series_io::FeatureRows,
) -> Result<ReviewedRows, String> {
    let (columns, rows) = features;
    let schema = ensemble_features::names();
    let index: Vec<usize> = schema
        .iter()
        .map(|name| {
            columns.iter().position(|c| c == name).ok_or_else(|| {
                format!(
                    "the scan's features.csv has no column `{name}`: it was written under another \
                     feature schema; rescan the input with this version"
                )
            })
        })
        .collect::<Result<_, _>>()?;
    let mut out = ReviewedRows::default();
    for d in &decisions.rows {
        if d.decision == Decision::Unsure {
            out.unsure += 1;
            continue;
        }
        let (_, _, values) = rows
            .iter()
            .find(|(dr, rs, _)| *dr == d.driver && *rs == d.response)
            .ok_or_else(|| {
                format!(
                    "the decided pair {} -> {} is not in the scan's features.csv; give the scan \
                     the decisions were made in",
                    d.driver, d.response
                )
            })?;
        out.rows.push(ReviewedRow {
            driver: d.driver.clone(),
            response: d.response.clone(),
            decision: d.decision,
            features: index.iter().map(|&k| values[k]).collect(),
            input_sha256: decisions.input_sha256.clone(),
        });
    }
    Ok(out)
}

/// Append reviewed rows to a training set, each `weight` times (the classifier's fit has no
/// per-row weights, so a weight is a repetition count). Causal decisions become `Direct`, and
/// non-causal ones `Independent`: a reviewer says whether there is driving, not which kind.
/// Every row of one input is one system, so validation folds never split them.
pub fn add_reviewed(set: &mut TrainingSet, rows: &[ReviewedRow], weight: usize) {
    for row in rows {
        let label = match row.decision {
            Decision::Causal => FineLabel::Direct,
            _ => FineLabel::Independent,
        };
        for _ in 0..weight {
            set.rows.push(row.features.clone());
            set.labels.push(label);
            set.families.push(REVIEWED_FAMILY.to_string());
            set.systems.push(format!("reviewed:{}", &row.input_sha256));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn decisions(rows: &[(&str, &str, Decision)]) -> DecisionFile {
        DecisionFile {
            input_sha256: "ab".repeat(32),
            rows: rows
                .iter()
                .map(|(d, r, k)| series_io::DecisionRow {
                    driver: d.to_string(),
                    response: r.to_string(),
                    decision: *k,
                    note: String::new(),
                    reviewer: String::new(),
                    decided_at: String::new(),
                })
                .collect(),
        }
    }

    fn features() -> series_io::FeatureRows {
        let mut cols: Vec<String> = ensemble_features::names()
            .into_iter()
            .map(String::from)
            .collect();
        cols.reverse();
        let n = cols.len();
        let row = |d: &str, r: &str, base: f64| {
            (
                d.to_string(),
                r.to_string(),
                (0..n).map(|k| Some(base + k as f64)).collect(),
            )
        };
        (cols, vec![row("a", "b", 0.0), row("b", "a", 100.0)])
    }

    #[test]
    fn joins_by_name_in_schema_order_and_skips_unsure() {
        let f = features();
        let d = decisions(&[("a", "b", Decision::Causal), ("b", "a", Decision::Unsure)]);
        let r = reviewed_rows(&d, &f).unwrap();
        assert_eq!((r.rows.len(), r.unsure), (1, 1));
        // The file's columns are reversed, so schema column 0 is the file's last.
        let n = f.0.len();
        assert_eq!(r.rows[0].features[0], Some((n - 1) as f64));
        let mut set = TrainingSet::default();
        add_reviewed(&mut set, &r.rows, 3);
        assert_eq!(set.rows.len(), 3);
        assert!(set.labels.iter().all(|l| *l == FineLabel::Direct));
        assert!(set.families.iter().all(|f| f == REVIEWED_FAMILY));
        let missing = decisions(&[("a", "c", Decision::NonCausal)]);
        assert!(reviewed_rows(&missing, &f).unwrap_err().contains("a -> c"));
    }
}
