//! Streaming reader for the series table (`DATA.csv`): header, optional time axis, series.

use std::collections::HashMap;
use std::fs::File;
use std::io::Read;
use std::path::Path;

use csv::ByteRecord;

use crate::SeriesTable;
use crate::cell::{Cell, CellProblem, parse_number};
use crate::error::{InputError, show_cell, show_names};

/// Default limit on data rows (5 million: 40 MB per series at 8 bytes a value).
pub const DEFAULT_MAX_ROWS: usize = 5_000_000;
/// Default limit on numeric cells, rows times series (100 million: 800 MB of values).
pub const DEFAULT_MAX_CELLS: usize = 100_000_000;
/// Default limit on header columns (100,000: names and their index stay a few MB).
pub const DEFAULT_MAX_COLUMNS: usize = 100_000;
/// Default limit on one record's bytes (64 MiB).
pub const DEFAULT_MAX_LINE_BYTES: u64 = 64 * 1024 * 1024;

/// How to read a series table. Build with [`ReadOptions::default`] and the `with_` setters.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ReadOptions {
    /// Column to use as the time axis. `None`: a first column named `t` or `time` (any case)
    /// is the time axis, otherwise there is none.
    pub time_column: Option<String>,
    /// Most data rows accepted (header not counted); more is an error.
    pub max_rows: usize,
    /// Most numeric cells (data rows times series columns) accepted.
    pub max_cells: usize,
    /// Most header columns accepted.
    pub max_columns: usize,
    /// Most bytes in one record (one line, or several when a quoted field spans lines).
    pub max_line_bytes: u64,
}

impl Default for ReadOptions {
    fn default() -> Self {
        Self {
            time_column: None,
            max_rows: DEFAULT_MAX_ROWS,
            max_cells: DEFAULT_MAX_CELLS,
            max_columns: DEFAULT_MAX_COLUMNS,
            max_line_bytes: DEFAULT_MAX_LINE_BYTES,
        }
    }
}

impl ReadOptions {
    /// Use the named column as the time axis (it must exist).
    pub fn with_time_column(mut self, name: impl Into<String>) -> Self {
        self.time_column = Some(name.into());
        self
    }

    /// Set the data-row limit.
    pub fn with_max_rows(mut self, max_rows: usize) -> Self {
        self.max_rows = max_rows;
        self
    }

    /// Set the cell limit.
    pub fn with_max_cells(mut self, max_cells: usize) -> Self {
        self.max_cells = max_cells;
        self
    }

    /// Set the header-column limit.
    pub fn with_max_columns(mut self, max_columns: usize) -> Self {
        self.max_columns = max_columns;
        self
    }

    /// Set the per-record byte limit.
    pub fn with_max_line_bytes(mut self, max_line_bytes: u64) -> Self {
        self.max_line_bytes = max_line_bytes;
        self
    }
}

/// Read and validate a series table from a file; the path names the file in errors.
pub fn read_series(path: &Path, opts: &ReadOptions) -> Result<SeriesTable, InputError> {
    let name = path.display().to_string();
    let file = File::open(path).map_err(|source| InputError::Io {
        file: name.clone(),
        source,
    })?;
    read_series_from(file, &name, opts)
}

/// Read and validate a series table from any reader; `source_name` names it in errors.
///
/// Rows are streamed: memory holds one record plus one `f64` per cell, and the limits in
/// `opts` stop oversized input early. The SHA-256 covers every input byte, BOM included.
///
/// # Format and rules (each broken rule is the [`InputError`] variant named)
///
/// - Comma-separated, RFC 4180 quoting (`"a,b"`, `""` for a quote, quoted line breaks);
///   LF, CRLF or CR line ends; blank lines skipped; a leading UTF-8 BOM dropped; spaces
///   around names and numbers ignored. Rows are numbered as in the file, header = row 1.
/// - A header is required ([`Empty`](InputError::Empty)), then at least one data row
///   ([`HeaderOnly`](InputError::HeaderOnly)). All text must be UTF-8
///   ([`NotUtf8`](InputError::NotUtf8)).
/// - Names: non-empty ([`EmptyColumnName`](InputError::EmptyColumnName)), distinct
///   ([`DuplicateColumn`](InputError::DuplicateColumn)), no control characters
///   ([`ControlInName`](InputError::ControlInName)), at most `max_columns`
///   ([`TooManyColumns`](InputError::TooManyColumns)).
/// - Time axis: the first column if named `t` or `time` (any case), or the column named by
///   `time_column` ([`TimeColumnNotFound`](InputError::TimeColumnNotFound)); every value
///   present ([`TimeMissing`](InputError::TimeMissing)) and strictly increasing
///   ([`TimeNotIncreasing`](InputError::TimeNotIncreasing)).
/// - At least two series columns ([`TooFewSeries`](InputError::TooFewSeries)).
/// - Every row has the header's field count ([`Ragged`](InputError::Ragged)).
/// - Cells: a number as Rust's `f64` parser reads it (`1.5`, `-2e-3`), or missing: empty,
///   `NA`, `NaN`, `null` (any case) read as NaN and are counted per series. Anything else is
///   [`NotNumeric`](InputError::NotNumeric), with a hint for thousands separators, decimal
///   commas, dates and percent signs; `Inf` and overflowing numbers are
///   [`Infinite`](InputError::Infinite).
/// - Each series: at least two present values ([`TooFewValues`](InputError::TooFewValues)),
///   not all equal ([`ConstantSeries`](InputError::ConstantSeries)).
/// - Limits: `max_rows` data rows ([`TooManyRows`](InputError::TooManyRows)), `max_cells`
///   values ([`TooManyCells`](InputError::TooManyCells)), `max_line_bytes` per record
///   ([`RecordTooLong`](InputError::RecordTooLong)), checked while reading so oversized
///   input is never buffered whole.
pub fn read_series_from(
    reader: impl Read,
    source_name: &str,
    opts: &ReadOptions,
) -> Result<SeriesTable, InputError> {
    let file = source_name.to_string();
    let mut csv = crate::records::Records::new(reader, source_name, opts.max_line_bytes);
    let mut record = ByteRecord::new();

    if !csv.next(&mut record)? {
        return Err(InputError::Empty { file });
    }
    if record.len() > opts.max_columns {
        return Err(InputError::TooManyColumns {
            file,
            found: record.len(),
            limit: opts.max_columns,
        });
    }
    let header = decode_header(&file, &record)?;
    let layout = Layout::from_header(&file, &header, opts.time_column.as_deref())?;
    let width = header.len();
    let n_series = layout.series.len();

    let mut time: Option<Vec<f64>> = layout.time.map(|_| Vec::new());
    let mut columns: Vec<Vec<f64>> = vec![Vec::new(); n_series];
    let mut missing = vec![0usize; n_series];
    let mut rows = 0usize;

    while csv.next(&mut record)? {
        let row = csv.row(&record);
        if rows == opts.max_rows {
            return Err(InputError::TooManyRows {
                file,
                row,
                limit: opts.max_rows,
            });
        }
        if (rows + 1).saturating_mul(n_series) > opts.max_cells {
            return Err(InputError::TooManyCells {
                file,
                row,
                limit: opts.max_cells,
            });
        }
        rows += 1;
        if record.len() != width {
            return Err(ragged(&file, row, width, record.len()));
        }
        if let (Some(tc), Some(times)) = (layout.time, time.as_mut()) {
            let text = field_text(&file, row, &header[tc], &record[tc])?;
            let t = match parse_number(text) {
                Ok(Cell::Value(t)) => t,
                Ok(Cell::Missing) => {
                    return Err(InputError::TimeMissing {
                        file,
                        row,
                        column: header[tc].clone(),
                    });
                }
                Err(p) => return Err(cell_error(file, row, &header[tc], text, p)),
            };
            if let Some(&prev) = times.last()
                && t <= prev
            {
                return Err(InputError::TimeNotIncreasing {
                    file,
                    row,
                    column: header[tc].clone(),
                    previous: prev,
                    value: t,
                });
            }
            times.push(t);
        }
        for (j, &c) in layout.series.iter().enumerate() {
            let text = field_text(&file, row, &header[c], &record[c])?;
            match parse_number(text) {
                Ok(Cell::Value(v)) => columns[j].push(v),
                Ok(Cell::Missing) => {
                    columns[j].push(f64::NAN);
                    missing[j] += 1;
                }
                Err(p) => return Err(cell_error(file, row, &header[c], text, p)),
            }
        }
    }
    if rows == 0 {
        return Err(InputError::HeaderOnly { file });
    }

    let names: Vec<String> = layout.series.iter().map(|&c| header[c].clone()).collect();
    for (name, values) in names.iter().zip(&columns) {
        check_series(&file, name, values)?;
    }

    Ok(SeriesTable {
        time_column: layout.time.map(|c| header[c].clone()),
        time,
        names,
        columns,
        missing,
        sha256: csv.finish_hex(),
    })
}

/// Which header position is the time axis and which are series.
struct Layout {
    time: Option<usize>,
    series: Vec<usize>,
}

impl Layout {
    fn from_header(
        file: &str,
        header: &[String],
        requested: Option<&str>,
    ) -> Result<Self, InputError> {
        let time = match requested {
            Some(name) => Some(
                header
                    .iter()
                    .position(|h| h == name)
                    .or_else(|| header.iter().position(|h| h.eq_ignore_ascii_case(name)))
                    .ok_or_else(|| InputError::TimeColumnNotFound {
                        file: file.to_string(),
                        name: name.to_string(),
                        available: show_names(header),
                    })?,
            ),
            None => header
                .first()
                .filter(|h| h.eq_ignore_ascii_case("t") || h.eq_ignore_ascii_case("time"))
                .map(|_| 0),
        };
        let series: Vec<usize> = (0..header.len()).filter(|&c| Some(c) != time).collect();
        if series.len() < 2 {
            let names: Vec<&String> = series.iter().map(|&c| &header[c]).collect();
            return Err(InputError::TooFewSeries {
                file: file.to_string(),
                found: series.len(),
                names: show_names(&names),
                hint: too_few_hint(header),
            });
        }
        Ok(Self { time, series })
    }
}

fn too_few_hint(header: &[String]) -> String {
    let joined = header.join(",");
    if header.len() == 1 && joined.contains(';') {
        "The header holds `;` but no `,`: the file seems to use semicolons between fields. \
         Save it as comma-separated CSV"
            .to_string()
    } else if header.len() == 1 && joined.contains('\t') {
        "The header holds tabs but no `,`: the file seems to be tab-separated. Save it as \
         comma-separated CSV"
            .to_string()
    } else {
        "Add another series column (the time column, if any, does not count)".to_string()
    }
}

fn ragged(file: &str, row: u64, expected: usize, found: usize) -> InputError {
    let hint = if found > expected {
        "A comma inside an unquoted number (a decimal comma or thousands separator such as \
         1,234) splits it into two fields; remove such commas or quote the field, and check \
         for stray trailing commas"
    } else {
        "Fill in the missing fields (an empty field, as in `1,,3`, marks a missing value) or \
         remove the short row"
    };
    InputError::Ragged {
        file: file.to_string(),
        row,
        expected,
        found,
        hint: hint.to_string(),
    }
}

fn cell_error(
    file: String,
    row: u64,
    column: &str,
    text: &str,
    problem: CellProblem,
) -> InputError {
    let column = column.to_string();
    let cell = show_cell(text.trim());
    match problem {
        CellProblem::Infinite => InputError::Infinite {
            file,
            row,
            column,
            cell,
        },
        CellProblem::NotNumeric(hint) => InputError::NotNumeric {
            file,
            row,
            column,
            cell,
            hint,
        },
    }
}

fn field_text<'r>(
    file: &str,
    row: u64,
    column: &str,
    bytes: &'r [u8],
) -> Result<&'r str, InputError> {
    std::str::from_utf8(bytes).map_err(|_| InputError::NotUtf8 {
        file: file.to_string(),
        row,
        column: format!("`{column}`"),
    })
}

/// Decode and check the header: UTF-8, names non-empty and distinct (spaces trimmed).
pub(crate) fn decode_header(file: &str, record: &ByteRecord) -> Result<Vec<String>, InputError> {
    let mut names = Vec::with_capacity(record.len());
    let mut seen: HashMap<String, usize> = HashMap::new();
    for (i, field) in record.iter().enumerate() {
        let name = std::str::from_utf8(field)
            .map_err(|_| InputError::NotUtf8 {
                file: file.to_string(),
                row: 1,
                column: format!("#{}", i + 1),
            })?
            .trim()
            .to_string();
        if name.is_empty() {
            return Err(InputError::EmptyColumnName {
                file: file.to_string(),
                position: i + 1,
            });
        }
        // A lone field with tabs is a tab-separated file, which TooFewSeries explains better.
        if record.len() > 1 && name.chars().any(char::is_control) {
            return Err(InputError::ControlInName {
                file: file.to_string(),
                position: i + 1,
            });
        }
        if let Some(&first) = seen.get(&name) {
            return Err(InputError::DuplicateColumn {
                file: file.to_string(),
                column: name,
                first: first + 1,
                second: i + 1,
            });
        }
        seen.insert(name.clone(), i);
        names.push(name);
    }
    Ok(names)
}

fn check_series(file: &str, name: &str, values: &[f64]) -> Result<(), InputError> {
    let mut present = values.iter().copied().filter(|v| !v.is_nan());
    let count = present.clone().count();
    if count < 2 {
        return Err(InputError::TooFewValues {
            file: file.to_string(),
            column: name.to_string(),
            found: count,
        });
    }
    let first = present.next().unwrap_or(f64::NAN);
    if present.all(|v| v == first) {
        return Err(InputError::ConstantSeries {
            file: file.to_string(),
            column: name.to_string(),
            value: first,
        });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn read(text: &str) -> Result<SeriesTable, InputError> {
        read_series_from(text.as_bytes(), "test.csv", &ReadOptions::default())
    }

    #[test]
    fn reads_time_and_series() {
        let t = read("time,x,y\n0,1.5,2\n1,NA,3\n2,2.5,\n3,1,1\n").unwrap();
        assert_eq!(t.time_column.as_deref(), Some("time"));
        assert_eq!(t.time.as_deref(), Some(&[0.0, 1.0, 2.0, 3.0][..]));
        assert_eq!(t.names, ["x", "y"]);
        assert_relative_eq!(t.columns[0][0], 1.5);
        assert!(t.columns[0][1].is_nan() && t.columns[1][2].is_nan());
        assert_eq!(t.missing, [1, 1]);
        assert_eq!(t.n_rows(), 4);
    }

    #[test]
    fn no_time_column_when_first_is_not_named_so() {
        let t = read("a,b\n1,2\n2,1\n").unwrap();
        assert_eq!(t.time_column, None);
        assert_eq!(t.time, None);
        assert_eq!(t.names, ["a", "b"]);
    }

    #[test]
    fn requested_time_column_anywhere() {
        let opts = ReadOptions::default().with_time_column("when");
        let t = read_series_from(&b"a,when,b\n1,10,2\n2,11,1\n"[..], "f", &opts).unwrap();
        assert_eq!(t.time_column.as_deref(), Some("when"));
        assert_eq!(t.names, ["a", "b"]);
        let opts = ReadOptions::default().with_time_column("date");
        let err = read_series_from(&b"a,when,b\n1,10,2\n2,11,1\n"[..], "f", &opts).unwrap_err();
        assert!(
            matches!(err, InputError::TimeColumnNotFound { .. }),
            "{err}"
        );
    }

    #[test]
    fn time_must_increase() {
        let err = read("t,a,b\n0,1,2\n1,2,1\n1,3,3\n").unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.contains("row 4") && msg.contains("`t`") && msg.contains("Sort"),
            "{msg}"
        );
    }

    #[test]
    fn checksum_is_of_the_raw_bytes() {
        let bytes = b"a,b\n1,2\n2,1\n";
        let t = read_series_from(&bytes[..], "f", &ReadOptions::default()).unwrap();
        assert_eq!(t.sha256, crate::checksum::sha256_hex(bytes));
    }

    #[test]
    fn limits_count_data_rows_only() {
        let opts = ReadOptions::default().with_max_rows(2);
        assert!(read_series_from(&b"a,b\n1,2\n2,1\n"[..], "f", &opts).is_ok());
        let err = read_series_from(&b"a,b\n1,2\n2,1\n3,3\n"[..], "f", &opts).unwrap_err();
        assert!(
            matches!(
                err,
                InputError::TooManyRows {
                    row: 4,
                    limit: 2,
                    ..
                }
            ),
            "{err}"
        );
        let opts = ReadOptions::default().with_max_cells(4);
        let err = read_series_from(&b"a,b\n1,2\n2,1\n3,3\n"[..], "f", &opts).unwrap_err();
        assert!(
            matches!(err, InputError::TooManyCells { row: 4, .. }),
            "{err}"
        );
    }
}
