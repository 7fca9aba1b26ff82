//! Cross-map parameters and their one-time validation against the data.

use crate::EngineError;
use crate::embed::{Embedding, default_theiler};
use crate::surrogate::SurrogateBases;
use std::sync::Arc;

/// Default number of log-spaced library sizes.
pub const DEFAULT_LIBRARY_COUNT: usize = 12;
/// Default random libraries per size.
pub const DEFAULT_REPLICATES: usize = 100;
/// Upper bound on the automatic largest cross-map lag.
pub const MAX_AUTO_LAG: usize = 20;
/// Largest number of surrogate drivers of each kind per pair: 999 give a surrogate rank
/// resolved to 0.001, and each costs one extra target on every largest-size table.
pub const MAX_SURROGATES: usize = 999;
/// Largest number of random libraries per size.
pub const MAX_REPLICATES: usize = 1000;

/// Library sizes: automatic (log-spaced from E+2 to the usable length) or explicit.
#[derive(Debug, Clone, PartialEq)]
pub enum LibrarySizes {
    /// `count` log-spaced sizes from E+2 to the usable length (default 12).
    Auto {
        /// Number of sizes.
        count: usize,
    },
    /// Exactly these sizes.
    Explicit(Vec<usize>),
}

/// Raw cross-map parameters (checked by [`CrossMapParams::validate`]).
#[derive(Debug, Clone, PartialEq)]
pub struct CrossMapParams {
    /// Library sizes.
    pub library_sizes: LibrarySizes,
    /// Random libraries per size (default 100).
    pub replicates: usize,
    /// Theiler window; `None` uses the documented default.
    pub theiler: Option<usize>,
    /// Largest absolute cross-map lag; `None` chooses from the embedding.
    pub max_lag: Option<usize>,
    /// Surrogate drivers of each kind (phase-randomised and seasonal) per pair at the largest
    /// library size (0 = none).
    pub surrogates: usize,
    /// Known period in time steps for the seasonal surrogates of every driver; `None` detects
    /// each driver's dominant cycle ([`crate::season::detect_season`]).
    pub period: Option<usize>,
    /// Whether seasonal surrogates keep each driver's cycle; when false they are plain
    /// phase-randomised surrogates (for records known to carry no outside rhythm).
    pub seasonal: bool,
    /// Master seed.
    pub seed: u64,
}

impl Default for CrossMapParams {
    fn default() -> Self {
        Self {
            library_sizes: LibrarySizes::Auto {
                count: DEFAULT_LIBRARY_COUNT,
            },
            replicates: DEFAULT_REPLICATES,
            theiler: None,
            max_lag: None,
            surrogates: 0,
            period: None,
            seasonal: true,
            seed: 0,
        }
    }
}

/// The resolved plan for one response manifold.
#[derive(Debug, Clone, PartialEq)]
pub struct ResponsePlan {
    /// Valid delay vectors of the response (the usable length).
    pub usable: usize,
    /// Library sizes, increasing, deduplicated.
    pub library_sizes: Vec<usize>,
    /// Theiler window in time steps.
    pub theiler: usize,
    /// Largest absolute cross-map lag.
    pub max_lag: usize,
}

/// Parameters checked against the data (library sizes resolved per response manifold).
///
/// Only [`CrossMapParams::validate`] makes one, and its fields cannot be changed afterwards, so
/// every plan in it holds for the series it was checked against.
#[derive(Debug, Clone, PartialEq)]
pub struct ValidParams {
    pub(crate) raw: CrossMapParams,
    pub(crate) n_points: usize,
    pub(crate) plans: Vec<ResponsePlan>,
    /// `None` prepares each driver inside each work unit (the same results, more work).
    pub(crate) surrogate_bases: Option<Arc<SurrogateBases>>,
}

impl ValidParams {
    /// The raw parameters, as given.
    pub fn raw(&self) -> &CrossMapParams {
        &self.raw
    }

    /// Series length the parameters were checked against.
    pub fn n_points(&self) -> usize {
        self.n_points
    }

    /// One plan per variable, used when that variable is the response.
    pub fn plans(&self) -> &[ResponsePlan] {
        &self.plans
    }

    /// Every variable's cycle and spectra, prepared once for the surrogates
    /// ([`ValidParams::with_surrogate_bases`]).
    pub fn surrogate_bases(&self) -> Option<&SurrogateBases> {
        self.surrogate_bases.as_deref()
    }

    /// Prepare every variable's cycle, mean cycle and spectra once for these `series` (the
    /// ones the parameters were validated for), so that no work unit repeats them. A no-op
    /// without surrogates. Units given other series notice (by a fingerprint of the values)
    /// and prepare their own.
    pub fn with_surrogate_bases(mut self, series: &[Vec<f64>]) -> Self {
        self.surrogate_bases = (self.raw.surrogates > 0).then(|| {
            Arc::new(SurrogateBases::new(
                series,
                self.raw.period,
                self.raw.seasonal,
            ))
        });
        self
    }
}

impl CrossMapParams {
    /// Set the library sizes.
    pub fn with_library_sizes(mut self, sizes: LibrarySizes) -> Self {
        self.library_sizes = sizes;
        self
    }
    /// Set the replicates per size.
    pub fn with_replicates(mut self, r: usize) -> Self {
        self.replicates = r;
        self
    }
    /// Set the Theiler window.
    pub fn with_theiler(mut self, w: Option<usize>) -> Self {
        self.theiler = w;
        self
    }
    /// Set the largest cross-map lag.
    pub fn with_max_lag(mut self, k: Option<usize>) -> Self {
        self.max_lag = k;
        self
    }
    /// Set the surrogate count and optional period.
    pub fn with_surrogates(mut self, count: usize, period: Option<usize>) -> Self {
        self.surrogates = count;
        self.period = period;
        self
    }
    /// Switch seasonal surrogates on (the default) or off.
    pub fn with_seasonal_surrogates(mut self, on: bool) -> Self {
        self.seasonal = on;
        self
    }
    /// Set the master seed.
    pub fn with_seed(mut self, seed: u64) -> Self {
        self.seed = seed;
        self
    }

    /// Check once against the series length and embeddings; one error variant per rule.
    pub fn validate(
        &self,
        n_points: usize,
        embeddings: &[Embedding],
    ) -> Result<ValidParams, EngineError> {
        if self.replicates == 0 {
            return Err(EngineError::ReplicatesZero);
        }
        if self.replicates > MAX_REPLICATES {
            return Err(EngineError::TooManyReplicates {
                found: self.replicates,
                max: MAX_REPLICATES,
            });
        }
        if self.surrogates > MAX_SURROGATES {
            return Err(EngineError::TooManySurrogates {
                found: self.surrogates,
                max: MAX_SURROGATES,
            });
        }
        match &self.library_sizes {
            LibrarySizes::Auto { count: 0 } => return Err(EngineError::LibraryCountZero),
            LibrarySizes::Explicit(v) if v.is_empty() => return Err(EngineError::LibraryCountZero),
            _ => {}
        }
        if embeddings.len() < 2 {
            return Err(EngineError::TooFewSeries {
                found: embeddings.len(),
            });
        }
        if let Some(p) = self.period
            && p < 2
        {
            return Err(EngineError::PeriodTooShort { period: p });
        }
        if let Some(p) = self.period
            && p > n_points / 3
        {
            return Err(EngineError::PeriodTooLong {
                period: p,
                max: n_points / 3,
                n_points,
            });
        }
        let mut plans = Vec::with_capacity(embeddings.len());
        for (i, emb) in embeddings.iter().enumerate() {
            if emb.e == 0 {
                return Err(EngineError::EmbeddingDimensionZero);
            }
            if emb.tau == 0 {
                return Err(EngineError::DelayZero);
            }
            let theiler = self
                .theiler
                .unwrap_or_else(|| default_theiler(emb.e, emb.tau));
            let usable = n_points
                .saturating_sub((emb.e - 1) * emb.tau)
                .saturating_sub(emb.vectors_excluded);
            // A query needs E+1 neighbours outside its window of 2w+1 points.
            let needed = emb.e + 2 + 2 * theiler;
            if usable < needed {
                return Err(EngineError::SeriesTooShort {
                    variable: Some(i),
                    usable,
                    needed,
                    e: emb.e,
                    tau: emb.tau,
                });
            }
            let min = emb.e + 2;
            let library_sizes = match &self.library_sizes {
                LibrarySizes::Auto { count } => log_spaced(min, usable, *count),
                LibrarySizes::Explicit(v) => {
                    let mut v = v.clone();
                    v.sort_unstable();
                    v.dedup();
                    if let Some(&size) = v.iter().find(|&&s| s < min || s > usable) {
                        return Err(EngineError::LibrarySizeOutOfRange {
                            variable: i,
                            size,
                            min,
                            max: usable,
                        });
                    }
                    v
                }
            };
            let max_lag = match self.max_lag {
                Some(k) => {
                    if 2 * k >= usable {
                        return Err(EngineError::LagTooLarge {
                            variable: i,
                            max_lag: k,
                            usable,
                        });
                    }
                    k
                }
                None => default_max_lag(emb.e, emb.tau, usable),
            };
            plans.push(ResponsePlan {
                usable,
                library_sizes,
                theiler,
                max_lag,
            });
        }
        Ok(ValidParams {
            raw: self.clone(),
            n_points,
            plans,
            surrogate_bases: None,
        })
    }
}

/// Default largest cross-map lag: `max(E tau, 3)`, at most [`MAX_AUTO_LAG`] and below a quarter
/// of the usable length (so most points stay predictable at every lag).
pub fn default_max_lag(e: usize, tau: usize, usable: usize) -> usize {
    (e * tau).clamp(3, MAX_AUTO_LAG).min(usable / 4)
}

/// `count` sizes log-spaced from `min` to `max` inclusive, rounded and deduplicated.
pub fn log_spaced(min: usize, max: usize, count: usize) -> Vec<usize> {
    if count <= 1 || min >= max {
        return vec![max];
    }
    let (a, b) = ((min as f64).ln(), (max as f64).ln());
    let mut v: Vec<usize> = (0..count)
        .map(|i| (a + (b - a) * i as f64 / (count - 1) as f64).exp().round() as usize)
        .map(|s| s.clamp(min, max))
        .collect();
    v.dedup();
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    fn emb(e: usize, tau: usize) -> Embedding {
        Embedding {
            e,
            tau,
            simplex_skill: 0.9,
            skill_by_e: vec![],
            vectors_excluded: 0,
        }
    }

    #[test]
    fn auto_sizes_run_from_e_plus_2_to_the_usable_length() {
        let v = CrossMapParams::default()
            .validate(1000, &[emb(2, 1), emb(3, 2)])
            .unwrap();
        assert_eq!(v.plans[0].library_sizes.first(), Some(&4));
        assert_eq!(v.plans[0].library_sizes.last(), Some(&999));
        assert_eq!(v.plans[1].library_sizes.last(), Some(&996));
        assert_eq!(v.plans[0].library_sizes.len(), 12);
        assert_eq!(log_spaced(3, 6, 12), vec![3, 4, 5, 6]);
    }

    #[test]
    fn each_rule_has_its_own_error_naming_the_option() {
        let e2 = [emb(2, 1), emb(2, 1)];
        let p = CrossMapParams::default();
        let err = p.clone().with_replicates(0).validate(100, &e2).unwrap_err();
        assert!(
            matches!(err, EngineError::ReplicatesZero) && err.to_string().contains("replicates")
        );
        let err = p.validate(100, &[emb(0, 1), emb(2, 1)]).unwrap_err();
        assert!(matches!(err, EngineError::EmbeddingDimensionZero));
        let err = p.validate(100, &[emb(2, 0), emb(2, 1)]).unwrap_err();
        assert!(matches!(err, EngineError::DelayZero));
        let err = p
            .clone()
            .with_library_sizes(LibrarySizes::Explicit(vec![3, 50]))
            .validate(100, &e2)
            .unwrap_err();
        assert!(matches!(
            err,
            EngineError::LibrarySizeOutOfRange {
                size: 3,
                min: 4,
                max: 99,
                ..
            }
        ));
        let err = p
            .clone()
            .with_library_sizes(LibrarySizes::Explicit(vec![100]))
            .validate(100, &e2)
            .unwrap_err();
        assert!(matches!(
            err,
            EngineError::LibrarySizeOutOfRange { size: 100, .. }
        ));
        let err = p.validate(6, &[emb(3, 2), emb(2, 1)]).unwrap_err();
        assert!(matches!(
            err,
            EngineError::SeriesTooShort {
                variable: Some(0),
                ..
            }
        ));
        assert!(err.to_string().contains("longer series"));
        let err = p
            .clone()
            .with_max_lag(Some(50))
            .validate(100, &e2)
            .unwrap_err();
        assert!(matches!(err, EngineError::LagTooLarge { .. }));
        let err = p.validate(100, &e2[..1]).unwrap_err();
        assert!(matches!(err, EngineError::TooFewSeries { found: 1 }));
    }

    /// Findings: `--surrogates 100000` on a 200 x 4 table took 970 MB and `--period 1000`
    /// was accepted for 200 rows. The caps hold at their documented values.
    #[test]
    fn surrogates_replicates_and_period_are_capped() {
        let embeddings = vec![emb(2, 1), emb(2, 1)];
        let base = CrossMapParams::default();
        assert!(base.clone().validate(200, &embeddings).is_ok());
        let err = base
            .clone()
            .with_surrogates(100_000, None)
            .validate(200, &embeddings)
            .unwrap_err();
        assert!(
            matches!(err, EngineError::TooManySurrogates { max: 999, .. }),
            "{err}"
        );
        assert!(
            base.clone()
                .with_surrogates(999, None)
                .validate(200, &embeddings)
                .is_ok()
        );
        let err = base
            .clone()
            .with_replicates(1001)
            .validate(200, &embeddings)
            .unwrap_err();
        assert!(
            matches!(err, EngineError::TooManyReplicates { .. }),
            "{err}"
        );
        let err = base
            .clone()
            .with_surrogates(5, Some(1000))
            .validate(200, &embeddings)
            .unwrap_err();
        assert!(
            err.to_string()
                .contains("third of the 200-point record (at most 66)"),
            "{err}"
        );
        assert!(
            base.with_surrogates(5, Some(66))
                .validate(200, &embeddings)
                .is_ok()
        );
    }
}
