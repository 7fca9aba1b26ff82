//! Summaries that ignore non-finite values, least-squares slopes and the normal tail.

// NaN marks a replicate whose skill was undefined; infinities cannot be skills either, so
// every statistic in this crate treats all non-finite values as missing.
pub(crate) use sample_stats::{finite, quantile_sorted, sorted_finite};

/// The finite values of one sample, sorted once so every summary reads the same slice.
///
/// Sums run in sorted order, so each summary is bit-identical under any reordering of the
/// replicates: a last-digit difference could otherwise tip the exponential fit between two
/// near-equal grid minima.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Summary {
    sorted: Vec<f64>,
}

impl Summary {
    /// Summarises the finite values of `values`.
    pub fn new(values: &[f64]) -> Self {
        Summary {
            sorted: sorted_finite(values),
        }
    }

    /// Arithmetic mean; `None` when there are no finite values.
    pub fn mean(&self) -> Option<f64> {
        if self.sorted.is_empty() {
            return None;
        }
        Some(self.sorted.iter().sum::<f64>() / self.sorted.len() as f64)
    }

    /// Sample standard deviation (divisor n - 1); `None` below two values.
    pub fn sd(&self) -> Option<f64> {
        let n = self.sorted.len();
        if n < 2 {
            return None;
        }
        let m = self.mean()?;
        let ss: f64 = self.sorted.iter().map(|x| (x - m) * (x - m)).sum();
        Some((ss / (n - 1) as f64).sqrt())
    }

    /// Median.
    pub fn median(&self) -> Option<f64> {
        quantile_sorted(&self.sorted, 0.5)
    }

    /// Interquartile range (75th minus 25th percentile).
    pub fn iqr(&self) -> Option<f64> {
        Some(quantile_sorted(&self.sorted, 0.75)? - quantile_sorted(&self.sorted, 0.25)?)
    }
}

/// Arithmetic mean of the finite values; `None` when there are none.
pub(crate) fn mean(values: &[f64]) -> Option<f64> {
    Summary::new(values).mean()
}

/// Sample standard deviation (divisor n - 1) of the finite values; `None` below two values.
pub(crate) fn sd(values: &[f64]) -> Option<f64> {
    Summary::new(values).sd()
}

/// Median of the finite values.
#[cfg(test)]
fn median(values: &[f64]) -> Option<f64> {
    Summary::new(values).median()
}

/// Interquartile range (75th minus 25th percentile) of the finite values.
#[cfg(test)]
fn iqr(values: &[f64]) -> Option<f64> {
    Summary::new(values).iqr()
}

/// Ordinary least-squares slope of `y` on `x`; `None` below two points or when `x` is constant.
pub(crate) fn ols_slope(x: &[f64], y: &[f64]) -> Option<f64> {
    if x.len() != y.len() || x.len() < 2 {
        return None;
    }
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    if sxx <= f64::EPSILON * n * mx.abs().max(1.0) {
        return None;
    }
    Some(sxy / sxx)
}

/// Complementary error function, Chebyshev fit with fractional error below 1.2e-7 everywhere
/// (Press et al. 1992, Numerical Recipes in C, 2nd ed., section 6.2, `erfcc`).
pub(crate) fn erfc(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -z * z - 1.265_512_23
        + t * (1.000_023_68
            + t * (0.374_091_96
                + t * (0.096_784_18
                    + t * (-0.186_288_06
                        + t * (0.278_868_07
                            + t * (-1.135_203_98
                                + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77))))))));
    let ans = t * poly.exp();
    if x >= 0.0 { ans } else { 2.0 - ans }
}

/// Upper tail probability of the standard normal distribution, P(Z > z).
pub(crate) fn normal_sf(z: f64) -> f64 {
    0.5 * erfc(z / std::f64::consts::SQRT_2)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn nan_values_are_ignored() {
        let v = [1.0, f64::NAN, 3.0, f64::INFINITY];
        assert_relative_eq!(mean(&v).unwrap(), 2.0);
        assert_relative_eq!(sd(&v).unwrap(), 2f64.sqrt());
        assert!(mean(&[f64::NAN]).is_none());
        assert!(sd(&[1.0, f64::NAN]).is_none());
    }

    #[test]
    fn quantiles_follow_linear_interpolation() {
        // numpy.percentile([1, 2, 3, 4], [25, 50, 75]) = [1.75, 2.5, 3.25] (numpy 2.1.3 default
        // "linear" method; from memory, and reproduced by the rule (n - 1) q).
        let v = [4.0, 1.0, 3.0, 2.0];
        assert_relative_eq!(median(&v).unwrap(), 2.5);
        assert_relative_eq!(iqr(&v).unwrap(), 1.5);
        assert_relative_eq!(quantile_sorted(&[1.0, 2.0, 3.0, 4.0], 0.25).unwrap(), 1.75);
    }

    #[test]
    fn normal_tail_matches_tables() {
        // Standard normal upper tail: P(Z > 1.96) = 0.0249979, P(Z > 0) = 0.5
        // (Abramowitz & Stegun 1964, table 26.1; from memory).
        assert_relative_eq!(normal_sf(0.0), 0.5, max_relative = 1e-6);
        assert_relative_eq!(normal_sf(1.96), 0.024_997_895, max_relative = 1e-6);
        assert_relative_eq!(normal_sf(-1.96), 1.0 - 0.024_997_895, max_relative = 1e-6);
    }

    #[test]
    fn slope_of_a_line() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let y = [1.0, 3.0, 5.0, 7.0];
        assert_relative_eq!(ols_slope(&x, &y).unwrap(), 2.0);
        assert!(ols_slope(&[1.0, 1.0], &[0.0, 1.0]).is_none());
    }
}
