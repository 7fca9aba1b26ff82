//! One labelling run from input to result files, shared by the command line (`scan`, `merge`,
//! resume, `label`) and the Python module.
//!
//! The stages: [`prepare`] (read the table, embed every variable, resolve the parameters) →
//! [`compute_units`] (all work units, one shard's, or those missing from a checkpoint) →
//! [`finish`] (assemble, judge, the run record) → [`write_results`] (every result file, run.json
//! last). Around them: the output folder's lock and input protection ([`begin_output`]) and the
//! work estimate ([`check_budget`]).
//!
//! Progress, notes and interruption go through an [`Observer`], so the caller decides how to
//! show them (a terminal bar, a Python callback) and when to stop.

use std::collections::BTreeMap;
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Instant;

use anyhow::{Context, bail};
use crossmap_engine::{Embedding, PairEnsemble};
use ensemble_features::Ensemble;
use rayon::prelude::*;
use series_io::{DirLock, JsonDocument, OutputDir, ReadOptions, SeriesTable, TextDocument};
use verdict_model::{Verdict, VerdictPolicy};

use crate::model_source::{LoadedModel, model_record};
use crate::settings::{EngineSettings, analysis_settings_json};
use crate::tables;
use crate::units::{self, InputIdentity, ShardSpec, StoreManifest, UnitStore};
use crate::{
    AnalysisSettings, CycleFact, Judgement, PairRecord, QualityThresholds, RunFacts, SeriesSet,
    assemble_curves, cycle_facts, judge, report_view,
};

/// Version written into run.json and manifests as the tool's version.
pub const TOOL_VERSION: &str = env!("CARGO_PKG_VERSION");

/// Name of the checkpoint folder inside a scan's output directory.
pub const CHECKPOINT_DIR: &str = ".checkpoint";

/// Largest number of ordered pairs one process computes without `--over-budget`.
pub const BUDGET_PAIRS: u64 = 100_000;
/// Largest estimated peak memory without `--over-budget` (8 GiB).
pub const BUDGET_MEMORY: f64 = 8.0 * 1024.0 * 1024.0 * 1024.0;
/// Largest estimated checkpoint without `--over-budget` (4 GiB).
pub const BUDGET_CHECKPOINT: f64 = 4.0 * 1024.0 * 1024.0 * 1024.0;

/// Every file a labelling run may write into its output directory.
pub const RESULT_FILES: &[&str] = &[
    "curves.csv",
    "embedding.csv",
    "lags.csv",
    "surrogates.csv",
    "features.csv",
    "labels.csv",
    "report.html",
    "run.json",
];

/// How a run shows progress and notes, and learns that it should stop.
///
/// Every method has a do-nothing default; [`Silent`] uses them all.
pub trait Observer: Sync {
    /// A counted stage begins: `total` steps of `what`.
    fn begin(&self, what: &str, total: u64) {
        let _ = (what, total);
    }
    /// `done` steps of the current stage are finished.
    fn advance(&self, done: u64) {
        let _ = done;
    }
    /// The current stage is over.
    fn end(&self) {}
    /// A line for the user (the command line prints it on stderr).
    fn note(&self, text: &str) {
        let _ = text;
    }
    /// True once the run should stop; checked before each work unit.
    fn cancelled(&self) -> bool {
        false
    }
}

/// An observer that shows nothing and never stops a run.
pub struct Silent;

impl Observer for Silent {}

/// The error of a run stopped because its [`Observer`] asked for it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
#[error("the run was interrupted before it finished; nothing was written")]
pub struct Cancelled;

/// The input and everything fixed before the cross maps: what every shard repeats.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// The analysis settings.
    pub settings: AnalysisSettings,
    /// The options they came from.
    pub engine: EngineSettings,
    /// The input table.
    pub table: SeriesTable,
    /// Its series.
    pub series: SeriesSet,
    /// Each variable's embedding.
    pub embeddings: Vec<Embedding>,
    /// The validated cross-map parameters.
    pub params: crossmap_engine::ValidParams,
    /// Identity of the run's work units (input checksum, settings, options).
    pub manifest: StoreManifest,
}

/// Options of reading a series table: the named time column, if any.
pub fn read_options(time_column: Option<&str>) -> ReadOptions {
    let mut opts = ReadOptions::default();
    if let Some(t) = time_column {
        opts = opts.with_time_column(t.to_string());
    }
    opts
}

/// Read the table at `data`, then [`prepare_table`] it.
pub fn prepare(
    data: &Path,
    recorded_path: &str,
    time_column: Option<&str>,
    engine: &EngineSettings,
    shard: ShardSpec,
) -> anyhow::Result<Prepared> {
    // Checked before the table is read, as the options come first.
    engine.analysis_settings()?;
    let table = series_io::read_series(data, &read_options(time_column))?;
    prepare_table(
        table,
        &data.display().to_string(),
        recorded_path,
        time_column,
        engine,
        shard,
    )
}

/// Embed every variable of `table` and resolve the parameters; `source` names the table in
/// messages and `recorded_path` is the input path as written into the records.
pub fn prepare_table(
    table: SeriesTable,
    source: &str,
    recorded_path: &str,
    time_column: Option<&str>,
    engine: &EngineSettings,
    shard: ShardSpec,
) -> anyhow::Result<Prepared> {
    let settings = engine.analysis_settings()?;
    let series = SeriesSet {
        names: table.names.clone(),
        columns: table.columns.clone(),
    };
    let context = || format!("cannot analyse {source}");
    let embeddings = crate::embed_all(&series, &settings.embedding).with_context(context)?;
    let params =
        crate::validate_params(&series, &embeddings, &settings.crossmap).with_context(context)?;
    let manifest = StoreManifest {
        format: units::UNITS_FORMAT.into(),
        version: units::UNITS_VERSION,
        tool_version: TOOL_VERSION.into(),
        input: InputIdentity {
            path: recorded_path.to_string(),
            sha256: table.sha256.clone(),
            variables: table.names.clone(),
        },
        settings: settings_record(&settings, &params, &series.names),
        flags: serde_json::json!({"engine": engine, "time_column": time_column}),
        shard,
        units: shard.units(series.names.len()),
        complete: false,
    };
    Ok(Prepared {
        settings,
        engine: engine.clone(),
        table,
        series,
        embeddings,
        params,
        manifest,
    })
}

/// The options a shard manifest recorded: the engine settings and the time column.
pub fn recorded_options(
    manifest: &StoreManifest,
) -> anyhow::Result<(EngineSettings, Option<String>)> {
    let engine: EngineSettings = serde_json::from_value(manifest.flags["engine"].clone())
        .context("the shard manifest's flags cannot be read; rerun the shards with this version")?;
    let time_column = manifest.flags["time_column"].as_str().map(String::from);
    Ok((engine, time_column))
}

/// Compute the manifest's units, skipping and keeping those already in `store` and saving
/// each new one there as it finishes (no store: all in memory); returns all of them.
///
/// Stops with [`Cancelled`] when the observer asks for it; finished units stay in the store.
pub fn compute_units(
    store: Option<&UnitStore>,
    p: &Prepared,
    observer: &dyn Observer,
) -> anyhow::Result<BTreeMap<usize, Vec<PairEnsemble>>> {
    let mut done = match store {
        Some(store) => store.begin(&p.manifest).with_context(|| {
            format!(
                "cannot resume from {} (delete that folder to start afresh)",
                store.path().display()
            )
        })?,
        None => BTreeMap::new(),
    };
    let per_unit = p.series.names.len() - 1;
    let todo: Vec<usize> = p
        .manifest
        .units
        .iter()
        .copied()
        .filter(|u| !done.contains_key(u))
        .collect();
    observer.begin("cross maps", (p.manifest.units.len() * per_unit) as u64);
    let finished = AtomicUsize::new(done.len() * per_unit);
    observer.advance(finished.load(Ordering::Relaxed) as u64);
    let fresh: anyhow::Result<Vec<(usize, Vec<PairEnsemble>)>> = todo
        .par_iter()
        .map(|&unit| {
            if observer.cancelled() {
                return Err(Cancelled.into());
            }
            let ensembles = crate::cross_map_unit(&p.series, &p.embeddings, unit, &p.params);
            if let Some(store) = store {
                store.save_unit(unit, &p.manifest, &ensembles)?;
            }
            let n = finished.fetch_add(ensembles.len(), Ordering::Relaxed) + ensembles.len();
            observer.advance(n as u64);
            Ok((unit, ensembles))
        })
        .collect();
    observer.end();
    done.extend(fresh?);
    Ok(done)
}

/// The output directory, without a run.json from an earlier run: until this run writes its
/// own run.json last, nothing in the folder looks complete.
///
/// `inputs` are the files and folders the run reads: no result file may replace one of them,
/// which is checked here, before any work.
///
/// The folder is locked first: a second run into it is refused at once, naming the run that
/// holds it. The lock lives as long as the returned guard.
pub fn begin_output(
    dir: &Path,
    inputs: &[&Path],
    observer: &dyn Observer,
) -> anyhow::Result<(OutputDir, DirLock)> {
    let out = OutputDir::create(dir)?;
    let lock = lock_folder(&out, observer)?;
    let out = out.protect_inputs(inputs, RESULT_FILES)?;
    let old = out.path().join("run.json");
    if old.exists() {
        std::fs::remove_file(&old).with_context(|| format!("cannot replace {}", old.display()))?;
    }
    Ok((out, lock))
}

/// Lock an output folder for this run; a lock left by a run that died is taken over with a
/// note.
pub fn lock_folder(out: &OutputDir, observer: &dyn Observer) -> anyhow::Result<DirLock> {
    let lock = DirLock::acquire(out.path())?;
    if let Some(old) = lock.taken_over() {
        observer.note(&format!(
            "note: {} was locked by {old}, which is no longer running; this run takes it over",
            out.path().display()
        ));
    }
    Ok(lock)
}

/// Estimate this process's work, tell it as a note, and refuse it above the budget unless
/// `over_budget`; `computes` is false for a merge, which reads the units instead. `data`
/// names the input in the refusal.
pub fn check_budget(
    p: &Prepared,
    data: &str,
    over_budget: bool,
    computes: bool,
    observer: &dyn Observer,
) -> anyhow::Result<()> {
    use crate::estimate::{WorkEstimate, bytes};
    let threads = rayon::current_num_threads();
    let units: &[usize] = &p.manifest.units;
    let mut w = WorkEstimate::of_units(units, &p.embeddings, &p.params, threads);
    if !computes {
        let all: Vec<usize> = (0..p.series.names.len()).collect();
        w = WorkEstimate::of_units(&all, &p.embeddings, &p.params, threads);
        w.seconds = 0.0;
        w.checkpoint = 0.0;
    }
    if computes {
        observer.note(&format!(
            "work: {} variables x {} rows: {w}",
            p.series.names.len(),
            p.table.n_rows()
        ));
    } else {
        observer.note(&format!(
            "work: {} variables x {} rows: {} ordered pairs to merge, peak memory about {}",
            p.series.names.len(),
            p.table.n_rows(),
            w.pairs,
            bytes(w.peak_memory)
        ));
    }
    let mut over = Vec::new();
    if w.pairs > BUDGET_PAIRS {
        over.push(format!("{} pairs > {BUDGET_PAIRS}", w.pairs));
    }
    if w.peak_memory > BUDGET_MEMORY {
        over.push(format!(
            "memory {} > {}",
            bytes(w.peak_memory),
            bytes(BUDGET_MEMORY)
        ));
    }
    if w.checkpoint > BUDGET_CHECKPOINT {
        over.push(format!(
            "checkpoint {} > {}",
            bytes(w.checkpoint),
            bytes(BUDGET_CHECKPOINT)
        ));
    }
    if over.is_empty() || over_budget {
        return Ok(());
    }
    bail!(
        "{data}: the estimated work is above the budget of one process ({}). Ways out: analyse fewer \
         variables (a table with only the columns of interest), fewer --replicates, --sizes or \
         --surrogates, split the work into shards on a cluster (--shard I/N, each shard is \
         budgeted alone; see scripts/slurm-array.sh), or pass --over-budget to run it anyway",
        over.join(", ")
    )
}

/// A finished labelling run: everything its result files hold.
#[derive(Debug, Clone)]
pub struct Finished {
    /// Variable names as given.
    pub names: Vec<String>,
    /// Each variable's embedding (empty for ensembles computed elsewhere).
    pub embeddings: Vec<Embedding>,
    /// Pair records.
    pub records: Vec<PairRecord>,
    /// Their judgements.
    pub judgements: Vec<Judgement>,
    /// What the report says about the run.
    pub facts: RunFacts,
    /// The run record (run.json).
    pub run: serde_json::Value,
}

impl Finished {
    /// Pair count per verdict: causal, non-causal, review.
    pub fn counts(&self) -> [usize; 3] {
        let mut counts = [0; 3];
        for j in &self.judgements {
            counts[match j.verdict {
                Verdict::Causal => 0,
                Verdict::NonCausal => 1,
                Verdict::Review => 2,
            }] += 1;
        }
        counts
    }

    /// The names as the CSV files carry them ([`tables::spreadsheet_safe`]).
    pub fn csv_names(&self) -> Vec<String> {
        tables::spreadsheet_safe(&self.names)
    }

    /// The CSV result files this run writes, in writing order, by name (curves.csv formatted
    /// row by row while written).
    pub fn tables<'a>(&'a self, csv_names: &'a [String]) -> Vec<Box<dyn series_io::Export + 'a>> {
        let names = csv_names;
        let mut files: Vec<Box<dyn series_io::Export + 'a>> =
            vec![Box::new(tables::curves(names, &self.records))];
        if !self.embeddings.is_empty() {
            files.push(Box::new(tables::embedding(names, &self.embeddings)));
            files.push(Box::new(tables::lags(names, &self.records)));
            files.push(Box::new(tables::surrogates(names, &self.records)));
        }
        files.push(Box::new(tables::features(names, &self.records)));
        files.push(Box::new(tables::labels(
            names,
            &self.records,
            &self.judgements,
        )));
        files
    }

    /// The review report (report.html).
    pub fn report_html(&self) -> anyhow::Result<String> {
        let view = report_view(
            &self.facts,
            &self.names,
            &self.embeddings,
            &self.records,
            &self.judgements,
        );
        Ok(review_report::render_html(&view)?)
    }
}

/// Stages 3 and 4 (assemble, judge) and the run record, the same for scan and merge;
/// `command` and `shards` are recorded in run.json.
pub fn finish(
    p: &Prepared,
    ensembles: &[PairEnsemble],
    policy: &VerdictPolicy,
    model: &LoadedModel,
    command: &str,
    shards: Option<serde_json::Value>,
    started: Instant,
) -> anyhow::Result<Finished> {
    let pairs = crate::assemble(&p.series, &p.embeddings, ensembles, &p.settings);
    let judgements = judge(&pairs, &model.bundle, policy)?;
    let table = &p.table;
    let cycles = cycle_facts(&p.series, &p.settings);
    let mut run = serde_json::json!({
        "tool": "ccm-triage",
        "version": TOOL_VERSION,
        "command": command,
        "input": {
            "path": p.manifest.input.path,
            "sha256": table.sha256,
            "rows": table.n_rows(),
            "time_column": table.time_column,
            "series": table.names,
            "missing_cells": table.missing,
            "missing_cells_total": table.total_missing(),
        },
        "settings": p.manifest.settings,
        "embedding": embedding_record(&p.series.names, &p.embeddings),
        "cycles": cycles_record(&p.series.names, &cycles),
        "model": model_record(model),
        "review_band": [policy.band.0, policy.band.1],
        "feature_schema": {"version": ensemble_features::SCHEMA_VERSION, "hash": ensemble_features::schema_hash()},
        "pairs": pairs.len(),
        "timing": {"seconds": started.elapsed().as_secs_f64(), "threads": rayon::current_num_threads()},
    });
    if let Some(shards) = shards {
        run["shards"] = shards;
    }
    let facts = RunFacts {
        input_name: file_name(Path::new(&p.manifest.input.path)),
        input_sha256: Some(table.sha256.clone()),
        tool_version: TOOL_VERSION.to_string(),
        model_identity: model.identity_line(),
        params: p.engine.display(policy),
        notes: missing_notes(&table.names, &table.missing, &p.embeddings),
        cycles,
    };
    Ok(Finished {
        names: p.series.names.clone(),
        embeddings: p.embeddings.clone(),
        records: pairs,
        judgements,
        facts,
        run,
    })
}

/// A whole scan in memory, without checkpoint or files: prepare (already done), budget,
/// compute, finish. `data` names the input in messages.
pub fn scan_in_memory(
    p: &Prepared,
    data: &str,
    over_budget: bool,
    policy: &VerdictPolicy,
    model: &LoadedModel,
    observer: &dyn Observer,
) -> anyhow::Result<Finished> {
    let started = Instant::now();
    check_budget(p, data, over_budget, true, observer)?;
    let units = compute_units(None, p, observer)?;
    let ensembles: Vec<PairEnsemble> = units.into_values().flatten().collect();
    finish(p, &ensembles, policy, model, "scan", None, started)
}

/// Label ensembles computed elsewhere (a curves table at `path`): the curve-only head scores
/// them. `recorded_path` is the input path as written into run.json.
pub fn label_curves(
    path: &Path,
    recorded_path: &str,
    policy: &VerdictPolicy,
    model: &LoadedModel,
) -> anyhow::Result<Finished> {
    let started = Instant::now();
    let (names, records) = curve_records(path)?;
    let sha = series_io::checksum::sha256_file(path)
        .with_context(|| format!("cannot read {}", path.display()))?;
    label_records(names, records, sha, recorded_path, policy, model, started)
}

/// [`label_curves`] on a curves table held in memory; `source` names it in messages.
pub fn label_curves_bytes(
    bytes: &[u8],
    source: &str,
    policy: &VerdictPolicy,
    model: &LoadedModel,
) -> anyhow::Result<Finished> {
    let started = Instant::now();
    let pairs = series_io::read_curve_pairs_from(bytes, source)?;
    let (names, records) = pair_records(pairs, source)?;
    let sha = verdict_model::sha256_hex(bytes);
    label_records(names, records, sha, source, policy, model, started)
}

fn label_records(
    names: Vec<String>,
    records: Vec<PairRecord>,
    sha: String,
    recorded_path: &str,
    policy: &VerdictPolicy,
    model: &LoadedModel,
    started: Instant,
) -> anyhow::Result<Finished> {
    let judgements = judge(&records, &model.bundle, policy)?;
    let run = serde_json::json!({
        "tool": "ccm-triage",
        "version": TOOL_VERSION,
        "command": "label",
        "input": {"path": recorded_path, "sha256": sha},
        "model": model_record(model),
        "review_band": [policy.band.0, policy.band.1],
        "feature_schema": {"version": ensemble_features::SCHEMA_VERSION, "hash": ensemble_features::schema_hash()},
        "pairs": records.len(),
        "timing": {"seconds": started.elapsed().as_secs_f64()},
    });
    let facts = RunFacts {
        input_name: file_name(Path::new(recorded_path)),
        input_sha256: Some(sha),
        tool_version: TOOL_VERSION.to_string(),
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
        cycles: Vec::new(),
    };
    Ok(Finished {
        names,
        embeddings: Vec::new(),
        records,
        judgements,
        facts,
        run,
    })
}

/// Pair records from a curves table; the reverse direction is the (response, driver) rows.
pub fn curve_records(path: &Path) -> anyhow::Result<(Vec<String>, Vec<PairRecord>)> {
    let pairs = series_io::read_curve_pairs(path)?;
    pair_records(pairs, &path.display().to_string())
}

/// Pair records from the pairs of a curves table named `source` in messages.
fn pair_records(
    pairs: Vec<series_io::CurvePair>,
    source: &str,
) -> anyhow::Result<(Vec<String>, Vec<PairRecord>)> {
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
                "{source}: pair {} -> {} cannot be used; fix its rows in the file",
                p.driver, p.response
            )
        })?;
        ensembles.push((d, r, e));
    }
    Ok((
        names,
        assemble_curves(&ensembles, &QualityThresholds::default()),
    ))
}

/// Every result file of a labelling run, each written atomically, run.json last (its
/// presence marks a complete run).
pub fn write_results(out: &OutputDir, finished: &Finished) -> anyhow::Result<()> {
    // The CSV files carry spreadsheet-safe names; the report shows them as given.
    let csv_names = finished.csv_names();
    for file in finished.tables(&csv_names) {
        out.export(file.as_ref())?;
    }
    out.export(&TextDocument {
        name: "report.html".into(),
        text: finished.report_html()?,
    })?;
    out.export(&JsonDocument {
        name: "run.json".into(),
        value: &finished.run,
    })?;
    Ok(())
}

/// The paths given, without the absent ones.
pub fn inputs<'a>(paths: &[Option<&'a Path>]) -> Vec<&'a Path> {
    paths.iter().flatten().copied().collect()
}

fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.display().to_string())
}

/// The resolved settings (what validation made of the options), for run.json and manifests.
pub fn settings_record(
    settings: &AnalysisSettings,
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

/// Each variable's dominant cycle as the seasonal surrogates used it (strength 0: no season).
fn cycles_record(names: &[String], cycles: &[CycleFact]) -> serde_json::Value {
    names
        .iter()
        .zip(cycles)
        .map(|(n, c)| {
            serde_json::json!({
                "variable": n,
                "period": c.cycle.map(|c| c.0),
                "strength": c.cycle.map(|c| c.1),
                "season": c.season,
            })
        })
        .collect()
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
