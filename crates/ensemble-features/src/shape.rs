//! Shape of one skill ensemble: plateau, slope, overshoot, spread and monotonicity.

use crate::Ensemble;
use crate::fit::{ExpFit, fit_exponential};
use crate::stats::{Summary, ols_slope};
use crate::trend::{kendall_tau_b, mann_kendall};

/// Floor added to standard deviations before ratios and logs: an ensemble at L equal to the
/// usable length repeats one library, so its SD is exactly zero.
pub(crate) const SD_FLOOR: f64 = 1e-3;

/// Shape summary of one ensemble; every field is `None` when the data do not define it.
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct CurveShape {
    pub final_mean: Option<f64>,
    pub final_median: Option<f64>,
    pub fit: Option<ExpFit>,
    pub gain: Option<f64>,
    pub slope_early: Option<f64>,
    pub slope_late: Option<f64>,
    pub overshoot: Option<f64>,
    pub overshoot_position: Option<f64>,
    pub sd_small: Option<f64>,
    pub sd_mid: Option<f64>,
    pub sd_large: Option<f64>,
    pub iqr_small: Option<f64>,
    pub iqr_mid: Option<f64>,
    pub iqr_large: Option<f64>,
    pub spread_log_ratio: Option<f64>,
    pub spread_decay_slope: Option<f64>,
    pub gain_over_spread: Option<f64>,
    pub mk_z: Option<f64>,
    pub kendall_tau: Option<f64>,
    pub rising_share: Option<f64>,
    pub nan_share: Option<f64>,
    pub log10_size_max: Option<f64>,
    pub log10_size_span: Option<f64>,
}

impl CurveShape {
    /// Fitted asymptote clamped to the range of a correlation.
    pub fn fit_asymptote(&self) -> Option<f64> {
        self.fit.map(|f| f.asymptote.clamp(-1.0, 1.0))
    }

    /// log10 of the fitted rate.
    pub fn fit_log10_rate(&self) -> Option<f64> {
        self.fit.map(|f| f.rate.log10())
    }
}

/// Summarises the shape of `ensemble`. Library sizes whose replicates are all undefined are
/// dropped, so "smallest" and "largest" L mean the extreme sizes with at least one defined
/// skill. The ensemble is not validated here; [`Ensemble::validate`] is the strict gate.
pub(crate) fn curve_shape(ensemble: &Ensemble) -> CurveShape {
    let mut out = CurveShape::default();
    let total: usize = ensemble.skills.iter().map(Vec::len).sum();
    if total > 0 {
        let undefined = ensemble
            .skills
            .iter()
            .flatten()
            .filter(|v| !v.is_finite())
            .count();
        out.nan_share = Some(undefined as f64 / total as f64);
    }

    // Usable sizes: positive, paired with a row, at least one defined skill. Each entry holds
    // (L, raw replicate skills, their summary, their mean).
    let rows: Vec<(f64, &Vec<f64>, Summary, f64)> = ensemble
        .library_sizes
        .iter()
        .zip(&ensemble.skills)
        .filter(|(l, _)| **l > 0)
        .filter_map(|(l, row)| {
            let summary = Summary::new(row);
            summary.mean().map(|m| (*l as f64, row, summary, m))
        })
        .collect();
    if rows.len() < 2 {
        return out;
    }
    let n = rows.len();
    let sizes: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let means: Vec<f64> = rows.iter().map(|r| r.3).collect();
    let log10_l: Vec<f64> = sizes.iter().map(|l| l.log10()).collect();
    let (first, last) = (rows[0].1, rows[n - 1].1);
    let (s_first, s_last) = (&rows[0].2, &rows[n - 1].2);

    out.log10_size_max = Some(log10_l[n - 1]);
    let span = log10_l[n - 1] - log10_l[0];
    if span <= 0.0 {
        return out;
    }
    out.log10_size_span = Some(span);

    // Plateau.
    out.final_mean = Some(means[n - 1]);
    out.final_median = s_last.median();
    let x: Vec<f64> = sizes.iter().map(|l| l / sizes[n - 1]).collect();
    out.fit = fit_exponential(&x, &means);

    // Slope.
    let gain = means[n - 1] - means[0];
    out.gain = Some(gain);
    let k = n.div_ceil(3).max(2);
    out.slope_early = ols_slope(&log10_l[..k], &means[..k]);
    out.slope_late = ols_slope(&log10_l[n - k..], &means[n - k..]);

    // Overshoot: the first maximum, so a flat top reports where it was first reached.
    let (imax, vmax) =
        means.iter().enumerate().fold(
            (0, f64::NEG_INFINITY),
            |acc, (i, &m)| if m > acc.1 { (i, m) } else { acc },
        );
    out.overshoot = Some(vmax - means[n - 1]);
    out.overshoot_position = Some((log10_l[imax] - log10_l[0]) / span);

    // Spread at the smallest, log-middle and largest sizes.
    let mid_target = 0.5 * (log10_l[0] + log10_l[n - 1]);
    let imid = (0..n)
        .min_by(|&a, &b| {
            (log10_l[a] - mid_target)
                .abs()
                .total_cmp(&(log10_l[b] - mid_target).abs())
        })
        .unwrap_or(0);
    let s_mid = &rows[imid].2;
    out.sd_small = s_first.sd();
    out.sd_mid = s_mid.sd();
    out.sd_large = s_last.sd();
    out.iqr_small = s_first.iqr();
    out.iqr_mid = s_mid.iqr();
    out.iqr_large = s_last.iqr();
    if let (Some(s0), Some(s1)) = (out.sd_small, out.sd_large) {
        out.spread_log_ratio = Some(((s1 + SD_FLOOR) / (s0 + SD_FLOOR)).ln());
    }
    let (ln_l, ln_sd): (Vec<f64>, Vec<f64>) = rows
        .iter()
        .filter_map(|(l, _, summary, _)| summary.sd().map(|s| (l.ln(), (s + SD_FLOOR).ln())))
        .unzip();
    out.spread_decay_slope = ols_slope(&ln_l, &ln_sd);
    out.gain_over_spread = out.sd_small.map(|s0| (gain / (s0 + SD_FLOOR)).asinh());

    // Monotonicity.
    out.mk_z = mann_kendall(&means).map(|m| m.z);
    out.kendall_tau = kendall_tau_b(&sizes, &means).map(|k| k.tau);
    let (mut rising, mut pairs) = (0usize, 0usize);
    for (a, b) in first.iter().zip(last) {
        if a.is_finite() && b.is_finite() {
            pairs += 1;
            rising += usize::from(b > a);
        }
    }
    out.rising_share = (pairs > 0).then(|| rising as f64 / pairs as f64);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn two_sizes_give_plateau_slope_and_spread() {
        let e = Ensemble {
            library_sizes: vec![10, 100],
            skills: vec![vec![0.1, 0.3, f64::NAN], vec![0.5, 0.7, 0.6]],
        };
        let s = curve_shape(&e);
        assert_relative_eq!(s.final_mean.unwrap(), 0.6, epsilon = 1e-12);
        assert_relative_eq!(s.gain.unwrap(), 0.4, epsilon = 1e-12);
        assert_relative_eq!(s.slope_early.unwrap(), 0.4, epsilon = 1e-12);
        assert_relative_eq!(s.nan_share.unwrap(), 1.0 / 6.0, epsilon = 1e-12);
        assert_relative_eq!(s.rising_share.unwrap(), 1.0);
        assert!(s.fit.is_none(), "three parameters need four sizes");
        assert_relative_eq!(s.overshoot.unwrap(), 0.0);
        assert_relative_eq!(s.overshoot_position.unwrap(), 1.0);
    }

    #[test]
    fn sizes_without_defined_skill_are_dropped() {
        let e = Ensemble {
            library_sizes: vec![10, 20, 40],
            skills: vec![vec![0.2, 0.2], vec![0.4, 0.5], vec![f64::NAN, f64::NAN]],
        };
        let s = curve_shape(&e);
        assert_relative_eq!(s.final_mean.unwrap(), 0.45, epsilon = 1e-12);
        assert_relative_eq!(s.log10_size_max.unwrap(), 20f64.log10(), epsilon = 1e-12);
        assert_relative_eq!(s.nan_share.unwrap(), 2.0 / 6.0, epsilon = 1e-12);
    }

    #[test]
    fn a_single_usable_size_defines_no_curve() {
        let e = Ensemble {
            library_sizes: vec![10, 20],
            skills: vec![vec![f64::NAN], vec![0.5]],
        };
        let s = curve_shape(&e);
        assert!(s.final_mean.is_none() && s.gain.is_none());
        assert_relative_eq!(s.nan_share.unwrap(), 0.5);
    }
}
