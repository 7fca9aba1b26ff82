//! Work-unit files: one response manifold's ensembles saved losslessly, for shards and resume.
//!
//! A *unit store* is a directory holding `manifest.json` (what run the units belong to) and one
//! `unit-NNNNN.json` per finished unit (NNNNN = the response's column index). The same layout
//! serves a shard directory (`scan --shard I/N`) and a scan's `.checkpoint/`.
//!
//! Floats are stored as strings in shortest round-trip form ([`series_io::format_f64`]) and read
//! back with Rust's exact decimal parser, so a unit read from disk is bit-identical to the one
//! computed (NaN and infinities included, which JSON numbers cannot carry).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crossmap_engine::PairEnsemble;
use serde::{Deserialize, Serialize};
use series_io::{JsonDocument, OutputDir, format_f64};

/// Name of the manifest file inside a unit store.
pub const MANIFEST_FILE: &str = "manifest.json";
/// Format tag of manifests and unit files.
pub const UNITS_FORMAT: &str = "ccm-triage-units";
/// Version of the unit-store layout; readers refuse newer versions.
pub const UNITS_VERSION: u32 = 2;

/// Errors of unit stores and shard merging.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum UnitsError {
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// Why.
        #[source]
        source: std::io::Error,
    },
    /// Writing through the output directory failed.
    #[error(transparent)]
    Output(#[from] series_io::OutputError),
    /// A file is not a valid manifest or unit file.
    #[error(
        "{path}: not a valid unit file or manifest ({reason}); delete it and rerun the scan that made it"
    )]
    Malformed {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        reason: String,
    },
    /// A store belongs to another input or other settings than expected.
    #[error(
        "{dir}: {what} differs from {expected}; these files are from another run: delete {dir} or use another output directory"
    )]
    Mismatch {
        /// The unit store.
        dir: PathBuf,
        /// Which identity field differs.
        what: String,
        /// What it was compared with.
        expected: String,
    },
    /// A shard directory was never finished.
    #[error(
        "{dir}: shard {index}/{count} is incomplete; rerun its `scan --shard {index}/{count}` command (it resumes) before merging"
    )]
    Incomplete {
        /// The shard directory.
        dir: PathBuf,
        /// Its shard index (1-based).
        index: usize,
        /// Its shard count.
        count: usize,
    },
    /// A unit is present in two shard directories.
    #[error(
        "response `{name}` (unit {unit}) is in both {first} and {second}; pass each shard directory once"
    )]
    Duplicate {
        /// The unit (response column index).
        unit: usize,
        /// The response's name.
        name: String,
        /// One directory holding it.
        first: PathBuf,
        /// The other.
        second: PathBuf,
    },
    /// Some units are in no shard directory.
    #[error(
        "no shard holds the responses {names}; add the missing shard directories (shards {shards} of {count})"
    )]
    Missing {
        /// Missing response names, comma-separated.
        names: String,
        /// The shards (I/N numbering of the first manifest) that would hold them.
        shards: String,
        /// Shard count of the first manifest.
        count: usize,
    },
    /// `--shard` text could not be parsed.
    #[error("--shard `{0}`: give I/N with 1 <= I <= N, e.g. --shard 2/4")]
    BadShard(String),
    /// Merge was given no directories.
    #[error("give at least one shard directory to merge")]
    NoShards,
}

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

/// What a unit store belongs to; written as `manifest.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StoreManifest {
    /// Always [`UNITS_FORMAT`].
    pub format: String,
    /// Layout version ([`UNITS_VERSION`]).
    pub version: u32,
    /// Version of the tool that computed the units.
    pub tool_version: String,
    /// The input table as the scan read it.
    pub input: InputIdentity,
    /// The resolved analysis settings (as recorded in run.json).
    pub settings: serde_json::Value,
    /// The raw flags of the scan, so a merge can rebuild the same run record.
    pub flags: serde_json::Value,
    /// Which shard this store is.
    pub shard: ShardSpec,
    /// The units this store is to hold.
    pub units: Vec<usize>,
    /// True once every planned unit is saved.
    pub complete: bool,
}

/// The input a unit store was computed from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputIdentity {
    /// The path as given to the scan.
    pub path: String,
    /// SHA-256 (hex) of the input file's bytes.
    pub sha256: String,
    /// Series names, in column order (unit `u` is the response `variables[u]`).
    pub variables: Vec<String>,
}

impl StoreManifest {
    /// Check that `self` (found in `dir`) is the same run as `expected`: same format, input and
    /// settings, and (with `same_shard`) the same shard.
    pub fn check_same_run(
        &self,
        expected: &StoreManifest,
        dir: &Path,
        same_shard: bool,
    ) -> Result<(), UnitsError> {
        let mismatch = |what: &str, expected: String| UnitsError::Mismatch {
            dir: dir.to_path_buf(),
            what: what.to_string(),
            expected,
        };
        if self.format != expected.format || self.version != expected.version {
            return Err(mismatch(
                "the file format",
                format!("{} version {}", expected.format, expected.version),
            ));
        }
        if self.tool_version != expected.tool_version {
            return Err(mismatch("the tool version", expected.tool_version.clone()));
        }
        if self.input.sha256 != expected.input.sha256 {
            return Err(mismatch(
                &format!("the input checksum ({})", short(&self.input.sha256)),
                format!(
                    "{} ({})",
                    expected.input.path,
                    short(&expected.input.sha256)
                ),
            ));
        }
        if self.input.variables != expected.input.variables {
            return Err(mismatch("the list of series", expected.input.path.clone()));
        }
        if self.settings != expected.settings || self.flags != expected.flags {
            return Err(mismatch(
                "the analysis settings",
                "the settings of this command".into(),
            ));
        }
        if same_shard && self.shard != expected.shard {
            return Err(mismatch(
                &format!("the shard ({})", self.shard),
                format!("--shard {}", expected.shard),
            ));
        }
        Ok(())
    }
}

fn short(sha: &str) -> String {
    format!("sha256 {}…", &sha[..sha.len().min(12)])
}

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
        self.out.export(&JsonDocument {
            name: MANIFEST_FILE.into(),
            value: manifest,
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
                let ensembles = read_unit(&path, unit, &manifest.input)?;
                done.insert(unit, ensembles);
            }
        }
        Ok(done)
    }

    /// Save one finished unit atomically.
    pub fn save_unit(
        &self,
        unit: usize,
        input: &InputIdentity,
        ensembles: &[PairEnsemble],
    ) -> Result<(), UnitsError> {
        let file = UnitFile {
            format: UNITS_FORMAT.into(),
            version: UNITS_VERSION,
            input_sha256: input.sha256.clone(),
            response: unit,
            response_name: input.variables[unit].clone(),
            ensembles: ensembles.iter().map(StoredEnsemble::from).collect(),
        };
        let bytes = serde_json::to_vec(&file).map_err(|e| UnitsError::Malformed {
            path: self.path().join(unit_file_name(unit)),
            reason: e.to_string(),
        })?;
        self.out.write_bytes(&unit_file_name(unit), &bytes)?;
        Ok(())
    }

    /// Read one saved unit, checked against the manifest's input.
    pub fn load_unit(
        &self,
        unit: usize,
        input: &InputIdentity,
    ) -> Result<Vec<PairEnsemble>, UnitsError> {
        read_unit(&self.path().join(unit_file_name(unit)), unit, input)
    }
}

/// File name of a unit.
pub fn unit_file_name(unit: usize) -> String {
    format!("unit-{unit:05}.json")
}

/// Read and parse one JSON file of a store; unreadable or unparsable files are typed errors.
fn read_json<T: serde::de::DeserializeOwned>(path: &Path) -> Result<T, UnitsError> {
    let bytes = std::fs::read(path).map_err(|source| UnitsError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    serde_json::from_slice(&bytes).map_err(|e| UnitsError::Malformed {
        path: path.to_path_buf(),
        reason: e.to_string(),
    })
}

/// Read a manifest file.
pub fn read_manifest(path: &Path) -> Result<StoreManifest, UnitsError> {
    let malformed = |reason: String| UnitsError::Malformed {
        path: path.to_path_buf(),
        reason,
    };
    let m: StoreManifest = read_json(path)?;
    if m.format != UNITS_FORMAT {
        return Err(malformed(format!(
            "format `{}`, expected `{UNITS_FORMAT}`",
            m.format
        )));
    }
    if m.version > UNITS_VERSION {
        return Err(malformed(format!(
            "layout version {} is newer than this tool's {UNITS_VERSION}; use a newer ccm-triage",
            m.version
        )));
    }
    let n = m.input.variables.len();
    if m.shard.index == 0 || m.shard.index > m.shard.count || m.units.iter().any(|&u| u >= n) {
        return Err(malformed("shard or unit numbers out of range".into()));
    }
    Ok(m)
}

fn read_unit(
    path: &Path,
    unit: usize,
    input: &InputIdentity,
) -> Result<Vec<PairEnsemble>, UnitsError> {
    let malformed = |reason: String| UnitsError::Malformed {
        path: path.to_path_buf(),
        reason,
    };
    let file: UnitFile = read_json(path)?;
    if file.format != UNITS_FORMAT || file.version > UNITS_VERSION {
        return Err(malformed(format!(
            "format `{}` version {}",
            file.format, file.version
        )));
    }
    if file.input_sha256 != input.sha256 {
        return Err(malformed("computed from another input file".into()));
    }
    if file.response != unit || input.variables.get(unit) != Some(&file.response_name) {
        return Err(malformed(format!(
            "holds unit {} instead of {unit}",
            file.response
        )));
    }
    let n = input.variables.len();
    let mut out = Vec::with_capacity(file.ensembles.len());
    for e in file.ensembles {
        let e = e.into_ensemble().map_err(malformed)?;
        if e.response != unit || e.driver >= n || e.driver == unit {
            return Err(malformed(format!(
                "pair {} -> {} out of place",
                e.driver, e.response
            )));
        }
        out.push(e);
    }
    Ok(out)
}

/// Where each unit of a merge comes from.
#[derive(Debug, Clone, PartialEq)]
pub struct MergePlan {
    /// The first shard's manifest (all are the same run).
    pub manifest: StoreManifest,
    /// `sources[u]`: index (into the given directories) of the shard holding unit `u`.
    pub sources: Vec<usize>,
}

/// Check that shard stores belong together and hold every unit exactly once.
pub fn plan_merge(dirs: &[PathBuf]) -> Result<MergePlan, UnitsError> {
    let Some(first_dir) = dirs.first() else {
        return Err(UnitsError::NoShards);
    };
    let mut manifests = Vec::with_capacity(dirs.len());
    for dir in dirs {
        manifests.push(read_manifest(&dir.join(MANIFEST_FILE))?);
    }
    let first = manifests[0].clone();
    let n = first.input.variables.len();
    let mut sources: Vec<Option<usize>> = vec![None; n];
    for (k, (dir, m)) in dirs.iter().zip(&manifests).enumerate() {
        m.check_same_run(&first, dir, false).map_err(|e| match e {
            UnitsError::Mismatch { dir, what, .. } => UnitsError::Mismatch {
                dir,
                what,
                expected: format!("that of {}", first_dir.display()),
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
    let missing: Vec<usize> = (0..n).filter(|&u| sources[u].is_none()).collect();
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
    })
}

/// Every unit of a checked merge, read from its shard directory, in unit order.
pub fn load_merge(dirs: &[PathBuf], plan: &MergePlan) -> Result<Vec<PairEnsemble>, UnitsError> {
    let mut all = Vec::new();
    for (u, &k) in plan.sources.iter().enumerate() {
        all.extend(read_unit(
            &dirs[k].join(unit_file_name(u)),
            u,
            &plan.manifest.input,
        )?);
    }
    Ok(all)
}

#[derive(Debug, Serialize, Deserialize)]
struct UnitFile {
    format: String,
    version: u32,
    input_sha256: String,
    response: usize,
    response_name: String,
    ensembles: Vec<StoredEnsemble>,
}

/// A [`PairEnsemble`] with its floats as round-trip strings.
#[derive(Debug, Serialize, Deserialize)]
struct StoredEnsemble {
    driver: usize,
    response: usize,
    library_sizes: Vec<usize>,
    skills: Vec<Vec<String>>,
    lags: Vec<i32>,
    lag_skills: Vec<String>,
    surrogate_skills: Vec<String>,
    seasonal_surrogate_skills: Vec<String>,
}

fn encode(v: &[f64]) -> Vec<String> {
    v.iter().map(|&x| format_f64(x)).collect()
}

fn decode(v: &[String]) -> Result<Vec<f64>, String> {
    v.iter()
        .map(|s| {
            s.parse::<f64>()
                .map_err(|_| format!("`{s}` is not a number"))
        })
        .collect()
}

impl From<&PairEnsemble> for StoredEnsemble {
    fn from(e: &PairEnsemble) -> Self {
        Self {
            driver: e.driver,
            response: e.response,
            library_sizes: e.library_sizes.clone(),
            skills: e.skills.iter().map(|s| encode(s)).collect(),
            lags: e.lags.clone(),
            lag_skills: encode(&e.lag_skills),
            surrogate_skills: encode(&e.surrogate_skills),
            seasonal_surrogate_skills: encode(&e.seasonal_surrogate_skills),
        }
    }
}

impl StoredEnsemble {
    fn into_ensemble(self) -> Result<PairEnsemble, String> {
        if self.skills.len() != self.library_sizes.len() || self.lags.len() != self.lag_skills.len()
        {
            return Err("array lengths disagree".into());
        }
        Ok(PairEnsemble {
            driver: self.driver,
            response: self.response,
            library_sizes: self.library_sizes,
            skills: self
                .skills
                .iter()
                .map(|s| decode(s))
                .collect::<Result<_, _>>()?,
            lags: self.lags,
            lag_skills: decode(&self.lag_skills)?,
            surrogate_skills: decode(&self.surrogate_skills)?,
            seasonal_surrogate_skills: decode(&self.seasonal_surrogate_skills)?,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input() -> InputIdentity {
        InputIdentity {
            path: "d.csv".into(),
            sha256: "ab".repeat(32),
            variables: vec!["a".into(), "b".into(), "c".into()],
        }
    }

    fn manifest(shard: ShardSpec) -> StoreManifest {
        StoreManifest {
            format: UNITS_FORMAT.into(),
            version: UNITS_VERSION,
            tool_version: "0".into(),
            input: input(),
            settings: serde_json::json!({"seed": 1}),
            flags: serde_json::json!({}),
            shard,
            units: shard.units(3),
            complete: true,
        }
    }

    fn ensemble(driver: usize, response: usize) -> PairEnsemble {
        PairEnsemble {
            driver,
            response,
            library_sizes: vec![10, 20],
            // 0.1 + 0.2 has no short decimal; NaN and infinities are not JSON numbers.
            skills: vec![vec![0.1 + 0.2, f64::NAN], vec![f64::INFINITY, -1e-300]],
            lags: vec![-1, 0, 1],
            lag_skills: vec![0.5, 1.0 / 3.0, f64::NEG_INFINITY],
            surrogate_skills: vec![5e-324],
            seasonal_surrogate_skills: vec![0.25, f64::NAN],
        }
    }

    fn bits(e: &PairEnsemble) -> Vec<u64> {
        let mut v: Vec<u64> = e.skills.iter().flatten().map(|x| x.to_bits()).collect();
        v.extend(e.lag_skills.iter().map(|x| x.to_bits()));
        v.extend(e.surrogate_skills.iter().map(|x| x.to_bits()));
        v.extend(e.seasonal_surrogate_skills.iter().map(|x| x.to_bits()));
        v
    }

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

    #[test]
    fn unit_round_trip_is_bit_exact() {
        let dir = tempfile::tempdir().unwrap();
        let store = UnitStore::open(dir.path()).unwrap();
        let units = vec![ensemble(0, 1), ensemble(2, 1)];
        store.save_unit(1, &input(), &units).unwrap();
        let back = store.load_unit(1, &input()).unwrap();
        assert_eq!(back.len(), 2);
        for (a, b) in units.iter().zip(&back) {
            assert_eq!(bits(a), bits(b));
            assert_eq!(
                (a.driver, a.response, &a.lags),
                (b.driver, b.response, &b.lags)
            );
        }
        // A unit file under the wrong number is refused.
        std::fs::rename(
            dir.path().join("unit-00001.json"),
            dir.path().join("unit-00002.json"),
        )
        .unwrap();
        assert!(matches!(
            store.load_unit(2, &input()),
            Err(UnitsError::Malformed { .. })
        ));
    }

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
}
