//! Peak heap use while reading oversized input, measured with a counting allocator.
//!
//! The inputs are generated on the fly, so the only large allocations are the reader's own.
//! Tests run one at a time (a lock) so that each peak is its own.

use std::alloc::{GlobalAlloc, Layout, System};
use std::io::{self, Read};
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use series_io::{InputError, ReadOptions, read_series_from};

struct Counting;

static CURRENT: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);
static ONE_AT_A_TIME: Mutex<()> = Mutex::new(());

// SAFETY: forwards to the system allocator unchanged; only counts sizes.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc(layout) };
        if !p.is_null() {
            let now = CURRENT.fetch_add(layout.size(), Ordering::Relaxed) + layout.size();
            PEAK.fetch_max(now, Ordering::Relaxed);
        }
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) };
        CURRENT.fetch_sub(layout.size(), Ordering::Relaxed);
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let p = unsafe { System.realloc(ptr, layout, new_size) };
        if !p.is_null() {
            // Count the moment both blocks may be live, as a copying realloc has them.
            let now = CURRENT.fetch_add(new_size, Ordering::Relaxed) + new_size;
            PEAK.fetch_max(now, Ordering::Relaxed);
            CURRENT.fetch_sub(layout.size(), Ordering::Relaxed);
        }
        p
    }
}

#[global_allocator]
static ALLOC: Counting = Counting;

/// Run `f` and return its result with the peak heap growth (bytes) during it.
fn peak_during<T>(f: impl FnOnce() -> T) -> (T, usize) {
    let _lock = ONE_AT_A_TIME.lock().unwrap_or_else(|e| e.into_inner());
    let base = CURRENT.load(Ordering::Relaxed);
    PEAK.store(base, Ordering::Relaxed);
    let out = f();
    (out, PEAK.load(Ordering::Relaxed).saturating_sub(base))
}

const MIB: usize = 1 << 20;

struct LongLine {
    head: &'static [u8],
    left: u64,
}

impl Read for LongLine {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if !self.head.is_empty() {
            let n = self.head.len().min(buf.len());
            buf[..n].copy_from_slice(&self.head[..n]);
            self.head = &self.head[n..];
            return Ok(n);
        }
        let n = self.left.min(buf.len() as u64) as usize;
        buf[..n].fill(b'3');
        self.left -= n as u64;
        Ok(n)
    }
}

#[test]
fn one_gib_line_with_default_limits_stays_small() {
    let input = LongLine {
        head: b"t,a,b\n0,",
        left: 1 << 30,
    };
    let (result, peak) =
        peak_during(|| read_series_from(input, "long.csv", &ReadOptions::default()));
    let err = result.unwrap_err();
    assert!(
        matches!(err, InputError::RecordTooLong { row: 2, .. }),
        "{err:?}"
    );
    eprintln!(
        "1 GiB line, default limits: peak heap {:.1} MiB",
        peak as f64 / MIB as f64
    );
    // The csv parser's record buffer doubles up to just past the 64 MiB limit.
    assert!(peak < 160 * MIB, "peak heap {} MiB", peak / MIB);
}

/// Rows `i,i%7,i%11` generated on the fly.
struct Rows {
    total: u64,
    next: u64,
    chunk: Vec<u8>,
    pos: usize,
    first: bool,
}

impl Read for Rows {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if self.pos == self.chunk.len() {
            self.chunk.clear();
            self.pos = 0;
            if self.first {
                self.chunk.extend_from_slice(b"t,a,b\n");
                self.first = false;
            }
            while self.chunk.len() < 16 * 1024 && self.next < self.total {
                let i = self.next;
                self.chunk
                    .extend_from_slice(format!("{i},{},{}\n", i % 7, i % 11).as_bytes());
                self.next += 1;
            }
            if self.chunk.is_empty() {
                return Ok(0);
            }
        }
        let n = (self.chunk.len() - self.pos).min(buf.len());
        buf[..n].copy_from_slice(&self.chunk[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}

fn rows(total: u64) -> Rows {
    Rows {
        total,
        next: 0,
        chunk: Vec::new(),
        pos: 0,
        first: true,
    }
}

#[test]
fn ten_million_rows_with_a_small_limit_stay_small() {
    let opts = ReadOptions::default().with_max_rows(100_000);
    let (result, peak) = peak_during(|| read_series_from(rows(10_000_000), "big.csv", &opts));
    assert!(
        matches!(result, Err(InputError::TooManyRows { row: 100_002, .. })),
        "{result:?}"
    );
    eprintln!(
        "10M rows, max_rows 100000: peak heap {:.1} MiB",
        peak as f64 / MIB as f64
    );
    // Three columns of 100,000 f64 (with Vec doubling) and parser buffers: a few MiB.
    assert!(peak < 16 * MIB, "peak heap {} MiB", peak / MIB);
}

#[test]
#[ignore = "about 10 s in the dev profile; run with --ignored"]
fn ten_million_rows_with_default_limits_stop_at_five_million() {
    let (result, peak) =
        peak_during(|| read_series_from(rows(10_000_000), "big.csv", &ReadOptions::default()));
    assert!(
        matches!(result, Err(InputError::TooManyRows { row: 5_000_002, .. })),
        "{result:?}"
    );
    eprintln!(
        "10M rows, default limits: peak heap {:.1} MiB",
        peak as f64 / MIB as f64
    );
    // 3 columns x 5e6 x 8 bytes = 120 MB held (the time axis is one number per row), up to
    // twice that while a Vec grows. Regression: one string and a 40-byte value per row of the
    // time axis had tripled this to 763 MiB.
    assert!(peak < 320 * MIB, "peak heap {} MiB", peak / MIB);
}
