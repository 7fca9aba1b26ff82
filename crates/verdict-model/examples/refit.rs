//! Refit from a `training-set.csv` written by `ccm-triage train`, printing the card's targets:
//! a quick way to compare fit settings without simulating again.
//!
//! `cargo run --release -p verdict-model --example refit -- TRAINING_SET.csv [DROP_PREFIX...]`
//! drops every feature whose name starts with one of the prefixes.

use verdict_model::{FineLabel, FitConfig, TrainingSet, fit};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let text = std::fs::read_to_string(&args[0]).expect("read training set");
    let drop: Vec<&str> = args[1..].iter().map(String::as_str).collect();
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
        let label = FineLabel::ALL
            .into_iter()
            .find(|l| l.as_str() == f[2])
            .expect("label");
        set.labels.push(label);
        set.rows
            .push(keep.iter().map(|&k| f[k].parse::<f64>().ok()).collect());
    }
    let cfg = FitConfig {
        fine_head: false,
        ..FitConfig::default()
    };
    let bundle = fit(&set, &cfg).expect("fit");
    let card = bundle.card();
    for t in &card.targets {
        println!("{:<40} {:<8} {:?}", t.name, t.target, t.value);
    }
    for h in &card.heads {
        println!("{:?}: {} / {}", h.head, h.chosen, h.calibration);
    }
}
