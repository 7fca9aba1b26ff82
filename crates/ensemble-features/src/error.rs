//! Typed errors for ensembles that cannot be turned into features.

use thiserror::Error;

/// Why an ensemble (or other evidence) was rejected.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
#[non_exhaustive]
pub enum FeatureError {
    /// Fewer than two library sizes: a curve needs at least two points.
    #[error(
        "the ensemble has {found} library size(s); at least 2 distinct library sizes are needed to judge convergence (compute skills at more library sizes)"
    )]
    TooFewSizes {
        /// Number of library sizes found.
        found: usize,
    },
    /// The number of skill rows differs from the number of library sizes.
    #[error(
        "the ensemble lists {sizes} library sizes but {rows} rows of skills; give exactly one row of replicate skills per library size"
    )]
    ShapeMismatch {
        /// Number of library sizes.
        sizes: usize,
        /// Number of skill rows.
        rows: usize,
    },
    /// Library sizes are not strictly increasing.
    #[error(
        "library size {current} at position {index} does not exceed the previous size {previous}; sizes must be strictly increasing (sort them and merge duplicates)"
    )]
    SizesNotIncreasing {
        /// Zero-based position of the offending size.
        index: usize,
        /// The size before it.
        previous: usize,
        /// The offending size.
        current: usize,
    },
    /// A library size of zero, which cannot hold any neighbour.
    #[error("library size 0 at position {index}; every library size must be at least 1")]
    ZeroLibrarySize {
        /// Zero-based position of the offending size.
        index: usize,
    },
    /// A library size without any replicate.
    #[error(
        "library size {library_size} has no replicate skills; give at least 1 replicate per library size"
    )]
    NoReplicates {
        /// The library size without replicates.
        library_size: usize,
    },
    /// Replicate counts differ between library sizes.
    #[error(
        "library size {library_size} has {found} replicates but the first library size has {expected}; every library size needs the same number of replicates"
    )]
    UnequalReplicates {
        /// The library size whose count differs.
        library_size: usize,
        /// Replicate count at the first library size.
        expected: usize,
        /// Replicate count at this library size.
        found: usize,
    },
    /// The same (library size, replicate) member was given twice.
    #[error(
        "library size {library_size}, replicate {replicate} appears more than once; each ensemble member must be listed exactly once"
    )]
    DuplicateMember {
        /// Library size of the repeated member.
        library_size: usize,
        /// Replicate index of the repeated member.
        replicate: usize,
    },
    /// The reverse ensemble (response -> driver) is invalid; the forward one passed.
    #[error("reverse ensemble (response -> driver): {0}")]
    Reverse(Box<FeatureError>),
    /// A lag profile whose lags and skills differ in length.
    #[error("the lag profile has {lags} lags but {skills} skills; give exactly one skill per lag")]
    LagShapeMismatch {
        /// Number of lags.
        lags: usize,
        /// Number of skills.
        skills: usize,
    },
    /// A lag profile whose lags are not strictly increasing.
    #[error(
        "lag {current} at position {index} does not exceed the previous lag {previous}; lags must be strictly increasing"
    )]
    LagsNotIncreasing {
        /// Zero-based position of the offending lag.
        index: usize,
        /// The lag before it.
        previous: i32,
        /// The offending lag.
        current: i32,
    },
}
