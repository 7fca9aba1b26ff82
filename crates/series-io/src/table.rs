//! Streaming reader for the series table (`DATA.csv`): header, optional time axis, series.

use std::collections::HashMap;
use std::fs::File;
use std::io::Read;
use std::path::Path;

use csv::ByteRecord;

use crate::SeriesTable;
use crate::cell::{Cell, CellProblem, is_decimal_comma, parse_number_with};
use crate::error::{InputError, show_cell, show_names};
use crate::timeaxis::{TimeAxis, TimeKind, UnevenSteps, format_time, parse_time, spacing};

/// First-column names taken as the time axis when no column is named (compared in any case).
pub const TIME_COLUMN_NAMES: [&str; 8] = [
    "t", "time", "date", "datetime", "year", "month", "week", "day",
];

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
    /// Column to use as the time axis. `None`: a first column named as in
    /// [`TIME_COLUMN_NAMES`] (any case) is the time axis, otherwise there is none.
    pub time_column: Option<String>,
    /// Field separator byte (default `,`; `;` and tab are common in spreadsheet exports).
    pub delimiter: u8,
    /// Read numbers with a decimal comma (`3,25`); a point is then refused.
    pub decimal_comma: bool,
    /// What to do when the time axis has uneven steps.
    pub uneven_steps: UnevenSteps,
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
            delimiter: b',',
            decimal_comma: false,
            uneven_steps: UnevenSteps::Refuse,
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

    /// Separate fields with this byte instead of a comma.
    pub fn with_delimiter(mut self, delimiter: u8) -> Self {
        self.delimiter = delimiter;
        self
    }

    /// Read decimal commas (`3,25`).
    pub fn with_decimal_comma(mut self, on: bool) -> Self {
        self.decimal_comma = on;
        self
    }

    /// Choose what happens on uneven time steps.
    pub fn with_uneven_steps(mut self, policy: UnevenSteps) -> Self {
        self.uneven_steps = policy;
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
/// - Comma-separated (or by `delimiter`), RFC 4180 quoting (`"a,b"`, `""` for a quote, quoted line breaks);
///   LF, CRLF or CR line ends; blank lines skipped; a leading UTF-8 BOM dropped; spaces
///   around names and numbers ignored. Rows are numbered as in the file, header = row 1.
/// - A header is required ([`Empty`](InputError::Empty)), then at least one data row
///   ([`HeaderOnly`](InputError::HeaderOnly)). All text must be UTF-8
///   ([`NotUtf8`](InputError::NotUtf8)).
/// - Names: non-empty ([`EmptyColumnName`](InputError::EmptyColumnName)), distinct
///   ([`DuplicateColumn`](InputError::DuplicateColumn)), no control characters
///   ([`ControlInName`](InputError::ControlInName)), at most `max_columns`
///   ([`TooManyColumns`](InputError::TooManyColumns)).
/// - Time axis: the first column if named as in [`TIME_COLUMN_NAMES`] (any case), or the
///   column named by `time_column` ([`TimeColumnNotFound`](InputError::TimeColumnNotFound));
///   numbers, ISO 8601 dates (`2020-01-31`) or date-times (`2020-01-31T06:00`, optional zone
///   `Z` or `+02:00`), one kind throughout ([`TimeKindMixed`](InputError::TimeKindMixed));
///   every value present ([`TimeMissing`](InputError::TimeMissing)) and strictly increasing
///   ([`TimeNotIncreasing`](InputError::TimeNotIncreasing)); steps equal
///   ([`UnevenSteps`](InputError::UnevenSteps)) unless `uneven_steps` says otherwise. Dates
///   step in days, or in months when every date falls on the same day of the month.
/// - A strictly increasing first column that is not the time axis is read as a series with
///   a warning in [`SeriesTable::warnings`], in case it is a time axis under another name.
/// - At least two series columns ([`TooFewSeries`](InputError::TooFewSeries)).
/// - Every row has the header's field count ([`Ragged`](InputError::Ragged)).
/// - Cells: a number as Rust's `f64` parser reads it (`1.5`, `-2e-3`; with `decimal_comma`,
///   `1,5` and `-2e-3`), or missing: empty,
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
    let mut csv =
        crate::records::Records::new(reader, source_name, opts.max_line_bytes, opts.delimiter);
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
    if header.len() == 1 && opts.delimiter == b',' {
        // One field: probably another separator. The first data row tells whether the
        // numbers also use decimal commas, so that one message names both fixes.
        let first_row = if csv.next(&mut record)? {
            let fields: Vec<String> = record
                .iter()
                .map(|f| String::from_utf8_lossy(f).into_owned())
                .collect();
            Some(fields.join(","))
        } else {
            None
        };
        let hint = too_few_hint(&header, first_row.as_deref(), opts.decimal_comma);
        return Err(InputError::TooFewSeries {
            file,
            found: usize::from(
                !TIME_COLUMN_NAMES
                    .iter()
                    .chain(opts.time_column.as_deref().iter())
                    .any(|n| header[0].eq_ignore_ascii_case(n)),
            ),
            names: show_names(&header),
            hint,
        });
    }
    let layout = Layout::from_header(&file, &header, opts.time_column.as_deref())?;
    let width = header.len();
    let n_series = layout.series.len();

    // The time axis is held as one number per row (its kind is the first row's); of its text
    // only the first and the latest row are kept, and file rows only where they jump (a
    // quoted line break), so that a long table costs little beyond its series.
    let mut times: Vec<f64> = Vec::new();
    let mut time_kind: Option<TimeKind> = None;
    let (mut first_text, mut prev_text) = (String::new(), String::new());
    let mut time_rows = RowIndex::default();
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
        if let Some(tc) = layout.time {
            let text = field_text(&file, row, &header[tc], &record[tc])?;
            let t = match parse_time(text, opts.decimal_comma) {
                Ok(Some(t)) => t,
                Ok(None) => {
                    return Err(InputError::TimeMissing {
                        file,
                        row,
                        column: header[tc].clone(),
                    });
                }
                Err(p) => return Err(cell_error(file, row, &header[tc], text, p)),
            };
            if let Some(first) = time_kind
                && first != t.kind
            {
                return Err(InputError::TimeKindMixed {
                    file,
                    row,
                    column: header[tc].clone(),
                    detail: format!(
                        "the time {} is a {}, but the first row's time is a {}",
                        text.trim(),
                        t.kind.as_str(),
                        first.as_str()
                    ),
                });
            }
            if let Some(&prev) = times.last()
                && t.value <= prev
            {
                return Err(InputError::TimeNotIncreasing {
                    file,
                    row,
                    column: header[tc].clone(),
                    previous: prev_text,
                    value: text.trim().to_string(),
                });
            }
            if times.is_empty() {
                time_kind = Some(t.kind);
                first_text = text.trim().to_string();
            }
            prev_text.clear();
            prev_text.push_str(text.trim());
            time_rows.push(times.len(), row);
            times.push(t.value);
        }
        for (j, &c) in layout.series.iter().enumerate() {
            let text = field_text(&file, row, &header[c], &record[c])?;
            match parse_number_with(text, opts.decimal_comma) {
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
    let mut warnings = Vec::new();
    let (time, time_axis) = match layout.time {
        None => (None, None),
        Some(tc) => {
            let axis = TimeAxisInput {
                file: &file,
                column: &header[tc],
                values: times,
                kind: time_kind.unwrap_or(TimeKind::Number),
                first: first_text,
                last: prev_text,
                rows: &time_rows,
            };
            let (time, axis) = axis.check(opts, &mut columns, &mut missing, &mut warnings)?;
            (Some(time), Some(axis))
        }
    };
    for (name, values) in names.iter().zip(&columns) {
        check_series(&file, name, values)?;
    }
    if layout.series.first() == Some(&0)
        && columns[0].len() >= 3
        && columns[0].windows(2).all(|w| w[1] > w[0])
    {
        warnings.push(format!(
            "the first column `{}` rises on every row like a time axis, but is analysed as a \
             series; if it is the time, pass --time-column {}",
            header[0], header[0]
        ));
    }

    Ok(SeriesTable {
        time_column: layout.time.map(|c| header[c].clone()),
        time,
        time_axis,
        names,
        columns,
        missing,
        warnings,
        sha256: csv.finish_hex(),
    })
}

/// The time column as read, before its spacing is checked.
struct TimeAxisInput<'a> {
    file: &'a str,
    column: &'a str,
    values: Vec<f64>,
    kind: TimeKind,
    /// The first and last times as written.
    first: String,
    last: String,
    rows: &'a RowIndex,
}

/// The file row of each data row, held as the rows where the numbering jumps (a quoted line
/// break makes one record span several lines), not one number per row.
#[derive(Debug, Default)]
struct RowIndex {
    /// (data row index, file row) wherever the file row is not the previous one plus one.
    jumps: Vec<(usize, u64)>,
}

impl RowIndex {
    fn push(&mut self, index: usize, row: u64) {
        if index == 0 || self.row(index - 1) + 1 != row {
            self.jumps.push((index, row));
        }
    }

    fn row(&self, index: usize) -> u64 {
        let k = self.jumps.partition_point(|&(i, _)| i <= index);
        let (i, r) = self.jumps[k - 1];
        r + (index - i) as u64
    }
}

impl TimeAxisInput<'_> {
    /// Check the spacing; fill whole missing steps with empty rows when asked.
    fn check(
        self,
        opts: &ReadOptions,
        columns: &mut [Vec<f64>],
        missing: &mut [usize],
        warnings: &mut Vec<String>,
    ) -> Result<(Vec<f64>, TimeAxis), InputError> {
        let mut axis = TimeAxis {
            column: self.column.to_string(),
            kind: self.kind,
            first: self.first.clone(),
            last: self.last.clone(),
            step: String::new(),
            uneven_steps: 0,
            filled_rows: 0,
        };
        if self.values.len() < 2 {
            return Ok((self.values, axis));
        }
        let sp = spacing(&self.values, self.kind);
        axis.step = sp.step.clone();
        axis.uneven_steps = sp.uneven();
        let Some(first_bad) = sp.first_uneven() else {
            return Ok((self.values, axis));
        };
        let values = &self.values;
        let whole = sp.multiples.iter().all(Option::is_some);
        let refuse = |fix: &str| InputError::UnevenSteps {
            file: self.file.to_string(),
            row: self.rows.row(first_bad + 1),
            column: self.column.to_string(),
            detail: format!(
                "the step from {} to {} is {}, but the usual step is {} ({} of {} steps differ)",
                format_time(values[first_bad], self.kind),
                format_time(values[first_bad + 1], self.kind),
                sp.words(first_bad),
                sp.step,
                sp.uneven(),
                sp.multiples.len()
            ),
            fix: fix.to_string(),
        };
        match opts.uneven_steps {
            UnevenSteps::Refuse => {
                let fix = if whole {
                    "Every uneven step skips whole steps: add empty rows for the skipped times \
                     (or pass --uneven-steps fill-gaps to have them added as missing values), \
                     or pass --uneven-steps as-equal to treat the rows as equally spaced"
                } else {
                    "Resample the records to equal steps, or pass --uneven-steps as-equal to \
                     treat the rows as equally spaced (only sound when the steps differ little)"
                };
                Err(refuse(fix))
            }
            UnevenSteps::AsEqual => {
                warnings.push(format!(
                    "time axis `{}`: {} of {} steps differ from the usual {}; the rows are \
                     treated as equally spaced, as asked",
                    self.column,
                    sp.uneven(),
                    sp.multiples.len(),
                    sp.step
                ));
                Ok((self.values, axis))
            }
            UnevenSteps::FillGaps if !whole => Err(refuse(
                "Some uneven steps are not whole multiples of the usual step, so no empty rows \
                 can fill them: resample the records to equal steps, or pass --uneven-steps \
                 as-equal to treat the rows as equally spaced",
            )),
            UnevenSteps::FillGaps => {
                let added: usize = sp.multiples.iter().map(|m| m.unwrap_or(1) - 1).sum();
                let total = values.len().saturating_add(added);
                if total > opts.max_rows || total.saturating_mul(columns.len()) > opts.max_cells {
                    return Err(InputError::TooManyRows {
                        file: self.file.to_string(),
                        row: self.rows.row(first_bad + 1),
                        limit: opts.max_rows.min(opts.max_cells / columns.len().max(1)),
                    });
                }
                let mut time = Vec::with_capacity(total);
                let mut filled: Vec<Vec<f64>> =
                    columns.iter().map(|_| Vec::with_capacity(total)).collect();
                for i in 0..values.len() {
                    if i > 0 {
                        let k = sp.multiples[i - 1].unwrap_or(1);
                        for j in 1..k {
                            let f = j as f64 / k as f64;
                            time.push(values[i - 1] + f * (values[i] - values[i - 1]));
                            for col in &mut filled {
                                col.push(f64::NAN);
                            }
                        }
                    }
                    time.push(values[i]);
                    for (col, src) in filled.iter_mut().zip(columns.iter()) {
                        col.push(src[i]);
                    }
                }
                for ((col, src), m) in columns.iter_mut().zip(filled).zip(missing.iter_mut()) {
                    *col = src;
                    *m += added;
                }
                axis.filled_rows = added;
                warnings.push(format!(
                    "time axis `{}`: {added} skipped time points (steps of {}) were added as \
                     rows with every series missing",
                    self.column, sp.step
                ));
                Ok((time, axis))
            }
        }
    }
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
                .filter(|h| TIME_COLUMN_NAMES.iter().any(|n| h.eq_ignore_ascii_case(n)))
                .map(|_| 0),
        };
        let series: Vec<usize> = (0..header.len()).filter(|&c| Some(c) != time).collect();
        if series.len() < 2 {
            let names: Vec<&String> = series.iter().map(|&c| &header[c]).collect();
            return Err(InputError::TooFewSeries {
                file: file.to_string(),
                found: series.len(),
                names: show_names(&names),
                hint: too_few_hint(header, None, false),
            });
        }
        Ok(Self { time, series })
    }
}

/// Why a table has too few series, from its header and (when read) its first data row.
fn too_few_hint(header: &[String], first_row: Option<&str>, decimal_comma: bool) -> String {
    let joined = header.join(",");
    let separator = if header.len() != 1 {
        None
    } else if joined.contains(';') {
        Some((';', "semicolons", "--delimiter ';'"))
    } else if joined.contains('\t') {
        Some(('\t', "tabs", "--delimiter tab"))
    } else {
        None
    };
    let Some((sep, seps, flag)) = separator else {
        return "Add another series column (the time column, if any, does not count)".to_string();
    };
    let commas = first_row.is_some_and(|row| row.split(sep).any(|c| is_decimal_comma(c.trim())));
    if commas && !decimal_comma {
        format!(
            "The header holds {seps} but no `,`, and the numbers on row 2 use decimal commas \
             (3,25): the file is a spreadsheet export with {seps} between fields and commas as \
             decimal separators. Pass {flag} --decimal-comma to read it as it is"
        )
    } else {
        format!(
            "The header holds {seps} but no `,`: the file seems to use {seps} between fields. \
             Pass {flag} to read it as it is, or save it as comma-separated CSV"
        )
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
