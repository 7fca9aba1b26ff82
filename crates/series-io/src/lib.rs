//! Input and output formats. INTERFACE SKETCH: the io work replaces every `todo!`.
#![deny(missing_docs)]

/// A validated table of series read from CSV.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesTable {
    /// Name of the time column, when present.
    pub time_column: Option<String>,
    /// Time values, when a time column is present.
    pub time: Option<Vec<f64>>,
    /// Series names, in file order.
    pub names: Vec<String>,
    /// `columns[j][i]`: series j at row i; NaN marks a missing cell.
    pub columns: Vec<Vec<f64>>,
    /// Missing cells per series.
    pub missing: Vec<usize>,
    /// SHA-256 (hex) of the input bytes.
    pub sha256: String,
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
