//! Fits one head with its calibration on rows held out by whole systems.
//!
//! A held-out split by systems (or cross-fitting when systems are few), the Platt-or-isotonic
//! choice, and the out-of-distribution reference.

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;

use crate::calibrate::Calibrator;
use crate::fit_config::{Candidate, FitConfig};
use crate::folds::{both_classes, complement, mix, system_folds, take, unique_sorted};
use crate::heads::{HeadModel, Scorer};
use crate::metrics;
use crate::ood::OodModel;
use crate::standardise::Standardiser;
use crate::{Head, ModelError};

/// How a head's calibrator was chosen.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct CalibrationRecord {
    pub(crate) mode: String,
    pub(crate) platt_log_loss: Option<f64>,
    pub(crate) isotonic_log_loss: Option<f64>,
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
pub(crate) fn fit_pipeline(
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
