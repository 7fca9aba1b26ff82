//! The unit store: a directory of unit files and its manifest, used for shards and checkpoints.

use std::collections::BTreeMap;
use std::path::Path;

use crossmap_engine::PairEnsemble;
use series_io::{JsonDocument, OutputDir};

use super::codec::{
    MANIFEST_FILE, StoreManifest, encode_unit, read_manifest, read_unit, seal_manifest,
    unit_file_name,
};
use super::error::UnitsError;

/// A directory of unit files plus its manifest.
#[derive(Debug, Clone)]
pub struct UnitStore {
    out: OutputDir,
}

impl UnitStore {
    /// Open (creating if needed) the store in `dir`.
    pub fn open(dir: impl AsRef<Path>) -> Result<Self, UnitsError> {
        let out = OutputDir::create(dir)?;
        Ok(Self { out })
    }

    /// Refuse, now and at every later write, to replace any of `inputs` (the files the run
    /// reads) with a file of the store; `names` are the extra files the caller will write.
    pub fn protect_inputs(self, inputs: &[&Path], names: &[&str]) -> Result<Self, UnitsError> {
        let mut all = vec![MANIFEST_FILE];
        all.extend_from_slice(names);
        Ok(Self {
            out: self.out.protect_inputs(inputs, &all)?,
        })
    }

    /// The store's directory.
    pub fn path(&self) -> &Path {
        self.out.path()
    }

    /// The output directory (for extra files such as `embedding.csv`).
    pub fn output(&self) -> &OutputDir {
        &self.out
    }

    /// The manifest, when one has been written.
    pub fn read_manifest(&self) -> Result<Option<StoreManifest>, UnitsError> {
        let path = self.path().join(MANIFEST_FILE);
        if !path.exists() {
            return Ok(None);
        }
        read_manifest(&path).map(Some)
    }

    /// Write (replace) the manifest atomically.
    pub fn write_manifest(&self, manifest: &StoreManifest) -> Result<(), UnitsError> {
        let sealed = seal_manifest(manifest);
        self.out.export(&JsonDocument {
            name: MANIFEST_FILE.into(),
            value: &sealed,
        })?;
        Ok(())
    }

    /// Prepare the store for `manifest`'s run: a fresh store gets the manifest; an existing one
    /// must be the same run (else [`UnitsError::Mismatch`]). Leftover temporary files of killed
    /// runs are removed. Returns the units already saved.
    pub fn begin(
        &self,
        manifest: &StoreManifest,
    ) -> Result<BTreeMap<usize, Vec<PairEnsemble>>, UnitsError> {
        match self.read_manifest()? {
            Some(found) => found.check_same_run(manifest, self.path(), true)?,
            None => self.write_manifest(manifest)?,
        }
        self.out.remove_stale_partials()?;
        let mut done = BTreeMap::new();
        for &unit in &manifest.units {
            let path = self.path().join(unit_file_name(unit));
            if path.exists() {
                let ensembles = read_unit(&path, unit, manifest)?;
                done.insert(unit, ensembles);
            }
        }
        Ok(done)
    }

    /// Save one finished unit of `manifest`'s run atomically.
    pub fn save_unit(
        &self,
        unit: usize,
        manifest: &StoreManifest,
        ensembles: &[PairEnsemble],
    ) -> Result<(), UnitsError> {
        let bytes = encode_unit(unit, manifest, ensembles).map_err(|e| UnitsError::Malformed {
            path: self.path().join(unit_file_name(unit)),
            reason: e.to_string(),
        })?;
        self.out.write_bytes(&unit_file_name(unit), &bytes)?;
        Ok(())
    }

    /// Read one saved unit, checked against the manifest.
    pub fn load_unit(
        &self,
        unit: usize,
        manifest: &StoreManifest,
    ) -> Result<Vec<PairEnsemble>, UnitsError> {
        read_unit(&self.path().join(unit_file_name(unit)), unit, manifest)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::codec::tests::{manifest, shaped_manifest};
    use crate::units::shard::ShardSpec;

    #[test]
    fn begin_refuses_another_run() {
        let dir = tempfile::tempdir().unwrap();
        let store = UnitStore::open(dir.path()).unwrap();
        let m = manifest(ShardSpec::WHOLE);
        assert!(store.begin(&m).unwrap().is_empty());
        let mut other = m.clone();
        other.settings = serde_json::json!({"seed": 2});
        let err = store.begin(&other).unwrap_err();
        assert!(err.to_string().contains("analysis settings"), "{err}");
        other = m.clone();
        other.input.sha256 = "cd".repeat(32);
        assert!(
            store
                .begin(&other)
                .unwrap_err()
                .to_string()
                .contains("input checksum")
        );
    }

    #[test]
    fn manifests_carry_their_checksums_and_name_what_differs() {
        let dir = tempfile::tempdir().unwrap();
        let store = UnitStore::open(dir.path()).unwrap();
        let m = shaped_manifest();
        store.write_manifest(&m).unwrap();
        assert_eq!(store.read_manifest().unwrap().unwrap(), m);
        let path = dir.path().join(MANIFEST_FILE);
        let mut v: serde_json::Value =
            serde_json::from_slice(&std::fs::read(&path).unwrap()).unwrap();
        v["manifest"]["settings"]["replicates"] = 3.into();
        std::fs::write(&path, serde_json::to_vec(&v).unwrap()).unwrap();
        let err = store.read_manifest().unwrap_err().to_string();
        assert!(
            err.contains("manifest.json") && err.contains("content checksum"),
            "{err}"
        );
        store.write_manifest(&m).unwrap();
        let mut other = m.clone();
        other.settings["seed"] = 3.into();
        let err = store.begin(&other).unwrap_err().to_string();
        assert!(
            err.contains("the analysis settings differ (seed: 1 in the files, 3 here)"),
            "{err}"
        );
    }
}
