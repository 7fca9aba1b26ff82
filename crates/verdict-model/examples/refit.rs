//! Refit from a `training-set.csv` written by `ccm-triage train`, printing the card's targets:
//! a quick way to compare fit settings without simulating again.
//!
//! `cargo run --release -p verdict-model --example refit -- TRAINING_SET.csv [--suite
//! EVALUATED_SET.csv] [DROP_PREFIX...]` drops every feature whose name starts with one of the
//! prefixes; `--suite` chooses the model on a validation suite written by `ccm-triage evaluate
//! --out` (its `evaluated-set.csv`).

use verdict_model::{FineLabel, FitConfig, TrainingSet, fit_with_suite};

fn read(path: &str, drop: &[&str]) -> TrainingSet {
    let text = std::fs::read_to_string(path).expect("read training set");
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().expect("header").split(',').collect();
    let keep: Vec<usize> = (3..header.len())
        .filter(|&k| !drop.iter().any(|p| header[k].starts_with(p)))
        .collect();
    let mut set = TrainingSet {
        feature_names: keep.iter().map(|&k| header[k].to_string()).collect(),
        schema_hash: "refit".into(),
        ..TrainingSet::default()
    };
    for line in lines {
        let f: Vec<&str> = line.split(',').collect();
        set.systems.push(f[0].to_string());
        set.families.push(f[1].to_string());
        let label = FineLabel::parse(f[2]).expect("label");
        set.labels.push(label);
        set.rows
            .push(keep.iter().map(|&k| f[k].parse::<f64>().ok()).collect());
    }
    set
}

fn main() {
    let mut args: Vec<String> = std::env::args().skip(1).collect();
    let suite_path = args.iter().position(|a| a == "--suite").map(|i| {
        let p = args[i + 1].clone();
        args.drain(i..=i + 1);
        p
    });
    let drop: Vec<&str> = args[1..].iter().map(String::as_str).collect();
    let set = read(&args[0], &drop);
    let suite = suite_path.map(|p| read(&p, &drop));
    let cfg = FitConfig {
        fine_head: false,
        suite_name: "suite".into(),
        ..FitConfig::default()
    };
    let bundle = fit_with_suite(&set, suite.as_ref(), &cfg).expect("fit");
    let card = bundle.card();
    for t in &card.targets {
        println!(
            "{:<34} {:<8} {:?} (out of family {:?})",
            t.name, t.target, t.value, t.out_of_family
        );
    }
    for h in &card.heads {
        println!("{:?}: {} / {}", h.head, h.chosen, h.calibration);
        for c in &h.candidates {
            println!(
                "   {:<90} suite ll {:?} auc {:?} | lofo ll {:?} auc {:?}",
                c.name, c.suite_log_loss, c.suite_roc_auc, c.cv_log_loss, c.cv_roc_auc
            );
        }
    }
}
