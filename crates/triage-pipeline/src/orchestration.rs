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
use series_io::{DecisionFile, DirLock, JsonDocument, OutputDir, SeriesTable, TextDocument};
use verdict_model::{Verdict, VerdictPolicy};

use crate::model_source::{LoadedModel, model_record};
use crate::run_record::{
    CycleRecord, DecisionCounts, EmbeddingRecord, InputRecord, Invocation, RUN_RECORD_FORMAT,
    RunRecord, SchemaRecord, SelectionRecord, TimeAxisRecord, Timing,
};
use crate::selection::{PairSelection, ResolvedSelection};
use crate::settings::{EngineSettings, TableSettings, analysis_settings_json};
use crate::tables;
use crate::units::{self, InputIdentity, ShardSpec, StoreManifest, UnitStore};
use crate::{
    AnalysisSettings, CycleFact, Judgement, PairRecord, QualityThresholds, RunFacts, SeriesSet,
    assemble_curves, cycle_facts, judge, report_view,
};

/// Version written into run.json and manifests as the tool's version.
pub const TOOL_VERSION: &str = env!("CARGO_PKG_VERSION");
/// The git commit the tool was built from ("unknown" when built outside a git checkout).
pub const TOOL_COMMIT: &str = env!("CCM_TRIAGE_COMMIT");

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
    /// The ordered pairs chosen (every pair without a choice).
    pub selection: ResolvedSelection,
}

impl Prepared {
    /// The table reader's warnings (a rising first column not taken as the time axis, steps
    /// treated as equal, filled gaps), each as one line naming `source`, for the caller to
    /// show: the library never prints.
    pub fn warnings(&self, source: &str) -> Vec<String> {
        let mut lines: Vec<String> = self
            .table
            .warnings
            .iter()
            .map(|w| format!("warning: {source}: {w}"))
            .collect();
        let names = &self.series.names;
        let missing: Vec<String> = names
            .iter()
            .zip(&self.table.missing)
            .filter(|(_, m)| **m > 0)
            .map(|(n, m)| format!("{n} {m}"))
            .collect();
        if !missing.is_empty() {
            lines.push(format!(
                "note: {source}: missing cells in {} of {} series ({}); delay vectors and targets \
                 touching them are left out (counts per variable in run.json and the report)",
                missing.len(),
                names.len(),
                list_some(&missing, 6)
            ));
        }
        let short: Vec<String> = names
            .iter()
            .zip(self.params.plans())
            .filter(|(_, p)| p.usable < SHORT_SERIES)
            .map(|(n, p)| format!("{n} {}", p.usable))
            .collect();
        if !short.is_empty() {
            lines.push(format!(
                "note: {source}: short series, fewer than {SHORT_SERIES} usable delay vectors ({}): \
                 skill converges slowly at these lengths, so weak links may leave no footprint \
                 and more pairs go to review",
                list_some(&short, 6)
            ));
        }
        lines
    }
}

/// Below this many usable delay vectors a series gets a note: cross-map skill needs a few
/// hundred points to converge clearly (common practice; Sugihara et al. 2012 show convergence
/// over libraries of hundreds of points).
pub const SHORT_SERIES: usize = 100;

/// The first `max` items joined by ", ", then "and N more".
fn list_some(items: &[String], max: usize) -> String {
    let mut text = items[..items.len().min(max)].join(", ");
    if items.len() > max {
        text.push_str(&format!(" and {} more", items.len() - max));
    }
    text
}

/// The options a run reads its input with and scans it by: how the table is read and which
/// pairs are chosen.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct InputChoice {
    /// How the series table is read.
    pub table: TableSettings,
    /// Which ordered pairs are scanned.
    pub select: PairSelection,
}

/// Read the table at `data`, then [`prepare_table`] it.
pub fn prepare(
    data: &Path,
    recorded_path: &str,
    choice: &InputChoice,
    engine: &EngineSettings,
    shard: ShardSpec,
    observer: &dyn Observer,
) -> anyhow::Result<Prepared> {
    // Checked before the table is read, as the options come first.
    engine.analysis_settings()?;
    let table = series_io::read_series(data, &choice.table.read_options()?)?;
    prepare_table(
        table,
        &data.display().to_string(),
        recorded_path,
        choice,
        engine,
        shard,
        observer,
    )
}

/// Embed every variable of `table` and resolve the parameters; `source` names the table in
/// messages and `recorded_path` is the input path as written into the records. With a pair
/// choice, only the manifolds the chosen pairs need are this run's units (of them, the
/// shard's share).
pub fn prepare_table(
    table: SeriesTable,
    source: &str,
    recorded_path: &str,
    choice: &InputChoice,
    engine: &EngineSettings,
    shard: ShardSpec,
    observer: &dyn Observer,
) -> anyhow::Result<Prepared> {
    let settings = engine.analysis_settings()?;
    let series = SeriesSet {
        names: table.names.clone(),
        columns: table.columns.clone(),
    };
    let selection = choice
        .select
        .resolve(&table.names)
        .map_err(|e| anyhow::anyhow!("{source}: {e}"))?;
    let manifolds = (!choice.select.is_all()).then(|| selection.manifolds());
    let mut work = shard.units(table.names.len());
    if let Some(m) = &manifolds {
        work.retain(|u| m.contains(u));
    }
    let context = || format!("cannot analyse {source}");
    observer.begin("embedding", series.names.len() as u64);
    let embeddings = crate::embed_all_with(&series, &settings.embedding, &|k| {
        observer.advance(k as u64)
    });
    observer.end();
    let embeddings = embeddings.with_context(context)?;
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
        flags: serde_json::json!({
            "engine": engine,
            "time_column": choice.table.time_column,
            "table": choice.table,
            "select": choice.select,
        }),
        shard,
        units: work,
        complete: false,
        manifolds,
    };
    Ok(Prepared {
        settings,
        engine: engine.clone(),
        table,
        series,
        embeddings,
        params,
        manifest,
        selection,
    })
}

/// The options a shard manifest recorded: the engine settings, how the table was read and
/// the pair choice. Manifests from before the table flags and the pair choice hold only the
/// time column: those are read as the time column, every pair.
pub fn recorded_options(manifest: &StoreManifest) -> anyhow::Result<(EngineSettings, InputChoice)> {
    let flags = &manifest.flags;
    let engine: EngineSettings = serde_json::from_value(flags["engine"].clone())
        .context("the shard manifest's flags cannot be read; rerun the shards with this version")?;
    let table = match flags.get("table") {
        Some(v) => serde_json::from_value(v.clone())
            .context("the shard manifest's table flags cannot be read; rerun the shards")?,
        None => TableSettings::with_time_column(flags["time_column"].as_str()),
    };
    let select = match flags.get("select") {
        Some(v) => serde_json::from_value(v.clone())
            .context("the shard manifest's pair choice cannot be read; rerun the shards")?,
        None => PairSelection::default(),
    };
    Ok((engine, InputChoice { table, select }))
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
         variables (a table with only the columns of interest, or a choice of drivers and \
         responses), fewer --replicates, --sizes or \
         --surrogates, split the work into shards on a cluster (--shard I/N, each shard is \
         budgeted alone; see scripts/slurm-array.sh), or pass --over-budget to run it anyway",
        over.join(", ")
    )
}

/// The one-paragraph message the command line prints after `error: ` (and the Python
/// module raises): the error, then each cause on a `caused by:` line. A cause whose text the
/// message already holds (an error that displays its source) is not repeated.
pub fn error_text(err: &anyhow::Error) -> String {
    let mut text = err.to_string();
    for cause in err.chain().skip(1) {
        let cause = cause.to_string();
        if !text.contains(&cause) {
            text.push_str(&format!("\n  caused by: {cause}"));
        }
    }
    text
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
    pub run: RunRecord,
    /// Reviewer decisions shown beside the verdicts (labels.csv, the report).
    pub decisions: Option<DecisionFile>,
    /// How the report and the per-pair figures are drawn.
    pub report_options: review_report::RenderOptions,
    /// The known label of each pair by (driver, response), when the data come with an answer
    /// key (the demo): shown beside the verdicts in the report.
    pub answer_key: Option<BTreeMap<(String, String), verdict_model::FineLabel>>,
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
            files.push(Box::new(tables::surrogates(
                names,
                &self.records,
                &self.facts.cycles,
            )));
        }
        files.push(Box::new(tables::features(names, &self.records)));
        let labels = tables::labels(names, &self.records, &self.judgements);
        files.push(Box::new(match &self.decisions {
            Some(d) => tables::with_decisions(labels, d),
            None => labels,
        }));
        files
    }

    /// The review report (report.html).
    pub fn report_html(&self) -> anyhow::Result<String> {
        Ok(review_report::render_html_with(
            &self.view(),
            &self.report_options,
        )?)
    }

    /// The report's view of the run: the pairs with their evidence, reviewer decisions and
    /// answer key.
    fn view(&self) -> review_report::ReportData {
        let mut view = report_view(
            &self.facts,
            &self.names,
            &self.embeddings,
            &self.records,
            &self.judgements,
        );
        if let Some(d) = &self.decisions {
            // The report shows the names as given; the file holds them as the CSVs write them.
            let names = self.csv_names();
            for (pair, rec) in view.pairs.iter_mut().zip(&self.records) {
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
        if let Some(key) = &self.answer_key {
            for pair in &mut view.pairs {
                pair.answer_key = key
                    .get(&(pair.driver.clone(), pair.response.clone()))
                    .map(|l| review_report::KnownAnswer {
                        label: l.as_str().into(),
                        causal: l.is_causal(),
                    });
            }
        }
        view
    }

    /// Rows of the terminal verdict table, one per pair (the table sorts them).
    pub fn table_rows(&self) -> Vec<review_report::TableRow> {
        crate::table_rows(&self.names, &self.records, &self.judgements)
    }
}

/// Stages 3 and 4 (assemble, judge) and the run record, the same for scan and merge;
/// `command` and `shards` are recorded in run.json, `decisions` (from [`load_decisions`])
/// are shown beside the verdicts.
#[allow(clippy::too_many_arguments)]
pub fn finish(
    p: &Prepared,
    ensembles: &[PairEnsemble],
    policy: &VerdictPolicy,
    model: &LoadedModel,
    command: &str,
    shards: Option<Vec<String>>,
    started: Instant,
    decisions: Option<DecisionFile>,
) -> anyhow::Result<Finished> {
    let mut pairs = crate::assemble(&p.series, &p.embeddings, ensembles, &p.settings);
    // The computed manifolds also give pairs outside the choice (their targets); only the
    // chosen pairs are labelled and written.
    pairs.retain(|rec| p.selection.contains(rec.driver, rec.response));
    let judgements = judge(&pairs, &model.bundle, policy)?;
    let table = &p.table;
    let cycles = cycle_facts(&p.series, &p.settings);
    let path = &p.manifest.input.path;
    let input = InputRecord {
        rows: Some(table.n_rows()),
        time_column: table.time_column.clone(),
        time_axis: time_axis_record(table),
        warnings: Some(table.warnings.clone()),
        series: Some(table.names.clone()),
        missing_cells: Some(table.missing.clone()),
        missing_cells_total: Some(table.total_missing()),
        ..InputRecord::new(path, Some(absolute(Path::new(path))), &table.sha256)
    };
    let threads = Some(rayon::current_num_threads());
    let run = RunRecord {
        settings: Some(p.manifest.settings.clone()),
        selection: Some(SelectionRecord {
            drivers: p.manifest.flags["select"]["drivers"].clone(),
            responses: p.manifest.flags["select"]["responses"].clone(),
            manifolds: p
                .manifest
                .manifolds
                .as_ref()
                .map(|m| m.iter().map(|&k| p.series.names[k].clone()).collect()),
        }),
        embedding: Some(embedding_record(&p.series.names, &p.embeddings)),
        cycles: Some(cycles_record(&p.series.names, &cycles)),
        shards,
        decisions: decisions_record(decisions.as_ref()),
        ..run_record(command, input, pairs.len(), threads, policy, model, started)
    };
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
        decisions,
        report_options: Default::default(),
        answer_key: None,
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
    finish(p, &ensembles, policy, model, "scan", None, started, None)
}

/// Label ensembles computed elsewhere (a curves table at `path`): the curve-only head scores
/// them. `recorded_path` is the input path as written into run.json; `decisions` is a
/// reviewer's decisions file made on this same curves table, shown beside the verdicts.
pub fn label_curves(
    path: &Path,
    recorded_path: &str,
    policy: &VerdictPolicy,
    model: &LoadedModel,
    decisions: Option<&Path>,
) -> anyhow::Result<Finished> {
    let started = Instant::now();
    let (names, records) = curve_records(path)?;
    let sha = series_io::checksum::sha256_file(path)
        .with_context(|| format!("cannot read {}", path.display()))?;
    let decisions = load_decisions(decisions, &sha)?;
    let mut finished = label_records(names, records, sha, recorded_path, policy, model, started)?;
    finished.run.decisions = decisions_record(decisions.as_ref());
    finished.decisions = decisions;
    Ok(finished)
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
    // Ensembles held in memory (the Python module) have no file to point at.
    let file = Path::new(recorded_path);
    let input = InputRecord::new(recorded_path, file.exists().then(|| absolute(file)), &sha);
    let run = run_record("label", input, records.len(), None, policy, model, started);
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
        decisions: None,
        report_options: Default::default(),
        answer_key: None,
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
    // One view serves the report and the standalone figures (plots/, in the report's order,
    // at most MAX_PLOT_FILES).
    let view = finished.view();
    let options = &finished.report_options;
    out.export(&TextDocument {
        name: "report.html".into(),
        text: review_report::render_html_with(&view, options)?,
    })?;
    let figures = review_report::pair_figures(&view, options, MAX_PLOT_FILES)?;
    write_figures(out, &figures)?;
    out.export(&JsonDocument {
        name: "run.json".into(),
        value: &finished.run,
    })?;
    Ok(())
}

/// Most per-pair figure files one run writes into `plots/` (review pairs first): beyond a few
/// hundred pairs the report's compact table and the CSV files serve better than thousands of
/// files.
pub const MAX_PLOT_FILES: usize = 500;

/// Name of the folder of per-pair figures inside a run's output directory.
pub const PLOTS_DIR: &str = "plots";

/// Write the per-pair figures into `plots/`, each atomically, and remove the figures an
/// earlier run left there that this run did not write (so the folder matches run.json).
fn write_figures(out: &OutputDir, figures: &[review_report::PairFigure]) -> anyhow::Result<()> {
    let dir = out.subdir(PLOTS_DIR)?;
    for f in figures {
        dir.write_bytes(&f.file_name, f.svg.as_bytes())?;
    }
    let written: std::collections::BTreeSet<&str> =
        figures.iter().map(|f| f.file_name.as_str()).collect();
    let entries = std::fs::read_dir(dir.path())
        .with_context(|| format!("cannot list {}", dir.path().display()))?;
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        if name.ends_with(".svg") && !written.contains(name.as_str()) {
            std::fs::remove_file(entry.path()).with_context(|| {
                format!("cannot remove the old figure {}", entry.path().display())
            })?;
        }
    }
    Ok(())
}

/// Read a reviewer's decisions file, refusing one made on another input than
/// `input_sha256`; `None` without a file.
pub fn load_decisions(
    path: Option<&Path>,
    input_sha256: &str,
) -> anyhow::Result<Option<DecisionFile>> {
    let Some(path) = path else {
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

/// What run.json records about the decisions shown beside the verdicts: counts per decision.
pub fn decisions_record(d: Option<&DecisionFile>) -> Option<DecisionCounts> {
    d.map(|d| {
        let count = |k: series_io::Decision| d.rows.iter().filter(|r| r.decision == k).count();
        DecisionCounts {
            rows: d.rows.len(),
            causal: count(series_io::Decision::Causal),
            non_causal: count(series_io::Decision::NonCausal),
            unsure: count(series_io::Decision::Unsure),
        }
    })
}

/// The time axis as found: kind, first and last time, usual step, uneven and filled steps
/// (`None` without a time axis).
pub fn time_axis_record(table: &SeriesTable) -> Option<TimeAxisRecord> {
    table.time_axis.as_ref().map(|a| TimeAxisRecord {
        column: a.column.clone(),
        kind: a.kind.as_str().to_string(),
        first: a.first.clone(),
        last: a.last.clone(),
        step: a.step.clone(),
        uneven_steps: a.uneven_steps,
        filled_rows: a.filled_rows,
    })
}

/// The run record of a labelling run as every run has it; the parts only a scan has (its
/// settings, pair choice, embeddings, cycles, shards) and the decisions are left for the caller.
/// `threads` is recorded by runs that computed ensembles.
fn run_record(
    command: &str,
    input: InputRecord,
    pairs: usize,
    threads: Option<usize>,
    policy: &VerdictPolicy,
    model: &LoadedModel,
    started: Instant,
) -> RunRecord {
    RunRecord {
        tool: "ccm-triage".into(),
        version: TOOL_VERSION.into(),
        commit: TOOL_COMMIT.into(),
        format: RUN_RECORD_FORMAT,
        command: command.into(),
        invocation: invocation_record(started),
        input,
        settings: None,
        selection: None,
        embedding: None,
        cycles: None,
        model: model_record(model),
        feature_schema: SchemaRecord::current(),
        review_band: [policy.band.0, policy.band.1],
        pairs,
        shards: None,
        decisions: None,
        timing: Timing {
            seconds: started.elapsed().as_secs_f64(),
            threads,
        },
    }
}

/// How this process was started, for run.json: the full command line (the arguments as the
/// shell passed them), the working directory, and the start time as an ISO 8601 UTC timestamp.
pub fn invocation_record(started: Instant) -> Invocation {
    let argv: Vec<String> = std::env::args_os()
        .map(|a| a.to_string_lossy().into_owned())
        .collect();
    let cwd = std::env::current_dir()
        .map(|d| d.display().to_string())
        .unwrap_or_default();
    let started_at = std::time::SystemTime::now()
        .checked_sub(started.elapsed())
        .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
        .map(|d| series_io::utc_timestamp_at(d.as_secs()))
        .unwrap_or_else(series_io::utc_timestamp);
    Invocation {
        command_line: argv,
        working_directory: cwd,
        started_at,
    }
}

/// `path` made absolute against the working directory (symbolic links kept), as text.
fn absolute(path: &Path) -> String {
    std::path::absolute(path)
        .unwrap_or_else(|_| path.to_path_buf())
        .display()
        .to_string()
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
        .zip(params.plans())
        .map(|(n, p)| {
            serde_json::json!({
                "response": n, "usable_vectors": p.usable, "library_sizes": p.library_sizes,
                "theiler_window": p.theiler, "max_lag": p.max_lag,
            })
        })
        .collect();
    let mut record = analysis_settings_json(settings);
    record["n_points"] = serde_json::json!(params.n_points());
    record["per_response"] = serde_json::json!(plans);
    record
}

/// Each variable's dominant cycle as the seasonal surrogates used it (strength 0: no season).
fn cycles_record(names: &[String], cycles: &[CycleFact]) -> Vec<CycleRecord> {
    names
        .iter()
        .zip(cycles)
        .map(|(n, c)| CycleRecord {
            variable: n.clone(),
            period: c.cycle.map(|c| c.0),
            strength: c.cycle.map(|c| c.1),
            season: c.season,
        })
        .collect()
}

fn embedding_record(names: &[String], embeddings: &[Embedding]) -> Vec<EmbeddingRecord> {
    names
        .iter()
        .zip(embeddings)
        .map(|(n, e)| EmbeddingRecord {
            variable: n.clone(),
            e: e.e,
            tau: e.tau,
            simplex_skill: e.simplex_skill,
            skill_by_e: e.skill_by_e.clone(),
            vectors_excluded: e.vectors_excluded,
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

#[cfg(test)]
mod tests {
    use super::*;

    fn manifest(flags: serde_json::Value) -> StoreManifest {
        StoreManifest {
            format: units::UNITS_FORMAT.into(),
            version: units::UNITS_VERSION,
            tool_version: "0".into(),
            input: InputIdentity {
                path: "d.csv".into(),
                sha256: "ab".repeat(32),
                variables: vec!["a".into(), "b".into(), "c".into()],
            },
            settings: serde_json::json!({"seed": 1}),
            flags,
            shard: ShardSpec::WHOLE,
            units: vec![0, 1, 2],
            complete: true,
            manifolds: None,
        }
    }

    #[test]
    fn recorded_options_round_trip_and_old_manifests() {
        let choice = InputChoice {
            table: TableSettings {
                time_column: Some("date".into()),
                delimiter: Some(';'),
                decimal_comma: true,
                uneven_steps: "fill-gaps".into(),
            },
            select: PairSelection {
                drivers: Some(vec!["a".into()]),
                responses: None,
            },
        };
        let engine = EngineSettings::default();
        let m = manifest(serde_json::json!({
            "engine": engine,
            "time_column": choice.table.time_column,
            "table": choice.table,
            "select": choice.select,
        }));
        let (e, c) = recorded_options(&m).unwrap();
        assert_eq!((e, c), (engine.clone(), choice));
        // A manifest written before the table flags and the pair choice: the time column,
        // every pair.
        let old = manifest(serde_json::json!({"engine": engine, "time_column": "t"}));
        let (_, c) = recorded_options(&old).unwrap();
        assert_eq!(c.table, TableSettings::with_time_column(Some("t")));
        assert!(c.select.is_all());
    }

    #[test]
    fn a_cause_already_in_the_message_is_printed_once() {
        #[derive(Debug, thiserror::Error)]
        #[error("outer: {0}")]
        struct Shows(#[source] std::io::Error);
        let inner = std::io::Error::other("disk full");
        let err = anyhow::Error::new(Shows(inner)).context("cannot write out/run.json");
        let text = error_text(&err);
        assert_eq!(text.matches("disk full").count(), 1, "{text}");
        assert!(text.starts_with("cannot write out/run.json\n  caused by: outer: disk full"));
        let plain = anyhow::anyhow!("no such file").context("cannot read d.csv");
        assert_eq!(
            error_text(&plain),
            "cannot read d.csv\n  caused by: no such file"
        );
    }

    #[test]
    fn missing_cells_and_short_series_get_a_terminal_note() {
        let n = 80;
        let x: Vec<f64> = (0..n).map(|i| (i as f64 * 0.7).sin()).collect();
        let mut y: Vec<f64> = (0..n).map(|i| (i as f64 * 0.3).cos()).collect();
        y[5] = f64::NAN;
        let csv: String = std::iter::once("t,x,y".to_string())
            .chain((0..n).map(|i| {
                let yv = if y[i].is_nan() {
                    String::new()
                } else {
                    y[i].to_string()
                };
                format!("{i},{},{yv}", x[i])
            }))
            .collect::<Vec<_>>()
            .join("\n");
        let table =
            series_io::read_series_from(csv.as_bytes(), "d.csv", &Default::default()).unwrap();
        let engine = EngineSettings {
            dim: Some(2),
            delay: Some(1),
            ..EngineSettings::default()
        };
        let p = prepare_table(
            table,
            "d.csv",
            "d.csv",
            &InputChoice::default(),
            &engine,
            ShardSpec::WHOLE,
            &Silent,
        )
        .unwrap();
        let lines = p.warnings("d.csv");
        assert!(
            lines
                .iter()
                .any(|l| l.starts_with("note: d.csv: missing cells in 1 of 2 series (y 1)")),
            "{lines:?}"
        );
        assert!(
            lines
                .iter()
                .any(|l| l.contains("short series") && l.contains("x 7")),
            "{lines:?}"
        );
    }
}
