//! Equations of the single units and the fixed-step integrator they share.

/// Species growth rates of the four-species chaotic competition set of Vano et al. 2006
/// (from memory).
pub const VANO_GROWTH: [f64; 4] = [1.0, 0.72, 1.53, 1.27];

/// Competition matrix of the four-species chaotic set of Vano et al. 2006 (from memory);
/// entry `[i][j]` is the effect of species j on species i.
pub const VANO_COMPETITION: [[f64; 4]; 4] = [
    [1.0, 1.09, 1.52, 0.0],
    [0.0, 1.0, 0.44, 1.36],
    [2.33, 0.0, 1.0, 0.47],
    [1.21, 0.51, 0.35, 1.0],
];

/// Logistic map in the coupled form of Sugihara et al. 2012:
/// `x' = x (r - r x - input)`, where `input` is the summed `b * y` of the drivers.
pub fn logistic_step(x: f64, r: f64, input: f64) -> f64 {
    x * (r - r * x - input)
}

/// Ricker map with competitive input: `x' = x exp(r (1 - x - input))`.
pub fn ricker_step(x: f64, r: f64, input: f64) -> f64 {
    x * (r * (1.0 - x - input)).exp()
}

/// Hénon map (Hénon 1976) with the squared term taken at `u`, a mix of the unit's own x
/// and its drivers' x (`u = x` when uncoupled).
pub fn henon_step(x: f64, y: f64, u: f64, a: f64, b: f64) -> (f64, f64) {
    (1.0 - a * u * u + y, b * x)
}

/// Lorenz (1963) right-hand side with an additive input on the x equation.
pub fn lorenz_rhs(s: &[f64], sigma: f64, rho: f64, beta: f64, input_x: f64, out: &mut [f64]) {
    out[0] = sigma * (s[1] - s[0]) + input_x;
    out[1] = s[0] * (rho - s[2]) - s[1];
    out[2] = s[0] * s[1] - beta * s[2];
}

/// Rössler (1976) right-hand side with a frequency scale `omega` and an additive input on x.
pub fn rossler_rhs(s: &[f64], a: f64, b: f64, c: f64, omega: f64, input_x: f64, out: &mut [f64]) {
    out[0] = -omega * s[1] - s[2] + input_x;
    out[1] = omega * s[0] + a * s[1];
    out[2] = b + s[2] * (s[0] - c);
}

/// One classic fourth-order Runge–Kutta step of size `h` for `ds/dt = f(s)`.
///
/// `work` must hold at least `5 * s.len()` values; it avoids allocation in the hot loop.
pub fn rk4_step<F: FnMut(&[f64], &mut [f64])>(f: &mut F, s: &mut [f64], h: f64, work: &mut [f64]) {
    let n = s.len();
    let (k1, rest) = work.split_at_mut(n);
    let (k2, rest) = rest.split_at_mut(n);
    let (k3, rest) = rest.split_at_mut(n);
    let (k4, rest) = rest.split_at_mut(n);
    let tmp = &mut rest[..n];
    f(s, k1);
    for i in 0..n {
        tmp[i] = s[i] + 0.5 * h * k1[i];
    }
    f(tmp, k2);
    for i in 0..n {
        tmp[i] = s[i] + 0.5 * h * k2[i];
    }
    f(tmp, k3);
    for i in 0..n {
        tmp[i] = s[i] + h * k3[i];
    }
    f(tmp, k4);
    for i in 0..n {
        s[i] += h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
    }
}

/// Halves a step size until one step of `h` and two steps of `h / 2` from `s` agree to
/// `tol` relative to the state's size (step doubling, common practice for fixed-step RK4);
/// at most `max_halvings` halvings. Returns the accepted step.
pub fn checked_step<F: FnMut(&[f64], &mut [f64])>(
    f: &mut F,
    s: &[f64],
    mut h: f64,
    tol: f64,
    max_halvings: u32,
) -> f64 {
    let n = s.len();
    let mut work = vec![0.0; 5 * n];
    for _ in 0..max_halvings {
        let mut one = s.to_vec();
        rk4_step(f, &mut one, h, &mut work);
        let mut two = s.to_vec();
        rk4_step(f, &mut two, 0.5 * h, &mut work);
        rk4_step(f, &mut two, 0.5 * h, &mut work);
        let scale = s.iter().map(|v| v.abs()).fold(1.0, f64::max);
        let err = one
            .iter()
            .zip(&two)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        if err.is_finite() && err <= tol * scale {
            return h;
        }
        h *= 0.5;
    }
    h
}

/// Largest Lyapunov exponent of a flow by the two-trajectory renormalisation method
/// (Benettin et al. 1980): a companion trajectory at distance `d0` is rescaled back to
/// `d0` every `renorm` steps, and the mean log stretch per unit time is returned.
pub fn flow_lyapunov<F: FnMut(&[f64], &mut [f64])>(
    f: &mut F,
    start: &[f64],
    h: f64,
    transient_steps: usize,
    steps: usize,
    renorm: usize,
) -> f64 {
    let n = start.len();
    let mut work = vec![0.0; 5 * n];
    let mut a = start.to_vec();
    for _ in 0..transient_steps {
        rk4_step(f, &mut a, h, &mut work);
    }
    let d0 = 1e-8;
    let mut b = a.clone();
    b[0] += d0;
    let mut sum = 0.0;
    let mut t = 0.0;
    for k in 1..=steps {
        rk4_step(f, &mut a, h, &mut work);
        rk4_step(f, &mut b, h, &mut work);
        t += h;
        if k % renorm == 0 {
            let d = a
                .iter()
                .zip(&b)
                .map(|(x, y)| (x - y).powi(2))
                .sum::<f64>()
                .sqrt();
            sum += (d / d0).ln();
            for i in 0..n {
                b[i] = a[i] + (b[i] - a[i]) * d0 / d;
            }
        }
    }
    sum / t
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn lorenz(sigma: f64, rho: f64, beta: f64) -> impl FnMut(&[f64], &mut [f64]) {
        move |s, o| lorenz_rhs(s, sigma, rho, beta, 0.0, o)
    }

    #[test]
    fn lorenz_fixed_points_are_stationary() {
        // Lorenz 1963: C± = (±sqrt(beta (rho - 1)), ±sqrt(beta (rho - 1)), rho - 1), plus the origin.
        let (sigma, rho, beta) = (10.0, 28.0, 8.0 / 3.0);
        let q = (beta * (rho - 1.0_f64)).sqrt();
        for p in [[q, q, rho - 1.0], [-q, -q, rho - 1.0], [0.0, 0.0, 0.0]] {
            let mut out = [0.0; 3];
            lorenz_rhs(&p, sigma, rho, beta, 0.0, &mut out);
            for v in out {
                assert_abs_diff_eq!(v, 0.0, epsilon = 1e-12);
            }
        }
    }

    #[test]
    fn rossler_fixed_points_match_closed_form() {
        // Rössler 1976, with omega = 1: x = (c ± sqrt(c^2 - 4ab)) / 2, y = -x / a, z = x / a.
        let (a, b, c): (f64, f64, f64) = (0.2, 0.2, 5.7);
        for sign in [1.0, -1.0] {
            let x = (c + sign * (c * c - 4.0 * a * b).sqrt()) / 2.0;
            let p = [x, -x / a, x / a];
            let mut out = [0.0; 3];
            rossler_rhs(&p, a, b, c, 1.0, 0.0, &mut out);
            for v in out {
                assert_abs_diff_eq!(v, 0.0, epsilon = 1e-12);
            }
        }
    }

    #[test]
    fn lorenz_largest_lyapunov_exponent() {
        // Sprott 2003 (Chaos and Time-Series Analysis) lists 0.9056 for sigma=10, rho=28,
        // beta=8/3 (from memory).
        let mut f = lorenz(10.0, 28.0, 8.0 / 3.0);
        let l = flow_lyapunov(&mut f, &[1.0, 1.0, 20.0], 0.01, 2_000, 100_000, 10);
        assert_abs_diff_eq!(l, 0.906, epsilon = 0.1);
    }

    #[test]
    fn henon_largest_lyapunov_exponent() {
        // Sprott 2003 lists 0.41922 for a=1.4, b=0.3 (from memory). The tangent vector is
        // carried by the map's Jacobian [[-2 a x, 1], [b, 0]] and renormalised every step.
        let (a, b) = (1.4, 0.3);
        let (mut x, mut y) = (0.1, 0.1);
        for _ in 0..1000 {
            (x, y) = henon_step(x, y, x, a, b);
        }
        let (mut vx, mut vy) = (1.0, 0.0);
        let mut sum = 0.0;
        let n = 200_000;
        for _ in 0..n {
            let (nvx, nvy) = (-2.0 * a * x * vx + vy, b * vx);
            (x, y) = henon_step(x, y, x, a, b);
            let d = (nvx * nvx + nvy * nvy).sqrt();
            sum += d.ln();
            (vx, vy) = (nvx / d, nvy / d);
        }
        assert_abs_diff_eq!(sum / n as f64, 0.419, epsilon = 0.01);
    }

    /// Orbit of the logistic map at r = 4. In binary floating point every orbit of this map
    /// eventually falls onto 0 (x = 0.5 maps to 1, then 0) or a short spurious cycle, so
    /// the orbit is restarted from a fresh seeded point whenever it leaves the open interval
    /// (0, 1) or repeats; restarts are rare and do not bias the density.
    fn logistic_r4_orbit(n: usize) -> Vec<f64> {
        let mut state = 0x9E37_79B9_7F4A_7C15_u64;
        let mut fresh = || {
            state = crate::seeds::splitmix64(state);
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut x = fresh();
        let mut out = Vec::with_capacity(n);
        for _ in 0..n {
            let next = logistic_step(x, 4.0, 0.0);
            x = if next <= 0.0 || next >= 1.0 || next == x {
                fresh()
            } else {
                next
            };
            out.push(x);
        }
        out
    }

    #[test]
    fn logistic_r4_lyapunov_is_ln2() {
        // Ulam & von Neumann 1947 / Sprott 2003: the exponent at r = 4 is ln 2.
        let orbit = logistic_r4_orbit(500_000);
        let l = orbit
            .iter()
            .map(|x| (4.0 * (1.0 - 2.0 * x)).abs().ln())
            .sum::<f64>()
            / orbit.len() as f64;
        assert_abs_diff_eq!(l, std::f64::consts::LN_2, epsilon = 0.01);
    }

    #[test]
    fn logistic_r4_density_is_arcsine() {
        // Ulam & von Neumann 1947: invariant density 1/(pi sqrt(x(1-x))), whose CDF is
        // (2/pi) asin(sqrt(x)). Equal-probability bins have edges sin^2(pi k / (2 m)).
        let orbit = logistic_r4_orbit(200_000);
        let m = 20;
        let mut counts = vec![0usize; m];
        for &x in &orbit {
            let u = 2.0 / std::f64::consts::PI * x.sqrt().asin();
            counts[((u * m as f64) as usize).min(m - 1)] += 1;
        }
        let expected = orbit.len() as f64 / m as f64;
        let chi2: f64 = counts
            .iter()
            .map(|&c| (c as f64 - expected).powi(2) / expected)
            .sum();
        // 99.9% quantile of chi-square with 19 degrees of freedom is about 43.8 (statistical
        // tables, from memory); successive points are weakly correlated, so allow margin.
        assert!(chi2 < 60.0, "chi2 = {chi2}");
        // KS-style check: largest gap between empirical and arcsine CDF.
        let mut sorted = orbit.clone();
        sorted.sort_by(f64::total_cmp);
        let n = sorted.len() as f64;
        let d = sorted
            .iter()
            .enumerate()
            .map(|(i, x)| {
                ((i as f64 + 0.5) / n - 2.0 / std::f64::consts::PI * x.sqrt().asin()).abs()
            })
            .fold(0.0, f64::max);
        assert!(d < 0.01, "KS distance {d}");
    }

    #[test]
    fn lorenz_matches_scipy_solve_ivp() {
        // Fixture: tests/reference/sim_lorenz_solve_ivp.py, scipy 1.14.1 solve_ivp (DOP853,
        // rtol 1e-10, atol 1e-12).
        let text = include_str!(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../tests/reference/fixtures/sim_lorenz_solve_ivp.json"
        ));
        let fx: serde_json::Value = serde_json::from_str(text).unwrap();
        let p = &fx["params"];
        let (sigma, rho, beta) = (
            p["sigma"].as_f64().unwrap(),
            p["rho"].as_f64().unwrap(),
            p["beta"].as_f64().unwrap(),
        );
        let times: Vec<f64> = fx["t"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let states = fx["y"].as_array().unwrap();
        let mut s: Vec<f64> = states[0]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let mut f = lorenz(sigma, rho, beta);
        let mut work = vec![0.0; 15];
        let h = 1e-3;
        let mut t = times[0];
        for (k, &target) in times.iter().enumerate().skip(1) {
            let n = ((target - t) / h).round() as usize;
            for _ in 0..n {
                rk4_step(&mut f, &mut s, (target - t) / n as f64 * 1.0, &mut work);
            }
            t = target;
            let want: Vec<f64> = states[k]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect();
            for i in 0..3 {
                assert_abs_diff_eq!(s[i], want[i], epsilon = 1e-6);
            }
        }
    }

    #[test]
    fn step_check_halves_a_too_large_step() {
        let mut f = lorenz(10.0, 28.0, 8.0 / 3.0);
        let h = checked_step(&mut f, &[1.0, 1.0, 20.0], 0.5, 1e-6, 12);
        assert!(h < 0.05, "{h}");
    }
}
