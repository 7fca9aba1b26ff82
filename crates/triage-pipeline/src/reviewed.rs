//! Reviewer decisions as extra labelled training rows: each decided pair takes its features
//! from the `features.csv` of the scan it was reviewed in.

use std::path::{Path, PathBuf};

use anyhow::Context;
use series_io::{CsvTable, Decision, DecisionFile};
use verdict_model::{FineLabel, ModelCard, TrainingSet};

use crate::AnalysisSettings;
use crate::settings::analysis_settings_json;

/// The family name reviewed rows carry in the training set (and in the model card's counts
/// and leave-one-family-out folds, where they are reported apart from simulated systems).
pub const REVIEWED_FAMILY: &str = "reviewed";

/// How many times a reviewed pair counts among the simulated ones by default (a repetition
/// count; a starting point, not a measured value).
pub const DEFAULT_DECISION_WEIGHT: usize = 5;

/// Largest accepted decision weight.
pub const MAX_DECISION_WEIGHT: usize = 1000;

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

/// One decisions file given to training: where it came from, the scan it was matched to,
/// and the rows it yields.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewedInput {
    /// The decisions file, as given.
    pub file: String,
    /// The scan folder it was matched to, as given.
    pub scan: String,
    /// Its training rows.
    pub rows: ReviewedRows,
}

/// The reviewed pairs a training run adds, and how many times each counts.
#[derive(Debug, Clone, PartialEq)]
pub struct Reviewed {
    /// One entry per decisions file.
    pub inputs: Vec<ReviewedInput>,
    /// Repetitions of each reviewed pair.
    pub weight: usize,
}

impl Default for Reviewed {
    fn default() -> Self {
        Self {
            inputs: Vec::new(),
            weight: DEFAULT_DECISION_WEIGHT,
        }
    }
}

impl Reviewed {
    /// Read every decisions file and join it with the scan folder (of `scans`) of the same
    /// input checksum, refusing scans made with other analysis settings than `settings`
    /// (their features would not be comparable with the simulated rows). No files: nothing.
    pub fn read(
        decisions: &[PathBuf],
        scans: &[PathBuf],
        weight: usize,
        settings: &AnalysisSettings,
    ) -> anyhow::Result<Self> {
        if decisions.is_empty() && scans.is_empty() {
            return Ok(Self {
                inputs: Vec::new(),
                weight,
            });
        }
        anyhow::ensure!(
            (1..=MAX_DECISION_WEIGHT).contains(&weight),
            "decision weight {weight} must be between 1 and {MAX_DECISION_WEIGHT}"
        );
        anyhow::ensure!(
            !decisions.is_empty(),
            "scans of reviewed runs were given without decisions: give the decisions exported \
             from those scans' reports (--decisions FILE)"
        );
        let mut runs = Vec::new();
        for dir in scans {
            runs.push((dir.clone(), read_run(dir)?));
        }
        let wanted = analysis_settings_json(settings);
        let mut inputs = Vec::new();
        for file in decisions {
            let d = series_io::read_decisions(file)?;
            let (dir, run) = runs
                .iter()
                .find(|(_, run)| run["input"]["sha256"] == d.input_sha256.as_str())
                .with_context(|| {
                    format!(
                        "{}: no scan folder given holds a scan of the input these decisions \
                         were made on (sha256 {}); pass the scan's output folder \
                         (--decision-scans DIR)",
                        file.display(),
                        d.input_sha256
                    )
                })?;
            let mut recorded = run["settings"].clone();
            if let Some(m) = recorded.as_object_mut() {
                m.remove("n_points");
                m.remove("per_response");
            }
            anyhow::ensure!(
                recorded == wanted,
                "{}: that scan used other analysis settings than this training run ({} there, \
                 {} here); its features would not match the simulated rows: rescan the input \
                 with the training settings, or train with the scan's settings",
                dir.display(),
                recorded,
                wanted
            );
            let features = series_io::read_feature_rows(&dir.join("features.csv"))?;
            let rows = reviewed_rows(&d, &features)
                .map_err(|e| anyhow::anyhow!("{}: {e}", file.display()))?;
            inputs.push(ReviewedInput {
                file: file.display().to_string(),
                scan: dir.display().to_string(),
                rows,
            });
        }
        Ok(Self { inputs, weight })
    }

    /// True when no reviewed pair is added.
    pub fn is_empty(&self) -> bool {
        self.inputs.is_empty()
    }

    /// Append every reviewed row to `set`, each [`Self::weight`] times ([`add_reviewed`]).
    pub fn add_to(&self, set: &mut TrainingSet) {
        for input in &self.inputs {
            add_reviewed(set, &input.rows.rows, self.weight);
        }
    }

    /// The model card's section on reviewed pairs, reported apart from the simulated systems:
    /// counts per decision and file, and the held-out fold of the reviewed family.
    pub fn card_section(&self, card: &ModelCard) -> String {
        let weight = self.weight;
        let count = |k: Decision| -> usize {
            self.inputs
                .iter()
                .map(|i| i.rows.rows.iter().filter(|x| x.decision == k).count())
                .sum()
        };
        let (c, n) = (count(Decision::Causal), count(Decision::NonCausal));
        let unsure: usize = self.inputs.iter().map(|i| i.rows.unsure).sum();
        let mut s = format!(
            "\n## Reviewed pairs\n\n{} decisions: {c} causal, {n} non-causal, {unsure} unsure, \
             from {} file(s). Each causal or non-causal pair is a training row of family `{}` \
             counted {weight} times (so the counts above show it {weight} times); unsure pairs \
             are not used. Causal decisions train as `direct`, non-causal ones as \
             `independent`.\n\n\
             | decisions file | scan | causal | non-causal | unsure |\n|---|---|---:|---:|---:|\n",
            c + n + unsure,
            self.inputs.len(),
            REVIEWED_FAMILY
        );
        for input in &self.inputs {
            let k = |d: Decision| input.rows.rows.iter().filter(|x| x.decision == d).count();
            s.push_str(&format!(
                "| `{}` | `{}` | {} | {} | {} |\n",
                input.file,
                input.scan,
                k(Decision::Causal),
                k(Decision::NonCausal),
                input.rows.unsure
            ));
        }
        let fold = card
            .heads
            .first()
            .and_then(|h| h.per_fold.iter().find(|f| f.held_out == REVIEWED_FAMILY));
        match fold {
            Some(f) => s.push_str(&format!(
                "\nHeld out as their own fold (the model fitted without them, full head): \
                 log-loss {:.3}, ROC AUC {}, accuracy {:.3} against the reviewers' decisions.\n",
                f.log_loss,
                f.roc_auc
                    .map_or("n/a (one class)".to_string(), |a| format!("{a:.3}")),
                f.accuracy
            )),
            None => s.push_str(
                "\nNo held-out figure on the reviewed pairs alone: the validation folds did not \
                 hold them out as a family.\n",
            ),
        }
        s
    }

    /// `reviewed-pairs.csv`: every reviewed pair used in training, once.
    pub fn table(&self) -> CsvTable {
        CsvTable {
            name: "reviewed-pairs.csv".into(),
            header: [
                "driver",
                "response",
                "decision",
                "input_sha256",
                "decisions_file",
            ]
            .map(String::from)
            .to_vec(),
            rows: self
                .inputs
                .iter()
                .flat_map(|input| {
                    input.rows.rows.iter().map(move |r| {
                        vec![
                            r.driver.clone(),
                            r.response.clone(),
                            r.decision.as_str().to_string(),
                            r.input_sha256.clone(),
                            input.file.clone(),
                        ]
                    })
                })
                .collect(),
        }
    }
}

/// The run.json of a finished scan in `dir`.
fn read_run(dir: &Path) -> anyhow::Result<serde_json::Value> {
    let path = dir.join("run.json");
    let text = std::fs::read_to_string(&path).with_context(|| {
        format!(
            "{}: cannot read the run.json of a finished scan",
            path.display()
        )
    })?;
    serde_json::from_str(&text)
        .with_context(|| format!("{}: not a run.json written by ccm-triage", path.display()))
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
