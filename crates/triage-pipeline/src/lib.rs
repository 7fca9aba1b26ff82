//! The one pipeline shared by labelling (`scan`, `label`) and training (`train`, `evaluate`).
//!
//! Data flow, in three stages so that the expensive middle one can be sharded and resumed:
//!
//! 1. [`embed_all`]: choose each variable's embedding (cheap, every shard repeats it);
//! 2. [`cross_map_unit`]: one *work unit* per response manifold, producing the ensembles of every
//!    pair whose response it is (the neighbour tables are built once per unit);
//! 3. [`assemble`]: pair each ensemble with its reverse direction and the series context, and
//!    compute the features. Judging ([`judge`]) then applies a model.
//!
//! Units can be saved and reloaded losslessly ([`units`]) for sharded and resumable runs.
//!
//! Training feeds simulated systems through exactly the same three stages ([`training_set`]).
//!
//! Whole runs, as the command line and the Python module make them, are driven from here too:
//! [`orchestration`] (scan, merge, resume, label: from a table to the result files, with
//! [`settings`] as given by the user, [`tables`] as written, [`model_source`] for the model)
//! and [`model_runs`] (simulate, train, evaluate).
//!
//! A whole scan in memory, as the command line's `scan` runs it (without the checkpoint and
//! the files):
//!
//! ```
//! use triage_pipeline::orchestration::{self as run, InputChoice, Silent};
//! use triage_pipeline::settings::{EngineSettings, policy};
//! use triage_pipeline::units::ShardSpec;
//!
//! // Two coupled logistic maps in the form of Sugihara et al. (2012): x drives y.
//! let (mut x, mut y) = (0.4_f64, 0.2_f64);
//! let mut csv = String::from("t,x,y\n");
//! for t in 0..200 {
//!     (x, y) = (x * (3.8 - 3.8 * x), y * (3.5 - 3.5 * y - 0.1 * x));
//!     csv.push_str(&format!("{t},{x},{y}\n"));
//! }
//! let table = series_io::read_series_from(csv.as_bytes(), "maps.csv", &Default::default())?;
//! let engine = EngineSettings {
//!     replicates: 10,
//!     surrogates: 9,
//!     ..EngineSettings::default()
//! };
//! let choice = InputChoice::default();
//! let prepared =
//!     run::prepare_table(table, "maps.csv", "maps.csv", &choice, &engine, ShardSpec::WHOLE, &Silent)?;
//! let model = triage_pipeline::model_source::load(None)?; // the built-in model
//! let band = policy("0.3,0.7")?;
//! let finished = run::scan_in_memory(&prepared, "maps.csv", false, &band, &model, &Silent)?;
//! assert_eq!(finished.records.len(), 2); // x -> y and y -> x
//! assert!(finished.judgements.iter().all(|j| (0.0..=1.0).contains(&j.p_causal)));
//! # Ok::<(), anyhow::Error>(())
//! ```
#![deny(missing_docs)]

mod assemble;
pub mod estimate;
mod judge;
pub mod model_runs;
pub mod model_source;
pub mod orchestration;
mod quality;
mod report_view;
pub mod reviewed;
pub mod run_record;
mod selection;
pub mod settings;
pub mod tables;
mod training;
pub mod units;

pub use assemble::{PairRecord, assemble, assemble_curves, cycles};
pub use estimate::WorkEstimate;
pub use judge::{Judgement, judge, rule_of_thumb};
pub use quality::{QualityThresholds, quality_flags};
pub use report_view::{
    CycleFact, KEY_FEATURES, RunFacts, cycle_facts, report_view, table_rows, verdict_kind,
};
pub use selection::{PairSelection, ResolvedSelection};
pub use training::{
    AnalysedSystem, SkippedSystem, analyse_systems, analyse_systems_until, fine_label, series_of,
    training_set,
};

use crossmap_engine::{CrossMapParams, Embedding, EmbeddingSettings, PairEnsemble, ValidParams};

/// Observed series by name, every column the same length; NaN marks a missing value.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesSet {
    /// Variable names.
    pub names: Vec<String>,
    /// `columns[j][i]`: variable j at time i.
    pub columns: Vec<Vec<f64>>,
}

impl SeriesSet {
    /// Number of time points.
    pub fn len(&self) -> usize {
        self.columns.first().map_or(0, Vec::len)
    }

    /// True when there are no time points.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Everything that fixes a run's numbers (apart from the model).
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisSettings {
    /// Embedding choice.
    pub embedding: EmbeddingSettings,
    /// Cross-map parameters.
    pub crossmap: CrossMapParams,
    /// Thresholds of the data-quality review reasons.
    pub quality: QualityThresholds,
}

/// Pipeline errors.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PipelineError {
    /// A variable could not be embedded.
    #[error("variable `{variable}`: {source}")]
    Embedding {
        /// The variable.
        variable: String,
        /// Why.
        #[source]
        source: crossmap_engine::EngineError,
    },
    /// The cross-map parameters do not fit the data.
    #[error(transparent)]
    Params(crossmap_engine::EngineError),
    /// The cross-map parameters do not fit one variable's data; the message names it.
    #[error("variable `{variable}`: {reason}")]
    ParamsOf {
        /// The variable (response manifold).
        variable: String,
        /// What does not fit, and the fix.
        reason: String,
        /// The engine's error (not a `source`: its text names the variable by index, which
        /// this message replaces).
        engine: crossmap_engine::EngineError,
    },
    /// Fewer than two variables.
    #[error("need at least two series, found {0}")]
    TooFewSeries(usize),
}

/// The engine's per-variable refusals, restated with the variable's name instead of its index.
fn name_variable(e: crossmap_engine::EngineError, names: &[String]) -> PipelineError {
    use crossmap_engine::EngineError as E;
    let named = |k: usize| names.get(k).cloned().unwrap_or_else(|| format!("#{k}"));
    let (variable, reason) = match &e {
        E::LibrarySizeOutOfRange {
            variable,
            size,
            min,
            max,
        } => (
            named(*variable),
            format!(
                "library size {size} lies outside [{min}, {max}] (E+2 to the usable length); choose library sizes within that range"
            ),
        ),
        E::LagTooLarge {
            variable,
            max_lag,
            usable,
        } => (
            named(*variable),
            format!(
                "max cross-map lag {max_lag} must be below half its usable length {usable}; choose a smaller max lag"
            ),
        ),
        E::SeriesTooShort {
            variable: Some(k),
            usable,
            needed,
            e: dim,
            tau,
        } => (
            named(*k),
            format!(
                "{usable} usable delay vectors for E = {dim}, tau = {tau}, but at least {needed} are needed; use a longer series, fewer missing values, or a smaller E, tau or Theiler window"
            ),
        ),
        _ => return PipelineError::Params(e),
    };
    PipelineError::ParamsOf {
        variable,
        reason,
        engine: e,
    }
}

/// Stage 1: the embedding of every variable, in column order.
pub fn embed_all(
    series: &SeriesSet,
    settings: &EmbeddingSettings,
) -> Result<Vec<Embedding>, PipelineError> {
    embed_all_with(series, settings, &|_| {})
}

/// [`embed_all`], calling `done(k)` after the k-th variable is embedded (for progress).
pub fn embed_all_with(
    series: &SeriesSet,
    settings: &EmbeddingSettings,
    done: &dyn Fn(usize),
) -> Result<Vec<Embedding>, PipelineError> {
    if series.names.len() < 2 {
        return Err(PipelineError::TooFewSeries(series.names.len()));
    }
    series
        .columns
        .iter()
        .zip(&series.names)
        .enumerate()
        .map(|(k, (column, name))| {
            let e = crossmap_engine::choose_embedding(column, settings).map_err(|source| {
                PipelineError::Embedding {
                    variable: name.clone(),
                    source,
                }
            });
            done(k + 1);
            e
        })
        .collect()
}

/// Check the cross-map parameters against the data once, before any work, and prepare every
/// variable's cycle and spectra for the surrogates once.
pub fn validate_params(
    series: &SeriesSet,
    embeddings: &[Embedding],
    params: &CrossMapParams,
) -> Result<ValidParams, PipelineError> {
    params
        .validate(series.len(), embeddings)
        .map(|v| v.with_surrogate_bases(&series.columns))
        .map_err(|e| name_variable(e, &series.names))
}

/// Stage 2: the ensembles of every pair whose response is variable `response`.
pub fn cross_map_unit(
    series: &SeriesSet,
    embeddings: &[Embedding],
    response: usize,
    params: &ValidParams,
) -> Vec<PairEnsemble> {
    crossmap_engine::cross_map_response(&series.columns, embeddings, response, params)
}

/// Stages 1-3 in one call, for a whole table in one process.
pub fn analyse(
    series: &SeriesSet,
    settings: &AnalysisSettings,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<Analysis, PipelineError> {
    let embeddings = embed_all(series, &settings.embedding)?;
    let params = validate_params(series, &embeddings, &settings.crossmap)?;
    let done = std::sync::atomic::AtomicUsize::new(0);
    let ensembles: Vec<PairEnsemble> = {
        use rayon::prelude::*;
        (0..series.names.len())
            .into_par_iter()
            .flat_map_iter(|response| {
                let unit = cross_map_unit(series, &embeddings, response, &params);
                let n =
                    done.fetch_add(unit.len(), std::sync::atomic::Ordering::Relaxed) + unit.len();
                progress(n);
                unit
            })
            .collect()
    };
    let pairs = assemble(series, &embeddings, &ensembles, settings);
    Ok(Analysis {
        embeddings,
        params,
        pairs,
    })
}

/// The result of stages 1-3.
#[derive(Debug, Clone, PartialEq)]
pub struct Analysis {
    /// Embedding of each variable, in column order.
    pub embeddings: Vec<Embedding>,
    /// The validated cross-map parameters (library sizes, Theiler window and lags resolved per
    /// response manifold).
    pub params: ValidParams,
    /// One record per ordered pair, ordered by (driver, response) column index.
    pub pairs: Vec<PairRecord>,
}
