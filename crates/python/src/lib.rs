//! `ccm_triage._native`: the pipeline's runs for the Python package `ccm_triage`.
//!
//! Every function here calls `triage-pipeline` exactly as the command line does; the Python
//! layer (`python/ccm_triage/__init__.py`) turns tables into CSV bytes on the way in and the
//! result files' bytes into data frames on the way out, so values and order are the files'.
//!
//! Long work runs on a worker thread with the GIL released; the calling thread polls for
//! signals, so Ctrl-C stops the run at the next work unit and raises `KeyboardInterrupt`.
//! Nothing is written before a run has finished.

use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::Duration;

use pyo3::create_exception;
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyDict};
use series_io::{Export, OutputDir};
use triage_pipeline::model_runs;
use triage_pipeline::model_source::{self, LoadedModel};
use triage_pipeline::orchestration::{self as run, Cancelled, Finished, Observer};
use triage_pipeline::settings::{EngineSettings, TableSettings, policy};
use triage_pipeline::units::ShardSpec;

create_exception!(
    ccm_triage,
    TriageError,
    PyValueError,
    "Bad input or a refused run; the message is the command line's, caused-by lines included."
);

fn to_py(err: anyhow::Error) -> PyErr {
    TriageError::new_err(triage_pipeline::orchestration::error_text(&err))
}

/// Progress and cancellation shared between the worker and the polling thread.
#[derive(Default)]
struct Shared {
    cancel: AtomicBool,
    done: AtomicU64,
    total: AtomicU64,
    stage: Mutex<String>,
    notes: Mutex<Vec<String>>,
}

impl Observer for Shared {
    fn begin(&self, what: &str, total: u64) {
        *self.stage.lock().expect("stage lock") = what.to_string();
        self.total.store(total, Ordering::Relaxed);
        self.done.store(0, Ordering::Relaxed);
    }
    fn advance(&self, done: u64) {
        self.done.fetch_max(done, Ordering::Relaxed);
    }
    fn note(&self, text: &str) {
        self.notes
            .lock()
            .expect("notes lock")
            .push(text.to_string());
    }
    fn cancelled(&self) -> bool {
        self.cancel.load(Ordering::Relaxed)
    }
}

/// Run `work` on a worker thread without the GIL; call `progress(stage, done, total)` as it
/// advances and notes as they come (`note(text)`); on a signal (Ctrl-C) stop the worker at its
/// next check and return the signal's exception.
fn run_long<T: Send>(
    py: Python<'_>,
    progress: Option<&Bound<'_, PyAny>>,
    note: Option<&Bound<'_, PyAny>>,
    work: impl FnOnce(&Shared) -> anyhow::Result<T> + Send,
) -> PyResult<T> {
    let shared = Shared::default();
    std::thread::scope(|scope| {
        let handle = scope.spawn(|| work(&shared));
        let mut shown = (String::new(), u64::MAX, u64::MAX);
        let mut interrupt: Option<PyErr> = None;
        let mut notes_seen = 0;
        loop {
            let finished = py.detach(|| {
                let step = Duration::from_millis(20);
                for _ in 0..5 {
                    if handle.is_finished() {
                        return true;
                    }
                    std::thread::sleep(step);
                }
                handle.is_finished()
            });
            if interrupt.is_none() {
                let notes: Vec<String> =
                    shared.notes.lock().expect("notes lock")[notes_seen..].to_vec();
                notes_seen += notes.len();
                if let Some(f) = note {
                    for n in notes {
                        f.call1((n,))?;
                    }
                }
                let now = (
                    shared.stage.lock().expect("stage lock").clone(),
                    shared.done.load(Ordering::Relaxed),
                    shared.total.load(Ordering::Relaxed),
                );
                if let Some(f) = progress
                    && !now.0.is_empty()
                    && now != shown
                {
                    if let Err(e) = f.call1((now.0.clone(), now.1, now.2)) {
                        shared.cancel.store(true, Ordering::Relaxed);
                        interrupt = Some(e);
                    }
                    shown = now;
                }
                if let Err(e) = py.check_signals() {
                    shared.cancel.store(true, Ordering::Relaxed);
                    interrupt = Some(e);
                }
            }
            if finished {
                break;
            }
        }
        let result = handle.join().expect("the worker thread panicked");
        if let Some(e) = interrupt {
            return Err(e);
        }
        match result {
            Ok(v) => Ok(v),
            Err(e) if e.is::<Cancelled>() => Err(pyo3::exceptions::PyKeyboardInterrupt::new_err(
                triage_pipeline::orchestration::error_text(&e),
            )),
            Err(e) => Err(to_py(e)),
        }
    })
}

/// Engine settings from the keyword arguments (the Python layer passes every one).
fn engine_settings(kw: &Bound<'_, PyDict>) -> PyResult<EngineSettings> {
    let d = EngineSettings::default();
    let get_usize = |k: &str, def: usize| -> PyResult<usize> {
        match kw.get_item(k)? {
            Some(v) if !v.is_none() => v.extract(),
            _ => Ok(def),
        }
    };
    let get_opt = |k: &str| -> PyResult<Option<usize>> {
        match kw.get_item(k)? {
            Some(v) if !v.is_none() => Ok(Some(v.extract()?)),
            _ => Ok(None),
        }
    };
    Ok(EngineSettings {
        seed: match kw.get_item("seed")? {
            Some(v) if !v.is_none() => v.extract()?,
            _ => d.seed,
        },
        dim: get_opt("dim")?,
        max_dim: get_usize("max_dim", d.max_dim)?,
        delay: get_opt("delay")?,
        sizes: match kw.get_item("sizes")? {
            Some(v) if !v.is_none() => v.extract()?,
            _ => d.sizes.clone(),
        },
        replicates: get_usize("replicates", d.replicates)?,
        theiler_window: get_opt("theiler_window")?,
        max_lag: get_opt("max_lag")?,
        surrogates: get_usize("surrogates", d.surrogates)?,
        period: get_opt("period")?,
        no_seasonal_surrogates: match kw.get_item("no_seasonal_surrogates")? {
            Some(v) if !v.is_none() => v.extract()?,
            _ => d.no_seasonal_surrogates,
        },
    })
}

/// The defaults of the engine settings and the review band, as the command line has them.
#[pyfunction]
fn defaults(py: Python<'_>) -> PyResult<Bound<'_, PyDict>> {
    let d = EngineSettings::default();
    let out = PyDict::new(py);
    out.set_item("seed", d.seed)?;
    out.set_item("dim", d.dim)?;
    out.set_item("max_dim", d.max_dim)?;
    out.set_item("delay", d.delay)?;
    out.set_item("sizes", d.sizes)?;
    out.set_item("replicates", d.replicates)?;
    out.set_item("theiler_window", d.theiler_window)?;
    out.set_item("max_lag", d.max_lag)?;
    out.set_item("surrogates", d.surrogates)?;
    out.set_item("period", d.period)?;
    out.set_item("no_seasonal_surrogates", d.no_seasonal_surrogates)?;
    out.set_item("review_band", verdict_model::verdict::DEFAULT_BAND_TEXT)?;
    out.set_item("version", run::TOOL_VERSION)?;
    Ok(out)
}

/// A finished labelling run: its result files, in memory until `write`.
#[pyclass(module = "ccm_triage._native", frozen)]
struct Run {
    finished: Finished,
    /// Files and folders the run read, which `write` must never replace.
    inputs: Vec<PathBuf>,
    notes: Vec<String>,
}

#[pymethods]
impl Run {
    /// Each CSV result file's bytes by file name, as `write` would write them.
    fn tables<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let out = PyDict::new(py);
        let names = self.finished.csv_names();
        for file in self.finished.tables(&names) {
            let mut bytes = Vec::new();
            file.write_to(&mut bytes)
                .map_err(|e| to_py(anyhow::Error::from(e)))?;
            out.set_item(file.file_name(), PyBytes::new(py, &bytes))?;
        }
        Ok(out)
    }

    /// run.json's text.
    fn run_json(&self) -> PyResult<String> {
        serde_json::to_string_pretty(&self.finished.run).map_err(|e| to_py(e.into()))
    }

    /// report.html's text.
    fn report_html(&self) -> PyResult<String> {
        self.finished.report_html().map_err(to_py)
    }

    /// Pair count per verdict: causal, non-causal, review.
    fn counts(&self) -> (usize, usize, usize) {
        let c = self.finished.counts();
        (c[0], c[1], c[2])
    }

    /// The notes of the run (work estimate, lock take-overs).
    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }

    /// Write every result file into `dir` (locked, inputs protected, run.json last).
    fn write(&self, py: Python<'_>, dir: PathBuf) -> PyResult<()> {
        let finished = &self.finished;
        let inputs = &self.inputs;
        py.detach(|| -> anyhow::Result<()> {
            let read: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
            let (out, _lock) = run::begin_output(&dir, &read, &run::Silent)?;
            run::write_results(&out, finished)
        })
        .map_err(to_py)
    }
}

fn load_model(model: Option<&Path>) -> anyhow::Result<LoadedModel> {
    model_source::load(model)
}

/// `scan`: `data` (CSV bytes, named `source` in messages) or the file at `path`.
#[pyfunction]
#[pyo3(signature = (data, path, source, time_column, engine, review_band, model, over_budget, progress=None, note=None, delimiter=None, decimal_comma=false, uneven_steps=None, drivers=None, responses=None))]
#[allow(clippy::too_many_arguments)]
fn scan(
    py: Python<'_>,
    data: Option<Vec<u8>>,
    path: Option<PathBuf>,
    source: String,
    time_column: Option<String>,
    engine: &Bound<'_, PyDict>,
    review_band: String,
    model: Option<PathBuf>,
    over_budget: bool,
    progress: Option<&Bound<'_, PyAny>>,
    note: Option<&Bound<'_, PyAny>>,
    delimiter: Option<String>,
    decimal_comma: bool,
    uneven_steps: Option<String>,
    drivers: Option<Vec<String>>,
    responses: Option<Vec<String>>,
) -> PyResult<Run> {
    let engine = engine_settings(engine)?;
    let delimiter = delimiter
        .map(|d| triage_pipeline::settings::parse_delimiter(&d))
        .transpose()
        .map_err(|e| TriageError::new_err(format!("delimiter: {e}")))?;
    let mut read = Vec::new();
    read.extend(path.clone());
    read.extend(model.clone());
    let (finished, notes) = run_long(py, progress, note, |obs| {
        let policy = policy(&review_band)?;
        let model = load_model(model.as_deref())?;
        let choice = run::InputChoice {
            table: TableSettings {
                delimiter,
                decimal_comma,
                uneven_steps: uneven_steps.unwrap_or_else(|| "refuse".into()),
                ..TableSettings::with_time_column(time_column.as_deref())
            },
            select: triage_pipeline::PairSelection { drivers, responses },
        };
        let prepared = match (&data, &path) {
            (_, Some(p)) => run::prepare(
                p,
                &p.display().to_string(),
                &choice,
                &engine,
                ShardSpec::WHOLE,
                obs,
            )?,
            (Some(bytes), None) => {
                engine.analysis_settings()?;
                let table = series_io::read_series_from(
                    bytes.as_slice(),
                    &source,
                    &choice.table.read_options()?,
                )?;
                run::prepare_table(
                    table,
                    &source,
                    &source,
                    &choice,
                    &engine,
                    ShardSpec::WHOLE,
                    obs,
                )?
            }
            (None, None) => anyhow::bail!("give a table or a path"),
        };
        for w in prepared.warnings(&source) {
            obs.note(&w);
        }
        let finished = run::scan_in_memory(&prepared, &source, over_budget, &policy, &model, obs)?;
        Ok((finished, obs.notes.lock().expect("notes lock").clone()))
    })?;
    Ok(Run {
        finished,
        inputs: read,
        notes,
    })
}

/// `label`: a curves table as CSV bytes (named `source`) or the file at `path`.
#[pyfunction]
#[pyo3(signature = (data, path, source, review_band, model))]
fn label(
    py: Python<'_>,
    data: Option<Vec<u8>>,
    path: Option<PathBuf>,
    source: String,
    review_band: String,
    model: Option<PathBuf>,
) -> PyResult<Run> {
    let mut read = Vec::new();
    read.extend(path.clone());
    read.extend(model.clone());
    let finished = run_long(py, None, None, |_| {
        let policy = policy(&review_band)?;
        let model = load_model(model.as_deref())?;
        match (&data, &path) {
            (_, Some(p)) => run::label_curves(p, &p.display().to_string(), &policy, &model, None),
            (Some(bytes), None) => run::label_curves_bytes(bytes, &source, &policy, &model),
            (None, None) => anyhow::bail!("give a curves table or a path"),
        }
    })?;
    Ok(Run {
        finished,
        inputs: read,
        notes: Vec::new(),
    })
}

/// `simulate`: every system of the spec as CSV bytes by id, plus `truth.csv`; written into
/// `out` too when given.
#[pyfunction]
#[pyo3(signature = (spec, out=None, progress=None))]
fn simulate<'py>(
    py: Python<'py>,
    spec: PathBuf,
    out: Option<PathBuf>,
    progress: Option<&Bound<'py, PyAny>>,
) -> PyResult<Bound<'py, PyDict>> {
    let (parsed, systems) = run_long(py, progress, None, |obs| {
        let (parsed, _) = model_runs::read_spec(&spec)?;
        let systems = model_runs::simulate_spec(&parsed, obs)?;
        Ok((parsed, systems))
    })?;
    // Written only once the run is known not to be interrupted.
    if let Some(dir) = &out {
        py.detach(|| -> anyhow::Result<()> {
            let dir = OutputDir::create(dir)?;
            let _lock = run::lock_folder(&dir, &run::Silent)?;
            let dir = dir.protect_inputs(&[&spec], &[])?;
            model_runs::write_simulation(&dir, &parsed, &systems)
        })
        .map_err(to_py)?;
    }
    let truth = training_sim::truth_csv(&systems);
    let systems: Vec<(String, String)> = systems
        .iter()
        .map(|s| (s.id.clone(), s.to_csv_string()))
        .collect();
    let result = PyDict::new(py);
    let d = PyDict::new(py);
    for (id, csv) in systems {
        d.set_item(id, PyBytes::new(py, csv.as_bytes()))?;
    }
    result.set_item("systems", d)?;
    result.set_item("truth", PyBytes::new(py, truth.as_bytes()))?;
    Ok(result)
}

/// `train`: fit a model on the spec's systems and write its files into `out` (only after the
/// fit, so an interrupted run writes nothing); returns the model card as JSON text.
#[pyfunction]
#[pyo3(signature = (spec, out, suite, engine, progress=None, note=None))]
fn train(
    py: Python<'_>,
    spec: PathBuf,
    out: PathBuf,
    suite: Option<PathBuf>,
    engine: &Bound<'_, PyDict>,
    progress: Option<&Bound<'_, PyAny>>,
    note: Option<&Bound<'_, PyAny>>,
) -> PyResult<String> {
    let engine = engine_settings(engine)?;
    let trained = run_long(py, progress, note, |obs| {
        model_runs::train(&spec, suite.as_deref(), &engine, obs)
    })?;
    // Written only once the run is known not to be interrupted.
    py.detach(|| -> anyhow::Result<String> {
        let dir = OutputDir::create(&out)?;
        let _lock = run::lock_folder(&dir, &run::Silent)?;
        let mut read: Vec<&Path> = vec![&spec];
        read.extend(suite.as_deref());
        let dir = dir.protect_inputs(&read, &[])?;
        model_runs::write_trained(&dir, &trained)?;
        Ok(trained.bundle.card().to_json()?)
    })
    .map_err(to_py)
}

/// `evaluate`: the model's metrics (metrics.json's text) and predictions.csv's bytes; the
/// files go into `out` too when given.
#[pyfunction]
#[pyo3(signature = (spec, model, out, engine, review_band, progress=None))]
fn evaluate<'py>(
    py: Python<'py>,
    spec: PathBuf,
    model: Option<PathBuf>,
    out: Option<PathBuf>,
    engine: &Bound<'py, PyDict>,
    review_band: String,
    progress: Option<&Bound<'py, PyAny>>,
) -> PyResult<(String, Bound<'py, PyBytes>, String)> {
    let engine = engine_settings(engine)?;
    let e = run_long(py, progress, None, |obs| {
        let model = load_model(model.as_deref())?;
        let policy = policy(&review_band)?;
        model_runs::evaluate(&model, &spec, &engine, &policy, obs)
    })?;
    // Written only once the run is known not to be interrupted.
    let (metrics, predictions, table) = py
        .detach(|| -> anyhow::Result<(String, Vec<u8>, String)> {
            if let Some(dir) = &out {
                let dir = OutputDir::create(dir)?;
                model_runs::write_evaluation(&dir, &e)?;
            }
            let mut bytes = Vec::new();
            e.predictions.write_to(&mut bytes)?;
            Ok((
                serde_json::to_string(&e.metrics)?,
                bytes,
                model_runs::comparison_table(&e.model, &e.rule_of_thumb, e.skipped),
            ))
        })
        .map_err(to_py)?;
    Ok((metrics, PyBytes::new(py, &predictions), table))
}

/// `model-card`: the card of the model file (default: the built-in model) as JSON text, its
/// Markdown text, and the model's identity line.
#[pyfunction]
#[pyo3(signature = (model=None))]
fn model_card(model: Option<PathBuf>) -> PyResult<(String, String, String)> {
    let m = load_model(model.as_deref()).map_err(to_py)?;
    let card = m.bundle.card();
    let json = card.to_json().map_err(|e| to_py(e.into()))?;
    Ok((json, card.to_markdown(), m.identity_line()))
}

/// One cross map with an explicit library: estimates of `driver(t + lag)` from the `(e, tau)`
/// delay embedding of `response` (NaN where none) and their Pearson skill.
#[pyfunction]
#[pyo3(signature = (response, driver, e, tau, theiler, library_times, lag=0))]
fn cross_map(
    response: Vec<f64>,
    driver: Vec<f64>,
    e: usize,
    tau: usize,
    theiler: usize,
    library_times: Vec<usize>,
    lag: i32,
) -> PyResult<(Vec<f64>, f64)> {
    let c = crossmap_engine::cross_map_with_library(
        &response,
        &driver,
        e,
        tau,
        theiler,
        &library_times,
        lag,
    )
    .map_err(|e| to_py(e.into()))?;
    Ok((c.estimates, c.skill))
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("TriageError", m.py().get_type::<TriageError>())?;
    m.add_class::<Run>()?;
    m.add_function(wrap_pyfunction!(defaults, m)?)?;
    m.add_function(wrap_pyfunction!(scan, m)?)?;
    m.add_function(wrap_pyfunction!(label, m)?)?;
    m.add_function(wrap_pyfunction!(simulate, m)?)?;
    m.add_function(wrap_pyfunction!(train, m)?)?;
    m.add_function(wrap_pyfunction!(evaluate, m)?)?;
    m.add_function(wrap_pyfunction!(model_card, m)?)?;
    m.add_function(wrap_pyfunction!(cross_map, m)?)?;
    Ok(())
}
