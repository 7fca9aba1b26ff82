//! The versioned feature schema: names, meanings, ranges and evidence groups in column order.

use sha2::{Digest, Sha256};

/// Which kind of evidence a feature needs; curve-only input has only [`FeatureGroup::Curve`]
/// and [`FeatureGroup::Contrast`] (when the reverse direction is present).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum FeatureGroup {
    /// Computed from the forward ensemble alone.
    Curve,
    /// Needs the reverse ensemble.
    Contrast,
    /// Needs the lag profile.
    Lag,
    /// Needs surrogate skills.
    Surrogate,
    /// Needs seasonal-surrogate skills and the two series' dominant cycles.
    Seasonal,
    /// Needs the series themselves.
    Context,
}

impl FeatureGroup {
    /// Every group, in schema order.
    pub const ALL: [FeatureGroup; 6] = [
        FeatureGroup::Curve,
        FeatureGroup::Contrast,
        FeatureGroup::Lag,
        FeatureGroup::Surrogate,
        FeatureGroup::Seasonal,
        FeatureGroup::Context,
    ];

    /// Stable lower-case label, used in the schema hash and the docs.
    pub fn label(self) -> &'static str {
        match self {
            FeatureGroup::Curve => "curve",
            FeatureGroup::Contrast => "contrast",
            FeatureGroup::Lag => "lag",
            FeatureGroup::Surrogate => "surrogate",
            FeatureGroup::Seasonal => "seasonal",
            FeatureGroup::Context => "context",
        }
    }

    /// Whether a curve read from elsewhere (forward and reverse ensembles only) can carry it.
    pub fn is_curve_only(self) -> bool {
        matches!(self, FeatureGroup::Curve | FeatureGroup::Contrast)
    }
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
pub const SCHEMA_VERSION: u32 = 3;

const fn def(
    name: &'static str,
    meaning: &'static str,
    range: &'static str,
    group: FeatureGroup,
) -> FeatureDef {
    FeatureDef {
        name,
        meaning,
        range,
        group,
    }
}

use FeatureGroup::{Context, Contrast, Curve, Lag, Seasonal, Surrogate};

/// Column order of `features.csv`. "Skill" is the forward cross-map skill (driver estimated
/// from the response's manifold); L is the library size; "mean curve" is the replicate mean
/// at each L.
static SCHEMA: [FeatureDef; 77] = [
    // Plateau.
    def(
        "skill_final_mean",
        "mean skill across replicates at the largest library size",
        "[-1, 1]",
        Curve,
    ),
    def(
        "skill_final_median",
        "median skill across replicates at the largest library size",
        "[-1, 1]",
        Curve,
    ),
    def(
        "fit_asymptote",
        "asymptote rho_inf of rho(L) = rho_inf - a exp(-g L / L_max) fitted to the mean curve, clamped",
        "[-1, 1]",
        Curve,
    ),
    def(
        "fit_headroom",
        "fitted asymptote (clamped) minus mean skill at the largest L: skill still to gain",
        "[-2, 2]",
        Curve,
    ),
    def(
        "fit_r2",
        "coefficient of determination of the exponential fit to the mean curve",
        "[0, 1]",
        Curve,
    ),
    def(
        "fit_rmse",
        "root mean squared residual of the exponential fit to the mean curve",
        "[0, 1]",
        Curve,
    ),
    // Slope.
    def(
        "skill_gain",
        "mean skill at the largest L minus mean skill at the smallest L",
        "[-2, 2]",
        Curve,
    ),
    def(
        "slope_early",
        "least-squares slope of mean skill per decade of L over the first third of sizes",
        "real, mostly [-3, 3]",
        Curve,
    ),
    def(
        "slope_late",
        "least-squares slope of mean skill per decade of L over the last third of sizes",
        "real, mostly [-3, 3]",
        Curve,
    ),
    def(
        "fit_log10_rate",
        "log10 of the fitted rate g on the L / L_max axis (large: converged early)",
        "[-1, 3]",
        Curve,
    ),
    // Overshoot.
    def(
        "overshoot",
        "maximum of the mean curve minus its value at the largest L",
        "[0, 2]",
        Curve,
    ),
    def(
        "overshoot_position",
        "position of the mean curve's maximum as a fraction of the log size range",
        "[0, 1]",
        Curve,
    ),
    // Spread.
    def(
        "spread_sd_small",
        "standard deviation of skill across replicates at the smallest L",
        "[0, 1.42]",
        Curve,
    ),
    def(
        "spread_sd_mid",
        "standard deviation of skill across replicates at the L nearest the log-middle of the range",
        "[0, 1.42]",
        Curve,
    ),
    def(
        "spread_sd_large",
        "standard deviation of skill across replicates at the largest L",
        "[0, 1.42]",
        Curve,
    ),
    def(
        "spread_iqr_small",
        "interquartile range of skill across replicates at the smallest L",
        "[0, 2]",
        Curve,
    ),
    def(
        "spread_iqr_mid",
        "interquartile range of skill across replicates at the L nearest the log-middle of the range",
        "[0, 2]",
        Curve,
    ),
    def(
        "spread_iqr_large",
        "interquartile range of skill across replicates at the largest L",
        "[0, 2]",
        Curve,
    ),
    def(
        "spread_log_ratio",
        "ln((SD at largest L + 0.001) / (SD at smallest L + 0.001)): negative when spread shrinks",
        "[-7.3, 7.3]",
        Curve,
    ),
    def(
        "spread_decay_slope",
        "least-squares slope of ln(SD + 0.001) against ln L over all sizes",
        "real, mostly [-2, 1]",
        Curve,
    ),
    def(
        "gain_over_spread",
        "asinh(skill gain / (SD at smallest L + 0.001)): convergence in units of small-L spread",
        "[-8.3, 8.3]",
        Curve,
    ),
    // Monotonicity.
    def(
        "mk_z",
        "Mann-Kendall Z (tie-corrected variance, continuity correction) of the mean curve against L",
        "real, abs(z) < 1.5 sqrt(n_sizes); grows with the number of sizes",
        Curve,
    ),
    def(
        "kendall_tau",
        "Kendall tau-b between L and the mean curve",
        "[-1, 1]",
        Curve,
    ),
    def(
        "rising_share",
        "share of replicate indices r whose skill at the largest L exceeds replicate r's at the smallest L",
        "[0, 1]",
        Curve,
    ),
    // Bookkeeping of the ensemble itself.
    def(
        "nan_share",
        "share of replicate skills that are undefined (NaN) across the whole ensemble",
        "[0, 1]",
        Curve,
    ),
    def(
        "log10_size_max",
        "log10 of the largest library size",
        "[0, inf), mostly [1, 4]",
        Curve,
    ),
    def(
        "log10_size_span",
        "log10 of largest over smallest library size",
        "(0, inf), mostly [0.5, 3]",
        Curve,
    ),
    // Contrast with the reverse hypothesis response -> driver.
    def(
        "rev_skill_final_mean",
        "reverse direction: mean skill at the largest L",
        "[-1, 1]",
        Contrast,
    ),
    def(
        "rev_skill_final_median",
        "reverse direction: median skill at the largest L",
        "[-1, 1]",
        Contrast,
    ),
    def(
        "rev_fit_asymptote",
        "reverse direction: fitted asymptote, clamped",
        "[-1, 1]",
        Contrast,
    ),
    def(
        "rev_skill_gain",
        "reverse direction: skill gain from smallest to largest L",
        "[-2, 2]",
        Contrast,
    ),
    def(
        "rev_slope_early",
        "reverse direction: slope per decade of L over the first third of sizes",
        "real, mostly [-3, 3]",
        Contrast,
    ),
    def(
        "rev_slope_late",
        "reverse direction: slope per decade of L over the last third of sizes",
        "real, mostly [-3, 3]",
        Contrast,
    ),
    def(
        "rev_fit_log10_rate",
        "reverse direction: log10 of the fitted rate g",
        "[-1, 3]",
        Contrast,
    ),
    def(
        "rev_kendall_tau",
        "reverse direction: Kendall tau-b between L and the mean curve",
        "[-1, 1]",
        Contrast,
    ),
    def(
        "diff_skill_final_mean",
        "skill_final_mean minus rev_skill_final_mean",
        "[-2, 2]",
        Contrast,
    ),
    def(
        "diff_skill_final_median",
        "skill_final_median minus rev_skill_final_median",
        "[-2, 2]",
        Contrast,
    ),
    def(
        "diff_fit_asymptote",
        "fit_asymptote minus rev_fit_asymptote",
        "[-2, 2]",
        Contrast,
    ),
    def(
        "diff_skill_gain",
        "skill_gain minus rev_skill_gain",
        "[-4, 4]",
        Contrast,
    ),
    def(
        "diff_slope_late",
        "slope_late minus rev_slope_late",
        "real, mostly [-6, 6]",
        Contrast,
    ),
    def(
        "diff_kendall_tau",
        "kendall_tau minus rev_kendall_tau",
        "[-2, 2]",
        Contrast,
    ),
    // Lagged cross mapping (Ye et al. 2015).
    def(
        "lag_best",
        "cross-map lag (time steps) of best skill; negative when the response's state best reflects the driver's past, as expected of a true driver",
        "within the computed lags",
        Lag,
    ),
    def(
        "lag_best_scaled",
        "lag_best divided by the largest absolute lag computed",
        "[-1, 1]",
        Lag,
    ),
    def("lag_best_skill", "skill at the best lag", "[-1, 1]", Lag),
    def(
        "lag_gap",
        "skill at the best lag minus skill at lag 0",
        "[0, 2]",
        Lag,
    ),
    def(
        "rev_lag_best_scaled",
        "reverse direction: best cross-map lag divided by the largest absolute lag computed",
        "[-1, 1]",
        Lag,
    ),
    def(
        "rev_lag_gap",
        "reverse direction: skill at its best lag minus skill at lag 0",
        "[0, 2]",
        Lag,
    ),
    def(
        "diff_lag_best_scaled",
        "lag_best_scaled minus rev_lag_best_scaled: negative when the driver leads in both views (Ye et al. 2015)",
        "[-2, 2]",
        Lag,
    ),
    // Significance against surrogate drivers.
    def(
        "surrogate_percentile",
        "share of surrogate skills below skill_final_mean (ties count half)",
        "[0, 1]",
        Surrogate,
    ),
    def(
        "surrogate_z",
        "(skill_final_mean - surrogate mean) / surrogate SD, clamped",
        "[-10, 10]",
        Surrogate,
    ),
    def(
        "surrogate_p",
        "one-sided surrogate p-value (1 + #surrogates >= skill_final_mean) / (1 + #surrogates)",
        "(0, 1]",
        Surrogate,
    ),
    def(
        "surrogate_mean",
        "mean skill of the surrogate drivers",
        "[-1, 1]",
        Surrogate,
    ),
    // Significance against seasonal surrogates (Deyle et al. 2016): the driver's mean cycle kept.
    def(
        "seasonal_percentile",
        "share of seasonal-surrogate skills below skill_final_mean (ties count half)",
        "[0, 1]",
        Seasonal,
    ),
    def(
        "seasonal_z",
        "(skill_final_mean - seasonal-surrogate mean) / seasonal-surrogate SD, clamped",
        "[-10, 10]",
        Seasonal,
    ),
    def(
        "seasonal_p",
        "one-sided seasonal-surrogate p-value (1 + #surrogates >= skill_final_mean) / (1 + #surrogates)",
        "(0, 1]",
        Seasonal,
    ),
    def(
        "seasonal_mean",
        "mean skill of the seasonal-surrogate drivers: what the driver's regular cycle alone achieves",
        "[-1, 1]",
        Seasonal,
    ),
    def(
        "seasonal_gap",
        "skill_final_mean minus seasonal_mean: skill beyond the driver's regular cycle",
        "[-2, 2]",
        Seasonal,
    ),
    def(
        "cycle_strength_driver",
        "share of the driver's variance carried by its dominant cycle (adjusted R-squared of the mean cycle by phase)",
        "[0, 1]",
        Seasonal,
    ),
    def(
        "cycle_strength_response",
        "share of the response's variance carried by its dominant cycle",
        "[0, 1]",
        Seasonal,
    ),
    def(
        "cycle_period_mismatch",
        "abs(ln(driver period / response period)) of the two dominant cycles, clamped (0: same rhythm)",
        "[0, 3]",
        Seasonal,
    ),
    // Context from the series themselves.
    def(
        "log10_n_points",
        "log10 of the number of time points in the table",
        "[0, inf), mostly [1.5, 4]",
        Context,
    ),
    def(
        "e_driver",
        "embedding dimension of the driver",
        "integer >= 1",
        Context,
    ),
    def(
        "e_response",
        "embedding dimension of the response (the manifold searched)",
        "integer >= 1",
        Context,
    ),
    def(
        "tau_driver",
        "embedding delay of the driver",
        "integer >= 1",
        Context,
    ),
    def(
        "tau_response",
        "embedding delay of the response",
        "integer >= 1",
        Context,
    ),
    def(
        "simplex_driver",
        "simplex one-step self-forecast skill of the driver",
        "[-1, 1]",
        Context,
    ),
    def(
        "simplex_response",
        "simplex one-step self-forecast skill of the response",
        "[-1, 1]",
        Context,
    ),
    def(
        "correlation",
        "Pearson correlation of the two raw series",
        "[-1, 1]",
        Context,
    ),
    def(
        "abs_correlation",
        "absolute Pearson correlation of the two raw series (a shared driver raises it)",
        "[0, 1]",
        Context,
    ),
    def(
        "skill_over_simplex_driver",
        "skill_final_mean / max(simplex_driver, 0.05), clamped",
        "[-5, 5]",
        Context,
    ),
    def(
        "skill_over_simplex_response",
        "skill_final_mean / max(simplex_response, 0.05), clamped",
        "[-5, 5]",
        Context,
    ),
    def(
        "skill_minus_abs_correlation",
        "skill_final_mean minus abs_correlation: cross-map skill beyond plain correlation",
        "[-2, 1]",
        Context,
    ),
    def(
        "common_driver_skill",
        "largest, over the other observed variables W, of the smaller of skill W -> driver and skill W -> response at the largest L; 0 when no other variable is observed",
        "[-1, 1]",
        Context,
    ),
    def(
        "common_driver_margin",
        "skill_final_mean minus common_driver_skill: skill beyond what an observed common driver explains",
        "[-2, 2]",
        Context,
    ),
    def(
        "response_skill_rank",
        "share of the response's observed drivers whose skill_final_mean is at or below this pair's (1: the best driver of this response)",
        "(0, 1]",
        Context,
    ),
    def(
        "response_mean_skill",
        "mean skill_final_mean over every observed driver of this response: high when the response cross-maps everything, as a strongly forced variable does",
        "[-1, 1]",
        Context,
    ),
    def(
        "skill_minus_response_mean",
        "skill_final_mean minus response_mean_skill",
        "[-2, 2]",
        Context,
    ),
];

/// The feature schema, in column order.
pub fn schema() -> &'static [FeatureDef] {
    &SCHEMA
}

/// Feature names in column order.
pub fn names() -> Vec<&'static str> {
    SCHEMA.iter().map(|d| d.name).collect()
}

/// Every feature as a name the compiler checks, in schema (column) order: `Feature::X as
/// usize` is its column. [`Feature::name`] reads the name from the schema, and a test checks
/// that each variant is its name in CamelCase, so a typo or a reordering cannot pass.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[allow(missing_docs)] // Each variant is its schema entry; see docs/features.md.
pub enum Feature {
    SkillFinalMean,
    SkillFinalMedian,
    FitAsymptote,
    FitHeadroom,
    FitR2,
    FitRmse,
    SkillGain,
    SlopeEarly,
    SlopeLate,
    FitLog10Rate,
    Overshoot,
    OvershootPosition,
    SpreadSdSmall,
    SpreadSdMid,
    SpreadSdLarge,
    SpreadIqrSmall,
    SpreadIqrMid,
    SpreadIqrLarge,
    SpreadLogRatio,
    SpreadDecaySlope,
    GainOverSpread,
    MkZ,
    KendallTau,
    RisingShare,
    NanShare,
    Log10SizeMax,
    Log10SizeSpan,
    RevSkillFinalMean,
    RevSkillFinalMedian,
    RevFitAsymptote,
    RevSkillGain,
    RevSlopeEarly,
    RevSlopeLate,
    RevFitLog10Rate,
    RevKendallTau,
    DiffSkillFinalMean,
    DiffSkillFinalMedian,
    DiffFitAsymptote,
    DiffSkillGain,
    DiffSlopeLate,
    DiffKendallTau,
    LagBest,
    LagBestScaled,
    LagBestSkill,
    LagGap,
    RevLagBestScaled,
    RevLagGap,
    DiffLagBestScaled,
    SurrogatePercentile,
    SurrogateZ,
    SurrogateP,
    SurrogateMean,
    SeasonalPercentile,
    SeasonalZ,
    SeasonalP,
    SeasonalMean,
    SeasonalGap,
    CycleStrengthDriver,
    CycleStrengthResponse,
    CyclePeriodMismatch,
    Log10NPoints,
    EDriver,
    EResponse,
    TauDriver,
    TauResponse,
    SimplexDriver,
    SimplexResponse,
    Correlation,
    AbsCorrelation,
    SkillOverSimplexDriver,
    SkillOverSimplexResponse,
    SkillMinusAbsCorrelation,
    CommonDriverSkill,
    CommonDriverMargin,
    ResponseSkillRank,
    ResponseMeanSkill,
    SkillMinusResponseMean,
}

impl Feature {
    /// Every feature, in column order.
    pub const ALL: [Feature; 77] = [
        Feature::SkillFinalMean,
        Feature::SkillFinalMedian,
        Feature::FitAsymptote,
        Feature::FitHeadroom,
        Feature::FitR2,
        Feature::FitRmse,
        Feature::SkillGain,
        Feature::SlopeEarly,
        Feature::SlopeLate,
        Feature::FitLog10Rate,
        Feature::Overshoot,
        Feature::OvershootPosition,
        Feature::SpreadSdSmall,
        Feature::SpreadSdMid,
        Feature::SpreadSdLarge,
        Feature::SpreadIqrSmall,
        Feature::SpreadIqrMid,
        Feature::SpreadIqrLarge,
        Feature::SpreadLogRatio,
        Feature::SpreadDecaySlope,
        Feature::GainOverSpread,
        Feature::MkZ,
        Feature::KendallTau,
        Feature::RisingShare,
        Feature::NanShare,
        Feature::Log10SizeMax,
        Feature::Log10SizeSpan,
        Feature::RevSkillFinalMean,
        Feature::RevSkillFinalMedian,
        Feature::RevFitAsymptote,
        Feature::RevSkillGain,
        Feature::RevSlopeEarly,
        Feature::RevSlopeLate,
        Feature::RevFitLog10Rate,
        Feature::RevKendallTau,
        Feature::DiffSkillFinalMean,
        Feature::DiffSkillFinalMedian,
        Feature::DiffFitAsymptote,
        Feature::DiffSkillGain,
        Feature::DiffSlopeLate,
        Feature::DiffKendallTau,
        Feature::LagBest,
        Feature::LagBestScaled,
        Feature::LagBestSkill,
        Feature::LagGap,
        Feature::RevLagBestScaled,
        Feature::RevLagGap,
        Feature::DiffLagBestScaled,
        Feature::SurrogatePercentile,
        Feature::SurrogateZ,
        Feature::SurrogateP,
        Feature::SurrogateMean,
        Feature::SeasonalPercentile,
        Feature::SeasonalZ,
        Feature::SeasonalP,
        Feature::SeasonalMean,
        Feature::SeasonalGap,
        Feature::CycleStrengthDriver,
        Feature::CycleStrengthResponse,
        Feature::CyclePeriodMismatch,
        Feature::Log10NPoints,
        Feature::EDriver,
        Feature::EResponse,
        Feature::TauDriver,
        Feature::TauResponse,
        Feature::SimplexDriver,
        Feature::SimplexResponse,
        Feature::Correlation,
        Feature::AbsCorrelation,
        Feature::SkillOverSimplexDriver,
        Feature::SkillOverSimplexResponse,
        Feature::SkillMinusAbsCorrelation,
        Feature::CommonDriverSkill,
        Feature::CommonDriverMargin,
        Feature::ResponseSkillRank,
        Feature::ResponseMeanSkill,
        Feature::SkillMinusResponseMean,
    ];

    /// The feature's column in a row.
    pub fn index(self) -> usize {
        self as usize
    }

    /// The feature's name in `features.csv`.
    pub fn name(self) -> &'static str {
        SCHEMA[self as usize].name
    }
}

/// Position of a feature in the schema.
pub fn index_of(name: &str) -> Option<usize> {
    SCHEMA.iter().position(|d| d.name == name)
}

/// Names of the features in any of `groups`, in column order.
pub fn names_in_groups(groups: &[FeatureGroup]) -> Vec<&'static str> {
    SCHEMA
        .iter()
        .filter(|d| groups.contains(&d.group))
        .map(|d| d.name)
        .collect()
}

/// Names of the features a curve read from elsewhere can carry ([`FeatureGroup::Curve`] and
/// [`FeatureGroup::Contrast`]), in column order: the inputs of a curve-only model.
pub fn curve_only_names() -> Vec<&'static str> {
    SCHEMA
        .iter()
        .filter(|d| d.group.is_curve_only())
        .map(|d| d.name)
        .collect()
}

/// Column positions of [`curve_only_names`], for slicing a full row down to a curve-only one.
pub fn curve_only_indices() -> Vec<usize> {
    SCHEMA
        .iter()
        .enumerate()
        .filter(|(_, d)| d.group.is_curve_only())
        .map(|(i, _)| i)
        .collect()
}

/// Hex SHA-256 of the schema's identity: the line `ensemble-features schema v<VERSION>`, then
/// one line `<name>\t<group label>` per feature in column order. Meanings and ranges are
/// excluded so a reworded doc line does not orphan model files; any change of meaning must
/// bump [`SCHEMA_VERSION`].
pub fn schema_hash() -> String {
    let mut h = Sha256::new();
    h.update(format!("ensemble-features schema v{SCHEMA_VERSION}\n").as_bytes());
    for d in SCHEMA.iter() {
        h.update(format!("{}\t{}\n", d.name, d.group.label()).as_bytes());
    }
    h.finalize().iter().map(|b| format!("{b:02x}")).collect()
}

/// The schema as a Markdown document (the committed `docs/features.md` is this text).
pub fn schema_markdown() -> String {
    let mut s = String::new();
    s.push_str("# Feature schema\n\n");
    s.push_str(
        "<!-- Generated from crates/ensemble-features/src/schema.rs; do not edit by hand. \
         Regenerate with `UPDATE_DOCS=1 cargo test -p ensemble-features docs_match_schema`. -->\n\n",
    );
    s.push_str(&format!(
        "Schema version: **{SCHEMA_VERSION}**  \nSchema hash (SHA-256 of version, names and groups): `{}`\n\n",
        schema_hash()
    ));
    s.push_str(
        "One row of `features.csv` per ordered pair driver -> response. *Skill* is the \
         forward cross-map skill: the driver's values estimated from neighbours in the \
         response's delay embedding. *L* is the library size; the *mean curve* is the \
         replicate mean of skill at each L. The *reverse* direction is the opposite \
         hypothesis response -> driver.\n\n",
    );
    s.push_str("## Conventions\n\n");
    s.push_str(
        "- An empty cell means the feature could not be computed for this input (its \
         evidence group is missing, or the data do not define it); it is never written as 0.\n\
         - Undefined replicate skills (NaN) are ignored by every statistic; a library size \
         with no defined skill is dropped from the curve, and `nan_share` records how many \
         were undefined.\n\
         - `rising_share` pairs replicate r at the smallest L with replicate r at the largest L. \
         Replicates at different sizes are independent random libraries, so the pairing is \
         by index only; the share estimates how often a random larger library beats a random \
         smaller one.\n\
         - The exponential fit uses x = L / L_max, so the rate g is dimensionless; it needs \
         at least 4 library sizes with defined skill.\n\
         - SD uses divisor n - 1; IQR uses linear interpolation between order statistics.\n\
         - Heavy-tailed ratios are log- or asinh-scaled or clamped, as the range column says.\n\n",
    );
    s.push_str("## Groups\n\n");
    s.push_str(
        "| group | evidence needed | available for curves read from elsewhere |\n|---|---|---|\n",
    );
    for g in FeatureGroup::ALL {
        let need = match g {
            FeatureGroup::Curve => "the forward ensemble",
            FeatureGroup::Contrast => "the reverse ensemble as well",
            FeatureGroup::Lag => "a lag profile at the largest L",
            FeatureGroup::Surrogate => "surrogate-driver skills at the largest L",
            FeatureGroup::Seasonal => {
                "seasonal-surrogate skills at the largest L and both series' dominant cycles"
            }
            FeatureGroup::Context => {
                "the series themselves (length, embeddings, correlation) and the other pairs' skills"
            }
        };
        let avail = if g.is_curve_only() { "yes" } else { "no" };
        s.push_str(&format!("| {} | {} | {} |\n", g.label(), need, avail));
    }
    s.push_str("\n## Features\n\n| # | name | group | range | meaning |\n|---|---|---|---|---|\n");
    for (i, d) in SCHEMA.iter().enumerate() {
        s.push_str(&format!(
            "| {} | `{}` | {} | {} | {} |\n",
            i + 1,
            d.name,
            d.group.label(),
            d.range.replace('|', "\\|"),
            d.meaning.replace('|', "\\|")
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_snake_case() {
        let mut seen = std::collections::HashSet::new();
        for d in schema() {
            assert!(seen.insert(d.name), "duplicate feature name {}", d.name);
            assert!(
                d.name
                    .chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_'),
                "{} is not snake_case",
                d.name
            );
            assert!(!d.meaning.is_empty() && !d.range.is_empty());
        }
    }

    #[test]
    fn groups_are_contiguous_in_schema_order() {
        let order: Vec<FeatureGroup> = schema().iter().map(|d| d.group).collect();
        assert!(order.windows(2).all(|w| w[0] <= w[1]));
    }

    #[test]
    fn hash_is_stable_hex() {
        let h = schema_hash();
        assert_eq!(h.len(), 64);
        assert!(h.chars().all(|c| c.is_ascii_hexdigit()));
        assert_eq!(h, schema_hash());
    }

    /// Pinned so that a change of names, order or groups cannot slip by: update the literal
    /// only together with a bump of SCHEMA_VERSION (model files record the hash).
    #[test]
    fn schema_hash_is_pinned() {
        assert_eq!(SCHEMA_VERSION, 3);
        assert_eq!(
            schema_hash(),
            "8da8ae712cd2d88634ced41ba5db5278fbaf42355bc274019648dbe808b4261e"
        );
    }

    #[test]
    fn curve_only_indices_match_names() {
        let all = names();
        let picked: Vec<&str> = curve_only_indices().into_iter().map(|i| all[i]).collect();
        assert_eq!(picked, curve_only_names());
        assert_eq!(picked.len(), 41);
    }

    #[test]
    fn curve_only_names_are_curve_and_contrast() {
        let names = curve_only_names();
        assert_eq!(
            names,
            names_in_groups(&[FeatureGroup::Curve, FeatureGroup::Contrast])
        );
        assert!(names.contains(&"skill_final_mean"));
        assert!(!names.contains(&"lag_best"));
    }

    #[test]
    fn docs_match_schema() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../../docs/features.md");
        let text = schema_markdown();
        if std::env::var_os("UPDATE_DOCS").is_some() {
            std::fs::write(path, &text).expect("write docs/features.md");
        }
        let committed = std::fs::read_to_string(path).unwrap_or_default();
        assert!(
            committed == text,
            "docs/features.md differs from the schema; rerun with UPDATE_DOCS=1 to regenerate it"
        );
    }

    #[test]
    fn each_feature_variant_is_its_schema_name_in_camel_case() {
        assert_eq!(Feature::ALL.len(), SCHEMA.len());
        for (k, f) in Feature::ALL.iter().enumerate() {
            assert_eq!(f.index(), k);
            let camel: String = f
                .name()
                .split('_')
                .map(|p| {
                    let mut c = p.chars();
                    c.next()
                        .map(|h| h.to_ascii_uppercase().to_string() + c.as_str())
                        .unwrap_or_default()
                })
                .collect();
            assert_eq!(format!("{f:?}"), camel, "column {k}");
        }
    }
}
