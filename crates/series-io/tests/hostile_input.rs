//! Hostile and broken series tables: one test per case, each a clear error or a clean read.
//!
//! The case list follows the project's hostile-input table (empty file, header only, one
//! column, duplicate names, non-UTF-8 bytes, CRLF, quoted fields, thousands separators,
//! NaN/Inf/NA cells, a constant series, 5-point series, 10 million rows, a 1 GiB line),
//! plus the other rules the reader enforces. Every error must name the file, the row as
//! numbered in the file (header = row 1), the column where one applies, and a fix, in one
//! paragraph. CSV quoting and line-end rules are those of RFC 4180 (Shafranovich 2005).

use std::io::{self, Read};

use series_io::{InputError, ReadOptions, SeriesTable, read_series_from};

const FILE: &str = "hostile.csv";

fn read(input: &[u8]) -> Result<SeriesTable, InputError> {
    read_series_from(input, FILE, &ReadOptions::default())
}

fn assert_message(err: &InputError, needles: &[&str]) {
    let msg = err.to_string();
    assert!(
        msg.starts_with(FILE),
        "message must start with the file: {msg}"
    );
    assert!(!msg.contains('\n'), "message must be one paragraph: {msg}");
    for needle in needles {
        assert!(msg.contains(needle), "missing {needle:?} in: {msg}");
    }
}

/// One rejected case: input, the expected variant, and the fragments the message must hold
/// (row, column, and a word of the fix).
macro_rules! rejects {
    ($name:ident, $input:expr, $pat:pat, [$($needle:expr),* $(,)?]) => {
        #[test]
        fn $name() {
            let err = read($input).expect_err("input must be rejected");
            assert!(matches!(err, $pat), "unexpected variant: {err:?}");
            assert_message(&err, &[$($needle),*]);
        }
    };
}

/// One accepted case, with a check on what was read.
macro_rules! accepts {
    ($name:ident, $input:expr, |$t:ident| $check:block) => {
        #[test]
        fn $name() {
            let $t = read($input).unwrap_or_else(|e| panic!("must read: {e}"));
            $check
        }
    };
}

// --- empty and nearly empty ---
rejects!(
    empty_file,
    b"",
    InputError::Empty { .. },
    ["row 1", "empty", "header"]
);
rejects!(
    blank_lines_only,
    b"\n\r\n\n",
    InputError::Empty { .. },
    ["row 1", "Write a header"]
);
rejects!(
    bom_only,
    b"\xEF\xBB\xBF",
    InputError::Empty { .. },
    ["row 1"]
);
rejects!(
    header_only,
    b"t,a,b\n",
    InputError::HeaderOnly { .. },
    ["row 1", "no data rows", "Add"]
);
rejects!(
    header_only_crlf,
    b"t,a,b\r\n\r\n",
    InputError::HeaderOnly { .. },
    ["row 1", "Add"]
);

// --- header problems ---
rejects!(
    one_column,
    b"x\n1\n2\n3\n",
    InputError::TooFewSeries { found: 1, .. },
    ["row 1", "`x`", "at least two", "Add another series"]
);
rejects!(
    time_and_one_series,
    b"time,x\n0,1\n1,2\n",
    InputError::TooFewSeries { found: 1, .. },
    ["row 1", "`x`", "does not count"]
);
rejects!(
    semicolon_separated,
    b"t;a;b\n0;1,5;2\n",
    InputError::TooFewSeries { .. },
    // One message names both fixes (a spreadsheet export in a European number format).
    [
        "row 1",
        "semicolons",
        "decimal commas",
        "--delimiter ';' --decimal-comma"
    ]
);
rejects!(
    semicolon_separated_with_points,
    b"t;a;b\n0;1.5;2\n",
    InputError::TooFewSeries { .. },
    ["row 1", "semicolons", "--delimiter ';'", "comma-separated"]
);
rejects!(
    tab_separated,
    b"t\ta\tb\n0\t1\t2\n",
    InputError::TooFewSeries { .. },
    ["row 1", "tabs", "--delimiter tab"]
);
rejects!(
    duplicate_names,
    b"t,a,b,a\n0,1,2,3\n",
    InputError::DuplicateColumn {
        first: 2,
        second: 4,
        ..
    },
    ["row 1", "`a`", "column 2", "column 4", "distinct"]
);
rejects!(
    duplicate_names_after_trimming,
    b"a, b,b \n1,2,3\n",
    InputError::DuplicateColumn { .. },
    ["`b`", "distinct"]
);
rejects!(
    empty_column_name,
    b"t,a,,b\n0,1,2,3\n",
    InputError::EmptyColumnName { position: 3, .. },
    ["row 1", "column 3", "no name", "Give every column a name"]
);
rejects!(
    trailing_comma_in_header,
    b"t,a,b,\n0,1,2,\n",
    InputError::EmptyColumnName { position: 4, .. },
    ["column 4", "trailing commas"]
);
rejects!(
    line_break_in_quoted_name,
    b"t,\"a\nb\",c\n0,1,2\n",
    InputError::ControlInName { position: 2, .. },
    ["row 1", "column 2", "Remove it"]
);

#[test]
fn very_wide_header_is_refused_before_names_are_stored() {
    let header: Vec<String> = (0..200_000).map(|i| format!("v{i}")).collect();
    let input = format!("{}\n", header.join(","));
    let err = read(input.as_bytes()).unwrap_err();
    assert!(
        matches!(err, InputError::TooManyColumns { found: 200_000, .. }),
        "{err:?}"
    );
    assert_message(
        &err,
        &[
            "row 1",
            "200000 columns",
            "limit of 100000",
            "comma-separated",
        ],
    );
}

#[test]
fn requested_time_column_missing() {
    let opts = ReadOptions::default().with_time_column("date");
    let err = read_series_from(&b"t,a,b\n0,1,2\n"[..], FILE, &opts).unwrap_err();
    assert!(
        matches!(err, InputError::TimeColumnNotFound { .. }),
        "{err:?}"
    );
    assert_message(
        &err,
        &[
            "row 1",
            "`date`",
            "`t`, `a`, `b`",
            "Name an existing column",
        ],
    );
}

// --- encoding ---
rejects!(
    non_utf8_cell,
    b"t,a,b\n0,1,2\n1,\xff\xfe,3\n",
    InputError::NotUtf8 { row: 3, .. },
    ["row 3", "column `a`", "UTF-8", "Re-save"]
);
rejects!(
    latin1_header,
    b"t,caf\xe9,b\n0,1,2\n",
    InputError::NotUtf8 { row: 1, .. },
    ["row 1", "column #2", "iconv"]
);
rejects!(
    utf16_file,
    b"\xff\xfet\x00,\x00a\x00,\x00b\x00\n\x00",
    InputError::NotUtf8 { row: 1, .. },
    ["row 1", "UTF-16"]
);
accepts!(
    utf8_bom_is_dropped,
    b"\xEF\xBB\xBFtime,a,b\n0,1,2\n1,2,1\n",
    |t| {
        assert_eq!(t.time_column.as_deref(), Some("time"));
        assert_eq!(t.names, ["a", "b"]);
        // The checksum still covers the BOM: it is of the bytes as stored.
        assert_eq!(
            t.sha256,
            series_io::checksum::sha256_hex(b"\xEF\xBB\xBFtime,a,b\n0,1,2\n1,2,1\n")
        );
    }
);
accepts!(
    non_ascii_names,
    "t,température,débit\n0,1,2\n1,2,1\n".as_bytes(),
    |t| {
        assert_eq!(t.names, ["température", "débit"]);
    }
);

// --- line ends and quoting (RFC 4180 sections 2.1, 2.5-2.7) ---
accepts!(
    crlf_line_ends,
    b"t,a,b\r\n0,1.5,2\r\n1,2.5,1\r\n2,3,0\r\n",
    |t| {
        assert_eq!(t.columns, [vec![1.5, 2.5, 3.0], vec![2.0, 1.0, 0.0]]);
    }
);
accepts!(cr_only_line_ends, b"t,a,b\r0,1,2\r1,2,1\r", |t| {
    assert_eq!(t.n_rows(), 2);
});
#[test]
fn cr_only_rows_are_counted_as_in_the_file() {
    let err = read(b"t,a,b\r0,1,2\r\r1,2,3\r2,3,oops\r").unwrap_err();
    assert_message(&err, &["row 5", "column `b`"]);
    let err = read(b"t,a,b\r\n0,1,2\r\n\r\n\r\n1,2,oops\r\n").unwrap_err();
    assert_message(&err, &["row 5", "column `b`"]);
    let err = read(b"t,a,b\n\n0,1,2\n\n\n1,2,oops\n").unwrap_err();
    assert_message(&err, &["row 6", "column `b`"]);
}
accepts!(missing_final_line_end, b"t,a,b\n0,1,2\n1,2,1", |t| {
    assert_eq!(t.n_rows(), 2);
});
#[test]
fn crlf_rows_are_counted_as_in_the_file() {
    let err = read(b"t,a,b\r\n0,1,2\r\n1,oops,3\r\n").unwrap_err();
    assert_message(&err, &["row 3", "column `a`", "\"oops\""]);
}
accepts!(
    quoted_fields,
    b"\"t\",\"a, first\",\"b \"\"q\"\"\"\n\"0\",\"1.5\",\" 2 \"\n1,2,1\n",
    |t| {
        assert_eq!(t.names, ["a, first", "b \"q\""]);
        assert_eq!(t.columns, [vec![1.5, 2.0], vec![2.0, 1.0]]);
    }
);
#[test]
fn quoted_line_break_keeps_row_numbers() {
    // The record on row 3 holds a quoted line break (its cell "2\n" reads as 2 once
    // trimmed); it is still one row, so the bad cell two records later is row 5, not the
    // file's line 6.
    let err = read(b"t,a,b\n0,1,2\n1,\"2\n\",3\n2,3,4\n3,x,5\n").unwrap_err();
    assert!(
        matches!(err, InputError::NotNumeric { row: 5, .. }),
        "{err:?}"
    );
    assert_message(&err, &["row 5", "column `a`", "\"x\""]);
}
rejects!(
    unclosed_quote,
    b"t,a,b\n0,1,2\n1,\"2,3\n2,3,4\n",
    InputError::UnclosedQuote { row: 3, .. },
    ["row 3", "never closed"]
);

// --- ragged rows ---
rejects!(
    ragged_short_row,
    b"t,a,b\n0,1,2\n1,2\n",
    InputError::Ragged {
        row: 3,
        expected: 3,
        found: 2,
        ..
    },
    ["row 3", "2 fields", "has 3", "Fill in"]
);
rejects!(
    ragged_long_row,
    b"t,a,b\n0,1,2\n1,2,3,4\n",
    InputError::Ragged {
        row: 3,
        expected: 3,
        found: 4,
        ..
    },
    ["row 3", "4 fields", "quote the field"]
);

// --- number formats ---
rejects!(
    thousands_separator_quoted,
    b"t,a,b\n0,1,2\n1,\"1,234\",3\n",
    InputError::NotNumeric { row: 3, .. },
    [
        "row 3",
        "column `a`",
        "\"1,234\"",
        "thousands separator",
        "remove the separators"
    ]
);
rejects!(
    thousands_separator_space,
    b"t,a,b\n0,1,2\n1,1 234,3\n",
    InputError::NotNumeric { row: 3, .. },
    ["row 3", "column `a`", "a space as thousands separator"]
);
rejects!(
    thousands_separator_unquoted,
    b"t,a,b\n0,1,2\n1,1,234,3\n",
    InputError::Ragged { row: 3, .. },
    ["row 3", "thousands separator", "1,234"]
);
rejects!(
    decimal_comma,
    b"t,a,b\n0,1,2\n1,\"3,25\",3\n",
    InputError::NotNumeric { row: 3, .. },
    ["row 3", "column `a`", "decimal comma", "3.25"]
);
rejects!(
    text_cell,
    b"t,a,b\n0,1,2\n1,2,high\n",
    InputError::NotNumeric { row: 3, .. },
    ["row 3", "column `b`", "\"high\"", "write NA"]
);
accepts!(
    iso_dates_in_time_column,
    b"time,a,b\n2024-01-01,1,2\n2024-01-02,2,1\n2024-01-03,3,3\n",
    |t| {
        let axis = t.time_axis.as_ref().unwrap();
        assert_eq!(axis.kind, series_io::TimeKind::Date);
        assert_eq!(axis.step, "1 day");
        assert_eq!(
            (axis.first.as_str(), axis.last.as_str()),
            ("2024-01-01", "2024-01-03")
        );
    }
);
rejects!(
    day_first_date_in_time_column,
    b"time,a,b\n31/01/2024,1,2\n01/02/2024,2,1\n",
    InputError::NotNumeric { row: 2, .. },
    ["row 2", "column `time`", "ISO 8601", "2020-01-31"]
);
rejects!(
    date_in_series_column,
    b"t,a,b\n0,2024-01-01,2\n1,2024-01-02,1\n",
    InputError::NotNumeric { row: 2, .. },
    ["row 2", "column `a`", "date", "--time-column"]
);
// --- missing and special values ---
accepts!(
    nan_na_and_empty_cells_are_missing,
    b"t,a,b\n0,1,NA\n1,,2\n2,NaN,3\n3,4,nan\n4,null,na\n5,2,1\n",
    |t| {
        assert_eq!(t.missing, [3, 3]);
        assert!(t.columns[0][1].is_nan() && t.columns[1][0].is_nan());
    }
);
rejects!(
    inf_cell,
    b"t,a,b\n0,1,2\n1,Inf,3\n",
    InputError::Infinite { row: 3, .. },
    [
        "row 3",
        "column `a`",
        "\"Inf\"",
        "infinite",
        "clean the value",
        "NA"
    ]
);
rejects!(
    negative_inf_cell,
    b"t,a,b\n0,1,2\n1,2,-inf\n",
    InputError::Infinite { row: 3, .. },
    ["row 3", "column `b`", "\"-inf\""]
);
rejects!(
    overflowing_number,
    b"t,a,b\n0,1,2\n1,2,1e999\n",
    InputError::Infinite { row: 3, .. },
    ["row 3", "column `b`", "too large"]
);
rejects!(
    missing_time_value,
    b"t,a,b\n0,1,2\nNA,2,3\n",
    InputError::TimeMissing { row: 3, .. },
    ["row 3", "column `t`", "fill it in"]
);
rejects!(
    time_goes_backwards,
    b"t,a,b\n0,1,2\n2,2,3\n1,3,1\n",
    InputError::TimeNotIncreasing { row: 4, .. },
    ["row 4", "column `t`", "Sort the rows"]
);
rejects!(
    repeated_time,
    b"t,a,b\n0,1,2\n1,2,3\n1,3,1\n",
    InputError::TimeNotIncreasing { row: 4, .. },
    ["row 4", "remove duplicated time"]
);

// --- degenerate series ---
rejects!(
    constant_series,
    b"t,a,b\n0,1,5\n1,2,5\n2,3,NA\n3,4,5\n",
    InputError::ConstantSeries { .. },
    ["column `b`", "equals 5", "Remove the column"]
);
rejects!(
    all_missing_series,
    b"t,a,b\n0,1,NA\n1,2,\n2,3,NA\n",
    InputError::TooFewValues { found: 0, .. },
    ["column `b`", "only 0", "Fill in the column"]
);
rejects!(
    single_value_series,
    b"t,a,b\n0,1,NA\n1,2,7\n2,3,NA\n",
    InputError::TooFewValues { found: 1, .. },
    ["column `b`", "only 1"]
);
accepts!(
    five_point_series_read,
    b"t,a,b\n0,0.1,0.9\n1,0.4,0.7\n2,0.9,0.2\n3,0.3,0.5\n4,0.8,0.6\n",
    |t| {
        // Too short to embed, but that is the engine's call (with its own message), not the
        // reader's: the table itself is well formed.
        assert_eq!(t.n_rows(), 5);
        assert_eq!(t.n_series(), 2);
    }
);

// --- size limits, on generated input that is never held in memory whole ---

/// Yields a header and then `rows` numeric rows, produced on the fly.
struct GeneratedRows {
    rows: u64,
    next: u64,
    pending: Vec<u8>,
    pos: usize,
}

impl GeneratedRows {
    fn new(rows: u64) -> Self {
        Self {
            rows,
            next: 0,
            pending: b"t,a,b\n".to_vec(),
            pos: 0,
        }
    }
}

impl Read for GeneratedRows {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if self.pos == self.pending.len() {
            if self.next == self.rows {
                return Ok(0);
            }
            self.pending.clear();
            self.pos = 0;
            while self.pending.len() < 8192 && self.next < self.rows {
                let i = self.next;
                self.pending
                    .extend_from_slice(format!("{i},{},{}\n", i % 7, i % 11).as_bytes());
                self.next += 1;
            }
        }
        let n = (self.pending.len() - self.pos).min(buf.len());
        buf[..n].copy_from_slice(&self.pending[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}

#[test]
fn ten_million_rows_stop_at_the_row_limit() {
    let opts = ReadOptions::default().with_max_rows(10_000);
    let err = read_series_from(GeneratedRows::new(10_000_000), FILE, &opts).unwrap_err();
    assert!(
        matches!(
            err,
            InputError::TooManyRows {
                row: 10_002,
                limit: 10_000,
                ..
            }
        ),
        "{err:?}"
    );
    assert_message(
        &err,
        &[
            "more than 10000 data rows",
            "row 10002",
            "raise the row limit",
        ],
    );
}

#[test]
fn generated_rows_under_the_limit_read_in_full() {
    let t = read_series_from(GeneratedRows::new(50_000), FILE, &ReadOptions::default()).unwrap();
    assert_eq!(t.n_rows(), 50_000);
    assert_eq!(t.time.as_ref().unwrap()[49_999], 49_999.0);
}

/// Yields a header, then one data row of `len` digits with no line end in sight.
struct LongLine {
    header_left: &'static [u8],
    left: u64,
}

impl Read for LongLine {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if !self.header_left.is_empty() {
            let n = self.header_left.len().min(buf.len());
            buf[..n].copy_from_slice(&self.header_left[..n]);
            self.header_left = &self.header_left[n..];
            return Ok(n);
        }
        let n = (self.left.min(buf.len() as u64)) as usize;
        buf[..n].fill(b'7');
        self.left -= n as u64;
        Ok(n)
    }
}

#[test]
fn one_gib_line_stops_at_the_record_limit() {
    // A small limit keeps this test fast; the default-limit run is in bounded_memory.rs.
    let opts = ReadOptions::default().with_max_line_bytes(1 << 20);
    let input = LongLine {
        header_left: b"t,a,b\n0,",
        left: 1 << 30,
    };
    let err = read_series_from(input, FILE, &opts).unwrap_err();
    assert!(
        matches!(
            err,
            InputError::RecordTooLong {
                row: 2,
                limit: 1_048_576,
                ..
            }
        ),
        "{err:?}"
    );
    assert_message(
        &err,
        &[
            "row 2",
            "1048576 bytes",
            "missing line break",
            "raise the record-size limit",
        ],
    );
}

#[test]
fn unclosed_quote_in_a_long_file_stops_at_the_record_limit() {
    let mut body = b"t,a,b\n0,\"1,2\n".to_vec();
    for i in 1..20_000 {
        body.extend_from_slice(format!("{i},1,2\n").as_bytes());
    }
    let opts = ReadOptions::default().with_max_line_bytes(64 * 1024);
    let err = read_series_from(&body[..], FILE, &opts).unwrap_err();
    assert!(
        matches!(err, InputError::RecordTooLong { row: 2, .. }),
        "{err:?}"
    );
    assert_message(&err, &["row 2", "unclosed quote"]);
}

#[test]
fn a_gib_of_blank_lines_reads_in_bounded_memory() {
    // Blank lines are skipped (csv crate behaviour) and must not be remembered one by one.
    struct Blank(u64);
    impl Read for Blank {
        fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
            let n = self.0.min(buf.len() as u64) as usize;
            buf[..n].fill(b'\n');
            self.0 -= n as u64;
            Ok(n)
        }
    }
    let input = (&b"t,a,b\n0,1,2\n"[..])
        .chain(Blank(64 << 20))
        .chain(&b"1,x,3\n"[..]);
    let err = read_series_from(input, FILE, &ReadOptions::default()).unwrap_err();
    assert_message(&err, &[&format!("row {}", 3 + (64u64 << 20)), "column `a`"]);
}

#[test]
fn unreadable_source_is_an_io_error() {
    struct Broken;
    impl Read for Broken {
        fn read(&mut self, _: &mut [u8]) -> io::Result<usize> {
            Err(io::Error::other("device gone"))
        }
    }
    let err = read_series_from(Broken, FILE, &ReadOptions::default()).unwrap_err();
    assert!(matches!(err, InputError::Io { .. }), "{err:?}");
    assert_message(&err, &["could not be read"]);
    let err = series_io::read_series(
        std::path::Path::new("/nonexistent/x.csv"),
        &ReadOptions::default(),
    )
    .unwrap_err();
    assert!(
        err.to_string()
            .starts_with("/nonexistent/x.csv: the file could not be read"),
        "{err}"
    );
}

// --- time axes as field data has them (dates, spreadsheet exports, uneven steps) ---

fn read_with(input: &[u8], opts: &ReadOptions) -> Result<SeriesTable, InputError> {
    read_series_from(input, FILE, opts)
}

#[test]
fn weekly_date_column_is_the_axis() {
    let csv = b"Date,kelp,urchin\n2021-03-01,1,5\n2021-03-08,2,4\n2021-03-15,3,6\n2021-03-22,2,5\n";
    let t = read(csv).unwrap();
    assert_eq!(t.time_column.as_deref(), Some("Date"));
    assert_eq!(t.names, ["kelp", "urchin"]);
    // Days since 1970-01-01: 2021-03-01 is day 18,687 (Unix time 1,614,556,800 s / 86,400).
    assert_eq!(t.time.as_deref().unwrap()[0], 18_687.0);
    assert_eq!(t.time_axis.as_ref().unwrap().step, "7 days");
    assert!(t.warnings.is_empty());
}

#[test]
fn every_axis_name_is_recognised() {
    for name in [
        "t", "TIME", "date", "DateTime", "year", "Month", "week", "day",
    ] {
        let csv = format!("{name},a,b\n1,1,2\n2,2,1\n3,3,3\n");
        let t = read(csv.as_bytes()).unwrap();
        assert_eq!(t.time_column.as_deref(), Some(name), "{name}");
    }
}

#[test]
fn date_times_with_zones_are_converted_to_utc() {
    let csv = b"datetime,a,b\n2020-01-31T06:00+01:00,1,2\n2020-01-31T11:00Z,2,1\n2020-01-31T13:00:00-04:00,3,3\n";
    let t = read(csv).unwrap();
    let axis = t.time_axis.unwrap();
    assert_eq!(axis.kind, series_io::TimeKind::DateTime);
    assert_eq!(axis.step, "6 hours");
    let time = t.time.unwrap();
    assert_eq!(time[1] - time[0], 6.0 * 3600.0);
}

#[test]
fn monthly_dates_step_in_months() {
    // Months have 28-31 days; records on the same day of each month are equally spaced.
    let csv = b"month,a,b\n2019-11-01,1,2\n2019-12-01,2,1\n2020-01-01,3,3\n2020-02-01,1,1\n2020-03-01,2,2\n";
    let t = read(csv).unwrap();
    assert_eq!(t.time_axis.unwrap().step, "1 month");
}

rejects!(
    weekly_table_with_a_missing_week,
    b"date,a,b\n2021-03-01,1,2\n2021-03-08,2,1\n2021-03-22,3,3\n2021-03-29,1,1\n",
    InputError::UnevenSteps { row: 4, .. },
    [
        "row 4",
        "1 of 3 steps differ",
        "column `date`",
        "2021-03-08 to 2021-03-22",
        "14 days",
        "usual step is 7 days",
        "equal time steps",
        "--uneven-steps fill-gaps",
        "--uneven-steps as-equal"
    ]
);
rejects!(
    numeric_axis_with_uneven_steps,
    b"t,a,b\n0,1,2\n1,2,1\n2.5,3,3\n3.5,1,1\n",
    InputError::UnevenSteps { row: 4, .. },
    [
        "row 4",
        "column `t`",
        "1.5",
        "usual step is 1",
        "Resample",
        "as-equal"
    ]
);
rejects!(
    mixed_dates_and_numbers,
    b"date,a,b\n2021-03-01,1,2\n18700,2,1\n",
    InputError::TimeKindMixed { row: 3, .. },
    ["row 3", "column `date`", "number", "date", "one form"]
);

#[test]
fn filled_gaps_become_missing_rows() {
    let csv = b"date,a,b\n2021-03-01,1,2\n2021-03-08,2,1\n2021-03-22,3,3\n2021-03-29,1,1\n";
    let opts = ReadOptions::default().with_uneven_steps(series_io::UnevenSteps::FillGaps);
    let t = read_with(csv, &opts).unwrap();
    assert_eq!(t.n_rows(), 5);
    assert!(t.columns[0][2].is_nan() && t.columns[1][2].is_nan());
    assert_eq!(t.columns[0][3], 3.0);
    assert_eq!(t.missing, [1, 1]);
    let time = t.time.as_deref().unwrap();
    assert_eq!(time[2] - time[1], 7.0);
    assert_eq!(t.time_axis.as_ref().unwrap().filled_rows, 1);
    assert!(
        t.warnings[0].contains("1 skipped time points"),
        "{:?}",
        t.warnings
    );
    // A step of 1.5 usual steps cannot be filled with whole rows.
    let err = read_with(b"t,a,b\n0,1,2\n1,2,1\n2.5,3,3\n", &opts).unwrap_err();
    assert!(err.to_string().contains("not whole multiples"), "{err}");
}

#[test]
fn uneven_steps_as_equal_proceed_with_a_warning() {
    let opts = ReadOptions::default().with_uneven_steps(series_io::UnevenSteps::AsEqual);
    let t = read_with(b"t,a,b\n0,1,2\n1,2,1\n2.5,3,3\n3.5,1,1\n", &opts).unwrap();
    assert_eq!(t.n_rows(), 4);
    assert_eq!(t.time_axis.as_ref().unwrap().uneven_steps, 1);
    assert!(t.warnings[0].contains("1 of 3 steps"), "{:?}", t.warnings);
}

#[test]
fn an_unchosen_rising_first_column_is_warned_about() {
    let t = read(b"yr,a,b\n1990,1,2\n1991,2,1\n1992,3,3\n").unwrap();
    assert_eq!(t.names, ["yr", "a", "b"]);
    assert_eq!(t.warnings.len(), 1);
    assert!(t.warnings[0].contains("`yr`") && t.warnings[0].contains("--time-column yr"));
    assert!(!t.warnings[0].contains('\n'));
    // Not rising: no warning.
    let t = read(b"yr,a,b\n1990,1,2\n1989,2,1\n1992,3,3\n").unwrap();
    assert!(t.warnings.is_empty());
}

#[test]
fn semicolon_export_with_decimal_commas_in_one_step() {
    let csv = "Datum;Temperatur;Salzgehalt\r\n2021-03-01;4,5;31,2\r\n2021-03-08;5,25;30,9\r\n2021-03-15;NA;31\r\n";
    let opts = ReadOptions::default()
        .with_delimiter(b';')
        .with_decimal_comma(true)
        .with_time_column("Datum");
    let t = read_with(csv.as_bytes(), &opts).unwrap();
    assert_eq!(t.names, ["Temperatur", "Salzgehalt"]);
    assert_eq!(t.columns[0][1], 5.25);
    assert_eq!(t.columns[1][2], 31.0);
    assert_eq!(t.missing, [1, 0]);
    // The semicolons alone, without --decimal-comma: the cell's hint names the option.
    let opts = ReadOptions::default()
        .with_delimiter(b';')
        .with_time_column("Datum");
    let err = read_with(csv.as_bytes(), &opts).unwrap_err();
    assert!(err.to_string().contains("--decimal-comma"), "{err}");
}
