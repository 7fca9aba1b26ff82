//! `simulate`, `train`, `evaluate`, `model-card` and `demo`: flags to the pipeline's model
//! runs, then what they print.

use series_io::OutputDir;
use triage_pipeline::model_runs;
use triage_pipeline::model_source as model;
use triage_pipeline::orchestration::lock_folder;
use triage_pipeline::reviewed::Reviewed;
use triage_pipeline::settings::{EngineSettings, policy};

use crate::cli::{DemoArgs, EvaluateArgs, ModelCardArgs, SimulateArgs, TrainArgs};
use crate::progress::Terminal;

pub fn simulate(args: SimulateArgs, quiet: bool) -> anyhow::Result<()> {
    let observer = Terminal::new(quiet);
    let (spec, _) = model_runs::read_spec(&args.spec)?;
    let systems = model_runs::simulate_spec(&spec, &observer)?;
    let out = OutputDir::create(&args.out)?;
    let _lock = lock_folder(&out, &observer)?;
    let out = out.protect_inputs(&[&args.spec], &[])?;
    model_runs::write_simulation(&out, &spec, &systems)?;
    println!(
        "{} systems written to {} (answer key: truth.csv)",
        systems.len(),
        args.out.display()
    );
    Ok(())
}

pub fn train(args: TrainArgs, quiet: bool) -> anyhow::Result<()> {
    let observer = Terminal::new(quiet);
    let (spec, identity) = model_runs::read_spec(&args.spec)?;
    let engine = EngineSettings::from(&args.engine);
    let settings = engine.analysis_settings()?;
    let out = OutputDir::create(&args.out)?;
    let _lock = lock_folder(&out, &observer)?;
    let mut read: Vec<&std::path::Path> = vec![&args.spec];
    read.extend(args.decisions.iter().map(|p| p.as_path()));
    read.extend(args.decision_scans.iter().map(|p| p.as_path()));
    let out = out.protect_inputs(&read, &[])?;
    let reviewed = Reviewed::read(
        &args.decisions,
        &args.decision_scans,
        args.decision_weight,
        &settings,
    )?;
    let trained = model_runs::train_spec(
        &args.spec,
        &spec,
        identity,
        args.suite.as_deref(),
        &engine,
        &settings,
        reviewed,
        &observer,
    )?;
    model_runs::write_trained(&out, &trained)?;
    println!(
        "model written to {} (sha256 {})",
        args.out.join("model.bin").display(),
        verdict_model::sha256_hex(&trained.bytes)
    );
    let card = trained.bundle.card();
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

pub fn evaluate(args: EvaluateArgs, quiet: bool) -> anyhow::Result<()> {
    let observer = Terminal::new(quiet);
    let model = model::load(args.model.as_deref())?;
    let engine = EngineSettings::from(&args.engine);
    let policy = policy(&args.review_band)?;
    let e = model_runs::evaluate(&model, &args.spec, &engine, &policy, &observer)?;
    print!(
        "{}",
        model_runs::comparison_table(&e.model, &e.rule_of_thumb, e.skipped)
    );
    if let Some(dir) = &args.out {
        let out = OutputDir::create(dir)?;
        model_runs::write_evaluation(&out, &e)?;
    }
    Ok(())
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
