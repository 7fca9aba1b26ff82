//! Data-quality facts that send a pair to review whatever the model says.

use ensemble_features::{Ensemble, PairEvidence};
use verdict_model::QualityFlags;

/// Thresholds of the data-quality checks (all "common practice" judgement calls, documented in
/// the README's verdict section).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QualityThresholds {
    /// Largest library size below which convergence cannot be judged (default 40 points).
    pub min_largest_library: usize,
    /// Response self-forecast skill below which its manifold is mostly noise (default 0.2).
    pub min_self_forecast: f64,
    /// Mean skill at the largest size above which a direction counts as converged for the
    /// synchrony check (default 0.6).
    pub converged_skill: f64,
}

impl Default for QualityThresholds {
    fn default() -> Self {
        Self {
            min_largest_library: 40,
            min_self_forecast: 0.2,
            converged_skill: 0.6,
        }
    }
}

/// Data-quality flags of one pair.
///
/// Synchrony (Ye et al. 2015): under strong one-way forcing the response is slaved to the
/// driver and both directions converge; the lag of best skill then tells them apart. A true
/// driver is best estimated from the response's state at a negative or zero cross-map lag, so
/// a clearly better skill after zero while both directions converge is suspicious. "Clearly"
/// is a significance margin (`lag_peak_after_zero`): where a weak link runs against strong
/// forcing (the two-way coupled maps of Sugihara et al. 2012), the profile is flat and its
/// arg-max falls on either side by chance.
pub fn quality_flags(evidence: &PairEvidence, t: &QualityThresholds) -> QualityFlags {
    let largest = evidence.forward.library_sizes.last().copied().unwrap_or(0);
    // A NaN self-forecast skill (nothing predictable) counts as weak.
    let weak_self_forecast = evidence.context.is_some_and(|c| {
        c.simplex_response
            .partial_cmp(&t.min_self_forecast)
            .is_none_or(|o| o == std::cmp::Ordering::Less)
    });
    let both_converge = final_mean(&evidence.forward) > t.converged_skill
        && evidence
            .reverse
            .as_ref()
            .is_some_and(|r| final_mean(r) > t.converged_skill);
    let best_lag_after_zero = evidence
        .lag
        .as_ref()
        .is_some_and(|lag| lag_peak_after_zero(&lag.lags, &lag.skills, largest));
    QualityFlags {
        short_series: largest < t.min_largest_library,
        weak_self_forecast,
        synchrony_suspected: both_converge && best_lag_after_zero,
    }
}

/// Whether the best skill at a positive lag exceeds the best at lags <= 0 by more than two
/// standard errors on the Fisher z scale (Fisher 1921), `n` being the number of estimated
/// points (the largest library size). The two skills are treated as independent estimates,
/// standard error `sqrt(2 / (n - 3))`, which overstates the error of two correlations that
/// share their observed values (Steiger 1980) and so flags only a clear after-zero peak.
/// Without a finite skill on both sides, the arg-max decides.
pub fn lag_peak_after_zero(lags: &[i32], skills: &[f64], n: usize) -> bool {
    let best = |keep: fn(i32) -> bool| {
        lags.iter()
            .zip(skills)
            .filter(|&(&l, s)| keep(l) && s.is_finite())
            .map(|(_, &s)| s)
            .reduce(f64::max)
    };
    match (best(|l| l > 0), best(|l| l <= 0)) {
        (Some(after), None) => after.is_finite(),
        (Some(after), Some(before)) if after > before => {
            if n <= 3 {
                return true;
            }
            let z = |r: f64| r.clamp(-0.999_999, 0.999_999).atanh();
            z(after) - z(before) > 2.0 * (2.0 / (n as f64 - 3.0)).sqrt()
        }
        _ => false,
    }
}

fn final_mean(e: &Ensemble) -> f64 {
    let Some(last) = e.skills.last() else {
        return f64::NAN;
    };
    let finite: Vec<f64> = last.iter().copied().filter(|s| s.is_finite()).collect();
    if finite.is_empty() {
        f64::NAN
    } else {
        finite.iter().sum::<f64>() / finite.len() as f64
    }
}

#[cfg(test)]
mod tests {
    use super::lag_peak_after_zero;

    const LAGS: [i32; 7] = [-3, -2, -1, 0, 1, 2, 3];

    #[test]
    fn a_flat_profile_with_a_chance_peak_after_zero_is_not_synchrony() {
        // Y -> X of the two-way coupled logistic maps (Sugihara et al. 2012 form, beta_xy
        // 0.02, beta_yx 0.1, 1,000 points), as this tool measured it: 0.696 at +3 against
        // 0.679 at 0, 0.7 standard errors apart.
        let skills = [0.651, 0.668, 0.675, 0.679, 0.657, 0.662, 0.696];
        assert!(!lag_peak_after_zero(&LAGS, &skills, 1000));
    }

    #[test]
    fn a_profile_rising_after_zero_is_synchrony() {
        // The reverse direction of one-way forcing (beta_yx 0.3, beta_xy 0, 1,000 points):
        // skill climbs from 0.47 at lag 0 to 0.62 at +3, five standard errors.
        let skills = [0.235, 0.304, 0.345, 0.466, 0.550, 0.587, 0.621];
        assert!(lag_peak_after_zero(&LAGS, &skills, 1000));
        // The same rise is within chance on 40 points (standard error 0.33).
        assert!(!lag_peak_after_zero(&LAGS, &skills, 40));
    }

    #[test]
    fn a_peak_at_or_before_zero_is_never_synchrony() {
        let skills = [0.3, 0.5, 0.9, 0.8, 0.4, 0.2, 0.1];
        assert!(!lag_peak_after_zero(&LAGS, &skills, 1000));
        let nan_after = [0.3, 0.5, 0.9, 0.8, f64::NAN, f64::NAN, f64::NAN];
        assert!(!lag_peak_after_zero(&LAGS, &nan_after, 1000));
        let only_after = [f64::NAN, f64::NAN, f64::NAN, f64::NAN, 0.4, 0.2, 0.1];
        assert!(lag_peak_after_zero(&LAGS, &only_after, 1000));
    }
}
