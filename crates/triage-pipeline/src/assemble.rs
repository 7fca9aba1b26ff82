//! Stage 3: pair each ensemble with its reverse direction and context, then compute features.

use std::collections::BTreeMap;

use crossmap_engine::{Embedding, PairEnsemble, Season};
use ensemble_features::{Cycle, Ensemble, LagProfile, PairContext, PairEvidence, SeasonalEvidence};
use verdict_model::QualityFlags;

use crate::{AnalysisSettings, QualityThresholds, SeriesSet, quality_flags};

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

/// The dominant cycle of every variable, in column order: at the known period when one is
/// given, else detected ([`crossmap_engine::season_for`]). The engine's seasonal surrogates
/// keep these same cycles.
pub fn cycles(series: &SeriesSet, known_period: Option<usize>) -> Vec<Option<Season>> {
    series
        .columns
        .iter()
        .map(|c| crossmap_engine::season_for(c, known_period))
        .collect()
}

/// Turn the engine's ensembles (any order, any subset of pairs) into pair records ordered by
/// (driver, response). A pair whose reverse direction is absent gets no contrast features.
pub fn assemble(
    series: &SeriesSet,
    embeddings: &[Embedding],
    ensembles: &[PairEnsemble],
    settings: &AnalysisSettings,
) -> Vec<PairRecord> {
    let by_pair: BTreeMap<(usize, usize), &PairEnsemble> = ensembles
        .iter()
        .map(|e| ((e.driver, e.response), e))
        .collect();
    let final_skill: BTreeMap<(usize, usize), f64> =
        by_pair.iter().map(|(&k, e)| (k, final_mean(e))).collect();
    let cycles = cycles(series, settings.crossmap.period);
    let lag_of = |e: &PairEnsemble| {
        (!e.lags.is_empty()).then(|| LagProfile {
            lags: e.lags.clone(),
            skills: e.lag_skills.clone(),
        })
    };
    by_pair
        .iter()
        .map(|(&(driver, response), forward)| {
            let backward = by_pair.get(&(response, driver));
            let surrogate_skills =
                (!forward.surrogate_skills.is_empty()).then(|| forward.surrogate_skills.clone());
            let seasonal = match (&cycles[driver], &cycles[response]) {
                (Some(d), Some(r)) if !forward.seasonal_surrogate_skills.is_empty() => {
                    Some(SeasonalEvidence {
                        skills: forward.seasonal_surrogate_skills.clone(),
                        driver: cycle(d),
                        response: cycle(r),
                    })
                }
                _ => None,
            };
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
                common_driver_skill: common_driver_skill(&final_skill, driver, response),
                response_skill_rank: response_rank(&final_skill, driver, response),
                response_mean_skill: response_mean(&final_skill, response),
            };
            let evidence = PairEvidence {
                forward: curve(forward),
                reverse: backward.map(|r| curve(r)),
                lag: lag_of(forward),
                reverse_lag: backward.and_then(|r| lag_of(r)),
                surrogate_skills,
                seasonal,
                context: Some(context),
            };
            record(driver, response, evidence, &settings.quality)
        })
        .collect()
}

/// Mean skill at the largest library size (NaN when none is defined).
fn final_mean(e: &PairEnsemble) -> f64 {
    let finite: Vec<f64> = e
        .skills
        .last()
        .map(|row| row.iter().copied().filter(|v| v.is_finite()).collect())
        .unwrap_or_default();
    if finite.is_empty() {
        f64::NAN
    } else {
        finite.iter().sum::<f64>() / finite.len() as f64
    }
}

/// max over observed W not in {driver, response} of min(skill W -> driver, skill W ->
/// response); 0 when there is no such W with both skills defined.
fn common_driver_skill(
    final_skill: &BTreeMap<(usize, usize), f64>,
    driver: usize,
    response: usize,
) -> f64 {
    final_skill
        .iter()
        .filter(|((w, target), _)| *target == driver && *w != response)
        .filter_map(|(&(w, _), &to_driver)| {
            let to_response = *final_skill.get(&(w, response))?;
            let both = to_driver.min(to_response);
            both.is_finite().then_some(both)
        })
        .fold(None, |best: Option<f64>, v| {
            Some(best.map_or(v, |b| b.max(v)))
        })
        .unwrap_or(0.0)
}

/// Skills of every observed driver of `response` at the largest library size (finite only).
fn response_skills(
    final_skill: &BTreeMap<(usize, usize), f64>,
    response: usize,
) -> impl Iterator<Item = f64> + '_ {
    final_skill
        .iter()
        .filter(move |((_, r), s)| *r == response && s.is_finite())
        .map(|(_, &s)| s)
}

/// Share of the response's drivers whose skill is at or below this pair's (NaN when this pair's
/// skill is undefined).
fn response_rank(
    final_skill: &BTreeMap<(usize, usize), f64>,
    driver: usize,
    response: usize,
) -> f64 {
    let own = final_skill
        .get(&(driver, response))
        .copied()
        .unwrap_or(f64::NAN);
    if !own.is_finite() {
        return f64::NAN;
    }
    let (at_or_below, all) = response_skills(final_skill, response)
        .fold((0usize, 0usize), |(b, n), s| {
            (b + usize::from(s <= own), n + 1)
        });
    at_or_below as f64 / all as f64
}

/// Mean skill over every observed driver of the response (NaN when none is defined).
fn response_mean(final_skill: &BTreeMap<(usize, usize), f64>, response: usize) -> f64 {
    let (sum, n) =
        response_skills(final_skill, response).fold((0.0, 0usize), |(s, n), v| (s + v, n + 1));
    if n == 0 { f64::NAN } else { sum / n as f64 }
}

fn cycle(s: &Season) -> Cycle {
    Cycle {
        period: s.period,
        strength: s.strength,
    }
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
            let evidence = PairEvidence::curve_only(
                (*forward).clone(),
                index.get(&(response, driver)).map(|e| (*e).clone()),
            );
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
