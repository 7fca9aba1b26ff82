//! Stage 3: pair each ensemble with its reverse direction and context, then compute features.

use crossmap_engine::{Embedding, PairEnsemble};
use ensemble_features::{Ensemble, LagProfile, PairContext, PairEvidence};
use verdict_model::QualityFlags;

use crate::{QualityThresholds, SeriesSet, quality_flags};

/// One ordered pair driver -> response with everything known about it.
#[derive(Debug, Clone, PartialEq)]
pub struct PairRecord {
    /// Driver column index.
    pub driver: usize,
    /// Response column index.
    pub response: usize,
    /// What the features were computed from.
    pub evidence: PairEvidence,
    /// Feature values in schema order (`None` = unavailable for this input).
    pub features: Vec<Option<f64>>,
    /// Data-quality facts for the verdict.
    pub quality: QualityFlags,
}

/// Turn the engine's ensembles (any order, any subset of pairs) into pair records ordered by
/// (driver, response). A pair whose reverse direction is absent gets no contrast features.
pub fn assemble(
    series: &SeriesSet,
    embeddings: &[Embedding],
    ensembles: &[PairEnsemble],
    thresholds: &QualityThresholds,
) -> Vec<PairRecord> {
    let mut by_pair: std::collections::BTreeMap<(usize, usize), &PairEnsemble> =
        std::collections::BTreeMap::new();
    for e in ensembles {
        by_pair.insert((e.driver, e.response), e);
    }
    by_pair
        .iter()
        .map(|(&(driver, response), forward)| {
            let reverse = by_pair.get(&(response, driver)).map(|r| curve(r));
            let lag = (!forward.lags.is_empty()).then(|| LagProfile {
                lags: forward.lags.clone(),
                skills: forward.lag_skills.clone(),
            });
            let surrogate_skills =
                (!forward.surrogate_skills.is_empty()).then(|| forward.surrogate_skills.clone());
            let (ed, er) = (&embeddings[driver], &embeddings[response]);
            let context = PairContext {
                n_points: series.len(),
                e_driver: ed.e,
                e_response: er.e,
                tau_driver: ed.tau,
                tau_response: er.tau,
                simplex_driver: ed.simplex_skill,
                simplex_response: er.simplex_skill,
                correlation: crossmap_engine::pearson(
                    &series.columns[driver],
                    &series.columns[response],
                ),
            };
            let evidence = PairEvidence {
                forward: curve(forward),
                reverse,
                lag,
                surrogate_skills,
                context: Some(context),
            };
            record(driver, response, evidence, thresholds)
        })
        .collect()
}

/// Pair records for ensembles computed elsewhere (curve-only evidence).
pub fn assemble_curves(
    pairs: &[(usize, usize, Ensemble)],
    thresholds: &QualityThresholds,
) -> Vec<PairRecord> {
    let index: std::collections::BTreeMap<(usize, usize), &Ensemble> =
        pairs.iter().map(|(d, r, e)| ((*d, *r), e)).collect();
    index
        .iter()
        .map(|(&(driver, response), forward)| {
            let evidence = PairEvidence {
                forward: (*forward).clone(),
                reverse: index.get(&(response, driver)).map(|e| (*e).clone()),
                lag: None,
                surrogate_skills: None,
                context: None,
            };
            record(driver, response, evidence, thresholds)
        })
        .collect()
}

fn record(
    driver: usize,
    response: usize,
    evidence: PairEvidence,
    thresholds: &QualityThresholds,
) -> PairRecord {
    let features = ensemble_features::compute(&evidence);
    let quality = quality_flags(&evidence, thresholds);
    PairRecord {
        driver,
        response,
        evidence,
        features,
        quality,
    }
}

fn curve(e: &PairEnsemble) -> Ensemble {
    Ensemble {
        library_sizes: e.library_sizes.clone(),
        skills: e.skills.clone(),
    }
}
