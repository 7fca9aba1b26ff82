//! Cross-map engine: delay embedding, simplex projection, neighbour tables and cross-map skill
//! ensembles for every ordered pair of variables.
//!
//! Direction convention: a pair is written driver -> response. Its evidence is the skill of
//! estimating the **driver's** values from neighbours found in the **response's** delay
//! embedding (Sugihara et al. 2012): if the driver forces the response, the response's states
//! carry the driver's footprint.
//!
//! Documented rules:
//! - delay: first lag where the autocorrelation falls below 1/e, bounded ([`choose_tau`]);
//! - dimension: smallest E in 1..=10 whose one-step simplex skill is within 2% of the best, and
//!   at least 2 ([`choose_embedding`], [`PARSIMONY_TOLERANCE`], [`MIN_AUTO_E`]);
//! - Theiler window: `tau (E - 1)` by default ([`default_theiler`]), the point itself always out;
//! - neighbours: E+1, ranked by (distance, position); weights `exp(-d_i/d_1)`, and when `d_1 = 0`
//!   equal weight on the zero-distance neighbours ([`simplex_weights`]);
//! - lags: lag `l` estimates `driver(t + l)` from the response state at `t`; true driving is
//!   expected to peak at `l <= 0` (Ye et al. 2015); default range `max(E tau, 3)`, at most 20
//!   ([`default_max_lag`]);
//! - missing values: delay vectors touching one are left out; a neighbour whose target is
//!   missing is skipped for the next; targets that are missing are left out of the skill.
//!
//! ```
//! use crossmap_engine::{choose_embedding, cross_map_all, CrossMapParams, EmbeddingSettings, LibrarySizes};
//!
//! // Coupled logistic maps, X drives Y only (Sugihara et al. 2012).
//! let (mut x, mut y) = (vec![0.4], vec![0.2]);
//! for t in 0..299 {
//!     x.push(x[t] * (3.8 - 3.8 * x[t]));
//!     y.push(y[t] * (3.5 - 3.5 * y[t] - 0.1 * x[t]));
//! }
//! let series = vec![x, y];
//! let settings = EmbeddingSettings { e: Some(2), tau: Some(1), ..Default::default() };
//! let embeddings: Vec<_> = series.iter().map(|s| choose_embedding(s, &settings)).collect::<Result<_, _>>()?;
//! let params = CrossMapParams::default()
//!     .with_library_sizes(LibrarySizes::Auto { count: 4 })
//!     .with_replicates(10)
//!     .validate(300, &embeddings)?;
//! let pairs = cross_map_all(&series, &embeddings, &params, &|_done| {});
//! // pairs[0]: driver 1 (Y) -> response 0 (X); pairs[1]: driver 0 (X) -> response 1 (Y).
//! let x_to_y = &pairs[1];
//! assert_eq!((x_to_y.driver, x_to_y.response), (0, 1));
//! assert!(x_to_y.skills.last().unwrap()[0] > 0.8);
//! # Ok::<(), crossmap_engine::EngineError>(())
//! ```
#![deny(missing_docs)]

mod choose;
mod crossmap;
mod embed;
pub mod neighbours;
mod params;
pub mod season;
mod seeds;
mod simplex;
mod stats;
pub mod surrogate;

pub use choose::{
    DEFAULT_MAX_E, EmbeddingSettings, MAX_AUTO_TAU, MIN_AUTO_E, PARSIMONY_TOLERANCE,
    auto_tau_bound, choose_embedding, choose_tau,
};
pub use crossmap::{
    CrossMapEstimate, cross_map_all, cross_map_response, cross_map_with_library, draw_library,
    simplex_weights,
};
pub use embed::{Embedding, Manifold, default_theiler};
pub use params::{
    CrossMapParams, DEFAULT_LIBRARY_COUNT, DEFAULT_REPLICATES, LibrarySizes, MAX_AUTO_LAG,
    ResponsePlan, ValidParams, default_max_lag, log_spaced,
};
pub use season::{Season, detect_season, season_at, season_for};
pub use simplex::{Forecast, simplex_forecast};
pub use stats::pearson;
pub use surrogate::SurrogateBases;

/// The ensemble and extras for one ordered pair driver -> response: the driver's values are
/// estimated from neighbours in the response's delay embedding.
#[derive(Debug, Clone, PartialEq)]
pub struct PairEnsemble {
    /// Index of the driver column.
    pub driver: usize,
    /// Index of the response column (whose manifold is searched).
    pub response: usize,
    /// Library sizes used.
    pub library_sizes: Vec<usize>,
    /// `skills[i][r]`: replicate r at size i.
    pub skills: Vec<Vec<f64>>,
    /// Cross-map lags at the largest size.
    pub lags: Vec<i32>,
    /// Skill at each lag (mean over the largest size's replicates).
    pub lag_skills: Vec<f64>,
    /// Skill of each phase-randomised surrogate driver at the largest size (mean over its
    /// replicate libraries).
    pub surrogate_skills: Vec<f64>,
    /// Skill of each seasonal surrogate driver (the driver's mean cycle kept, see [`season`])
    /// at the largest size; NaN when the driver is too short for a cycle.
    pub seasonal_surrogate_skills: Vec<f64>,
}

/// Engine errors.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum EngineError {
    /// An embedding dimension of zero was requested.
    #[error(
        "embedding dimension E must be at least 1; set E to 1 or more (or leave it unset to choose by simplex projection)"
    )]
    EmbeddingDimensionZero,
    /// A delay of zero was requested.
    #[error(
        "delay tau must be at least 1 time step; set tau to 1 or more (or leave it unset to choose automatically)"
    )]
    DelayZero,
    /// The largest E to try by simplex projection is zero.
    #[error(
        "the largest embedding dimension to try (max E) must be at least 1; set it to 1 or more, e.g. 10"
    )]
    MaxDimensionZero,
    /// Zero replicate libraries per size.
    #[error("replicates must be at least 1; set replicates to 1 or more (default 100)")]
    ReplicatesZero,
    /// No library sizes requested.
    #[error(
        "library sizes: at least one size is needed; give one or more sizes or an automatic count of 1 or more (default 12)"
    )]
    LibraryCountZero,
    /// An explicit library size lies outside `[E+2, usable length]`.
    #[error(
        "library size {size} for variable {variable} lies outside [{min}, {max}] (E+2 to the usable length); choose library sizes within that range"
    )]
    LibrarySizeOutOfRange {
        /// Variable (response) index.
        variable: usize,
        /// Offending size.
        size: usize,
        /// Smallest allowed (E+2).
        min: usize,
        /// Largest allowed (usable length).
        max: usize,
    },
    /// The series has too few valid delay vectors for the embedding and Theiler window.
    #[error("series{} has {usable} usable delay vectors for E = {e}, tau = {tau} but needs at least {needed}; use a longer series, fewer missing values, or a smaller E, tau or Theiler window", variable.map(|v| format!(" {v}")).unwrap_or_default())]
    SeriesTooShort {
        /// Variable index, when known.
        variable: Option<usize>,
        /// Valid delay vectors.
        usable: usize,
        /// Required.
        needed: usize,
        /// Embedding dimension.
        e: usize,
        /// Delay.
        tau: usize,
    },
    /// The largest cross-map lag leaves too few predictable points.
    #[error(
        "max cross-map lag {max_lag} for variable {variable} must be below half its usable length {usable}; choose a smaller max lag"
    )]
    LagTooLarge {
        /// Variable index.
        variable: usize,
        /// Requested lag.
        max_lag: usize,
        /// Usable length.
        usable: usize,
    },
    /// Fewer than two series to pair.
    #[error(
        "cross mapping needs at least two series, found {found}; supply two or more series columns"
    )]
    TooFewSeries {
        /// Series found.
        found: usize,
    },
    /// A seasonal period below two steps.
    #[error(
        "seasonal period {period} must be at least 2 time steps; give the period in time steps, or leave it unset so that each variable's own dominant cycle is used where it counts as a season"
    )]
    PeriodTooShort {
        /// Requested period.
        period: usize,
    },
    /// A seasonal period longer than a third of the record.
    #[error(
        "seasonal period {period} is longer than a third of the {n_points}-point record (at most {max}); at least three cycles are needed to estimate a mean cycle: give a shorter period or leave it unset"
    )]
    PeriodTooLong {
        /// Requested period.
        period: usize,
        /// Largest allowed.
        max: usize,
        /// Points in the record.
        n_points: usize,
    },
    /// More surrogates per kind than the documented cap.
    #[error(
        "{found} surrogates of each kind per pair is above the cap of {max} (enough for a surrogate rank at the 0.001 level); give at most {max}"
    )]
    TooManySurrogates {
        /// Requested.
        found: usize,
        /// Cap.
        max: usize,
    },
    /// More replicate libraries per size than the documented cap.
    #[error(
        "{found} replicates per library size is above the cap of {max}; the spread of skill is well estimated long before that: give at most {max}"
    )]
    TooManyReplicates {
        /// Requested.
        found: usize,
        /// Cap.
        max: usize,
    },
    /// Values so large that squared distances between delay vectors overflow.
    #[error(
        "the series holds values up to {largest:e} in magnitude, so distances between its delay vectors overflow; rescale it (for example divide it by a power of ten) so that values stay below 1e150"
    )]
    ValuesTooLarge {
        /// Largest magnitude found.
        largest: f64,
    },
    /// Two series of different lengths.
    #[error("series lengths differ ({expected} vs {found}); give series of equal length")]
    LengthMismatch {
        /// Length of the first series.
        expected: usize,
        /// Length of the other.
        found: usize,
    },
    /// An explicit library time has no valid delay vector.
    #[error(
        "library time {time} has no valid delay vector (too early for the embedding, or it touches a missing value); choose library times with complete delay vectors"
    )]
    LibraryTimeInvalid {
        /// Offending time index.
        time: usize,
    },
    /// No E gave a finite forecast skill (e.g. a constant series).
    #[error(
        "simplex projection gave no finite forecast skill for any E (is the series constant?); fix E and tau explicitly or check the series"
    )]
    NoForecastSkill,
}
