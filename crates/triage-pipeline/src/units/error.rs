//! The errors of unit stores, shard dealing and merging.

use std::path::PathBuf;

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
