//! Arbitrary bytes into the curves reader and grouping: valid rows must survive a
//! write-read round trip, errors must be one paragraph, and nothing may panic.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    series_io::fuzzing::curves_bytes(data);
});
