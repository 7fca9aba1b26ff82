//! `ccm-triage`: a thin command-line layer over the library crates.
//!
//! Exit status: 0 on success, 1 when the input or options are wrong (the message says which
//! file, row, column or option and how to fix it), 2 for usage errors reported by the parser.

mod cli;
mod commands;
mod config;
mod progress;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = cli::Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            eprintln!(
                "error: {}",
                triage_pipeline::orchestration::error_text(&err)
            );
            ExitCode::from(1)
        }
    }
}

/// Largest number of worker threads per core accepted by `--threads`.
const THREADS_PER_CORE: usize = 4;

fn run(cli: cli::Cli) -> anyhow::Result<()> {
    if let Some(threads) = cli.threads {
        anyhow::ensure!(threads >= 1, "--threads must be at least 1");
        // More workers than a small multiple of the cores only adds switching and memory
        // (each worker holds its own scratch tables); results never depend on the count.
        let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
        let cap = THREADS_PER_CORE * cores;
        anyhow::ensure!(
            threads <= cap,
            "--threads {threads} is above {cap} ({THREADS_PER_CORE} per core on this machine's {cores} cores); \
             give at most {cap}, or leave it unset to use one per core"
        );
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build_global()?;
    }
    let quiet = cli.quiet;
    match cli.command {
        cli::Command::Scan(args) => commands::scan(args, quiet),
        cli::Command::Merge(args) => commands::merge(args, quiet),
        cli::Command::Label(args) => commands::label(args, quiet),
        cli::Command::Features(args) => commands::features(args),
        cli::Command::Simulate(args) => commands::simulate(args, quiet),
        cli::Command::Train(args) => commands::train(args, quiet),
        cli::Command::Evaluate(args) => commands::evaluate(args, quiet),
        cli::Command::ModelCard(args) => commands::model_card(args),
        cli::Command::Demo(args) => commands::demo(args, quiet),
    }
}
