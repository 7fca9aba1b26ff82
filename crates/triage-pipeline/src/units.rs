//! Work-unit files: one response manifold's ensembles saved losslessly, for shards and resume.
//!
//! A *unit store* is a directory holding `manifest.json` (what run the units belong to) and one
//! `unit-NNNNN.json` per finished unit (NNNNN = the response's column index). The same layout
//! serves a shard directory (`scan --shard I/N`) and a scan's `.checkpoint/`.
//!
//! Every manifest and unit file carries the SHA-256 of the input table, the SHA-256 of the
//! run's settings (resolved settings and flags) and the SHA-256 of its own content, so a file
//! from another run, a damaged file or an edited one is refused by name on resume and merge.
//! A unit's shape (one ensemble per other variable, the manifest's library sizes, replicate
//! count, lags and surrogate count) and its values (skills in [-1, 1] or NaN) are checked too.
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
pub const UNITS_VERSION: u32 = 3;

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
        "{dir}: {what} from {expected}; these files are from another run: delete {dir} or use another output directory"
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
    /// A shard directory given to merge belongs to another run than the first one.
    #[error(
        "{dir}: {what} from that of {first}; these shards come from different runs: give the shard directories of one run (same input, settings and shard count)"
    )]
    ForeignShard {
        /// The shard directory.
        dir: PathBuf,
        /// Which identity field differs.
        what: String,
        /// The first shard directory.
        first: PathBuf,
    },
    /// A folder given to merge is not a shard directory.
    #[error("{dir}: not a shard directory ({why}); give the folders written by `scan --shard I/N`")]
    NotAShard {
        /// The folder.
        dir: PathBuf,
        /// What it is instead.
        why: &'static str,
    },
    /// Shards of different shard counts were given to one merge.
    #[error(
        "{dir} is shard {index} of {count}, but {first} is a shard of {first_count}; every shard of one merge must come from the same --shard I/N count"
    )]
    ShardCount {
        /// The odd shard directory.
        dir: PathBuf,
        /// Its index.
        index: usize,
        /// Its count.
        count: usize,
        /// The first shard directory.
        first: PathBuf,
        /// The first one's count.
        first_count: usize,
    },
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
    /// The manifolds (units) a run with a pair selection computes; absent when it computes
    /// every one (so manifests without a selection keep their earlier form).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub manifolds: Option<Vec<usize>>,
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
                &format!(
                    "the file format ({} version {}) differs",
                    self.format, self.version
                ),
                format!("{} version {}", expected.format, expected.version),
            ));
        }
        if self.tool_version != expected.tool_version {
            return Err(mismatch(
                &format!("the tool version ({}) differs", self.tool_version),
                expected.tool_version.clone(),
            ));
        }
        if self.input.sha256 != expected.input.sha256 {
            return Err(mismatch(
                &format!("the input checksum ({}) differs", short(&self.input.sha256)),
                format!(
                    "{} ({})",
                    expected.input.path,
                    short(&expected.input.sha256)
                ),
            ));
        }
        if self.input.variables != expected.input.variables {
            return Err(mismatch(
                "the list of series differs",
                expected.input.path.clone(),
            ));
        }
        if self.settings != expected.settings || self.flags != expected.flags {
            let mut diffs = Vec::new();
            json_differences("", &self.settings, &expected.settings, &mut diffs);
            if diffs.is_empty() {
                // The flags resolve into the settings; name them only when nothing else differs.
                json_differences("flags.", &self.flags, &expected.flags, &mut diffs);
            }
            let shown = if diffs.is_empty() {
                String::new()
            } else {
                let more = diffs.len().saturating_sub(3);
                let mut list: Vec<String> = diffs.into_iter().take(3).collect();
                if more > 0 {
                    list.push(format!("and {more} more"));
                }
                format!(" ({})", list.join("; "))
            };
            return Err(mismatch(
                &format!("the analysis settings differ{shown}"),
                "the settings of this command".into(),
            ));
        }
        if same_shard && self.shard != expected.shard {
            return Err(mismatch(
                &format!("the shard ({}) differs", self.shard),
                format!("--shard {}", expected.shard),
            ));
        }
        Ok(())
    }
}

/// The settings that differ between `found` (a stored file) and `wanted` (this command), as
/// `path: X in the files, Y here`, depth first.
fn json_differences(
    prefix: &str,
    found: &serde_json::Value,
    wanted: &serde_json::Value,
    out: &mut Vec<String>,
) {
    use serde_json::Value;
    match (found, wanted) {
        (Value::Object(a), Value::Object(b)) => {
            let mut keys: Vec<&String> = a.keys().chain(b.keys()).collect();
            keys.sort();
            keys.dedup();
            for k in keys {
                let null = Value::Null;
                json_differences(
                    &format!("{prefix}{k}."),
                    a.get(k).unwrap_or(&null),
                    b.get(k).unwrap_or(&null),
                    out,
                );
            }
        }
        (a, b) if a != b => {
            let name = prefix.trim_end_matches('.');
            let show = |v: &Value| {
                let t = v.to_string();
                if t.len() > 40 {
                    format!("{}…", &t[..40])
                } else {
                    t
                }
            };
            out.push(format!(
                "{name}: {} in the files, {} here",
                show(a),
                show(b)
            ));
        }
        _ => {}
    }
}

/// SHA-256 of the run's settings: the resolved settings and the flags, as stored.
pub fn settings_sha256(settings: &serde_json::Value, flags: &serde_json::Value) -> String {
    let text = serde_json::to_vec(&serde_json::json!({"settings": settings, "flags": flags}))
        .unwrap_or_default();
    series_io::checksum::sha256_hex(&text)
}

impl StoreManifest {
    /// SHA-256 of this run's settings (see [`settings_sha256`]).
    pub fn settings_sha256(&self) -> String {
        settings_sha256(&self.settings, &self.flags)
    }
}

/// A manifest as stored: the manifest and its checksums.
#[derive(Debug, Serialize, Deserialize)]
struct SealedManifest {
    manifest: StoreManifest,
    settings_sha256: String,
    content_sha256: String,
}

fn content_sha256<T: Serialize>(value: &T) -> String {
    series_io::checksum::sha256_hex(&serde_json::to_vec(value).unwrap_or_default())
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
        let sealed = SealedManifest {
            settings_sha256: manifest.settings_sha256(),
            content_sha256: content_sha256(manifest),
            manifest: manifest.clone(),
        };
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
        let body = UnitBody {
            format: UNITS_FORMAT.into(),
            version: UNITS_VERSION,
            input_sha256: manifest.input.sha256.clone(),
            settings_sha256: manifest.settings_sha256(),
            response: unit,
            response_name: manifest.input.variables[unit].clone(),
            ensembles: ensembles.iter().map(StoredEnsemble::from).collect(),
        };
        let file = UnitFile {
            content_sha256: content_sha256(&body),
            body,
        };
        let bytes = serde_json::to_vec(&file).map_err(|e| UnitsError::Malformed {
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
    let sealed: SealedManifest = read_json(path)?;
    if sealed.content_sha256 != content_sha256(&sealed.manifest) {
        return Err(malformed(
            "its content checksum does not match: the file was damaged or edited".into(),
        ));
    }
    let m = sealed.manifest;
    if sealed.settings_sha256 != m.settings_sha256() {
        return Err(malformed(
            "its settings checksum does not match its settings".into(),
        ));
    }
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
    manifest: &StoreManifest,
) -> Result<Vec<PairEnsemble>, UnitsError> {
    let malformed = |reason: String| UnitsError::Malformed {
        path: path.to_path_buf(),
        reason,
    };
    let input = &manifest.input;
    let file: UnitFile = read_json(path)?;
    let body = file.body;
    if body.format != UNITS_FORMAT || body.version != UNITS_VERSION {
        return Err(malformed(format!(
            "format `{}` version {}, expected {UNITS_FORMAT} version {UNITS_VERSION}",
            body.format, body.version
        )));
    }
    if file.content_sha256 != content_sha256(&body) {
        return Err(malformed(
            "its content checksum does not match: the file was damaged or edited".into(),
        ));
    }
    if body.input_sha256 != input.sha256 {
        return Err(malformed("computed from another input file".into()));
    }
    if body.settings_sha256 != manifest.settings_sha256() {
        return Err(malformed(
            "computed with other settings than this run's (another seed or other options)".into(),
        ));
    }
    if body.response != unit || input.variables.get(unit) != Some(&body.response_name) {
        return Err(malformed(format!(
            "holds unit {} instead of {unit}",
            body.response
        )));
    }
    let n = input.variables.len();
    if body.ensembles.len() != n - 1 {
        return Err(malformed(format!(
            "holds {} pairs for response `{}`, the run has {} (one per other variable)",
            body.ensembles.len(),
            body.response_name,
            n - 1
        )));
    }
    let shape = UnitShape::of(manifest, unit);
    let mut seen = vec![false; n];
    let mut out = Vec::with_capacity(body.ensembles.len());
    for e in body.ensembles {
        let e = e.into_ensemble().map_err(malformed)?;
        if e.response != unit || e.driver >= n || e.driver == unit {
            return Err(malformed(format!(
                "pair {} -> {} out of place",
                e.driver, e.response
            )));
        }
        if std::mem::replace(&mut seen[e.driver], true) {
            return Err(malformed(format!(
                "pair {} -> {} appears twice",
                input.variables[e.driver], body.response_name
            )));
        }
        shape.check(&e).map_err(|why| {
            malformed(format!(
                "pair {} -> {}: {why}",
                input.variables[e.driver], body.response_name
            ))
        })?;
        out.push(e);
    }
    Ok(out)
}

/// What every ensemble of one unit must look like, from the manifest's resolved settings.
struct UnitShape {
    library_sizes: Option<Vec<usize>>,
    replicates: Option<usize>,
    max_lag: Option<usize>,
    surrogates: Option<usize>,
}

impl UnitShape {
    fn of(m: &StoreManifest, unit: usize) -> Self {
        let plan = &m.settings["per_response"][unit];
        let count = |v: &serde_json::Value| v.as_u64().map(|x| x as usize);
        Self {
            library_sizes: plan["library_sizes"]
                .as_array()
                .map(|a| a.iter().filter_map(count).collect()),
            replicates: count(&m.settings["replicates"]),
            max_lag: count(&plan["max_lag"]),
            surrogates: count(&m.settings["surrogates"]),
        }
    }

    fn check(&self, e: &PairEnsemble) -> Result<(), String> {
        if let Some(sizes) = &self.library_sizes
            && &e.library_sizes != sizes
        {
            return Err(format!(
                "library sizes {:?}, the run's are {:?}",
                e.library_sizes, sizes
            ));
        }
        if let Some(r) = self.replicates
            && let Some((k, row)) = e.skills.iter().enumerate().find(|(_, row)| row.len() != r)
        {
            return Err(format!(
                "{} replicates at library size {}, the run has {r}",
                row.len(),
                e.library_sizes[k]
            ));
        }
        if let Some(k) = self.max_lag {
            let k = k as i32;
            if e.lags != (-k..=k).collect::<Vec<_>>() {
                return Err(format!("lags other than -{k}..{k}"));
            }
        }
        if let Some(n) = self.surrogates
            && (e.surrogate_skills.len() != n || e.seasonal_surrogate_skills.len() != n)
        {
            return Err(format!(
                "{} + {} surrogate skills, the run has {n} of each kind",
                e.surrogate_skills.len(),
                e.seasonal_surrogate_skills.len()
            ));
        }
        // A skill is a correlation: within [-1, 1], or NaN where it is undefined.
        let out_of_range = |v: &[f64]| {
            v.iter()
                .copied()
                .find(|x| !x.is_nan() && !(-1.0..=1.0).contains(x))
        };
        for (k, row) in e.skills.iter().enumerate() {
            if let Some(x) = out_of_range(row) {
                return Err(format!(
                    "skill {x} at library size {} is outside [-1, 1]",
                    e.library_sizes[k]
                ));
            }
        }
        for (what, v) in [
            ("lag skill", &e.lag_skills),
            ("surrogate skill", &e.surrogate_skills),
            ("seasonal surrogate skill", &e.seasonal_surrogate_skills),
        ] {
            if let Some(x) = out_of_range(v) {
                return Err(format!("{what} {x} is outside [-1, 1]"));
            }
        }
        Ok(())
    }
}

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

/// A unit file: its content and the checksum of that content.
#[derive(Debug, Serialize, Deserialize)]
struct UnitFile {
    body: UnitBody,
    content_sha256: String,
}

#[derive(Debug, Serialize, Deserialize)]
struct UnitBody {
    format: String,
    version: u32,
    input_sha256: String,
    settings_sha256: String,
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
            manifolds: None,
        }
    }

    fn ensemble(driver: usize, response: usize) -> PairEnsemble {
        PairEnsemble {
            driver,
            response,
            library_sizes: vec![10, 20],
            // 0.1 + 0.2 has no short decimal; NaN is not a JSON number.
            skills: vec![vec![0.1 + 0.2, f64::NAN], vec![1.0, -1e-300]],
            lags: vec![-1, 0, 1],
            lag_skills: vec![0.5, 1.0 / 3.0, -1.0],
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
        let m = manifest(ShardSpec::WHOLE);
        store.save_unit(1, &m, &units).unwrap();
        let back = store.load_unit(1, &m).unwrap();
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
            store.load_unit(2, &m),
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

    /// A manifest whose settings fix the shape of every unit, as a real scan's do.
    fn shaped_manifest() -> StoreManifest {
        let mut m = manifest(ShardSpec::WHOLE);
        let plan = serde_json::json!({"library_sizes": [10, 20], "max_lag": 1});
        m.settings = serde_json::json!({
            "seed": 1, "replicates": 2, "surrogates": 1, "per_response": [plan, plan, plan],
        });
        m
    }

    fn saved_unit(dir: &Path, m: &StoreManifest) -> (UnitStore, PathBuf) {
        let store = UnitStore::open(dir).unwrap();
        let mut a = ensemble(0, 1);
        a.seasonal_surrogate_skills.pop();
        let mut b = ensemble(2, 1);
        b.seasonal_surrogate_skills.pop();
        store.save_unit(1, m, &[a, b]).unwrap();
        (store, dir.join(unit_file_name(1)))
    }

    /// Rewrite a unit file through `edit` on its JSON; with `reseal`, recompute its content
    /// checksum as a careful forger would.
    fn edit_unit(path: &Path, reseal: bool, edit: impl FnOnce(&mut serde_json::Value)) {
        let mut v: serde_json::Value =
            serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap();
        edit(&mut v["body"]);
        if reseal {
            let body: UnitBody = serde_json::from_value(v["body"].clone()).unwrap();
            v["content_sha256"] = content_sha256(&body).into();
        }
        std::fs::write(path, serde_json::to_vec(&v).unwrap()).unwrap();
    }

    fn refusal(store: &UnitStore, m: &StoreManifest) -> String {
        let err = store.load_unit(1, m).unwrap_err();
        assert!(matches!(err, UnitsError::Malformed { .. }), "{err}");
        let text = err.to_string();
        assert!(text.contains("unit-00001.json"), "{text}");
        text
    }

    #[test]
    fn damaged_or_forged_units_are_refused_by_name() {
        let dir = tempfile::tempdir().unwrap();
        let m = shaped_manifest();
        let (store, path) = saved_unit(dir.path(), &m);
        assert_eq!(store.load_unit(1, &m).unwrap().len(), 2);
        let original = std::fs::read(&path).unwrap();
        let restore = || std::fs::write(&path, &original).unwrap();

        // One ensemble deleted: silently 131 pairs instead of 132 before.
        edit_unit(&path, false, |b| {
            b["ensembles"].as_array_mut().unwrap().pop();
        });
        assert!(refusal(&store, &m).contains("content checksum"));
        edit_unit(&path, true, |_| {});
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"].as_array_mut().unwrap().pop();
        });
        assert!(refusal(&store, &m).contains("holds 1 pairs"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][0]["skills"][0][0] = "9.18".into()
        });
        assert!(refusal(&store, &m).contains("skill 9.18 at library size 10 is outside [-1, 1]"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][1]["skills"][1] = serde_json::json!(["0.5"])
        });
        assert!(refusal(&store, &m).contains("1 replicates at library size 20"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][1]["library_sizes"] = serde_json::json!([10, 99])
        });
        assert!(refusal(&store, &m).contains("library sizes [10, 99]"));
        restore();
        edit_unit(&path, true, |b| b["ensembles"][1]["driver"] = 0.into());
        assert!(refusal(&store, &m).contains("appears twice"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][0]["lag_skills"][0] = "inf".into()
        });
        assert!(refusal(&store, &m).contains("lag skill inf"));
        restore();
        assert_eq!(store.load_unit(1, &m).unwrap().len(), 2);

        // A unit of another seed copied in: refused, though its input is the same.
        let mut other = m.clone();
        other.settings["seed"] = 4.into();
        let elsewhere = tempfile::tempdir().unwrap();
        saved_unit(elsewhere.path(), &other);
        std::fs::copy(elsewhere.path().join(unit_file_name(1)), &path).unwrap();
        assert!(refusal(&store, &m).contains("other settings"));
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
