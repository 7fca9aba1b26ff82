//! Quantile summaries of skill ensembles for the plots.

pub(crate) use sample_stats::quantile;
use sample_stats::{quantile_sorted, sorted_finite};

/// Lower band edge, median and upper band edge of one ensemble row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Spread {
    pub lo: f64,
    pub mid: f64,
    pub hi: f64,
}

/// The band shown around the median: the central 80% of replicates.
pub(crate) const BAND: (f64, f64) = (0.10, 0.90);

/// Spread of each row at the band quantiles; rows with no finite value give `None`.
pub(crate) fn spreads(rows: &[Vec<f64>], band: (f64, f64)) -> Vec<Option<Spread>> {
    rows.iter()
        .map(|row| {
            let v = sorted_finite(row);
            Some(Spread {
                lo: quantile_sorted(&v, band.0)?,
                mid: quantile_sorted(&v, 0.5)?,
                hi: quantile_sorted(&v, band.1)?,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn non_finite_values_are_skipped() {
        assert_eq!(quantile(&[f64::NAN, f64::INFINITY], 0.5), None);
        let s = spreads(&[vec![f64::NAN, 1.0, 3.0], vec![]], BAND);
        assert_abs_diff_eq!(s[0].unwrap().mid, 2.0, epsilon = 1e-12);
        assert!(s[1].is_none());
    }
}
