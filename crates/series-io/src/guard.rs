//! A reader wrapper that hashes the input, drops a UTF-8 BOM and caps the record size.
//!
//! The csv crate buffers a whole record before handing it over, so a 1 GiB line (or an
//! unclosed quote at the top of a huge file) would be buffered whole. This wrapper follows
//! the same quoting rules as the csv parser, byte by byte, and fails the read as soon as
//! one record grows past the limit, before the parser can buffer it.

use std::collections::VecDeque;
use std::io::{self, Read};

use sha2::{Digest, Sha256};

const BOM: [u8; 3] = [0xEF, 0xBB, 0xBF];

/// Where the scanner stands inside the CSV grammar (RFC 4180 quoting, as csv-core reads it:
/// a quote opens a quoted field only at the start of a field, `""` inside is a literal quote,
/// anything after the closing quote up to the delimiter is kept as plain text).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Scan {
    FieldStart,
    Unquoted,
    Quoted,
    QuoteInQuoted,
}

/// Marker carried inside the `io::Error` the guard returns when a record is too long.
#[derive(Debug)]
pub(crate) struct RecordTooLong;

impl std::fmt::Display for RecordTooLong {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("record longer than the configured limit")
    }
}

impl std::error::Error for RecordTooLong {}

pub(crate) struct GuardedReader<R> {
    inner: R,
    hasher: Sha256,
    /// Bytes read ahead to look for a BOM, served before `inner`.
    head: [u8; 3],
    head_len: usize,
    head_pos: usize,
    started: bool,
    scan: Scan,
    record_bytes: u64,
    limit: u64,
    /// 1-based row of the byte being scanned. A row ends at `\r`, or at `\n` not
    /// preceded by `\r`, outside quotes, so LF, CRLF and CR-only files are all counted as an
    /// editor does, and a quoted line break does not shift the rows after it.
    line: u64,
    prev_cr: bool,
    /// Bytes handed to the parser so far (after any BOM), the parser's byte coordinates.
    served: u64,
    /// (offset, line) of each record start handed to the parser and not yet looked up:
    /// at most one per record in the parser's read-ahead buffer, blank lines take none.
    starts: VecDeque<(u64, u64)>,
    at_record_start: bool,
    record_line: u64,
    tripped: bool,
    /// The inner reader returned end of input.
    eof: bool,
}

impl<R: Read> GuardedReader<R> {
    pub(crate) fn new(inner: R, limit: u64) -> Self {
        Self {
            inner,
            hasher: Sha256::new(),
            head: [0; 3],
            head_len: 0,
            head_pos: 0,
            started: false,
            scan: Scan::FieldStart,
            record_bytes: 0,
            limit,
            line: 1,
            prev_cr: false,
            served: 0,
            starts: VecDeque::new(),
            at_record_start: true,
            record_line: 1,
            tripped: false,
            eof: false,
        }
    }

    /// Whether the input ended inside a quoted field (a quote that was never closed).
    pub(crate) fn ended_in_quotes(&self) -> bool {
        self.eof && matches!(self.scan, Scan::Quoted)
    }

    /// Whether a read failed because a record passed the limit.
    pub(crate) fn tripped(&self) -> bool {
        self.tripped
    }

    /// The 1-based line where the current (or over-long) record starts.
    pub(crate) fn record_line(&self) -> u64 {
        self.record_line
    }

    /// The 1-based line of the record the parser reports at byte offset `byte`.
    ///
    /// The parser's offset may point before blank lines that precede the record, so the
    /// answer is the first record start at or after it. Offsets must not decrease from one
    /// call to the next (records are looked up in order).
    pub(crate) fn line_at(&mut self, byte: u64) -> u64 {
        while self.starts.front().is_some_and(|&(at, _)| at < byte) {
            self.starts.pop_front();
        }
        self.starts.front().map_or(self.line, |&(_, line)| line)
    }

    /// Hex SHA-256 of every byte read so far (the whole input once the parser hit EOF).
    pub(crate) fn finish_hex(self) -> String {
        crate::checksum::to_hex(&self.hasher.finalize())
    }

    fn start(&mut self) -> io::Result<()> {
        while self.head_len < 3 {
            match self.inner.read(&mut self.head[self.head_len..]) {
                Ok(0) => break,
                Ok(n) => self.head_len += n,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
        self.hasher.update(&self.head[..self.head_len]);
        if self.head_len == 3 && self.head == BOM {
            self.head_pos = 3;
        }
        self.started = true;
        Ok(())
    }

    /// Advance the scanner over `bytes`; returns false once the record limit is passed.
    fn scan(&mut self, bytes: &[u8]) -> bool {
        for &b in bytes {
            let ends_record = match (self.scan, b) {
                (Scan::Quoted, b'"') => {
                    self.scan = Scan::QuoteInQuoted;
                    false
                }
                (Scan::Quoted, _) => false,
                (_, b'\n' | b'\r') => {
                    self.scan = Scan::FieldStart;
                    true
                }
                (Scan::FieldStart, b'"') => {
                    self.scan = Scan::Quoted;
                    false
                }
                (Scan::QuoteInQuoted, b'"') => {
                    self.scan = Scan::Quoted;
                    false
                }
                (_, b',') => {
                    self.scan = Scan::FieldStart;
                    false
                }
                _ => {
                    self.scan = Scan::Unquoted;
                    false
                }
            };
            if ends_record {
                self.record_bytes = 0;
                self.at_record_start = true;
            } else {
                if self.at_record_start {
                    self.at_record_start = false;
                    self.record_line = self.line;
                    self.starts.push_back((self.served, self.line));
                }
                self.record_bytes += 1;
                if self.record_bytes > self.limit {
                    return false;
                }
            }
            // A line break inside a quoted field belongs to the field, not to a new row.
            if ends_record && (b == b'\r' || (b == b'\n' && !self.prev_cr)) {
                self.line += 1;
            }
            self.prev_cr = b == b'\r';
            self.served += 1;
        }
        true
    }
}

impl<R: Read> Read for GuardedReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if self.tripped {
            return Err(io::Error::other(RecordTooLong));
        }
        if !self.started {
            self.start()?;
        }
        let n = if self.head_pos < self.head_len {
            let n = (self.head_len - self.head_pos).min(buf.len());
            buf[..n].copy_from_slice(&self.head[self.head_pos..self.head_pos + n]);
            self.head_pos += n;
            n
        } else {
            let n = self.inner.read(buf)?;
            if n == 0 && !buf.is_empty() {
                self.eof = true;
            }
            self.hasher.update(&buf[..n]);
            n
        };
        if !self.scan(&buf[..n]) {
            self.tripped = true;
            return Err(io::Error::other(RecordTooLong));
        }
        Ok(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read_all(input: &[u8], limit: u64) -> (io::Result<Vec<u8>>, u64) {
        let mut g = GuardedReader::new(input, limit);
        let mut out = Vec::new();
        let r = g.read_to_end(&mut out).map(|_| out);
        (r, g.record_line())
    }

    #[test]
    fn passes_bytes_through_and_strips_bom() {
        let (out, _) = read_all(b"\xEF\xBB\xBFt,x\n1,2\n", 100);
        assert_eq!(out.unwrap(), b"t,x\n1,2\n");
        let (out, _) = read_all(b"ab", 100);
        assert_eq!(out.unwrap(), b"ab");
    }

    #[test]
    fn hash_covers_the_bom_too() {
        // SHA-256("abc") from FIPS 180-2, Appendix B.1 (NIST 2002).
        let mut g = GuardedReader::new(&b"abc"[..], 100);
        std::io::copy(&mut g, &mut std::io::sink()).unwrap();
        assert_eq!(
            g.finish_hex(),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn limit_counts_records_not_lines() {
        // A quoted field may span lines (RFC 4180, Shafranovich 2005, section 2.6), so the
        // limit applies to the whole record.
        let input = b"a,\"x\nyyyyyyyyyy\nzzzz\"\n1,2\n";
        let (out, line) = read_all(input, 12);
        assert!(out.is_err());
        assert_eq!(line, 1);
        let (out, _) = read_all(input, 100);
        assert!(out.is_ok());
    }

    #[test]
    fn short_records_pass_under_a_tight_limit() {
        let (out, _) = read_all(b"ab,cd\r\nef,gh\r\n\"i\"\"j\"\n", 6);
        assert!(out.is_ok());
        let (out, line) = read_all(b"ab,cd\nef,gh\nabcdefg\n", 6);
        assert!(out.is_err());
        assert_eq!(line, 3);
    }
}
