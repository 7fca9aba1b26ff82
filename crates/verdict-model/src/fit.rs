//! Training procedure: per head, candidate selection by out-of-family log-loss, a scorer fit,
//! calibration on held-out systems, and the out-of-distribution reference.
//!
//! For each head (full, curve-only) the rows complete in that head's columns are used; rows
//! with an unavailable value are dropped for that head and counted in the card. Each
//! candidate model is run through the *whole* procedure (standardise, fit, calibrate) once
//! per held-out family, and the candidate with the lowest pooled out-of-family log-loss is
//! refitted on every row. Rows of one system never straddle a fit/calibration or train/test
//! boundary.

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use crate::boost::{BoostModel, BoostParams};
use crate::bundle::{FineHead, ModelBundle};
use crate::calibrate::Calibrator;
use crate::card::{
    CandidateScore, CountRow, FoldScore, HeadCard, ModelCard, SuiteIdentity, TargetCheck,
};
use crate::forest::{ForestModel, ForestParams};
use crate::logistic::{LogisticModel, MultinomialModel};
use crate::metrics::{self, Summary};
use crate::ood::OodModel;
use crate::standardise::Standardiser;
use crate::verdict::VerdictPolicy;
use crate::{FineLabel, Head, ModelError, SpecIdentity, TrainingSet};

/// A model family tried during selection.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Candidate {
    /// Logistic regression with L2 penalty `alpha` (linfa-logistic).
    Logistic {
        /// Penalty weight on the summed log-loss (scikit-learn's `C = 1/alpha`).
        alpha: f64,
    },
    /// Bagged smartcore decision trees with vote-fraction probabilities.
    Forest(ForestParams),
    /// Gradient-boosted regression trees on the log-loss.
    Boost(BoostParams),
    /// The mean of a logistic regression's and boosted trees' probabilities: the linear model
    /// carries the trends that hold across systems, the trees the interactions.
    Blend {
        /// The logistic regression's L2 penalty.
        alpha: f64,
        /// The boosted trees' settings.
        boost: BoostParams,
    },
}

impl Candidate {
    /// Human-readable name used in the model card.
    pub fn name(&self) -> String {
        match self {
            Candidate::Logistic { alpha } => format!("logistic regression (L2, alpha = {alpha})"),
            Candidate::Forest(p) => format!(
                "tree ensemble ({} trees, depth <= {}, leaf >= {}, {:.0}% of columns per tree)",
                p.trees,
                p.max_depth,
                p.min_leaf,
                100.0 * p.feature_fraction
            ),
            Candidate::Boost(b) => boost_name(b),
            Candidate::Blend { alpha, boost } => format!(
                "mean of logistic regression (L2, alpha = {alpha}) and {}",
                boost_name(boost)
            ),
        }
    }
}

fn boost_name(b: &BoostParams) -> String {
    format!(
        "boosted trees ({} trees, depth <= {}, rate {}, L2 {}, {:.0}% of rows per tree)",
        b.trees,
        b.max_depth,
        b.learning_rate,
        b.l2,
        100.0 * b.subsample
    )
}

/// Settings of [`fit`].
#[derive(Debug, Clone, PartialEq)]
pub struct FitConfig {
    /// Seed of every random choice (splits, bootstraps).
    pub seed: u64,
    /// Columns of the curve-only head, by feature name; empty = no curve-only head.
    pub curve_only_names: Vec<String>,
    /// Candidate models; the first wins ties.
    pub candidates: Vec<Candidate>,
    /// Share of systems held out for calibration (0 < f < 1).
    pub calibration_fraction: f64,
    /// Training percentile of the out-of-distribution distance used as threshold.
    pub ood_percentile: f64,
    /// Shrinkage of the covariance towards the identity for the distance (0 < s <= 1).
    pub ood_shrinkage: f64,
    /// Verdict policy stored in the bundle and used for the review rate in validation.
    pub policy: VerdictPolicy,
    /// Whether to fit the four-label head.
    pub fine_head: bool,
    /// L2 penalty of the four-label head.
    pub fine_alpha: f64,
    /// The simulator spec the rows came from.
    pub spec: SpecIdentity,
    /// Fewest complete rows a head may be trained on.
    pub min_rows: usize,
    /// Name of the validation suite given to [`fit_with_suite`] (for the card).
    pub suite_name: String,
}

impl Default for FitConfig {
    fn default() -> Self {
        FitConfig {
            seed: 1,
            curve_only_names: Vec::new(),
            candidates: vec![
                Candidate::Logistic { alpha: 10.0 },
                Candidate::Logistic { alpha: 100.0 },
                Candidate::Forest(ForestParams {
                    trees: 60,
                    max_depth: 6,
                    min_leaf: 3,
                    feature_fraction: 0.6,
                }),
                Candidate::Boost(BoostParams::default()),
                Candidate::Blend {
                    alpha: 100.0,
                    boost: BoostParams::default(),
                },
            ],
            calibration_fraction: 0.3,
            ood_percentile: 99.0,
            ood_shrinkage: 0.1,
            policy: VerdictPolicy::default(),
            fine_head: true,
            fine_alpha: 1.0,
            spec: SpecIdentity::default(),
            min_rows: 20,
            suite_name: String::new(),
        }
    }
}

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
    fn fit(cand: &Candidate, rows: &[Vec<f64>], y: &[bool], seed: u64) -> Result<Self, ModelError> {
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

/// How a head's calibrator was chosen.
#[derive(Debug, Clone, PartialEq)]
struct CalibrationRecord {
    mode: String,
    platt_log_loss: Option<f64>,
    isotonic_log_loss: Option<f64>,
}

/// splitmix64 step: derives independent seeds from one.
fn mix(seed: u64, k: u64) -> u64 {
    let mut z = seed.wrapping_add(k.wrapping_mul(0x9E37_79B9_7F4A_7C15));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn unique_sorted(v: &[&str]) -> Vec<String> {
    let mut u: Vec<String> = v.iter().map(|s| s.to_string()).collect();
    u.sort();
    u.dedup();
    u
}

fn both_classes(idx: &[usize], y: &[bool]) -> bool {
    let pos = idx.iter().filter(|&&i| y[i]).count();
    pos > 0 && pos < idx.len()
}

/// Indices `0..n` not in `test` (linear time, for large training sets).
fn complement(n: usize, test: &[usize]) -> Vec<usize> {
    let mut held = vec![false; n];
    for &i in test {
        held[i] = true;
    }
    (0..n).filter(|&i| !held[i]).collect()
}

fn take<T: Clone>(v: &[T], idx: &[usize]) -> Vec<T> {
    idx.iter().map(|&i| v[i].clone()).collect()
}

/// Splits row indices into groups of whole systems: `k` folds after a seeded shuffle.
fn system_folds(systems: &[&str], k: usize, seed: u64) -> Vec<Vec<usize>> {
    let mut sys = unique_sorted(systems);
    sys.shuffle(&mut ChaCha8Rng::seed_from_u64(seed));
    let k = k.clamp(1, sys.len().max(1));
    let mut folds = vec![Vec::new(); k];
    for (i, s) in systems.iter().enumerate() {
        let pos = sys.iter().position(|t| t == s).expect("system listed");
        folds[pos % k].push(i);
    }
    folds
}

/// Chooses Platt or isotonic by log-loss cross-fitted over two halves of the calibration
/// systems, then fits the winner on all calibration rows.
fn choose_calibrator(
    raw: &[f64],
    y: &[bool],
    systems: &[&str],
    seed: u64,
) -> (Calibrator, Option<f64>, Option<f64>) {
    let halves = system_folds(systems, 2, seed);
    let usable = halves.len() == 2 && halves.iter().all(|h| both_classes(h, y));
    if !usable {
        // Isotonic regression always wins in-sample, so without an honest comparison the
        // two-parameter Platt map is the safer choice.
        return (Calibrator::fit_platt(raw, y), None, None);
    }
    let (mut ll_platt, mut ll_iso) = (0.0, 0.0);
    for (a, b) in [(0, 1), (1, 0)] {
        let (ra, ya) = (take(raw, &halves[a]), take(y, &halves[a]));
        let (rb, yb) = (take(raw, &halves[b]), take(y, &halves[b]));
        let w = rb.len() as f64 / raw.len() as f64;
        let pl = Calibrator::fit_platt(&ra, &ya);
        let is = Calibrator::fit_isotonic(&ra, &ya);
        let pp: Vec<f64> = rb.iter().map(|&r| pl.apply(r)).collect();
        let pi: Vec<f64> = rb.iter().map(|&r| is.apply(r)).collect();
        ll_platt += w * metrics::log_loss(&pp, &yb);
        ll_iso += w * metrics::log_loss(&pi, &yb);
    }
    let cal = if ll_iso < ll_platt {
        Calibrator::fit_isotonic(raw, y)
    } else {
        Calibrator::fit_platt(raw, y)
    };
    (cal, Some(ll_platt), Some(ll_iso))
}

/// The whole per-head procedure on one set of rows: returns the fitted head.
fn fit_pipeline(
    (head, columns): (Head, &[usize]),
    (x, y, systems): (&[Vec<f64>], &[bool], &[&str]),
    cand: &Candidate,
    cfg: &FitConfig,
    seed: u64,
) -> Result<(HeadModel, CalibrationRecord), ModelError> {
    let width = columns.len();
    let n_sys = unique_sorted(systems).len();
    // Held-out calibration split by whole systems, when it leaves both classes on each side.
    let mut split = None;
    if n_sys >= 4 {
        let mut sys = unique_sorted(systems);
        let n_cal =
            ((n_sys as f64 * cfg.calibration_fraction).round() as usize).clamp(1, n_sys - 1);
        for attempt in 0..20 {
            sys.shuffle(&mut ChaCha8Rng::seed_from_u64(mix(seed, 100 + attempt)));
            let cal_sys = &sys[..n_cal];
            let (cal, fit): (Vec<usize>, Vec<usize>) =
                (0..x.len()).partition(|&i| cal_sys.iter().any(|s| s == systems[i]));
            if both_classes(&cal, y) && both_classes(&fit, y) && cal.len() >= 10 {
                split = Some((fit, cal));
                break;
            }
        }
    }
    let (standardiser, scorer, cal_raw, cal_y, cal_sys, mode) = match split {
        Some((fit_idx, cal_idx)) => {
            let xf = take(x, &fit_idx);
            let st = Standardiser::fit(&xf, width);
            let sc = Scorer::fit(cand, &st.apply_all(&xf), &take(y, &fit_idx), mix(seed, 1))?;
            let raw = sc.raw(&st.apply_all(&take(x, &cal_idx)))?;
            let mode = format!(
                "held-out split: {} of {} systems ({} rows)",
                unique_sorted(&take(systems, &cal_idx)).len(),
                n_sys,
                cal_idx.len()
            );
            (
                st,
                sc,
                raw,
                take(y, &cal_idx),
                take(systems, &cal_idx),
                mode,
            )
        }
        None => {
            // Too few systems for a split: out-of-fold scores from grouped folds calibrate a
            // scorer refitted on every row.
            let folds = system_folds(systems, 5, mix(seed, 2));
            let mut raw = vec![f64::NAN; x.len()];
            for (f, test) in folds.iter().enumerate() {
                let train = complement(x.len(), test);
                if !both_classes(&train, y) {
                    continue;
                }
                let xt = take(x, &train);
                let st = Standardiser::fit(&xt, width);
                let sc = Scorer::fit(
                    cand,
                    &st.apply_all(&xt),
                    &take(y, &train),
                    mix(seed, 10 + f as u64),
                )?;
                for (&i, r) in test.iter().zip(sc.raw(&st.apply_all(&take(x, test)))?) {
                    raw[i] = r;
                }
            }
            let keep: Vec<usize> = (0..x.len()).filter(|&i| raw[i].is_finite()).collect();
            let st = Standardiser::fit(x, width);
            let sc = Scorer::fit(cand, &st.apply_all(x), y, mix(seed, 1))?;
            let mode = format!(
                "cross-fitted over {} system folds ({} rows)",
                folds.len(),
                keep.len()
            );
            (
                st,
                sc,
                take(&raw, &keep),
                take(y, &keep),
                take(systems, &keep),
                mode,
            )
        }
    };
    let (calibrator, platt_ll, iso_ll) =
        if both_classes(&(0..cal_y.len()).collect::<Vec<_>>(), &cal_y) {
            choose_calibrator(&cal_raw, &cal_y, &cal_sys, mix(seed, 3))
        } else {
            return Err(ModelError::NotEnoughRows {
                head: head.as_str(),
                rows: x.len(),
                positives: y.iter().filter(|&&v| v).count(),
                needed: cfg.min_rows,
            });
        };
    let ood = OodModel::fit(
        &standardiser.apply_all(x),
        cfg.ood_shrinkage,
        cfg.ood_percentile,
    );
    Ok((
        HeadModel {
            head,
            columns: columns.to_vec(),
            standardiser,
            scorer,
            calibrator,
            ood,
        },
        CalibrationRecord {
            mode,
            platt_log_loss: platt_ll,
            isotonic_log_loss: iso_ll,
        },
    ))
}

fn validate(set: &TrainingSet, cfg: &FitConfig) -> Result<(), ModelError> {
    let n = set.rows.len();
    if n == 0 {
        return Err(ModelError::EmptyTrainingSet);
    }
    for (what, len) in [
        ("labels", set.labels.len()),
        ("families", set.families.len()),
        ("systems", set.systems.len()),
    ] {
        if len != n {
            return Err(ModelError::LengthMismatch {
                what,
                expected: n,
                found: len,
            });
        }
    }
    let d = set.feature_names.len();
    for (i, name) in set.feature_names.iter().enumerate() {
        if set.feature_names[..i].contains(name) {
            return Err(ModelError::DuplicateFeature { name: name.clone() });
        }
    }
    for (r, row) in set.rows.iter().enumerate() {
        if row.len() != d {
            return Err(ModelError::RowWidth {
                row: r,
                expected: d,
                found: row.len(),
            });
        }
        for (c, v) in row.iter().enumerate() {
            if let Some(v) = v
                && !v.is_finite()
            {
                return Err(ModelError::NonFinite {
                    row: r,
                    column: set.feature_names[c].clone(),
                });
            }
        }
    }
    for name in &cfg.curve_only_names {
        if !set.feature_names.contains(name) {
            return Err(ModelError::UnknownCurveOnlyFeature { name: name.clone() });
        }
    }
    let bad = |option: &'static str, reason: &str| {
        Err(ModelError::InvalidConfig {
            option,
            reason: reason.to_string(),
        })
    };
    if cfg.candidates.is_empty() {
        return bad("candidates", "list at least one candidate model");
    }
    if !(cfg.calibration_fraction > 0.0 && cfg.calibration_fraction < 1.0) {
        return bad(
            "calibration_fraction",
            "must lie strictly between 0 and 1, e.g. 0.3",
        );
    }
    if !(cfg.ood_percentile > 0.0 && cfg.ood_percentile <= 100.0) {
        return bad("ood_percentile", "must lie in (0, 100], e.g. 99");
    }
    if !(cfg.ood_shrinkage > 0.0 && cfg.ood_shrinkage <= 1.0) {
        return bad("ood_shrinkage", "must lie in (0, 1], e.g. 0.1");
    }
    let (lo, hi) = cfg.policy.band;
    if !(0.0..=0.5).contains(&lo) || !(0.5..=1.0).contains(&hi) {
        return bad(
            "policy.band",
            "needs 0 <= lo <= 0.5 <= hi <= 1, e.g. (0.3, 0.7)",
        );
    }
    for c in &cfg.candidates {
        match c {
            Candidate::Logistic { alpha } if !(*alpha >= 0.0 && alpha.is_finite()) => {
                return bad("candidates", "a logistic alpha must be finite and >= 0");
            }
            Candidate::Forest(p)
                if p.trees == 0
                    || p.max_depth == 0
                    || !(p.feature_fraction > 0.0 && p.feature_fraction <= 1.0) =>
            {
                return bad(
                    "candidates",
                    "a tree ensemble needs trees >= 1, depth >= 1, 0 < feature_fraction <= 1",
                );
            }
            Candidate::Boost(b) | Candidate::Blend { boost: b, .. }
                if b.trees == 0
                    || b.max_depth == 0
                    || !(b.learning_rate > 0.0 && b.learning_rate <= 1.0)
                    || !(b.l2 >= 0.0 && b.l2.is_finite())
                    || !(b.subsample > 0.0 && b.subsample <= 1.0)
                    || b.bins < 2 =>
            {
                return bad(
                    "candidates",
                    "boosted trees need trees >= 1, depth >= 1, 0 < rate <= 1, l2 >= 0, 0 < subsample <= 1, bins >= 2",
                );
            }
            Candidate::Blend { alpha, .. } if !(*alpha >= 0.0 && alpha.is_finite()) => {
                return bad("candidates", "a logistic alpha must be finite and >= 0");
            }
            _ => {}
        }
    }
    Ok(())
}

/// Everything learned for one head plus its card section.
struct FittedHead {
    model: HeadModel,
    card: HeadCard,
}

/// Rows of the validation suite complete in a head's columns: raw rows, labels, families.
type SuiteRows = (Vec<Vec<f64>>, Vec<FineLabel>, Vec<String>);

fn suite_rows(suite: &TrainingSet, columns: &[usize]) -> SuiteRows {
    let mut out: SuiteRows = (Vec::new(), Vec::new(), Vec::new());
    for (i, row) in suite.rows.iter().enumerate() {
        let vals: Option<Vec<f64>> = columns.iter().map(|&c| row[c]).collect();
        if let Some(v) = vals {
            out.0.push(v);
            out.1.push(suite.labels[i]);
            out.2.push(suite.families[i].clone());
        }
    }
    out
}

/// Calibrated probabilities and review flags of a fitted head on raw rows.
fn scored(
    m: &HeadModel,
    rows: &[Vec<f64>],
    policy: &VerdictPolicy,
) -> Result<(Vec<f64>, Vec<bool>), ModelError> {
    let (p, d) = m.score(rows)?;
    let (lo, hi) = policy.band;
    let review = p
        .iter()
        .zip(&d)
        .map(|(&pi, &di)| (pi >= lo && pi <= hi) || m.ood.is_unfamiliar(di))
        .collect();
    Ok((p, review))
}

fn fit_head(
    head: Head,
    columns: Vec<usize>,
    (set, suite): (&TrainingSet, Option<&TrainingSet>),
    cfg: &FitConfig,
    seed: u64,
    step: &dyn Fn(),
) -> Result<FittedHead, ModelError> {
    let complete: Vec<usize> = (0..set.rows.len())
        .filter(|&i| columns.iter().all(|&c| set.rows[i][c].is_some()))
        .collect();
    let x: Vec<Vec<f64>> = complete
        .iter()
        .map(|&i| {
            columns
                .iter()
                .map(|&c| set.rows[i][c].expect("complete row"))
                .collect()
        })
        .collect();
    let y: Vec<bool> = complete
        .iter()
        .map(|&i| set.labels[i].is_causal())
        .collect();
    let labels: Vec<FineLabel> = take(&set.labels, &complete);
    let families: Vec<String> = take(&set.families, &complete);
    let systems: Vec<&str> = complete.iter().map(|&i| set.systems[i].as_str()).collect();
    let positives = y.iter().filter(|&&v| v).count();
    if x.len() < cfg.min_rows || positives == 0 || positives == x.len() {
        return Err(ModelError::NotEnoughRows {
            head: head.as_str(),
            rows: x.len(),
            positives,
            needed: cfg.min_rows,
        });
    }

    // Validation folds: whole families when there are several, else whole systems.
    let fam_names = unique_sorted(&families.iter().map(String::as_str).collect::<Vec<_>>());
    let (scheme, folds, fold_names): (String, Vec<Vec<usize>>, Vec<String>) =
        if fam_names.len() >= 2 {
            let folds = fam_names
                .iter()
                .map(|f| (0..x.len()).filter(|&i| &families[i] == f).collect())
                .collect();
            (
                format!("leave-one-family-out over {} families", fam_names.len()),
                folds,
                fam_names.clone(),
            )
        } else {
            let folds = system_folds(&systems, 5, mix(seed, 7));
            let names = (0..folds.len())
                .map(|k| format!("system fold {}", k + 1))
                .collect();
            (
                format!("grouped {}-fold by system (one family only)", folds.len()),
                folds,
                names,
            )
        };

    let suite = suite
        .map(|v| suite_rows(v, &columns))
        .filter(|v| v.1.iter().any(|l| l.is_causal()) && v.1.iter().any(|l| !l.is_causal()));
    let mut candidates = Vec::new();
    // (selection log-loss, candidate index, held-out p, held-out review, per-fold scores,
    // the candidate fitted on every row when a suite scored it)
    type Best = (
        f64,
        usize,
        Vec<f64>,
        Vec<bool>,
        Vec<FoldScore>,
        Option<(HeadModel, CalibrationRecord)>,
    );
    let mut best: Option<Best> = None;
    for (ci, cand) in cfg.candidates.iter().enumerate() {
        let mut p = vec![f64::NAN; x.len()];
        let mut review = vec![false; x.len()];
        let mut fold_scores = Vec::new();
        let mut skipped = 0;
        for (fi, test) in folds.iter().enumerate() {
            let train = complement(x.len(), test);
            if train.len() < cfg.min_rows || !both_classes(&train, &y) {
                skipped += 1;
                continue;
            }
            let fold_seed = mix(seed, 1000 + (ci as u64) * 100 + fi as u64);
            let fitted = fit_pipeline(
                (head, &columns),
                (
                    &take(&x, &train),
                    &take(&y, &train),
                    &take(&systems, &train),
                ),
                cand,
                cfg,
                fold_seed,
            );
            // A fold whose training side cannot be calibrated is skipped, not fatal.
            let m = match fitted {
                Ok((m, _)) => m,
                Err(ModelError::NotEnoughRows { .. }) => {
                    skipped += 1;
                    continue;
                }
                Err(e) => return Err(e),
            };
            let (pt, dt) = m.score(&take(&x, test))?;
            let (lo, hi) = cfg.policy.band;
            for ((&i, pi), di) in test.iter().zip(&pt).zip(&dt) {
                p[i] = *pi;
                review[i] = (*pi >= lo && *pi <= hi) || m.ood.is_unfamiliar(*di);
            }
            let yt = take(&y, test);
            fold_scores.push(FoldScore {
                held_out: fold_names[fi].clone(),
                n: test.len(),
                log_loss: metrics::log_loss(&pt, &yt),
                roc_auc: metrics::roc_auc(&pt, &yt),
                accuracy: metrics::accuracy(&pt, &yt),
            });
        }
        let covered: Vec<usize> = (0..x.len()).filter(|&i| p[i].is_finite()).collect();
        let (pc, yc) = (take(&p, &covered), take(&y, &covered));
        let ll = if covered.is_empty() {
            f64::INFINITY
        } else {
            metrics::log_loss(&pc, &yc)
        };
        // On the validation suite: the candidate fitted on every training row.
        let mut on_suite = None;
        let (mut suite_ll, mut suite_auc) = (None, None);
        if let Some((sx, sl, _)) = &suite {
            let fitted = fit_pipeline(
                (head, &columns),
                (&x, &y, &systems),
                cand,
                cfg,
                mix(seed, 99),
            )?;
            let (ps, _) = fitted.0.score(sx)?;
            let ys: Vec<bool> = sl.iter().map(|l| l.is_causal()).collect();
            suite_ll = Some(metrics::log_loss(&ps, &ys));
            suite_auc = metrics::roc_auc(&ps, &ys);
            on_suite = Some(fitted);
        }
        candidates.push(CandidateScore {
            name: cand.name(),
            cv_log_loss: ll.is_finite().then_some(ll),
            cv_roc_auc: metrics::roc_auc(&pc, &yc),
            folds_used: folds.len() - skipped,
            folds_skipped: skipped,
            suite_log_loss: suite_ll,
            suite_roc_auc: suite_auc,
        });
        step();
        // The suite decides when there is one; leave-one-family-out otherwise.
        let key = suite_ll.unwrap_or(ll);
        if best.as_ref().is_none_or(|b| key < b.0) {
            best = Some((key, ci, p, review, fold_scores, on_suite));
        }
    }
    let (_, chosen, p_cv, review_cv, per_fold, on_suite) = best.expect("at least one candidate");
    let covered: Vec<usize> = (0..x.len()).filter(|&i| p_cv[i].is_finite()).collect();
    let cv: Option<Summary> = (!covered.is_empty()).then(|| {
        metrics::summarise(
            &take(&p_cv, &covered),
            &take(&labels, &covered),
            &take(&families, &covered),
            &take(&review_cv, &covered),
        )
    });
    let reliability = metrics::reliability_bins(&take(&p_cv, &covered), &take(&y, &covered), 10);

    let (model, cal) = match on_suite {
        Some(fitted) => fitted,
        None => fit_pipeline(
            (head, &columns),
            (&x, &y, &systems),
            &cfg.candidates[chosen],
            cfg,
            mix(seed, 99),
        )?,
    };
    let (suite_summary, suite_reliability) = match &suite {
        Some((sx, sl, sf)) => {
            let (ps, review) = scored(&model, sx, &cfg.policy)?;
            let ys: Vec<bool> = sl.iter().map(|l| l.is_causal()).collect();
            (
                Some(metrics::summarise(&ps, sl, sf, &review)),
                metrics::reliability_bins(&ps, &ys, 10),
            )
        }
        None => (None, Vec::new()),
    };
    let selection = match &suite {
        Some((sx, _, _)) => format!(
            "lowest log-loss on the validation suite ({} pairs); leave-one-family-out beside it",
            sx.len()
        ),
        None => "lowest pooled leave-one-family-out log-loss (no validation suite given)".into(),
    };
    let card = HeadCard {
        head,
        columns: columns
            .iter()
            .map(|&c| set.feature_names[c].clone())
            .collect(),
        rows_used: x.len(),
        rows_dropped_unavailable: set.rows.len() - x.len(),
        validation: scheme,
        candidates,
        chosen: cfg.candidates[chosen].name(),
        calibration: model.calibrator.name().to_string(),
        calibration_data: cal.mode,
        calibration_platt_log_loss: cal.platt_log_loss,
        calibration_isotonic_log_loss: cal.isotonic_log_loss,
        ood_threshold: model.ood.threshold,
        ood_percentile: model.ood.percentile,
        cv,
        per_fold,
        reliability,
        selection,
        suite: suite_summary,
        suite_reliability,
    };
    Ok(FittedHead { model, card })
}

/// The quality targets, judged on the validation suite when there is one (else on
/// leave-one-family-out), with the leave-one-family-out value beside it.
fn targets(suite: Option<&Summary>, cv: Option<&Summary>) -> Vec<TargetCheck> {
    type Get = fn(&Summary) -> Option<f64>;
    type Row<'a> = (&'a str, &'a str, Get, fn(f64) -> bool);
    let rows: [Row; 5] = [
        ("ROC AUC", ">= 0.88", |s| s.roc_auc, |v| v >= 0.88),
        (
            "expected calibration error",
            "<= 0.05",
            |s| Some(s.ece),
            |v| v <= 0.05,
        ),
        (
            "review rate",
            "<= 0.25",
            |s| Some(s.review_rate),
            |v| v <= 0.25,
        ),
        (
            "confounded pairs called causal",
            "<= 0.10",
            |s| s.fpr_confounded_verdict,
            |v| v <= 0.10,
        ),
        (
            "direct links called causal",
            ">= 0.60",
            |s| s.recall_direct_verdict,
            |v| v >= 0.60,
        ),
    ];
    rows.iter()
        .map(|(name, target, get, ok)| {
            let value = suite.or(cv).and_then(get);
            TargetCheck {
                name: name.to_string(),
                target: target.to_string(),
                value,
                met: value.is_some_and(ok),
                out_of_family: cv.and_then(get),
            }
        })
        .collect()
}

/// Trains a [`ModelBundle`]: the full head, the curve-only head (when
/// [`FitConfig::curve_only_names`] is non-empty) and optionally the four-label head, with a
/// model card recording counts, the model and calibration choices, and validation figures.
pub fn fit(set: &TrainingSet, cfg: &FitConfig) -> Result<ModelBundle, ModelError> {
    fit_with_suite(set, None, cfg)
}

/// As [`fit`], choosing each head's model by log-loss on `suite`, a validation suite of
/// systems never trained on (published systems), when one is given; its figures go into the
/// card beside leave-one-family-out. The suite must have the training set's feature names.
pub fn fit_with_suite(
    set: &TrainingSet,
    suite: Option<&TrainingSet>,
    cfg: &FitConfig,
) -> Result<ModelBundle, ModelError> {
    fit_with_progress(set, suite, cfg, &|_, _| {})
}

/// As [`fit_with_suite`], calling `step(done, total)` each time a candidate of a head has been
/// scored (every fold and the suite), for a progress display; `total` is the number of heads
/// times the number of candidates.
pub fn fit_with_progress(
    set: &TrainingSet,
    suite: Option<&TrainingSet>,
    cfg: &FitConfig,
    step: &(dyn Fn(usize, usize) + Sync),
) -> Result<ModelBundle, ModelError> {
    validate(set, cfg)?;
    let heads = 1 + usize::from(!cfg.curve_only_names.is_empty());
    let total = heads * cfg.candidates.len();
    let done = std::sync::atomic::AtomicUsize::new(0);
    let step = &|| {
        step(
            done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1,
            total,
        )
    };
    if let Some(v) = suite {
        if v.feature_names != set.feature_names {
            return Err(ModelError::InvalidConfig {
                option: "validation suite",
                reason: "its feature names differ from the training set's; compute both with the same build".into(),
            });
        }
        if v.labels.len() != v.rows.len() || v.families.len() != v.rows.len() {
            return Err(ModelError::LengthMismatch {
                what: "validation suite labels",
                expected: v.rows.len(),
                found: v.labels.len().min(v.families.len()),
            });
        }
    }
    let all: Vec<usize> = (0..set.feature_names.len()).collect();
    let full = fit_head(
        Head::Full,
        all.clone(),
        (set, suite),
        cfg,
        mix(cfg.seed, 1),
        step,
    )?;
    let curve = if cfg.curve_only_names.is_empty() {
        None
    } else {
        // Columns keep the schema's order whatever order the names were given in.
        let cols: Vec<usize> = all
            .iter()
            .copied()
            .filter(|&c| cfg.curve_only_names.contains(&set.feature_names[c]))
            .collect();
        Some(fit_head(
            Head::CurveOnly,
            cols,
            (set, suite),
            cfg,
            mix(cfg.seed, 2),
            step,
        )?)
    };

    let mut fine_note = None;
    let fine = if cfg.fine_head {
        let st = &full.model.standardiser;
        let complete: Vec<usize> = (0..set.rows.len())
            .filter(|&i| set.rows[i].iter().all(Option::is_some))
            .collect();
        let z: Vec<Vec<f64>> = complete
            .iter()
            .map(|&i| {
                st.apply(
                    &set.rows[i]
                        .iter()
                        .map(|v| v.expect("complete"))
                        .collect::<Vec<_>>(),
                )
            })
            .collect();
        let yk: Vec<usize> = complete.iter().map(|&i| set.labels[i].index()).collect();
        match MultinomialModel::fit(&z, &yk, cfg.fine_alpha) {
            Ok(m) => {
                fine_note = Some(format!(
                    "multinomial logistic regression (L2, alpha = {}) over {} classes, uncalibrated",
                    cfg.fine_alpha,
                    m.classes.len()
                ));
                Some(FineHead { model: m })
            }
            Err(e) => {
                fine_note = Some(format!("not fitted: {e}"));
                None
            }
        }
    } else {
        None
    };

    let mut counts: Vec<CountRow> = Vec::new();
    for (f, l) in set.families.iter().zip(&set.labels) {
        match counts.iter_mut().find(|c| &c.family == f && c.label == *l) {
            Some(c) => c.count += 1,
            None => counts.push(CountRow {
                family: f.clone(),
                label: *l,
                count: 1,
            }),
        }
    }
    counts.sort_by(|a, b| a.family.cmp(&b.family).then(a.label.cmp(&b.label)));

    let mut heads = vec![full.card];
    if let Some(c) = &curve {
        heads.push(c.card.clone());
    }
    let target_checks = targets(heads[0].suite.as_ref(), heads[0].cv.as_ref());
    let causal_share =
        set.labels.iter().filter(|l| l.is_causal()).count() as f64 / set.labels.len() as f64;
    let card = ModelCard {
        format_version: crate::FORMAT_VERSION,
        spec: cfg.spec.clone(),
        schema_hash: set.schema_hash.clone(),
        feature_count: set.feature_names.len(),
        seed: cfg.seed,
        positive_class: "direct or indirect (the driver's influence reaches the response)".into(),
        rows: set.rows.len(),
        counts,
        heads,
        fine_head: fine_note,
        policy: cfg.policy,
        targets: target_checks,
        causal_share,
        suite: suite.map(|v| SuiteIdentity {
            name: cfg.suite_name.clone(),
            rows: v.rows.len(),
            causal_share: v.labels.iter().filter(|l| l.is_causal()).count() as f64
                / v.rows.len().max(1) as f64,
        }),
    };
    Ok(ModelBundle {
        feature_names: set.feature_names.clone(),
        schema_hash: set.schema_hash.clone(),
        spec: cfg.spec.clone(),
        full: full.model,
        curve_only: curve.map(|c| c.model),
        fine,
        policy: cfg.policy,
        card,
    })
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::{QualityFlags, Verdict, decide};
    use rand::RngExt;

    /// Invented data for tests only: one strong and one weaker informative feature, a lag
    /// feature that is sometimes unavailable, and a noise feature; families shift the means.
    pub(crate) fn synthetic(seed: u64, families: usize, systems_per_family: usize) -> TrainingSet {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut set = TrainingSet {
            feature_names: ["skill_gain", "convergence", "lag_peak", "noise"]
                .map(String::from)
                .to_vec(),
            schema_hash: "test-schema-1".into(),
            ..Default::default()
        };
        for f in 0..families {
            let shift = 0.2 * f as f64;
            for s in 0..systems_per_family {
                for k in 0..8 {
                    let label = FineLabel::ALL[k % 4];
                    let c = if label.is_causal() { 1.0 } else { -1.0 };
                    let g = |rng: &mut ChaCha8Rng| {
                        // Sum of uniforms: roughly normal, sd about 0.5.
                        (0..3).map(|_| rng.random::<f64>()).sum::<f64>() - 1.5
                    };
                    let a = c * 1.0 + shift + 1.4 * g(&mut rng);
                    let b = c * 0.6 - shift + 1.4 * g(&mut rng);
                    let lag = if rng.random::<f64>() < 0.15 {
                        None
                    } else {
                        Some(c * 0.5 + 1.6 * g(&mut rng))
                    };
                    set.rows
                        .push(vec![Some(a), Some(b), lag, Some(2.0 * g(&mut rng))]);
                    set.labels.push(label);
                    set.families.push(format!("fam{f}"));
                    set.systems.push(format!("fam{f}-sys{s}"));
                }
            }
        }
        set
    }

    pub(crate) fn small_bundle(seed: u64) -> (ModelBundle, TrainingSet) {
        let set = synthetic(11, 3, 5);
        let cfg = FitConfig {
            seed,
            curve_only_names: vec!["skill_gain".into(), "convergence".into(), "noise".into()],
            ..FitConfig::default()
        };
        (fit(&set, &cfg).unwrap(), set)
    }

    #[test]
    fn synthetic_problem_gives_good_auc_and_calibration() {
        // Invented separable-ish data; the check is internal consistency, not an outside value.
        let train = synthetic(5, 4, 8);
        let test = synthetic(6, 4, 8);
        let cfg = FitConfig {
            curve_only_names: vec!["skill_gain".into()],
            ..FitConfig::default()
        };
        let m = fit(&train, &cfg).unwrap();
        let mut p = Vec::new();
        let mut y = Vec::new();
        for (row, l) in test.rows.iter().zip(&test.labels) {
            let pr = m.predict(&test.feature_names, row).unwrap();
            p.push(pr.p_causal);
            y.push(l.is_causal());
        }
        let auc = metrics::roc_auc(&p, &y).unwrap();
        let ece = metrics::expected_calibration_error(&p, &y, 10);
        assert!(auc > 0.9, "auc {auc}");
        assert!(ece < 0.1, "ece {ece}");
        let cv = m.card().heads[0].cv.as_ref().unwrap();
        assert!(cv.roc_auc.unwrap() > 0.9);
        assert_eq!(m.card().heads[0].per_fold.len(), 4);
    }

    #[test]
    fn rows_with_missing_lag_go_to_curve_only_head() {
        let (m, set) = small_bundle(3);
        let i = set.rows.iter().position(|r| r[2].is_none()).unwrap();
        let pr = m.predict(&set.feature_names, &set.rows[i]).unwrap();
        assert_eq!(pr.head, Head::CurveOnly);
        assert!(pr.fine.is_none());
        let j = set.rows.iter().position(|r| r[2].is_some()).unwrap();
        let pr = m.predict(&set.feature_names, &set.rows[j]).unwrap();
        assert_eq!(pr.head, Head::Full);
        let fine = pr.fine.unwrap();
        approx::assert_abs_diff_eq!(fine.iter().sum::<f64>(), 1.0, epsilon = 1e-9);
        // The dropped rows are counted in the card.
        let dropped = set.rows.iter().filter(|r| r[2].is_none()).count();
        assert_eq!(m.card().heads[0].rows_dropped_unavailable, dropped);
        assert_eq!(m.card().heads[1].rows_dropped_unavailable, 0);
    }

    #[test]
    fn no_silent_imputation() {
        let (m, set) = small_bundle(3);
        let names = &set.feature_names;
        let err = m
            .predict(names, &[None, Some(0.0), Some(0.0), Some(0.0)])
            .unwrap_err();
        assert!(
            matches!(err, ModelError::MissingFeatures { ref missing } if missing == &["skill_gain"])
        );
        // A subset of names in another order is fine when a head is complete.
        let sub: Vec<String> = ["noise", "skill_gain", "convergence"]
            .map(String::from)
            .to_vec();
        let pr = m.predict(&sub, &[Some(0.1), Some(2.0), Some(1.0)]).unwrap();
        assert_eq!(pr.head, Head::CurveOnly);
        let bad: Vec<String> = vec!["skill_gain".into(), "mystery".into()];
        assert!(matches!(
            m.predict(&bad, &[Some(1.0), Some(1.0)]),
            Err(ModelError::UnknownFeature { .. })
        ));
        assert!(matches!(
            m.predict(names, &[Some(f64::NAN), Some(0.0), Some(0.0), Some(0.0)]),
            Err(ModelError::NonFinite { .. })
        ));
    }

    #[test]
    fn far_rows_are_unfamiliar_and_reviewed() {
        let (m, set) = small_bundle(3);
        let pr = m
            .predict(
                &set.feature_names,
                &[Some(40.0), Some(-40.0), Some(0.0), Some(30.0)],
            )
            .unwrap();
        assert!(pr.ood);
        let (v, r) = decide(&pr, &QualityFlags::default(), &m.default_policy());
        assert_eq!(v, Verdict::Review);
        assert!(r.contains(&crate::Reason::Unfamiliar));
    }

    #[test]
    fn one_family_few_systems_uses_system_folds_and_cross_fit() {
        // Three systems leave no room for a held-out calibration split.
        let set = synthetic(9, 1, 3);
        let m = fit(&set, &FitConfig::default()).unwrap();
        let h = &m.card().heads[0];
        assert!(h.validation.starts_with("grouped"), "{}", h.validation);
        assert!(
            h.calibration_data.starts_with("cross-fitted"),
            "{}",
            h.calibration_data
        );
        assert!(m.curve_only.is_none());
        let p = m.predict(&set.feature_names, &set.rows[1]).unwrap();
        assert!(p.p_causal > 0.0 && p.p_causal < 1.0);
    }

    #[test]
    fn bad_inputs_are_typed_errors() {
        let mut set = synthetic(1, 2, 3);
        let cfg = FitConfig::default();
        set.systems.pop();
        assert!(matches!(
            fit(&set, &cfg),
            Err(ModelError::LengthMismatch {
                what: "systems",
                ..
            })
        ));
        let set = synthetic(1, 2, 3);
        let cfg2 = FitConfig {
            curve_only_names: vec!["nope".into()],
            ..FitConfig::default()
        };
        assert!(matches!(
            fit(&set, &cfg2),
            Err(ModelError::UnknownCurveOnlyFeature { .. })
        ));
        let cfg3 = FitConfig {
            calibration_fraction: 1.5,
            ..FitConfig::default()
        };
        assert!(matches!(
            fit(&set, &cfg3),
            Err(ModelError::InvalidConfig {
                option: "calibration_fraction",
                ..
            })
        ));
        assert!(matches!(
            fit(&TrainingSet::default(), &cfg),
            Err(ModelError::EmptyTrainingSet)
        ));
    }
}
