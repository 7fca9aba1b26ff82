//! Text renderings of simulated systems: series CSV, truth CSV and the resolved spec JSON.

use std::fmt::Write;

use crate::{Spec, System};

/// Shortest text that reads back to the same `f64`; empty for NaN (a missing cell).
pub fn format_value(v: f64) -> String {
    if v.is_nan() {
        String::new()
    } else if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e7) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// The series of one system as CSV (see [`System::to_csv_string`]).
pub(crate) fn system_csv(s: &System) -> String {
    let mut out = String::from("t");
    for v in &s.variables {
        out.push(',');
        out.push_str(v);
    }
    out.push('\n');
    let rows = s.series.first().map_or(0, Vec::len);
    for t in 0..rows {
        write!(out, "{t}").unwrap();
        for col in &s.series {
            out.push(',');
            out.push_str(&format_value(col[t]));
        }
        out.push('\n');
    }
    out
}

/// The answer key of many systems: `system,driver,response,label`.
pub fn truth_csv(systems: &[System]) -> String {
    let mut out = String::from("system,driver,response,label\n");
    for s in systems {
        for r in &s.truth {
            writeln!(
                out,
                "{},{},{},{}",
                s.id,
                r.driver,
                r.response,
                r.label.as_str()
            )
            .unwrap();
        }
    }
    out
}

/// The spec together with every drawn value of every system, as pretty JSON:
/// `{"spec": ..., "systems": [DrawnParams, ...]}`.
pub fn resolved_spec_json(spec: &Spec, systems: &[System]) -> String {
    let drawn: Vec<_> = systems.iter().map(|s| &s.drawn).collect();
    let value = serde_json::json!({ "spec": spec, "systems": drawn });
    let mut text = serde_json::to_string_pretty(&value).expect("spec and draws are plain data");
    text.push('\n');
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_round_trip() {
        for v in [
            0.0,
            1.0,
            -2.5,
            0.1 + 0.2,
            1.234e-9,
            6.02e23,
            -3.3e-4,
            123456.789,
        ] {
            assert_eq!(format_value(v).parse::<f64>().unwrap(), v);
        }
        assert_eq!(format_value(f64::NAN), "");
    }

    #[test]
    fn truth_header_matches_contract() {
        assert_eq!(truth_csv(&[]), "system,driver,response,label\n");
    }
}
