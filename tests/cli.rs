//! End-to-end tests of the `ccm-triage` binary.

mod common;

use assert_cmd::Command;
use common::{
    coupled_logistic_csv, logistic_and_noisy_sine_csv, logistic_pair_csv, read_csv, temp,
};
use predicates::prelude::*;

fn bin() -> Command {
    Command::cargo_bin("ccm-triage").expect("binary built")
}

/// Write `csv` into `dir` and scan it with `extra` flags; returns the output directory.
fn scan_text(dir: &std::path::Path, name: &str, csv: &str, extra: &[&str]) -> std::path::PathBuf {
    let data = dir.join(format!("{name}.csv"));
    std::fs::write(&data, csv).unwrap();
    let out = dir.join(name);
    bin()
        .arg("scan")
        .arg(&data)
        .arg("--out")
        .arg(&out)
        .args(extra)
        .assert()
        .success();
    out
}

/// Write `n` points of the coupled logistic maps into `dir` and scan them with `extra` flags;
/// returns the output directory.
fn scan_maps(dir: &std::path::Path, name: &str, n: usize, extra: &[&str]) -> std::path::PathBuf {
    scan_text(dir, name, &coupled_logistic_csv(n), extra)
}

/// Scan `csv` (two series) with the shipped model; returns (verdict, p_causal) of the first
/// series -> the second and of the second -> the first.
fn verdicts(csv: &str) -> [(String, f64); 2] {
    let dir = temp();
    let out = scan_text(dir.path(), "run", csv, &["--quiet"]);
    let labels = read_csv(&out.join("labels.csv"));
    let names: Vec<String> = csv
        .lines()
        .next()
        .unwrap()
        .split(',')
        .skip(1)
        .map(String::from)
        .collect();
    let get = |d: &str, r: &str| {
        let row = labels
            .iter()
            .find(|row| row["driver"] == d && row["response"] == r)
            .expect("pair present");
        (
            row["verdict"].clone(),
            row["p_causal"].parse::<f64>().unwrap(),
        )
    };
    [get(&names[0], &names[1]), get(&names[1], &names[0])]
}

/// Coupled logistic maps of Sugihara et al. (2012), r_x = 3.8, r_y = 3.5, X drives Y only
/// (beta_yx = 0.1, beta_xy = 0): only the true direction converges, so the shipped model must
/// rank X -> Y well above Y -> X and must not call Y -> X causal.
#[test]
fn shipped_model_ranks_the_true_direction_of_coupled_logistic_maps_first() {
    let [(_, p_xy), (v_yx, p_yx)] = verdicts(&coupled_logistic_csv(400));
    assert!(p_xy > p_yx + 0.3, "X -> Y {p_xy}, Y -> X {p_yx}");
    assert_ne!(v_yx, "causal", "Y -> X p = {p_yx}");
}

/// Acceptance: the one-way form of Sugihara et al. (2012) with beta_xy = 0 (X drives Y, Y does
/// not act on X) is decided both ways, at two record lengths: X -> Y causal, Y -> X non-causal.
#[test]
fn shipped_model_decides_one_way_coupled_logistic_maps() {
    for n in [400, 1000] {
        let [(v_xy, p_xy), (v_yx, p_yx)] = verdicts(&logistic_pair_csv(n, 0.0, 0.1));
        assert_eq!(v_xy, "causal", "n = {n}: X -> Y p = {p_xy}");
        assert_eq!(v_yx, "non-causal", "n = {n}: Y -> X p = {p_yx}");
    }
}

/// Acceptance: the two-way form of Sugihara et al. (2012) (r_x 3.8, r_y 3.5, beta_xy 0.02,
/// beta_yx 0.1, from memory): each species acts on the other, so both directions are causal.
///
/// At 1,000 points both are decided (Y -> X p about 0.88). At 400 points the weak Y -> X link
/// goes to review (p 0.4-0.5): its skill (0.40) is matched by a third of the phase-randomised
/// surrogates of the nearly period-4 Y, so the evidence at that length is ambiguous.
#[test]
fn shipped_model_calls_both_directions_of_two_way_coupled_logistic_maps_causal() {
    let [(v_xy, p_xy), (v_yx, p_yx)] = verdicts(&logistic_pair_csv(1000, 0.02, 0.1));
    assert_eq!(v_xy, "causal", "X -> Y p = {p_xy}");
    assert_eq!(v_yx, "causal", "Y -> X p = {p_yx}");
    let [(v_xy, p_xy), (v_yx, p_yx)] = verdicts(&logistic_pair_csv(400, 0.02, 0.1));
    assert_eq!(v_xy, "causal", "400 points: X -> Y p = {p_xy}");
    assert_ne!(v_yx, "non-causal", "400 points: Y -> X p = {p_yx}");
}

/// Acceptance: an uncoupled chaotic logistic map beside an unrelated noisy sine share nothing,
/// so neither direction is causal (a fact of the construction).
#[test]
fn shipped_model_calls_a_logistic_map_and_an_unrelated_noisy_sine_non_causal() {
    for n in [400, 1000] {
        let [(v_xs, p_xs), (v_sx, p_sx)] = verdicts(&logistic_and_noisy_sine_csv(n));
        assert_eq!(v_xs, "non-causal", "n = {n}: x -> s p = {p_xs}");
        assert_eq!(v_sx, "non-causal", "n = {n}: s -> x p = {p_sx}");
    }
}

#[test]
fn scan_writes_every_contract_file_with_its_header() {
    let dir = temp();
    let out = scan_maps(
        dir.path(),
        "run",
        200,
        &[
            "--replicates",
            "20",
            "--sizes",
            "6",
            "--surrogates",
            "9",
            "--seed",
            "3",
        ],
    );
    let header = |f: &str| {
        std::fs::read_to_string(out.join(f))
            .unwrap()
            .lines()
            .next()
            .unwrap()
            .to_string()
    };
    assert_eq!(
        header("curves.csv"),
        "driver,response,library_size,replicate,skill"
    );
    assert_eq!(header("embedding.csv"), "variable,E,tau,simplex_skill");
    assert!(header("features.csv").starts_with("driver,response,skill_final_mean"));
    assert!(header("labels.csv").starts_with("driver,response,p_causal,verdict,reasons"));
    let curves = read_csv(&out.join("curves.csv"));
    // 2 ordered pairs x 6 sizes x 20 replicates (sizes may merge after rounding: at most 6).
    assert!(curves.len() <= 2 * 6 * 20 && curves.len() >= 2 * 4 * 20);
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    assert_eq!(run["settings"]["seed"], 3);
    assert_eq!(run["input"]["sha256"].as_str().unwrap().len(), 64);
    assert!(run["model"]["sha256"].is_string());
    // The run can be traced: the commit built from, the whole command line, when, and the
    // input as an absolute path.
    assert!(run["commit"].is_string());
    let argv = run["invocation"]["command_line"].as_array().unwrap();
    assert!(argv.iter().any(|a| a == "--surrogates") && argv.iter().any(|a| a == "9"));
    let started = run["invocation"]["started_at"].as_str().unwrap();
    assert!(started.len() == 20 && started.ends_with('Z'), "{started}");
    assert!(std::path::Path::new(run["input"]["absolute_path"].as_str().unwrap()).is_absolute());
    // Phase surrogates get a period of 0, so the column stays numeric on every row.
    let surrogates = read_csv(&out.join("surrogates.csv"));
    assert!(
        surrogates
            .iter()
            .all(|r| r["period"].parse::<f64>().is_ok())
    );
    assert!(
        surrogates
            .iter()
            .filter(|r| r["kind"] == "phase")
            .all(|r| r["period"] == "0")
    );
    // One standalone figure per pair, for papers.
    let plots: Vec<String> = std::fs::read_dir(out.join("plots"))
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    assert_eq!(plots.len(), 2, "{plots:?}");
    assert!(plots.iter().all(|f| f.ends_with(".svg")));
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("not proof"));
    // Nothing half-written is left behind.
    for entry in std::fs::read_dir(&out).unwrap() {
        let name = entry.unwrap().file_name().into_string().unwrap();
        assert!(!name.contains(".partial-"), "{name}");
    }
}

#[test]
fn same_seed_gives_identical_results_for_any_thread_count() {
    let dir = temp();
    let run = |threads: &str, name: &str| {
        scan_maps(
            dir.path(),
            name,
            150,
            &["--replicates", "15", "--threads", threads],
        )
    };
    let (a, b) = (run("1", "one"), run("2", "two"));
    for f in [
        "curves.csv",
        "features.csv",
        "labels.csv",
        "lags.csv",
        "surrogates.csv",
    ] {
        assert_eq!(
            std::fs::read(a.join(f)).unwrap(),
            std::fs::read(b.join(f)).unwrap(),
            "{f}"
        );
    }
}

#[test]
fn label_reads_curves_written_by_scan() {
    let dir = temp();
    let out = scan_maps(dir.path(), "run", 200, &["--replicates", "20"]);
    let relabel = dir.path().join("relabel");
    bin()
        .args(["label", out.join("curves.csv").to_str().unwrap(), "--out"])
        .arg(&relabel)
        .assert()
        .success();
    let labels = read_csv(&relabel.join("labels.csv"));
    assert_eq!(labels.len(), 2);
    for row in &labels {
        assert!(["causal", "non-causal", "review"].contains(&row["verdict"].as_str()));
        assert_eq!(row["model_head"], "curve-only");
    }
    let feats = dir.path().join("feats");
    bin()
        .args([
            "features",
            out.join("curves.csv").to_str().unwrap(),
            "--out",
        ])
        .arg(&feats)
        .assert()
        .success();
    let rows = read_csv(&feats.join("features.csv"));
    assert_eq!(rows.len(), 2);
    // Curve-only input: lag, surrogate and context features are missing, never zero.
    assert_eq!(rows[0]["lag_best"], "");
    assert_eq!(rows[0]["correlation"], "");
    assert_ne!(rows[0]["skill_final_mean"], "");
}

#[test]
fn bad_input_fails_with_a_message_naming_row_column_and_fix() {
    let dir = temp();
    let data = dir.path().join("bad.csv");
    std::fs::write(&data, "t,a,b\n0,1.0,2.0\n1,oops,3.0\n2,1.5,2.5\n").unwrap();
    bin()
        .args(["scan", data.to_str().unwrap(), "--out"])
        .arg(dir.path().join("o"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("row 3").and(predicate::str::contains("`a`")));
    assert!(!dir.path().join("o").join("labels.csv").exists());
}

#[test]
fn bad_options_are_rejected_before_any_work() {
    let dir = temp();
    let data = dir.path().join("maps.csv");
    std::fs::write(&data, coupled_logistic_csv(100)).unwrap();
    bin()
        .args(["scan", data.to_str().unwrap(), "--out"])
        .arg(dir.path().join("o"))
        .args(["--review-band", "0.7,0.9"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("--review-band"));
    bin()
        .args(["scan", data.to_str().unwrap(), "--out"])
        .arg(dir.path().join("o"))
        .args(["--sizes", "80,40"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("increasing"));
    // Regression: a wrapped engine error printed its text twice, once as a `caused by` line;
    // and the message describes the real default (each variable's own cycle).
    let out = bin()
        .args(["scan", data.to_str().unwrap(), "--out"])
        .arg(dir.path().join("o"))
        .args(["--period", "1"])
        .assert()
        .code(1)
        .get_output()
        .stderr
        .clone();
    let err = String::from_utf8(out).unwrap();
    assert_eq!(
        err.matches("must be at least 2 time steps").count(),
        1,
        "{err}"
    );
    assert!(err.contains("own dominant cycle"), "{err}");
}

#[test]
fn the_options_every_command_takes_are_listed_in_one_place() {
    let out = bin().args(["scan", "--help"]).output().unwrap();
    let help = String::from_utf8(out.stdout).unwrap();
    let heading = help.find("Options of every command:").expect("one heading");
    for flag in ["--quiet", "--threads"] {
        assert_eq!(
            help.matches(&format!("{flag} ")).count(),
            1,
            "{flag}: {help}"
        );
        assert!(help.find(&format!("{flag} ")).unwrap() > heading, "{flag}");
    }
}

#[test]
fn simulate_is_deterministic_and_scan_reads_its_output() {
    let dir = temp();
    let spec = concat!(env!("CARGO_MANIFEST_DIR"), "/training-sim/specs/small.toml");
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    for out in [&a, &b] {
        bin()
            .args(["simulate", spec, "--out"])
            .arg(out)
            .assert()
            .success();
    }
    let truth_a = std::fs::read(a.join("truth.csv")).unwrap();
    assert_eq!(truth_a, std::fs::read(b.join("truth.csv")).unwrap());
    let first = read_csv(&a.join("truth.csv"))[0]["system"].clone();
    let csv = a.join(format!("{first}.csv"));
    assert_eq!(
        std::fs::read(&csv).unwrap(),
        std::fs::read(b.join(format!("{first}.csv"))).unwrap()
    );
    bin()
        .args(["scan", csv.to_str().unwrap(), "--out"])
        .arg(dir.path().join("scan"))
        .args(["--replicates", "10", "--quiet"])
        .assert()
        .success();
}

/// Issue contract: the same training command and seed produce the same model bytes.
#[test]
fn training_is_reproducible_byte_for_byte() {
    let dir = temp();
    let spec = concat!(env!("CARGO_MANIFEST_DIR"), "/training-sim/specs/small.toml");
    let mut models = Vec::new();
    for name in ["m1", "m2"] {
        let out = dir.path().join(name);
        bin()
            .args(["train", spec, "--out"])
            .arg(&out)
            .args(["--replicates", "20", "--quiet"])
            .assert()
            .success();
        models.push(std::fs::read(out.join("model.bin")).unwrap());
    }
    assert_eq!(models[0], models[1]);
    bin()
        .args(["model-card"])
        .arg(dir.path().join("m1").join("model.bin"))
        .assert()
        .success()
        .stdout(predicate::str::contains("small"));
}

#[test]
fn corrupted_model_file_is_refused_with_a_clear_error() {
    let dir = temp();
    let model = dir.path().join("model.bin");
    std::fs::write(&model, b"not a model at all").unwrap();
    bin()
        .args(["model-card"])
        .arg(&model)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("cannot be used"));
}

#[test]
fn demo_runs_from_any_directory_and_compares_with_its_answer_key() {
    let dir = temp();
    bin()
        .current_dir(dir.path())
        .args(["demo", "--out", "demo", "--quiet"])
        .assert()
        .success()
        .stdout(
            predicate::str::contains("agrees with key")
                .and(predicate::str::contains("report:"))
                .and(predicate::str::is_match(r"(?m)^  driver +response +p +verdict +answer key +agrees with key +reasons$").unwrap()),
        );
    // The report shows the answer key beside each verdict.
    let html = std::fs::read_to_string(dir.path().join("demo/scan/report.html")).unwrap();
    assert_eq!(html.matches("Answer key (the simulated truth)").count(), 42);
    // The demo decides: at most a quarter of its 42 pairs go to review, and the decided ones
    // agree with the simulator's answer key at least nine times in ten.
    let labels = read_csv(&dir.path().join("demo/scan/labels.csv"));
    let key = read_csv(&dir.path().join("demo/answer-key.csv"));
    assert_eq!(labels.len(), 42);
    let review = labels.iter().filter(|r| r["verdict"] == "review").count();
    assert!(review * 4 <= labels.len(), "{review} of 42 pairs reviewed");
    let (mut agree, mut decided) = (0, 0);
    for row in labels.iter().filter(|r| r["verdict"] != "review") {
        let truth = key
            .iter()
            .find(|k| k["driver"] == row["driver"] && k["response"] == row["response"])
            .map(|k| k["label"].as_str())
            .expect("every pair is in the answer key");
        decided += 1;
        let causal = matches!(truth, "direct" | "indirect");
        agree += usize::from(causal == (row["verdict"] == "causal"));
    }
    assert!(
        agree * 10 >= decided * 9,
        "{agree} of {decided} decided pairs agree"
    );
}

/// Days since 1970-01-01 as an ISO 8601 date (Hinnant's civil_from_days algorithm, written
/// out here apart from the reader so the test does not check the reader against itself).
fn iso_date(days: i64) -> String {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02}")
}

/// The coupled logistic maps as a weekly field table exported by a spreadsheet in a European
/// number format: a `Date` column of Mondays, semicolons between fields, decimal commas.
fn weekly_semicolon_export(n: usize) -> String {
    // 2020-01-06 (a Monday) is day 18,267 since 1970-01-01 (Unix time 1,578,268,800 s).
    let mut out = String::from("Date;x;y\r\n");
    for (k, line) in coupled_logistic_csv(n).lines().skip(1).enumerate() {
        let f: Vec<&str> = line.split(',').collect();
        let date = iso_date(18_267 + 7 * k as i64);
        out.push_str(&format!(
            "{date};{};{}\r\n",
            f[1].replace('.', ","),
            f[2].replace('.', ",")
        ));
    }
    out
}

#[test]
fn weekly_semicolon_export_with_dates_is_scanned_in_one_command() {
    assert_eq!(iso_date(18_267), "2020-01-06");
    let dir = temp();
    let csv = weekly_semicolon_export(200);
    let fast = ["--replicates", "10", "--sizes", "4", "--surrogates", "4"];
    let out = scan_text(
        dir.path(),
        "weekly",
        &csv,
        &[
            &["--delimiter", ";", "--decimal-comma", "--quiet"][..],
            &fast[..],
        ]
        .concat(),
    );
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    let axis = &run["input"]["time_axis"];
    assert_eq!(axis["column"], "Date");
    assert_eq!(axis["kind"], "date");
    assert_eq!(axis["step"], "7 days");
    assert_eq!(axis["first"], "2020-01-06");
    assert_eq!(run["input"]["series"], serde_json::json!(["x", "y"]));
    assert_eq!(read_csv(&out.join("labels.csv")).len(), 2);

    // Without the options, one message names both the semicolons and the decimal commas.
    let data = dir.path().join("weekly.csv");
    bin()
        .args(["scan"])
        .arg(&data)
        .args(["--out"])
        .arg(dir.path().join("plain"))
        .assert()
        .code(1)
        .stderr(
            predicate::str::contains("semicolons")
                .and(predicate::str::contains("--delimiter ';' --decimal-comma")),
        );

    // A missing week is an error naming the rows, unless asked to fill it.
    let gappy: String = csv
        .lines()
        .enumerate()
        .filter(|(i, _)| *i != 50)
        .map(|(_, l)| format!("{l}\n"))
        .collect();
    let gappy_path = dir.path().join("gappy.csv");
    std::fs::write(&gappy_path, &gappy).unwrap();
    bin()
        .args(["scan"])
        .arg(&gappy_path)
        .args(["--out"])
        .arg(dir.path().join("gappy"))
        .args(["--delimiter", ";", "--decimal-comma"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("14 days").and(predicate::str::contains("fill-gaps")));
    bin()
        .args(["scan"])
        .arg(&gappy_path)
        .args(["--out"])
        .arg(dir.path().join("gappy"))
        .args([
            "--delimiter",
            ";",
            "--decimal-comma",
            "--uneven-steps",
            "fill-gaps",
            "--quiet",
        ])
        .args(fast)
        .assert()
        .success()
        .stderr(predicate::str::contains("1 skipped time points"));
}

#[test]
fn a_rising_first_column_not_taken_as_time_is_warned_about() {
    let dir = temp();
    let csv: String = logistic_pair_csv(120, 0.0, 0.1).replacen("t,x,y", "yr,x,y", 1);
    let data = dir.path().join("years.csv");
    std::fs::write(&data, csv).unwrap();
    bin()
        .args(["scan"])
        .arg(&data)
        .arg("--out")
        .arg(dir.path().join("out"))
        .args([
            "--replicates",
            "5",
            "--sizes",
            "3",
            "--surrogates",
            "2",
            "--quiet",
        ])
        .assert()
        .success()
        .stderr(
            predicate::str::contains("warning: ").and(predicate::str::contains("--time-column yr")),
        );
}

#[test]
fn scan_prints_an_aligned_verdict_table_unless_quiet() {
    let dir = temp();
    let data = dir.path().join("maps.csv");
    std::fs::write(&data, coupled_logistic_csv(200)).unwrap();
    let fast = ["--replicates", "10", "--sizes", "4", "--surrogates", "4"];
    let out = bin()
        .arg("scan")
        .arg(&data)
        .arg("--out")
        .arg(dir.path().join("loud"))
        .args(fast)
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert!(
        lines[0].starts_with("  driver  response  p     verdict"),
        "{text}"
    );
    // Both ordered pairs, the verdict in the header's column.
    let col = lines[0].find("verdict").unwrap();
    for l in &lines[1..3] {
        assert!(l.starts_with("  x  ") || l.starts_with("  y  "), "{l}");
        assert!(
            ["causal", "non-causal", "review"]
                .iter()
                .any(|v| l[col..].starts_with(v)),
            "{l}"
        );
    }
    bin()
        .arg("scan")
        .arg(&data)
        .arg("--out")
        .arg(dir.path().join("quiet"))
        .args(fast)
        .arg("--quiet")
        .assert()
        .success()
        .stdout(predicate::str::contains("driver").not());
}

/// `--drivers` and `--responses`: only the chosen pairs are labelled, only the manifolds they
/// need are computed, and each chosen pair's features equal those of a scan of every pair
/// (its response's and driver's manifolds are computed in full). Shards and merge honour it.
#[test]
fn chosen_drivers_and_responses_are_scanned_alone_and_merge_honours_them() {
    let dir = temp();
    let data = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data/sound.csv");
    let fast = [
        "--replicates",
        "10",
        "--sizes",
        "4",
        "--surrogates",
        "4",
        "--quiet",
    ];
    let choose = [
        "--drivers",
        "sandeel_index,sea_temperature",
        "--responses",
        "puffin_chicks",
    ];
    let run = |out: &str, extra: &[&str]| {
        bin()
            .args(["scan", data, "--out"])
            .arg(dir.path().join(out))
            .args(fast)
            .args(extra)
            .assert()
            .success();
    };
    run("all", &[]);
    run("some", &choose);
    let labels = read_csv(&dir.path().join("some/labels.csv"));
    let pairs: Vec<(String, String)> = labels
        .iter()
        .map(|r| (r["driver"].clone(), r["response"].clone()))
        .collect();
    assert_eq!(pairs.len(), 2);
    assert!(pairs.contains(&("sandeel_index".into(), "puffin_chicks".into())));
    assert!(pairs.contains(&("sea_temperature".into(), "puffin_chicks".into())));
    let json = |p: &str| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(dir.path().join(p)).unwrap()).unwrap()
    };
    let rec = json("some/run.json");
    assert_eq!(
        rec["selection"]["manifolds"],
        serde_json::json!(["sandeel_index", "puffin_chicks", "sea_temperature"])
    );
    assert_eq!(
        rec["selection"]["responses"],
        serde_json::json!(["puffin_chicks"])
    );
    // Same features, to the byte, as the scan of every pair.
    let rows = |p: &str| -> Vec<String> {
        std::fs::read_to_string(dir.path().join(p))
            .unwrap()
            .lines()
            .map(String::from)
            .collect()
    };
    let all = rows("all/features.csv");
    for line in rows("some/features.csv") {
        assert!(all.contains(&line), "{line}");
    }

    // Two shards of the same choice, merged, give the same labels.
    for shard in ["1/2", "2/2"] {
        let name = format!("shard{}", &shard[..1]);
        run(&name, &[&choose[..], &["--shard", shard][..]].concat());
    }
    bin()
        .args(["merge", "--quiet", "--out"])
        .arg(dir.path().join("merged"))
        .arg(dir.path().join("shard1"))
        .arg(dir.path().join("shard2"))
        .assert()
        .success();
    assert_eq!(rows("merged/labels.csv"), rows("some/labels.csv"));

    // An unknown name is refused before any work, naming the table's series.
    bin()
        .args(["scan", data, "--out"])
        .arg(dir.path().join("bad"))
        .args(["--drivers", "seals"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("`seals`").and(predicate::str::contains("`kelp_cover`")));
}

#[test]
fn no_error_message_repeats_a_line() {
    let dir = temp();
    let data = dir.path().join("maps.csv");
    std::fs::write(&data, coupled_logistic_csv(100)).unwrap();
    let bad = dir.path().join("bad.csv");
    std::fs::write(&bad, "t,a,b\n1,2,3\n2,x,4\n").unwrap();
    let d = data.to_str().unwrap();
    let cases: Vec<Vec<&str>> = vec![
        vec!["scan", d, "--replicates", "0"],
        vec!["scan", d, "--period", "1"],
        vec!["scan", d, "--dim", "0"],
        vec!["scan", d, "--sizes", "20,5000"],
        vec!["scan", d, "--max-lag", "60"],
        vec!["scan", bad.to_str().unwrap()],
        vec!["scan", "no-such-file.csv"],
        vec!["label", d],
    ];
    for args in cases {
        let out = bin()
            .args(&args)
            .arg("--out")
            .arg(dir.path().join("o"))
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(1), "{args:?}");
        let err = String::from_utf8(out.stderr).unwrap();
        let lines: Vec<&str> = err
            .lines()
            .map(str::trim)
            .filter(|l| !l.is_empty())
            .collect();
        let mut seen = std::collections::BTreeSet::new();
        for l in &lines {
            // "caused by: X" repeating the text of the line above counts as a repeat too.
            let text = l
                .trim_start_matches("caused by: ")
                .trim_start_matches("error: ");
            assert!(
                seen.insert(text.to_string()),
                "{args:?} repeats {l:?}:\n{err}"
            );
            assert!(
                !lines
                    .iter()
                    .any(|o| o != l && o.contains(text) && text.len() > 20),
                "{args:?}: {l:?} is repeated inside another line:\n{err}"
            );
        }
    }
}
