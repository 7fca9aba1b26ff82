//! Fill the report's view model from the pipeline's results.

use crossmap_engine::Embedding;
use ensemble_features::Feature;
use review_report::{EmbeddingRow, PairView, ReportData, TableRow, VerdictKind};
use verdict_model::Verdict;

use crate::{Judgement, PairRecord};

/// Features shown beside each pair's plots, in this order: the feature's id and what the
/// report calls it (plain language, with its unit). Skill is Pearson's rho between estimated
/// and observed values.
pub const KEY_FEATURES: [(Feature, &str); 9] = [
    (
        Feature::SkillFinalMean,
        "skill at the largest library (rho, mean of replicates)",
    ),
    (
        Feature::SkillGain,
        "rise in skill from the smallest to the largest library (rho)",
    ),
    (
        Feature::FitAsymptote,
        "level the fitted skill curve approaches (rho)",
    ),
    (
        Feature::RevSkillFinalMean,
        "skill of the opposite direction at its largest library (rho)",
    ),
    (
        Feature::LagBest,
        "cross-map lag of the best skill (time steps; a driver is expected at 0 or below)",
    ),
    (
        Feature::SurrogatePercentile,
        "share of phase-randomised surrogate drivers the skill beats (0 to 1)",
    ),
    (
        Feature::SimplexResponse,
        "how well the response forecasts itself, by simplex projection (rho)",
    ),
    (
        Feature::Correlation,
        "plain correlation of the two series (Pearson r)",
    ),
    (
        Feature::SpreadSdMid,
        "spread of the replicates' skills at the middle library size (standard deviation of rho)",
    ),
];

/// A spread of exactly zero says only that every replicate used the same library (the whole
/// manifold), not that the skill is certain, so such values are left out of the report.
fn shown(feature: Feature, value: Option<f64>) -> bool {
    !(feature.name().starts_with("spread_") && value == Some(0.0))
}

/// What the report says about the run itself.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RunFacts {
    /// Input file name as given.
    pub input_name: String,
    /// SHA-256 of the input bytes.
    pub input_sha256: Option<String>,
    /// Tool version.
    pub tool_version: String,
    /// Model identity line.
    pub model_identity: String,
    /// Run parameters, in display order.
    pub params: Vec<(String, String)>,
    /// Run-level notes.
    pub notes: Vec<String>,
    /// Each variable's dominant cycle in column order (empty when no series were read).
    pub cycles: Vec<CycleFact>,
}

/// One variable's dominant cycle as its seasonal surrogates used it; `run.json` (`cycles`)
/// and the report both show these.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CycleFact {
    /// Period in time steps and strength (adjusted R² of the mean cycle), when one was found.
    pub cycle: Option<(f64, f64)>,
    /// Whether the cycle counts as a season and seasonal surrogates are on.
    pub season: bool,
}

/// The cycle facts of every variable, in column order.
pub fn cycle_facts(
    series: &crate::SeriesSet,
    settings: &crate::AnalysisSettings,
) -> Vec<CycleFact> {
    crate::cycles(series, settings.crossmap.period)
        .into_iter()
        .map(|c| CycleFact {
            cycle: c.map(|c| (c.period, c.strength)),
            season: c.is_some_and(|c| c.has_cycle()) && settings.crossmap.seasonal,
        })
        .collect()
}

/// Each reason with its explanation; a review pair whose probability alone would have decided
/// it first says so, so that a reader does not wonder why p = 0.9 is under review.
fn reasons_view(j: &Judgement) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = Vec::new();
    if j.verdict == Verdict::Review
        && j.p_causal.is_finite()
        && !j.reasons.contains(&verdict_model::Reason::Uncertain)
    {
        let side = if j.p_causal >= 0.5 {
            "above the review band, so the model alone would call it causal"
        } else {
            "below the review band, so the model alone would call it non-causal"
        };
        out.push((
            String::new(),
            format!(
                "p = {:.2} lies {side}; the pair is under review for the reasons below.",
                j.p_causal
            ),
        ));
    }
    out.extend(j.reasons.iter().map(|r| {
        let text = match r {
            verdict_model::Reason::Uncertain if j.p_causal.is_finite() => {
                uncertain_words(j.p_causal)
            }
            _ => r.explain().to_string(),
        };
        (r.code().to_string(), text)
    }));
    out
}

/// What a probability inside the review band says, in words that match its value: near 0.5
/// it is an even chance, further out it leans one way without deciding.
fn uncertain_words(p: f64) -> String {
    let lean = if (p - 0.5).abs() < 0.05 {
        "is close to an even chance: the evidence does not lean either way"
    } else if p > 0.5 {
        "leans towards causal, but not far enough to decide"
    } else {
        "leans towards non-causal, but not far enough to decide"
    };
    format!("p = {p:.2} lies inside the review band and {lean}.")
}

/// The report's word for a verdict.
pub fn verdict_kind(v: Verdict) -> VerdictKind {
    match v {
        Verdict::Causal => VerdictKind::Causal,
        Verdict::NonCausal => VerdictKind::NonCausal,
        Verdict::Review => VerdictKind::Review,
    }
}

/// Rows of the terminal verdict table ([`review_report::verdict_table`]), one per pair, in
/// the records' order (the table sorts them), without extra columns.
pub fn table_rows(
    names: &[String],
    records: &[PairRecord],
    judgements: &[Judgement],
) -> Vec<TableRow> {
    records
        .iter()
        .zip(judgements)
        .map(|(rec, j)| TableRow {
            driver: names[rec.driver].clone(),
            response: names[rec.response].clone(),
            p_causal: j.p_causal,
            verdict: verdict_kind(j.verdict),
            reasons: j.reasons.iter().map(|r| r.code().to_string()).collect(),
            extra: Vec::new(),
            flagged: false,
        })
        .collect()
}

/// Report view of a run. `embeddings` may be empty (ensembles computed elsewhere).
pub fn report_view(
    facts: &RunFacts,
    names: &[String],
    embeddings: &[Embedding],
    records: &[PairRecord],
    judgements: &[Judgement],
) -> ReportData {
    let pairs = records
        .iter()
        .zip(judgements)
        .map(|(rec, j)| PairView {
            driver: names[rec.driver].clone(),
            response: names[rec.response].clone(),
            p_causal: j.p_causal,
            verdict: verdict_kind(j.verdict),
            reasons: reasons_view(j),
            library_sizes: rec.evidence.forward.library_sizes.clone(),
            forward: rec.evidence.forward.skills.clone(),
            // The opposite direction is drawn at its own sizes when they differ: the two
            // variables' embeddings can leave different usable lengths.
            reverse: rec.evidence.reverse.as_ref().map(|r| r.skills.clone()),
            reverse_library_sizes: rec
                .evidence
                .reverse
                .as_ref()
                .filter(|r| r.library_sizes != rec.evidence.forward.library_sizes)
                .map(|r| r.library_sizes.clone()),
            lag_profile: rec
                .evidence
                .lag
                .as_ref()
                .map(|l| (l.lags.clone(), l.skills.clone())),
            surrogate_skills: rec.evidence.surrogate_skills.clone(),
            seasonal_surrogate_skills: rec.evidence.seasonal.as_ref().map(|s| s.skills.clone()),
            key_features: KEY_FEATURES
                .iter()
                .map(|&(f, label)| (f, label, rec.features[f.index()]))
                .filter(|&(f, _, v)| shown(f, v))
                .map(|(_, label, v)| (label.to_string(), v))
                .collect(),
            decision: None,
            answer_key: None,
        })
        .collect();
    ReportData {
        title: format!("ccm-triage report: {}", facts.input_name),
        input_name: facts.input_name.clone(),
        input_sha256: facts.input_sha256.clone(),
        tool_version: facts.tool_version.clone(),
        model_identity: facts.model_identity.clone(),
        params: facts.params.clone(),
        variables: names.to_vec(),
        embeddings: names
            .iter()
            .zip(embeddings)
            .enumerate()
            .map(|(i, (v, e))| EmbeddingRow {
                cycle: facts.cycles.get(i).and_then(|c| c.cycle),
                season: facts.cycles.get(i).is_some_and(|c| c.season),
                variable: v.clone(),
                e: e.e,
                tau: e.tau,
                simplex_skill: e.simplex_skill,
            })
            .collect(),
        pairs,
        notes: facts.notes.clone(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_spread_of_exactly_zero_is_left_out_but_other_zeros_are_kept() {
        assert!(!shown(Feature::SpreadSdMid, Some(0.0)));
        assert!(shown(Feature::SpreadSdMid, Some(0.02)));
        assert!(shown(Feature::LagBest, Some(0.0)));
        assert!(shown(Feature::SkillGain, None));
    }

    #[test]
    fn the_words_for_a_review_probability_match_its_value() {
        // Regression: p = 0.74 under review was described as close to an even chance.
        assert!(uncertain_words(0.52).contains("even chance"));
        assert!(uncertain_words(0.66).contains("leans towards causal"));
        assert!(uncertain_words(0.34).contains("leans towards non-causal"));
        assert!(!uncertain_words(0.66).contains("even"));
    }

    #[test]
    fn key_features_are_named_in_plain_language() {
        for (_, label) in KEY_FEATURES {
            assert!(!label.contains('_'), "{label} should be plain language");
        }
    }
}
