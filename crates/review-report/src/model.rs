//! The plain view model the report is rendered from.

/// Everything one report shows; filled by an adapter from a run's results.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportData {
    /// Page title, e.g. `"ccm-triage report — sound.csv"`.
    pub title: String,
    /// File name of the series table (or curves table) the run read.
    pub input_name: String,
    /// SHA-256 of the input file, hex, when known.
    pub input_sha256: Option<String>,
    /// Version of the tool that produced the run.
    pub tool_version: String,
    /// Which classifier labelled the pairs, e.g. `"default model v1 (sha256 ab12…)"`, or `"none"`.
    pub model_identity: String,
    /// Run parameters as (name, value), shown in a table in this order.
    pub params: Vec<(String, String)>,
    /// Matrix axes in input order; every pair's driver and response must be listed here.
    pub variables: Vec<String>,
    /// Chosen embedding per variable; empty when the ensembles came from elsewhere.
    pub embeddings: Vec<EmbeddingRow>,
    /// One entry per ordered pair that was assessed, in any order.
    pub pairs: Vec<PairView>,
    /// Run-level notes in plain words (missing cells, skipped pairs, ...).
    pub notes: Vec<String>,
}

/// The embedding chosen for one variable.
#[derive(Debug, Clone, PartialEq)]
pub struct EmbeddingRow {
    /// Variable name.
    pub variable: String,
    /// Embedding dimension.
    pub e: usize,
    /// Delay between embedding coordinates, in time steps.
    pub tau: usize,
    /// Simplex projection forecast skill at the chosen `e` and `tau`.
    pub simplex_skill: f64,
    /// The variable's dominant cycle as its seasonal surrogates used it: period in time steps
    /// and strength (share of variance carried by the mean cycle); `None` when none was found.
    pub cycle: Option<(f64, f64)>,
    /// Whether that cycle counts as a season, so that its seasonal surrogates keep it.
    pub season: bool,
}

/// The label a pair received.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum VerdictKind {
    /// The evidence looks like the driver drives the response.
    Causal,
    /// The evidence does not look like driving.
    NonCausal,
    /// The evidence is ambiguous or unusual; a person should look.
    Review,
}

impl VerdictKind {
    /// The word used for this verdict in `labels.csv` and in the report.
    pub fn as_str(self) -> &'static str {
        match self {
            VerdictKind::Causal => "causal",
            VerdictKind::NonCausal => "non-causal",
            VerdictKind::Review => "review",
        }
    }

    /// A glyph that tells the verdicts apart without relying on colour.
    pub fn glyph(self) -> &'static str {
        match self {
            VerdictKind::Causal => "\u{25B2}",    // ▲
            VerdictKind::NonCausal => "\u{25CB}", // ○
            VerdictKind::Review => "?",
        }
    }

    /// CSS class suffix for this verdict.
    pub(crate) fn css(self) -> &'static str {
        match self {
            VerdictKind::Causal => "yes",
            VerdictKind::NonCausal => "no",
            VerdictKind::Review => "rev",
        }
    }
}

/// Everything shown for one ordered pair (does `driver` drive `response`?).
#[derive(Debug, Clone, PartialEq)]
pub struct PairView {
    /// The hypothesised driver.
    pub driver: String,
    /// The hypothesised response.
    pub response: String,
    /// Calibrated probability that the driver drives the response, in [0, 1].
    pub p_causal: f64,
    /// The label given to the pair.
    pub verdict: VerdictKind,
    /// Why the pair was flagged, as (short code, explanation in plain words).
    pub reasons: Vec<(String, String)>,
    /// Library sizes, ascending, one per row of `forward`.
    pub library_sizes: Vec<usize>,
    /// `[size][replicate]` skill of recovering the driver from the response's
    /// delay embedding (the evidence for driver → response). Non-finite values are skipped.
    pub forward: Vec<Vec<f64>>,
    /// The opposite hypothesis (response → driver), `[size][replicate]`, when computed.
    pub reverse: Option<Vec<Vec<f64>>>,
    /// Library sizes of `reverse`'s rows, ascending, when they differ from `library_sizes`
    /// (the two variables' embeddings can leave different usable lengths); `None`: the same.
    pub reverse_library_sizes: Option<Vec<usize>>,
    /// (lags, skill): skill of recovering the driver at time t + lag from the
    /// response's embedding at time t, so a driver's lasting footprint shows at lag <= 0.
    pub lag_profile: Option<(Vec<i32>, Vec<f64>)>,
    /// Skills of phase-randomised surrogate drivers at the largest library size.
    pub surrogate_skills: Option<Vec<f64>>,
    /// Skills of seasonal surrogate drivers (the driver's cycle kept) at the largest library size.
    pub seasonal_surrogate_skills: Option<Vec<f64>>,
    /// Feature values worth showing, as (name, value); `None` when undefined.
    pub key_features: Vec<(String, Option<f64>)>,
    /// A reviewer's earlier decision on this pair (from a decisions file), shown beside the
    /// model's verdict and used to start the page's decision form.
    pub decision: Option<GivenDecision>,
    /// The known answer for this pair when the data were simulated with an answer key (the
    /// demo), shown beside the verdict.
    pub answer_key: Option<KnownAnswer>,
}

/// A pair's known answer: the simulator's label and whether it counts as causal.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct KnownAnswer {
    /// `direct`, `indirect`, `confounded` or `independent`.
    pub label: String,
    /// Whether the label counts as causal (as the classifier is trained).
    pub causal: bool,
}

impl PairView {
    /// Whether the verdict agrees with the answer key: `None` without a key or under review.
    pub fn agrees_with_key(&self) -> Option<bool> {
        let causal = self.answer_key.as_ref()?.causal;
        match self.verdict {
            VerdictKind::Review => None,
            VerdictKind::Causal => Some(causal),
            VerdictKind::NonCausal => Some(!causal),
        }
    }
}

/// A reviewer's decision on a pair, as exported from an earlier report.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct GivenDecision {
    /// `causal`, `non-causal` or `unsure`.
    pub decision: String,
    /// The reviewer's note.
    pub note: String,
    /// Who decided.
    pub reviewer: String,
    /// When (ISO 8601).
    pub decided_at: String,
}
