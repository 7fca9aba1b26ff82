//! An estimate of a run's work from the table's shape and the resolved settings, made
//! before any cross map starts, so that a legal but enormous request is caught first.
//!
//! The counts are exact (pairs, stored values); time, memory and disk are rough models
//! calibrated on this tool's own runs (see the README's "Work estimate and budget").

use crossmap_engine::{Embedding, ValidParams};

/// Bytes of memory per stored skill value while a run holds its ensembles: the value
/// itself, its features and records, and the text of the result tables.
const MEMORY_BYTES_PER_VALUE: f64 = 40.0;
/// Bytes of checkpoint per stored skill value: shortest round-trip text in JSON.
const CHECKPOINT_BYTES_PER_VALUE: f64 = 22.0;
/// Bytes per neighbour-table entry (a library index and a weight).
const TABLE_BYTES_PER_ENTRY: f64 = 12.0;
/// Memory of the process before any table is built: code, the model, the input table.
const BASE_BYTES: f64 = 32.0 * 1024.0 * 1024.0;
/// Point estimates per second and core: 1.4e8 were measured on the 2-core development
/// machine under load (20 variables x 2,000 rows, default settings); rounded down.
const ESTIMATES_PER_SECOND: f64 = 1.0e8;

/// What a run will do, estimated before it starts.
#[derive(Debug, Clone, PartialEq)]
pub struct WorkEstimate {
    /// Ordered pairs this run computes.
    pub pairs: u64,
    /// Skill values it stores (ensembles, lag profiles, surrogates).
    pub values: u64,
    /// Cross-map point estimates it makes (each predictable point of each library, target).
    pub point_estimates: f64,
    /// Rough wall time in seconds on `threads` workers.
    pub seconds: f64,
    /// Rough peak memory in bytes.
    pub peak_memory: f64,
    /// Rough checkpoint size in bytes (the unit files).
    pub checkpoint: f64,
}

impl WorkEstimate {
    /// The work of computing `units` (response manifolds) of a table of `n_points` rows.
    pub fn of_units(
        units: &[usize],
        embeddings: &[Embedding],
        params: &ValidParams,
        threads: usize,
    ) -> Self {
        let n = embeddings.len();
        let drivers = n.saturating_sub(1) as f64;
        let reps = params.raw().replicates as f64;
        let surrogates = 2.0 * params.raw().surrogates as f64;
        let (mut values, mut estimates, mut biggest_tables) = (0.0, 0.0, 0.0_f64);
        for &u in units {
            let plan = &params.plans()[u];
            let usable = plan.usable as f64;
            let lags = (2 * plan.max_lag + 1) as f64;
            let sizes = plan.library_sizes.len() as f64;
            values += drivers * (sizes * reps + lags + surrogates);
            // Every table serves every driver at lag 0; the largest size also serves the
            // other lags and the surrogate drivers.
            estimates += drivers * usable * reps * (sizes + lags + surrogates);
            let e = embeddings[u].e as f64;
            // A worker holds the tables of one library size at a time.
            biggest_tables = biggest_tables.max(reps * usable * (e + 1.0));
        }
        let workers = threads.max(1).min(units.len().max(1)) as f64;
        Self {
            pairs: (units.len() as f64 * drivers) as u64,
            values: values as u64,
            point_estimates: estimates,
            seconds: estimates / (ESTIMATES_PER_SECOND * threads.max(1) as f64),
            peak_memory: BASE_BYTES
                + values * MEMORY_BYTES_PER_VALUE
                + workers * biggest_tables * TABLE_BYTES_PER_ENTRY,
            checkpoint: values * CHECKPOINT_BYTES_PER_VALUE,
        }
    }
}

impl std::fmt::Display for WorkEstimate {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{} ordered pairs, {:.1e} cross-map estimates (time {}), peak memory about {}, checkpoint about {}",
            self.pairs,
            self.point_estimates,
            duration(self.seconds),
            bytes(self.peak_memory),
            bytes(self.checkpoint)
        )
    }
}

/// A time as its order of magnitude, in words.
pub fn duration(s: f64) -> String {
    if s < 60.0 {
        "under a minute".into()
    } else if s < 3600.0 {
        format!("about {:.0} minutes", s / 60.0)
    } else if s < 86_400.0 {
        format!("about {:.1} hours", s / 3600.0)
    } else {
        format!("about {:.1} days", s / 86_400.0)
    }
}

/// A size in binary units.
pub fn bytes(b: f64) -> String {
    const UNITS: [&str; 5] = ["B", "KiB", "MiB", "GiB", "TiB"];
    let mut v = b;
    let mut k = 0;
    while v >= 1024.0 && k < UNITS.len() - 1 {
        v /= 1024.0;
        k += 1;
    }
    if k == 0 {
        format!("{v:.0} {}", UNITS[k])
    } else {
        format!("{v:.1} {}", UNITS[k])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crossmap_engine::CrossMapParams;

    fn emb() -> Embedding {
        Embedding {
            e: 2,
            tau: 1,
            simplex_skill: 0.9,
            skill_by_e: vec![0.8, 0.9],
            vectors_excluded: 0,
        }
    }

    #[test]
    fn counts_follow_the_shape_of_the_table() {
        let embeddings = vec![emb(); 4];
        let params = CrossMapParams::default()
            .with_replicates(10)
            .with_surrogates(5, None)
            .validate(200, &embeddings)
            .unwrap();
        let units: Vec<usize> = (0..4).collect();
        let w = WorkEstimate::of_units(&units, &embeddings, &params, 2);
        assert_eq!(w.pairs, 12);
        let plan = &params.plans()[0];
        let per_pair = plan.library_sizes.len() * 10 + 2 * plan.max_lag + 1 + 10;
        assert_eq!(w.values, (12 * per_pair) as u64);
        let half = WorkEstimate::of_units(&units[..2], &embeddings, &params, 2);
        assert_eq!(half.pairs, 6);
        assert!(w.to_string().starts_with("12 ordered pairs"), "{w}");
        assert_eq!(bytes(3.0 * 1024.0 * 1024.0), "3.0 MiB");
        assert_eq!(duration(7200.0), "about 2.0 hours");
    }
}
