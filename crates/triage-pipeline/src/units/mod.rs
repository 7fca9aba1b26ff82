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
//!
//! The jobs are split: [`ShardSpec`] deals units to shards, [`UnitStore`] keeps a store's
//! files (shards and checkpoints), [`plan_merge`] and [`load_merge`] gather shards, and the
//! codec owns the file formats and their checksums.

mod codec;
mod error;
mod merge;
mod shard;
mod store;

pub use codec::{
    InputIdentity, MANIFEST_FILE, StoreManifest, UNITS_FORMAT, UNITS_VERSION, read_manifest,
    settings_sha256, unit_file_name,
};
pub use error::UnitsError;
pub use merge::{MergePlan, load_merge, plan_merge};
pub use shard::ShardSpec;
pub use store::UnitStore;
