//! Snapshot tests of the output formats: `labels.csv`, `features.csv` and `run.json` (its
//! volatile fields masked) of one small seeded scan, compared byte for byte with the files in
//! `tests/snapshots/`.
//!
//! These guard the formats and the determinism of the whole pipeline, not the science (the
//! input is the coupled logistic maps of Sugihara et al. 2012, whose verdicts other tests
//! check). A deliberate change (a retrained model, a new column, an engine change that moves
//! last bits) is recorded by rerunning with `UPDATE_SNAPSHOTS=1` and reviewing the diff.

mod common;
mod support;

use std::path::Path;

use assert_cmd::Command;
use common::{coupled_logistic_csv, temp};

/// Fields of run.json that differ between runs of the same command: when and where it ran,
/// from which build, and how long it took.
const VOLATILE: [&[&str]; 5] = [
    &["timing"],
    &["invocation"],
    &["commit"],
    &["input", "path"],
    &["input", "absolute_path"],
];

fn masked_run_record(text: &str) -> String {
    let mut v: serde_json::Value = serde_json::from_str(text).expect("run.json is JSON");
    for path in VOLATILE {
        let (last, parents) = path.split_last().expect("non-empty path");
        let mut node = &mut v;
        for p in parents {
            node = &mut node[*p];
        }
        if let Some(obj) = node.as_object_mut() {
            obj.insert((*last).to_string(), serde_json::json!("(masked)"));
        }
    }
    let mut s = serde_json::to_string_pretty(&v).expect("serialises");
    s.push('\n');
    s
}

fn check(name: &str, actual: &str) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/snapshots")
        .join(name);
    if std::env::var_os("UPDATE_SNAPSHOTS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("{}: {e}; record it with UPDATE_SNAPSHOTS=1", path.display()));
    if expected != actual {
        let line = expected
            .lines()
            .zip(actual.lines())
            .position(|(a, b)| a != b)
            .unwrap_or_else(|| expected.lines().count().min(actual.lines().count()));
        panic!(
            "{name} differs from its snapshot from line {} on:\n  expected: {:?}\n  actual:   {:?}\nIf the change is intended, rerun with UPDATE_SNAPSHOTS=1 and review the diff.",
            line + 1,
            expected.lines().nth(line),
            actual.lines().nth(line)
        );
    }
}

#[test]
fn small_seeded_scan_matches_its_snapshots() {
    let dir = temp();
    let data = dir.path().join("maps.csv");
    std::fs::write(&data, coupled_logistic_csv(150)).unwrap();
    let out = dir.path().join("out");
    Command::cargo_bin("ccm-triage")
        .unwrap()
        .arg("scan")
        .arg(&data)
        .arg("--out")
        .arg(&out)
        .args(["--seed", "4"])
        .args(support::SMALL)
        .assert()
        .success();
    let read = |f: &str| std::fs::read_to_string(out.join(f)).unwrap();
    check("labels.csv", &read("labels.csv"));
    check("features.csv", &read("features.csv"));
    check("run.json", &masked_run_record(&read("run.json")));
}
