//! Arbitrary bytes into the series-table reader: it must return a table that keeps its
//! guarantees or a one-paragraph error, and never panic.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    series_io::fuzzing::series_bytes(data);
});
