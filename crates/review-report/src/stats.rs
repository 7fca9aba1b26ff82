//! Quantile summaries of skill ensembles for the plots.

/// Quantile `q` in [0, 1] of the finite values in `xs`, by linear interpolation
/// between order statistics (Hyndman & Fan 1996, definition 7; numpy's default).
/// `None` when no value is finite.
pub(crate) fn quantile(xs: &[f64], q: f64) -> Option<f64> {
    let mut v: Vec<f64> = xs.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    Some(quantile_sorted(&v, q))
}

fn quantile_sorted(v: &[f64], q: f64) -> f64 {
    let h = (v.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    v[lo] + (h - lo as f64) * (v[hi] - v[lo])
}

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
            let mut v: Vec<f64> = row.iter().copied().filter(|x| x.is_finite()).collect();
            if v.is_empty() {
                return None;
            }
            v.sort_by(f64::total_cmp);
            Some(Spread {
                lo: quantile_sorted(&v, band.0),
                mid: quantile_sorted(&v, 0.5),
                hi: quantile_sorted(&v, band.1),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn quantiles_match_numpy_linear_method() {
        // Values from numpy 2.1.3 `np.percentile(a, q)` (default method "linear").
        let a = [0.3, 0.1, 0.7, 0.2, 0.9];
        let expect = [
            (0.10, 0.14),
            (0.50, 0.3),
            (0.90, 0.82),
            (0.05, 0.12),
            (0.95, 0.86),
        ];
        for (q, want) in expect {
            assert_abs_diff_eq!(quantile(&a, q).unwrap(), want, epsilon = 1e-12);
        }
        let b = [1.0, 2.0, 3.0, 4.0];
        let expect = [
            (0.10, 1.3),
            (0.25, 1.75),
            (0.5, 2.5),
            (0.75, 3.25),
            (0.9, 3.7),
        ];
        for (q, want) in expect {
            assert_abs_diff_eq!(quantile(&b, q).unwrap(), want, epsilon = 1e-12);
        }
    }

    #[test]
    fn non_finite_values_are_skipped() {
        assert_eq!(quantile(&[f64::NAN, f64::INFINITY], 0.5), None);
        let s = spreads(&[vec![f64::NAN, 1.0, 3.0], vec![]], BAND);
        assert_abs_diff_eq!(s[0].unwrap().mid, 2.0, epsilon = 1e-12);
        assert!(s[1].is_none());
    }
}
