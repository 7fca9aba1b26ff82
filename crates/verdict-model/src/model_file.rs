//! The model file: a fixed header, then the bundle encoded with bincode 2 (serde).
//!
//! | offset | bytes | content |
//! |---|---|---|
//! | 0 | 8 | magic `89 56 52 44 4D 0D 0A 1A` ("\x89VRDM\r\n\x1a": a high byte and CR LF catch text-mode mangling) |
//! | 8 | 2 | format version, u16 little-endian ([`FORMAT_VERSION`]) |
//! | 10 | 2 | reserved, zero (a file with anything else there is refused) |
//! | 12 | 8 | payload length in bytes, u64 little-endian, at most [`PAYLOAD_LIMIT`] |
//! | 20 | 32 | SHA-256 of the payload |
//! | 52 | n | payload: the [`ModelBundle`] (feature names, schema hash, spec hash, heads, card with metrics) |
//!
//! All bincode use lives in this module so the encoding can be swapped. Encoding is
//! deterministic: the bundle holds only vectors and plain structs, no maps and no clock.
//!
//! Reading checks, in order: the file's type and size before any byte is read
//! ([`read_model_file`]), then magic, version, reserved bytes, claimed length and checksum,
//! then the decoded bundle's internal sizes and indices ([`ModelBundle::validate`]).

use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

use crate::{ModelBundle, ModelError};

/// First eight bytes of every model file.
pub const MAGIC: [u8; 8] = [0x89, b'V', b'R', b'D', b'M', b'\r', b'\n', 0x1a];
/// Format version written and read by this build.
pub const FORMAT_VERSION: u16 = 2;
/// Largest payload accepted, in bytes (64 MiB).
pub const PAYLOAD_LIMIT: usize = 64 * 1024 * 1024;
/// Header length in bytes.
pub const HEADER_LEN: usize = 52;
/// Largest model file accepted, in bytes: the header and the largest payload.
pub const FILE_LIMIT: u64 = (HEADER_LEN + PAYLOAD_LIMIT) as u64;

/// Reads and decodes the model file at `path`.
///
/// The file's type and size are checked before it is opened for reading: a FIFO, a device
/// (such as `/dev/zero`) or a directory is refused at once, as is a file larger than
/// [`FILE_LIMIT`]; the read itself is bounded by the same limit, so a file that grows while
/// being read cannot exhaust memory. Returns the bundle and the file's bytes (for its identity).
pub fn read_model_file(path: &Path) -> Result<(ModelBundle, Vec<u8>), ModelError> {
    let io = |source| ModelError::Io {
        path: path.to_path_buf(),
        source,
    };
    let meta = std::fs::metadata(path).map_err(io)?;
    if !meta.is_file() {
        return Err(ModelError::NotRegularFile {
            path: path.to_path_buf(),
            kind: file_kind(&meta),
        });
    }
    let too_large = |size| ModelError::FileTooLarge {
        path: path.to_path_buf(),
        size,
        limit: FILE_LIMIT,
    };
    if meta.len() > FILE_LIMIT {
        return Err(too_large(meta.len()));
    }
    let file = std::fs::File::open(path).map_err(io)?;
    let mut bytes = Vec::with_capacity(meta.len() as usize);
    file.take(FILE_LIMIT + 1)
        .read_to_end(&mut bytes)
        .map_err(io)?;
    if bytes.len() as u64 > FILE_LIMIT {
        return Err(too_large(bytes.len() as u64));
    }
    let bundle = ModelBundle::from_bytes(&bytes)?;
    Ok((bundle, bytes))
}

fn file_kind(meta: &std::fs::Metadata) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        let t = meta.file_type();
        if t.is_fifo() {
            return "a named pipe";
        }
        if t.is_char_device() || t.is_block_device() {
            return "a device";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    if meta.is_dir() {
        "a directory"
    } else {
        "not a plain file"
    }
}

/// A decoder error in plain words, without the decoder's internal names.
fn plain_decode_error(e: &bincode::error::DecodeError) -> String {
    use bincode::error::DecodeError as D;
    match e {
        D::UnexpectedEnd { .. } => "the payload ends in the middle of a value".into(),
        D::LimitExceeded => {
            "a length inside the payload is larger than the model size limit".into()
        }
        D::UnexpectedVariant { .. } | D::EmptyEnum { .. } => {
            "a choice field holds a value this build does not know".into()
        }
        D::Utf8 { .. } | D::InvalidCharEncoding(_) => "a text field is not valid UTF-8".into(),
        D::InvalidBooleanValue(b) => format!("a yes/no field holds the byte {b}, not 0 or 1"),
        D::OutsideUsizeRange(v) => format!("a size or index ({v}) is too large for this machine"),
        D::InvalidIntegerType { .. } | D::NonZeroTypeIsZero { .. } => {
            "a number field holds an invalid value".into()
        }
        _ => "its contents are not laid out as a model".into(),
    }
}

fn config() -> impl bincode::config::Config {
    bincode::config::standard().with_limit::<PAYLOAD_LIMIT>()
}

impl ModelBundle {
    /// Encodes the bundle as a model file.
    pub fn to_bytes(&self) -> Result<Vec<u8>, ModelError> {
        let payload = bincode::serde::encode_to_vec(self, config())
            .map_err(|e| ModelError::Encode(e.to_string()))?;
        Ok(frame_payload(&payload))
    }

    /// Decodes a model file, checking magic, version, reserved bytes, length limit, checksum
    /// and every internal size and index ([`ModelBundle::validate`]).
    pub fn from_bytes(bytes: &[u8]) -> Result<Self, ModelError> {
        let head = &bytes[..bytes.len().min(MAGIC.len())];
        if head != &MAGIC[..head.len()] {
            return Err(ModelError::ForeignFile);
        }
        if bytes.len() < HEADER_LEN {
            return Err(ModelError::Truncated {
                needed: HEADER_LEN,
                available: bytes.len(),
            });
        }
        let version = u16::from_le_bytes([bytes[8], bytes[9]]);
        if version != FORMAT_VERSION {
            return Err(ModelError::UnsupportedVersion {
                found: version,
                supported: FORMAT_VERSION,
            });
        }
        let reserved = u16::from_le_bytes([bytes[10], bytes[11]]);
        if reserved != 0 {
            return Err(ModelError::ReservedBytes { found: reserved });
        }
        let claimed = u64::from_le_bytes(bytes[12..20].try_into().expect("8 bytes"));
        if claimed > PAYLOAD_LIMIT as u64 {
            return Err(ModelError::TooLarge {
                claimed,
                limit: PAYLOAD_LIMIT as u64,
            });
        }
        let needed = HEADER_LEN + claimed as usize;
        if bytes.len() < needed {
            return Err(ModelError::Truncated {
                needed,
                available: bytes.len(),
            });
        }
        if bytes.len() > needed {
            return Err(ModelError::TrailingBytes {
                extra: bytes.len() - needed,
            });
        }
        let payload = &bytes[HEADER_LEN..];
        if Sha256::digest(payload).as_slice() != &bytes[20..52] {
            return Err(ModelError::ChecksumMismatch);
        }
        let (bundle, used): (ModelBundle, usize) =
            bincode::serde::decode_from_slice(payload, config())
                .map_err(|e| ModelError::Decode(plain_decode_error(&e)))?;
        if used != payload.len() {
            return Err(ModelError::TrailingBytes {
                extra: payload.len() - used,
            });
        }
        bundle.validate()?;
        Ok(bundle)
    }

    /// Decodes a model file and checks that it was trained under `schema_hash`.
    pub fn from_bytes_expecting(bytes: &[u8], schema_hash: &str) -> Result<Self, ModelError> {
        let m = Self::from_bytes(bytes)?;
        m.check_schema(schema_hash)?;
        Ok(m)
    }

    /// Identity of the model: SHA-256 (hex) of its file bytes, for run records.
    pub fn identity(&self) -> Result<String, ModelError> {
        Ok(crate::sha256_hex(&self.to_bytes()?))
    }
}

/// Frames `payload` as a model file with a correct header and checksum: the form a crafted
/// file takes when its author recomputes the checksum, for tests and fuzz targets.
pub fn frame_payload(payload: &[u8]) -> Vec<u8> {
    let mut out = Vec::with_capacity(HEADER_LEN + payload.len());
    out.extend_from_slice(&MAGIC);
    out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
    out.extend_from_slice(&0u16.to_le_bytes());
    out.extend_from_slice(&(payload.len() as u64).to_le_bytes());
    out.extend_from_slice(&Sha256::digest(payload));
    out.extend_from_slice(payload);
    out
}

/// Fuzz and property-test harness: loads `bytes` and panics on any broken guarantee.
///
/// A refused file must give a one-line message; an accepted one must re-save to bytes that
/// load again to the same bytes, and must predict on rows of ordinary values without panic
/// and with a probability in [0, 1] (or refuse the row with an error).
pub fn check_model_bytes(bytes: &[u8]) {
    match ModelBundle::from_bytes(bytes) {
        Err(err) => {
            let text = err.to_string();
            assert!(
                !text.is_empty() && !text.contains('\n'),
                "error is not one line: {text:?}"
            );
        }
        Ok(bundle) => {
            let saved = bundle.to_bytes().expect("an accepted model re-encodes");
            let again = ModelBundle::from_bytes(&saved).expect("a re-saved model loads");
            assert_eq!(
                saved,
                again.to_bytes().expect("re-encodes"),
                "save-load-save"
            );
            let names = bundle.feature_names.clone();
            for value in [0.0, 1.0, -3.5, 1e6] {
                let row: Vec<Option<f64>> = vec![Some(value); names.len()];
                let mut curve_row = vec![None; names.len()];
                if let Some(h) = &bundle.curve_only {
                    for &c in &h.columns {
                        curve_row[c] = Some(value);
                    }
                }
                for r in [row, curve_row] {
                    if let Ok(p) = bundle.predict(&names, &r) {
                        assert!(
                            (0.0..=1.0).contains(&p.p_causal),
                            "probability {} out of range",
                            p.p_causal
                        );
                        assert!(!p.ood_score.is_nan(), "distance is NaN");
                    }
                }
            }
        }
    }
}

/// The payload of a model file whose header is intact (for payload-editing harnesses).
pub fn payload_of(bytes: &[u8]) -> Option<&[u8]> {
    bytes.get(HEADER_LEN..)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tests_support::small_bundle;

    #[test]
    fn round_trip_keeps_predictions_and_bytes() {
        let (m, set) = small_bundle(3);
        let bytes = m.to_bytes().unwrap();
        let back = ModelBundle::from_bytes(&bytes).unwrap();
        assert_eq!(back.to_bytes().unwrap(), bytes);
        for row in set.rows.iter().take(10) {
            let a = m.predict(&set.feature_names, row).unwrap();
            let b = back.predict(&set.feature_names, row).unwrap();
            assert_eq!(a, b);
        }
    }

    #[test]
    fn every_corruption_has_its_error() {
        let (m, _) = small_bundle(3);
        let bytes = m.to_bytes().unwrap();

        let cut = &bytes[..bytes.len() - 5];
        assert!(matches!(
            ModelBundle::from_bytes(cut),
            Err(ModelError::Truncated { .. })
        ));
        assert!(matches!(
            ModelBundle::from_bytes(&bytes[..20]),
            Err(ModelError::Truncated { .. })
        ));

        let mut flipped = bytes.clone();
        let k = HEADER_LEN + (bytes.len() - HEADER_LEN) / 2;
        flipped[k] ^= 0x40;
        assert!(matches!(
            ModelBundle::from_bytes(&flipped),
            Err(ModelError::ChecksumMismatch)
        ));

        let mut foreign = bytes.clone();
        foreign[1] = b'X';
        assert!(matches!(
            ModelBundle::from_bytes(&foreign),
            Err(ModelError::ForeignFile)
        ));
        assert!(matches!(
            ModelBundle::from_bytes(b"{\"json\": 1}"),
            Err(ModelError::ForeignFile)
        ));

        let mut newer = bytes.clone();
        newer[8..10].copy_from_slice(&(FORMAT_VERSION + 1).to_le_bytes());
        assert!(matches!(
            ModelBundle::from_bytes(&newer),
            Err(ModelError::UnsupportedVersion { found, .. }) if found == FORMAT_VERSION + 1
        ));

        let mut huge = bytes.clone();
        huge[12..20].copy_from_slice(&u64::MAX.to_le_bytes());
        assert!(matches!(
            ModelBundle::from_bytes(&huge),
            Err(ModelError::TooLarge { .. })
        ));

        let mut longer = bytes.clone();
        longer.push(0);
        assert!(matches!(
            ModelBundle::from_bytes(&longer),
            Err(ModelError::TrailingBytes { extra: 1 })
        ));

        assert!(matches!(
            ModelBundle::from_bytes_expecting(&bytes, "another-schema"),
            Err(ModelError::SchemaMismatch { .. })
        ));
        assert!(ModelBundle::from_bytes_expecting(&bytes, &m.schema_hash).is_ok());
    }

    #[test]
    fn tree_ensemble_bundle_round_trips_deterministically() {
        use crate::forest::ForestParams;
        use crate::tests_support::synthetic;
        use crate::{Candidate, FitConfig, fit};
        let set = synthetic(2, 2, 4);
        let cfg = FitConfig {
            candidates: vec![Candidate::Forest(ForestParams {
                trees: 15,
                max_depth: 4,
                min_leaf: 2,
                feature_fraction: 0.75,
            })],
            ..FitConfig::default()
        };
        let m = fit(&set, &cfg).unwrap();
        assert!(matches!(m.full.scorer, crate::heads::Scorer::Forest(_)));
        let bytes = m.to_bytes().unwrap();
        assert_eq!(bytes, fit(&set, &cfg).unwrap().to_bytes().unwrap());
        let back = ModelBundle::from_bytes(&bytes).unwrap();
        let complete: Vec<Option<f64>> = set.rows[0].iter().map(|v| v.or(Some(0.0))).collect();
        assert_eq!(
            m.predict(&set.feature_names, &complete).unwrap(),
            back.predict(&set.feature_names, &complete).unwrap()
        );
    }

    #[test]
    fn same_seed_same_bytes_other_seed_other_bytes() {
        let a = small_bundle(3).0.to_bytes().unwrap();
        let b = small_bundle(3).0.to_bytes().unwrap();
        assert_eq!(a, b);
        let c = small_bundle(4).0.to_bytes().unwrap();
        assert_ne!(a, c);
    }
}

/// Crafted model files: a valid checksum over a payload whose parts do not fit together.
#[cfg(test)]
mod crafted {
    use std::sync::OnceLock;

    use proptest::prelude::*;

    use super::*;
    use crate::calibrate::Calibrator;
    use crate::forest::ForestParams;
    use crate::heads::Scorer;
    use crate::tests_support::{small_bundle, synthetic};
    use crate::{Candidate, FitConfig, fit};

    /// A scratch folder removed on drop (the crate has no temporary-file dependency).
    struct TempDir(std::path::PathBuf);

    impl TempDir {
        fn new() -> Self {
            let p = std::env::temp_dir().join(format!("verdict-model-test-{}", std::process::id()));
            std::fs::create_dir_all(&p).unwrap();
            TempDir(p)
        }
        fn path(&self) -> &Path {
            &self.0
        }
    }

    impl Drop for TempDir {
        fn drop(&mut self) {
            let _ = std::fs::remove_dir_all(&self.0);
        }
    }

    fn logistic_bytes() -> &'static [u8] {
        static B: OnceLock<Vec<u8>> = OnceLock::new();
        B.get_or_init(|| small_bundle(3).0.to_bytes().unwrap())
    }

    fn forest_bytes() -> &'static [u8] {
        static B: OnceLock<Vec<u8>> = OnceLock::new();
        B.get_or_init(|| {
            let set = synthetic(2, 2, 4);
            let cfg = FitConfig {
                candidates: vec![Candidate::Forest(ForestParams {
                    trees: 6,
                    max_depth: 3,
                    min_leaf: 2,
                    feature_fraction: 0.75,
                })],
                curve_only_names: vec!["skill_gain".into(), "noise".into()],
                ..FitConfig::default()
            };
            fit(&set, &cfg).unwrap().to_bytes().unwrap()
        })
    }

    /// Decode, edit, re-encode with a fresh checksum, and expect an `Inconsistent` refusal
    /// whose message contains `word`.
    fn refused_after(bytes: &[u8], word: &str, edit: impl FnOnce(&mut ModelBundle)) {
        let mut m = ModelBundle::from_bytes(bytes).unwrap();
        edit(&mut m);
        let crafted = m.to_bytes().unwrap();
        check_model_bytes(&crafted);
        match ModelBundle::from_bytes(&crafted) {
            Err(e @ ModelError::Inconsistent { .. }) => {
                assert!(e.to_string().contains(word), "{e}")
            }
            other => panic!("expected an inconsistency about {word}, got {other:?}"),
        }
    }

    fn edit_tree(m: &mut ModelBundle, edit: impl FnOnce(&mut serde_json::Value)) {
        let Scorer::Forest(f) = &mut m.full.scorer else {
            panic!("forest expected")
        };
        let t = &mut f.trees[0];
        let mut v = serde_json::to_value(&t.tree).unwrap();
        edit(&mut v);
        t.tree = serde_json::from_value(v).unwrap();
    }

    fn first_split(v: &serde_json::Value) -> usize {
        v["nodes"]
            .as_array()
            .unwrap()
            .iter()
            .position(|n| !n["true_child"].is_null())
            .expect("a tree with a split")
    }

    #[test]
    fn the_shipped_model_passes_every_check() {
        let bytes = std::fs::read(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../models/default-model.bin"
        ))
        .unwrap();
        ModelBundle::from_bytes(&bytes).unwrap().validate().unwrap();
        check_model_bytes(&bytes);
    }

    #[test]
    fn non_zero_reserved_bytes_are_refused() {
        let mut b = logistic_bytes().to_vec();
        b[10] = 1;
        let err = ModelBundle::from_bytes(&b).unwrap_err();
        assert!(
            matches!(err, ModelError::ReservedBytes { found: 1 }),
            "{err}"
        );
        assert!(err.to_string().contains("reserved"), "{err}");
    }

    #[test]
    fn inconsistent_sizes_of_a_logistic_model_are_refused() {
        let b = logistic_bytes();
        refused_after(b, "beyond the 4 feature names", |m| m.full.columns[0] = 47);
        refused_after(b, "appears twice", |m| {
            let c = m.full.columns[0];
            m.full.columns[1] = c;
        });
        refused_after(b, "standardiser's means", |m| {
            m.full.standardiser.mean.pop();
        });
        refused_after(b, "standardiser scale", |m| {
            m.full.standardiser.scale[0] = 0.0
        });
        refused_after(b, "logistic coefficients", |m| {
            if let Scorer::Logistic(l) = &mut m.full.scorer {
                l.coef.push(1.0);
            } else {
                m.full.standardiser.mean.push(1.0);
            }
        });
        refused_after(b, "familiarity matrix", |m| {
            m.full.ood.precision.pop();
        });
        refused_after(b, "four-label head", |m| {
            m.fine.as_mut().unwrap().model.coef[0].pop();
        });
        refused_after(b, "curve-only head", |m| {
            m.curve_only.as_mut().unwrap().columns.push(9);
        });
        refused_after(b, "isotonic", |m| {
            m.full.calibrator = Calibrator::Isotonic {
                model: crate::calibrate::IsotonicModel {
                    x: vec![0.1, 0.5],
                    y: vec![0.2],
                },
                floor: 0.01,
            }
        });
        refused_after(b, "feature names", |m| {
            m.feature_names[1] = m.feature_names[0].clone()
        });
        refused_after(b, "review band", |m| m.policy.band = (0.9, 0.1));
    }

    #[test]
    fn inconsistent_trees_are_refused() {
        let b = forest_bytes();
        refused_after(b, "beyond the head's", |m| {
            if let Scorer::Forest(f) = &mut m.full.scorer {
                *f.trees[0].columns.last_mut().unwrap() = 248;
            }
        });
        refused_after(b, "splits on feature 47", |m| {
            edit_tree(m, |v| {
                let k = first_split(v);
                v["nodes"][k]["split_feature"] = 47.into();
            })
        });
        refused_after(b, "not a later node", |m| {
            edit_tree(m, |v| {
                let k = first_split(v);
                v["nodes"][k]["true_child"] = k.into();
            })
        });
        refused_after(b, "not a later node", |m| {
            edit_tree(m, |v| {
                let k = first_split(v);
                v["nodes"][k]["false_child"] = 100_000.into();
            })
        });
        refused_after(b, "one child", |m| {
            edit_tree(m, |v| {
                let k = first_split(v);
                v["nodes"][k]["false_child"] = serde_json::Value::Null;
            })
        });
        refused_after(b, "classes", |m| {
            edit_tree(m, |v| v["nodes"][0]["output"] = 5.into())
        });
        refused_after(b, "classes 0 and 1", |m| {
            edit_tree(m, |v| v["classes"] = serde_json::json!([0, 7]))
        });
        refused_after(b, "grown on", |m| {
            edit_tree(m, |v| v["num_features"] = 45.into())
        });
    }

    #[test]
    fn decoder_errors_are_plain_words() {
        let b = logistic_bytes();
        let payload = payload_of(b).unwrap();
        let cut = frame_payload(&payload[..payload.len() / 2]);
        let text = ModelBundle::from_bytes(&cut).unwrap_err().to_string();
        assert!(text.contains("ends in the middle"), "{text}");
        for bad in ["UnexpectedEnd", "Utf8Error", "UnexpectedVariant", "{"] {
            assert!(!text.contains(bad), "{text}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 3000, ..ProptestConfig::default() })]

        /// Payload edits with the checksum recomputed: up to four bytes replaced anywhere in
        /// the payload of a logistic or a tree-ensemble model. The loader must refuse cleanly
        /// or accept a model that predicts without panic (the guarantees of
        /// [`check_model_bytes`]).
        #[test]
        fn payload_edits_never_panic(
            forest in any::<bool>(),
            edits in proptest::collection::vec((any::<prop::sample::Index>(), any::<u8>()), 1..5),
        ) {
            let base = if forest { forest_bytes() } else { logistic_bytes() };
            let mut payload = payload_of(base).unwrap().to_vec();
            for (at, byte) in edits {
                let k = at.index(payload.len());
                payload[k] = byte;
            }
            check_model_bytes(&frame_payload(&payload));
        }
    }

    #[test]
    fn a_device_a_pipe_and_a_huge_file_are_refused_before_reading() {
        let started = std::time::Instant::now();
        let err = read_model_file(Path::new("/dev/zero")).unwrap_err();
        assert!(
            matches!(
                err,
                ModelError::NotRegularFile {
                    kind: "a device",
                    ..
                }
            ),
            "{err}"
        );
        let dir = TempDir::new();
        let huge = dir.path().join("huge.bin");
        // A sparse 3 GB file: its size is known without writing or reading its bytes.
        std::fs::File::create(&huge)
            .unwrap()
            .set_len(3_000_000_000)
            .unwrap();
        let err = read_model_file(&huge).unwrap_err();
        assert!(
            matches!(
                err,
                ModelError::FileTooLarge {
                    size: 3_000_000_000,
                    ..
                }
            ),
            "{err}"
        );
        let fifo = dir.path().join("pipe.bin");
        let made = std::process::Command::new("mkfifo").arg(&fifo).status();
        if made.is_ok_and(|s| s.success()) {
            let err = read_model_file(&fifo).unwrap_err();
            assert!(
                matches!(
                    err,
                    ModelError::NotRegularFile {
                        kind: "a named pipe",
                        ..
                    }
                ),
                "{err}"
            );
        }
        let dir_err = read_model_file(dir.path()).unwrap_err();
        assert!(matches!(
            dir_err,
            ModelError::NotRegularFile {
                kind: "a directory",
                ..
            }
        ));
        // The threshold of the loader's contract: refusals in under 0.1 s.
        assert!(
            started.elapsed().as_secs_f64() < 0.1,
            "{:?}",
            started.elapsed()
        );
        let good = dir.path().join("good.bin");
        std::fs::write(&good, logistic_bytes()).unwrap();
        let (_, bytes) = read_model_file(&good).unwrap();
        assert_eq!(bytes, logistic_bytes());
    }
}
