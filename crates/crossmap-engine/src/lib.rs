//! Cross-map engine. INTERFACE SKETCH: the engine work replaces every `todo!` and may add items,
//! but keeps these names and shapes (the pipeline codes against them).
#![deny(missing_docs)]

/// How to choose each variable's embedding.
#[derive(Debug, Clone, PartialEq)]
pub struct EmbeddingSettings {
    /// Fixed embedding dimension for every variable; `None` chooses by simplex projection.
    pub e: Option<usize>,
    /// Fixed delay for every variable; `None` chooses by the documented rule.
    pub tau: Option<usize>,
    /// Largest E tried by simplex projection (default 10).
    pub max_e: usize,
    /// Theiler window in time steps; `None` uses the documented default.
    pub theiler: Option<usize>,
}

/// The embedding chosen for one variable.
#[derive(Debug, Clone, PartialEq)]
pub struct Embedding {
    /// Embedding dimension.
    pub e: usize,
    /// Delay in time steps.
    pub tau: usize,
    /// Simplex one-step forecast skill at the chosen E.
    pub simplex_skill: f64,
    /// Simplex skill for E = 1..=max_e (NaN where not computable), for the record.
    pub skill_by_e: Vec<f64>,
    /// Delay vectors left out because they touch a missing value.
    pub vectors_excluded: usize,
}

/// Per-variable embedding choice.
pub fn choose_embedding(x: &[f64], settings: &EmbeddingSettings) -> Result<Embedding, EngineError> {
    let _ = (x, settings);
    todo!("engine work")
}

/// Library sizes: automatic (log-spaced from E+2 to the usable length) or explicit.
#[derive(Debug, Clone, PartialEq)]
pub enum LibrarySizes {
    /// `count` log-spaced sizes from E+2 to the usable length (default 12).
    Auto {
        /// Number of sizes.
        count: usize,
    },
    /// Exactly these sizes.
    Explicit(Vec<usize>),
}

/// Raw cross-map parameters (checked by [`CrossMapParams::validate`]).
#[derive(Debug, Clone, PartialEq)]
pub struct CrossMapParams {
    /// Library sizes.
    pub library_sizes: LibrarySizes,
    /// Random libraries per size (default 100).
    pub replicates: usize,
    /// Theiler window; `None` uses the documented default.
    pub theiler: Option<usize>,
    /// Largest absolute cross-map lag; `None` chooses from the embedding.
    pub max_lag: Option<usize>,
    /// Surrogate drivers per pair at the largest library size (0 = none).
    pub surrogates: usize,
    /// Known period in time steps for seasonal surrogates; `None` uses phase randomisation.
    pub period: Option<usize>,
    /// Master seed.
    pub seed: u64,
}

/// Parameters checked against the data (library sizes resolved per response manifold).
#[derive(Debug, Clone, PartialEq)]
pub struct ValidParams {
    /// The raw parameters, as given.
    pub raw: CrossMapParams,
}

impl CrossMapParams {
    /// Check once against the series length and embeddings; one error variant per rule.
    pub fn validate(&self, n_points: usize, embeddings: &[Embedding]) -> Result<ValidParams, EngineError> {
        let _ = (n_points, embeddings);
        todo!("engine work")
    }
}

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
    /// Skill of each surrogate driver at the largest size.
    pub surrogate_skills: Vec<f64>,
}

/// Every ordered pair whose response is `response`: one work unit (one manifold's tables).
pub fn cross_map_response(
    series: &[Vec<f64>],
    embeddings: &[Embedding],
    response: usize,
    params: &ValidParams,
) -> Vec<PairEnsemble> {
    let _ = (series, embeddings, response, params);
    todo!("engine work")
}

/// Engine errors.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum EngineError {
    /// Placeholder until the engine work defines its variants.
    #[error("engine not yet built")]
    NotBuilt,
}
