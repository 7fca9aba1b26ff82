//! Input and output formats for ccm-triage: the series table it reads, the curves table
//! (skill ensembles) it reads and writes, and the output directory every file goes through.
//!
//! - [`read_series`] / [`read_series_from`] stream a CSV series table into a validated
//!   [`SeriesTable`], with bounded memory and one-paragraph errors ([`InputError`]) that name
//!   the file, the row as numbered in the file (the header is row 1), the column and the fix.
//! - [`read_curves`], [`group_curves`] and [`write_curves`] handle `curves.csv`
//!   (`driver,response,library_size,replicate,skill`).
//! - [`OutputDir`] writes every output file atomically (temporary name, fsync, rename), and
//!   [`Export`] is the one trait each output format implements.
//!
//! ```
//! use series_io::{ReadOptions, read_series_from};
//!
//! let csv = "time,prey,predator\r\n0,1.5,0.2\r\n1,NA,0.3\r\n2,1.1,\"0.25\"\r\n";
//! let table = read_series_from(csv.as_bytes(), "demo.csv", &ReadOptions::default())?;
//! assert_eq!(table.names, ["prey", "predator"]);
//! assert_eq!(table.time.as_deref(), Some(&[0.0, 1.0, 2.0][..]));
//! assert_eq!(table.missing, [1, 0]);
//!
//! let err = read_series_from("t,a,b\n0,1,2\n1,x,3\n".as_bytes(), "bad.csv", &ReadOptions::default())
//!     .unwrap_err();
//! assert!(err.to_string().starts_with("bad.csv: row 3, column `a`: \"x\" is not a number."));
//! # Ok::<(), series_io::InputError>(())
//! ```
#![deny(missing_docs)]

mod cell;
pub mod checksum;
mod curves;
mod decisions;
mod error;
#[doc(hidden)]
pub mod fuzzing;
mod guard;
mod lock;
mod output;
mod records;
mod table;
mod timeaxis;

pub use cell::MISSING_TOKENS;
pub use curves::{
    CURVE_COLUMNS, CurvePair, CurvesCsv, CurvesOptions, DEFAULT_CURVES_MAX_ROWS,
    MAX_CURVE_LIBRARY_SIZES, group_curves, read_curve_pairs, read_curve_pairs_from, read_curves,
    read_curves_from, read_curves_with, write_curves,
};
pub use decisions::{
    DECISION_COLUMNS, Decision, DecisionFile, DecisionRow, FeatureRows, read_decisions,
    read_decisions_from, read_feature_rows,
};
pub use error::{InputError, OutputError};
pub use lock::{DirLock, LOCK_FILE, LockHolder, utc_timestamp, utc_timestamp_at};
pub use output::{
    CsvTable, Export, JsonDocument, OutputDir, TextDocument, format_f64, write_csv_rows,
};
pub use table::{
    DEFAULT_MAX_CELLS, DEFAULT_MAX_COLUMNS, DEFAULT_MAX_LINE_BYTES, DEFAULT_MAX_ROWS, ReadOptions,
    TIME_COLUMN_NAMES, read_series, read_series_from,
};
pub use timeaxis::{TimeAxis, TimeKind, UnevenSteps};

/// A validated table of series read from CSV.
///
/// Guarantees: at least two series; every column as long as the time axis (when present);
/// each series holds at least two present values that are not all equal; no infinities;
/// time values present and strictly increasing, in equal steps unless the reader was told
/// to accept uneven ones.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesTable {
    /// Name of the time column, when present.
    pub time_column: Option<String>,
    /// Time values, when a time column is present: the numbers as written, days since
    /// 1970-01-01 for dates, seconds since 1970-01-01T00:00 UTC for date-times.
    pub time: Option<Vec<f64>>,
    /// What was found about the time axis (kind, first and last time, usual step).
    pub time_axis: Option<TimeAxis>,
    /// Series names, in file order.
    pub names: Vec<String>,
    /// `columns[j][i]`: series j at row i; NaN marks a missing cell.
    pub columns: Vec<Vec<f64>>,
    /// Missing cells per series.
    pub missing: Vec<usize>,
    /// One-line warnings about the table that do not stop the run (a first column that
    /// looks like an unchosen time axis, uneven steps treated as equal or filled).
    pub warnings: Vec<String>,
    /// SHA-256 (hex) of the input bytes.
    pub sha256: String,
}

impl SeriesTable {
    /// Number of data rows (time points).
    pub fn n_rows(&self) -> usize {
        self.columns.first().map_or(0, Vec::len)
    }

    /// Number of series.
    pub fn n_series(&self) -> usize {
        self.names.len()
    }

    /// The values of the series called `name`.
    pub fn series(&self, name: &str) -> Option<&[f64]> {
        self.names
            .iter()
            .position(|n| n == name)
            .map(|j| self.columns[j].as_slice())
    }

    /// Missing cells over all series.
    pub fn total_missing(&self) -> usize {
        self.missing.iter().sum()
    }
}

/// One ensemble member, a row of `curves.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveRow {
    /// Driver name.
    pub driver: String,
    /// Response name.
    pub response: String,
    /// Library size.
    pub library_size: usize,
    /// Replicate index.
    pub replicate: usize,
    /// Cross-map skill (may be NaN).
    pub skill: f64,
}
