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
/// a best lag after zero while both directions converge is suspicious.
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
    let best_lag_after_zero = evidence.lag.as_ref().is_some_and(|lag| {
        let best = lag
            .skills
            .iter()
            .zip(&lag.lags)
            .filter(|(s, _)| s.is_finite())
            .max_by(|a, b| a.0.total_cmp(b.0).then(b.1.cmp(a.1)));
        best.is_some_and(|(_, &l)| l > 0)
    });
    QualityFlags {
        short_series: largest < t.min_largest_library,
        weak_self_forecast,
        synchrony_suspected: both_converge && best_lag_after_zero,
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
