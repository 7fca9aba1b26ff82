//! Shape features of cross-map skill ensembles.
//!
//! INTERFACE SKETCH (owned by the features work; bodies to be written).
//! The crate is a leaf: it takes an [`Ensemble`] value (library sizes x replicates of skills,
//! plus optional lag profile and surrogate skills) and never the engine itself, so ensembles
//! read from a file fit the same door.
#![deny(missing_docs)]

/// Cross-map skills for one ordered pair: `skills[i][r]` is replicate `r` at `library_sizes[i]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Ensemble {
    /// Library sizes, strictly increasing.
    pub library_sizes: Vec<usize>,
    /// `skills[i]` holds every replicate's skill at `library_sizes[i]`; NaN marks a replicate
    /// whose skill was undefined (e.g. constant estimates).
    pub skills: Vec<Vec<f64>>,
}

/// Skill as a function of cross-map lag at the largest library size (Ye et al. 2015).
#[derive(Debug, Clone, PartialEq)]
pub struct LagProfile {
    /// Cross-map lags, increasing; lag `l` estimates driver(t + l) from the response's state at t.
    pub lags: Vec<i32>,
    /// Skill at each lag.
    pub skills: Vec<f64>,
}

/// Facts about the two series behind a pair, known only when the series themselves were seen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairContext {
    /// Number of time points in the table.
    pub n_points: usize,
    /// Embedding dimension of the driver.
    pub e_driver: usize,
    /// Embedding dimension of the response (the manifold searched).
    pub e_response: usize,
    /// Delay of the driver embedding.
    pub tau_driver: usize,
    /// Delay of the response embedding.
    pub tau_response: usize,
    /// Simplex one-step self-forecast skill of the driver.
    pub simplex_driver: f64,
    /// Simplex one-step self-forecast skill of the response.
    pub simplex_response: f64,
    /// Pearson correlation of the two raw series over shared non-missing points.
    pub correlation: f64,
}

/// Everything known about one ordered pair driver -> response.
#[derive(Debug, Clone, PartialEq)]
pub struct PairEvidence {
    /// Ensemble for driver -> response (driver estimated from the response's manifold).
    pub forward: Ensemble,
    /// Ensemble for the reverse hypothesis response -> driver, when available.
    pub reverse: Option<Ensemble>,
    /// Lag profile for driver -> response, when computed.
    pub lag: Option<LagProfile>,
    /// Skills of surrogate drivers at the largest library size, when computed.
    pub surrogate_skills: Option<Vec<f64>>,
    /// Facts about the two series, when the series themselves were seen (not for curves
    /// read from elsewhere).
    pub context: Option<PairContext>,
}

/// Which kind of evidence a feature needs; curve-only input has only [`FeatureGroup::Curve`]
/// and [`FeatureGroup::Contrast`] (when the reverse direction is present).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FeatureGroup {
    /// Computed from the forward ensemble alone.
    Curve,
    /// Needs the reverse ensemble.
    Contrast,
    /// Needs the lag profile.
    Lag,
    /// Needs surrogate skills.
    Surrogate,
    /// Needs the series themselves.
    Context,
}

/// One column of the feature schema.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FeatureDef {
    /// Column name in `features.csv` (snake_case, stable).
    pub name: &'static str,
    /// One-line meaning.
    pub meaning: &'static str,
    /// Range of values, in words (e.g. "[-1, 1]").
    pub range: &'static str,
    /// Evidence the feature needs.
    pub group: FeatureGroup,
}

/// Schema version; bump on any change of names, order or meaning.
pub const SCHEMA_VERSION: u32 = 1;

/// The feature schema, in column order.
pub fn schema() -> &'static [FeatureDef] {
    todo!("features work")
}

/// Stable hash (hex) of the schema's names, order, groups and version; model files record it.
pub fn schema_hash() -> String {
    todo!("features work")
}

/// Feature values in schema order; `None` marks a feature unavailable for this input.
pub fn compute(evidence: &PairEvidence) -> Vec<Option<f64>> {
    let _ = evidence;
    todo!("features work")
}
