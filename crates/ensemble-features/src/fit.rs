//! Least-squares fit of the exponential convergence form rho(x) = rho_inf - a exp(-g x).
//!
//! The form is the one used to summarise convergence of cross-map skill with library size
//! (Mønster et al. 2017). The caller passes x = L / L_max, so the rate g is dimensionless and
//! comparable between series of different lengths: g = 5 means the gap to the asymptote shrinks
//! by e^-5 over the whole size range.

/// Smallest rate searched; below it the curve is indistinguishable from a straight line and the
/// asymptote would be an extrapolation far outside the data.
pub const RATE_MIN: f64 = 0.1;
/// Largest rate searched; above it the curve has converged before x = 0.01.
pub const RATE_MAX: f64 = 1000.0;
/// Grid points per decade of g.
const GRID_PER_DECADE: usize = 30;

/// A fitted convergence curve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ExpFit {
    /// Asymptote rho_inf (unclamped; a skill asymptote outside [-1, 1] signals extrapolation).
    pub asymptote: f64,
    /// Amplitude a: positive when the curve rises towards the asymptote.
    pub amplitude: f64,
    /// Rate g on the normalised size axis, within [`RATE_MIN`, `RATE_MAX`].
    pub rate: f64,
    /// Coefficient of determination; `None` when the data are constant.
    pub r_squared: Option<f64>,
    /// Root mean squared residual.
    pub rmse: f64,
}

/// For a fixed rate the model is linear in (rho_inf, a): the closed-form least-squares solution
/// and its residual sum of squares, from centred sums for numerical stability.
/// `e` is scratch space of the same length as `x`, reused across the search.
fn solve_at(rate: f64, x: &[f64], y: &[f64], e: &mut [f64]) -> (f64, f64, f64) {
    let n = x.len() as f64;
    for (ei, xi) in e.iter_mut().zip(x) {
        *ei = (-rate * xi).exp();
    }
    let me = e.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let mut see = 0.0;
    let mut sey = 0.0;
    let mut syy = 0.0;
    for (ei, yi) in e.iter().zip(y) {
        see += (ei - me) * (ei - me);
        sey += (ei - me) * (yi - my);
        syy += (yi - my) * (yi - my);
    }
    // A basis column that is constant to rounding carries no shape; fit the mean alone.
    let slope = if see > 1e-300 && see > 1e-24 * n {
        sey / see
    } else {
        0.0
    };
    let asymptote = my - slope * me;
    let sse = (syy - slope * sey).max(0.0);
    (asymptote, -slope, sse)
}

/// Fits rho(x) = rho_inf - a exp(-g x) by variable projection (Golub & Pereyra 1973): the
/// residual is profiled over the linear pair (rho_inf, a) in closed form, minimised over a
/// log-spaced grid of g, then refined by golden-section search on log g around the best grid
/// point. Pairs with a non-finite member are dropped; `None` below four points (three
/// parameters need at least one residual degree of freedom) or fewer than three distinct x.
pub fn fit_exponential(x: &[f64], y: &[f64]) -> Option<ExpFit> {
    let (xs, ys): (Vec<f64>, Vec<f64>) = x
        .iter()
        .zip(y)
        .filter(|(a, b)| a.is_finite() && b.is_finite())
        .map(|(a, b)| (*a, *b))
        .unzip();
    if xs.len() < 4 {
        return None;
    }
    let mut distinct = xs.clone();
    distinct.sort_by(f64::total_cmp);
    distinct.dedup();
    if distinct.len() < 3 {
        return None;
    }

    let lo = RATE_MIN.ln();
    let hi = RATE_MAX.ln();
    let steps = GRID_PER_DECADE * (RATE_MAX / RATE_MIN).log10().round() as usize;
    let grid: Vec<f64> = (0..=steps)
        .map(|k| lo + (hi - lo) * k as f64 / steps as f64)
        .collect();
    let mut scratch = vec![0.0; xs.len()];
    let mut sse_at = |log_rate: f64| solve_at(log_rate.exp(), &xs, &ys, &mut scratch).2;
    let (mut best_k, mut best_sse) = (0, f64::INFINITY);
    for (k, &lr) in grid.iter().enumerate() {
        let s = sse_at(lr);
        if s < best_sse {
            best_k = k;
            best_sse = s;
        }
    }

    // Golden-section refinement inside the bracket of the two grid neighbours.
    let mut a = grid[best_k.saturating_sub(1)];
    let mut b = grid[(best_k + 1).min(steps)];
    let phi = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - phi * (b - a);
    let mut d = a + phi * (b - a);
    let (mut fc, mut fd) = (sse_at(c), sse_at(d));
    for _ in 0..60 {
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - phi * (b - a);
            fc = sse_at(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + phi * (b - a);
            fd = sse_at(d);
        }
    }
    let mut log_rate = grid[best_k];
    let refined = 0.5 * (a + b);
    if sse_at(refined) < best_sse {
        log_rate = refined;
    }

    let rate = log_rate.exp();
    let (asymptote, amplitude, sse) = solve_at(rate, &xs, &ys, &mut vec![0.0; xs.len()]);
    let n = xs.len() as f64;
    let my = ys.iter().sum::<f64>() / n;
    let sst: f64 = ys.iter().map(|v| (v - my) * (v - my)).sum();
    let r_squared = (sst > 1e-14).then(|| (1.0 - sse / sst).clamp(0.0, 1.0));
    Some(ExpFit {
        asymptote,
        amplitude,
        rate,
        r_squared,
        rmse: (sse / n).sqrt(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Normalised library sizes log-spaced from 10 to 1000, as an engine would draw them.
    fn sizes() -> Vec<f64> {
        (0..12)
            .map(|k| 10f64.powf(1.0 + 2.0 * k as f64 / 11.0) / 1000.0)
            .collect()
    }

    /// splitmix64 (Steele et al. 2014) feeding Box–Muller: a seeded normal stream for tests.
    fn normals(seed: u64, n: usize) -> Vec<f64> {
        let mut state = seed;
        let mut next = move || {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
        };
        (0..n)
            .map(|_| {
                let u1 = next().max(1e-300);
                let u2 = next();
                (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
            })
            .collect()
    }

    #[test]
    fn recovers_known_parameters_exactly() {
        // Synthetic curve of the convergence form (Mønster et al. 2017) with known parameters.
        let x = sizes();
        let y: Vec<f64> = x.iter().map(|v| 0.75 - 0.7 * (-4.0 * v).exp()).collect();
        let fit = fit_exponential(&x, &y).unwrap();
        assert_relative_eq!(fit.asymptote, 0.75, epsilon = 1e-6);
        assert_relative_eq!(fit.amplitude, 0.7, epsilon = 1e-5);
        assert_relative_eq!(fit.rate, 4.0, max_relative = 1e-5);
        assert!(fit.r_squared.unwrap() > 1.0 - 1e-10);
        assert!(fit.rmse < 1e-7);
    }

    #[test]
    fn recovers_known_parameters_under_small_noise() {
        let x = sizes();
        let noise = normals(7, x.len());
        let y: Vec<f64> = x
            .iter()
            .zip(&noise)
            .map(|(v, e)| 0.6 - 0.5 * (-12.0 * v).exp() + 0.005 * e)
            .collect();
        let fit = fit_exponential(&x, &y).unwrap();
        assert_relative_eq!(fit.asymptote, 0.6, epsilon = 0.01);
        assert_relative_eq!(fit.rate, 12.0, max_relative = 0.25);
        assert!(fit.r_squared.unwrap() > 0.98);
        assert!(fit.rmse < 0.01);
    }

    #[test]
    fn constant_curve_has_no_r_squared() {
        let x = sizes();
        let y = vec![0.3; x.len()];
        let fit = fit_exponential(&x, &y).unwrap();
        assert_relative_eq!(fit.asymptote, 0.3, epsilon = 1e-12);
        assert!(fit.r_squared.is_none());
        assert!(fit_exponential(&x[..3], &y[..3]).is_none());
    }
}
