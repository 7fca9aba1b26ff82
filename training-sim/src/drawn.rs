//! Every value drawn for one system, and the drawing itself (structure, units, couplings).

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::family::Family;
use crate::seeds::{Draw, system_seed};
use crate::spec::Spec;

/// The causal structure of a system (how its units are wired).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum Structure {
    /// A drives B.
    OneWay,
    /// A and B drive each other.
    TwoWay,
    /// A drives B strongly enough to synchronise it.
    Synchrony,
    /// A -> B -> C, all observed.
    ChainObserved,
    /// A -> B -> C, B hidden.
    ChainHidden,
    /// A -> B -> C -> D, with B, C or neither hidden.
    Chain3,
    /// A hidden unit drives two uncoupled observed units.
    HiddenDriver,
    /// One hidden seasonal forcing drives two uncoupled units.
    SharedSeasonality,
    /// One hidden environmental noise drives two uncoupled units.
    SharedNoise,
    /// Two unrelated units.
    Independent,
    /// Two unrelated units, each with its own seasonal forcing of nearly equal period.
    SimilarPeriods,
    /// Three to five units with random couplings.
    Network,
}

impl Structure {
    /// Every structure, in the order of the spec's `[structures]` table.
    pub const ALL: [Structure; 12] = [
        Structure::OneWay,
        Structure::TwoWay,
        Structure::Synchrony,
        Structure::ChainObserved,
        Structure::ChainHidden,
        Structure::Chain3,
        Structure::HiddenDriver,
        Structure::SharedSeasonality,
        Structure::SharedNoise,
        Structure::Independent,
        Structure::SimilarPeriods,
        Structure::Network,
    ];

    /// The structure's name, as in the spec.
    pub fn as_str(self) -> &'static str {
        match self {
            Structure::OneWay => "one_way",
            Structure::TwoWay => "two_way",
            Structure::Synchrony => "synchrony",
            Structure::ChainObserved => "chain_observed",
            Structure::ChainHidden => "chain_hidden",
            Structure::Chain3 => "chain3",
            Structure::HiddenDriver => "hidden_driver",
            Structure::SharedSeasonality => "shared_seasonality",
            Structure::SharedNoise => "shared_noise",
            Structure::Independent => "independent",
            Structure::SimilarPeriods => "similar_periods",
            Structure::Network => "network",
        }
    }

    fn weight(self, spec: &Spec) -> f64 {
        let w = &spec.structures;
        match self {
            Structure::OneWay => w.one_way,
            Structure::TwoWay => w.two_way,
            Structure::Synchrony => w.synchrony,
            Structure::ChainObserved => w.chain_observed,
            Structure::ChainHidden => w.chain_hidden,
            Structure::Chain3 => w.chain3,
            Structure::HiddenDriver => w.hidden_driver,
            Structure::SharedSeasonality => w.shared_seasonality,
            Structure::SharedNoise => w.shared_noise,
            Structure::Independent => w.independent,
            Structure::SimilarPeriods => w.similar_periods,
            Structure::Network => w.network,
        }
    }
}

/// One observed state variable of a unit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ObservedVar {
    /// Index of the state variable within its unit.
    pub state: usize,
    /// Column name in the output.
    pub name: String,
}

/// One unit: a copy of the family's dynamics with its own parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnitDraw {
    /// Observed variables; empty for a hidden unit.
    pub observed: Vec<ObservedVar>,
    /// Drawn parameters by name.
    pub params: BTreeMap<String, f64>,
    /// Initial state.
    pub initial: Vec<f64>,
}

/// A directed coupling between units: the driver's port variable enters the response's
/// equations.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CouplingDraw {
    /// Driving unit.
    pub from: usize,
    /// Driven unit.
    pub to: usize,
    /// Coupling strength.
    pub strength: f64,
}

/// A hidden exogenous driver.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum DriverKind {
    /// `f(t) = sin(2 pi t / period + phase)`, t in model time.
    Seasonal {
        /// Period in model time.
        period: f64,
        /// Phase in radians.
        phase: f64,
    },
    /// Unit-variance AR(1) noise updated once per sampling step (shared environment).
    Noise {
        /// Lag-one autocorrelation.
        persistence: f64,
        /// Seed of its stream.
        seed: u64,
    },
}

/// A hidden driver and the units it forces.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DriverDraw {
    /// What the driver is.
    pub kind: DriverKind,
    /// `(unit, amplitude)`: the unit's forced parameter is multiplied by `1 + amplitude f(t)`.
    pub targets: Vec<(usize, f64)>,
}

/// Every value drawn for one system; enough to regenerate it alone.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DrawnParams {
    /// System id (also the CSV file stem the CLI uses).
    pub id: String,
    /// Position of the system in the spec's numbering.
    pub index: usize,
    /// Redraw attempt that produced a usable system (0 when the first draw was kept).
    pub attempt: u32,
    /// Dynamics family.
    pub family: Family,
    /// Causal structure.
    pub structure: Structure,
    /// Units, observed and hidden.
    pub units: Vec<UnitDraw>,
    /// Couplings between units.
    pub couplings: Vec<CouplingDraw>,
    /// Hidden exogenous drivers.
    pub drivers: Vec<DriverDraw>,
    /// Model time between sampling steps (1 for maps).
    pub interval: f64,
    /// Keep every `thinning`-th sampling step.
    pub thinning: u64,
    /// Recorded points.
    pub length: u64,
    /// Sampling steps discarded first.
    pub transient: u64,
    /// Observation noise as a fraction of each series' SD.
    pub observation_noise: f64,
    /// Process noise level.
    pub process_noise: f64,
    /// Fraction of observed cells blanked.
    pub missing_fraction: f64,
    /// Seed of the process noise, observation noise and missing-cell streams.
    pub noise_seed: u64,
}

/// Family of the system at `index` (systems are numbered family by family in
/// [`Family::ALL`] order).
pub fn family_of(spec: &Spec, index: usize) -> Option<Family> {
    let mut start = 0usize;
    for f in Family::ALL {
        let n = f.count(spec) as usize;
        if index < start + n {
            return Some(f);
        }
        start += n;
    }
    None
}

/// Draws system `index` at redraw `attempt`. The index must be below the spec's total.
pub fn draw(spec: &Spec, index: usize, attempt: u32) -> DrawnParams {
    let family = family_of(spec, index).expect("index below the spec's total count");
    let mut d = Draw::new(system_seed(spec.seed, index, attempt));
    let weights: Vec<f64> = Structure::ALL.iter().map(|s| s.weight(spec)).collect();
    let structure = Structure::ALL[d.weighted(&weights)];
    let common = family.common(spec);

    // Wiring: which units are observed, which are coupled (strong or not), shared drivers.
    let mut observed_units: Vec<bool>;
    let mut links: Vec<(usize, usize, bool)> = vec![];
    enum Shared {
        None,
        Seasonal(Vec<usize>),
        Noise(Vec<usize>),
    }
    let mut shared = Shared::None;
    let mut own_seasons = false;
    match structure {
        Structure::OneWay => {
            observed_units = vec![true, true];
            links.push((0, 1, false));
        }
        Structure::TwoWay => {
            observed_units = vec![true, true];
            links.push((0, 1, false));
            links.push((1, 0, false));
        }
        Structure::Synchrony => {
            observed_units = vec![true, true];
            links.push((0, 1, true));
        }
        Structure::ChainObserved => {
            observed_units = vec![true; 3];
            links.extend([(0, 1, false), (1, 2, false)]);
        }
        Structure::ChainHidden => {
            observed_units = vec![true, false, true];
            links.extend([(0, 1, false), (1, 2, false)]);
        }
        Structure::Chain3 => {
            observed_units = vec![true; 4];
            match d.int(0, 2) {
                1 => observed_units[1] = false,
                2 => observed_units[2] = false,
                _ => {}
            }
            links.extend([(0, 1, false), (1, 2, false), (2, 3, false)]);
        }
        Structure::HiddenDriver => {
            observed_units = vec![false, true, true];
            let strong = d.chance(0.3);
            links.extend([(0, 1, strong), (0, 2, strong)]);
        }
        Structure::SharedSeasonality => {
            observed_units = vec![true, true];
            shared = Shared::Seasonal(vec![0, 1]);
        }
        Structure::SharedNoise => {
            observed_units = vec![true, true];
            shared = Shared::Noise(vec![0, 1]);
        }
        Structure::Independent => {
            observed_units = vec![true, true];
            own_seasons = family.intrinsically_seasonal();
        }
        Structure::SimilarPeriods => {
            observed_units = vec![true, true];
            own_seasons = true;
        }
        Structure::Network => {
            let net = &spec.network;
            let k = d.int(net.units.lo, net.units.hi) as usize;
            observed_units = vec![true; k];
            // A hidden unit 30 % of the time (never at the default's largest size, 5, so the
            // default draws stay as they were).
            if k != 5 && d.chance(0.3) {
                observed_units.push(false);
            }
            let n = observed_units.len();
            let p_link = if net.link_probability.lo == net.link_probability.hi {
                net.link_probability.lo
            } else {
                d.uniform(net.link_probability.lo, net.link_probability.hi)
            };
            for a in 0..n {
                for b in 0..n {
                    if a != b && d.chance(p_link) {
                        links.push((a, b, false));
                    }
                }
            }
            if links.is_empty() {
                links.push((0, 1, false));
            }
            // A hidden unit with no outgoing link would be pointless.
            if !observed_units[n - 1] && !links.iter().any(|l| l.0 == n - 1) {
                links.push((n - 1, 0, false));
            }
            if d.chance(0.3) {
                let mut members: Vec<usize> = (0..n).collect();
                d.shuffle(&mut members);
                members.truncate(d.int(2, n as u64) as usize);
                members.sort_unstable();
                shared = if d.chance(0.5) {
                    Shared::Seasonal(members)
                } else {
                    Shared::Noise(members)
                };
            }
        }
    }
    let n_units = observed_units.len();

    let mut units: Vec<UnitDraw> = (0..n_units)
        .map(|_| UnitDraw {
            observed: vec![],
            params: family.draw_params(spec, &mut d),
            initial: family.draw_initial(&mut d),
        })
        .collect();

    let mut couplings: Vec<CouplingDraw> = links
        .iter()
        .map(|&(from, to, strong)| {
            let r = if strong {
                common.strong_coupling
            } else {
                common.coupling
            };
            CouplingDraw {
                from,
                to,
                strength: d.uniform(r.lo, r.hi),
            }
        })
        .collect();
    if family == Family::Henon {
        // The squared term mixes own and driver x with weights summing to one, so the
        // incoming weights of a unit must stay below one.
        for u in 0..n_units {
            let total: f64 = couplings
                .iter()
                .filter(|c| c.to == u)
                .map(|c| c.strength)
                .sum();
            if total > 0.9 {
                for c in couplings.iter_mut().filter(|c| c.to == u) {
                    c.strength *= 0.9 / total;
                }
            }
        }
    }

    let mut drivers = vec![];
    let forcing = |d: &mut Draw| d.uniform(common.forcing.lo, common.forcing.hi);
    let period_base = d.uniform(common.seasonal_period.lo, common.seasonal_period.hi);
    if own_seasons {
        // Separate forcings per unit; periods stay close (within 10%) for similar_periods
        // and spread wider (within 30%) for plain independent units.
        let spread = if structure == Structure::SimilarPeriods {
            0.1
        } else {
            0.3
        };
        for u in 0..n_units {
            let period = if u == 0 {
                period_base
            } else {
                period_base * (1.0 + d.uniform(-spread, spread))
            };
            let phase = d.uniform(0.0, std::f64::consts::TAU);
            let amp = forcing(&mut d);
            drivers.push(DriverDraw {
                kind: DriverKind::Seasonal { period, phase },
                targets: vec![(u, amp)],
            });
        }
    } else if family.intrinsically_seasonal() || matches!(shared, Shared::Seasonal(_)) {
        // One calendar for the whole system: intrinsically seasonal units share it, as
        // populations in one region share their seasons.
        let members: Vec<usize> = match &shared {
            Shared::Seasonal(m) if !family.intrinsically_seasonal() => m.clone(),
            _ => (0..n_units).collect(),
        };
        let phase = d.uniform(0.0, std::f64::consts::TAU);
        let targets = members.iter().map(|&u| (u, forcing(&mut d))).collect();
        drivers.push(DriverDraw {
            kind: DriverKind::Seasonal {
                period: period_base,
                phase,
            },
            targets,
        });
    }
    if let Shared::Noise(members) = &shared {
        let persistence = d.uniform(0.3, 0.9);
        let seed = d.next_seed();
        let targets = members.iter().map(|&u| (u, forcing(&mut d))).collect();
        drivers.push(DriverDraw {
            kind: DriverKind::Noise { persistence, seed },
            targets,
        });
    }

    // Observed columns: the port always, some extra variables while at most six columns (or
    // the number of observed units, when larger).
    let mut numbers: Vec<usize> = (1..=observed_units.iter().filter(|o| **o).count()).collect();
    d.shuffle(&mut numbers);
    let mut numbers = numbers.into_iter();
    let mut columns = observed_units.iter().filter(|o| **o).count();
    let max_columns = columns.max(6);
    let names = family.var_names();
    let (extra, p_extra) = family.extra_observable();
    for (u, unit) in units.iter_mut().enumerate() {
        if !observed_units[u] {
            continue;
        }
        let k = numbers.next().unwrap_or(u + 1);
        let port = family.port();
        unit.observed.push(ObservedVar {
            state: port,
            name: format!("{}_{k}", names[port]),
        });
        for &v in extra {
            if columns < max_columns && d.chance(p_extra) {
                columns += 1;
                unit.observed.push(ObservedVar {
                    state: v,
                    name: format!("{}_{k}", names[v]),
                });
            }
        }
    }

    let s = &spec.sampling;
    let interval = match common.interval {
        Some(r) => d.uniform(r.lo, r.hi),
        None => 1.0,
    };
    // Drawn in this order whatever the spec says, so a spec without clean systems draws as
    // before; the clean coin is tossed only when clean systems are asked for.
    let thinning = d.int(s.thinning.lo, s.thinning.hi);
    let length = d.int(s.length.lo, s.length.hi);
    let transient = d.int(s.transient.lo, s.transient.hi);
    let observation_noise = d.uniform(spec.noise.observation.lo, spec.noise.observation.hi);
    let process_noise = d.uniform(spec.noise.process.lo, spec.noise.process.hi);
    let missing_fraction = d.uniform(s.missing.lo, s.missing.hi);
    let noise_seed = d.next_seed();
    let clean = spec.noise.clean_share > 0.0 && d.chance(spec.noise.clean_share);
    DrawnParams {
        id: format!("{}-{index:04}", family.as_str()),
        index,
        attempt,
        family,
        structure,
        units,
        couplings,
        drivers,
        interval,
        thinning,
        length,
        transient,
        observation_noise: if clean { 0.0 } else { observation_noise },
        process_noise: if clean { 0.0 } else { process_noise },
        missing_fraction: if clean { 0.0 } else { missing_fraction },
        noise_seed,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn families_are_numbered_in_order() {
        let spec = Spec::from_toml_str(
            "seed = 1\n[families.lorenz]\ncount = 2\n[families.logistic]\ncount = 1\n",
        )
        .unwrap();
        assert_eq!(family_of(&spec, 0), Some(Family::Logistic));
        assert_eq!(family_of(&spec, 1), Some(Family::Lorenz));
        assert_eq!(family_of(&spec, 2), Some(Family::Lorenz));
        assert_eq!(family_of(&spec, 3), None);
    }

    #[test]
    fn drawing_is_a_function_of_seed_index_attempt() {
        let spec = Spec::from_toml_str("seed = 5\n[families.sir]\ncount = 3\n").unwrap();
        assert_eq!(draw(&spec, 1, 0), draw(&spec, 1, 0));
        assert_ne!(draw(&spec, 1, 0), draw(&spec, 1, 1));
    }

    #[test]
    fn observed_names_are_unique_and_at_most_six() {
        let spec =
            Spec::from_toml_str("seed = 9\n[families.consumer_resource]\ncount = 40\n").unwrap();
        for i in 0..40 {
            let dp = draw(&spec, i, 0);
            let mut names: Vec<&str> = dp
                .units
                .iter()
                .flat_map(|u| u.observed.iter().map(|o| o.name.as_str()))
                .collect();
            assert!(names.len() >= 2 && names.len() <= 6, "{names:?}");
            names.sort_unstable();
            names.dedup();
            assert_eq!(
                names.len(),
                dp.units.iter().map(|u| u.observed.len()).sum::<usize>()
            );
        }
    }
}
