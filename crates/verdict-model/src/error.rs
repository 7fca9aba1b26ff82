//! The crate's typed error.

use thiserror::Error;

/// Everything that can go wrong while fitting, predicting or reading a model file.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ModelError {
    /// The training set has no rows.
    #[error("the training set has no rows; simulate at least a few systems per family")]
    EmptyTrainingSet,
    /// Two parallel training-set columns have different lengths.
    #[error("training set: `{what}` has {found} entries but there are {expected} rows")]
    LengthMismatch {
        /// Which column is the wrong length.
        what: &'static str,
        /// Number of rows.
        expected: usize,
        /// Entries found.
        found: usize,
    },
    /// A training row has the wrong number of values.
    #[error("training row {row} has {found} values but there are {expected} feature names")]
    RowWidth {
        /// Row index.
        row: usize,
        /// Number of feature names.
        expected: usize,
        /// Values found.
        found: usize,
    },
    /// A feature value is NaN or infinite.
    #[error("feature `{column}` is not finite in row {row}; use `None` for unavailable values")]
    NonFinite {
        /// Row index (0 for a single prediction row).
        row: usize,
        /// Feature name.
        column: String,
    },
    /// The same feature name appears twice.
    #[error("feature `{name}` appears twice; feature names must be unique")]
    DuplicateFeature {
        /// The repeated name.
        name: String,
    },
    /// A curve-only column name is not among the feature names.
    #[error("curve-only feature `{name}` is not in the training set's feature names")]
    UnknownCurveOnlyFeature {
        /// The unknown name.
        name: String,
    },
    /// A configuration value is out of range.
    #[error("fit option `{option}`: {reason}")]
    InvalidConfig {
        /// The option's name.
        option: &'static str,
        /// What is wrong and how to fix it.
        reason: String,
    },
    /// After dropping rows with unavailable values a head has too few rows or only one class.
    #[error(
        "the {head} head has {rows} complete rows ({positives} causal); it needs at least {needed} rows and both classes"
    )]
    NotEnoughRows {
        /// Head name.
        head: &'static str,
        /// Complete rows.
        rows: usize,
        /// Causal rows among them.
        positives: usize,
        /// Minimum needed.
        needed: usize,
    },
    /// An underlying fitting library failed.
    #[error("fitting the {model} failed: {message}")]
    Fit {
        /// Which model.
        model: &'static str,
        /// The library's message.
        message: String,
    },
    /// A prediction row names a feature the model was not trained on.
    #[error(
        "feature `{name}` is unknown to this model; the features were computed under another schema"
    )]
    UnknownFeature {
        /// The unknown name.
        name: String,
    },
    /// A prediction row's values and names differ in length.
    #[error("the row has {found} values for {expected} feature names")]
    RowLength {
        /// Number of names.
        expected: usize,
        /// Number of values.
        found: usize,
    },
    /// Neither head has all its features available in the row.
    #[error("no head of the model can score this row: missing {}", missing.join(", "))]
    MissingFeatures {
        /// Names the smallest head needs but the row lacks.
        missing: Vec<String>,
    },
    /// The model was trained under another feature schema.
    #[error(
        "feature-schema mismatch: the model expects `{expected}`, the input has `{found}`; retrain or use a matching model"
    )]
    SchemaMismatch {
        /// Schema hash stored in the model.
        expected: String,
        /// Schema hash of the input.
        found: String,
    },
    /// The file is shorter than its header says.
    #[error("model file truncated: {needed} bytes needed, {available} present")]
    Truncated {
        /// Bytes the header requires.
        needed: usize,
        /// Bytes present.
        available: usize,
    },
    /// The file does not start with this crate's magic bytes.
    #[error("not a model file of this tool (wrong magic bytes)")]
    ForeignFile,
    /// The file's format version is not the one this build reads.
    #[error(
        "model file format version {found}; this build reads version {supported} only; retrain or use a matching build"
    )]
    UnsupportedVersion {
        /// Version in the file.
        found: u16,
        /// Version this build reads.
        supported: u16,
    },
    /// The header claims a payload above the decoding limit.
    #[error("model file claims {claimed} bytes of payload, above the limit of {limit} bytes")]
    TooLarge {
        /// Claimed payload length.
        claimed: u64,
        /// Limit.
        limit: u64,
    },
    /// The payload's SHA-256 differs from the header's.
    #[error("model file corrupted: payload checksum mismatch")]
    ChecksumMismatch,
    /// Bytes follow the declared payload.
    #[error("model file has {extra} unexpected bytes after the payload")]
    TrailingBytes {
        /// Number of extra bytes.
        extra: usize,
    },
    /// The payload passed its checksum but could not be decoded.
    #[error(
        "model payload could not be decoded: {0}; the file was written by another build or edited, retrain it with `ccm-triage train`"
    )]
    Decode(String),
    /// The header's reserved bytes are not zero.
    #[error(
        "model file header: the reserved bytes 10-11 hold {found:#06x} instead of zero; the file was edited or written by another tool"
    )]
    ReservedBytes {
        /// The reserved field as read (little-endian).
        found: u16,
    },
    /// The payload decoded, but its internal sizes or indices do not fit together.
    #[error(
        "model file is inconsistent: {part}: {reason}; the file was damaged or edited, retrain it with `ccm-triage train`"
    )]
    Inconsistent {
        /// Which part of the model (head, scorer, tree, calibration table, ...).
        part: String,
        /// What does not fit.
        reason: String,
    },
    /// The model file is not a regular file (a FIFO, a device, a directory).
    #[error(
        "model file {path}: not a regular file ({kind}); give the path of a model.bin written by `ccm-triage train`"
    )]
    NotRegularFile {
        /// The path given.
        path: std::path::PathBuf,
        /// What it is instead.
        kind: &'static str,
    },
    /// The model file is larger than any valid model file.
    #[error(
        "model file {path}: {size} bytes, above the largest valid model file ({limit} bytes); this is not a model written by `ccm-triage train`"
    )]
    FileTooLarge {
        /// The path given.
        path: std::path::PathBuf,
        /// Its size in bytes.
        size: u64,
        /// The largest size accepted.
        limit: u64,
    },
    /// The model file could not be opened or read.
    #[error("model file {path} cannot be read: {source}")]
    Io {
        /// The path given.
        path: std::path::PathBuf,
        /// Why.
        #[source]
        source: std::io::Error,
    },
    /// The model could not be encoded.
    #[error("model could not be encoded: {0}")]
    Encode(String),
    /// Drawing the reliability diagram failed.
    #[error("drawing the reliability diagram failed: {0}")]
    Plot(String),
    /// Card serialisation to JSON failed.
    #[error("model card JSON: {0}")]
    Json(#[from] serde_json::Error),
}
