//! Rank trend statistics: the Mann–Kendall test and Kendall's tau-b with its p-value.

use crate::stats::normal_sf;

/// Result of the Mann–Kendall trend test on a series in time order.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MannKendall {
    /// Number of points used (finite values only).
    pub n: usize,
    /// Kendall's S: concordant minus discordant pairs of (time, value).
    pub s: i64,
    /// Variance of S under no trend, corrected for tied values.
    pub variance: f64,
    /// Standardised statistic with the continuity correction (S - sign(S)) / sqrt(variance).
    pub z: f64,
    /// Two-sided p-value from the normal approximation.
    pub p_value: f64,
}

/// Sizes of the groups of exactly equal values (groups of one included).
fn tie_groups(values: &[f64]) -> Vec<u64> {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let mut groups = Vec::new();
    let mut i = 0;
    while i < v.len() {
        let mut j = i + 1;
        while j < v.len() && v[j] == v[i] {
            j += 1;
        }
        groups.push((j - i) as u64);
        i = j;
    }
    groups
}

/// Mann–Kendall trend test (Mann 1945; Kendall 1975) as laid out by Gilbert (1987, ch. 16):
/// S over all pairs in time order, the variance
/// [n(n-1)(2n+5) - sum t(t-1)(2t+5)] / 18 over tie groups of size t, and Z with a continuity
/// correction of one. Non-finite values are skipped (the order of the rest is kept);
/// `None` below two points.
pub fn mann_kendall(series: &[f64]) -> Option<MannKendall> {
    let v: Vec<f64> = series.iter().copied().filter(|x| x.is_finite()).collect();
    let n = v.len();
    if n < 2 {
        return None;
    }
    let mut s: i64 = 0;
    for i in 0..n {
        for j in (i + 1)..n {
            s += match v[j].partial_cmp(&v[i]) {
                Some(std::cmp::Ordering::Greater) => 1,
                Some(std::cmp::Ordering::Less) => -1,
                _ => 0,
            };
        }
    }
    let nf = n as f64;
    let ties: f64 = tie_groups(&v)
        .into_iter()
        .map(|t| {
            let t = t as f64;
            t * (t - 1.0) * (2.0 * t + 5.0)
        })
        .sum();
    let variance = (nf * (nf - 1.0) * (2.0 * nf + 5.0) - ties) / 18.0;
    let z = if variance <= 0.0 || s == 0 {
        0.0
    } else if s > 0 {
        (s - 1) as f64 / variance.sqrt()
    } else {
        (s + 1) as f64 / variance.sqrt()
    };
    let p_value = (2.0 * normal_sf(z.abs())).min(1.0);
    Some(MannKendall {
        n,
        s,
        variance,
        z,
        p_value,
    })
}

/// Kendall's tau-b between two samples with its two-sided p-value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KendallTau {
    /// Tau-b in [-1, 1].
    pub tau: f64,
    /// Two-sided p-value for no association.
    pub p_value: f64,
}

/// Sums over tie groups: pairs tied, sum t(t-1)(t-2), sum t(t-1)(2t+5).
fn tie_sums(values: &[f64]) -> (u64, f64, f64) {
    let mut pairs = 0u64;
    let mut v0 = 0.0;
    let mut v1 = 0.0;
    for t in tie_groups(values) {
        pairs += t * (t - 1) / 2;
        let t = t as f64;
        v0 += t * (t - 1.0) * (t - 2.0);
        v1 += t * (t - 1.0) * (2.0 * t + 5.0);
    }
    (pairs, v0, v1)
}

/// Two-sided exact p-value for `c = min(concordant, discordant)` among `n` untied points:
/// twice the chance that a random permutation has at most `c` inversions, capped at one
/// (Kendall 1970, Rank Correlation Methods, the inversion-count recurrence).
fn kendall_exact_p(n: usize, c: u64) -> f64 {
    let c = c as usize;
    // Probabilities of k inversions among j elements, k <= c, built one element at a time;
    // dividing by j at each step keeps the numbers probabilities and avoids n! overflow.
    let mut p = vec![0.0; c + 1];
    p[0] = 1.0;
    for j in 2..=n {
        let mut next = vec![0.0; c + 1];
        let mut window = 0.0;
        for k in 0..=c {
            window += p[k];
            if k >= j {
                window -= p[k - j];
            }
            next[k] = window / j as f64;
        }
        p = next;
    }
    (2.0 * p.iter().sum::<f64>()).clamp(0.0, 1.0)
}

/// Kendall's tau-b with the two-sided p-value chosen as scipy 1.14's `kendalltau` does by
/// default: the exact permutation distribution when neither sample has ties and n <= 33 (or
/// the smaller of concordant/discordant counts is at most one), otherwise the normal
/// approximation with the tie-corrected variance. Pairs where either value is non-finite are
/// dropped; `None` below two pairs or when either sample is constant.
pub fn kendall_tau_b(x: &[f64], y: &[f64]) -> Option<KendallTau> {
    let (xs, ys): (Vec<f64>, Vec<f64>) = x
        .iter()
        .zip(y)
        .filter(|(a, b)| a.is_finite() && b.is_finite())
        .map(|(a, b)| (*a, *b))
        .unzip();
    let n = xs.len();
    if n < 2 {
        return None;
    }
    let mut con_minus_dis: i64 = 0;
    let mut dis: u64 = 0;
    for i in 0..n {
        for j in (i + 1)..n {
            let dx = (xs[j] - xs[i]).signum() * f64::from(xs[j] != xs[i]);
            let dy = (ys[j] - ys[i]).signum() * f64::from(ys[j] != ys[i]);
            let prod = dx * dy;
            if prod > 0.0 {
                con_minus_dis += 1;
            } else if prod < 0.0 {
                con_minus_dis -= 1;
                dis += 1;
            }
        }
    }
    let tot = (n * (n - 1) / 2) as u64;
    let (xtie, x0, x1) = tie_sums(&xs);
    let (ytie, y0, y1) = tie_sums(&ys);
    if xtie == tot || ytie == tot {
        return None;
    }
    let tau = (con_minus_dis as f64 / ((tot - xtie) as f64).sqrt() / ((tot - ytie) as f64).sqrt())
        .clamp(-1.0, 1.0);
    let p_value = if xtie == 0 && ytie == 0 && (n <= 33 || dis.min(tot - dis) <= 1) {
        kendall_exact_p(n, dis.min(tot - dis))
    } else {
        let nf = n as f64;
        let m = nf * (nf - 1.0);
        let third = if n > 2 {
            x0 * y0 / (9.0 * m * (nf - 2.0))
        } else {
            0.0
        };
        let var =
            (m * (2.0 * nf + 5.0) - x1 - y1) / 18.0 + 2.0 * xtie as f64 * ytie as f64 / m + third;
        let z = con_minus_dis as f64 / var.sqrt();
        (2.0 * normal_sf(z.abs())).min(1.0)
    };
    Some(KendallTau { tau, p_value })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Gilbert (1987), Statistical Methods for Environmental Pollution Monitoring,
    /// pp. 209–213, worked example of the Mann–Kendall test: S = 54, VAR(S) = 332.67
    /// (one tie of two at 12.9), Z = 2.906.
    #[test]
    fn mann_kendall_matches_gilbert_1987_worked_example() {
        let series = [
            12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3, 15.9, 19.0, 18.3, 20.1, 21.7,
        ];
        let mk = mann_kendall(&series).unwrap();
        assert_eq!(mk.n, 14);
        assert_eq!(mk.s, 54);
        assert_relative_eq!(mk.variance, 332.67, epsilon = 0.005);
        assert_relative_eq!(mk.z, 2.906, epsilon = 0.0005);
    }

    #[test]
    fn mann_kendall_signs_and_flat_series() {
        let up = mann_kendall(&[1.0, 2.0, 3.0, 4.0]).unwrap();
        let down = mann_kendall(&[4.0, 3.0, 2.0, 1.0]).unwrap();
        assert_eq!(up.s, 6);
        assert_eq!(down.s, -6);
        assert_relative_eq!(up.z, -down.z);
        let flat = mann_kendall(&[2.0, 2.0, 2.0]).unwrap();
        assert_eq!(flat.s, 0);
        assert_eq!(flat.z, 0.0);
        assert!(mann_kendall(&[1.0]).is_none());
    }

    #[test]
    fn exact_distribution_sums_to_one() {
        // Every permutation has at most n(n-1)/2 inversions, so the capped two-sided value of
        // the full range is one; for n = 4, P(0 inversions) = 1/24 (Kendall 1970).
        assert_relative_eq!(kendall_exact_p(4, 6), 1.0);
        assert_relative_eq!(kendall_exact_p(4, 0), 2.0 / 24.0);
        // Inversions of 4 elements: counts 1, 3, 5, 6, 5, 3, 1 (Mahonian numbers).
        assert_relative_eq!(kendall_exact_p(4, 2), 2.0 * 9.0 / 24.0);
    }

    #[test]
    fn constant_sample_has_no_tau() {
        assert!(kendall_tau_b(&[1.0, 2.0, 3.0], &[5.0, 5.0, 5.0]).is_none());
    }
}
