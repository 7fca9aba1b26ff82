//! Harness entry points shared by the cargo-fuzz targets and the stable no-panic tests.
//!
//! Each function feeds arbitrary bytes to a reader and checks what came back: a success
//! must satisfy every documented guarantee, and an error message must be one paragraph.
//! Any breach panics, which is what a fuzzer reports as a crash.

use crate::{
    CurveRow, InputError, ReadOptions, SeriesTable, group_curves, read_curves_from,
    read_series_from, write_curves,
};

/// Small limits so a fuzzer's inputs also exercise the limit paths.
fn fuzz_options() -> ReadOptions {
    ReadOptions::default()
        .with_max_rows(200)
        .with_max_cells(1000)
        .with_max_line_bytes(512)
}

fn check_message(err: &InputError) {
    let msg = err.to_string();
    assert!(!msg.contains('\n'), "error message spans lines: {msg:?}");
    assert!(
        msg.starts_with("fuzz.csv") || msg.starts_with("curve rows"),
        "{msg}"
    );
}

/// Read `data` as a series table (twice: default time handling, and with the second
/// header field as time column) and check the result.
pub fn series_bytes(data: &[u8]) {
    let mut opts = fuzz_options();
    check_series(read_series_from(data, "fuzz.csv", &opts));
    opts.time_column = Some("b".to_string());
    check_series(read_series_from(data, "fuzz.csv", &opts));
}

fn check_series(result: Result<SeriesTable, InputError>) {
    let t = match result {
        Ok(t) => t,
        Err(e) => return check_message(&e),
    };
    assert!(t.names.len() >= 2);
    assert_eq!(t.names.len(), t.columns.len());
    assert_eq!(t.names.len(), t.missing.len());
    let n = t.n_rows();
    assert!(n >= 1);
    for (col, &missing) in t.columns.iter().zip(&t.missing) {
        assert_eq!(col.len(), n);
        assert_eq!(col.iter().filter(|v| v.is_nan()).count(), missing);
        assert!(col.iter().all(|v| !v.is_infinite()));
        let present: Vec<f64> = col.iter().copied().filter(|v| !v.is_nan()).collect();
        assert!(present.len() >= 2);
        assert!(present.iter().any(|&v| v != present[0]));
    }
    assert_eq!(t.time.is_some(), t.time_column.is_some());
    if let Some(time) = &t.time {
        assert_eq!(time.len(), n);
        assert!(time.windows(2).all(|w| w[0] < w[1]));
    }
    assert_eq!(t.sha256.len(), 64);
}

/// Read `data` as a curves table, group it, and check that a successful read survives a
/// write-read round trip unchanged.
pub fn curves_bytes(data: &[u8]) {
    let rows = match read_curves_from(data, "fuzz.csv") {
        Ok(rows) => rows,
        Err(e) => return check_message(&e),
    };
    assert!(!rows.is_empty());
    for r in &rows {
        assert!(r.library_size >= 1 && r.driver != r.response);
        assert!(r.skill.is_nan() || r.skill.abs() <= 1.0 + 1e-9);
    }
    match group_curves(&rows) {
        Ok(pairs) => {
            for p in &pairs {
                assert!(p.library_sizes.len() >= 2);
                assert!(p.library_sizes.windows(2).all(|w| w[0] < w[1]));
                assert_eq!(p.skills.len(), p.library_sizes.len());
                assert!(p.skills.iter().all(|s| s.len() == p.skills[0].len()));
            }
        }
        Err(e) => check_message(&e),
    }
    let mut written = Vec::new();
    write_curves(&mut written, &rows).expect("rows that were read can be written");
    let back = read_curves_from(&written[..], "fuzz.csv").expect("written rows read back");
    assert!(same_rows(&rows, &back), "round trip changed the rows");
}

fn same_rows(a: &[CurveRow], b: &[CurveRow]) -> bool {
    a.len() == b.len()
        && a.iter().zip(b).all(|(x, y)| {
            x.driver == y.driver
                && x.response == y.response
                && x.library_size == y.library_size
                && x.replicate == y.replicate
                && (x.skill.to_bits() == y.skill.to_bits()
                    || (x.skill.is_nan() && y.skill.is_nan()))
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const SERIES_SEEDS: &[&[u8]] = &[
        b"t,a,b\n0,1,2\n1,2,1\n",
        b"\xEF\xBB\xBFtime,x,y\r\n0,\"1,5\",NA\r\n1,2,3\r\n",
        b"a,b,c\n1,,3\n2,inf,1\n\"3\n\",1,2\n",
        b"t;a;b\n0;1;2\n",
        b"x\n",
        b"",
    ];

    const CURVES_SEEDS: &[&[u8]] = &[
        b"driver,response,library_size,replicate,skill\nx,y,10,0,0.5\nx,y,20,0,NA\n",
        b"driver,response,library_size,replicate,skill\n\"a,b\",c,10,0,-0\nc,\"a,b\",1e1,1,1\n",
        b"skill,driver\n1,2\n",
    ];

    #[test]
    fn seeds_do_not_panic() {
        for s in SERIES_SEEDS {
            series_bytes(s);
        }
        for s in CURVES_SEEDS {
            curves_bytes(s);
        }
    }

    fn mutated(seeds: &'static [&'static [u8]]) -> impl Strategy<Value = Vec<u8>> {
        let alphabet =
            prop::sample::select(b"0123456789.,-+eE\"\n\r ;NAinf\xff\xef\xbb\xbft".to_vec());
        (
            prop::sample::select(seeds),
            prop::collection::vec((any::<prop::sample::Index>(), alphabet, 0u8..3), 0..8),
        )
            .prop_map(|(seed, edits)| {
                let mut v = seed.to_vec();
                for (at, byte, op) in edits {
                    let i = if v.is_empty() {
                        0
                    } else {
                        at.index(v.len() + 1)
                    };
                    match op {
                        0 => v.insert(i.min(v.len()), byte),
                        1 if i < v.len() => {
                            v.remove(i);
                        }
                        _ if i < v.len() => v[i] = byte,
                        _ => v.push(byte),
                    }
                }
                v
            })
    }

    proptest! {
        #[test]
        fn arbitrary_bytes_do_not_panic(data in prop::collection::vec(any::<u8>(), 0..300)) {
            series_bytes(&data);
            curves_bytes(&data);
        }

        #[test]
        fn mutated_series_seeds_do_not_panic(data in mutated(SERIES_SEEDS)) {
            series_bytes(&data);
        }

        #[test]
        fn mutated_curves_seeds_do_not_panic(data in mutated(CURVES_SEEDS)) {
            curves_bytes(&data);
        }
    }
}
