//! Shape features of cross-map skill ensembles, and the versioned feature schema.
//!
//! The crate is a leaf: it takes a [`PairEvidence`] value (library sizes x replicates of
//! skills for the hypothesis driver -> response, optionally the reverse ensemble, a lag profile,
//! surrogate-driver skills and facts about the series) and never the engine itself, so
//! ensembles read from a file fit the same door. [`compute`] returns one value per
//! [`schema`] entry, `None` where the evidence is missing or does not define the feature.
//!
//! ```
//! use ensemble_features::{compute, index_of, schema, Ensemble, PairEvidence};
//!
//! let forward = Ensemble {
//!     library_sizes: vec![10, 20, 40, 80, 160],
//!     skills: vec![
//!         vec![0.20, 0.30, 0.25],
//!         vec![0.40, 0.45, 0.35],
//!         vec![0.55, 0.60, 0.50],
//!         vec![0.65, 0.68, 0.62],
//!         vec![0.70, 0.72, 0.68],
//!     ],
//! };
//! forward.validate().unwrap();
//! let evidence = PairEvidence::curve_only(forward, None);
//! let row = compute(&evidence);
//! assert_eq!(row.len(), schema().len());
//! let gain = row[index_of("skill_gain").unwrap()].unwrap();
//! assert!((gain - 0.45).abs() < 1e-12);
//! // No lag profile was given, so lag features are missing rather than zero.
//! assert!(row[index_of("lag_best").unwrap()].is_none());
//! ```
#![deny(missing_docs)]

mod assemble;
mod error;
pub mod fit;
mod schema;
mod shape;
mod stats;
pub mod trend;

pub use assemble::{available_groups, compute, try_compute};
pub use error::FeatureError;
pub use schema::{
    Feature, FeatureDef, FeatureGroup, SCHEMA_VERSION, curve_only_indices, curve_only_names,
    index_of, names, names_in_groups, schema, schema_hash, schema_markdown,
};

/// Cross-map skills for one ordered pair: `skills[i][r]` is replicate `r` at `library_sizes[i]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Ensemble {
    /// Library sizes, strictly increasing.
    pub library_sizes: Vec<usize>,
    /// `skills[i]` holds every replicate's skill at `library_sizes[i]`; NaN marks a replicate
    /// whose skill was undefined (e.g. constant estimates).
    pub skills: Vec<Vec<f64>>,
}

impl Ensemble {
    /// Checks the shape rules: one row per size, at least 2 sizes, sizes positive and strictly
    /// increasing, at least 1 replicate per size and the same replicate count at every size.
    /// Skill values themselves are not checked (NaN is allowed and means undefined).
    pub fn validate(&self) -> Result<(), FeatureError> {
        if self.library_sizes.len() != self.skills.len() {
            return Err(FeatureError::ShapeMismatch {
                sizes: self.library_sizes.len(),
                rows: self.skills.len(),
            });
        }
        if self.library_sizes.len() < 2 {
            return Err(FeatureError::TooFewSizes {
                found: self.library_sizes.len(),
            });
        }
        for (index, &l) in self.library_sizes.iter().enumerate() {
            if l == 0 {
                return Err(FeatureError::ZeroLibrarySize { index });
            }
            if index > 0 && l <= self.library_sizes[index - 1] {
                return Err(FeatureError::SizesNotIncreasing {
                    index,
                    previous: self.library_sizes[index - 1],
                    current: l,
                });
            }
        }
        let expected = self.skills[0].len();
        for (&library_size, row) in self.library_sizes.iter().zip(&self.skills) {
            if row.is_empty() {
                return Err(FeatureError::NoReplicates { library_size });
            }
            if row.len() != expected {
                return Err(FeatureError::UnequalReplicates {
                    library_size,
                    expected,
                    found: row.len(),
                });
            }
        }
        Ok(())
    }

    /// Builds a validated ensemble from members `(library_size, replicate, skill)` in any
    /// order, as `curves.csv` lists them one per row. Within each size, skills are ordered by
    /// replicate index, so position r pairs the r-th smallest replicate index at every size
    /// (what `rising_share` compares). Fails on a repeated member or on any rule of
    /// [`Ensemble::validate`].
    pub fn from_members<I>(members: I) -> Result<Ensemble, FeatureError>
    where
        I: IntoIterator<Item = (usize, usize, f64)>,
    {
        use std::collections::BTreeMap;
        let mut by_size: BTreeMap<usize, BTreeMap<usize, f64>> = BTreeMap::new();
        for (library_size, replicate, skill) in members {
            if by_size
                .entry(library_size)
                .or_default()
                .insert(replicate, skill)
                .is_some()
            {
                return Err(FeatureError::DuplicateMember {
                    library_size,
                    replicate,
                });
            }
        }
        let ensemble = Ensemble {
            library_sizes: by_size.keys().copied().collect(),
            skills: by_size
                .into_values()
                .map(|reps| reps.into_values().collect())
                .collect(),
        };
        ensemble.validate()?;
        Ok(ensemble)
    }

    /// Number of replicates at the first library size (all sizes agree once validated).
    pub fn replicates(&self) -> usize {
        self.skills.first().map_or(0, Vec::len)
    }
}

/// Skill as a function of cross-map lag at the largest library size (Ye et al. 2015).
#[derive(Debug, Clone, PartialEq)]
pub struct LagProfile {
    /// Cross-map lags, increasing; lag `l` estimates driver(t + l) from the response's state at t.
    pub lags: Vec<i32>,
    /// Skill at each lag (NaN where undefined).
    pub skills: Vec<f64>,
}

impl LagProfile {
    /// Checks that lags and skills pair up and that lags are strictly increasing.
    pub fn validate(&self) -> Result<(), FeatureError> {
        if self.lags.len() != self.skills.len() {
            return Err(FeatureError::LagShapeMismatch {
                lags: self.lags.len(),
                skills: self.skills.len(),
            });
        }
        for index in 1..self.lags.len() {
            if self.lags[index] <= self.lags[index - 1] {
                return Err(FeatureError::LagsNotIncreasing {
                    index,
                    previous: self.lags[index - 1],
                    current: self.lags[index],
                });
            }
        }
        Ok(())
    }
}

/// Facts about the two series behind a pair, known only when the series themselves were seen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairContext {
    /// Number of time points in the table.
    pub n_points: usize,
    /// Embedding dimension of the driver.
    pub e_driver: usize,
    /// Embedding dimension of the response (the manifold searched).
    pub e_response: usize,
    /// Delay of the driver embedding.
    pub tau_driver: usize,
    /// Delay of the response embedding.
    pub tau_response: usize,
    /// Simplex one-step self-forecast skill of the driver.
    pub simplex_driver: f64,
    /// Simplex one-step self-forecast skill of the response.
    pub simplex_response: f64,
    /// Pearson correlation of the two raw series over shared non-missing points.
    pub correlation: f64,
    /// Largest, over the other observed variables W, of min(skill W -> driver, skill W ->
    /// response) at the largest library size; 0 when no other variable is observed (no
    /// observed candidate for a common driver).
    pub common_driver_skill: f64,
    /// Share of the response's observed drivers (this one included) whose skill at the largest
    /// library size is at or below this pair's; 1 when this is the only driver.
    pub response_skill_rank: f64,
    /// Mean skill at the largest library size over every observed driver of the response.
    pub response_mean_skill: f64,
}

/// A series' dominant cycle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cycle {
    /// Period in samples.
    pub period: f64,
    /// Share of the variance the mean cycle carries, in [0, 1].
    pub strength: f64,
}

/// Seasonal-surrogate evidence for one ordered pair.
#[derive(Debug, Clone, PartialEq)]
pub struct SeasonalEvidence {
    /// One skill per seasonal surrogate driver at the largest library size, the same statistic
    /// as `skill_final_mean`.
    pub skills: Vec<f64>,
    /// The driver's dominant cycle (the one its seasonal surrogates keep).
    pub driver: Cycle,
    /// The response's dominant cycle.
    pub response: Cycle,
}

/// Everything known about one ordered pair driver -> response.
#[derive(Debug, Clone, PartialEq)]
pub struct PairEvidence {
    /// Ensemble for driver -> response (driver estimated from the response's manifold).
    pub forward: Ensemble,
    /// Ensemble for the reverse hypothesis response -> driver, when available.
    pub reverse: Option<Ensemble>,
    /// Lag profile for driver -> response, when computed.
    pub lag: Option<LagProfile>,
    /// Lag profile for the reverse hypothesis response -> driver, when computed.
    pub reverse_lag: Option<LagProfile>,
    /// One skill per surrogate driver at the largest library size, when computed. Each value
    /// must be the same statistic as the real one it is compared with: the replicate mean of
    /// skill at the largest L (`skill_final_mean`).
    pub surrogate_skills: Option<Vec<f64>>,
    /// Seasonal-surrogate skills and the two series' cycles, when computed.
    pub seasonal: Option<SeasonalEvidence>,
    /// Facts about the two series, when the series themselves were seen (not for curves
    /// read from elsewhere).
    pub context: Option<PairContext>,
}

impl PairEvidence {
    /// Evidence from curves alone (e.g. a `curves.csv` written elsewhere): no lag profile,
    /// surrogates or context.
    pub fn curve_only(forward: Ensemble, reverse: Option<Ensemble>) -> Self {
        PairEvidence {
            forward,
            reverse,
            lag: None,
            reverse_lag: None,
            surrogate_skills: None,
            seasonal: None,
            context: None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ens(sizes: &[usize], reps: &[usize]) -> Ensemble {
        Ensemble {
            library_sizes: sizes.to_vec(),
            skills: reps.iter().map(|&r| vec![0.5; r]).collect(),
        }
    }

    #[test]
    fn a_well_formed_ensemble_passes() {
        assert_eq!(ens(&[10, 20, 40], &[3, 3, 3]).validate(), Ok(()));
        assert_eq!(ens(&[10, 20], &[1, 1]).validate(), Ok(()));
    }

    #[test]
    fn each_shape_rule_has_its_own_error() {
        assert_eq!(
            ens(&[10], &[3]).validate(),
            Err(FeatureError::TooFewSizes { found: 1 })
        );
        assert_eq!(
            ens(&[10, 20], &[3]).validate(),
            Err(FeatureError::ShapeMismatch { sizes: 2, rows: 1 })
        );
        assert_eq!(
            ens(&[10, 10], &[3, 3]).validate(),
            Err(FeatureError::SizesNotIncreasing {
                index: 1,
                previous: 10,
                current: 10
            })
        );
        assert_eq!(
            ens(&[0, 10], &[3, 3]).validate(),
            Err(FeatureError::ZeroLibrarySize { index: 0 })
        );
        assert_eq!(
            ens(&[10, 20], &[0, 0]).validate(),
            Err(FeatureError::NoReplicates { library_size: 10 })
        );
        assert_eq!(
            ens(&[10, 20, 40], &[3, 3, 2]).validate(),
            Err(FeatureError::UnequalReplicates {
                library_size: 40,
                expected: 3,
                found: 2
            })
        );
    }

    #[test]
    fn error_messages_name_the_fix() {
        let msg = ens(&[10, 20], &[3, 2]).validate().unwrap_err().to_string();
        assert!(msg.contains("library size 20") && msg.contains("same number of replicates"));
        let msg = ens(&[10], &[3]).validate().unwrap_err().to_string();
        assert!(msg.contains("at least 2"));
    }

    #[test]
    fn members_in_any_order_build_the_ensemble() {
        let e =
            Ensemble::from_members([(20, 1, 0.4), (10, 0, 0.1), (20, 0, 0.3), (10, 1, f64::NAN)])
                .unwrap();
        assert_eq!(e.library_sizes, vec![10, 20]);
        assert_eq!(e.skills[1], vec![0.3, 0.4]);
        assert!(e.skills[0][1].is_nan());
        assert_eq!(
            Ensemble::from_members([(10, 0, 0.1), (10, 0, 0.2), (20, 0, 0.3)]),
            Err(FeatureError::DuplicateMember {
                library_size: 10,
                replicate: 0
            })
        );
        assert_eq!(
            Ensemble::from_members([(10, 0, 0.1), (10, 1, 0.2), (20, 0, 0.3)]),
            Err(FeatureError::UnequalReplicates {
                library_size: 20,
                expected: 2,
                found: 1
            })
        );
        assert_eq!(
            Ensemble::from_members([(10, 0, 0.1), (10, 1, 0.2)]),
            Err(FeatureError::TooFewSizes { found: 1 })
        );
    }

    #[test]
    fn lag_profiles_are_checked() {
        let bad = LagProfile {
            lags: vec![0, -1],
            skills: vec![0.1, 0.2],
        };
        assert!(matches!(
            bad.validate(),
            Err(FeatureError::LagsNotIncreasing { index: 1, .. })
        ));
        let short = LagProfile {
            lags: vec![0, 1],
            skills: vec![0.1],
        };
        assert_eq!(
            short.validate(),
            Err(FeatureError::LagShapeMismatch { lags: 2, skills: 1 })
        );
    }

    #[test]
    fn compute_is_lenient_where_try_compute_is_strict() {
        let ev = PairEvidence::curve_only(ens(&[10, 20, 40], &[3, 3, 2]), None);
        assert!(try_compute(&ev).is_err());
        let row = compute(&ev);
        assert_eq!(row[index_of("skill_final_mean").unwrap()], Some(0.5));
    }
}
