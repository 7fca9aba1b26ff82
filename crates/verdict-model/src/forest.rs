//! Bagged ensemble of smartcore decision trees whose vote fractions give probabilities.
//!
//! smartcore's own random forest exposes no class probabilities, so the ensemble is built
//! here: each tree sees a bootstrap sample of rows (Breiman 1996) and a random subset of
//! columns (the random subspace method, Ho 1998), drawn from this crate's seeded generator.

use rand::seq::SliceRandom;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use smartcore::linalg::basic::matrix::DenseMatrix;
use smartcore::tree::decision_tree_classifier::{
    DecisionTreeClassifier, DecisionTreeClassifierParameters,
};

use crate::ModelError;

type Tree = DecisionTreeClassifier<f64, u32, DenseMatrix<f64>, Vec<u32>>;

/// One tree and the columns it was grown on.
#[derive(Debug, Serialize, Deserialize)]
pub struct BaggedTree {
    /// Column indices (into the standardised row) the tree reads, in order.
    pub columns: Vec<usize>,
    /// The fitted tree; class 1 = causal.
    pub tree: Tree,
}

/// Growth settings of the ensemble.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ForestParams {
    /// Number of trees.
    pub trees: usize,
    /// Maximum depth of each tree.
    pub max_depth: u16,
    /// Minimum rows in a leaf.
    pub min_leaf: usize,
    /// Fraction of columns each tree sees (at least one column).
    pub feature_fraction: f64,
}

/// A fitted ensemble.
#[derive(Debug, Serialize, Deserialize)]
pub struct ForestModel {
    /// The trees.
    pub trees: Vec<BaggedTree>,
}

fn matrix(
    rows: &[Vec<f64>],
    idx: &[usize],
    columns: &[usize],
) -> Result<DenseMatrix<f64>, ModelError> {
    let mut values = Vec::with_capacity(idx.len() * columns.len());
    for &i in idx {
        for &c in columns {
            values.push(rows[i][c]);
        }
    }
    DenseMatrix::new(idx.len(), columns.len(), values, false).map_err(|e| ModelError::Fit {
        model: "tree ensemble",
        message: e.to_string(),
    })
}

impl ForestModel {
    /// Grows `params.trees` trees on `rows` (standardised) and labels `y`, seeded by `seed`.
    pub fn fit(
        rows: &[Vec<f64>],
        y: &[bool],
        params: &ForestParams,
        seed: u64,
    ) -> Result<Self, ModelError> {
        let n = rows.len();
        let width = rows.first().map_or(0, Vec::len);
        if n == 0 || width == 0 {
            return Err(ModelError::Fit {
                model: "tree ensemble",
                message: "no rows or no columns".into(),
            });
        }
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let n_cols = ((width as f64 * params.feature_fraction).ceil() as usize).clamp(1, width);
        let mut trees = Vec::with_capacity(params.trees);
        for _ in 0..params.trees {
            let mut all_cols: Vec<usize> = (0..width).collect();
            all_cols.shuffle(&mut rng);
            let mut columns = all_cols[..n_cols].to_vec();
            columns.sort_unstable();
            // A bootstrap with a single class cannot grow a tree: redraw a few times.
            let mut idx = Vec::new();
            for _ in 0..20 {
                idx = (0..n).map(|_| rng.random_range(0..n)).collect::<Vec<_>>();
                let pos = idx.iter().filter(|&&i| y[i]).count();
                if pos > 0 && pos < idx.len() {
                    break;
                }
                idx.clear();
            }
            if idx.is_empty() {
                continue;
            }
            let x = matrix(rows, &idx, &columns)?;
            let t: Vec<u32> = idx.iter().map(|&i| u32::from(y[i])).collect();
            let mut p = DecisionTreeClassifierParameters::default()
                .with_max_depth(params.max_depth)
                .with_min_samples_leaf(params.min_leaf.max(1));
            p.seed = Some(rng.random::<u64>());
            let tree = Tree::fit(&x, &t, p).map_err(|e| ModelError::Fit {
                model: "tree ensemble",
                message: e.to_string(),
            })?;
            trees.push(BaggedTree { columns, tree });
        }
        if trees.is_empty() {
            return Err(ModelError::Fit {
                model: "tree ensemble",
                message: "every bootstrap sample held a single class".into(),
            });
        }
        Ok(ForestModel { trees })
    }

    /// Smoothed vote fraction `(votes + 1) / (trees + 2)` for each row: the Laplace
    /// correction keeps the score strictly inside (0, 1) so its log-odds and log-loss stay finite.
    pub fn probabilities(&self, rows: &[Vec<f64>]) -> Result<Vec<f64>, ModelError> {
        if rows.is_empty() {
            return Ok(Vec::new());
        }
        let idx: Vec<usize> = (0..rows.len()).collect();
        let mut votes = vec![0u32; rows.len()];
        for bt in &self.trees {
            let x = matrix(rows, &idx, &bt.columns)?;
            let pred = bt.tree.predict(&x).map_err(|e| ModelError::Fit {
                model: "tree ensemble",
                message: e.to_string(),
            })?;
            for (v, p) in votes.iter_mut().zip(pred) {
                *v += p;
            }
        }
        let t = self.trees.len() as f64;
        Ok(votes
            .into_iter()
            .map(|v| (f64::from(v) + 1.0) / (t + 2.0))
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn toy(n: usize, seed: u64) -> (Vec<Vec<f64>>, Vec<bool>) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut rows = Vec::new();
        let mut y = Vec::new();
        for i in 0..n {
            let c = i % 2 == 0;
            let a: f64 = rng.random::<f64>() + if c { 0.6 } else { 0.0 };
            let b: f64 = rng.random::<f64>();
            rows.push(vec![a, b, a * b]);
            y.push(c);
        }
        (rows, y)
    }

    #[test]
    fn votes_separate_classes_and_repeat_with_seed() {
        let (rows, y) = toy(200, 1);
        let params = ForestParams {
            trees: 25,
            max_depth: 4,
            min_leaf: 3,
            feature_fraction: 0.7,
        };
        let f = ForestModel::fit(&rows, &y, &params, 7).unwrap();
        let p = f.probabilities(&rows).unwrap();
        let auc = crate::metrics::roc_auc(&p, &y).unwrap();
        assert!(auc > 0.85, "auc {auc}");
        assert!(p.iter().all(|&v| v > 0.0 && v < 1.0));
        let g = ForestModel::fit(&rows, &y, &params, 7).unwrap();
        assert_eq!(p, g.probabilities(&rows).unwrap());
    }
}
