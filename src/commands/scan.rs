//! `scan`, `label` and `features`: from a table (or ensembles) to labelled pairs and a report.

use std::collections::BTreeMap;
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Instant;

use anyhow::{Context, bail};
use crossmap_engine::{Embedding, PairEnsemble};
use ensemble_features::Ensemble;
use rayon::prelude::*;
use series_io::{DirLock, JsonDocument, OutputDir, TextDocument};
use triage_pipeline::units::{self, InputIdentity, ShardSpec, StoreManifest, UnitStore};
use triage_pipeline::{
    Judgement, PairRecord, QualityThresholds, RunFacts, SeriesSet, assemble_curves, judge,
    report_view,
};
use verdict_model::{Verdict, VerdictPolicy};

use super::model::{self, LoadedModel};
use super::tables;
use crate::cli::{
    EngineArgs, FeaturesArgs, LabelArgs, MergeArgs, ScanArgs, SelectArgs, TableArgs, VerdictArgs,
};
use crate::config;
use crate::progress::Progress;

/// What `scan` and `label` produced, for the caller's summary.
pub struct Outcome {
    /// Pair count per verdict: causal, non-causal, review.
    pub counts: [usize; 3],
    /// Variable names.
    pub names: Vec<String>,
    /// Pair records.
    pub records: Vec<PairRecord>,
    /// Their judgements.
    pub judgements: Vec<Judgement>,
}

pub fn scan(args: ScanArgs, quiet: bool) -> anyhow::Result<()> {
    if let Some(text) = &args.shard {
        let shard = ShardSpec::parse(text)?;
        return run_shard(&args, shard, quiet);
    }
    let outcome = run_scan(&args, quiet)?;
    print_summary(&outcome, &args.out, quiet);
    Ok(())
}

/// Name of the checkpoint folder inside a scan's output directory.
pub const CHECKPOINT_DIR: &str = ".checkpoint";

/// The input and everything fixed before the cross maps: what every shard repeats.
struct Prepared {
    settings: triage_pipeline::AnalysisSettings,
    table: series_io::SeriesTable,
    series: SeriesSet,
    embeddings: Vec<Embedding>,
    params: crossmap_engine::ValidParams,
    /// Identity of the run's work units (input checksum, settings, flags).
    manifest: StoreManifest,
    /// The ordered pairs chosen (every pair without --drivers or --responses).
    selection: triage_pipeline::ResolvedSelection,
}

/// Read the table, embed every variable and resolve the parameters; `recorded_path` is the
/// input path as written into the records (the path given to the first scan).
fn prepare(
    data: &Path,
    recorded_path: &str,
    table_args: &TableArgs,
    select: &SelectArgs,
    engine: &EngineArgs,
    shard: ShardSpec,
) -> anyhow::Result<Prepared> {
    let settings = config::analysis_settings(engine)?;
    let table = series_io::read_series(data, &config::read_options(table_args))?;
    for w in &table.warnings {
        eprintln!("warning: {}: {w}", data.display());
    }
    let series = SeriesSet {
        names: table.names.clone(),
        columns: table.columns.clone(),
    };
    let chosen = triage_pipeline::PairSelection {
        drivers: select.drivers.clone(),
        responses: select.responses.clone(),
    };
    let selection = chosen
        .resolve(&table.names)
        .map_err(|e| anyhow::anyhow!("{}: {e}", data.display()))?;
    let manifolds = (!chosen.is_all()).then(|| selection.manifolds());
    let mut units = shard.units(table.names.len());
    if let Some(m) = &manifolds {
        units.retain(|u| m.contains(u));
    }
    let context = || format!("cannot analyse {}", data.display());
    let embeddings =
        triage_pipeline::embed_all(&series, &settings.embedding).with_context(context)?;
    let params = triage_pipeline::validate_params(&series, &embeddings, &settings.crossmap)
        .with_context(context)?;
    let manifest = StoreManifest {
        format: units::UNITS_FORMAT.into(),
        version: units::UNITS_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        input: InputIdentity {
            path: recorded_path.to_string(),
            sha256: table.sha256.clone(),
            variables: table.names.clone(),
        },
        settings: settings_record(&settings, &params, &series.names),
        flags: serde_json::json!({
            "engine": engine,
            "time_column": table_args.time_column,
            "table": table_args,
            "select": select,
        }),
        shard,
        units,
        complete: false,
        manifolds,
    };
    Ok(Prepared {
        settings,
        table,
        series,
        embeddings,
        params,
        manifest,
        selection,
    })
}

/// Compute the manifest's units not yet in `store`, saving each as it finishes; returns all.
fn compute_units(
    store: &UnitStore,
    p: &Prepared,
    quiet: bool,
) -> anyhow::Result<BTreeMap<usize, Vec<PairEnsemble>>> {
    let mut done = store.begin(&p.manifest).with_context(|| {
        format!(
            "cannot resume from {} (delete that folder to start afresh)",
            store.path().display()
        )
    })?;
    let per_unit = p.series.names.len() - 1;
    let todo: Vec<usize> = p
        .manifest
        .units
        .iter()
        .copied()
        .filter(|u| !done.contains_key(u))
        .collect();
    let bar = Progress::new(
        quiet,
        (p.manifest.units.len() * per_unit) as u64,
        "cross maps",
    );
    let finished = AtomicUsize::new(done.len() * per_unit);
    let callback = bar.callback();
    callback(finished.load(Ordering::Relaxed));
    let fresh: Vec<(usize, Vec<PairEnsemble>)> = todo
        .par_iter()
        .map(|&unit| {
            let ensembles =
                triage_pipeline::cross_map_unit(&p.series, &p.embeddings, unit, &p.params);
            store.save_unit(unit, &p.manifest, &ensembles)?;
            callback(finished.fetch_add(ensembles.len(), Ordering::Relaxed) + ensembles.len());
            Ok((unit, ensembles))
        })
        .collect::<Result<_, units::UnitsError>>()?;
    drop(callback);
    bar.finish();
    done.extend(fresh);
    Ok(done)
}

/// The whole scan, writing every output file into `args.out`.
///
/// Each finished unit is checkpointed into `OUT/.checkpoint/`; rerunning the same command
/// after an interruption skips them. The folder is removed once run.json is written.
pub fn run_scan(args: &ScanArgs, quiet: bool) -> anyhow::Result<Outcome> {
    let started = Instant::now();
    let policy = policy(&args.verdict)?;
    let model = model::load(args.verdict.model.as_deref())?;
    let recorded = args.data.display().to_string();
    let prepared = prepare(
        &args.data,
        &recorded,
        &args.table,
        &args.select,
        &args.engine,
        ShardSpec::WHOLE,
    )?;
    check_budget(&prepared, &args.data, args.over_budget, true)?;
    let (out, _lock) = begin_output(
        &args.out,
        &inputs(&[Some(&args.data), args.verdict.model.as_deref()]),
    )?;
    let store = UnitStore::open(out.path().join(CHECKPOINT_DIR))?;
    let units = compute_units(&store, &prepared, quiet)?;
    let ensembles: Vec<PairEnsemble> = units.into_values().flatten().collect();
    let decisions = load_decisions(&args.verdict, &prepared.table.sha256)?;
    let outcome = finish(
        &out,
        &prepared,
        &ensembles,
        &args.engine,
        &policy,
        &model,
        "scan",
        None,
        started,
        decisions.as_ref(),
    )?;
    std::fs::remove_dir_all(store.path()).with_context(|| {
        format!(
            "cannot remove the finished checkpoint {}",
            store.path().display()
        )
    })?;
    Ok(outcome)
}

/// `scan --shard I/N`: this shard's units, embedding.csv and the manifest, into `args.out`.
fn run_shard(args: &ScanArgs, shard: ShardSpec, quiet: bool) -> anyhow::Result<()> {
    // Checked now so a bad flag fails before hours of work rather than at the merge.
    policy(&args.verdict)?;
    model::load(args.verdict.model.as_deref())?;
    let recorded = args.data.display().to_string();
    let prepared = prepare(
        &args.data,
        &recorded,
        &args.table,
        &args.select,
        &args.engine,
        shard,
    )?;
    check_budget(&prepared, &args.data, args.over_budget, true)?;
    let store = UnitStore::open(&args.out)?;
    let _lock = lock_folder(store.output())?;
    let store = store.protect_inputs(
        &inputs(&[Some(&args.data), args.verdict.model.as_deref()]),
        &["embedding.csv"],
    )?;
    let units = compute_units(&store, &prepared, quiet)?;
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
    let policy = policy(&args.verdict)?;
    let model = model::load(args.verdict.model.as_deref())?;
    let plan = units::plan_merge(&args.shards)?;
    let m = &plan.manifest;
    let engine: EngineArgs = serde_json::from_value(m.flags["engine"].clone())
        .context("the shard manifest's flags cannot be read; rerun the shards with this version")?;
    // Manifests from before the table flags hold only the time column.
    let table_args: TableArgs = match m.flags.get("table") {
        Some(v) => serde_json::from_value(v.clone())
            .context("the shard manifest's table flags cannot be read; rerun the shards")?,
        None => TableArgs {
            time_column: m.flags["time_column"].as_str().map(String::from),
            ..TableArgs::default()
        },
    };
    let data = args
        .data
        .clone()
        .unwrap_or_else(|| m.input.path.clone().into());
    let select: SelectArgs = match m.flags.get("select") {
        Some(v) => serde_json::from_value(v.clone())
            .context("the shard manifest's pair choice cannot be read; rerun the shards")?,
        None => SelectArgs::default(),
    };
    let prepared = prepare(
        &data,
        &m.input.path,
        &table_args,
        &select,
        &engine,
        ShardSpec::WHOLE,
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
    let mut read: Vec<&Path> = args.shards.iter().map(|d| d.as_path()).collect();
    read.push(&data);
    read.extend(args.verdict.model.as_deref());
    check_budget(&prepared, &data, args.over_budget, false)?;
    let (out, _lock) = begin_output(&args.out, &read)?;
    let ensembles = units::load_merge(&args.shards, &plan)?;
    let shards: Vec<String> = args
        .shards
        .iter()
        .map(|d| d.display().to_string())
        .collect();
    let decisions = load_decisions(&args.verdict, &prepared.table.sha256)?;
    let outcome = finish(
        &out,
        &prepared,
        &ensembles,
        &engine,
        &policy,
        &model,
        "merge",
        Some(serde_json::json!(shards)),
        started,
        decisions.as_ref(),
    )?;
    print_summary(&outcome, &args.out, quiet);
    Ok(())
}

/// The output directory, without a run.json from an earlier run: until this run writes its
/// own run.json last, nothing in the folder looks complete.
///
/// `inputs` are the files and folders the run reads: no result file may replace one of them,
/// which is checked here, before any work.
///
/// The folder is locked first: a second run into it is refused at once, naming the run that
/// holds it. The lock lives as long as the returned guard.
fn begin_output(dir: &Path, inputs: &[&Path]) -> anyhow::Result<(OutputDir, DirLock)> {
    let out = OutputDir::create(dir)?;
    let lock = lock_folder(&out)?;
    let out = out.protect_inputs(inputs, RESULT_FILES)?;
    let old = out.path().join("run.json");
    if old.exists() {
        std::fs::remove_file(&old).with_context(|| format!("cannot replace {}", old.display()))?;
    }
    Ok((out, lock))
}

/// Lock an output folder for this run; a lock left by a run that died is taken over with a
/// note on stderr.
pub(crate) fn lock_folder(out: &OutputDir) -> anyhow::Result<DirLock> {
    let lock = DirLock::acquire(out.path())?;
    if let Some(old) = lock.taken_over() {
        eprintln!(
            "note: {} was locked by {old}, which is no longer running; this run takes it over",
            out.path().display()
        );
    }
    Ok(lock)
}

/// Largest number of ordered pairs one process computes without `--over-budget`.
pub const BUDGET_PAIRS: u64 = 100_000;
/// Largest estimated peak memory without `--over-budget` (8 GiB).
pub const BUDGET_MEMORY: f64 = 8.0 * 1024.0 * 1024.0 * 1024.0;
/// Largest estimated checkpoint without `--over-budget` (4 GiB).
pub const BUDGET_CHECKPOINT: f64 = 4.0 * 1024.0 * 1024.0 * 1024.0;

/// Estimate this process's work, print it on stderr, and refuse it above the budget unless
/// `over_budget`; `computes` is false for a merge, which reads the units instead.
fn check_budget(
    p: &Prepared,
    data: &Path,
    over_budget: bool,
    computes: bool,
) -> anyhow::Result<()> {
    let threads = rayon::current_num_threads();
    let units: &[usize] = &p.manifest.units;
    let mut w = triage_pipeline::WorkEstimate::of_units(units, &p.embeddings, &p.params, threads);
    if !computes {
        let all: Vec<usize> = (0..p.series.names.len()).collect();
        w = triage_pipeline::WorkEstimate::of_units(&all, &p.embeddings, &p.params, threads);
        w.seconds = 0.0;
        w.checkpoint = 0.0;
    }
    if computes {
        eprintln!(
            "work: {} variables x {} rows: {w}",
            p.series.names.len(),
            p.table.n_rows()
        );
    } else {
        eprintln!(
            "work: {} variables x {} rows: {} ordered pairs to merge, peak memory about {}",
            p.series.names.len(),
            p.table.n_rows(),
            w.pairs,
            triage_pipeline::estimate::bytes(w.peak_memory)
        );
    }
    let mut over = Vec::new();
    if w.pairs > BUDGET_PAIRS {
        over.push(format!("{} pairs > {BUDGET_PAIRS}", w.pairs));
    }
    if w.peak_memory > BUDGET_MEMORY {
        over.push(format!(
            "memory {} > {}",
            triage_pipeline::estimate::bytes(w.peak_memory),
            triage_pipeline::estimate::bytes(BUDGET_MEMORY)
        ));
    }
    if w.checkpoint > BUDGET_CHECKPOINT {
        over.push(format!(
            "checkpoint {} > {}",
            triage_pipeline::estimate::bytes(w.checkpoint),
            triage_pipeline::estimate::bytes(BUDGET_CHECKPOINT)
        ));
    }
    if over.is_empty() || over_budget {
        return Ok(());
    }
    bail!(
        "{}: the estimated work is above the budget of one process ({}). Ways out: analyse fewer \
         variables (a table with only the columns of interest, or --drivers and --responses), fewer --replicates, --sizes or \
         --surrogates, split the work into shards on a cluster (--shard I/N, each shard is \
         budgeted alone; see scripts/slurm-array.sh), or pass --over-budget to run it anyway",
        data.display(),
        over.join(", ")
    )
}

/// Every file a labelling run may write into its output directory.
const RESULT_FILES: &[&str] = &[
    "curves.csv",
    "embedding.csv",
    "lags.csv",
    "surrogates.csv",
    "features.csv",
    "labels.csv",
    "report.html",
    "run.json",
];

/// The paths given, without the absent ones.
fn inputs<'a>(paths: &[Option<&'a Path>]) -> Vec<&'a Path> {
    paths.iter().flatten().copied().collect()
}

/// Stages 3 and 4 (assemble, judge) and every result file, the same for scan and merge.
#[allow(clippy::too_many_arguments)]
fn finish(
    out: &OutputDir,
    p: &Prepared,
    ensembles: &[PairEnsemble],
    engine: &EngineArgs,
    policy: &VerdictPolicy,
    model: &LoadedModel,
    command: &str,
    shards: Option<serde_json::Value>,
    started: Instant,
    decisions: Option<&series_io::DecisionFile>,
) -> anyhow::Result<Outcome> {
    let mut pairs = triage_pipeline::assemble(&p.series, &p.embeddings, ensembles, &p.settings);
    // The computed manifolds also give pairs outside the choice (their targets); only the
    // chosen pairs are labelled and written.
    pairs.retain(|rec| p.selection.contains(rec.driver, rec.response));
    let judgements = judge(&pairs, &model.bundle, policy)?;
    let table = &p.table;
    let mut run = serde_json::json!({
        "tool": "ccm-triage",
        "version": env!("CARGO_PKG_VERSION"),
        "command": command,
        "input": {
            "path": p.manifest.input.path,
            "sha256": table.sha256,
            "rows": table.n_rows(),
            "time_column": table.time_column,
            "time_axis": time_axis_record(table),
            "warnings": table.warnings,
            "series": table.names,
            "missing_cells": table.missing,
            "missing_cells_total": table.total_missing(),
        },
        "settings": p.manifest.settings,
        "embedding": embedding_record(&p.series.names, &p.embeddings),
        "cycles": cycles_record(&p.series, &p.settings),
        "model": model_record(model),
        "review_band": [policy.band.0, policy.band.1],
        "feature_schema": {"version": ensemble_features::SCHEMA_VERSION, "hash": ensemble_features::schema_hash()},
        "pairs": pairs.len(),
        "selection": {
            "drivers": p.manifest.flags["select"]["drivers"],
            "responses": p.manifest.flags["select"]["responses"],
            "manifolds": p.manifest.manifolds.as_ref().map(|m| {
                m.iter().map(|&k| p.series.names[k].clone()).collect::<Vec<_>>()
            }),
        },
        "timing": {"seconds": started.elapsed().as_secs_f64(), "threads": rayon::current_num_threads()},
    });
    if let Some(shards) = shards {
        run["shards"] = shards;
    }
    let facts = RunFacts {
        input_name: file_name(Path::new(&p.manifest.input.path)),
        input_sha256: Some(table.sha256.clone()),
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        model_identity: model.identity_line(),
        params: display_params(engine, policy),
        notes: missing_notes(&table.names, &table.missing, &p.embeddings),
    };
    if let Some(path) = &decisions_record(decisions) {
        run["decisions"] = path.clone();
    }
    write_results(
        out,
        &p.series.names,
        &p.embeddings,
        &pairs,
        &judgements,
        &facts,
        &run,
        decisions,
    )?;
    Ok(outcome(p.series.names.clone(), pairs, judgements))
}

pub fn label(args: LabelArgs, quiet: bool) -> anyhow::Result<()> {
    let started = Instant::now();
    let policy = policy(&args.verdict)?;
    let model = model::load(args.verdict.model.as_deref())?;
    let (names, records) = curve_records(&args.curves)?;
    let judgements = judge(&records, &model.bundle, &policy)?;
    let out = OutputDir::create(&args.out)?;
    let _lock = lock_folder(&out)?;
    let out = out.protect_inputs(
        &inputs(&[Some(&args.curves), args.verdict.model.as_deref()]),
        RESULT_FILES,
    )?;
    let sha = series_io::checksum::sha256_file(&args.curves)
        .with_context(|| format!("cannot read {}", args.curves.display()))?;
    let decisions = load_decisions(&args.verdict, &sha)?;
    let mut run = serde_json::json!({
        "tool": "ccm-triage",
        "version": env!("CARGO_PKG_VERSION"),
        "command": "label",
        "input": {"path": args.curves.display().to_string(), "sha256": sha},
        "model": model_record(&model),
        "review_band": [policy.band.0, policy.band.1],
        "feature_schema": {"version": ensemble_features::SCHEMA_VERSION, "hash": ensemble_features::schema_hash()},
        "pairs": records.len(),
        "timing": {"seconds": started.elapsed().as_secs_f64()},
    });
    let facts = RunFacts {
        input_name: file_name(&args.curves),
        input_sha256: Some(sha),
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        model_identity: model.identity_line(),
        params: vec![(
            "review band".into(),
            format!("{} to {}", policy.band.0, policy.band.1),
        )],
        notes: vec![
            "Ensembles were computed elsewhere: only curve-shape features are available, so the \
             curve-only model head scored these pairs (no lag profile, surrogates or series context)."
                .into(),
        ],
    };
    if let Some(v) = decisions_record(decisions.as_ref()) {
        run["decisions"] = v;
    }
    write_results(
        &out,
        &names,
        &[],
        &records,
        &judgements,
        &facts,
        &run,
        decisions.as_ref(),
    )?;
    print_summary(&outcome(names, records, judgements), &args.out, quiet);
    Ok(())
}

pub fn features(args: FeaturesArgs) -> anyhow::Result<()> {
    let (names, records) = curve_records(&args.curves)?;
    let out = OutputDir::create(&args.out)?;
    let _lock = lock_folder(&out)?;
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

/// Pair records from a curves table; the reverse direction is the (response, driver) rows.
fn curve_records(path: &Path) -> anyhow::Result<(Vec<String>, Vec<PairRecord>)> {
    let pairs = series_io::read_curve_pairs(path)?;
    let mut names: Vec<String> = Vec::new();
    let index = |n: &str, names: &mut Vec<String>| match names.iter().position(|x| x == n) {
        Some(k) => k,
        None => {
            names.push(n.to_string());
            names.len() - 1
        }
    };
    let mut ensembles = Vec::with_capacity(pairs.len());
    for p in pairs {
        let d = index(&p.driver, &mut names);
        let r = index(&p.response, &mut names);
        let e = Ensemble {
            library_sizes: p.library_sizes,
            skills: p.skills,
        };
        e.validate().with_context(|| {
            format!(
                "{}: pair {} -> {} cannot be used; fix its rows in the file",
                path.display(),
                p.driver,
                p.response
            )
        })?;
        ensembles.push((d, r, e));
    }
    Ok((
        names,
        assemble_curves(&ensembles, &QualityThresholds::default()),
    ))
}

/// Every result file of a labelling run, each written atomically.
#[allow(clippy::too_many_arguments)]
fn write_results(
    out: &OutputDir,
    names: &[String],
    embeddings: &[Embedding],
    records: &[PairRecord],
    judgements: &[Judgement],
    facts: &RunFacts,
    run: &serde_json::Value,
    decisions: Option<&series_io::DecisionFile>,
) -> anyhow::Result<()> {
    // The CSV files carry spreadsheet-safe names; the report shows them as given.
    let csv_names = tables::spreadsheet_safe(names);
    let names_given = names;
    let names = &csv_names[..];
    out.export(&tables::curves(names, records))?;
    if !embeddings.is_empty() {
        out.export(&tables::embedding(names, embeddings))?;
        out.export(&tables::lags(names, records))?;
        out.export(&tables::surrogates(names, records))?;
    }
    out.export(&tables::features(names, records))?;
    let labels = tables::labels(names, records, judgements);
    let mut view = report_view(facts, names_given, embeddings, records, judgements);
    match decisions {
        Some(d) => {
            out.export(&tables::with_decisions(labels, d))?;
            // The report shows the names as given; the file holds them as the CSVs write them.
            for (pair, rec) in view.pairs.iter_mut().zip(records) {
                pair.decision = d.get(&names[rec.driver], &names[rec.response]).map(|r| {
                    review_report::GivenDecision {
                        decision: r.decision.as_str().into(),
                        note: r.note.clone(),
                        reviewer: r.reviewer.clone(),
                        decided_at: r.decided_at.clone(),
                    }
                });
            }
        }
        None => {
            out.export(&labels)?;
        }
    }
    let html = review_report::render_html(&view)?;
    out.export(&TextDocument {
        name: "report.html".into(),
        text: html,
    })?;
    // run.json last: its presence marks a complete run.
    out.export(&JsonDocument {
        name: "run.json".into(),
        value: run,
    })?;
    Ok(())
}

/// Read `--decisions`, refusing a file made on another input than `input_sha256`.
fn load_decisions(
    args: &VerdictArgs,
    input_sha256: &str,
) -> anyhow::Result<Option<series_io::DecisionFile>> {
    let Some(path) = &args.decisions else {
        return Ok(None);
    };
    let d = series_io::read_decisions(path)?;
    if d.input_sha256 != input_sha256 {
        bail!(
            "{}: these decisions were made on another input (its sha256 is {}, this run's input \
             has {}); give the decisions exported from a report of this same input",
            path.display(),
            d.input_sha256,
            input_sha256
        );
    }
    Ok(Some(d))
}

/// What run.json records about the decisions shown beside the verdicts.
fn decisions_record(d: Option<&series_io::DecisionFile>) -> Option<serde_json::Value> {
    d.map(|d| {
        let count = |k: series_io::Decision| d.rows.iter().filter(|r| r.decision == k).count();
        serde_json::json!({
            "rows": d.rows.len(),
            "causal": count(series_io::Decision::Causal),
            "non_causal": count(series_io::Decision::NonCausal),
            "unsure": count(series_io::Decision::Unsure),
        })
    })
}

fn outcome(names: Vec<String>, records: Vec<PairRecord>, judgements: Vec<Judgement>) -> Outcome {
    let mut counts = [0; 3];
    for j in &judgements {
        counts[match j.verdict {
            Verdict::Causal => 0,
            Verdict::NonCausal => 1,
            Verdict::Review => 2,
        }] += 1;
    }
    Outcome {
        counts,
        names,
        records,
        judgements,
    }
}

/// The verdict table (unless `quiet`), the counts, where the files are, and the caution.
fn print_summary(o: &Outcome, out: &Path, quiet: bool) {
    if !quiet {
        let rows = triage_pipeline::table_rows(&o.names, &o.records, &o.judgements);
        print!(
            "{}",
            review_report::verdict_table(&rows, &review_report::TableOptions::default())
        );
    }
    println!(
        "{} pairs: {} causal, {} non-causal, {} to review",
        o.records.len(),
        o.counts[0],
        o.counts[1],
        o.counts[2]
    );
    println!("report: {}", out.join("report.html").display());
    println!("labels: {}", out.join("labels.csv").display());
    println!("{}", CAUTION_LINE);
}

/// One-line form of the caution printed after every labelling run.
pub const CAUTION_LINE: &str = "caution: a label is evidence from one method under its assumptions, \
not proof of causation; confirm with domain knowledge and experiments.";

fn policy(args: &VerdictArgs) -> anyhow::Result<VerdictPolicy> {
    let band = config::parse_band(&args.review_band)?;
    Ok(VerdictPolicy {
        band,
        ..VerdictPolicy::default()
    })
}

fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.display().to_string())
}

pub fn model_record(model: &LoadedModel) -> serde_json::Value {
    serde_json::json!({
        "source": model.source,
        "sha256": model.sha256,
        "training_spec": {"name": model.bundle.spec.name, "hash": model.bundle.spec.hash},
        "schema_hash": model.bundle.schema_hash,
    })
}

/// The resolved settings (what validation made of the flags), for run.json.
pub fn settings_record(
    settings: &triage_pipeline::AnalysisSettings,
    params: &crossmap_engine::ValidParams,
    names: &[String],
) -> serde_json::Value {
    let plans: Vec<serde_json::Value> = names
        .iter()
        .zip(&params.plans)
        .map(|(n, p)| {
            serde_json::json!({
                "response": n, "usable_vectors": p.usable, "library_sizes": p.library_sizes,
                "theiler_window": p.theiler, "max_lag": p.max_lag,
            })
        })
        .collect();
    let mut record = analysis_settings_json(settings);
    record["n_points"] = serde_json::json!(params.n_points);
    record["per_response"] = serde_json::json!(plans);
    record
}

/// The analysis settings as given (before validation against any data).
pub fn analysis_settings_json(settings: &triage_pipeline::AnalysisSettings) -> serde_json::Value {
    let c = &settings.crossmap;
    serde_json::json!({
        "seed": c.seed,
        "embedding": {
            "dim": settings.embedding.e,
            "max_dim": settings.embedding.max_e,
            "delay": settings.embedding.tau,
            "theiler_window": settings.embedding.theiler,
        },
        "library_sizes": match &c.library_sizes {
            crossmap_engine::LibrarySizes::Auto { count } => serde_json::json!({"log_spaced_count": count}),
            crossmap_engine::LibrarySizes::Explicit(v) => serde_json::json!(v),
        },
        "replicates": c.replicates,
        "theiler_window": c.theiler,
        "max_lag": c.max_lag,
        "surrogates": c.surrogates,
        "period": c.period,
        "seasonal_surrogates": c.seasonal,
        "quality_thresholds": {
            "min_largest_library": settings.quality.min_largest_library,
            "min_self_forecast": settings.quality.min_self_forecast,
            "converged_skill": settings.quality.converged_skill,
        },
    })
}

/// Each variable's dominant cycle as the seasonal surrogates used it (strength 0: no season).
fn cycles_record(
    series: &triage_pipeline::SeriesSet,
    settings: &triage_pipeline::AnalysisSettings,
) -> serde_json::Value {
    series
        .names
        .iter()
        .zip(triage_pipeline::cycles(series, settings.crossmap.period))
        .map(|(n, c)| {
            serde_json::json!({
                "variable": n,
                "period": c.map(|c| c.period),
                "strength": c.map(|c| c.strength),
                "season": c.is_some_and(|c| c.has_cycle()) && settings.crossmap.seasonal,
            })
        })
        .collect()
}

/// The time axis as found: kind, first and last time, usual step, uneven and filled steps.
fn time_axis_record(table: &series_io::SeriesTable) -> serde_json::Value {
    table
        .time_axis
        .as_ref()
        .map_or(serde_json::Value::Null, |a| {
            serde_json::json!({
                "column": a.column, "kind": a.kind.as_str(), "first": a.first, "last": a.last,
                "step": a.step, "uneven_steps": a.uneven_steps, "filled_rows": a.filled_rows,
            })
        })
}

fn embedding_record(names: &[String], embeddings: &[Embedding]) -> serde_json::Value {
    names
        .iter()
        .zip(embeddings)
        .map(|(n, e)| {
            serde_json::json!({
                "variable": n, "E": e.e, "tau": e.tau, "simplex_skill": e.simplex_skill,
                "skill_by_E": e.skill_by_e, "vectors_excluded": e.vectors_excluded,
            })
        })
        .collect()
}

fn display_params(e: &crate::cli::EngineArgs, policy: &VerdictPolicy) -> Vec<(String, String)> {
    let auto = |v: Option<usize>| v.map_or("chosen per variable".to_string(), |x| x.to_string());
    vec![
        ("seed".into(), e.seed.to_string()),
        ("embedding dimension".into(), auto(e.dim)),
        ("largest dimension tried".into(), e.max_dim.to_string()),
        ("delay".into(), auto(e.delay)),
        ("library sizes".into(), e.sizes.clone()),
        ("replicates per size".into(), e.replicates.to_string()),
        ("Theiler window".into(), auto(e.theiler_window)),
        ("largest cross-map lag".into(), auto(e.max_lag)),
        (
            "surrogates per pair".into(),
            format!(
                "{} phase-randomised + {} seasonal",
                e.surrogates, e.surrogates
            ),
        ),
        (
            "seasonal period".into(),
            e.period
                .map_or("each variable's dominant cycle".into(), |p| {
                    format!("{p} steps")
                }),
        ),
        (
            "review band".into(),
            format!("{} to {}", policy.band.0, policy.band.1),
        ),
    ]
}

fn missing_notes(names: &[String], missing: &[usize], embeddings: &[Embedding]) -> Vec<String> {
    let mut notes = Vec::new();
    for ((n, m), e) in names.iter().zip(missing).zip(embeddings) {
        if *m > 0 {
            notes.push(format!(
                "{n}: {m} missing cells; {} delay vectors touching them were left out",
                e.vectors_excluded
            ));
        }
    }
    notes
}
