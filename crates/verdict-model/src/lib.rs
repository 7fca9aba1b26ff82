//! Classifier over ensemble features. INTERFACE SKETCH: the classifier work replaces every
//! `todo!` and may add items, keeping these names and shapes (the pipeline codes against them).
//! The crate knows features only through names and a schema hash handed to it.
#![deny(missing_docs)]

use serde::{Deserialize, Serialize};

/// Fine ground-truth label of an ordered pair (from the simulator).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum FineLabel {
    /// The driver enters the response's dynamics directly.
    Direct,
    /// The driver reaches the response only through other variables.
    Indirect,
    /// Driver and response share a hidden common cause and are otherwise uncoupled.
    Confounded,
    /// No causal route between them.
    Independent,
}

/// Rows for fitting: one per ordered pair.
#[derive(Debug, Clone, Default)]
pub struct TrainingSet {
    /// Feature names in column order (from the feature schema).
    pub feature_names: Vec<String>,
    /// Hash of the feature schema the rows were computed under.
    pub schema_hash: String,
    /// Feature rows; `None` = unavailable.
    pub rows: Vec<Vec<Option<f64>>>,
    /// Fine labels; causal = `Direct` (an indirect route is also causal: the classifier
    /// work documents which convention it trains on).
    pub labels: Vec<FineLabel>,
    /// System family of each row (for leave-one-family-out validation).
    pub families: Vec<String>,
    /// System id of each row (rows of one system are never split between train and test).
    pub systems: Vec<String>,
}

/// The final call on a pair.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum Verdict {
    /// Evidence of driving.
    Causal,
    /// No evidence of driving.
    NonCausal,
    /// A person should look.
    Review,
}

impl Verdict {
    /// The word used in `labels.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Causal => "causal",
            Verdict::NonCausal => "non-causal",
            Verdict::Review => "review",
        }
    }
}

/// Data-quality facts the pipeline computes from the series and ensembles.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct QualityFlags {
    /// The series is too short for the chosen library sizes to show convergence.
    pub short_series: bool,
    /// The response is barely predictable from its own past.
    pub weak_self_forecast: bool,
    /// Both directions converge and the lag profile peaks at or after lag 0 (synchrony).
    pub synchrony_suspected: bool,
}
