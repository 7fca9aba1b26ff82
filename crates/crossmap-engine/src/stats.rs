//! Pearson correlation, the cross-map skill measure.

/// Pearson product-moment correlation of `a` and `b` over the index pairs where both are finite.
///
/// Two-pass (means first) so that large offsets do not cancel digits. Returns NaN when fewer than
/// two pairs remain or either side has zero variance.
///
/// # Panics
/// When `a` and `b` differ in length.
pub fn pearson(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len(), "pearson: slices differ in length");
    let mut n = 0usize;
    let (mut sa, mut sb) = (0.0, 0.0);
    for (&x, &y) in a.iter().zip(b) {
        if x.is_finite() && y.is_finite() {
            n += 1;
            sa += x;
            sb += y;
        }
    }
    let finite = a
        .iter()
        .zip(b)
        .filter(|(x, y)| x.is_finite() && y.is_finite());
    second_pass(n, sa, sb, finite)
}

/// Pearson's second pass: `n` pairs with sums `sa` and `sb`, then the centred products over
/// `pairs` (the same `n` pairs, in order). NaN when `n < 2` or either side has zero variance.
fn second_pass<'a>(
    n: usize,
    sa: f64,
    sb: f64,
    pairs: impl Iterator<Item = (&'a f64, &'a f64)>,
) -> f64 {
    if n < 2 {
        return f64::NAN;
    }
    let (ma, mb) = (sa / n as f64, sb / n as f64);
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for (&x, &y) in pairs {
        let (dx, dy) = (x - ma, y - mb);
        sxx += dx * dx;
        syy += dy * dy;
        sxy += dx * dy;
    }
    if sxx <= 0.0 || syy <= 0.0 {
        return f64::NAN;
    }
    (sxy / (sxx.sqrt() * syy.sqrt())).clamp(-1.0, 1.0)
}

/// Aligned (estimate, observation) pairs with running sums, so that [`FinitePairs::r`] skips
/// [`pearson`]'s first pass: while every pair is finite the sums are the same additions in the
/// same order, so the result is bit-identical; otherwise it falls back to [`pearson`].
#[derive(Debug, Default, Clone)]
pub(crate) struct FinitePairs {
    pub(crate) a: Vec<f64>,
    pub(crate) b: Vec<f64>,
    sa: f64,
    sb: f64,
    non_finite: bool,
}

impl FinitePairs {
    pub(crate) fn clear(&mut self) {
        self.a.clear();
        self.b.clear();
        self.sa = 0.0;
        self.sb = 0.0;
        self.non_finite = false;
    }

    #[inline]
    pub(crate) fn push(&mut self, x: f64, y: f64) {
        self.a.push(x);
        self.b.push(y);
        self.sa += x;
        self.sb += y;
        self.non_finite |= !(x.is_finite() && y.is_finite());
    }

    pub(crate) fn len(&self) -> usize {
        self.a.len()
    }

    /// Pearson r of the pairs; equal to `pearson(&self.a, &self.b)`.
    pub(crate) fn r(&self) -> f64 {
        if self.non_finite {
            return pearson(&self.a, &self.b);
        }
        second_pass(self.a.len(), self.sa, self.sb, self.a.iter().zip(&self.b))
    }
}

/// Mean of the finite values (NaN when there are none).
pub(crate) fn finite_mean(v: &[f64]) -> f64 {
    let (s, n) = v
        .iter()
        .filter(|x| x.is_finite())
        .fold((0.0, 0usize), |(s, n), &x| (s + x, n + 1));
    if n == 0 { f64::NAN } else { s / n as f64 }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    /// Anscombe (1973), "Graphs in statistical analysis": all four sets have r = 0.816 as printed
    /// (rounded; the exact values lie between 0.8162 and 0.8166, hence the 6e-4 tolerance).
    #[test]
    fn anscombe_quartet_r_is_0_816() {
        let x123 = [10.0, 8.0, 13.0, 9.0, 11.0, 14.0, 6.0, 4.0, 12.0, 7.0, 5.0];
        let x4 = [8.0, 8.0, 8.0, 8.0, 8.0, 8.0, 8.0, 19.0, 8.0, 8.0, 8.0];
        let y1 = [
            8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68,
        ];
        let y2 = [
            9.14, 8.14, 8.74, 8.77, 9.26, 8.10, 6.13, 3.10, 9.13, 7.26, 4.74,
        ];
        let y3 = [
            7.46, 6.77, 12.74, 7.11, 7.81, 8.84, 6.08, 5.39, 8.15, 6.42, 5.73,
        ];
        let y4 = [
            6.58, 5.76, 7.71, 8.84, 8.47, 7.04, 5.25, 12.50, 5.56, 7.91, 6.89,
        ];
        for (x, y) in [(&x123, &y1), (&x123, &y2), (&x123, &y3), (&x4, &y4)] {
            assert_abs_diff_eq!(pearson(x, y), 0.816, epsilon = 6e-4);
        }
    }

    #[test]
    fn running_sums_give_pearson_bit_for_bit() {
        let mut rng = crate::seeds::keyed_rng(&[5]);
        for n in [0usize, 1, 2, 3, 17, 400] {
            let mut p = FinitePairs::default();
            for _ in 0..n {
                let x = crate::seeds::unit(&mut rng) * 1e3 + 7.0;
                p.push(x, 0.3 * x + crate::seeds::unit(&mut rng));
            }
            let (r, want) = (p.r(), pearson(&p.a, &p.b));
            assert!(r.to_bits() == want.to_bits() || (r.is_nan() && want.is_nan()));
            p.push(f64::INFINITY, 1.0);
            let (r, want) = (p.r(), pearson(&p.a, &p.b));
            assert!(r.to_bits() == want.to_bits() || (r.is_nan() && want.is_nan()));
        }
    }

    #[test]
    fn skips_non_finite_pairs_and_flags_degenerate_input() {
        let r = pearson(&[1.0, 2.0, f64::NAN, 3.0], &[2.0, 4.0, 1.0, 6.0]);
        assert_abs_diff_eq!(r, 1.0, epsilon = 1e-12);
        assert!(pearson(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]).is_nan());
        assert!(pearson(&[1.0], &[1.0]).is_nan());
    }
}
