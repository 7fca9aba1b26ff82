//! Training sets from simulated systems, through the same stages as a scan.

use rayon::prelude::*;
use training_sim::{Label, System};
use verdict_model::{FineLabel, TrainingSet};

use crate::orchestration::Cancelled;
use crate::{AnalysisSettings, PairRecord, PipelineError, SeriesSet, analyse};

/// A simulated system the pipeline could not analyse, kept for the record (model card).
#[derive(Debug, Clone, PartialEq)]
pub struct SkippedSystem {
    /// System id.
    pub id: String,
    /// Why.
    pub reason: String,
}

/// One analysed system: its pair records and the truth of each.
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysedSystem {
    /// System id.
    pub id: String,
    /// Dynamics family.
    pub family: String,
    /// Pair records, ordered by (driver, response).
    pub pairs: Vec<PairRecord>,
    /// Truth of each pair record.
    pub labels: Vec<FineLabel>,
}

/// The series of a simulated system as the pipeline sees a table.
pub fn series_of(system: &System) -> SeriesSet {
    SeriesSet {
        names: system.variables.clone(),
        columns: system.series.clone(),
    }
}

/// Map the simulator's truth onto the classifier's labels.
pub fn fine_label(label: Label) -> FineLabel {
    match label {
        Label::Direct => FineLabel::Direct,
        Label::Indirect => FineLabel::Indirect,
        Label::Confounded => FineLabel::Confounded,
        Label::Independent => FineLabel::Independent,
    }
}

/// Analyse every system (in parallel, results in input order). `progress` gets the count of
/// finished systems. Systems that cannot be analysed are returned separately, never dropped
/// silently.
pub fn analyse_systems(
    systems: &[System],
    settings: &AnalysisSettings,
    progress: &(dyn Fn(usize) + Sync),
) -> (Vec<AnalysedSystem>, Vec<SkippedSystem>) {
    analyse_systems_until(systems, settings, progress, &|| false).expect("never asked to stop")
}

/// [`analyse_systems`] that stops with [`Cancelled`] once `stop` returns true (it is asked
/// before each system).
pub fn analyse_systems_until(
    systems: &[System],
    settings: &AnalysisSettings,
    progress: &(dyn Fn(usize) + Sync),
    stop: &(dyn Fn() -> bool + Sync),
) -> Result<(Vec<AnalysedSystem>, Vec<SkippedSystem>), Cancelled> {
    let done = std::sync::atomic::AtomicUsize::new(0);
    let results: Vec<Result<AnalysedSystem, SkippedSystem>> = systems
        .par_iter()
        .map(|system| {
            if stop() {
                return Err(Cancelled);
            }
            let out = analyse_system(system, settings);
            progress(done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1);
            Ok(out)
        })
        .collect::<Result<_, Cancelled>>()?;
    let mut analysed = Vec::new();
    let mut skipped = Vec::new();
    for r in results {
        match r {
            Ok(a) => analysed.push(a),
            Err(s) => skipped.push(s),
        }
    }
    Ok((analysed, skipped))
}

fn analyse_system(
    system: &System,
    settings: &AnalysisSettings,
) -> Result<AnalysedSystem, SkippedSystem> {
    let skip = |e: PipelineError| SkippedSystem {
        id: system.id.clone(),
        reason: e.to_string(),
    };
    let series = series_of(system);
    let analysis = analyse(&series, settings, &|_| {}).map_err(skip)?;
    let mut labels = Vec::with_capacity(analysis.pairs.len());
    for pair in &analysis.pairs {
        let (d, r) = (
            &system.variables[pair.driver],
            &system.variables[pair.response],
        );
        let truth = system
            .truth
            .iter()
            .find(|t| &t.driver == d && &t.response == r)
            .ok_or_else(|| SkippedSystem {
                id: system.id.clone(),
                reason: format!("no truth row for {d} -> {r}"),
            })?;
        labels.push(fine_label(truth.label));
    }
    Ok(AnalysedSystem {
        id: system.id.clone(),
        family: system.family.clone(),
        pairs: analysis.pairs,
        labels,
    })
}

/// The classifier's training rows of analysed systems, in the feature schema's column order.
pub fn training_set(systems: &[AnalysedSystem]) -> TrainingSet {
    let mut set = TrainingSet {
        feature_names: ensemble_features::names()
            .into_iter()
            .map(String::from)
            .collect(),
        schema_hash: ensemble_features::schema_hash(),
        ..TrainingSet::default()
    };
    for system in systems {
        for (pair, label) in system.pairs.iter().zip(&system.labels) {
            set.rows.push(pair.features.clone());
            set.labels.push(*label);
            set.families.push(system.family.clone());
            set.systems.push(system.id.clone());
        }
    }
    set
}
