//! The curves table (`curves.csv`): one row per ensemble member, read, grouped and written.

use std::collections::{BTreeMap, HashMap};
use std::fs::File;
use std::io::{self, Read, Write};
use std::path::Path;

use csv::ByteRecord;

use crate::CurveRow;
use crate::cell::{Cell, CellProblem, parse_number};
use crate::error::{InputError, show_cell, show_names};
use crate::output::{Export, format_f64};
use crate::records::Records;
use crate::table::decode_header;

/// The curves table's columns, in the order [`write_curves`] writes them.
pub const CURVE_COLUMNS: [&str; 5] = ["driver", "response", "library_size", "replicate", "skill"];

/// Default limit on curves rows (20 million: 9,900 pairs x 12 sizes x 100 replicates fit).
pub const DEFAULT_CURVES_MAX_ROWS: usize = 20_000_000;

/// Most library sizes accepted per pair: the features downstream cost time growing with the
/// square of the sizes (200,000 sizes took minutes), and scans use a dozen.
pub const MAX_CURVE_LIBRARY_SIZES: usize = 1_000;

/// Furthest a skill may lie outside [-1, 1] and still be taken as rounding in a correlation.
const SKILL_SLACK: f64 = 1e-9;

/// Limits for reading a curves table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CurvesOptions {
    /// Most data rows accepted (header not counted).
    pub max_rows: usize,
    /// Most bytes in one record.
    pub max_line_bytes: u64,
}

impl Default for CurvesOptions {
    fn default() -> Self {
        Self {
            max_rows: DEFAULT_CURVES_MAX_ROWS,
            max_line_bytes: crate::table::DEFAULT_MAX_LINE_BYTES,
        }
    }
}

/// One ordered pair's skill ensemble, grouped from curves rows.
#[derive(Debug, Clone, PartialEq)]
pub struct CurvePair {
    /// Driver name.
    pub driver: String,
    /// Response name.
    pub response: String,
    /// Library sizes, ascending.
    pub library_sizes: Vec<usize>,
    /// `skills[i][r]`: skill at `library_sizes[i]` for the r-th replicate in ascending
    /// replicate order; NaN marks a missing skill.
    pub skills: Vec<Vec<f64>>,
}

/// Read a curves table from a file (default limits).
pub fn read_curves(path: &Path) -> Result<Vec<CurveRow>, InputError> {
    let name = path.display().to_string();
    let file = open(path, &name)?;
    read_curves_from(file, &name)
}

/// Read a curves table from any reader (default limits); `source_name` names it in errors.
pub fn read_curves_from(reader: impl Read, source_name: &str) -> Result<Vec<CurveRow>, InputError> {
    read_curves_with(reader, source_name, &CurvesOptions::default())
}

/// Read a curves table with explicit limits.
///
/// Columns are found by name (any case, spaces trimmed); extra columns are ignored. Names
/// are trimmed; an empty or missing skill (`NA`, `NaN`, `null`) reads as NaN.
pub fn read_curves_with(
    reader: impl Read,
    source_name: &str,
    opts: &CurvesOptions,
) -> Result<Vec<CurveRow>, InputError> {
    read_rows(reader, source_name, opts).map(|(rows, _)| rows)
}

/// Read a curves table from a file and group it into pairs, with file rows in errors.
pub fn read_curve_pairs(path: &Path) -> Result<Vec<CurvePair>, InputError> {
    let name = path.display().to_string();
    let file = open(path, &name)?;
    read_curve_pairs_from(file, &name)
}

/// Read a curves table from any reader and group it into pairs.
pub fn read_curve_pairs_from(
    reader: impl Read,
    source_name: &str,
) -> Result<Vec<CurvePair>, InputError> {
    let (rows, lines) = read_rows(reader, source_name, &CurvesOptions::default())?;
    group(source_name, &rows, Some(&lines))
}

/// Group rows into one [`CurvePair`] per ordered pair, in order of first appearance.
///
/// Errors for a pair with a single library size, library sizes with unequal replicate
/// counts, or a repeated (pair, library size, replicate); rows are counted from 1 in errors.
pub fn group_curves(rows: &[CurveRow]) -> Result<Vec<CurvePair>, InputError> {
    group("curve rows", rows, None)
}

/// Write rows as a curves table with a header; skills in shortest round-trip form, NaN as
/// `NaN`. Infinite skills are refused (the reader would reject them).
///
/// Rows may be borrowed (a slice) or made on the fly (a run's ensembles, written row by row
/// so that a large table is never held as text).
pub fn write_curves<R: std::borrow::Borrow<CurveRow>>(
    w: impl Write,
    rows: impl IntoIterator<Item = R>,
) -> io::Result<()> {
    let mut out = csv::Writer::from_writer(w);
    out.write_record(CURVE_COLUMNS)?;
    for r in rows {
        let r = r.borrow();
        if r.skill.is_infinite() {
            return Err(io::Error::new(
                io::ErrorKind::InvalidInput,
                format!(
                    "infinite skill for {} -> {} at library size {}",
                    r.driver, r.response, r.library_size
                ),
            ));
        }
        out.write_record([
            r.driver.as_str(),
            r.response.as_str(),
            &r.library_size.to_string(),
            &r.replicate.to_string(),
            &format_f64(r.skill),
        ])?;
    }
    out.flush()
}

/// `curves.csv` as an [`Export`].
#[derive(Debug, Clone, Copy)]
pub struct CurvesCsv<'a>(pub &'a [CurveRow]);

impl Export for CurvesCsv<'_> {
    fn file_name(&self) -> &str {
        "curves.csv"
    }

    fn write_to(&self, w: &mut dyn Write) -> io::Result<()> {
        write_curves(w, self.0)
    }
}

fn open(path: &Path, name: &str) -> Result<File, InputError> {
    File::open(path).map_err(|source| InputError::Io {
        file: name.to_string(),
        source,
    })
}

/// Rows plus the file row of each, for grouping errors.
fn read_rows(
    reader: impl Read,
    source_name: &str,
    opts: &CurvesOptions,
) -> Result<(Vec<CurveRow>, Vec<u64>), InputError> {
    let file = source_name.to_string();
    let mut csv = Records::new(reader, source_name, opts.max_line_bytes, b',');
    let mut record = ByteRecord::new();
    if !csv.next(&mut record)? {
        return Err(InputError::CurvesEmpty { file });
    }
    let header = decode_header(&file, &record)?;
    let mut at = [0usize; 5];
    for (slot, want) in at.iter_mut().zip(CURVE_COLUMNS) {
        *slot = header
            .iter()
            .position(|h| h.eq_ignore_ascii_case(want))
            .ok_or_else(|| InputError::MissingColumn {
                file: file.clone(),
                column: want.to_string(),
                found: show_names(&header),
            })?;
    }
    let [c_driver, c_response, c_size, c_rep, c_skill] = at;

    let mut rows = Vec::new();
    let mut lines = Vec::new();
    while csv.next(&mut record)? {
        let row = csv.row(&record);
        if rows.len() == opts.max_rows {
            return Err(InputError::TooManyRows {
                file,
                row,
                limit: opts.max_rows,
            });
        }
        if record.len() != header.len() {
            return Err(InputError::Ragged {
                file,
                row,
                expected: header.len(),
                found: record.len(),
                hint: "Give every row one field per header column (quote names that hold \
                       commas)"
                    .to_string(),
            });
        }
        let text = |c: usize| {
            std::str::from_utf8(&record[c]).map_err(|_| InputError::NotUtf8 {
                file: file.clone(),
                row,
                column: format!("`{}`", header[c]),
            })
        };
        let name = |c: usize| -> Result<String, InputError> {
            let n = text(c)?.trim();
            let problem = if n.is_empty() {
                "the variable name is empty".to_string()
            } else if n.chars().any(char::is_control) {
                format!(
                    "the variable name {} holds a line break, tab or other control character",
                    show_cell(n)
                )
            } else {
                return Ok(n.to_string());
            };
            Err(InputError::BadName {
                file: file.clone(),
                row,
                column: header[c].clone(),
                problem,
            })
        };
        let driver = name(c_driver)?;
        let response = name(c_response)?;
        if driver == response {
            return Err(InputError::SelfPair {
                file,
                row,
                name: driver,
            });
        }
        let library_size = count(&file, row, &header[c_size], text(c_size)?, 1)?;
        let replicate = count(&file, row, &header[c_rep], text(c_rep)?, 0)?;
        let skill = skill(&file, row, &header[c_skill], text(c_skill)?)?;
        rows.push(CurveRow {
            driver,
            response,
            library_size,
            replicate,
            skill,
        });
        lines.push(row);
    }
    if rows.is_empty() {
        return Err(InputError::CurvesHeaderOnly { file });
    }
    Ok((rows, lines))
}

fn count(file: &str, row: u64, column: &str, raw: &str, min: usize) -> Result<usize, InputError> {
    let text = raw.trim();
    let what = if min == 0 {
        "a whole number of 0 or more (the replicate's index)"
    } else {
        "a whole number of at least 1 (the number of points in the library)"
    };
    let problem = if !text.is_empty() && text.bytes().all(|b| b.is_ascii_digit()) {
        match text.parse::<usize>() {
            Ok(v) if v >= min => return Ok(v),
            Ok(_) => "it is too small",
            Err(_) => "it is too large",
        }
    } else {
        match text.parse::<f64>() {
            // Writers that go through floating point print `25.0`; accept exact integers.
            Ok(v) if v >= min as f64 && v.fract() == 0.0 && v <= 9.007_199_254_740_992e15 => {
                return Ok(v as usize);
            }
            Ok(v) if v < 0.0 => "it is negative",
            Ok(v) if v.is_finite() && v.fract() != 0.0 => "it is not a whole number",
            Ok(_) => "it is out of range",
            Err(_) if crate::cell::is_missing(text) => "it is missing",
            Err(_) => "it is not a number",
        }
    };
    Err(InputError::BadCount {
        file: file.to_string(),
        row,
        column: column.to_string(),
        cell: show_cell(text),
        rule: format!("{problem}; `{column}` must be {what}. Correct the cell"),
    })
}

fn skill(file: &str, row: u64, column: &str, text: &str) -> Result<f64, InputError> {
    match parse_number(text) {
        Ok(Cell::Missing) => Ok(f64::NAN),
        Ok(Cell::Value(v)) if v.abs() <= 1.0 + SKILL_SLACK => Ok(v),
        Ok(Cell::Value(_)) => Err(InputError::SkillOutOfRange {
            file: file.to_string(),
            row,
            cell: show_cell(text.trim()),
        }),
        Err(CellProblem::Infinite) => Err(InputError::Infinite {
            file: file.to_string(),
            row,
            column: column.to_string(),
            cell: show_cell(text.trim()),
        }),
        Err(CellProblem::NotNumeric(hint)) => Err(InputError::NotNumeric {
            file: file.to_string(),
            row,
            column: column.to_string(),
            cell: show_cell(text.trim()),
            hint,
        }),
    }
}

/// Per pair: library size -> replicate -> (skill, row).
type Members = BTreeMap<usize, BTreeMap<usize, (f64, u64)>>;

fn group(
    file: &str,
    rows: &[CurveRow],
    lines: Option<&[u64]>,
) -> Result<Vec<CurvePair>, InputError> {
    let mut index: HashMap<(&str, &str), usize> = HashMap::new();
    let mut pairs: Vec<((&str, &str), Members)> = Vec::new();
    for (i, r) in rows.iter().enumerate() {
        let row = lines.map_or(i as u64 + 1, |l| l[i]);
        let key = (r.driver.as_str(), r.response.as_str());
        let slot = *index.entry(key).or_insert_with(|| {
            pairs.push((key, Members::new()));
            pairs.len() - 1
        });
        let members = pairs[slot].1.entry(r.library_size).or_default();
        if let Some(&(_, first_row)) = members.get(&r.replicate) {
            return Err(InputError::DuplicateMember {
                file: file.to_string(),
                row,
                first_row,
                driver: r.driver.clone(),
                response: r.response.clone(),
                size: r.library_size,
                replicate: r.replicate,
            });
        }
        members.insert(r.replicate, (r.skill, row));
    }
    pairs
        .into_iter()
        .map(|((driver, response), members)| {
            let mut sizes = members.iter();
            let (&first_size, first) = sizes.next().expect("a pair exists only with a member");
            if members.len() < 2 {
                return Err(InputError::SingleLibrarySize {
                    file: file.to_string(),
                    driver: driver.to_string(),
                    response: response.to_string(),
                    size: first_size,
                });
            }
            if members.len() > MAX_CURVE_LIBRARY_SIZES {
                return Err(InputError::TooManyLibrarySizes {
                    file: file.to_string(),
                    driver: driver.to_string(),
                    response: response.to_string(),
                    count: members.len(),
                    max: MAX_CURVE_LIBRARY_SIZES,
                });
            }
            if let Some((&size_b, other)) = sizes.find(|(_, m)| m.len() != first.len()) {
                return Err(InputError::UnequalReplicates {
                    file: file.to_string(),
                    driver: driver.to_string(),
                    response: response.to_string(),
                    size_a: first_size,
                    count_a: first.len(),
                    size_b,
                    count_b: other.len(),
                });
            }
            Ok(CurvePair {
                driver: driver.to_string(),
                response: response.to_string(),
                library_sizes: members.keys().copied().collect(),
                skills: members
                    .values()
                    .map(|m| m.values().map(|&(s, _)| s).collect())
                    .collect(),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn row(d: &str, r: &str, l: usize, k: usize, s: f64) -> CurveRow {
        CurveRow {
            driver: d.into(),
            response: r.into(),
            library_size: l,
            replicate: k,
            skill: s,
        }
    }

    fn read(text: &str) -> Result<Vec<CurveRow>, InputError> {
        read_curves_from(text.as_bytes(), "curves.csv")
    }

    /// Findings: an empty curves file got the series-table hint ("one row per time point"),
    /// and an unclosed quote was reported as missing fields.
    #[test]
    fn empty_and_unclosed_curves_files_get_curves_words() {
        for (text, needle) in [
            ("", "driver,response,library_size,replicate,skill"),
            (
                "driver,response,library_size,replicate,skill\n",
                "library size and replicate",
            ),
        ] {
            let msg = read(text).unwrap_err().to_string();
            assert!(msg.contains(needle) && !msg.contains("time point"), "{msg}");
        }
        let msg =
            read("driver,response,library_size,replicate,skill\na,b,10,1,\"0.5\na,b,20,1,0.6\n")
                .unwrap_err()
                .to_string();
        assert!(
            msg.contains("row 2") && msg.contains("never closed"),
            "{msg}"
        );
    }

    #[test]
    fn columns_by_name_extra_ignored_and_missing_skill() {
        let rows = read(
            "note,Skill,replicate,library_size,response,driver\n\
             a,0.5,0,10,y,x\n\
             b,,1,10,y,x\n\
             c,NA,2,10.0,y,x\n",
        )
        .unwrap();
        assert_eq!(rows.len(), 3);
        assert_eq!(rows[0], row("x", "y", 10, 0, 0.5));
        assert!(rows[1].skill.is_nan() && rows[2].skill.is_nan());
        assert_eq!(rows[2].library_size, 10);
    }

    #[test]
    fn bad_cells_are_named() {
        let head = "driver,response,library_size,replicate,skill\n";
        let cases = [
            ("x,y,-5,0,0.1\n", "negative"),
            ("x,y,2.5,0,0.1\n", "not a whole number"),
            ("x,y,0,0,0.1\n", "too small"),
            ("x,y,ten,0,0.1\n", "not a number"),
            ("x,y,10,0,high\n", "not a number"),
            ("x,y,10,0,1.5\n", "outside [-1, 1]"),
            ("x,y,10,0,-inf\n", "infinite"),
            ("x,x,10,0,0.2\n", "itself"),
            (" ,y,10,0,0.2\n", "name is empty"),
            ("\"x\ny\",y,10,0,0.2\n", "control character"),
        ];
        for (body, needle) in cases {
            let msg = read(&format!("{head}{body}")).unwrap_err().to_string();
            assert!(msg.contains("curves.csv: row 2"), "{msg}");
            assert!(msg.contains(needle), "{body:?}: {msg}");
        }
        let msg = read("driver,response,size,replicate,skill\nx,y,1,0,0\n")
            .unwrap_err()
            .to_string();
        assert!(msg.contains("`library_size` is missing"), "{msg}");
    }

    #[test]
    fn grouping_orders_pairs_by_first_appearance_and_sizes_ascending() {
        let rows = vec![
            row("b", "a", 20, 1, 0.4),
            row("a", "b", 10, 0, 0.1),
            row("b", "a", 10, 0, 0.2),
            row("b", "a", 20, 0, 0.3),
            row("b", "a", 10, 1, f64::NAN),
            row("a", "b", 20, 0, 0.2),
        ];
        let pairs = group_curves(&rows).unwrap();
        assert_eq!(
            (pairs[0].driver.as_str(), pairs[0].response.as_str()),
            ("b", "a")
        );
        assert_eq!(pairs[0].library_sizes, [10, 20]);
        assert_eq!(pairs[0].skills[0][0], 0.2);
        assert!(pairs[0].skills[0][1].is_nan());
        assert_eq!(pairs[0].skills[1], [0.3, 0.4]);
        assert_eq!(pairs[1].skills, [vec![0.1], vec![0.2]]);
    }

    #[test]
    fn grouping_errors() {
        let single = [row("a", "b", 10, 0, 0.1), row("a", "b", 10, 1, 0.1)];
        let msg = group_curves(&single).unwrap_err().to_string();
        assert!(
            msg.contains("a -> b") && msg.contains("at least two library sizes"),
            "{msg}"
        );
        let unequal = [
            row("a", "b", 10, 0, 0.1),
            row("a", "b", 10, 1, 0.1),
            row("a", "b", 20, 0, 0.1),
        ];
        let msg = group_curves(&unequal).unwrap_err().to_string();
        assert!(
            msg.contains("has 2 replicates") && msg.contains("has 1"),
            "{msg}"
        );
        let text = "driver,response,library_size,replicate,skill\n\
                    a,b,10,0,0.1\na,b,20,0,0.2\na,b,10,0,0.3\n";
        let msg = read_curve_pairs_from(text.as_bytes(), "c.csv")
            .unwrap_err()
            .to_string();
        assert!(
            msg.contains("c.csv: row 4") && msg.contains("row 2"),
            "{msg}"
        );
    }

    #[test]
    fn writer_refuses_infinite_skill() {
        let mut out = Vec::new();
        assert!(write_curves(&mut out, &[row("a", "b", 1, 0, f64::INFINITY)]).is_err());
    }

    fn name() -> impl Strategy<Value = String> {
        // Commas and quotes need quoting in CSV; spaces inside and non-ASCII must survive too.
        "[A-Za-z0-9_,\";.-]([A-Za-z0-9_ ,\";.\u{e9}-]{0,10}[A-Za-z0-9_,\";.-])?"
    }

    fn skill_value() -> impl Strategy<Value = f64> {
        prop_oneof![
            -1.0f64..=1.0,
            any::<u64>()
                .prop_map(f64::from_bits)
                .prop_filter("a correlation", |x| x.is_nan() || x.abs() <= 1.0),
            Just(-0.0),
            Just(5e-324),
            Just(f64::NAN),
        ]
    }

    fn curve_row() -> impl Strategy<Value = CurveRow> {
        (name(), name(), 1usize..100_000, 0usize..1000, skill_value())
            .prop_filter("driver differs from response", |(d, r, ..)| d != r)
            .prop_map(|(d, r, l, k, s)| row(&d, &r, l, k, s))
    }

    proptest! {
        // Round trip relies on Rust's float formatting being shortest-round-trip (std docs
        // for `Display`/`LowerExp` of f64; Steele & White 1990 define the property).
        #[test]
        fn write_then_read_round_trips_exactly(rows in prop::collection::vec(curve_row(), 1..40)) {
            let mut buf = Vec::new();
            write_curves(&mut buf, &rows).unwrap();
            let back = read_curves_from(&buf[..], "mem").unwrap();
            prop_assert_eq!(back.len(), rows.len());
            for (a, b) in rows.iter().zip(&back) {
                prop_assert_eq!(&a.driver, &b.driver);
                prop_assert_eq!(&a.response, &b.response);
                prop_assert_eq!(a.library_size, b.library_size);
                prop_assert_eq!(a.replicate, b.replicate);
                prop_assert!(
                    (a.skill.is_nan() && b.skill.is_nan()) || a.skill.to_bits() == b.skill.to_bits(),
                    "{} became {}", a.skill, b.skill
                );
            }
        }
    }
}
