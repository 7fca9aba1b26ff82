//! The fitted heads: each head's ranking model, its calibrated scoring, and its card section.

use serde::{Deserialize, Serialize};

use crate::boost::BoostModel;
use crate::calibrate::Calibrator;
use crate::card::HeadCard;
use crate::fit_config::Candidate;
use crate::forest::ForestModel;
use crate::logistic::LogisticModel;
use crate::ood::OodModel;
use crate::standardise::Standardiser;
use crate::{Head, ModelError};

/// The fitted ranking model of a head.
#[derive(Debug, Serialize, Deserialize)]
pub enum Scorer {
    /// Logistic regression.
    Logistic(LogisticModel),
    /// Tree ensemble.
    Forest(ForestModel),
    /// Boosted trees.
    Boost(BoostModel),
    /// Mean of a logistic regression and boosted trees.
    Blend(LogisticModel, BoostModel),
}

impl Scorer {
    pub(crate) fn fit(
        cand: &Candidate,
        rows: &[Vec<f64>],
        y: &[bool],
        seed: u64,
    ) -> Result<Self, ModelError> {
        Ok(match cand {
            Candidate::Logistic { alpha } => Scorer::Logistic(LogisticModel::fit(rows, y, *alpha)?),
            Candidate::Forest(p) => Scorer::Forest(ForestModel::fit(rows, y, p, seed)?),
            Candidate::Boost(b) => Scorer::Boost(BoostModel::fit(rows, y, b, seed)?),
            Candidate::Blend { alpha, boost } => Scorer::Blend(
                LogisticModel::fit(rows, y, *alpha)?,
                BoostModel::fit(rows, y, boost, seed)?,
            ),
        })
    }

    /// Uncalibrated probabilities of standardised rows.
    pub fn raw(&self, rows: &[Vec<f64>]) -> Result<Vec<f64>, ModelError> {
        match self {
            Scorer::Logistic(m) => Ok(rows.iter().map(|r| m.probability(r)).collect()),
            Scorer::Forest(m) => m.probabilities(rows),
            Scorer::Boost(m) => m.probabilities(rows),
            Scorer::Blend(l, b) => Ok(b
                .probabilities(rows)?
                .into_iter()
                .zip(rows)
                .map(|(pb, r)| 0.5 * (l.probability(r) + pb))
                .collect()),
        }
    }
}

/// One head: the columns it reads and everything fitted on them.
#[derive(Debug, Serialize, Deserialize)]
pub struct HeadModel {
    /// Which head.
    pub head: Head,
    /// Indices into the bundle's feature names.
    pub columns: Vec<usize>,
    /// Standardisation of those columns.
    pub standardiser: Standardiser,
    /// Ranking model.
    pub scorer: Scorer,
    /// Calibration of the scorer's probabilities.
    pub calibrator: Calibrator,
    /// Out-of-distribution reference.
    pub ood: OodModel,
}

impl HeadModel {
    /// Calibrated probabilities and distances of raw (unstandardised) head-column rows.
    pub fn score(&self, rows: &[Vec<f64>]) -> Result<(Vec<f64>, Vec<f64>), ModelError> {
        let z = self.standardiser.apply_all(rows);
        let raw = self.scorer.raw(&z)?;
        let p = raw.iter().map(|&r| self.calibrator.apply(r)).collect();
        let d = z.iter().map(|r| self.ood.distance(r)).collect();
        Ok((p, d))
    }
}

/// Everything learned for one head plus its card section.
pub(crate) struct FittedHead {
    pub(crate) model: HeadModel,
    pub(crate) card: HeadCard,
}
