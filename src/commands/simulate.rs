//! `simulate`, `train`, `evaluate`, `model-card` and `demo`.

use std::path::Path;

use anyhow::Context;
use series_io::{CsvTable, JsonDocument, OutputDir};
use training_sim::Spec;
use triage_pipeline::{AnalysedSystem, AnalysisSettings, analyse_systems, judge, rule_of_thumb};
use verdict_model::metrics::{Summary, summarise};
use verdict_model::{FitConfig, Head, SpecIdentity, Verdict, VerdictPolicy};

use super::model;
use crate::cli::{DemoArgs, EvaluateArgs, ModelCardArgs, SimulateArgs, TrainArgs};
use crate::config;
use crate::progress::Progress;

/// A spec file, parsed, with its identity (file stem and SHA-256 of its text).
fn read_spec(path: &Path) -> anyhow::Result<(Spec, SpecIdentity)> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read spec file {}", path.display()))?;
    let spec = Spec::from_toml_str(&text).with_context(|| {
        format!(
            "spec file {} is not valid; see training-sim/SPEC.md for every key",
            path.display()
        )
    })?;
    let name = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    Ok((
        spec,
        SpecIdentity {
            name,
            hash: verdict_model::sha256_hex(text.as_bytes()),
        },
    ))
}

fn simulate_spec(spec: &Spec, quiet: bool) -> anyhow::Result<Vec<training_sim::System>> {
    let bar = Progress::new(quiet, spec.total_count() as u64, "simulating");
    let done = std::sync::atomic::AtomicUsize::new(0);
    let systems = training_sim::simulate_with_progress(spec, &|_| {
        let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
        (bar.callback())(n);
    })?;
    bar.finish();
    Ok(systems)
}

pub fn simulate(args: SimulateArgs, quiet: bool) -> anyhow::Result<()> {
    let (spec, _) = read_spec(&args.spec)?;
    let systems = simulate_spec(&spec, quiet)?;
    let out = OutputDir::create(&args.out)?;
    let _lock = super::scan::lock_folder(&out)?;
    let out = out.protect_inputs(&[&args.spec], &[])?;
    for s in &systems {
        out.write_bytes(&format!("{}.csv", s.id), s.to_csv_string().as_bytes())?;
    }
    out.write_bytes(
        "resolved-spec.json",
        training_sim::resolved_spec_json(&spec, &systems).as_bytes(),
    )?;
    // truth.csv last: its presence marks a complete set.
    out.write_bytes("truth.csv", training_sim::truth_csv(&systems).as_bytes())?;
    println!(
        "{} systems written to {} (answer key: truth.csv)",
        systems.len(),
        args.out.display()
    );
    Ok(())
}

/// Simulate a spec and run every system through the labelling pipeline.
fn analysed(
    spec: &Spec,
    settings: &AnalysisSettings,
    quiet: bool,
) -> anyhow::Result<(Vec<AnalysedSystem>, Vec<triage_pipeline::SkippedSystem>)> {
    let systems = simulate_spec(spec, quiet)?;
    let bar = Progress::new(quiet, systems.len() as u64, "cross maps");
    let out = analyse_systems(&systems, settings, &bar.callback());
    bar.finish();
    Ok(out)
}

/// One decisions file given to `train`: where it came from, and its rows.
pub struct ReviewedInput {
    /// The decisions file.
    file: String,
    /// The scan folder it was matched to.
    scan: String,
}

/// Read every `--decisions` file and join it with the `--decision-scans` folder of the same
/// input checksum, refusing scans made with other settings than the training ones.
fn reviewed_inputs(
    args: &TrainArgs,
    settings: &triage_pipeline::AnalysisSettings,
) -> anyhow::Result<Vec<(ReviewedInput, triage_pipeline::reviewed::ReviewedRows)>> {
    if args.decisions.is_empty() && args.decision_scans.is_empty() {
        return Ok(Vec::new());
    }
    anyhow::ensure!(
        args.decision_weight >= 1 && args.decision_weight <= 1000,
        "--decision-weight {} must be between 1 and 1000",
        args.decision_weight
    );
    anyhow::ensure!(
        !args.decisions.is_empty(),
        "--decision-scans needs --decisions FILE: the decisions exported from those scans' reports"
    );
    let mut scans = Vec::new();
    for dir in &args.decision_scans {
        let path = dir.join("run.json");
        let text = std::fs::read_to_string(&path).with_context(|| {
            format!(
                "{}: cannot read the run.json of a finished scan",
                path.display()
            )
        })?;
        let run: serde_json::Value = serde_json::from_str(&text)
            .with_context(|| format!("{}: not a run.json written by ccm-triage", path.display()))?;
        scans.push((dir.clone(), run));
    }
    let wanted = super::scan::analysis_settings_json(settings);
    let mut out = Vec::new();
    for file in &args.decisions {
        let decisions = series_io::read_decisions(file)?;
        let (dir, run) = scans
            .iter()
            .find(|(_, run)| run["input"]["sha256"] == decisions.input_sha256.as_str())
            .with_context(|| {
                format!(
                    "{}: no --decision-scans folder holds a scan of the input these decisions \
                     were made on (sha256 {}); pass the scan's output folder",
                    file.display(),
                    decisions.input_sha256
                )
            })?;
        let mut recorded = run["settings"].clone();
        if let Some(m) = recorded.as_object_mut() {
            m.remove("n_points");
            m.remove("per_response");
        }
        anyhow::ensure!(
            recorded == wanted,
            "{}: that scan used other analysis settings than this training run ({} there, {} \
             here); its features would not match the simulated rows: rescan the input with the \
             training settings, or train with the scan's settings",
            dir.display(),
            recorded,
            wanted
        );
        let features = series_io::read_feature_rows(&dir.join("features.csv"))?;
        let rows = triage_pipeline::reviewed::reviewed_rows(&decisions, &features)
            .map_err(|e| anyhow::anyhow!("{}: {e}", file.display()))?;
        out.push((
            ReviewedInput {
                file: file.display().to_string(),
                scan: dir.display().to_string(),
            },
            rows,
        ));
    }
    Ok(out)
}

/// The model card's section on reviewed pairs, reported apart from the simulated systems.
fn reviewed_section(
    card: &verdict_model::ModelCard,
    reviewed: &[(ReviewedInput, triage_pipeline::reviewed::ReviewedRows)],
    weight: usize,
) -> String {
    use series_io::Decision;
    let count = |k: Decision| -> usize {
        reviewed
            .iter()
            .map(|(_, r)| r.rows.iter().filter(|x| x.decision == k).count())
            .sum()
    };
    let (c, n) = (count(Decision::Causal), count(Decision::NonCausal));
    let unsure: usize = reviewed.iter().map(|(_, r)| r.unsure).sum();
    let mut s = format!(
        "\n## Reviewed pairs\n\n{} decisions: {c} causal, {n} non-causal, {unsure} unsure, from {} \
         file(s). Each causal or non-causal pair is a training row of family `{}` counted {weight} \
         times (so the counts above show it {weight} times); unsure pairs are not used. Causal \
         decisions train as `direct`, non-causal ones as `independent`.\n\n\
         | decisions file | scan | causal | non-causal | unsure |\n|---|---|---:|---:|---:|\n",
        c + n + unsure,
        reviewed.len(),
        triage_pipeline::reviewed::REVIEWED_FAMILY
    );
    for (input, rows) in reviewed {
        let k = |d: Decision| rows.rows.iter().filter(|x| x.decision == d).count();
        s.push_str(&format!(
            "| `{}` | `{}` | {} | {} | {} |\n",
            input.file,
            input.scan,
            k(Decision::Causal),
            k(Decision::NonCausal),
            rows.unsure
        ));
    }
    let fold = card.heads.first().and_then(|h| {
        h.per_fold
            .iter()
            .find(|f| f.held_out == triage_pipeline::reviewed::REVIEWED_FAMILY)
    });
    match fold {
        Some(f) => s.push_str(&format!(
            "\nHeld out as their own fold (the model fitted without them, full head): log-loss \
             {:.3}, ROC AUC {}, accuracy {:.3} against the reviewers' decisions.\n",
            f.log_loss,
            f.roc_auc
                .map_or("n/a (one class)".to_string(), |a| format!("{a:.3}")),
            f.accuracy
        )),
        None => s.push_str(
            "\nNo held-out figure on the reviewed pairs alone: the validation folds did not hold \
             them out as a family.\n",
        ),
    }
    s
}

/// `reviewed-pairs.csv`: every reviewed pair used in training, once.
fn reviewed_table(
    reviewed: &[(ReviewedInput, triage_pipeline::reviewed::ReviewedRows)],
) -> CsvTable {
    CsvTable {
        name: "reviewed-pairs.csv".into(),
        header: [
            "driver",
            "response",
            "decision",
            "input_sha256",
            "decisions_file",
        ]
        .map(String::from)
        .to_vec(),
        rows: reviewed
            .iter()
            .flat_map(|(input, rows)| {
                rows.rows.iter().map(move |r| {
                    vec![
                        r.driver.clone(),
                        r.response.clone(),
                        r.decision.as_str().to_string(),
                        r.input_sha256.clone(),
                        input.file.clone(),
                    ]
                })
            })
            .collect(),
    }
}

pub fn train(args: TrainArgs, quiet: bool) -> anyhow::Result<()> {
    let (spec, identity) = read_spec(&args.spec)?;
    let settings = config::analysis_settings(&args.engine)?;
    let out = OutputDir::create(&args.out)?;
    let _lock = super::scan::lock_folder(&out)?;
    let mut read: Vec<&std::path::Path> = vec![&args.spec];
    read.extend(args.decisions.iter().map(|p| p.as_path()));
    read.extend(args.decision_scans.iter().map(|p| p.as_path()));
    let out = out.protect_inputs(&read, &[])?;
    let reviewed = reviewed_inputs(&args, &settings)?;
    let (systems, skipped) = analysed(&spec, &settings, quiet)?;
    let mut set = triage_pipeline::training_set(&systems);
    for (_, rows) in &reviewed {
        triage_pipeline::reviewed::add_reviewed(&mut set, &rows.rows, args.decision_weight);
    }
    anyhow::ensure!(
        !set.rows.is_empty(),
        "spec {} produced no usable pairs; raise the counts or lengths in it",
        args.spec.display()
    );
    eprintln!(
        "fitting on {} pairs from {} systems ({} skipped)",
        set.rows.len(),
        systems.len(),
        skipped.len()
    );
    let suite = match &args.suite {
        Some(path) => {
            let (suite_spec, suite_id) = read_spec(path)?;
            let (suite_systems, _) = analysed(&suite_spec, &settings, quiet)?;
            let suite_set = triage_pipeline::training_set(&suite_systems);
            eprintln!(
                "validation suite {}: {} pairs from {} systems",
                suite_id.name,
                suite_set.rows.len(),
                suite_systems.len()
            );
            Some((suite_set, suite_id.name))
        }
        None => None,
    };
    let cfg = FitConfig {
        seed: args.engine.seed,
        curve_only_names: ensemble_features::curve_only_names()
            .into_iter()
            .map(String::from)
            .collect(),
        spec: identity,
        suite_name: suite.as_ref().map(|s| s.1.clone()).unwrap_or_default(),
        ..FitConfig::default()
    };
    let bundle = verdict_model::fit_with_suite(&set, suite.as_ref().map(|s| &s.0), &cfg)?;
    let bytes = bundle.to_bytes()?;
    let card = bundle.card();
    let mut markdown = card.to_markdown();
    if !reviewed.is_empty() {
        markdown.push_str(&reviewed_section(card, &reviewed, args.decision_weight));
        out.export(&reviewed_table(&reviewed))?;
    }
    out.write_bytes("model-card.md", markdown.as_bytes())?;
    out.write_bytes("model-card.json", card.to_json()?.as_bytes())?;
    out.write_bytes(
        "reliability.svg",
        card.reliability_svg(Head::Full)?.as_bytes(),
    )?;
    out.export(&CsvTable {
        name: "skipped-systems.csv".into(),
        header: vec!["system".into(), "reason".into()],
        rows: skipped
            .iter()
            .map(|s| vec![s.id.clone(), s.reason.clone()])
            .collect(),
    })?;
    out.export(&training_table(&set))?;
    out.export(&JsonDocument {
        name: "training-settings.json".into(),
        value: &super::scan::analysis_settings_json(&settings),
    })?;
    // model.bin last: its presence marks a finished training run.
    out.write_bytes("model.bin", &bytes)?;
    println!(
        "model written to {} (sha256 {})",
        args.out.join("model.bin").display(),
        verdict_model::sha256_hex(&bytes)
    );
    let judged = if card.suite.is_some() {
        "validation suite"
    } else {
        "out of family"
    };
    let f = |v: Option<f64>| v.map_or("n/a".to_string(), |v| format!("{v:.3}"));
    for t in &card.targets {
        println!(
            "  {:<32} target {:<8} {judged} {:<6} {:<8} out of family {}",
            t.name,
            t.target,
            f(t.value),
            if t.met { "met" } else { "NOT met" },
            f(t.out_of_family)
        );
    }
    Ok(())
}

/// `training-set.csv`: every training row with its system, family and label, so a fit can be
/// inspected or repeated without simulating again.
fn training_table(set: &verdict_model::TrainingSet) -> CsvTable {
    let mut header = vec!["system".to_string(), "family".into(), "label".into()];
    header.extend(set.feature_names.iter().cloned());
    let rows = (0..set.rows.len())
        .map(|i| {
            let mut row = vec![
                set.systems[i].clone(),
                set.families[i].clone(),
                set.labels[i].as_str().to_string(),
            ];
            row.extend(
                set.rows[i]
                    .iter()
                    .map(|v| v.map(series_io::format_f64).unwrap_or_default()),
            );
            row
        })
        .collect();
    CsvTable {
        name: "training-set.csv".into(),
        header,
        rows,
    }
}

pub fn evaluate(args: EvaluateArgs, quiet: bool) -> anyhow::Result<()> {
    let model = model::load(args.model.as_deref())?;
    let (spec, _) = read_spec(&args.spec)?;
    let settings = config::analysis_settings(&args.engine)?;
    let policy = VerdictPolicy {
        band: config::parse_band(&args.review_band)?,
        ..VerdictPolicy::default()
    };
    let (systems, skipped) = analysed(&spec, &settings, quiet)?;
    let (mut p, mut labels, mut families, mut review, mut rule) =
        (vec![], vec![], vec![], vec![], vec![]);
    let mut rows = Vec::new();
    for s in &systems {
        let judgements = judge(&s.pairs, &model.bundle, &policy)?;
        for ((rec, j), label) in s.pairs.iter().zip(&judgements).zip(&s.labels) {
            if j.p_causal.is_nan() {
                continue;
            }
            let by_rule = rule_of_thumb(rec);
            rows.push(vec![
                s.id.clone(),
                rec.driver.to_string(),
                rec.response.to_string(),
                label.as_str().to_string(),
                format!("{:.4}", j.p_causal),
                j.verdict.as_str().to_string(),
                verdict_model::reasons_field(&j.reasons),
                if by_rule { "causal" } else { "non-causal" }.to_string(),
            ]);
            p.push(j.p_causal);
            labels.push(*label);
            families.push(s.family.clone());
            review.push(j.verdict == Verdict::Review);
            rule.push(if by_rule { 1.0 } else { 0.0 });
        }
    }
    anyhow::ensure!(
        !p.is_empty(),
        "no pair of spec {} could be scored",
        args.spec.display()
    );
    let ours = summarise(&p, &labels, &families, &review);
    let no_review = vec![false; rule.len()];
    let baseline = summarise(&rule, &labels, &families, &no_review);
    print!("{}", comparison_table(&ours, &baseline, skipped.len()));
    if let Some(dir) = &args.out {
        let out = OutputDir::create(dir)?;
        out.export(&CsvTable {
            name: "predictions.csv".into(),
            header: [
                "system",
                "driver_index",
                "response_index",
                "truth",
                "p_causal",
                "verdict",
                "reasons",
                "rule_of_thumb",
            ]
            .iter()
            .map(|s| s.to_string())
            .collect(),
            rows,
        })?;
        out.export(&CsvTable {
            name: "evaluated-set.csv".into(),
            ..training_table(&triage_pipeline::training_set(&systems))
        })?;
        out.export(&JsonDocument {
            name: "metrics.json".into(),
            value: &serde_json::json!({"model": ours, "rule_of_thumb": baseline,
                "model_sha256": model.sha256, "skipped_systems": skipped.len()}),
        })?;
    }
    Ok(())
}

fn comparison_table(ours: &Summary, rule: &Summary, skipped: usize) -> String {
    let f = |v: Option<f64>| v.map_or("n/a".to_string(), |x| format!("{x:.3}"));
    let mut s = format!(
        "{} pairs ({} causal), {} systems skipped\n{:<42} {:>10} {:>14}\n",
        ours.n, ours.n_causal, skipped, "metric", "model", "rule of thumb"
    );
    let lines: [(&str, Option<f64>, Option<f64>); 10] = [
        ("ROC AUC", ours.roc_auc, rule.roc_auc),
        (
            "accuracy (p >= 0.5)",
            Some(ours.accuracy),
            Some(rule.accuracy),
        ),
        ("Brier score", Some(ours.brier), Some(rule.brier)),
        ("expected calibration error", Some(ours.ece), Some(rule.ece)),
        ("log-loss", Some(ours.log_loss), Some(rule.log_loss)),
        (
            "false-positive rate, confounded (p >= 0.5)",
            ours.fpr_confounded,
            rule.fpr_confounded,
        ),
        (
            "recall, direct (p >= 0.5)",
            ours.recall_direct,
            rule.recall_direct,
        ),
        (
            "false-positive rate, confounded (verdict)",
            ours.fpr_confounded_verdict,
            rule.fpr_confounded_verdict,
        ),
        (
            "recall, direct (verdict)",
            ours.recall_direct_verdict,
            rule.recall_direct_verdict,
        ),
        (
            "review rate",
            Some(ours.review_rate),
            Some(rule.review_rate),
        ),
    ];
    for (name, a, b) in lines {
        s.push_str(&format!("{name:<42} {:>10} {:>14}\n", f(a), f(b)));
    }
    s.push_str("accuracy per family (model / rule of thumb):\n");
    for (a, b) in ours.per_family.iter().zip(&rule.per_family) {
        s.push_str(&format!(
            "  {:<24} n={:<6} {:.3} / {:.3}\n",
            a.family, a.n, a.accuracy, b.accuracy
        ));
    }
    s
}

pub fn model_card(args: ModelCardArgs) -> anyhow::Result<()> {
    let model = model::load(args.model.as_deref())?;
    let card = model.bundle.card();
    if args.json {
        println!("{}", card.to_json()?);
    } else {
        println!("model: {}\n", model.identity_line());
        println!("{}", card.to_markdown());
    }
    Ok(())
}

pub fn demo(args: DemoArgs, quiet: bool) -> anyhow::Result<()> {
    super::demo::run(args, quiet)
}
