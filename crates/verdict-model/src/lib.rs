//! Calibrated causal / non-causal classifier over ensemble features, with review verdicts,
//! versioned model files and model cards.
//!
//! The crate knows features only through the names and the schema hash handed to it: a
//! [`TrainingSet`] carries them at fit time and [`ModelBundle::predict`] checks them again.
//!
//! A bundle holds two heads: a *full* head over every column and a *curve-only* head over a
//! subset named in [`FitConfig::curve_only_names`], used when lag, surrogate or context features
//! are unavailable. Missing values are never imputed: a row goes to the head whose columns it
//! has, or prediction fails with [`ModelError::MissingFeatures`].
//!
//! The positive class ("causal") is [`FineLabel::Direct`] or [`FineLabel::Indirect`]: the
//! driver's influence reaches the response, by any route (see [`FineLabel::is_causal`]).
//!
//! ```
//! use verdict_model::{fit, decide, FineLabel, FitConfig, ModelBundle, QualityFlags, TrainingSet};
//!
//! // Two features; the first separates the classes, three families of four systems each.
//! let mut set = TrainingSet {
//!     feature_names: vec!["skill_gain".into(), "noise".into()],
//!     schema_hash: "demo-schema".into(),
//!     ..Default::default()
//! };
//! for i in 0..120 {
//!     let causal = i % 2 == 0;
//!     let x = if causal { 1.0 } else { -1.0 } + ((i * 37 % 17) as f64 / 17.0 - 0.5) * 1.5;
//!     set.rows.push(vec![Some(x), Some((i * 13 % 7) as f64)]);
//!     set.labels.push(if causal { FineLabel::Direct } else { FineLabel::Independent });
//!     set.families.push(format!("family{}", i % 3));
//!     set.systems.push(format!("system{}", i % 12));
//! }
//! let cfg = FitConfig { curve_only_names: vec!["skill_gain".into()], ..FitConfig::default() };
//! let model = fit(&set, &cfg).unwrap();
//!
//! let bytes = model.to_bytes().unwrap();
//! let model = ModelBundle::from_bytes(&bytes).unwrap();
//! let pred = model.predict(&set.feature_names, &[Some(2.0), Some(3.0)]).unwrap();
//! let (verdict, reasons) = decide(&pred, &QualityFlags::default(), &model.default_policy());
//! assert!(pred.p_causal > 0.5);
//! println!("{} {:?}", verdict.as_str(), reasons);
//! ```
#![deny(missing_docs)]

use serde::{Deserialize, Serialize};

pub mod boost;
mod bundle;
pub mod calibrate;
mod calibration_fit;
pub mod card;
mod error;
pub mod fit;
mod fit_config;
mod folds;
pub mod forest;
mod heads;
pub mod logistic;
pub mod metrics;
pub mod model_file;
pub mod ood;
mod selection;
pub mod standardise;
pub mod verdict;

pub use card::ModelCard;
pub use error::ModelError;
pub use fit::{Candidate, FitConfig, fit, fit_with_progress, fit_with_suite};
pub use model_file::{FORMAT_VERSION, MAGIC};
pub use verdict::{Reason, VerdictPolicy, decide, decide_unusable, reasons_field};

/// Fine ground-truth label of an ordered pair (from the simulator).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
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

/// The labels the classifier trains as causal: the driver's influence reaches the response,
/// directly or through other variables. Confounded and independent pairs are non-causal.
pub const CAUSAL_LABELS: [FineLabel; 2] = [FineLabel::Direct, FineLabel::Indirect];

impl FineLabel {
    /// All four labels in the order used by [`Prediction::fine`].
    pub const ALL: [FineLabel; 4] = [
        FineLabel::Direct,
        FineLabel::Indirect,
        FineLabel::Confounded,
        FineLabel::Independent,
    ];

    /// Whether the label counts as causal (see [`CAUSAL_LABELS`]).
    pub fn is_causal(self) -> bool {
        CAUSAL_LABELS.contains(&self)
    }

    /// The label written as `word` in `truth.csv` ([`FineLabel::as_str`]), if it is one.
    pub fn parse(word: &str) -> Option<FineLabel> {
        FineLabel::ALL.into_iter().find(|l| l.as_str() == word)
    }

    /// The word used in `truth.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            FineLabel::Direct => "direct",
            FineLabel::Indirect => "indirect",
            FineLabel::Confounded => "confounded",
            FineLabel::Independent => "independent",
        }
    }

    /// Position in [`FineLabel::ALL`].
    pub fn index(self) -> usize {
        match self {
            FineLabel::Direct => 0,
            FineLabel::Indirect => 1,
            FineLabel::Confounded => 2,
            FineLabel::Independent => 3,
        }
    }
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
    /// Fine labels; causal = `Direct` or `Indirect` (see [`CAUSAL_LABELS`]).
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

    /// Sort key for `labels.csv`, which lists review rows first, then causal, then non-causal.
    pub fn sort_rank(self) -> u8 {
        match self {
            Verdict::Review => 0,
            Verdict::Causal => 1,
            Verdict::NonCausal => 2,
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

/// Which of the bundle's two heads produced a prediction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum Head {
    /// The head trained on every feature column.
    Full,
    /// The head trained on the curve-shape columns only.
    CurveOnly,
}

impl Head {
    /// Short name used in cards and files.
    pub fn as_str(self) -> &'static str {
        match self {
            Head::Full => "full",
            Head::CurveOnly => "curve-only",
        }
    }
}

/// The model's answer for one row.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Prediction {
    /// Calibrated probability that the pair is causal (see [`CAUSAL_LABELS`]).
    pub p_causal: f64,
    /// The head that answered.
    pub head: Head,
    /// Regularised Mahalanobis distance of the standardised row from the head's training rows.
    pub ood_score: f64,
    /// Whether `ood_score` exceeds the head's stored training percentile.
    pub ood: bool,
    /// The answering head's threshold on `ood_score` (its training percentile).
    pub ood_threshold: f64,
    /// Probabilities of the four fine labels in [`FineLabel::ALL`] order, when the fine head
    /// exists and the full head answered. Not calibrated.
    pub fine: Option<[f64; 4]>,
}

/// Name and hash of the simulator spec a model was trained from.
#[derive(Debug, Clone, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct SpecIdentity {
    /// Spec name, e.g. the file stem.
    pub name: String,
    /// Hash of the spec's contents (the caller's choice of digest, as hex).
    pub hash: String,
}

/// SHA-256 of `bytes` as lowercase hex; a convenience for spec and input checksums.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

pub use bundle::{FineHead, ModelBundle};

#[cfg(test)]
pub(crate) mod tests_support {
    //! Shared helpers for unit tests: the stored scikit-learn fixture and an invented training
    //! set with a small bundle fitted on it.

    use rand::RngExt;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    use crate::{FineLabel, FitConfig, ModelBundle, TrainingSet, fit};

    /// The fixture written by `tests/reference/classifier_sklearn.py`.
    pub fn fixture() -> serde_json::Value {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../tests/reference/fixtures/classifier_sklearn.json"
        );
        let text = std::fs::read_to_string(path).expect("fixture present");
        serde_json::from_str(&text).expect("fixture is JSON")
    }

    /// A JSON array of arrays of numbers as rows of floats.
    pub fn rows(v: &serde_json::Value) -> Vec<Vec<f64>> {
        v.as_array().expect("array").iter().map(floats).collect()
    }

    /// A JSON array of numbers as floats.
    pub fn floats(v: &serde_json::Value) -> Vec<f64> {
        v.as_array()
            .expect("array")
            .iter()
            .map(|x| x.as_f64().expect("number"))
            .collect()
    }

    /// Invented data for tests only: one strong and one weaker informative feature, a lag
    /// feature that is sometimes unavailable, and a noise feature; families shift the means.
    pub fn synthetic(seed: u64, families: usize, systems_per_family: usize) -> TrainingSet {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut set = TrainingSet {
            feature_names: ["skill_gain", "convergence", "lag_peak", "noise"]
                .map(String::from)
                .to_vec(),
            schema_hash: "test-schema-1".into(),
            ..Default::default()
        };
        for f in 0..families {
            let shift = 0.2 * f as f64;
            for s in 0..systems_per_family {
                for k in 0..8 {
                    let label = FineLabel::ALL[k % 4];
                    let c = if label.is_causal() { 1.0 } else { -1.0 };
                    let g = |rng: &mut ChaCha8Rng| {
                        // Sum of uniforms: roughly normal, sd about 0.5.
                        (0..3).map(|_| rng.random::<f64>()).sum::<f64>() - 1.5
                    };
                    let a = c * 1.0 + shift + 1.4 * g(&mut rng);
                    let b = c * 0.6 - shift + 1.4 * g(&mut rng);
                    let lag = if rng.random::<f64>() < 0.15 {
                        None
                    } else {
                        Some(c * 0.5 + 1.6 * g(&mut rng))
                    };
                    set.rows
                        .push(vec![Some(a), Some(b), lag, Some(2.0 * g(&mut rng))]);
                    set.labels.push(label);
                    set.families.push(format!("fam{f}"));
                    set.systems.push(format!("fam{f}-sys{s}"));
                }
            }
        }
        set
    }

    pub fn small_bundle(seed: u64) -> (ModelBundle, TrainingSet) {
        let set = synthetic(11, 3, 5);
        let cfg = FitConfig {
            seed,
            curve_only_names: vec!["skill_gain".into(), "convergence".into(), "noise".into()],
            ..FitConfig::default()
        };
        (fit(&set, &cfg).unwrap(), set)
    }
}
