//! Typed errors for reading inputs and writing outputs.
//!
//! Every input message is one paragraph that names the file, the 1-based row as it
//! appears in the file (the header is row 1), the column, and what to do about it,
//! because the CLI prints it as the whole explanation of a non-zero exit.

use std::io;
use std::path::PathBuf;

/// Something wrong with an input table (series CSV or curves CSV).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum InputError {
    /// The file could not be opened or read.
    #[error(
        "{file}: the file could not be read. Check that the path is right, that it is a \
         regular file and that you may read it"
    )]
    Io {
        /// Input name (path or stream name).
        file: String,
        /// The operating-system error.
        #[source]
        source: io::Error,
    },

    /// The file has no bytes, or only blank lines: there is no header row.
    #[error(
        "{file}: the file is empty (row 1 should be a header naming the columns). Write a \
         header such as `t,x,y` followed by one row per time point"
    )]
    Empty {
        /// Input name.
        file: String,
    },

    /// A header was found but no data row follows it.
    #[error(
        "{file}: only a header (row 1) was found and no data rows follow it. Add one row per \
         time point below the header"
    )]
    HeaderOnly {
        /// Input name.
        file: String,
    },

    /// A quote opens a field that is never closed: the rest of the file became one field.
    #[error(
        "{file}: row {row}: a field opens with a double quote (\") that is never closed, so the \
         rest of the file was read as one field. Close the quote, or remove it if the field is \
         not meant to be quoted"
    )]
    UnclosedQuote {
        /// Input name.
        file: String,
        /// Row where the record with the open quote starts.
        row: u64,
    },

    /// A curves file has no bytes, or only blank lines.
    #[error(
        "{file}: the curves file is empty (row 1 should be the header \
         `driver,response,library_size,replicate,skill`). Write that header followed by one row \
         per ensemble member: each library size of each pair, once per replicate"
    )]
    CurvesEmpty {
        /// Input name.
        file: String,
    },

    /// A curves file has a header but no rows.
    #[error(
        "{file}: only a header (row 1) was found and no ensemble rows follow it. Add one row per \
         pair, library size and replicate below the header"
    )]
    CurvesHeaderOnly {
        /// Input name.
        file: String,
    },

    /// A field contains bytes that are not valid UTF-8.
    #[error(
        "{file}: row {row}, column {column}: the text is not valid UTF-8 (the file was \
         probably saved in a legacy encoding such as Latin-1 or UTF-16). Re-save the file as \
         UTF-8 (for example `iconv -f latin1 -t utf-8 in.csv > out.csv`)"
    )]
    NotUtf8 {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Column name, or `#N` when the header itself is affected.
        column: String,
    },

    /// One record is longer than the configured byte limit.
    #[error(
        "{file}: row {row} is longer than the limit of {limit} bytes (a single record this \
         long usually means a missing line break, an unclosed quote `\"`, or a file that is \
         not CSV). Check that row for an unbalanced quote or missing line ends; if the row is \
         genuine, raise the record-size limit"
    )]
    RecordTooLong {
        /// Input name.
        file: String,
        /// 1-based row where the over-long record starts.
        row: u64,
        /// The limit in bytes.
        limit: u64,
    },

    /// More data rows than the configured limit.
    #[error(
        "{file}: the table has more than {limit} data rows, the configured limit (it bounds \
         memory; row {row} is the first row over it). Thin or split the series, or raise the \
         row limit if the machine has the memory for it"
    )]
    TooManyRows {
        /// Input name.
        file: String,
        /// First row (1-based, in the file) beyond the limit.
        row: u64,
        /// The limit on data rows.
        limit: usize,
    },

    /// More cells (rows x series) than the configured limit.
    #[error(
        "{file}: the table has more than {limit} numeric cells (rows times series), the \
         configured limit that bounds memory; row {row} is the first row over it. Use fewer \
         series or rows, or raise the cell limit if the machine has the memory for it"
    )]
    TooManyCells {
        /// Input name.
        file: String,
        /// First row (1-based, in the file) beyond the limit.
        row: u64,
        /// The limit on cells.
        limit: usize,
    },

    /// The header has more columns than the configured limit.
    #[error(
        "{file}: row 1 (header) has {found} columns, more than the limit of {limit}. Check \
         that row 1 is a header and that the file is comma-separated, or raise the column \
         limit"
    )]
    TooManyColumns {
        /// Input name.
        file: String,
        /// Columns found.
        found: usize,
        /// The limit.
        limit: usize,
    },

    /// A row has a different number of fields from the header.
    #[error("{file}: row {row} has {found} fields but the header (row 1) has {expected}. {hint}")]
    Ragged {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Field count of the header.
        expected: usize,
        /// Field count of this row.
        found: usize,
        /// What probably went wrong and how to fix it.
        hint: String,
    },

    /// A cell that should hold a number does not parse as one.
    #[error("{file}: row {row}, column `{column}`: {cell} is not a number. {hint}")]
    NotNumeric {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Column name.
        column: String,
        /// The offending cell, quoted and shortened for display.
        cell: String,
        /// What probably went wrong and how to fix it.
        hint: String,
    },

    /// A cell holds an infinite value (or one too large for a 64-bit float).
    #[error(
        "{file}: row {row}, column `{column}`: {cell} is infinite (or too large for a 64-bit \
         float). Infinite values cannot be embedded; clean the value, or leave the cell empty \
         or write NA to mark it missing"
    )]
    Infinite {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Column name.
        column: String,
        /// The offending cell, quoted and shortened for display.
        cell: String,
    },

    /// Two header fields carry the same name.
    #[error(
        "{file}: row 1 (header): the column name `{column}` appears twice, as column {first} \
         and column {second}. Give every column a distinct name"
    )]
    DuplicateColumn {
        /// Input name.
        file: String,
        /// The repeated name.
        column: String,
        /// 1-based position of its first appearance.
        first: usize,
        /// 1-based position of its second appearance.
        second: usize,
    },

    /// A header field is empty.
    #[error(
        "{file}: row 1 (header): column {position} has no name. Give every column a name \
         (and remove stray trailing commas from the header)"
    )]
    EmptyColumnName {
        /// Input name.
        file: String,
        /// 1-based position of the unnamed column.
        position: usize,
    },

    /// A header name holds a line break, tab or other control character.
    #[error(
        "{file}: row 1 (header): the name of column {position} holds a line break, tab or \
         other control character. Remove it from the name (a quoted header field may span \
         lines by mistake)"
    )]
    ControlInName {
        /// Input name.
        file: String,
        /// 1-based position of the column.
        position: usize,
    },

    /// The requested time column is not in the header.
    #[error(
        "{file}: row 1 (header): the time column `{name}` was requested but the header has \
         only {available}. Name an existing column as the time column, or rename that column \
         in the file"
    )]
    TimeColumnNotFound {
        /// Input name.
        file: String,
        /// The requested name.
        name: String,
        /// The header's names, listed for the message.
        available: String,
    },

    /// Fewer than two series columns (besides the time column).
    #[error(
        "{file}: row 1 (header): found {found} series column(s) ({names}) but at least two \
         are needed to test any direction. {hint}"
    )]
    TooFewSeries {
        /// Input name.
        file: String,
        /// How many series columns were found.
        found: usize,
        /// Their names, listed for the message.
        names: String,
        /// What probably went wrong and how to fix it.
        hint: String,
    },

    /// A series whose present values are all equal.
    #[error(
        "{file}: column `{column}`: every present value equals {value}, so the series carries \
         no dynamics to embed (checked over all rows). Remove the column, or check that the \
         right data were exported"
    )]
    ConstantSeries {
        /// Input name.
        file: String,
        /// Column name.
        column: String,
        /// The single value.
        value: f64,
    },

    /// A series with fewer than two present values.
    #[error(
        "{file}: column `{column}`: only {found} of the rows hold a value (the rest are \
         missing), and at least two are needed. Fill in the column or remove it"
    )]
    TooFewValues {
        /// Input name.
        file: String,
        /// Column name.
        column: String,
        /// Number of present values.
        found: usize,
    },

    /// The time column has a missing cell.
    #[error(
        "{file}: row {row}, column `{column}`: the time value is missing. Every row needs a \
         time; fill it in, or delete the row"
    )]
    TimeMissing {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Time column name.
        column: String,
    },

    /// The time column does not strictly increase.
    #[error(
        "{file}: row {row}, column `{column}`: the time {value} does not come after the \
         previous row's time {previous}. Sort the rows by time and remove duplicated time \
         points"
    )]
    TimeNotIncreasing {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Time column name.
        column: String,
        /// Time on the previous row, as written.
        previous: String,
        /// Time on this row, as written.
        value: String,
    },

    /// A reviewer-decisions file that cannot be used.
    #[error("{file}: row {row}: {message}")]
    BadDecisions {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// What is wrong and the fix.
        message: String,
    },

    /// The time axis mixes numbers, dates and date-times.
    #[error(
        "{file}: row {row}, column `{column}`: {detail}. Write every time in one form (all \
         numbers, all dates such as 2020-01-31, or all date-times such as 2020-01-31T06:00)"
    )]
    TimeKindMixed {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Time column name.
        column: String,
        /// The time on this row and what it is, against the first row's kind.
        detail: String,
    },

    /// The time axis has steps of different lengths.
    #[error(
        "{file}: row {row}, column `{column}`: {detail}. Delay embedding assumes equal time \
         steps. {fix}"
    )]
    UnevenSteps {
        /// Input name.
        file: String,
        /// 1-based row in the file where the first uneven step ends.
        row: u64,
        /// Time column name.
        column: String,
        /// The step, both times as written, the usual step and how many steps differ.
        detail: String,
        /// What to do about it.
        fix: String,
    },

    /// The CSV parser reported a malformed record.
    #[error("{file}: row {row}: the row is not valid CSV ({message}). Check quoting on that row")]
    Malformed {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// The parser's description.
        message: String,
    },

    /// A required column of the curves table is absent.
    #[error(
        "{file}: row 1 (header): the required column `{column}` is missing (found: {found}). \
         A curves table needs the columns driver,response,library_size,replicate,skill; add \
         or rename the column"
    )]
    MissingColumn {
        /// Input name.
        file: String,
        /// The missing column.
        column: String,
        /// The header's names, listed for the message.
        found: String,
    },

    /// A count column (library size, replicate) is not a non-negative whole number.
    #[error("{file}: row {row}, column `{column}`: {cell} is not valid here: {rule}")]
    BadCount {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Column name.
        column: String,
        /// The offending cell, quoted and shortened for display.
        cell: String,
        /// The rule it breaks and the fix.
        rule: String,
    },

    /// A skill outside [-1, 1] (a correlation cannot lie there).
    #[error(
        "{file}: row {row}, column `skill`: {cell} lies outside [-1, 1], which a correlation \
         cannot. Check that the `skill` column holds cross-map correlations (not an error \
         measure), or mark the value missing with NA"
    )]
    SkillOutOfRange {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// The offending cell, quoted and shortened for display.
        cell: String,
    },

    /// An empty driver or response name, or one holding control characters.
    #[error(
        "{file}: row {row}, column `{column}`: {problem}. Write the variable's name as it \
         appears in the series table's header"
    )]
    BadName {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// Column name (`driver` or `response`).
        column: String,
        /// What is wrong with the name.
        problem: String,
    },

    /// A row whose driver and response are the same variable.
    #[error(
        "{file}: row {row}: driver and response are both `{name}`; a variable cannot be \
         tested against itself. Remove the row"
    )]
    SelfPair {
        /// Input name.
        file: String,
        /// 1-based row in the file.
        row: u64,
        /// The variable name.
        name: String,
    },

    /// A pair whose ensemble has only one library size, so no convergence can be seen.
    #[error(
        "{file}: pair {driver} -> {response}: every row has library_size {size}; at least two \
         library sizes are needed to judge convergence. Add rows for more library sizes"
    )]
    SingleLibrarySize {
        /// Input name.
        file: String,
        /// Driver name.
        driver: String,
        /// Response name.
        response: String,
        /// The one library size.
        size: usize,
    },

    /// A pair with more library sizes than the documented cap.
    #[error(
        "{file}: pair {driver} -> {response} has {count} library sizes, above the cap of {max}; \
         the curve-shape features cost time growing with the square of the sizes, and a few \
         dozen sizes show convergence. Keep at most {max} library sizes per pair (for example \
         every k-th size)"
    )]
    TooManyLibrarySizes {
        /// Input name.
        file: String,
        /// Driver name.
        driver: String,
        /// Response name.
        response: String,
        /// Library sizes found.
        count: usize,
        /// The cap.
        max: usize,
    },

    /// A pair whose library sizes carry different numbers of replicates.
    #[error(
        "{file}: pair {driver} -> {response}: library_size {size_a} has {count_a} replicates \
         but library_size {size_b} has {count_b}. Give every library size the same number of \
         replicates (a missing skill can be written as NA)"
    )]
    UnequalReplicates {
        /// Input name.
        file: String,
        /// Driver name.
        driver: String,
        /// Response name.
        response: String,
        /// First library size.
        size_a: usize,
        /// Its replicate count.
        count_a: usize,
        /// Library size with a different count.
        size_b: usize,
        /// Its replicate count.
        count_b: usize,
    },

    /// The same (pair, library size, replicate) appears twice.
    #[error(
        "{file}: row {row}: pair {driver} -> {response}, library_size {size}, replicate \
         {replicate} already appeared on row {first_row}. Remove the duplicated row"
    )]
    DuplicateMember {
        /// Input name.
        file: String,
        /// 1-based row of the repeat, or 0 when rows were not read from a file.
        row: u64,
        /// 1-based row of the first appearance, or 0 when unknown.
        first_row: u64,
        /// Driver name.
        driver: String,
        /// Response name.
        response: String,
        /// Library size.
        size: usize,
        /// Replicate index.
        replicate: usize,
    },
}

/// Something went wrong while writing an output file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum OutputError {
    /// The output directory could not be created.
    #[error(
        "{}: the output directory could not be created. Check the path and that you may \
         write there",
        dir.display()
    )]
    CreateDir {
        /// The directory.
        dir: PathBuf,
        /// The operating-system error.
        #[source]
        source: io::Error,
    },

    /// The output path exists and is not a directory.
    #[error("{}: the output path exists and is not a directory. Choose another --out path", dir.display())]
    NotADirectory {
        /// The path.
        dir: PathBuf,
    },

    /// An output file name that is not a plain file name.
    #[error(
        "`{name}` is not a plain output file name (it is empty, starts with `.`, or holds a \
         path separator)"
    )]
    BadName {
        /// The rejected name.
        name: String,
    },

    /// Writing, syncing or renaming an output file failed; no partial file is left.
    #[error(
        "{}: the file could not be written (no partial file was left behind). Check free \
         space and permissions, then run again",
        path.display()
    )]
    Write {
        /// The final path that was being written.
        path: PathBuf,
        /// The operating-system error.
        #[source]
        source: io::Error,
    },

    /// An output file would replace a file this run reads.
    #[error(
        "{}: this output would overwrite {}, an input of this run. Choose another --out \
         directory, or move the input elsewhere",
        path.display(),
        input.display()
    )]
    WouldOverwriteInput {
        /// The output path.
        path: PathBuf,
        /// The input it is (same path, link or file).
        input: PathBuf,
    },

    /// Another run holds the output directory's lock.
    #[error(
        "{}: the folder is in use by another run ({holder}). Wait for it to finish, or \
         choose another --out directory",
        dir.display()
    )]
    Locked {
        /// The directory.
        dir: PathBuf,
        /// Who holds it.
        holder: String,
    },

    /// The output directory is one of the run's input directories.
    #[error(
        "{}: the output directory is {}, an input directory of this run. Choose another --out \
         directory",
        dir.display(),
        input.display()
    )]
    OutputIsInputDir {
        /// The output directory.
        dir: PathBuf,
        /// The input directory it is.
        input: PathBuf,
    },
}

/// Shorten and quote a cell's text for a message, so a huge or control-laden cell cannot
/// flood the terminal.
pub(crate) fn show_cell(text: &str) -> String {
    const MAX_CHARS: usize = 40;
    let mut shown: String = text.chars().take(MAX_CHARS).collect();
    if text.chars().nth(MAX_CHARS).is_some() {
        shown.push('…');
    }
    format!("{shown:?}")
}

/// List names for a message, shortened when there are many.
pub(crate) fn show_names<S: AsRef<str>>(names: &[S]) -> String {
    const MAX_NAMES: usize = 12;
    if names.is_empty() {
        return "none".to_string();
    }
    let mut parts: Vec<String> = names
        .iter()
        .take(MAX_NAMES)
        .map(|n| format!("`{}`", escape_controls(n.as_ref())))
        .collect();
    if names.len() > MAX_NAMES {
        parts.push(format!("and {} more", names.len() - MAX_NAMES));
    }
    parts.join(", ")
}

/// Escape control characters so user text cannot break a message into several lines.
pub(crate) fn escape_controls(text: &str) -> String {
    text.chars()
        .map(|c| {
            if c.is_control() {
                c.escape_debug().to_string()
            } else {
                c.to_string()
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn long_cells_are_shortened_and_quoted() {
        let long = "x".repeat(1000);
        let shown = show_cell(&long);
        assert!(shown.len() < 60, "{shown}");
        assert!(shown.starts_with('"') && shown.contains('…'));
        assert_eq!(show_cell("a\nb"), "\"a\\nb\"");
    }

    #[test]
    fn name_lists_are_capped() {
        let names: Vec<String> = (0..20).map(|i| format!("v{i}")).collect();
        let shown = show_names(&names);
        assert!(shown.ends_with("and 8 more"), "{shown}");
        assert_eq!(show_names::<&str>(&[]), "none");
        assert_eq!(show_names(&["a\nb"]), "`a\\nb`");
    }
}
