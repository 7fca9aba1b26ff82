//! `demo`: the bundled scenario, scanned with the built-in model, checked against its answer key.

use anyhow::Context;
use review_report::{TableOptions, VerdictKind, verdict_table};
use series_io::OutputDir;

use super::scan::AnswerKey;
use crate::cli::{DemoArgs, EngineArgs, ScanArgs, VerdictArgs};

const DATA: &str = include_str!("../../demo-data/sound.csv");
const KEY: &str = include_str!("../../demo-data/answer-key.csv");
const STORY: &str = include_str!("../../demo-data/README.md");

pub fn run(args: DemoArgs, quiet: bool) -> anyhow::Result<()> {
    let out = OutputDir::create(&args.out)?;
    let data = out.write_bytes("sound.csv", DATA.as_bytes())?;
    out.write_bytes("answer-key.csv", KEY.as_bytes())?;
    let scan = ScanArgs {
        data,
        out: args.out.join("scan"),
        table: Default::default(),
        select: Default::default(),
        shard: None,
        over_budget: false,
        engine: default_engine(),
        verdict: VerdictArgs {
            model: None,
            review_band: verdict_model::verdict::DEFAULT_BAND_TEXT.into(),
            decisions: None,
            shared_skill_axis: false,
        },
    };
    let first = STORY
        .lines()
        .find(|l| !l.trim().is_empty() && !l.starts_with('#'));
    if let Some(line) = first {
        println!("{line}\n");
    }
    let key = answer_key()?;
    let outcome = super::scan::run_scan(&scan, quiet, Some(key.clone()))?;
    let mut rows =
        triage_pipeline::table_rows(&outcome.names, &outcome.records, &outcome.judgements);
    let (mut agree, mut wrong, mut review) = (0, 0, 0);
    for row in &mut rows {
        let truth = *key
            .get(&(row.driver.clone(), row.response.clone()))
            .with_context(|| {
                format!(
                    "answer key has no row for {} -> {}",
                    row.driver, row.response
                )
            })?;
        let causal = truth.is_causal();
        let agrees = match row.verdict {
            VerdictKind::Review => {
                review += 1;
                "-"
            }
            VerdictKind::Causal if causal => "yes",
            VerdictKind::NonCausal if !causal => "yes",
            _ => "NO",
        };
        match agrees {
            "yes" => agree += 1,
            "NO" => wrong += 1,
            _ => {}
        }
        row.flagged = agrees == "NO";
        row.extra = vec![truth.as_str().to_string(), agrees.to_string()];
    }
    let options = TableOptions {
        extra_columns: vec!["answer key".into(), "agrees with key".into()],
        flag_meaning: "the verdict disagrees with the answer key".into(),
        ..TableOptions::default()
    };
    println!("{}", verdict_table(&rows, &options));
    println!(
        "{} pairs: {agree} agree with the answer key, {wrong} disagree (marked !), {review} sent to review",
        outcome.records.len()
    );
    println!(
        "report: {}",
        args.out.join("scan").join("report.html").display()
    );
    println!("{}", super::scan::CAUTION_LINE);
    Ok(())
}

fn default_engine() -> EngineArgs {
    use clap::Parser;
    #[derive(Parser)]
    struct Defaults {
        #[command(flatten)]
        engine: EngineArgs,
    }
    Defaults::parse_from(["defaults"]).engine
}

fn answer_key() -> anyhow::Result<AnswerKey> {
    let mut rows = AnswerKey::new();
    for line in KEY.lines().skip(1).filter(|l| !l.trim().is_empty()) {
        let f: Vec<&str> = line.split(',').collect();
        anyhow::ensure!(f.len() >= 3, "answer key row `{line}` is malformed");
        let k = f.len();
        let label = verdict_model::FineLabel::parse(f[k - 1])
            .with_context(|| format!("answer key row `{line}` has an unknown label"))?;
        rows.insert((f[k - 3].to_string(), f[k - 2].to_string()), label);
    }
    Ok(rows)
}
