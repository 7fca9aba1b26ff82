//! The dynamics families: state variables, which variable enters which equation, and draws.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::seeds::Draw;
use crate::spec::{Range, Spec};

/// A family of dynamics; every unit of a system belongs to its system's family.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum Family {
    /// Coupled logistic maps (Sugihara et al. 2012 form).
    Logistic,
    /// Ricker population maps (Ricker 1954).
    Ricker,
    /// Hénon maps (Hénon 1976).
    Henon,
    /// Lorenz flows (Lorenz 1963).
    Lorenz,
    /// Rössler flows (Rössler 1976).
    Rossler,
    /// Four-species chaotic Lotka–Volterra competition (Vano et al. 2006).
    LotkaVolterra,
    /// Seasonally forced Rosenzweig–MacArthur consumer–resource pairs (Rosenzweig & MacArthur 1963).
    ConsumerResource,
    /// SIR/SIRS epidemics with seasonal transmission (Kermack & McKendrick 1927; Keeling & Rohani 2008).
    Sir,
}

/// Ranges every family shares.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Common {
    pub coupling: Range,
    pub strong_coupling: Range,
    pub forcing: Range,
    pub seasonal_period: Range,
    /// Model time between sampling steps; `None` for maps (one iteration).
    pub interval: Option<Range>,
}

impl Family {
    /// Every family, in the order systems are numbered.
    pub const ALL: [Family; 8] = [
        Family::Logistic,
        Family::Ricker,
        Family::Henon,
        Family::Lorenz,
        Family::Rossler,
        Family::LotkaVolterra,
        Family::ConsumerResource,
        Family::Sir,
    ];

    /// The family's name as used in spec keys, system ids and the `family` field.
    pub fn as_str(self) -> &'static str {
        match self {
            Family::Logistic => "logistic",
            Family::Ricker => "ricker",
            Family::Henon => "henon",
            Family::Lorenz => "lorenz",
            Family::Rossler => "rossler",
            Family::LotkaVolterra => "lotka_volterra",
            Family::ConsumerResource => "consumer_resource",
            Family::Sir => "sir",
        }
    }

    /// Systems of this family the spec asks for.
    pub fn count(self, spec: &Spec) -> u64 {
        let f = &spec.families;
        match self {
            Family::Logistic => f.logistic.count,
            Family::Ricker => f.ricker.count,
            Family::Henon => f.henon.count,
            Family::Lorenz => f.lorenz.count,
            Family::Rossler => f.rossler.count,
            Family::LotkaVolterra => f.lotka_volterra.count,
            Family::ConsumerResource => f.consumer_resource.count,
            Family::Sir => f.sir.count,
        }
    }

    pub(crate) fn common(self, spec: &Spec) -> Common {
        let f = &spec.families;
        macro_rules! c {
            ($s:expr, $i:expr) => {
                Common {
                    coupling: $s.coupling,
                    strong_coupling: $s.strong_coupling,
                    forcing: $s.forcing,
                    seasonal_period: $s.seasonal_period,
                    interval: $i,
                }
            };
        }
        match self {
            Family::Logistic => c!(f.logistic, None),
            Family::Ricker => c!(f.ricker, None),
            Family::Henon => c!(f.henon, None),
            Family::Lorenz => c!(f.lorenz, Some(f.lorenz.interval)),
            Family::Rossler => c!(f.rossler, Some(f.rossler.interval)),
            Family::LotkaVolterra => c!(f.lotka_volterra, Some(f.lotka_volterra.interval)),
            Family::ConsumerResource => c!(f.consumer_resource, Some(f.consumer_resource.interval)),
            Family::Sir => c!(f.sir, Some(f.sir.interval)),
        }
    }

    /// True for discrete-time maps (one iteration per sampling step).
    pub fn is_map(self) -> bool {
        matches!(self, Family::Logistic | Family::Ricker | Family::Henon)
    }

    /// Names of a unit's state variables.
    pub fn var_names(self) -> &'static [&'static str] {
        match self {
            Family::Logistic | Family::Ricker => &["x"],
            Family::Henon => &["x", "y"],
            Family::Lorenz | Family::Rossler => &["x", "y", "z"],
            Family::LotkaVolterra => &["N1", "N2", "N3", "N4"],
            Family::ConsumerResource => &["R", "C"],
            Family::Sir => &["S", "I"],
        }
    }

    /// The state variable other units read when this unit drives them; always observed
    /// in an observed unit.
    pub fn port(self) -> usize {
        match self {
            Family::Sir => 1,
            _ => 0,
        }
    }

    /// State variables whose equations receive a driver's input.
    pub fn coupling_targets(self) -> &'static [usize] {
        match self {
            Family::Sir => &[0, 1],
            _ => &[0],
        }
    }

    /// State variables whose equations hold the parameter that forcing modulates.
    pub fn forced_vars(self) -> &'static [usize] {
        match self {
            Family::Logistic | Family::Ricker | Family::Henon | Family::ConsumerResource => &[0],
            Family::Lorenz => &[1],
            Family::Rossler => &[2],
            Family::LotkaVolterra => &[0, 1, 2, 3],
            Family::Sir => &[0, 1],
        }
    }

    /// Edges `(from, to)` inside one unit: variable `from` appears in the equation of `to`.
    pub fn internal_edges(self) -> Vec<(usize, usize)> {
        match self {
            Family::Logistic | Family::Ricker => vec![],
            Family::Henon => vec![(1, 0), (0, 1)],
            Family::Lorenz => vec![(1, 0), (0, 1), (2, 1), (0, 2), (1, 2)],
            Family::Rossler => vec![(1, 0), (2, 0), (0, 1), (0, 2)],
            Family::LotkaVolterra => {
                let mut e = vec![];
                for (i, row) in crate::dynamics::VANO_COMPETITION.iter().enumerate() {
                    for (j, a) in row.iter().enumerate() {
                        if i != j && *a != 0.0 {
                            e.push((j, i));
                        }
                    }
                }
                e
            }
            Family::ConsumerResource | Family::Sir => vec![(1, 0), (0, 1)],
        }
    }

    /// Non-port variables that may be observed as well, with the chance of each.
    pub(crate) fn extra_observable(self) -> (&'static [usize], f64) {
        match self {
            Family::ConsumerResource => (&[1], 0.6),
            Family::LotkaVolterra => (&[1, 2, 3], 0.15),
            _ => (&[], 0.0),
        }
    }

    /// True when every unit carries a seasonal forcing (the calendar) in its own right.
    pub fn intrinsically_seasonal(self) -> bool {
        matches!(self, Family::ConsumerResource | Family::Sir)
    }

    /// Largest integration step for flows (model time units), before the step check.
    pub(crate) fn max_step(self) -> f64 {
        match self {
            Family::Lorenz => 0.005,
            Family::Rossler => 0.02,
            Family::LotkaVolterra => 0.05,
            Family::ConsumerResource => 0.02,
            Family::Sir => 0.001,
            _ => 1.0,
        }
    }

    /// True when process noise is multiplicative (populations); else additive with
    /// [`Family::noise_scale`].
    pub(crate) fn multiplicative_noise(self) -> bool {
        matches!(
            self,
            Family::Logistic
                | Family::Ricker
                | Family::LotkaVolterra
                | Family::ConsumerResource
                | Family::Sir
        )
    }

    /// Typical size of each state variable, scaling additive process noise.
    pub(crate) fn noise_scale(self) -> &'static [f64] {
        match self {
            Family::Henon => &[1.0, 0.3],
            Family::Lorenz => &[8.0, 9.0, 8.0],
            Family::Rossler => &[4.0, 4.0, 0.5],
            _ => &[1.0, 1.0, 1.0, 1.0],
        }
    }

    /// Draws one unit's parameters from the spec's ranges.
    pub(crate) fn draw_params(self, spec: &Spec, d: &mut Draw) -> BTreeMap<String, f64> {
        let f = &spec.families;
        let mut p = BTreeMap::new();
        let mut put = |k: &str, r: Range, d: &mut Draw| {
            p.insert(k.to_string(), d.uniform(r.lo, r.hi));
        };
        match self {
            Family::Logistic => put("r", f.logistic.r, d),
            Family::Ricker => put("r", f.ricker.r, d),
            Family::Henon => {
                put("a", f.henon.a, d);
                put("b", f.henon.b, d);
            }
            Family::Lorenz => {
                put("sigma", f.lorenz.sigma, d);
                put("rho", f.lorenz.rho, d);
                put("beta", f.lorenz.beta, d);
            }
            Family::Rossler => {
                put("a", f.rossler.a, d);
                put("b", f.rossler.b, d);
                put("c", f.rossler.c, d);
                put("omega", f.rossler.omega, d);
            }
            Family::LotkaVolterra => {
                let j = f.lotka_volterra.growth_jitter;
                for (i, r) in crate::dynamics::VANO_GROWTH.iter().enumerate() {
                    let amp = d.uniform(j.lo, j.hi);
                    let sign = if d.chance(0.5) { 1.0 } else { -1.0 };
                    p.insert(format!("r{}", i + 1), r * (1.0 + sign * amp));
                }
            }
            Family::ConsumerResource => {
                put("attack", f.consumer_resource.attack, d);
                put("handling", f.consumer_resource.handling, d);
                put("mortality", f.consumer_resource.mortality, d);
            }
            Family::Sir => {
                put("r0", f.sir.r0, d);
                put("recovery", f.sir.recovery, d);
                put("waning", f.sir.waning, d);
                p.insert("birth".into(), 0.02);
                p.insert("imports".into(), 1e-5);
            }
        }
        p
    }

    /// Draws one unit's initial state.
    pub(crate) fn draw_initial(self, d: &mut Draw) -> Vec<f64> {
        match self {
            Family::Logistic => vec![d.uniform(0.2, 0.8)],
            Family::Ricker => vec![d.uniform(0.2, 1.5)],
            Family::Henon => vec![d.uniform(-0.5, 0.5), d.uniform(-0.1, 0.1)],
            Family::Lorenz => vec![
                d.uniform(-10.0, 10.0),
                d.uniform(-10.0, 10.0),
                d.uniform(10.0, 35.0),
            ],
            Family::Rossler => vec![
                d.uniform(-5.0, 5.0),
                d.uniform(-5.0, 5.0),
                d.uniform(0.0, 1.0),
            ],
            Family::LotkaVolterra => (0..4).map(|_| d.uniform(0.1, 0.5)).collect(),
            Family::ConsumerResource => vec![d.uniform(0.2, 0.8), d.uniform(0.1, 0.5)],
            Family::Sir => vec![d.uniform(0.05, 0.15), d.uniform(1e-4, 1e-3)],
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_and_edges_are_consistent() {
        for f in Family::ALL {
            let n = f.var_names().len();
            assert!(f.port() < n);
            assert!(f.coupling_targets().iter().all(|&v| v < n));
            assert!(f.forced_vars().iter().all(|&v| v < n));
            assert!(
                f.internal_edges()
                    .iter()
                    .all(|&(a, b)| a < n && b < n && a != b)
            );
        }
    }

    #[test]
    fn vano_matrix_zeros_become_missing_edges() {
        // Vano et al. 2006: species 4 does not act on species 1, nor 1 on 2, nor 2 on 3.
        let e = Family::LotkaVolterra.internal_edges();
        assert!(!e.contains(&(3, 0)) && !e.contains(&(0, 1)) && !e.contains(&(1, 2)));
        assert_eq!(e.len(), 9);
    }
}
