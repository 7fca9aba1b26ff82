//! The file formats of a unit store: manifests, unit files, float encoding and checksums.

use std::path::Path;

use crossmap_engine::PairEnsemble;
use serde::{Deserialize, Serialize};
use series_io::format_f64;

use super::error::UnitsError;
use super::shard::ShardSpec;

/// Name of the manifest file inside a unit store.
pub const MANIFEST_FILE: &str = "manifest.json";
/// Format tag of manifests and unit files.
pub const UNITS_FORMAT: &str = "ccm-triage-units";
/// Version of the unit-store layout; readers refuse newer versions.
pub const UNITS_VERSION: u32 = 3;

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

/// `manifest` as stored: with the checksums of its settings and of its content.
pub(super) fn seal_manifest(manifest: &StoreManifest) -> impl Serialize {
    SealedManifest {
        settings_sha256: manifest.settings_sha256(),
        content_sha256: content_sha256(manifest),
        manifest: manifest.clone(),
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

/// Read one unit file, checked against the manifest: checksums, identity, shape and values.
pub(super) fn read_unit(
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

/// The bytes of unit `unit`'s file: its ensembles with the run's checksums, sealed.
pub(super) fn encode_unit(
    unit: usize,
    manifest: &StoreManifest,
    ensembles: &[PairEnsemble],
) -> Result<Vec<u8>, serde_json::Error> {
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
    serde_json::to_vec(&file)
}

#[cfg(test)]
pub(crate) mod tests {
    use std::path::PathBuf;

    use super::*;

    fn input() -> InputIdentity {
        InputIdentity {
            path: "d.csv".into(),
            sha256: "ab".repeat(32),
            variables: vec!["a".into(), "b".into(), "c".into()],
        }
    }

    pub(crate) fn manifest(shard: ShardSpec) -> StoreManifest {
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
    fn unit_round_trip_is_bit_exact() {
        let dir = tempfile::tempdir().unwrap();
        let units = vec![ensemble(0, 1), ensemble(2, 1)];
        let m = manifest(ShardSpec::WHOLE);
        let path = dir.path().join(unit_file_name(1));
        std::fs::write(&path, encode_unit(1, &m, &units).unwrap()).unwrap();
        let back = read_unit(&path, 1, &m).unwrap();
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
            read_unit(&dir.path().join(unit_file_name(2)), 2, &m),
            Err(UnitsError::Malformed { .. })
        ));
    }

    /// A manifest whose settings fix the shape of every unit, as a real scan's do.
    pub(crate) fn shaped_manifest() -> StoreManifest {
        let mut m = manifest(ShardSpec::WHOLE);
        let plan = serde_json::json!({"library_sizes": [10, 20], "max_lag": 1});
        m.settings = serde_json::json!({
            "seed": 1, "replicates": 2, "surrogates": 1, "per_response": [plan, plan, plan],
        });
        m
    }

    /// Unit 1 of `m` written into `dir` as the store writes it; returns the file's path.
    fn saved_unit(dir: &Path, m: &StoreManifest) -> PathBuf {
        let mut a = ensemble(0, 1);
        a.seasonal_surrogate_skills.pop();
        let mut b = ensemble(2, 1);
        b.seasonal_surrogate_skills.pop();
        let path = dir.join(unit_file_name(1));
        std::fs::write(&path, encode_unit(1, m, &[a, b]).unwrap()).unwrap();
        path
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

    fn refusal(path: &Path, m: &StoreManifest) -> String {
        let err = read_unit(path, 1, m).unwrap_err();
        assert!(matches!(err, UnitsError::Malformed { .. }), "{err}");
        let text = err.to_string();
        assert!(text.contains("unit-00001.json"), "{text}");
        text
    }

    #[test]
    fn damaged_or_forged_units_are_refused_by_name() {
        let dir = tempfile::tempdir().unwrap();
        let m = shaped_manifest();
        let path = saved_unit(dir.path(), &m);
        assert_eq!(read_unit(&path, 1, &m).unwrap().len(), 2);
        let original = std::fs::read(&path).unwrap();
        let restore = || std::fs::write(&path, &original).unwrap();

        // One ensemble deleted: silently 131 pairs instead of 132 before.
        edit_unit(&path, false, |b| {
            b["ensembles"].as_array_mut().unwrap().pop();
        });
        assert!(refusal(&path, &m).contains("content checksum"));
        edit_unit(&path, true, |_| {});
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"].as_array_mut().unwrap().pop();
        });
        assert!(refusal(&path, &m).contains("holds 1 pairs"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][0]["skills"][0][0] = "9.18".into()
        });
        assert!(refusal(&path, &m).contains("skill 9.18 at library size 10 is outside [-1, 1]"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][1]["skills"][1] = serde_json::json!(["0.5"])
        });
        assert!(refusal(&path, &m).contains("1 replicates at library size 20"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][1]["library_sizes"] = serde_json::json!([10, 99])
        });
        assert!(refusal(&path, &m).contains("library sizes [10, 99]"));
        restore();
        edit_unit(&path, true, |b| b["ensembles"][1]["driver"] = 0.into());
        assert!(refusal(&path, &m).contains("appears twice"));
        restore();
        edit_unit(&path, true, |b| {
            b["ensembles"][0]["lag_skills"][0] = "inf".into()
        });
        assert!(refusal(&path, &m).contains("lag skill inf"));
        restore();
        assert_eq!(read_unit(&path, 1, &m).unwrap().len(), 2);

        // A unit of another seed copied in: refused, though its input is the same.
        let mut other = m.clone();
        other.settings["seed"] = 4.into();
        let elsewhere = tempfile::tempdir().unwrap();
        saved_unit(elsewhere.path(), &other);
        std::fs::copy(elsewhere.path().join(unit_file_name(1)), &path).unwrap();
        assert!(refusal(&path, &m).contains("other settings"));
    }
}
