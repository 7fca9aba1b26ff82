//! Sharded scans and their merge, checkpoint and resume after SIGKILL, and hostile model files.
//!
//! The reference of every check here is the tool's own single-process run: sharding and resume
//! must reproduce it byte for byte (a determinism contract: scripts and clusters rely on any split of the work giving the same files), so no outside
//! fixture is involved apart from the coupled logistic maps of Sugihara et al. (2012).

mod support;

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use assert_cmd::cargo::CommandCargoExt;
use support::{SMALL, assert_same_outputs, logistic_ring_csv};

fn bin() -> Command {
    Command::cargo_bin("ccm-triage").expect("binary")
}

/// Run the binary; returns (exit code, stdout, stderr).
fn run(args: &[&str], cwd: &Path) -> (i32, String, String) {
    let out = bin().args(args).current_dir(cwd).output().expect("run");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn ok(args: &[&str], cwd: &Path) {
    let (code, _, err) = run(args, cwd);
    assert_eq!(code, 0, "{args:?} failed: {err}");
}

fn with_small<'a>(args: &[&'a str]) -> Vec<&'a str> {
    let mut v = args.to_vec();
    v.extend(SMALL);
    v
}

fn dataset(dir: &Path, vars: usize, n: usize) {
    std::fs::write(dir.join("data.csv"), logistic_ring_csv(vars, n)).unwrap();
}

#[test]
fn shards_merge_to_the_single_run_for_any_shard_count() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    dataset(d, 12, 300);
    ok(&with_small(&["scan", "data.csv", "--out", "single"]), d);
    for count in [4, 5] {
        let mut dirs = Vec::new();
        for i in (1..=count).rev() {
            let dir = format!("n{count}-s{i}");
            let shard = format!("{i}/{count}");
            ok(
                &with_small(&[
                    "scan",
                    "data.csv",
                    "--out",
                    &dir,
                    "--shard",
                    &shard,
                    "--threads",
                    "1",
                ]),
                d,
            );
            dirs.push(dir);
        }
        let merged = format!("merged{count}");
        let mut args = vec!["merge"];
        args.extend(dirs.iter().map(String::as_str));
        args.extend(["--out", &merged, "--quiet"]);
        ok(&args, d);
        assert_same_outputs(&d.join("single"), &d.join(&merged));
        assert!(!d.join(&merged).join(".checkpoint").exists());
    }
    // The merge found the table at the recorded path; --data names it when it moved.
    std::fs::rename(d.join("data.csv"), d.join("moved.csv")).unwrap();
    let (code, _, err) = run(
        &["merge", "n4-s1", "n4-s2", "n4-s3", "n4-s4", "--out", "m"],
        d,
    );
    assert_eq!(code, 1);
    assert!(err.contains("--data"), "{err}");
    ok(
        &[
            "merge",
            "n4-s1",
            "n4-s2",
            "n4-s3",
            "n4-s4",
            "--out",
            "m",
            "--data",
            "moved.csv",
            "--quiet",
        ],
        d,
    );
    assert_same_outputs(&d.join("single"), &d.join("m"));
}

#[test]
fn merge_refuses_shards_that_do_not_belong_together() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    dataset(d, 6, 200);
    for i in 1..=3 {
        let (dir, shard) = (format!("s{i}"), format!("{i}/3"));
        ok(
            &with_small(&["scan", "data.csv", "--out", &dir, "--shard", &shard]),
            d,
        );
    }
    ok(
        &with_small(&[
            "scan", "data.csv", "--out", "other", "--shard", "3/3", "--seed", "9",
        ]),
        d,
    );

    let (code, _, err) = run(&["merge", "s1", "s2", "--out", "m"], d);
    assert_eq!(code, 1);
    assert!(
        err.contains("no shard holds the responses v003, v006") && err.contains("shards 3 of 3"),
        "{err}"
    );

    let (code, _, err) = run(&["merge", "s1", "s2", "s3", "s3", "--out", "m"], d);
    assert_eq!(code, 1);
    assert!(err.contains("is in both s3 and s3"), "{err}");

    let (code, _, err) = run(&["merge", "s1", "s2", "other", "--out", "m"], d);
    assert_eq!(code, 1);
    assert!(
        err.contains("other: the analysis settings differ (seed: 9 in the files, 1 here)"),
        "{err}"
    );

    // A shard of another table.
    std::fs::write(d.join("data2.csv"), logistic_ring_csv(6, 210)).unwrap();
    ok(
        &with_small(&["scan", "data2.csv", "--out", "foreign", "--shard", "3/3"]),
        d,
    );
    let (code, _, err) = run(&["merge", "s1", "s2", "foreign", "--out", "m"], d);
    assert_eq!(code, 1);
    assert!(err.contains("input checksum"), "{err}");

    // A manifest edited by hand is refused as damaged, naming the file.
    let manifest = d.join("s3/manifest.json");
    let text = std::fs::read_to_string(&manifest).unwrap();
    std::fs::write(
        &manifest,
        text.replace("\"complete\": true", "\"complete\": false"),
    )
    .unwrap();
    let (code, _, err) = run(&["merge", "s1", "s2", "s3", "--out", "m"], d);
    assert_eq!(code, 1);
    assert!(
        err.contains("s3/manifest.json") && err.contains("content checksum"),
        "{err}"
    );
    // An unfinished shard (killed before its manifest was marked complete), as the tool
    // itself writes it.
    let store = triage_pipeline::units::UnitStore::open(d.join("s3")).unwrap();
    let mut m = triage_pipeline::units::read_manifest(&d.join("s2/manifest.json")).unwrap();
    m.shard.index = 3;
    m.units = m.shard.units(m.input.variables.len());
    m.complete = false;
    store.write_manifest(&m).unwrap();
    let (code, _, err) = run(&["merge", "s1", "s2", "s3", "--out", "m"], d);
    assert_eq!(code, 1);
    assert!(err.contains("shard 3/3 is incomplete"), "{err}");
    assert!(!d.join("m/run.json").exists());
}

/// Count the unit files checkpointed so far.
fn checkpointed(dir: &Path) -> usize {
    std::fs::read_dir(dir)
        .map(|it| {
            it.filter_map(Result::ok)
                .filter(|e| {
                    let n = e.file_name();
                    let n = n.to_string_lossy();
                    n.starts_with("unit-") && n.ends_with(".json")
                })
                .count()
        })
        .unwrap_or(0)
}

#[test]
fn killed_scan_resumes_to_identical_output() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    dataset(d, 12, 1500);
    let flags = [
        "--replicates",
        "20",
        "--sizes",
        "8",
        "--surrogates",
        "10",
        "--quiet",
        "--threads",
        "1",
    ];
    let scan = |out: &str| {
        let mut a = vec!["scan", "data.csv", "--out", out];
        a.extend(flags);
        a.into_iter().map(String::from).collect::<Vec<_>>()
    };
    ok(
        &scan("whole").iter().map(String::as_str).collect::<Vec<_>>(),
        d,
    );

    let checkpoint: PathBuf = d.join("resumed/.checkpoint");
    let mut child = bin().args(scan("resumed")).current_dir(d).spawn().unwrap();
    let started = Instant::now();
    while checkpointed(&checkpoint) < 3 {
        assert!(
            child.try_wait().unwrap().is_none(),
            "the scan ended before it could be killed"
        );
        assert!(
            started.elapsed() < Duration::from_secs(60),
            "no unit checkpointed in 60 s"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().unwrap(); // SIGKILL on Unix
    child.wait().unwrap();
    let saved = checkpointed(&checkpoint);
    assert!((3..12).contains(&saved), "{saved} units saved at the kill");
    assert!(
        !d.join("resumed/run.json").exists(),
        "a killed run must not look complete"
    );

    let (code, _, err) = run(
        &scan("resumed")
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
        d,
    );
    assert_eq!(code, 0, "{err}");
    assert_same_outputs(&d.join("whole"), &d.join("resumed"));
    assert!(
        !checkpoint.exists(),
        "the checkpoint is removed after a complete run"
    );
}

#[test]
fn checkpoint_of_other_settings_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    dataset(d, 4, 200);
    // A finished whole-job shard with another seed, planted as the checkpoint of a new scan.
    ok(
        &with_small(&[
            "scan", "data.csv", "--out", "seed2", "--shard", "1/1", "--seed", "2",
        ]),
        d,
    );
    std::fs::create_dir(d.join("out")).unwrap();
    std::fs::rename(d.join("seed2"), d.join("out/.checkpoint")).unwrap();
    let (code, _, err) = run(&with_small(&["scan", "data.csv", "--out", "out"]), d);
    assert_eq!(code, 1);
    assert!(err.contains("cannot resume from out/.checkpoint"), "{err}");
    assert!(
        err.contains("analysis settings differ (seed: 2 in the files, 1 here)"),
        "{err}"
    );
    assert!(!d.join("out/run.json").exists());
    // Same seed as the planted units: they are reused and the result equals a fresh run.
    ok(
        &with_small(&["scan", "data.csv", "--out", "out", "--seed", "2"]),
        d,
    );
    ok(
        &with_small(&["scan", "data.csv", "--out", "fresh", "--seed", "2"]),
        d,
    );
    assert_same_outputs(&d.join("fresh"), &d.join("out"));
}

const SHIPPED_MODEL: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/models/default-model.bin");

/// Hostile model files: each one is refused with exit status 1 and a one-paragraph message by
/// both `model-card PATH` and `scan --model PATH`. Header layout from verdict-model's
/// model_file module (magic 0..8, version 8..10, payload length 12..20, checksum 20..52).
#[test]
fn hostile_model_files_are_refused_clearly() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    dataset(d, 3, 150);
    let good = std::fs::read(SHIPPED_MODEL).unwrap();
    let mut cases: Vec<(&str, Vec<u8>, &str)> = Vec::new();
    cases.push((
        "truncated.bin",
        good[..good.len() / 2].to_vec(),
        "truncated",
    ));
    cases.push(("header-only.bin", good[..30].to_vec(), "truncated"));
    let mut corrupted = good.clone();
    let k = corrupted.len() - 100;
    corrupted[k] ^= 0x55;
    cases.push(("corrupted.bin", corrupted, "checksum"));
    let mut newer = good.clone();
    newer[8..10].copy_from_slice(&99u16.to_le_bytes());
    cases.push(("newer.bin", newer, "version"));
    let mut huge = good.clone();
    huge[12..20].copy_from_slice(&(u64::MAX / 2).to_le_bytes());
    cases.push(("huge.bin", huge, "above the limit"));
    cases.push(("foreign.bin", b"driver,response\nx,y\n".to_vec(), "model"));
    for (name, bytes, word) in &cases {
        std::fs::write(d.join(name), bytes).unwrap();
        for args in [
            vec!["model-card", name],
            with_small(&["scan", "data.csv", "--out", "o", "--model", name]),
        ] {
            let (code, _, err) = run(&args, d);
            assert_eq!(code, 1, "{args:?}: {err}");
            let lower = err.to_lowercase();
            assert!(
                lower.contains(name) && lower.contains(word),
                "{args:?}: {err}"
            );
            assert!(!lower.contains("panicked"), "{args:?}: {err}");
        }
    }
    assert!(!d.join("o/run.json").exists());
}
