//! `scan`, `merge`, `label` and `features`: flags to the pipeline's orchestration, then the
//! summary.

use std::path::Path;
use std::time::Instant;

use anyhow::{Context, bail};
use crossmap_engine::PairEnsemble;
use series_io::OutputDir;
use triage_pipeline::model_source;
use triage_pipeline::orchestration::{
    self as run, CHECKPOINT_DIR, Finished, begin_output, check_budget, compute_units, inputs,
    lock_folder,
};
use triage_pipeline::settings::{EngineSettings, policy};
use triage_pipeline::tables;
use triage_pipeline::units::{self, ShardSpec, UnitStore};

use crate::cli::{FeaturesArgs, LabelArgs, MergeArgs, ScanArgs};
use crate::progress::Terminal;

/// The known label of each pair, by (driver, response).
pub type AnswerKey = std::collections::BTreeMap<(String, String), verdict_model::FineLabel>;

pub fn scan(args: ScanArgs, quiet: bool) -> anyhow::Result<()> {
    if let Some(text) = &args.shard {
        let shard = ShardSpec::parse(text)?;
        return run_shard(&args, shard, quiet);
    }
    let finished = run_scan(&args, quiet, None)?;
    print_summary(&finished, &args.out, quiet);
    Ok(())
}

/// The whole scan, writing every output file into `args.out`; the report shows `answer_key`
/// (by driver and response) beside the verdicts when given.
///
/// Each finished unit is checkpointed into `OUT/.checkpoint/`; rerunning the same command
/// after an interruption skips them. The folder is removed once run.json is written.
pub fn run_scan(
    args: &ScanArgs,
    quiet: bool,
    answer_key: Option<AnswerKey>,
) -> anyhow::Result<Finished> {
    let started = Instant::now();
    let observer = Terminal::new(quiet);
    let policy = policy(&args.verdict.review_band)?;
    let model = model_source::load(args.verdict.model.as_deref())?;
    let recorded = args.data.display().to_string();
    let engine = EngineSettings::from(&args.engine);
    let prepared = run::prepare(
        &args.data,
        &recorded,
        &args.input_choice(),
        &engine,
        ShardSpec::WHOLE,
        &observer,
    )?;
    show_warnings(&prepared, &args.data);
    // Read before the work, so a wrong file fails in seconds rather than after the cross maps.
    let decisions = run::load_decisions(args.verdict.decisions.as_deref(), &prepared.table.sha256)?;
    check_budget(&prepared, &recorded, args.over_budget, true, &observer)?;
    let (out, _lock) = begin_output(
        &args.out,
        &inputs(&[
            Some(&args.data),
            args.verdict.model.as_deref(),
            args.verdict.decisions.as_deref(),
        ]),
        &observer,
    )?;
    let store = UnitStore::open(out.path().join(CHECKPOINT_DIR))?;
    let units = compute_units(Some(&store), &prepared, &observer)?;
    let ensembles: Vec<PairEnsemble> = units.into_values().flatten().collect();
    let mut finished = run::finish(
        &prepared, &ensembles, &policy, &model, "scan", None, started, decisions,
    )?;
    finished.report_options = args.verdict.report_options();
    finished.answer_key = answer_key;
    run::write_results(&out, &finished)?;
    std::fs::remove_dir_all(store.path()).with_context(|| {
        format!(
            "cannot remove the finished checkpoint {}",
            store.path().display()
        )
    })?;
    Ok(finished)
}

/// `scan --shard I/N`: this shard's units, embedding.csv and the manifest, into `args.out`.
fn run_shard(args: &ScanArgs, shard: ShardSpec, quiet: bool) -> anyhow::Result<()> {
    let observer = Terminal::new(quiet);
    // Checked now so a bad flag fails before hours of work rather than at the merge.
    policy(&args.verdict.review_band)?;
    model_source::load(args.verdict.model.as_deref())?;
    let recorded = args.data.display().to_string();
    let engine = EngineSettings::from(&args.engine);
    let prepared = run::prepare(
        &args.data,
        &recorded,
        &args.input_choice(),
        &engine,
        shard,
        &observer,
    )?;
    show_warnings(&prepared, &args.data);
    check_budget(&prepared, &recorded, args.over_budget, true, &observer)?;
    let store = UnitStore::open(&args.out)?;
    let _lock = lock_folder(store.output(), &observer)?;
    let store = store.protect_inputs(
        &inputs(&[
            Some(&args.data),
            args.verdict.model.as_deref(),
            args.verdict.decisions.as_deref(),
        ]),
        &["embedding.csv"],
    )?;
    let units = compute_units(Some(&store), &prepared, &observer)?;
    store.output().export(&tables::embedding(
        &tables::spreadsheet_safe(&prepared.series.names),
        &prepared.embeddings,
    ))?;
    let mut manifest = prepared.manifest.clone();
    manifest.complete = true;
    store.write_manifest(&manifest)?;
    let names: Vec<&str> = units
        .keys()
        .map(|&u| prepared.series.names[u].as_str())
        .collect();
    println!(
        "shard {shard}: {} response manifolds ({}) written to {}",
        names.len(),
        names.join(", "),
        args.out.display()
    );
    println!(
        "combine all {} shards with: ccm-triage merge SHARD_DIR... --out DIR",
        shard.count
    );
    Ok(())
}

/// `merge`: the files of one scan from the shard directories of `scan --shard`.
pub fn merge(args: MergeArgs, quiet: bool) -> anyhow::Result<()> {
    let started = Instant::now();
    let observer = Terminal::new(quiet);
    let policy = policy(&args.verdict.review_band)?;
    let model = model_source::load(args.verdict.model.as_deref())?;
    let plan = units::plan_merge(&args.shards)?;
    let m = &plan.manifest;
    let (engine, choice) = run::recorded_options(m)?;
    let data = args
        .data
        .clone()
        .unwrap_or_else(|| m.input.path.clone().into());
    let prepared = run::prepare(
        &data,
        &m.input.path,
        &choice,
        &engine,
        ShardSpec::WHOLE,
        &observer,
    )
    .with_context(|| {
        format!(
            "cannot reload the input table {} the shards were computed from (pass --data PATH if it moved)",
            data.display()
        )
    })?;
    if prepared.manifest.input.sha256 != m.input.sha256 {
        bail!(
            "{} is not the table the shards were computed from (its sha256 is {}, the shards' is {});              pass the original file with --data PATH",
            data.display(),
            prepared.manifest.input.sha256,
            m.input.sha256
        );
    }
    anyhow::ensure!(
        prepared.manifest.settings == m.settings,
        "the settings resolved from {} differ from the shards' ones; rerun the shards with this version",
        data.display()
    );
    show_warnings(&prepared, &data);
    let decisions = run::load_decisions(args.verdict.decisions.as_deref(), &prepared.table.sha256)?;
    let mut read: Vec<&Path> = args.shards.iter().map(|d| d.as_path()).collect();
    read.push(&data);
    read.extend(args.verdict.model.as_deref());
    read.extend(args.verdict.decisions.as_deref());
    check_budget(
        &prepared,
        &data.display().to_string(),
        args.over_budget,
        false,
        &observer,
    )?;
    let (out, _lock) = begin_output(&args.out, &read, &observer)?;
    let ensembles = units::load_merge(&args.shards, &plan)?;
    let shards: Vec<String> = args
        .shards
        .iter()
        .map(|d| d.display().to_string())
        .collect();
    let mut finished = run::finish(
        &prepared,
        &ensembles,
        &policy,
        &model,
        "merge",
        Some(shards),
        started,
        decisions,
    )?;
    finished.report_options = args.verdict.report_options();
    run::write_results(&out, &finished)?;
    print_summary(&finished, &args.out, quiet);
    Ok(())
}

pub fn label(args: LabelArgs, quiet: bool) -> anyhow::Result<()> {
    let observer = Terminal::new(quiet);
    let policy = policy(&args.verdict.review_band)?;
    let model = model_source::load(args.verdict.model.as_deref())?;
    let recorded = args.curves.display().to_string();
    let mut finished = run::label_curves(
        &args.curves,
        &recorded,
        &policy,
        &model,
        args.verdict.decisions.as_deref(),
    )?;
    finished.report_options = args.verdict.report_options();
    let out = OutputDir::create(&args.out)?;
    let _lock = lock_folder(&out, &observer)?;
    let out = out.protect_inputs(
        &inputs(&[
            Some(&args.curves),
            args.verdict.model.as_deref(),
            args.verdict.decisions.as_deref(),
        ]),
        run::RESULT_FILES,
    )?;
    run::write_results(&out, &finished)?;
    print_summary(&finished, &args.out, quiet);
    Ok(())
}

pub fn features(args: FeaturesArgs) -> anyhow::Result<()> {
    let (names, records) = run::curve_records(&args.curves)?;
    let out = OutputDir::create(&args.out)?;
    let _lock = lock_folder(&out, &Terminal::new(true))?;
    let out = out.protect_inputs(&[&args.curves], &["features.csv"])?;
    out.export(&tables::features(
        &tables::spreadsheet_safe(&names),
        &records,
    ))?;
    println!(
        "features of {} pairs written to {}",
        records.len(),
        args.out.join("features.csv").display()
    );
    Ok(())
}

/// The table reader's warnings, one line each on stderr (shown even with --quiet: they say
/// how the input was read).
fn show_warnings(prepared: &run::Prepared, data: &Path) {
    for w in prepared.warnings(&data.display().to_string()) {
        eprintln!("{w}");
    }
}

/// The verdict table (unless `quiet`), the counts, where the files are, and the caution.
fn print_summary(o: &Finished, out: &Path, quiet: bool) {
    if !quiet {
        print!(
            "{}",
            review_report::verdict_table(&o.table_rows(), &review_report::TableOptions::default())
        );
    }
    let counts = o.counts();
    println!(
        "{} pairs: {} causal, {} non-causal, {} to review",
        o.records.len(),
        counts[0],
        counts[1],
        counts[2]
    );
    println!("report: {}", out.join("report.html").display());
    println!("labels: {}", out.join("labels.csv").display());
    println!("{}", CAUTION_LINE);
}

/// One-line form of the caution printed after every labelling run.
pub const CAUTION_LINE: &str = "caution: a label is evidence from one method under its assumptions, \
not proof of causation; confirm with domain knowledge and experiments.";
