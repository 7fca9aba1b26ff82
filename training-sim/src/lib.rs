//! Simulator of labelled coupled dynamical systems.
//!
//! A [`Spec`] (TOML, schema in `SPEC.md`) says how many systems of each dynamics family to
//! draw and from which parameter, noise and sampling ranges. [`simulate`] draws and runs
//! them, each from a seed derived from the spec's seed and the system's index, so results
//! do not depend on the thread count and any system can be rebuilt alone with
//! [`simulate_one`] or [`System::regenerate`]. Every system knows the ground truth of every
//! ordered pair of its observed variables ([`Label`]); hidden variables are simulated but
//! never returned. The simulator knows nothing of cross mapping.
//!
//! ```
//! let spec = training_sim::Spec::from_toml_str(
//!     "seed = 7\n[sampling]\nlength = 60\n[families.logistic]\ncount = 2\n",
//! )
//! .unwrap();
//! let systems = training_sim::simulate(&spec).unwrap();
//! assert_eq!(systems.len(), 2);
//! let s = &systems[0];
//! assert_eq!(s.series[0].len(), 60);
//! assert_eq!(s.truth.len(), s.variables.len() * (s.variables.len() - 1));
//! assert!(s.to_csv_string().starts_with("t,"));
//! ```
#![deny(missing_docs)]

pub mod canonical;
pub mod drawn;
pub mod dynamics;
pub mod family;
mod graph;
pub mod render;
mod run;
pub mod seeds;
pub mod spec;

use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;

pub use canonical::{CanonicalDraw, Form};
pub use drawn::{DrawnParams, Structure};
pub use family::Family;
pub use graph::{Label, TruthRow};
pub use render::{resolved_spec_json, truth_csv};
pub use spec::{Spec, SpecError, ValidSpec};

/// Redraws allowed per system before giving up.
pub const MAX_ATTEMPTS: u32 = 64;

/// Errors while simulating.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SimError {
    /// Every redraw of a system blew up or went flat; the spec's ranges are too wild.
    #[error(
        "system {index} ({family}) blew up or went flat in all {attempts} draws: narrow the family's parameter, coupling or noise ranges"
    )]
    Unusable {
        /// Index of the system.
        index: usize,
        /// Its family.
        family: &'static str,
        /// Draws tried.
        attempts: u32,
    },
    /// The index is not below the spec's total count.
    #[error("system index {index} is out of range: the spec has {total} systems")]
    NoSuchSystem {
        /// Requested index.
        index: usize,
        /// Systems in the spec.
        total: usize,
    },
    /// Drawn parameters given to [`System::regenerate`] do not produce a usable system.
    #[error("the drawn parameters of `{id}` do not give a usable system (blow-up or flat series)")]
    NotUsable {
        /// System id.
        id: String,
    },
}

/// One simulated system: observed series and the answer key.
#[derive(Debug, Clone, PartialEq)]
pub struct System {
    /// Id, unique within a spec (`family-index`).
    pub id: String,
    /// Dynamics family (for leave-one-family-out validation).
    pub family: String,
    /// Causal structure name.
    pub structure: String,
    /// Observed variable names.
    pub variables: Vec<String>,
    /// `series[v][t]`: variable `v` at sample `t`; NaN marks a missing cell.
    pub series: Vec<Vec<f64>>,
    /// Truth for every ordered pair of observed variables.
    pub truth: Vec<TruthRow>,
    /// Every drawn value; enough to regenerate the system.
    pub drawn: Drawn,
}

/// The drawn values of a system: a family system or a canonical one.
///
/// Serialised untagged, so a family system's record keeps the shape it always had in the
/// resolved spec JSON.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(untagged)]
pub enum Drawn {
    /// Units of one dynamics family wired by a structure.
    Family(DrawnParams),
    /// A canonical published form.
    Canonical(CanonicalDraw),
}

impl Drawn {
    /// The family draw, when the system is a family system.
    pub fn family(&self) -> Option<&DrawnParams> {
        match self {
            Drawn::Family(d) => Some(d),
            Drawn::Canonical(_) => None,
        }
    }
}

impl System {
    /// Runs drawn parameters again, giving the identical system.
    pub fn regenerate(drawn: &Drawn) -> Result<System, SimError> {
        let built = match drawn {
            Drawn::Family(d) => build(d),
            Drawn::Canonical(c) => build_canonical(c),
        };
        built.ok_or_else(|| SimError::NotUsable {
            id: match drawn {
                Drawn::Family(d) => d.id.clone(),
                Drawn::Canonical(c) => c.id.clone(),
            },
        })
    }

    /// Model time between consecutive recorded samples (`interval × thinning`; maps count
    /// iterations). The CSV's `t` column is the sample index; multiply by this for model time.
    pub fn sample_interval(&self) -> f64 {
        match &self.drawn {
            Drawn::Family(d) => d.interval * d.thinning as f64,
            Drawn::Canonical(c) => c
                .params
                .iter()
                .find(|(k, _)| k == "interval")
                .map_or(1.0, |(_, v)| *v),
        }
    }

    /// The series as CSV: header `t,<variables>`, `t` the sample index, missing cells empty.
    pub fn to_csv_string(&self) -> String {
        render::system_csv(self)
    }
}

fn build(drawn: &DrawnParams) -> Option<System> {
    let (_, offset) = graph::Graph::of(drawn);
    let cols = graph::observed_columns(drawn, &offset);
    let idx: Vec<usize> = cols.iter().map(|c| c.3).collect();
    let clean = run::integrate(drawn, &idx).ok()?;
    Some(System {
        id: drawn.id.clone(),
        family: drawn.family.as_str().to_string(),
        structure: drawn.structure.as_str().to_string(),
        variables: cols.into_iter().map(|c| c.0).collect(),
        series: run::observe(drawn, clean),
        truth: graph::truth(drawn),
        drawn: Drawn::Family(drawn.clone()),
    })
}

fn build_canonical(drawn: &CanonicalDraw) -> Option<System> {
    let built = canonical::build(drawn).ok()?;
    Some(System {
        id: drawn.id.clone(),
        family: format!("canon_{}", drawn.form.as_str()),
        structure: drawn.variant.clone(),
        variables: built.names,
        series: built.series,
        truth: built.truth,
        drawn: Drawn::Canonical(drawn.clone()),
    })
}

/// Simulates system `index` of the spec alone (identical to its place in [`simulate`]).
pub fn simulate_one(spec: &ValidSpec, index: usize) -> Result<System, SimError> {
    let total = spec.total_count();
    if index >= total {
        return Err(SimError::NoSuchSystem { index, total });
    }
    let family = match drawn::family_of(spec, index) {
        Some(family) => {
            for attempt in 0..MAX_ATTEMPTS {
                if let Some(s) = build(&drawn::draw(spec, index, attempt)) {
                    return Ok(s);
                }
            }
            family.as_str()
        }
        // Canonical systems are numbered after every family system.
        None => {
            for attempt in 0..MAX_ATTEMPTS {
                if let Some(s) = build_canonical(&canonical::draw(spec, index, attempt)) {
                    return Ok(s);
                }
            }
            "canonical"
        }
    };
    Err(SimError::Unusable {
        index,
        family,
        attempts: MAX_ATTEMPTS,
    })
}

/// Simulates every system of the spec, in index order, in parallel on the current rayon pool.
pub fn simulate(spec: &ValidSpec) -> Result<Vec<System>, SimError> {
    simulate_with_progress(spec, &|_| {})
}

/// As [`simulate`], calling `progress(done)` after each finished system, where `done` is the
/// number finished so far (calls may come from several threads, so values may arrive out of
/// order; the largest is the total).
pub fn simulate_with_progress(
    spec: &ValidSpec,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<Vec<System>, SimError> {
    let done = AtomicUsize::new(0);
    (0..spec.total_count())
        .into_par_iter()
        .map(|i| {
            let s = simulate_one(spec, i);
            progress(done.fetch_add(1, Ordering::Relaxed) + 1);
            s
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::HashSet;

    fn small() -> ValidSpec {
        Spec::from_toml_str(include_str!("../specs/small.toml")).unwrap()
    }

    #[test]
    fn every_family_simulates() {
        let mut text = String::from("seed = 11\n[sampling]\nlength = [60, 80]\ntransient = 100\n");
        for f in Family::ALL {
            text.push_str(&format!("[families.{}]\ncount = 4\n", f.as_str()));
        }
        let spec = Spec::from_toml_str(&text).unwrap();
        let systems = simulate(&spec).unwrap();
        assert_eq!(systems.len(), 32);
        let fams: HashSet<&str> = systems.iter().map(|s| s.family.as_str()).collect();
        assert_eq!(fams.len(), 8);
        for s in &systems {
            for col in &s.series {
                assert!(col.iter().all(|v| v.is_finite()), "{}", s.id);
            }
        }
    }

    #[test]
    fn hidden_variables_never_appear() {
        for s in simulate(&small()).unwrap() {
            let observed: usize = s
                .drawn
                .family()
                .unwrap()
                .units
                .iter()
                .map(|u| u.observed.len())
                .sum();
            assert_eq!(s.variables.len(), observed);
            assert_eq!(s.series.len(), observed);
            let header = s.to_csv_string().lines().next().unwrap().to_string();
            assert_eq!(header.split(',').count(), observed + 1);
            let hidden = s
                .drawn
                .family()
                .unwrap()
                .units
                .iter()
                .filter(|u| u.observed.is_empty())
                .count();
            if s.structure == "chain_hidden" || s.structure == "hidden_driver" {
                assert!(hidden >= 1);
            }
        }
    }

    #[test]
    fn truth_covers_every_ordered_pair() {
        for s in simulate(&small()).unwrap() {
            let pairs: HashSet<(&str, &str)> = s
                .truth
                .iter()
                .map(|t| (t.driver.as_str(), t.response.as_str()))
                .collect();
            for a in &s.variables {
                for b in &s.variables {
                    assert_eq!(pairs.contains(&(a.as_str(), b.as_str())), a != b);
                }
            }
            assert_eq!(pairs.len(), s.truth.len());
        }
    }

    #[test]
    fn same_seed_gives_identical_strings_across_thread_counts() {
        let spec = small();
        let render = |systems: &[System]| {
            let csv: String = systems.iter().map(|s| s.to_csv_string()).collect();
            (csv, truth_csv(systems), resolved_spec_json(&spec, systems))
        };
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let two = rayon::ThreadPoolBuilder::new()
            .num_threads(2)
            .build()
            .unwrap();
        let a = one.install(|| simulate(&spec)).unwrap();
        let b = two.install(|| simulate(&spec)).unwrap();
        assert_eq!(render(&a), render(&b));
        assert_eq!(render(&a), render(&simulate(&spec).unwrap()));
    }

    #[test]
    fn any_system_regenerates_alone() {
        let spec = small();
        let all = simulate(&spec).unwrap();
        let k = all.len() - 1;
        assert_eq!(simulate_one(&spec, k).unwrap(), all[k]);
        let json = serde_json::to_string(&all[k].drawn).unwrap();
        let drawn: Drawn = serde_json::from_str(&json).unwrap();
        assert_eq!(System::regenerate(&drawn).unwrap(), all[k]);
    }

    #[test]
    fn progress_reaches_total() {
        let spec = small();
        let max = AtomicUsize::new(0);
        let calls = AtomicUsize::new(0);
        simulate_with_progress(&spec, &|d| {
            max.fetch_max(d, Ordering::Relaxed);
            calls.fetch_add(1, Ordering::Relaxed);
        })
        .unwrap();
        assert_eq!(max.into_inner(), spec.total_count());
        assert_eq!(calls.into_inner(), spec.total_count());
    }

    #[test]
    fn out_of_range_index_is_an_error() {
        let spec = small();
        assert!(matches!(
            simulate_one(&spec, 10_000),
            Err(SimError::NoSuchSystem { .. })
        ));
    }

    #[test]
    fn missing_cells_become_nan() {
        let spec = Spec::from_toml_str(
            "seed = 3\n[sampling]\nlength = 200\nmissing = 0.1\n[families.ricker]\ncount = 2\n",
        )
        .unwrap();
        for s in simulate(&spec).unwrap() {
            let nan = s.series.iter().flatten().filter(|v| v.is_nan()).count();
            let all = s.series.iter().map(|c| c.len()).sum::<usize>();
            assert!(nan > all / 20 && nan < all / 5, "{nan} of {all}");
            assert!(s.to_csv_string().contains(",,") || s.to_csv_string().contains(",\n"));
        }
    }

    #[test]
    fn shipped_specs_parse() {
        let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/specs");
        let read = |n: &str| {
            Spec::from_toml_str(&std::fs::read_to_string(format!("{dir}/{n}")).unwrap()).unwrap()
        };
        let default = read("default.toml");
        assert!((900..=1500).contains(&default.total_count()));
        assert!(read("published.toml").canonical.count > 0);
        assert_ne!(read("published.toml").seed, default.seed);
        assert_eq!(read("small.toml").total_count(), 12);
        let lab = read("lab-example.toml");
        assert_eq!(lab.sampling.length, spec::IntRange::new(120, 120));
        assert_ne!(read("holdout.toml").seed, default.seed);
    }

    #[test]
    fn csv_reads_back_to_the_same_values() {
        let spec = small();
        for s in simulate(&spec).unwrap().iter().take(4) {
            let text = s.to_csv_string();
            let mut lines = text.lines();
            let header: Vec<&str> = lines.next().unwrap().split(',').collect();
            assert_eq!(header[0], "t");
            assert_eq!(
                &header[1..],
                s.variables
                    .iter()
                    .map(String::as_str)
                    .collect::<Vec<_>>()
                    .as_slice()
            );
            for (t, line) in lines.enumerate() {
                let cells: Vec<&str> = line.split(',').collect();
                assert_eq!(cells[0].parse::<usize>().unwrap(), t);
                for (v, cell) in cells[1..].iter().enumerate() {
                    assert_eq!(cell.parse::<f64>().unwrap(), s.series[v][t]);
                }
            }
        }
    }

    #[test]
    fn truth_csv_lists_every_system() {
        let systems = simulate(&small()).unwrap();
        let text = truth_csv(&systems);
        let rows: usize = systems.iter().map(|s| s.truth.len()).sum();
        assert_eq!(text.lines().count(), rows + 1);
        assert!(text.lines().skip(1).all(|l| {
            let label = l.rsplit(',').next().unwrap();
            ["direct", "indirect", "confounded", "independent"].contains(&label)
        }));
        let json: serde_json::Value =
            serde_json::from_str(&resolved_spec_json(&small(), &systems)).unwrap();
        assert_eq!(json["systems"].as_array().unwrap().len(), systems.len());
        assert_eq!(json["spec"]["seed"], 20260101);
    }

    /// The declared causal graph must match the equations: nudging one unit's initial state
    /// changes exactly the observed columns the graph says it reaches (noise switched off,
    /// so untouched columns stay bit-identical).
    #[test]
    fn graph_agrees_with_the_equations() {
        let mut text = String::from(
            "seed = 21\n[sampling]\nlength = 60\ntransient = 50\n[noise]\nobservation = 0\nprocess = 0\n",
        );
        for f in Family::ALL {
            text.push_str(&format!("[families.{}]\ncount = 6\n", f.as_str()));
        }
        let spec = Spec::from_toml_str(&text).unwrap();
        let mut checked = 0;
        for base in simulate(&spec).unwrap() {
            let base_drawn = base.drawn.family().unwrap();
            let (g, offset) = graph::Graph::of(base_drawn);
            let cols = graph::observed_columns(base_drawn, &offset);
            let dim = base_drawn.family.var_names().len();
            for (u, &off) in offset.iter().enumerate() {
                let mut d = base_drawn.clone();
                for v in d.units[u].initial.iter_mut() {
                    *v *= 1.0 + 1e-6;
                }
                let Ok(moved) = System::regenerate(&Drawn::Family(d.clone())) else {
                    continue;
                };
                for (c, col) in cols.iter().enumerate() {
                    let reached = col.1 == u || (0..dim).any(|k| g.reaches(off + k, col.3));
                    let changed = moved.series[c] != base.series[c];
                    assert_eq!(reached, changed, "{} unit {u} column {}", base.id, col.0);
                    checked += 1;
                }
            }
        }
        assert!(checked > 200, "{checked}");
    }

    #[test]
    fn large_networks_observe_one_column_per_unit() {
        let spec = Spec::from_toml_str(
            "seed = 3\n[network]\nunits = [10, 10]\n[structures]\none_way = 0\ntwo_way = 0\n\
             synchrony = 0\nchain_observed = 0\nchain_hidden = 0\nchain3 = 0\nhidden_driver = 0\n\
             shared_seasonality = 0\nshared_noise = 0\nindependent = 0\nsimilar_periods = 0\n\
             network = 1\n[families.ricker]\ncount = 2\n",
        )
        .unwrap();
        for system in simulate(&spec).unwrap() {
            assert_eq!(system.variables.len(), 10, "{}", system.id);
            assert_eq!(system.truth.len(), 90);
        }
    }

    #[test]
    fn clean_share_records_without_noise_or_gaps_and_leaves_other_draws_alone() {
        let base =
            "seed = 9\n[sampling]\nmissing = [0.1, 0.2]\n[noise]\nobservation = [0.1, 0.2]\n";
        let tail = "[families.henon]\ncount = 6\n";
        let noisy = simulate(&Spec::from_toml_str(&format!("{base}{tail}")).unwrap()).unwrap();
        let all_clean =
            simulate(&Spec::from_toml_str(&format!("{base}clean_share = 1.0\n{tail}")).unwrap())
                .unwrap();
        for (ns, cs) in noisy.iter().zip(&all_clean) {
            assert!(cs.series.iter().flatten().all(|v| v.is_finite()));
            let (n, c) = (ns.drawn.family().unwrap(), cs.drawn.family().unwrap());
            assert_eq!(c.observation_noise, 0.0);
            assert_eq!(c.process_noise, 0.0);
            assert_eq!(c.missing_fraction, 0.0);
            // Wiring and parameters are drawn before the clean coin: the same systems, unless
            // the blow-up guard redrew one of them.
            if n.attempt == c.attempt {
                assert_eq!(
                    (&ns.structure, &ns.variables),
                    (&cs.structure, &cs.variables)
                );
            }
            assert!(n.observation_noise > 0.0);
        }
    }
}
