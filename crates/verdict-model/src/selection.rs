//! Cross-validated model selection per head, and the entry points that assemble the bundle.
//!
//! For each head (full, curve-only) the rows complete in that head's columns are used; rows
//! with an unavailable value are dropped for that head and counted in the card. Each
//! candidate model is run through the *whole* procedure (standardise, fit, calibrate) once
//! per held-out family, and the candidate with the lowest pooled out-of-family log-loss is
//! refitted on every row. Rows of one system never straddle a fit/calibration or train/test
//! boundary.

use crate::bundle::{FineHead, ModelBundle};
use crate::calibration_fit::{CalibrationRecord, fit_pipeline};
use crate::card::{
    CandidateScore, CountRow, FoldScore, HeadCard, ModelCard, SuiteIdentity, TargetCheck,
};
use crate::fit_config::{FitConfig, validate};
use crate::folds::{both_classes, complement, mix, system_folds, take, unique_sorted};
use crate::heads::{FittedHead, HeadModel};
use crate::logistic::MultinomialModel;
use crate::metrics::{self, Summary};
use crate::verdict::VerdictPolicy;
use crate::{FineLabel, Head, ModelError, TrainingSet};

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
    let total = cfg.fit_steps();
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
mod tests {
    use super::*;
    use crate::tests_support::{small_bundle, synthetic};
    use crate::{QualityFlags, Verdict, decide};
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
}
