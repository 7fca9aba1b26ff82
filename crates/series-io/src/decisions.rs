//! Reviewer decisions exported from the report: `decisions.csv`.
//!
//! Columns (by name, any order, extra columns ignored):
//! `driver,response,decision,note,reviewer,decided_at,input_sha256`. `decision` is `causal`,
//! `non-causal` or `unsure`; `input_sha256` is the checksum of the input the reviewed run
//! read, the same on every row, so a file can never be applied to another table by mistake.
//! Names are written as in the run's CSV outputs (spreadsheet-safe).

use std::collections::HashMap;
use std::path::Path;

use csv::ByteRecord;

use crate::error::InputError;

/// The columns of a decisions file, in the order the report writes them.
pub const DECISION_COLUMNS: [&str; 7] = [
    "driver",
    "response",
    "decision",
    "note",
    "reviewer",
    "decided_at",
    "input_sha256",
];

/// What a reviewer decided about one ordered pair.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Decision {
    /// The reviewer judges that the driver drives the response.
    Causal,
    /// The reviewer judges that it does not.
    NonCausal,
    /// The reviewer could not decide.
    Unsure,
}

impl Decision {
    /// The word used in the file: `causal`, `non-causal`, `unsure`.
    pub fn as_str(self) -> &'static str {
        match self {
            Decision::Causal => "causal",
            Decision::NonCausal => "non-causal",
            Decision::Unsure => "unsure",
        }
    }

    fn parse(text: &str) -> Option<Self> {
        match text.trim() {
            "causal" => Some(Decision::Causal),
            "non-causal" => Some(Decision::NonCausal),
            "unsure" => Some(Decision::Unsure),
            _ => None,
        }
    }
}

/// One row of a decisions file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DecisionRow {
    /// Driver name.
    pub driver: String,
    /// Response name.
    pub response: String,
    /// The decision.
    pub decision: Decision,
    /// The reviewer's note (may be empty).
    pub note: String,
    /// Who decided (may be empty).
    pub reviewer: String,
    /// When, as the report wrote it (ISO 8601, UTC).
    pub decided_at: String,
}

/// A decisions file: its rows and the checksum of the input they were made on.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DecisionFile {
    /// SHA-256 (hex) of the input table of the reviewed run.
    pub input_sha256: String,
    /// One row per decided pair, in file order.
    pub rows: Vec<DecisionRow>,
}

impl DecisionFile {
    /// The decision on `driver -> response`, if any.
    pub fn get(&self, driver: &str, response: &str) -> Option<&DecisionRow> {
        self.rows
            .iter()
            .find(|r| r.driver == driver && r.response == response)
    }
}

/// Read a decisions file (see the module documentation for the format).
pub fn read_decisions(path: &Path) -> Result<DecisionFile, InputError> {
    let name = path.display().to_string();
    let file = std::fs::File::open(path).map_err(|source| InputError::Io {
        file: name.clone(),
        source,
    })?;
    read_decisions_from(file, &name)
}

/// Read a decisions file from any reader; `source_name` names it in errors.
pub fn read_decisions_from(
    reader: impl std::io::Read,
    source_name: &str,
) -> Result<DecisionFile, InputError> {
    let file = source_name.to_string();
    let bad = |row: u64, message: String| InputError::BadDecisions {
        file: file.clone(),
        row,
        message,
    };
    let mut csv = crate::records::Records::new(reader, source_name, 1 << 20, b',');
    let mut record = ByteRecord::new();
    if !csv.next(&mut record)? {
        return Err(bad(
            1,
            format!(
                "the file is empty; export the decisions from the report (header `{}`)",
                DECISION_COLUMNS.join(",")
            ),
        ));
    }
    let header = crate::table::decode_header(&file, &record)?;
    let mut at = [0usize; 7];
    for (k, col) in DECISION_COLUMNS.iter().enumerate() {
        at[k] = header.iter().position(|h| h == col).ok_or_else(|| {
            bad(
                1,
                format!(
                    "the column `{col}` is missing; a decisions file exported by the report has \
                     the columns {}",
                    DECISION_COLUMNS.join(",")
                ),
            )
        })?;
    }
    let mut rows = Vec::new();
    let mut seen: HashMap<(String, String), u64> = HashMap::new();
    let mut checksum: Option<String> = None;
    while csv.next(&mut record)? {
        let row = csv.row(&record);
        if let Some(message) = width_mismatch(&record, header.len()) {
            return Err(bad(row, message));
        }
        let field = |k: usize| -> Result<String, InputError> {
            std::str::from_utf8(&record[at[k]])
                .map(str::to_string)
                .map_err(|_| InputError::NotUtf8 {
                    file: file.clone(),
                    row,
                    column: format!("`{}`", DECISION_COLUMNS[k]),
                })
        };
        let (driver, response) = (field(0)?, field(1)?);
        if driver.is_empty() || response.is_empty() {
            return Err(bad(row, "the driver or the response is empty".into()));
        }
        let text = field(2)?;
        let decision = Decision::parse(&text).ok_or_else(|| {
            bad(
                row,
                format!(
                    "the decision {text:?} is not one of causal, non-causal, unsure; fix the cell"
                ),
            )
        })?;
        let sha = field(6)?.trim().to_ascii_lowercase();
        if sha.len() != 64 || !sha.bytes().all(|b| b.is_ascii_hexdigit()) {
            return Err(bad(
                row,
                format!("the input checksum {sha:?} is not a SHA-256 in hex (64 characters)"),
            ));
        }
        match &checksum {
            None => checksum = Some(sha),
            Some(first) if *first != sha => {
                return Err(bad(
                    row,
                    format!(
                        "the input checksum {sha} differs from the first row's {first}: the rows \
                         come from runs on different inputs; keep one file per input"
                    ),
                ));
            }
            Some(_) => {}
        }
        if let Some(first) = seen.insert((driver.clone(), response.clone()), row) {
            return Err(bad(
                row,
                format!(
                    "the pair {driver} -> {response} was already decided on row {first}; keep one \
                     row per pair"
                ),
            ));
        }
        rows.push(DecisionRow {
            driver,
            response,
            decision,
            note: field(3)?,
            reviewer: field(4)?,
            decided_at: field(5)?,
        });
    }
    let input_sha256 = checksum.ok_or_else(|| {
        bad(
            1,
            "the file holds a header but no decisions; mark pairs in the report, then export"
                .into(),
        )
    })?;
    Ok(DecisionFile { input_sha256, rows })
}

/// Rows of a run's `features.csv`: (driver, response, values by column), with the feature
/// column names in file order. Empty cells are `None` (unavailable).
pub type FeatureRows = (Vec<String>, Vec<(String, String, Vec<Option<f64>>)>);

/// Read a run's `features.csv` (`driver,response,` then one column per feature).
pub fn read_feature_rows(path: &Path) -> Result<FeatureRows, InputError> {
    let file = path.display().to_string();
    let reader = std::fs::File::open(path).map_err(|source| InputError::Io {
        file: file.clone(),
        source,
    })?;
    let bad = |row: u64, message: String| InputError::BadDecisions {
        file: file.clone(),
        row,
        message,
    };
    let mut csv = crate::records::Records::new(reader, &file, crate::DEFAULT_MAX_LINE_BYTES, b',');
    let mut record = ByteRecord::new();
    if !csv.next(&mut record)? {
        return Err(bad(
            1,
            "the features file is empty; give the folder of a finished scan".into(),
        ));
    }
    let header = crate::table::decode_header(&file, &record)?;
    if header.len() < 3 || header[0] != "driver" || header[1] != "response" {
        return Err(bad(
            1,
            "a features file starts with the columns driver,response, then one column per \
             feature; give the features.csv of a finished scan"
                .into(),
        ));
    }
    let mut rows = Vec::new();
    while csv.next(&mut record)? {
        let row = csv.row(&record);
        if let Some(message) = width_mismatch(&record, header.len()) {
            return Err(bad(row, message));
        }
        let text = |k: usize| String::from_utf8_lossy(&record[k]).into_owned();
        let mut values = Vec::with_capacity(header.len() - 2);
        for (k, column) in header.iter().enumerate().skip(2) {
            let t = text(k);
            values.push(match crate::cell::parse_number(&t) {
                Ok(crate::cell::Cell::Value(v)) => Some(v),
                Ok(crate::cell::Cell::Missing) => None,
                Err(_) => {
                    return Err(bad(
                        row,
                        format!("column `{column}`: {t:?} is not a number"),
                    ));
                }
            });
        }
        rows.push((text(0), text(1), values));
    }
    Ok((header[2..].to_vec(), rows))
}

/// The message for a row whose field count differs from the header's, if it does.
fn width_mismatch(record: &ByteRecord, header_len: usize) -> Option<String> {
    (record.len() != header_len).then(|| {
        format!(
            "the row has {} fields but the header has {}",
            record.len(),
            header_len
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const SHA: &str = "9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08";

    fn read(text: &str) -> Result<DecisionFile, InputError> {
        read_decisions_from(text.as_bytes(), "decisions.csv")
    }

    #[test]
    fn reads_rows_with_quoted_notes() {
        let text = format!(
            "driver,response,decision,note,reviewer,decided_at,input_sha256\n\
             rain,flow,causal,\"lag fits, \"\"known\"\" link\",A. Lee,2026-12-03T14:00:00.000Z,{SHA}\n\
             flow,rain,unsure,,A. Lee,2026-12-03T14:01:00.000Z,{SHA}\n"
        );
        let f = read(&text).unwrap();
        assert_eq!(f.input_sha256, SHA);
        assert_eq!(f.rows.len(), 2);
        assert_eq!(f.rows[0].note, "lag fits, \"known\" link");
        assert_eq!(f.get("flow", "rain").unwrap().decision, Decision::Unsure);
    }

    #[test]
    fn refuses_what_cannot_be_applied() {
        let head = "driver,response,decision,note,reviewer,decided_at,input_sha256\n";
        let e = |t: String| read(&t).unwrap_err().to_string();
        assert!(e(format!("{head}a,b,maybe,,,,{SHA}\n")).contains("row 2"));
        assert!(e(format!("{head}a,b,causal,,,,abc\n")).contains("SHA-256"));
        let other = SHA.replace('9', "8");
        assert!(
            e(format!(
                "{head}a,b,causal,,,,{SHA}\nb,a,causal,,,,{other}\n"
            ))
            .contains("differs")
        );
        assert!(e(format!("{head}a,b,causal,,,,{SHA}\na,b,unsure,,,,{SHA}\n")).contains("row 2"));
        assert!(e(head.to_string()).contains("no decisions"));
        assert!(e("driver,response\n".into()).contains("`decision` is missing"));
    }
}
