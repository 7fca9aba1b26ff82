//! Raw CSV records behind the size guard, with parser errors mapped to [`InputError`].

use std::io::Read;

use csv::ByteRecord;

use crate::error::InputError;
use crate::guard::{GuardedReader, RecordTooLong};

pub(crate) struct Records<R: Read> {
    reader: csv::Reader<GuardedReader<R>>,
    file: String,
    limit: u64,
}

impl<R: Read> Records<R> {
    pub(crate) fn new(reader: R, file: &str, max_record_bytes: u64, delimiter: u8) -> Self {
        let reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .delimiter(delimiter)
            // Ragged rows are reported by the callers, with the row and both counts.
            .flexible(true)
            .from_reader(GuardedReader::new(reader, max_record_bytes));
        Self {
            reader,
            file: file.to_string(),
            limit: max_record_bytes,
        }
    }

    /// Read the next non-blank record; false at end of input.
    pub(crate) fn next(&mut self, record: &mut ByteRecord) -> Result<bool, InputError> {
        match self.reader.read_byte_record(record) {
            Ok(true) if self.reader.get_ref().ended_in_quotes() => Err(InputError::UnclosedQuote {
                file: self.file.clone(),
                row: self.row(record),
            }),
            Ok(more) => Ok(more),
            Err(err) => Err(self.map_error(err)),
        }
    }

    /// The 1-based file row where `record` starts.
    pub(crate) fn row(&mut self, record: &ByteRecord) -> u64 {
        // csv's own line count misses CR-only and CRLF line ends, so count them ourselves.
        let byte = record.position().map_or(0, |p| p.byte());
        self.reader.get_mut().line_at(byte)
    }

    pub(crate) fn finish_hex(self) -> String {
        self.reader.into_inner().finish_hex()
    }

    fn map_error(&self, err: csv::Error) -> InputError {
        let guard = self.reader.get_ref();
        match err.into_kind() {
            csv::ErrorKind::Io(e)
                if guard.tripped()
                    || e.get_ref().is_some_and(|inner| inner.is::<RecordTooLong>()) =>
            {
                InputError::RecordTooLong {
                    file: self.file.clone(),
                    row: guard.record_line(),
                    limit: self.limit,
                }
            }
            csv::ErrorKind::Io(source) => InputError::Io {
                file: self.file.clone(),
                source,
            },
            other => InputError::Malformed {
                file: self.file.clone(),
                row: guard.record_line(),
                message: format!("{other:?}"),
            },
        }
    }
}
