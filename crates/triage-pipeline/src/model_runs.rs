//! The runs that make and measure models, shared by the command line (`simulate`, `train`,
//! `evaluate`) and the Python module: simulate a spec, analyse its systems through the same
//! stages as a scan, fit or score, and the files that record it.

use std::path::Path;

use anyhow::Context;
use series_io::{CsvTable, JsonDocument, OutputDir};
use training_sim::{Spec, System, ValidSpec};
use verdict_model::metrics::{Summary, summarise};
use verdict_model::{
    FitConfig, Head, ModelBundle, SpecIdentity, TrainingSet, Verdict, VerdictPolicy,
};

use crate::model_source::LoadedModel;
use crate::orchestration::{Cancelled, Observer};
use crate::reviewed::Reviewed;
use crate::settings::{EngineSettings, analysis_settings_json};
use crate::{AnalysedSystem, AnalysisSettings, SkippedSystem, judge, rule_of_thumb};

/// A spec file, parsed, with its identity (file stem and SHA-256 of its text).
pub fn read_spec(path: &Path) -> anyhow::Result<(ValidSpec, SpecIdentity)> {
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

/// Every system of a spec, simulated; stops with [`Cancelled`] after the simulation when
/// the observer asks for it.
pub fn simulate_spec(spec: &ValidSpec, observer: &dyn Observer) -> anyhow::Result<Vec<System>> {
    observer.begin("simulating", spec.total_count() as u64);
    let done = std::sync::atomic::AtomicUsize::new(0);
    let systems = training_sim::simulate_with_progress(spec, &|_| {
        let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
        observer.advance(n as u64);
    });
    observer.end();
    let systems = systems?;
    if observer.cancelled() {
        return Err(Cancelled.into());
    }
    Ok(systems)
}

/// The files of `simulate`: one CSV per system, resolved-spec.json, then truth.csv last
/// (its presence marks a complete set).
pub fn write_simulation(out: &OutputDir, spec: &Spec, systems: &[System]) -> anyhow::Result<()> {
    for s in systems {
        out.write_bytes(&format!("{}.csv", s.id), s.to_csv_string().as_bytes())?;
    }
    out.write_bytes(
        "resolved-spec.json",
        training_sim::resolved_spec_json(spec, systems).as_bytes(),
    )?;
    out.write_bytes("truth.csv", training_sim::truth_csv(systems).as_bytes())?;
    Ok(())
}

/// Simulate a spec and run every system through the labelling pipeline.
pub fn analysed(
    spec: &ValidSpec,
    settings: &AnalysisSettings,
    observer: &dyn Observer,
) -> anyhow::Result<(Vec<AnalysedSystem>, Vec<SkippedSystem>)> {
    let systems = simulate_spec(spec, observer)?;
    observer.begin("cross maps", systems.len() as u64);
    let out = crate::training::analyse_systems_until(
        &systems,
        settings,
        &|n| observer.advance(n as u64),
        &|| observer.cancelled(),
    );
    observer.end();
    Ok(out?)
}

/// A trained model and what its files record.
pub struct Trained {
    /// The model.
    pub bundle: ModelBundle,
    /// Its file's bytes (model.bin).
    pub bytes: Vec<u8>,
    /// The training set.
    pub set: TrainingSet,
    /// Systems that could not be analysed.
    pub skipped: Vec<SkippedSystem>,
    /// The analysis settings.
    pub settings: AnalysisSettings,
    /// Reviewer decisions added as training rows (reported apart in the model card).
    pub reviewed: Reviewed,
}

/// Train and calibrate a model on the systems of the spec at `spec_path`, choosing each
/// head's model on the validation suite at `suite` when given.
pub fn train(
    spec_path: &Path,
    suite: Option<&Path>,
    engine: &EngineSettings,
    observer: &dyn Observer,
) -> anyhow::Result<Trained> {
    let (spec, identity) = read_spec(spec_path)?;
    let settings = engine.analysis_settings()?;
    train_spec(
        spec_path,
        &spec,
        identity,
        suite,
        engine,
        &settings,
        Reviewed::default(),
        observer,
    )
}

/// [`train`] on a spec already read, with reviewer decisions as extra rows (read by
/// [`Reviewed::read`]); the output folder can be prepared in between.
#[allow(clippy::too_many_arguments)]
pub fn train_spec(
    spec_path: &Path,
    spec: &ValidSpec,
    identity: SpecIdentity,
    suite: Option<&Path>,
    engine: &EngineSettings,
    settings: &AnalysisSettings,
    reviewed: Reviewed,
    observer: &dyn Observer,
) -> anyhow::Result<Trained> {
    let (systems, skipped) = analysed(spec, settings, observer)?;
    let mut set = crate::training_set(&systems);
    reviewed.add_to(&mut set);
    anyhow::ensure!(
        !set.rows.is_empty(),
        "spec {} produced no usable pairs; raise the counts or lengths in it",
        spec_path.display()
    );
    observer.note(&format!(
        "fitting on {} pairs from {} systems ({} skipped)",
        set.rows.len(),
        systems.len(),
        skipped.len()
    ));
    let suite = match suite {
        Some(path) => {
            let (suite_spec, suite_id) = read_spec(path)?;
            let (suite_systems, _) = analysed(&suite_spec, settings, observer)?;
            let suite_set = crate::training_set(&suite_systems);
            observer.note(&format!(
                "validation suite {}: {} pairs from {} systems",
                suite_id.name,
                suite_set.rows.len(),
                suite_systems.len()
            ));
            Some((suite_set, suite_id.name))
        }
        None => None,
    };
    let cfg = FitConfig {
        seed: engine.seed,
        curve_only_names: ensemble_features::curve_only_names()
            .into_iter()
            .map(String::from)
            .collect(),
        spec: identity,
        suite_name: suite.as_ref().map(|s| s.1.clone()).unwrap_or_default(),
        ..FitConfig::default()
    };
    observer.begin("fitting", cfg.fit_steps() as u64);
    let bundle =
        verdict_model::fit_with_progress(&set, suite.as_ref().map(|s| &s.0), &cfg, &|done, _| {
            observer.advance(done as u64)
        });
    observer.end();
    let bundle = bundle?;
    if observer.cancelled() {
        return Err(Cancelled.into());
    }
    let bytes = bundle.to_bytes()?;
    Ok(Trained {
        bundle,
        bytes,
        set,
        skipped,
        settings: settings.clone(),
        reviewed,
    })
}

/// The files of `train`; model.bin last (its presence marks a finished training run).
pub fn write_trained(out: &OutputDir, t: &Trained) -> anyhow::Result<()> {
    let card = t.bundle.card();
    let mut markdown = card.to_markdown();
    if !t.reviewed.is_empty() {
        markdown.push_str(&t.reviewed.card_section(card));
        out.export(&t.reviewed.table())?;
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
        rows: t
            .skipped
            .iter()
            .map(|s| vec![s.id.clone(), s.reason.clone()])
            .collect(),
    })?;
    out.export(&training_table(&t.set))?;
    out.export(&JsonDocument {
        name: "training-settings.json".into(),
        value: &analysis_settings_json(&t.settings),
    })?;
    out.write_bytes("model.bin", &t.bytes)?;
    Ok(())
}

/// `training-set.csv`: every training row with its system, family and label, so a fit can be
/// inspected or repeated without simulating again.
pub fn training_table(set: &TrainingSet) -> CsvTable {
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

/// A model measured on held-out systems, beside the rule of thumb.
pub struct Evaluation {
    /// The model's figures.
    pub model: Summary,
    /// The rule of thumb's figures.
    pub rule_of_thumb: Summary,
    /// Systems that could not be analysed.
    pub skipped: usize,
    /// predictions.csv.
    pub predictions: CsvTable,
    /// evaluated-set.csv.
    pub evaluated_set: CsvTable,
    /// metrics.json.
    pub metrics: serde_json::Value,
}

/// Measure `model` on the systems of the spec at `spec_path`.
pub fn evaluate(
    model: &LoadedModel,
    spec_path: &Path,
    engine: &EngineSettings,
    policy: &VerdictPolicy,
    observer: &dyn Observer,
) -> anyhow::Result<Evaluation> {
    let (spec, _) = read_spec(spec_path)?;
    let settings = engine.analysis_settings()?;
    let (systems, skipped) = analysed(&spec, &settings, observer)?;
    let (mut p, mut labels, mut families, mut review, mut rule) =
        (vec![], vec![], vec![], vec![], vec![]);
    let mut rows = Vec::new();
    for s in &systems {
        let judgements = judge(&s.pairs, &model.bundle, policy)?;
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
        spec_path.display()
    );
    let ours = summarise(&p, &labels, &families, &review);
    let no_review = vec![false; rule.len()];
    let baseline = summarise(&rule, &labels, &families, &no_review);
    let metrics = serde_json::json!({"model": ours, "rule_of_thumb": baseline,
        "model_sha256": model.sha256, "skipped_systems": skipped.len()});
    Ok(Evaluation {
        predictions: CsvTable {
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
        },
        evaluated_set: CsvTable {
            name: "evaluated-set.csv".into(),
            ..training_table(&crate::training_set(&systems))
        },
        metrics,
        model: ours,
        rule_of_thumb: baseline,
        skipped: skipped.len(),
    })
}

/// The files of `evaluate --out`.
pub fn write_evaluation(out: &OutputDir, e: &Evaluation) -> anyhow::Result<()> {
    out.export(&e.predictions)?;
    out.export(&e.evaluated_set)?;
    out.export(&JsonDocument {
        name: "metrics.json".into(),
        value: &e.metrics,
    })?;
    Ok(())
}

/// The model's figures beside the rule of thumb's, as `evaluate` prints them.
pub fn comparison_table(ours: &Summary, rule: &Summary, skipped: usize) -> String {
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
