//! Errors raised while rendering a report.

/// Why a report could not be rendered.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// A pair names a driver or response that is not in `ReportData::variables`.
    #[error(
        "pair {driver} -> {response}: variable {missing:?} is not in the report's variable list; add it to `variables`"
    )]
    UnknownVariable {
        /// Driver of the offending pair.
        driver: String,
        /// Response of the offending pair.
        response: String,
        /// The name that was not found.
        missing: String,
    },
    /// The same ordered pair appears twice.
    #[error("pair {driver} -> {response} appears more than once; give each ordered pair one entry")]
    DuplicatePair {
        /// Driver of the repeated pair.
        driver: String,
        /// Response of the repeated pair.
        response: String,
    },
    /// The same variable name appears twice in the variable list.
    #[error("variable {0:?} is listed twice; matrix axes must be unique")]
    DuplicateVariable(String),
    /// A probability is neither in [0, 1] nor NaN (NaN marks an unscored pair).
    #[error("pair {driver} -> {response}: p_causal = {value} is not in [0, 1]")]
    InvalidProbability {
        /// Driver of the offending pair.
        driver: String,
        /// Response of the offending pair.
        response: String,
        /// The value given.
        value: f64,
    },
    /// The ensemble's shape does not match its library sizes.
    #[error("pair {driver} -> {response}: {detail}")]
    ShapeMismatch {
        /// Driver of the offending pair.
        driver: String,
        /// Response of the offending pair.
        response: String,
        /// What does not match, in plain words.
        detail: String,
    },
    /// The plotting library failed while drawing a figure.
    #[error("drawing the {figure} figure failed: {message}")]
    Plot {
        /// Which figure was being drawn.
        figure: String,
        /// The plotting library's message.
        message: String,
    },
}
