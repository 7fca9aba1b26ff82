//! The per-variable choice of delay (an autocorrelation rule) and embedding dimension (simplex
//! projection forecast skill, Sugihara & May 1990).

use crate::EngineError;
use crate::embed::{Embedding, Manifold, default_theiler};
use crate::simplex::simplex_forecast;
use rayon::prelude::*;

/// Largest embedding dimension tried when none is fixed (E = 1..=10).
pub const DEFAULT_MAX_E: usize = 10;

/// Parsimony tolerance: the smallest E whose simplex skill is within this fraction of the best is
/// chosen (common practice: prefer the simplest model that forecasts about as well as the best).
pub const PARSIMONY_TOLERANCE: f64 = 0.02;

/// Smallest automatically chosen dimension. A one-coordinate manifold cannot separate states
/// that differ only in a driver's influence, so a response whose own dynamics forecast as well
/// at E = 1 (a one-dimensional map, say) would hide every driver; E = 2 gives the driver's
/// footprint a coordinate (Sugihara et al. 2012 cross-map their coupled logistic maps at E = 2;
/// from memory).
/// The simplex skill at E = 1 is still computed and reported.
pub const MIN_AUTO_E: usize = 2;

/// Upper bound on the automatically chosen delay, in time steps.
pub const MAX_AUTO_TAU: usize = 50;
/// Longest stretch of a series whose simplex forecasts choose E and give the self-forecast
/// skill: the first this many points. A forecast's cost grows faster than linearly with the
/// points it searches, so a bounded window keeps the embedding step about linear in the rows
/// (series up to this length are forecast whole, exactly as before).
pub const FORECAST_WINDOW: usize = 10_000;
/// Largest magnitude of a value whose delay vectors' squared distances stay finite.
pub const MAX_MAGNITUDE: f64 = 1e150;

/// How to choose each variable's embedding.
#[derive(Debug, Clone, PartialEq)]
pub struct EmbeddingSettings {
    /// Fixed embedding dimension for every variable; `None` chooses by simplex projection.
    pub e: Option<usize>,
    /// Fixed delay for every variable; `None` chooses by the documented rule.
    pub tau: Option<usize>,
    /// Largest E tried by simplex projection (default 10).
    pub max_e: usize,
    /// Theiler window in time steps; `None` uses the documented default.
    pub theiler: Option<usize>,
}

impl Default for EmbeddingSettings {
    fn default() -> Self {
        Self {
            e: None,
            tau: None,
            max_e: DEFAULT_MAX_E,
            theiler: None,
        }
    }
}

/// Delay rule: the first lag at which the autocorrelation falls below 1/e, bounded to
/// `1..=max_tau` (common practice; returns `max_tau` if it never falls that far).
///
/// Autocorrelation uses the global mean and variance of the finite values, over lag pairs where
/// both values are finite.
pub fn choose_tau(x: &[f64], max_tau: usize) -> usize {
    let max_tau = max_tau.max(1);
    let finite: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
    if finite.len() < 3 {
        return 1;
    }
    let mean = finite.iter().sum::<f64>() / finite.len() as f64;
    let var = finite.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / finite.len() as f64;
    if var <= 0.0 {
        return 1;
    }
    let threshold = (-1.0f64).exp();
    for lag in 1..=max_tau.min(x.len().saturating_sub(2)) {
        let (mut s, mut n) = (0.0, 0usize);
        for t in lag..x.len() {
            let (a, b) = (x[t], x[t - lag]);
            if a.is_finite() && b.is_finite() {
                s += (a - mean) * (b - mean);
                n += 1;
            }
        }
        if n > 0 && s / n as f64 / var < threshold {
            return lag;
        }
    }
    max_tau
}

/// Bound used by [`choose_embedding`] for the automatic delay: at most [`MAX_AUTO_TAU`] and at
/// most a quarter of the series per embedding dimension tried, so the largest E still embeds.
pub fn auto_tau_bound(n: usize, max_e: usize) -> usize {
    (n / (4 * max_e.max(1))).clamp(1, MAX_AUTO_TAU)
}

/// Per-variable embedding choice.
///
/// Delay: `settings.tau`, else [`choose_tau`] bounded by [`auto_tau_bound`]. Dimension:
/// `settings.e`, else simplex projection (Sugihara & May 1990) one step ahead over E = 1..=max_e
/// with the whole series as library (Theiler exclusion per `settings.theiler`, default
/// [`default_theiler`]), choosing the smallest E whose skill is at least
/// `best - PARSIMONY_TOLERANCE * |best|`, and at least [`MIN_AUTO_E`].
pub fn choose_embedding(x: &[f64], settings: &EmbeddingSettings) -> Result<Embedding, EngineError> {
    if settings.e == Some(0) {
        return Err(EngineError::EmbeddingDimensionZero);
    }
    if settings.tau == Some(0) {
        return Err(EngineError::DelayZero);
    }
    if settings.max_e == 0 && settings.e.is_none() {
        return Err(EngineError::MaxDimensionZero);
    }
    // Squared distances of values beyond 1e150 overflow to infinity, which would make every
    // forecast skill NaN and the series look constant.
    let largest = x
        .iter()
        .filter(|v| v.is_finite())
        .fold(0.0_f64, |m, v| m.max(v.abs()));
    if largest > MAX_MAGNITUDE {
        return Err(EngineError::ValuesTooLarge { largest });
    }
    let max_e = settings.max_e.max(settings.e.unwrap_or(0));
    let tau = settings
        .tau
        .unwrap_or_else(|| choose_tau(x, auto_tau_bound(x.len(), max_e)));
    let candidates: Vec<usize> = match settings.e {
        Some(e) => vec![e],
        None => (1..=max_e).collect(),
    };
    let mut skill_by_e = vec![f64::NAN; max_e];
    let mut first_err = None;
    let window = &x[..x.len().min(FORECAST_WINDOW)];
    let results: Vec<_> = candidates
        .par_iter()
        .map(|&e| {
            simplex_forecast(
                window,
                e,
                tau,
                1,
                settings.theiler.unwrap_or_else(|| default_theiler(e, tau)),
            )
        })
        .collect();
    for (&e, r) in candidates.iter().zip(results) {
        match r {
            Ok(f) => skill_by_e[e - 1] = f.skill,
            Err(err) => {
                first_err.get_or_insert(err);
            }
        }
    }
    let best = skill_by_e
        .iter()
        .copied()
        .filter(|s| s.is_finite())
        .fold(f64::NAN, f64::max);
    if !best.is_finite() {
        return Err(first_err.unwrap_or(EngineError::NoForecastSkill));
    }
    let bar = best - PARSIMONY_TOLERANCE * best.abs();
    let floor = if settings.e.is_some() {
        1
    } else {
        MIN_AUTO_E.min(max_e)
    };
    let e = candidates
        .iter()
        .copied()
        .find(|&e| skill_by_e[e - 1] >= bar)
        .expect("the best E passes its own bar")
        .max(floor);
    if !skill_by_e[e - 1].is_finite() {
        return Err(first_err.unwrap_or(EngineError::NoForecastSkill));
    }
    let manifold = Manifold::new(x, e, tau)?;
    Ok(Embedding {
        e,
        tau,
        simplex_skill: skill_by_e[e - 1],
        skill_by_e,
        vectors_excluded: manifold.vectors_excluded(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tau_rule_on_a_sine_is_near_a_fifth_of_the_period() {
        // For cos, the autocorrelation at lag k is cos(2 pi k / P); it first drops below 1/e at
        // k/P = acos(1/e) / (2 pi) = 0.190 (analytic).
        let p = 100.0;
        let x: Vec<f64> = (0..2000)
            .map(|t| (2.0 * std::f64::consts::PI * t as f64 / p).sin())
            .collect();
        let tau = choose_tau(&x, 50);
        assert!((18..=21).contains(&tau), "tau = {tau}");
    }

    #[test]
    fn settings_zero_are_rejected() {
        let x = vec![1.0; 10];
        let s = EmbeddingSettings {
            e: Some(0),
            ..Default::default()
        };
        assert!(matches!(
            choose_embedding(&x, &s),
            Err(EngineError::EmbeddingDimensionZero)
        ));
        let s = EmbeddingSettings {
            tau: Some(0),
            ..Default::default()
        };
        assert!(matches!(
            choose_embedding(&x, &s),
            Err(EngineError::DelayZero)
        ));
    }

    /// Finding: a 2.3 M-row file with E and tau given still forecast the whole series, in
    /// time growing faster than linearly. The forecast now reads the first
    /// [`FORECAST_WINDOW`] points: a longer series gets exactly the skill of that window.
    #[test]
    fn long_series_are_forecast_on_a_bounded_window() {
        // Logistic map at r = 3.9 (May 1976), a chaotic series with a clear one-step forecast.
        let mut v = 0.3;
        let x: Vec<f64> = (0..3 * FORECAST_WINDOW)
            .map(|_| {
                v = 3.9 * v * (1.0 - v);
                v
            })
            .collect();
        let fixed = EmbeddingSettings {
            e: Some(2),
            tau: Some(1),
            max_e: 10,
            theiler: None,
        };
        let long = choose_embedding(&x, &fixed).unwrap();
        let window = choose_embedding(&x[..FORECAST_WINDOW], &fixed).unwrap();
        assert_eq!(long.simplex_skill.to_bits(), window.simplex_skill.to_bits());
        assert!(long.simplex_skill > 0.9, "{}", long.simplex_skill);
    }

    /// Finding: a series of +-1.7e308 was called "constant?". Its refusal now says that the
    /// values overflow and how to rescale them.
    #[test]
    fn huge_values_are_named_not_called_constant() {
        let x: Vec<f64> = (0..200)
            .map(|i| {
                if i % 3 == 0 {
                    1.7e308
                } else {
                    -1.7e308 * (i % 7) as f64 / 7.0
                }
            })
            .collect();
        let err = choose_embedding(&x, &EmbeddingSettings::default()).unwrap_err();
        let text = err.to_string();
        assert!(matches!(err, EngineError::ValuesTooLarge { .. }), "{text}");
        assert!(
            text.contains("1.7e308") && !text.contains("constant"),
            "{text}"
        );
    }
}
