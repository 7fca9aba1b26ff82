//! Merging shards: checking that shard stores belong together, then reading their units.

use std::path::PathBuf;

use crossmap_engine::PairEnsemble;

use super::codec::{MANIFEST_FILE, StoreManifest, read_manifest, read_unit, unit_file_name};
use super::error::UnitsError;
use super::shard::ShardSpec;

/// Where each unit of a merge comes from.
#[derive(Debug, Clone, PartialEq)]
pub struct MergePlan {
    /// The first shard's manifest (all are the same run).
    pub manifest: StoreManifest,
    /// `sources[u]`: index (into the given directories) of the shard holding unit `u`
    /// (unused for units outside `units`).
    pub sources: Vec<usize>,
    /// The units the run computes, ascending: every unit, or the manifolds its pair selection
    /// needs.
    pub units: Vec<usize>,
}

/// Check that shard stores belong together and hold every unit exactly once.
pub fn plan_merge(dirs: &[PathBuf]) -> Result<MergePlan, UnitsError> {
    let Some(first_dir) = dirs.first() else {
        return Err(UnitsError::NoShards);
    };
    let mut manifests = Vec::with_capacity(dirs.len());
    for dir in dirs {
        let path = dir.join(MANIFEST_FILE);
        if !path.is_file() {
            let why = if !dir.is_dir() {
                "no such folder"
            } else if dir.join("run.json").is_file() {
                "it is the folder of a finished scan; merge reads the folders of `scan --shard` runs"
            } else {
                "it holds no manifest.json"
            };
            return Err(UnitsError::NotAShard {
                dir: dir.clone(),
                why,
            });
        }
        manifests.push(read_manifest(&path)?);
    }
    let first = manifests[0].clone();
    let n = first.input.variables.len();
    let mut sources: Vec<Option<usize>> = vec![None; n];
    for (k, (dir, m)) in dirs.iter().zip(&manifests).enumerate() {
        if m.shard.count != first.shard.count {
            return Err(UnitsError::ShardCount {
                dir: dir.clone(),
                index: m.shard.index,
                count: m.shard.count,
                first: first_dir.clone(),
                first_count: first.shard.count,
            });
        }
        m.check_same_run(&first, dir, false).map_err(|e| match e {
            UnitsError::Mismatch { dir, what, .. } => UnitsError::ForeignShard {
                dir,
                what,
                first: first_dir.clone(),
            },
            other => other,
        })?;
        if !m.complete {
            return Err(UnitsError::Incomplete {
                dir: dir.clone(),
                index: m.shard.index,
                count: m.shard.count,
            });
        }
        for &u in &m.units {
            if let Some(j) = sources[u] {
                return Err(UnitsError::Duplicate {
                    unit: u,
                    name: first.input.variables[u].clone(),
                    first: dirs[j].clone(),
                    second: dir.clone(),
                });
            }
            sources[u] = Some(k);
        }
    }
    let expected: Vec<usize> = first.manifolds.clone().unwrap_or_else(|| (0..n).collect());
    let missing: Vec<usize> = expected
        .iter()
        .copied()
        .filter(|&u| u < n && sources[u].is_none())
        .collect();
    if !missing.is_empty() {
        let names: Vec<&str> = missing
            .iter()
            .map(|&u| first.input.variables[u].as_str())
            .collect();
        let mut shards: Vec<usize> = missing
            .iter()
            .map(|&u| ShardSpec::of_unit(u, first.shard.count))
            .collect();
        shards.dedup();
        shards.sort_unstable();
        shards.dedup();
        let shards: Vec<String> = shards.iter().map(usize::to_string).collect();
        return Err(UnitsError::Missing {
            names: names.join(", "),
            shards: shards.join(", "),
            count: first.shard.count,
        });
    }
    Ok(MergePlan {
        manifest: first,
        sources: sources.into_iter().map(|s| s.unwrap_or_default()).collect(),
        units: expected,
    })
}

/// Every unit of a checked merge, read from its shard directory, in unit order.
pub fn load_merge(dirs: &[PathBuf], plan: &MergePlan) -> Result<Vec<PairEnsemble>, UnitsError> {
    let mut all = Vec::new();
    for &u in &plan.units {
        let k = plan.sources[u];
        all.extend(read_unit(
            &dirs[k].join(unit_file_name(u)),
            u,
            &plan.manifest,
        )?);
    }
    Ok(all)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::codec::tests::manifest;
    use crate::units::store::UnitStore;

    #[test]
    fn merge_plan_checks_coverage() {
        let root = tempfile::tempdir().unwrap();
        let dirs: Vec<PathBuf> = (1..=2).map(|i| root.path().join(format!("s{i}"))).collect();
        for (i, d) in dirs.iter().enumerate() {
            let store = UnitStore::open(d).unwrap();
            store
                .write_manifest(&manifest(ShardSpec {
                    index: i + 1,
                    count: 2,
                }))
                .unwrap();
        }
        let plan = plan_merge(&dirs).unwrap();
        assert_eq!(plan.sources, [0, 1, 0]);
        let err = plan_merge(&dirs[..1]).unwrap_err();
        assert!(matches!(err, UnitsError::Missing { .. }), "{err}");
        assert!(err.to_string().contains("shards 2 of 2"), "{err}");
        let twice = vec![dirs[0].clone(), dirs[0].clone(), dirs[1].clone()];
        assert!(matches!(
            plan_merge(&twice),
            Err(UnitsError::Duplicate { .. })
        ));
        let mut m = manifest(ShardSpec { index: 2, count: 2 });
        m.complete = false;
        UnitStore::open(&dirs[1])
            .unwrap()
            .write_manifest(&m)
            .unwrap();
        assert!(matches!(
            plan_merge(&dirs),
            Err(UnitsError::Incomplete { .. })
        ));
        assert!(matches!(plan_merge(&[]), Err(UnitsError::NoShards)));
    }

    #[test]
    fn merge_names_a_scan_folder_and_a_different_shard_count() {
        let root = tempfile::tempdir().unwrap();
        let scan = root.path().join("scan");
        std::fs::create_dir(&scan).unwrap();
        std::fs::write(scan.join("run.json"), "{}").unwrap();
        let err = plan_merge(&[scan]).unwrap_err().to_string();
        assert!(err.contains("finished scan"), "{err}");
        assert!(!err.contains("delete"), "{err}");
        let a = root.path().join("a");
        let b = root.path().join("b");
        UnitStore::open(&a)
            .unwrap()
            .write_manifest(&manifest(ShardSpec { index: 1, count: 2 }))
            .unwrap();
        UnitStore::open(&b)
            .unwrap()
            .write_manifest(&manifest(ShardSpec { index: 2, count: 3 }))
            .unwrap();
        let err = plan_merge(&[a, b]).unwrap_err();
        assert!(
            matches!(
                err,
                UnitsError::ShardCount {
                    count: 3,
                    first_count: 2,
                    ..
                }
            ),
            "{err}"
        );
        assert!(!err.to_string().contains("delete"), "{err}");
    }
}
