//! The model file: a fixed header, then the bundle encoded with bincode 2 (serde).
//!
//! | offset | bytes | content |
//! |---|---|---|
//! | 0 | 8 | magic `89 56 52 44 4D 0D 0A 1A` ("\x89VRDM\r\n\x1a": a high byte and CR LF catch text-mode mangling) |
//! | 8 | 2 | format version, u16 little-endian ([`FORMAT_VERSION`]) |
//! | 10 | 2 | reserved, zero |
//! | 12 | 8 | payload length in bytes, u64 little-endian, at most [`PAYLOAD_LIMIT`] |
//! | 20 | 32 | SHA-256 of the payload |
//! | 52 | n | payload: the [`ModelBundle`] (feature names, schema hash, spec hash, heads, card with metrics) |
//!
//! All bincode use lives in this module so the encoding can be swapped. Encoding is
//! deterministic: the bundle holds only vectors and plain structs, no maps and no clock.

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

fn config() -> impl bincode::config::Config {
    bincode::config::standard().with_limit::<PAYLOAD_LIMIT>()
}

impl ModelBundle {
    /// Encodes the bundle as a model file.
    pub fn to_bytes(&self) -> Result<Vec<u8>, ModelError> {
        let payload = bincode::serde::encode_to_vec(self, config())
            .map_err(|e| ModelError::Encode(e.to_string()))?;
        let mut out = Vec::with_capacity(HEADER_LEN + payload.len());
        out.extend_from_slice(&MAGIC);
        out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
        out.extend_from_slice(&0u16.to_le_bytes());
        out.extend_from_slice(&(payload.len() as u64).to_le_bytes());
        out.extend_from_slice(&Sha256::digest(&payload));
        out.extend_from_slice(&payload);
        Ok(out)
    }

    /// Decodes a model file, checking magic, version, length limit and checksum.
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
                .map_err(|e| ModelError::Decode(e.to_string()))?;
        if used != payload.len() {
            return Err(ModelError::TrailingBytes {
                extra: payload.len() - used,
            });
        }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::tests::small_bundle;

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
        use crate::fit::tests::synthetic;
        use crate::forest::ForestParams;
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
        assert!(matches!(m.full.scorer, crate::fit::Scorer::Forest(_)));
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
