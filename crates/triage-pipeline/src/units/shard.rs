//! Shards: which part of the work units one process computes, dealt round-robin.

use serde::{Deserialize, Serialize};

use super::error::UnitsError;

/// Which part of the work a process does: shard `index` of `count` (1-based).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct ShardSpec {
    /// 1-based shard index.
    pub index: usize,
    /// Number of shards.
    pub count: usize,
}

impl ShardSpec {
    /// The whole job in one shard.
    pub const WHOLE: ShardSpec = ShardSpec { index: 1, count: 1 };

    /// Parse `I/N`.
    pub fn parse(text: &str) -> Result<Self, UnitsError> {
        let bad = || UnitsError::BadShard(text.to_string());
        let (i, n) = text.split_once('/').ok_or_else(bad)?;
        let index: usize = i.trim().parse().map_err(|_| bad())?;
        let count: usize = n.trim().parse().map_err(|_| bad())?;
        if index == 0 || index > count {
            return Err(bad());
        }
        Ok(Self { index, count })
    }

    /// The units (response column indices) of this shard among `n_units`.
    ///
    /// Round-robin: unit `u` goes to shard `u mod N + 1`. Every unit costs about the same (one
    /// manifold's neighbour tables and its `n - 1` drivers), so shard sizes differ by at most one
    /// unit and so by at most one unit's time.
    pub fn units(&self, n_units: usize) -> Vec<usize> {
        (self.index - 1..n_units).step_by(self.count).collect()
    }

    /// The shard holding `unit`.
    pub fn of_unit(unit: usize, count: usize) -> usize {
        unit % count + 1
    }
}

impl std::fmt::Display for ShardSpec {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shard_units_round_robin_cover_once() {
        let mut all: Vec<usize> = (1..=4)
            .flat_map(|i| ShardSpec { index: i, count: 4 }.units(10))
            .collect();
        assert_eq!(ShardSpec { index: 2, count: 4 }.units(10), [1, 5, 9]);
        all.sort_unstable();
        assert_eq!(all, (0..10).collect::<Vec<_>>());
        assert_eq!(
            ShardSpec::parse("2/4").unwrap(),
            ShardSpec { index: 2, count: 4 }
        );
        for bad in ["0/4", "5/4", "2", "a/b", "1/0"] {
            assert!(ShardSpec::parse(bad).is_err(), "{bad}");
        }
    }
}
