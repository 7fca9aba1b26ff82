//! `run.json`: the typed record of one labelling run (scan, merge or label), enough to
//! repeat it exactly and to trace where and how it ran.
//!
//! Fields are written in the order declared here; parts that only a scan has (the resolved
//! settings, embeddings, cycles, pair choice) are left out of a `label` run's record.

use serde::{Deserialize, Serialize};

/// Version of this record's layout, written as `format`; raised when a field changes meaning
/// or is removed (added fields keep it).
pub const RUN_RECORD_FORMAT: u32 = 1;

/// Everything run.json holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    /// Always `ccm-triage`.
    pub tool: String,
    /// The tool's version.
    pub version: String,
    /// The git commit the tool was built from (`unknown` outside a git checkout).
    pub commit: String,
    /// [`RUN_RECORD_FORMAT`].
    pub format: u32,
    /// `scan`, `merge` or `label`.
    pub command: String,
    /// How the process was started.
    pub invocation: Invocation,
    /// The input file.
    pub input: InputRecord,
    /// Every parameter as resolved, per response too (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub settings: Option<serde_json::Value>,
    /// The pairs chosen by `--drivers` and `--responses` (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub selection: Option<SelectionRecord>,
    /// Each variable's embedding (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub embedding: Option<Vec<EmbeddingRecord>>,
    /// Each variable's dominant cycle as its seasonal surrogates used it (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cycles: Option<Vec<CycleRecord>>,
    /// The model that labelled the pairs.
    pub model: ModelRecord,
    /// The feature schema the model reads.
    pub feature_schema: SchemaRecord,
    /// Probabilities inside this band go to review.
    pub review_band: [f64; 2],
    /// Pairs labelled.
    pub pairs: usize,
    /// The shard directories a merge combined.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shards: Option<Vec<String>>,
    /// Counts of the reviewer decisions shown beside the verdicts, when given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub decisions: Option<DecisionCounts>,
    /// How long the run took.
    pub timing: Timing,
}

/// How the process that wrote the record was started.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Invocation {
    /// The full command line, as the shell passed it.
    pub command_line: Vec<String>,
    /// The working directory.
    pub working_directory: String,
    /// When the run started, as an ISO 8601 UTC timestamp.
    pub started_at: String,
}

/// The input file and what was read from it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputRecord {
    /// The path as given.
    pub path: String,
    /// The path made absolute (`None` for a table held in memory).
    pub absolute_path: Option<String>,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// Data rows (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rows: Option<usize>,
    /// The time column's name, when there is one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub time_column: Option<String>,
    /// The time axis as found.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub time_axis: Option<TimeAxisRecord>,
    /// The reader's warnings, one line each (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub warnings: Option<Vec<String>>,
    /// The series, in column order (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub series: Option<Vec<String>>,
    /// Missing cells per series, in column order (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub missing_cells: Option<Vec<usize>>,
    /// Missing cells in all (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub missing_cells_total: Option<usize>,
}

impl InputRecord {
    /// The file as given, as an absolute path (`None` for a table held in memory) and by its
    /// checksum; what only a series table has is left out, for the caller to add.
    pub fn new(path: &str, absolute_path: Option<String>, sha256: &str) -> Self {
        Self {
            path: path.to_string(),
            absolute_path,
            sha256: sha256.to_string(),
            rows: None,
            time_column: None,
            time_axis: None,
            warnings: None,
            series: None,
            missing_cells: None,
            missing_cells_total: None,
        }
    }
}

/// The time axis: kind, first and last time as written, usual step, uneven and filled steps.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TimeAxisRecord {
    /// Column name.
    pub column: String,
    /// `number`, `date` or `date-time`.
    pub kind: String,
    /// First time as written.
    pub first: String,
    /// Last time as written.
    pub last: String,
    /// The usual step in words.
    pub step: String,
    /// Steps that differ from the usual one.
    pub uneven_steps: usize,
    /// Rows added for skipped time points.
    pub filled_rows: usize,
}

/// The pair choice.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SelectionRecord {
    /// Drivers as given (`null`: every series).
    pub drivers: serde_json::Value,
    /// Responses as given (`null`: every series).
    pub responses: serde_json::Value,
    /// The response manifolds computed (`None`: all).
    pub manifolds: Option<Vec<String>>,
}

/// One variable's embedding.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EmbeddingRecord {
    /// Variable name.
    pub variable: String,
    /// Embedding dimension.
    #[serde(rename = "E")]
    pub e: usize,
    /// Delay in time steps.
    pub tau: usize,
    /// Simplex forecast skill at the chosen E and tau.
    pub simplex_skill: f64,
    /// Simplex forecast skill at each E tried.
    #[serde(rename = "skill_by_E")]
    pub skill_by_e: Vec<f64>,
    /// Delay vectors left out because they touch a missing cell.
    pub vectors_excluded: usize,
}

/// One variable's dominant cycle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CycleRecord {
    /// Variable name.
    pub variable: String,
    /// Period in time steps, when a cycle was found.
    pub period: Option<f64>,
    /// Share of variance the mean cycle carries.
    pub strength: Option<f64>,
    /// Whether it counts as a season (its seasonal surrogates keep it).
    pub season: bool,
}

/// The model's identity.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelRecord {
    /// `built-in model` or the file's path.
    pub source: String,
    /// SHA-256 of the model file.
    pub sha256: String,
    /// The spec it was trained on.
    pub training_spec: SpecRecord,
    /// The feature-schema hash it was trained with.
    pub schema_hash: String,
}

/// A simulator spec's identity.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpecRecord {
    /// File stem.
    pub name: String,
    /// SHA-256 of the spec's text.
    pub hash: String,
}

/// The feature schema.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SchemaRecord {
    /// Schema version.
    pub version: u32,
    /// Schema hash.
    pub hash: String,
}

/// Reviewer decisions by kind.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DecisionCounts {
    /// Rows in the file.
    pub rows: usize,
    /// Pairs decided causal.
    pub causal: usize,
    /// Pairs decided non-causal.
    pub non_causal: usize,
    /// Pairs marked unsure.
    pub unsure: usize,
}

/// Time taken.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Timing {
    /// Wall-clock seconds.
    pub seconds: f64,
    /// Worker threads (scan and merge).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub threads: Option<usize>,
}

impl SchemaRecord {
    /// The schema this build computes.
    pub fn current() -> Self {
        Self {
            version: ensemble_features::SCHEMA_VERSION,
            hash: ensemble_features::schema_hash(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_label_record_leaves_out_what_only_a_scan_has_and_reads_back() {
        let r = RunRecord {
            tool: "ccm-triage".into(),
            version: "0".into(),
            commit: "unknown".into(),
            format: RUN_RECORD_FORMAT,
            command: "label".into(),
            invocation: Invocation {
                command_line: vec!["ccm-triage".into(), "label".into()],
                working_directory: "/".into(),
                started_at: "2026-01-01T00:00:00Z".into(),
            },
            input: InputRecord::new("c.csv", None, &"ab".repeat(32)),
            settings: None,
            selection: None,
            embedding: None,
            cycles: None,
            model: ModelRecord {
                source: "built-in model".into(),
                sha256: "cd".repeat(32),
                training_spec: SpecRecord {
                    name: "default".into(),
                    hash: "ef".repeat(32),
                },
                schema_hash: "01".repeat(32),
            },
            feature_schema: SchemaRecord::current(),
            review_band: [0.3, 0.7],
            pairs: 2,
            shards: None,
            decisions: None,
            timing: Timing {
                seconds: 0.5,
                threads: None,
            },
        };
        let text = serde_json::to_string(&r).unwrap();
        for absent in [
            "settings",
            "embedding",
            "cycles",
            "shards",
            "rows",
            "threads",
        ] {
            assert!(!text.contains(&format!("\"{absent}\"")), "{absent}: {text}");
        }
        assert!(text.starts_with("{\"tool\":\"ccm-triage\",\"version\""));
        let back: RunRecord = serde_json::from_str(&text).unwrap();
        assert_eq!(back, r);
    }
}
