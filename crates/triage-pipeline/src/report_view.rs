//! Fill the report's view model from the pipeline's results.

use crossmap_engine::Embedding;
use review_report::{EmbeddingRow, PairView, ReportData, TableRow, VerdictKind};
use verdict_model::Verdict;

use crate::{Judgement, PairRecord};

/// Features shown beside each pair's plots, in this order.
pub const KEY_FEATURES: [&str; 9] = [
    "skill_final_mean",
    "skill_gain",
    "fit_asymptote",
    "rev_skill_final_mean",
    "lag_best",
    "surrogate_percentile",
    "simplex_response",
    "correlation",
    "spread_sd_large",
];

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
    out.extend(
        j.reasons
            .iter()
            .map(|r| (r.code().to_string(), r.explain().to_string())),
    );
    out
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
    let index: Vec<Option<usize>> = KEY_FEATURES
        .iter()
        .map(|n| ensemble_features::index_of(n))
        .collect();
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
                .zip(&index)
                .map(|(name, k)| (name.to_string(), k.and_then(|k| rec.features[k])))
                .collect(),
            decision: None,
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
