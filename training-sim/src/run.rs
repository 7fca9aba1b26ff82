//! Running a drawn system: integration, process and observation noise, missing cells.

use crate::drawn::{DrawnParams, DriverKind};
use crate::dynamics::{
    VANO_COMPETITION, checked_step, henon_step, logistic_step, lorenz_rhs, ricker_step, rk4_step,
    rossler_rhs,
};
use crate::family::Family;
use crate::seeds::{Draw, splitmix64};

/// Why a drawn system was not usable (the caller redraws).
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Reject {
    /// A state became non-finite or left the bounded region.
    BlowUp,
    /// An observed series is (nearly) constant: extinction or a fixed point.
    Flat,
}

/// Largest state magnitude accepted before a trajectory counts as blown up.
const BOUND: f64 = 1e6;

struct Unit {
    offset: usize,
    p: [f64; 6],
    /// `(global index of the driver's port, strength)`.
    inputs: Vec<(usize, f64)>,
    /// `(driver index, amplitude)`.
    forcings: Vec<(usize, f64)>,
}

struct Model {
    family: Family,
    units: Vec<Unit>,
    dim: usize,
}

fn param(d: &DrawnParams, u: usize, k: &str) -> f64 {
    d.units[u].params.get(k).copied().unwrap_or(f64::NAN)
}

impl Model {
    fn new(d: &DrawnParams) -> Model {
        let f = d.family;
        let dim = f.var_names().len();
        let keys: &[&str] = match f {
            Family::Logistic | Family::Ricker => &["r"],
            Family::Henon => &["a", "b"],
            Family::Lorenz => &["sigma", "rho", "beta"],
            Family::Rossler => &["a", "b", "c", "omega"],
            Family::LotkaVolterra => &["r1", "r2", "r3", "r4"],
            Family::ConsumerResource => &["attack", "handling", "mortality"],
            Family::Sir => &["r0", "recovery", "waning", "birth", "imports"],
        };
        let units = (0..d.units.len())
            .map(|u| {
                let mut p = [0.0; 6];
                for (i, k) in keys.iter().enumerate() {
                    p[i] = param(d, u, k);
                }
                Unit {
                    offset: u * dim,
                    p,
                    inputs: d
                        .couplings
                        .iter()
                        .filter(|c| c.to == u)
                        .map(|c| (c.from * dim + f.port(), c.strength))
                        .collect(),
                    forcings: d
                        .drivers
                        .iter()
                        .enumerate()
                        .flat_map(|(k, drv)| {
                            drv.targets
                                .iter()
                                .filter(|t| t.0 == u)
                                .map(move |t| (k, t.1))
                        })
                        .collect(),
                }
            })
            .collect();
        Model {
            family: f,
            units,
            dim,
        }
    }

    fn inputs(unit: &Unit, s: &[f64]) -> (f64, f64) {
        unit.inputs
            .iter()
            .fold((0.0, 0.0), |(s0, s1), &(i, c)| (s0 + c, s1 + c * s[i]))
    }

    fn modulation(unit: &Unit, fvals: &[f64]) -> f64 {
        1.0 + unit
            .forcings
            .iter()
            .map(|&(k, a)| a * fvals[k])
            .sum::<f64>()
    }

    /// One iteration of a map system (all units updated from the old state).
    fn map_step(&self, s: &[f64], fvals: &[f64], out: &mut [f64]) {
        for u in &self.units {
            let (s0, s1) = Self::inputs(u, s);
            let m = Self::modulation(u, fvals);
            let o = u.offset;
            match self.family {
                Family::Logistic => out[o] = logistic_step(s[o], (u.p[0] * m).min(4.0), s1),
                Family::Ricker => out[o] = ricker_step(s[o], u.p[0] * m, s1),
                Family::Henon => {
                    let mix = (1.0 - s0) * s[o] + s1;
                    (out[o], out[o + 1]) = henon_step(s[o], s[o + 1], mix, u.p[0] * m, u.p[1]);
                }
                _ => unreachable!("flows are integrated, not iterated"),
            }
        }
    }

    /// Right-hand side of a flow system.
    fn rhs(&self, s: &[f64], fvals: &[f64], out: &mut [f64]) {
        for u in &self.units {
            let (s0, s1) = Self::inputs(u, s);
            let m = Self::modulation(u, fvals);
            let o = u.offset;
            let p = &u.p;
            match self.family {
                Family::Lorenz => {
                    let x = s[o];
                    lorenz_rhs(
                        &s[o..o + 3],
                        p[0],
                        p[1] * m,
                        p[2],
                        s1 - s0 * x,
                        &mut out[o..o + 3],
                    );
                }
                Family::Rossler => {
                    let x = s[o];
                    rossler_rhs(
                        &s[o..o + 3],
                        p[0],
                        p[1],
                        p[2] * m,
                        p[3],
                        s1 - s0 * x,
                        &mut out[o..o + 3],
                    );
                }
                Family::LotkaVolterra => {
                    for i in 0..4 {
                        let mut crowd = 0.0;
                        for j in 0..4 {
                            crowd += VANO_COMPETITION[i][j] * s[o + j];
                        }
                        if i == 0 {
                            crowd += s1;
                        }
                        out[o + i] = p[i] * m * s[o + i] * (1.0 - crowd);
                    }
                }
                Family::ConsumerResource => {
                    let (r, c) = (s[o], s[o + 1]);
                    let eaten = p[0] * r * c / (1.0 + p[1] * r);
                    out[o] = m * r * (1.0 - r) - eaten + s1;
                    out[o + 1] = eaten - p[2] * c;
                }
                Family::Sir => {
                    let (sus, inf) = (s[o], s[o + 1]);
                    let (r0, gamma, waning, mu, imports) = (p[0], p[1], p[2], p[3], p[4]);
                    let beta = r0 * (gamma + mu) * m;
                    let infection = beta * sus * (inf + s1);
                    out[o] = mu * (1.0 - sus) - infection + waning * (1.0 - sus - inf);
                    out[o + 1] = infection - (gamma + mu) * inf + imports;
                }
                _ => unreachable!("maps are iterated, not integrated"),
            }
        }
    }

    /// Random kick given to every state variable once per sampling step.
    fn kick(&self, s: &mut [f64], sigma: f64, noise: &mut Draw) {
        if sigma <= 0.0 {
            return;
        }
        let scale = self.family.noise_scale();
        for (i, v) in s.iter_mut().enumerate() {
            let z = noise.normal();
            if self.family.multiplicative_noise() {
                *v *= (sigma * z).exp();
            } else {
                *v += sigma * scale[i % self.dim] * z;
            }
        }
        match self.family {
            // The Sugihara form needs states inside (0, 1); kicks are clipped back in.
            Family::Logistic => s.iter_mut().for_each(|v| *v = v.clamp(1e-9, 1.0 - 1e-9)),
            Family::Sir => {
                for u in &self.units {
                    let o = u.offset;
                    s[o] = s[o].min(1.0 - s[o + 1]);
                }
            }
            _ => {}
        }
    }
}

/// Clean observed series (before observation noise), column by column.
pub(crate) fn integrate(d: &DrawnParams, columns: &[usize]) -> Result<Vec<Vec<f64>>, Reject> {
    let model = Model::new(d);
    let mut s: Vec<f64> = d
        .units
        .iter()
        .flat_map(|u| u.initial.iter().copied())
        .collect();
    let n = s.len();
    let mut noise = Draw::new(splitmix64(d.noise_seed ^ 0x01));
    let mut env: Vec<Option<Draw>> = d
        .drivers
        .iter()
        .map(|drv| match drv.kind {
            DriverKind::Noise { seed, .. } => Some(Draw::new(seed)),
            DriverKind::Seasonal { .. } => None,
        })
        .collect();
    let mut fvals = vec![0.0; d.drivers.len()];
    let seasonal = |t: f64, fvals: &mut [f64]| {
        for (k, drv) in d.drivers.iter().enumerate() {
            if let DriverKind::Seasonal { period, phase } = drv.kind {
                fvals[k] = (std::f64::consts::TAU * t / period + phase).sin();
            }
        }
    };
    let total = d.transient + d.length * d.thinning;
    let mut out: Vec<Vec<f64>> = columns
        .iter()
        .map(|_| Vec::with_capacity(d.length as usize))
        .collect();
    let mut next = vec![0.0; n];
    let mut work = vec![0.0; 5 * n];
    let is_map = d.family.is_map();
    let mut substeps = if is_map {
        1
    } else {
        (d.interval / d.family.max_step()).ceil().max(1.0) as usize
    };
    let check = |s: &[f64], fvals: &[f64], substeps: usize| -> usize {
        let h = d.interval / substeps as f64;
        let mut f = |x: &[f64], o: &mut [f64]| model.rhs(x, fvals, o);
        let ok = checked_step(&mut f, s, h, 1e-7, 8);
        substeps.max((d.interval / ok).ceil() as usize)
    };
    if !is_map {
        seasonal(0.0, &mut fvals);
        substeps = check(&s, &fvals, substeps);
    }
    for k in 0..total {
        for (j, drv) in d.drivers.iter().enumerate() {
            if let (DriverKind::Noise { persistence, .. }, Some(g)) = (&drv.kind, env[j].as_mut()) {
                fvals[j] =
                    persistence * fvals[j] + (1.0 - persistence * persistence).sqrt() * g.normal();
            }
        }
        let t0 = k as f64 * d.interval;
        if is_map {
            seasonal(t0, &mut fvals);
            model.map_step(&s, &fvals, &mut next);
            s.copy_from_slice(&next);
        } else {
            if k == d.transient && k > 0 {
                substeps = check(&s, &fvals, substeps);
            }
            let h = d.interval / substeps as f64;
            for i in 0..substeps {
                seasonal(t0 + i as f64 * h, &mut fvals);
                let mut f = |x: &[f64], o: &mut [f64]| model.rhs(x, &fvals, o);
                rk4_step(&mut f, &mut s, h, &mut work);
            }
        }
        model.kick(&mut s, d.process_noise, &mut noise);
        if s.iter().any(|v| !v.is_finite() || v.abs() > BOUND) {
            return Err(Reject::BlowUp);
        }
        if k >= d.transient && (k - d.transient).is_multiple_of(d.thinning) {
            for (col, &idx) in out.iter_mut().zip(columns) {
                col.push(s[idx]);
            }
        }
    }
    for col in &out {
        let (mean, sd) = mean_sd(col);
        if sd <= 1e-8 * mean.abs().max(1e-3) {
            return Err(Reject::Flat);
        }
    }
    Ok(out)
}

/// Mean and population standard deviation of the finite values.
pub(crate) fn mean_sd(xs: &[f64]) -> (f64, f64) {
    let n = xs.len().max(1) as f64;
    let mean = xs.iter().sum::<f64>() / n;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n;
    (mean, var.sqrt())
}

/// Adds observation noise (a fraction of each series' SD) and blanks missing cells (NaN).
pub(crate) fn observe(d: &DrawnParams, series: Vec<Vec<f64>>) -> Vec<Vec<f64>> {
    observe_series(
        series,
        d.observation_noise,
        d.missing_fraction,
        d.noise_seed,
    )
}

/// Observation noise of SD `noise` x each clean series' SD, then missing cells with
/// probability `missing`, from streams derived from `seed`.
pub(crate) fn observe_series(
    mut series: Vec<Vec<f64>>,
    noise: f64,
    missing: f64,
    seed: u64,
) -> Vec<Vec<f64>> {
    let mut obs = Draw::new(splitmix64(seed ^ 0x02));
    let mut gaps = Draw::new(splitmix64(seed ^ 0x03));
    for col in &mut series {
        let (_, sd) = mean_sd(col);
        for v in col.iter_mut() {
            *v += noise * sd * obs.normal();
            if missing > 0.0 && gaps.chance(missing) {
                *v = f64::NAN;
            }
        }
    }
    series
}
