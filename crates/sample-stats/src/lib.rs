//! Order statistics of samples: the finite values of a sample, sorted, and quantiles by
//! linear interpolation between order statistics (position (n - 1) q, the default rule of
//! numpy's `percentile` and `quantile`, Hyndman & Fan 1996 definition 7).
//!
//! One home for what the features, the classifier's familiarity threshold and the report's
//! bands all compute, so that they agree to the last bit.
//!
//! ```
//! use sample_stats::{quantile, quantile_sorted, sorted_finite};
//!
//! let v = sorted_finite(&[4.0, f64::NAN, 1.0, 3.0, 2.0]);
//! assert_eq!(v, [1.0, 2.0, 3.0, 4.0]);
//! assert_eq!(quantile_sorted(&v, 0.25), Some(1.75));
//! assert_eq!(quantile(&[f64::NAN], 0.5), None);
//! ```
#![deny(missing_docs)]

/// The finite values of `values`, in their order.
pub fn finite(values: &[f64]) -> Vec<f64> {
    values.iter().copied().filter(|v| v.is_finite()).collect()
}

/// The finite values of `values`, sorted ascending.
pub fn sorted_finite(values: &[f64]) -> Vec<f64> {
    let mut v = finite(values);
    // Elements equal under total_cmp are bitwise equal, so an unstable sort loses nothing.
    v.sort_unstable_by(f64::total_cmp);
    v
}

/// Quantile `q` (clamped to [0, 1]) of ascending `sorted` values by linear interpolation
/// between order statistics; `None` when empty.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let h = (sorted.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
}

/// Quantile `q` of the finite values of `values` (any order); `None` when there are none.
pub fn quantile(values: &[f64], q: f64) -> Option<f64> {
    quantile_sorted(&sorted_finite(values), q)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn quantiles_match_numpy_linear_method() {
        // Values from numpy 2.1.3 `np.percentile(a, q)` (default method "linear").
        let a = [0.3, 0.1, 0.7, 0.2, 0.9];
        for (q, want) in [
            (0.10, 0.14),
            (0.50, 0.3),
            (0.90, 0.82),
            (0.05, 0.12),
            (0.95, 0.86),
        ] {
            assert_abs_diff_eq!(quantile(&a, q).unwrap(), want, epsilon = 1e-12);
        }
        let b = [1.0, 2.0, 3.0, 4.0];
        for (q, want) in [
            (0.10, 1.3),
            (0.25, 1.75),
            (0.5, 2.5),
            (0.75, 3.25),
            (0.9, 3.7),
        ] {
            assert_abs_diff_eq!(quantile_sorted(&b, q).unwrap(), want, epsilon = 1e-12);
        }
    }

    #[test]
    fn out_of_range_q_is_clamped_and_non_finite_values_skipped() {
        assert_eq!(quantile(&[2.0, 1.0], -1.0), Some(1.0));
        assert_eq!(quantile(&[2.0, 1.0], 7.0), Some(2.0));
        assert_eq!(quantile(&[f64::NAN, f64::INFINITY], 0.5), None);
        assert_eq!(quantile(&[3.0], 0.3), Some(3.0));
    }
}
