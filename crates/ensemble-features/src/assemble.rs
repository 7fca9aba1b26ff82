//! Assembles one schema-ordered feature row from a pair's evidence.

use crate::schema::{Feature as F, FeatureGroup, schema};
use crate::shape::{CurveShape, curve_shape};
use crate::stats::{finite, mean, sd};
use crate::{FeatureError, LagProfile, PairContext, PairEvidence, SeasonalEvidence};

/// Clamp for surrogate z-scores: beyond it every pair is equally significant, and unclamped
/// values explode when surrogate skills are nearly identical.
const Z_CLAMP: f64 = 10.0;
/// Floor of the simplex skill used as a denominator, so a near-unpredictable variable cannot
/// blow the ratio up.
const SIMPLEX_FLOOR: f64 = 0.05;
/// Clamp of skill-over-simplex ratios.
const RATIO_CLAMP: f64 = 5.0;

/// The evidence groups present in `evidence`, in schema order. The forward curve is always
/// present; a lag profile or surrogate list counts only when it holds at least one finite
/// skill. Features outside these groups are `None` in [`compute`]'s row.
pub fn available_groups(evidence: &PairEvidence) -> Vec<FeatureGroup> {
    let mut groups = vec![FeatureGroup::Curve];
    if evidence.reverse.is_some() {
        groups.push(FeatureGroup::Contrast);
    }
    if evidence
        .lag
        .as_ref()
        .is_some_and(|p| p.skills.iter().any(|s| s.is_finite()))
    {
        groups.push(FeatureGroup::Lag);
    }
    if evidence
        .surrogate_skills
        .as_ref()
        .is_some_and(|s| s.iter().any(|v| v.is_finite()))
    {
        groups.push(FeatureGroup::Surrogate);
    }
    if evidence
        .seasonal
        .as_ref()
        .is_some_and(|s| s.skills.iter().any(|v| v.is_finite()))
    {
        groups.push(FeatureGroup::Seasonal);
    }
    if evidence.context.is_some() {
        groups.push(FeatureGroup::Context);
    }
    groups
}

/// Validates the evidence ([`crate::Ensemble::validate`] on both ensembles,
/// [`LagProfile::validate`] on the lag profile), then computes the row as [`compute`] does.
pub fn try_compute(evidence: &PairEvidence) -> Result<Vec<Option<f64>>, FeatureError> {
    evidence.forward.validate()?;
    if let Some(rev) = &evidence.reverse {
        rev.validate()
            .map_err(|e| FeatureError::Reverse(Box::new(e)))?;
    }
    for lag in [&evidence.lag, &evidence.reverse_lag].into_iter().flatten() {
        lag.validate()?;
    }
    Ok(compute(evidence))
}

/// A row under construction, addressed by feature name.
struct Row(Vec<Option<f64>>);

impl Row {
    fn set(&mut self, feature: F, value: Option<f64>) {
        self.0[feature.index()] = value.filter(|v| v.is_finite());
    }
}

/// Feature values in schema order; `None` marks a feature unavailable for this input.
///
/// Lenient: it computes whatever the data define without validating shapes (use
/// [`try_compute`] to reject malformed ensembles with a typed error). All statistics ignore
/// undefined (non-finite) replicate skills, and every feature is invariant to reordering the
/// replicates within a library size except `rising_share`, which pairs replicates by index
/// and is invariant to one common reordering of all sizes.
pub fn compute(evidence: &PairEvidence) -> Vec<Option<f64>> {
    let mut row = Row(vec![None; schema().len()]);
    let fwd = curve_shape(&evidence.forward);
    set_curve(&mut row, &fwd);
    if let Some(rev) = &evidence.reverse {
        set_contrast(&mut row, &fwd, &curve_shape(rev));
    }
    if let Some(lag) = &evidence.lag {
        set_lag(&mut row, lag, evidence.reverse_lag.as_ref());
    }
    if let Some(surr) = &evidence.surrogate_skills {
        set_surrogate(&mut row, &PHASE, fwd.final_mean, surr);
    }
    if let Some(seasonal) = &evidence.seasonal {
        set_seasonal(&mut row, fwd.final_mean, seasonal);
    }
    if let Some(ctx) = &evidence.context {
        set_context(&mut row, fwd.final_mean, ctx);
    }
    row.0
}

fn set_curve(row: &mut Row, s: &CurveShape) {
    let asym = s.fit_asymptote();
    row.set(F::SkillFinalMean, s.final_mean);
    row.set(F::SkillFinalMedian, s.final_median);
    row.set(F::FitAsymptote, asym);
    row.set(F::FitHeadroom, asym.zip(s.final_mean).map(|(a, m)| a - m));
    row.set(F::FitR2, s.fit.and_then(|f| f.r_squared));
    row.set(F::FitRmse, s.fit.map(|f| f.rmse));
    row.set(F::SkillGain, s.gain);
    row.set(F::SlopeEarly, s.slope_early);
    row.set(F::SlopeLate, s.slope_late);
    row.set(F::FitLog10Rate, s.fit_log10_rate());
    row.set(F::Overshoot, s.overshoot);
    row.set(F::OvershootPosition, s.overshoot_position);
    row.set(F::SpreadSdSmall, s.sd_small);
    row.set(F::SpreadSdMid, s.sd_mid);
    row.set(F::SpreadSdLarge, s.sd_large);
    row.set(F::SpreadIqrSmall, s.iqr_small);
    row.set(F::SpreadIqrMid, s.iqr_mid);
    row.set(F::SpreadIqrLarge, s.iqr_large);
    row.set(F::SpreadLogRatio, s.spread_log_ratio);
    row.set(F::SpreadDecaySlope, s.spread_decay_slope);
    row.set(F::GainOverSpread, s.gain_over_spread);
    row.set(F::MkZ, s.mk_z);
    row.set(F::KendallTau, s.kendall_tau);
    row.set(F::RisingShare, s.rising_share);
    row.set(F::NanShare, s.nan_share);
    row.set(F::Log10SizeMax, s.log10_size_max);
    row.set(F::Log10SizeSpan, s.log10_size_span);
}

fn diff(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    a.zip(b).map(|(a, b)| a - b)
}

fn set_contrast(row: &mut Row, f: &CurveShape, r: &CurveShape) {
    row.set(F::RevSkillFinalMean, r.final_mean);
    row.set(F::RevSkillFinalMedian, r.final_median);
    row.set(F::RevFitAsymptote, r.fit_asymptote());
    row.set(F::RevSkillGain, r.gain);
    row.set(F::RevSlopeEarly, r.slope_early);
    row.set(F::RevSlopeLate, r.slope_late);
    row.set(F::RevFitLog10Rate, r.fit_log10_rate());
    row.set(F::RevKendallTau, r.kendall_tau);
    row.set(F::DiffSkillFinalMean, diff(f.final_mean, r.final_mean));
    row.set(
        F::DiffSkillFinalMedian,
        diff(f.final_median, r.final_median),
    );
    row.set(
        F::DiffFitAsymptote,
        diff(f.fit_asymptote(), r.fit_asymptote()),
    );
    row.set(F::DiffSkillGain, diff(f.gain, r.gain));
    row.set(F::DiffSlopeLate, diff(f.slope_late, r.slope_late));
    row.set(F::DiffKendallTau, diff(f.kendall_tau, r.kendall_tau));
}

/// The best lag of a profile and what it implies.
struct BestLag {
    lag: i32,
    skill: f64,
    /// `lag` over the largest absolute lag computed (`None` when only lag 0 was computed).
    scaled: Option<f64>,
    /// Skill at the best lag minus skill at lag 0.
    gap: Option<f64>,
}

/// Best lag: the highest finite skill; ties go to the lag nearest zero, then to the negative
/// one, because an unresolved tie should not suggest a delay the data do not show.
fn best_lag(p: &LagProfile) -> Option<BestLag> {
    let (&lag, &skill) = p
        .lags
        .iter()
        .zip(&p.skills)
        .filter(|(_, s)| s.is_finite())
        .max_by(|a, b| {
            a.1.total_cmp(b.1)
                .then_with(|| b.0.abs().cmp(&a.0.abs()))
                .then_with(|| b.0.cmp(a.0))
        })?;
    let max_abs = p.lags.iter().map(|l| l.unsigned_abs()).max().unwrap_or(0);
    let at_zero = p
        .lags
        .iter()
        .zip(&p.skills)
        .find(|(l, s)| **l == 0 && s.is_finite())
        .map(|(_, s)| *s);
    Some(BestLag {
        lag,
        skill,
        scaled: (max_abs > 0).then(|| f64::from(lag) / f64::from(max_abs)),
        gap: at_zero.map(|z| skill - z),
    })
}

fn set_lag(row: &mut Row, forward: &LagProfile, reverse: Option<&LagProfile>) {
    let Some(f) = best_lag(forward) else {
        return;
    };
    row.set(F::LagBest, Some(f64::from(f.lag)));
    row.set(F::LagBestScaled, f.scaled);
    row.set(F::LagBestSkill, Some(f.skill));
    row.set(F::LagGap, f.gap);
    if let Some(r) = reverse.and_then(best_lag) {
        row.set(F::RevLagBestScaled, r.scaled);
        row.set(F::RevLagGap, r.gap);
        row.set(F::DiffLagBestScaled, diff(f.scaled, r.scaled));
    }
}

/// The four summaries of a real skill against one kind of surrogate skills.
struct SurrogateColumns {
    mean: F,
    percentile: F,
    p: F,
    z: F,
}

/// The phase-randomised surrogates' columns.
const PHASE: SurrogateColumns = SurrogateColumns {
    mean: F::SurrogateMean,
    percentile: F::SurrogatePercentile,
    p: F::SurrogateP,
    z: F::SurrogateZ,
};

/// The seasonal surrogates' columns.
const SEASONAL: SurrogateColumns = SurrogateColumns {
    mean: F::SeasonalMean,
    percentile: F::SeasonalPercentile,
    p: F::SeasonalP,
    z: F::SeasonalZ,
};

/// The mean, percentile, p and z of a real skill against surrogate skills, into `cols`.
fn set_surrogate(row: &mut Row, cols: &SurrogateColumns, real: Option<f64>, surrogates: &[f64]) {
    let s = finite(surrogates);
    if s.is_empty() {
        return;
    }
    row.set(cols.mean, mean(&s));
    let Some(real) = real else {
        return;
    };
    let n = s.len() as f64;
    let below = s.iter().filter(|v| **v < real).count() as f64;
    let ties = s.iter().filter(|v| **v == real).count() as f64;
    let at_or_above = s.iter().filter(|v| **v >= real).count() as f64;
    row.set(cols.percentile, Some((below + 0.5 * ties) / n));
    // Permutation p-value with the +1 correction, so it is never exactly zero (common
    // practice; Davison & Hinkley 1997, section 4.2, from memory).
    row.set(cols.p, Some((1.0 + at_or_above) / (1.0 + n)));
    let z = match (mean(&s), sd(&s)) {
        (Some(m), Some(sdv)) if sdv > 0.0 => Some(((real - m) / sdv).clamp(-Z_CLAMP, Z_CLAMP)),
        (Some(m), Some(_)) => Some(if real == m {
            0.0
        } else {
            Z_CLAMP.copysign(real - m)
        }),
        _ => None,
    };
    row.set(cols.z, z);
}

/// Clamp of the period mismatch: beyond a factor of e^3 (about 20) rhythms are simply unrelated.
const PERIOD_MISMATCH_CLAMP: f64 = 3.0;

fn set_seasonal(row: &mut Row, real: Option<f64>, s: &SeasonalEvidence) {
    set_surrogate(row, &SEASONAL, real, &s.skills);
    row.set(
        F::SeasonalGap,
        real.zip(mean(&finite(&s.skills))).map(|(r, m)| r - m),
    );
    row.set(F::CycleStrengthDriver, Some(s.driver.strength));
    row.set(F::CycleStrengthResponse, Some(s.response.strength));
    let ratio = s.driver.period / s.response.period;
    row.set(
        F::CyclePeriodMismatch,
        (ratio > 0.0).then(|| ratio.ln().abs().min(PERIOD_MISMATCH_CLAMP)),
    );
}

fn set_context(row: &mut Row, real: Option<f64>, c: &PairContext) {
    row.set(
        F::Log10NPoints,
        (c.n_points > 0).then(|| (c.n_points as f64).log10()),
    );
    row.set(F::EDriver, Some(c.e_driver as f64));
    row.set(F::EResponse, Some(c.e_response as f64));
    row.set(F::TauDriver, Some(c.tau_driver as f64));
    row.set(F::TauResponse, Some(c.tau_response as f64));
    row.set(F::SimplexDriver, Some(c.simplex_driver));
    row.set(F::SimplexResponse, Some(c.simplex_response));
    let corr = c.correlation.is_finite().then_some(c.correlation);
    row.set(F::Correlation, corr);
    row.set(F::AbsCorrelation, corr.map(f64::abs));
    let ratio = |simplex: f64| {
        real.filter(|_| simplex.is_finite())
            .map(|r| (r / simplex.max(SIMPLEX_FLOOR)).clamp(-RATIO_CLAMP, RATIO_CLAMP))
    };
    row.set(F::SkillOverSimplexDriver, ratio(c.simplex_driver));
    row.set(F::SkillOverSimplexResponse, ratio(c.simplex_response));
    row.set(
        F::SkillMinusAbsCorrelation,
        real.zip(corr).map(|(r, c)| r - c.abs()),
    );
    let common = c
        .common_driver_skill
        .is_finite()
        .then_some(c.common_driver_skill);
    row.set(F::CommonDriverSkill, common);
    row.set(F::CommonDriverMargin, diff(real, common));
    let rank = c.response_skill_rank;
    row.set(F::ResponseSkillRank, rank.is_finite().then_some(rank));
    let mean_in = c
        .response_mean_skill
        .is_finite()
        .then_some(c.response_mean_skill);
    row.set(F::ResponseMeanSkill, mean_in);
    row.set(F::SkillMinusResponseMean, diff(real, mean_in));
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Ensemble;

    fn forward() -> Ensemble {
        Ensemble {
            library_sizes: vec![10, 20, 40, 80],
            skills: vec![
                vec![0.1, 0.2],
                vec![0.3, 0.4],
                vec![0.5, 0.6],
                vec![0.5, 0.75],
            ],
        }
    }

    fn get(row: &[Option<f64>], name: &str) -> Option<f64> {
        row[crate::schema::index_of(name).unwrap()]
    }

    #[test]
    fn lag_ties_go_to_the_lag_nearest_zero_then_the_negative_one() {
        let mut ev = PairEvidence::curve_only(forward(), None);
        ev.lag = Some(LagProfile {
            lags: vec![-2, -1, 0, 1, 2],
            skills: vec![0.5, 0.7, 0.6, 0.7, 0.5],
        });
        let row = compute(&ev);
        assert_eq!(get(&row, "lag_best"), Some(-1.0));
        assert_eq!(get(&row, "lag_best_scaled"), Some(-0.5));
        assert!((get(&row, "lag_gap").unwrap() - 0.1).abs() < 1e-12);
    }

    #[test]
    fn an_all_undefined_lag_profile_is_a_missing_group() {
        let mut ev = PairEvidence::curve_only(forward(), None);
        ev.lag = Some(LagProfile {
            lags: vec![-1, 0],
            skills: vec![f64::NAN, f64::NAN],
        });
        assert!(!available_groups(&ev).contains(&FeatureGroup::Lag));
        assert!(get(&compute(&ev), "lag_best").is_none());
    }

    #[test]
    fn surrogate_ties_count_half_and_p_is_never_zero() {
        let mut ev = PairEvidence::curve_only(forward(), None);
        ev.surrogate_skills = Some(vec![0.0, 0.625, 0.9, f64::NAN]);
        let row = compute(&ev);
        // skill_final_mean is 0.625: one surrogate below, one tied, one above.
        assert!((get(&row, "surrogate_percentile").unwrap() - 0.5).abs() < 1e-12);
        assert!((get(&row, "surrogate_p").unwrap() - 3.0 / 4.0).abs() < 1e-12);
        ev.surrogate_skills = Some(vec![0.1, 0.1, 0.1]);
        let row = compute(&ev);
        assert_eq!(get(&row, "surrogate_z"), Some(Z_CLAMP));
        assert!((get(&row, "surrogate_p").unwrap() - 0.25).abs() < 1e-12);
    }

    #[test]
    fn undefined_context_values_stay_missing() {
        let mut ev = PairEvidence::curve_only(forward(), None);
        ev.context = Some(PairContext {
            n_points: 200,
            e_driver: 2,
            e_response: 2,
            tau_driver: 1,
            tau_response: 1,
            simplex_driver: f64::NAN,
            simplex_response: 0.01,
            correlation: f64::NAN,
            common_driver_skill: 0.0,
            response_skill_rank: 1.0,
            response_mean_skill: f64::NAN,
        });
        let row = compute(&ev);
        assert!(get(&row, "correlation").is_none());
        assert!(get(&row, "skill_minus_abs_correlation").is_none());
        assert!(get(&row, "skill_over_simplex_driver").is_none());
        // A near-unpredictable response is floored at 0.05 and the ratio clamped.
        assert_eq!(get(&row, "skill_over_simplex_response"), Some(RATIO_CLAMP));
    }
}
