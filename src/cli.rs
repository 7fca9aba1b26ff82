//! Command-line flags: parsed here, checked into validated settings before any work.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};
use triage_pipeline::settings;

/// Triage convergent cross mapping evidence for every ordered pair of variables.
///
/// Every hypothesis is written DRIVER -> RESPONSE: "does DRIVER drive RESPONSE?". The evidence
/// for it is how well DRIVER's values can be estimated from the delay embedding of RESPONSE.
#[derive(Debug, Parser)]
#[command(name = "ccm-triage", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
    /// Hide progress bars (they are also hidden when stderr is not a terminal) and the
    /// verdict table printed at the end of scan, label and merge.
    #[arg(long, global = true, help_heading = GLOBAL)]
    pub quiet: bool,
    /// Worker threads (default: all cores). Results do not depend on it.
    #[arg(long, global = true, value_name = "N", help_heading = GLOBAL)]
    pub threads: Option<usize>,
}

/// The help heading of the options every subcommand takes, so they are listed in one place.
const GLOBAL: &str = "Options of every command";

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Label every ordered pair of series in a CSV table (the main job).
    #[command(
        after_help = "Example:\n  ccm-triage scan demo-data/sound.csv --out sound-run --seed 7"
    )]
    Scan(ScanArgs),
    /// Label ensembles computed elsewhere, given as a curves.csv table.
    #[command(
        after_help = "Example (curves.csv from the scan example):\n  ccm-triage label sound-run/curves.csv --out relabelled"
    )]
    Label(LabelArgs),
    /// Compute curve-only features from a curves.csv table, without labelling.
    #[command(
        after_help = "Example (curves.csv from the scan example):\n  ccm-triage features sound-run/curves.csv --out feats"
    )]
    Features(FeaturesArgs),
    /// Combine the shard directories of `scan --shard I/N` runs into the files of one scan.
    #[command(
        after_help = "Example:\n  ccm-triage scan demo-data/sound.csv --shard 1/2 --out shard1\n  ccm-triage scan demo-data/sound.csv --shard 2/2 --out shard2\n  ccm-triage merge shard1 shard2 --out sound-run"
    )]
    Merge(MergeArgs),
    /// Simulate labelled coupled systems from a spec file.
    #[command(
        after_help = "Example:\n  ccm-triage simulate training-sim/specs/lab-example.toml --out sims"
    )]
    Simulate(SimulateArgs),
    /// Train and calibrate a model on simulated systems from a spec file.
    #[command(
        after_help = "Example:\n  ccm-triage train training-sim/specs/default.toml --out my-model"
    )]
    Train(TrainArgs),
    /// Measure a model on simulated systems it was not trained on.
    #[command(
        after_help = "Example (my-model from the train example):\n  ccm-triage evaluate --model my-model/model.bin training-sim/specs/holdout.toml"
    )]
    Evaluate(EvaluateArgs),
    /// Print a model file's card (training data, metrics, identity).
    #[command(
        name = "model-card",
        after_help = "Example:\n  ccm-triage model-card models/default-model.bin"
    )]
    ModelCard(ModelCardArgs),
    /// Run the bundled demo scenario and compare the verdicts with its answer key.
    #[command(after_help = "Example:\n  ccm-triage demo --out demo-run")]
    Demo(DemoArgs),
}

/// Options that fix the cross-map computation (shard manifests record them as the
/// pipeline's `EngineSettings`; the defaults are that type's).
#[derive(Debug, Clone, Args)]
pub struct EngineArgs {
    /// Master seed of the random libraries and surrogates.
    #[arg(long, default_value_t = settings::DEFAULT_SEED, value_name = "N")]
    pub seed: u64,
    /// Embedding dimension for every variable (default: chosen per variable by simplex projection).
    #[arg(long, value_name = "E")]
    pub dim: Option<usize>,
    /// Largest embedding dimension tried when choosing it.
    #[arg(long, default_value_t = settings::DEFAULT_MAX_DIM, value_name = "E")]
    pub max_dim: usize,
    /// Embedding delay in time steps for every variable (default: chosen per variable).
    #[arg(long, value_name = "TAU")]
    pub delay: Option<usize>,
    /// Library sizes: a count of log-spaced sizes (e.g. 12) or an explicit list (e.g. 20,40,80).
    #[arg(long, default_value = settings::DEFAULT_SIZES, value_name = "COUNT|L1,L2,..")]
    pub sizes: String,
    /// Random libraries per library size.
    #[arg(long, default_value_t = settings::DEFAULT_REPLICATES, value_name = "R")]
    pub replicates: usize,
    /// Theiler window: neighbours this close in time to the estimated point are excluded
    /// (default: chosen from the embedding).
    #[arg(long, value_name = "STEPS")]
    pub theiler_window: Option<usize>,
    /// Largest absolute cross-map lag of the lag profile (default: chosen from the embedding).
    #[arg(long, value_name = "K")]
    pub max_lag: Option<usize>,
    /// Surrogate drivers of each kind (phase-randomised and seasonal) per pair.
    #[arg(long, default_value_t = settings::DEFAULT_SURROGATES, value_name = "N")]
    pub surrogates: usize,
    /// Seasonal period in time steps that every variable's seasonal surrogates keep (default:
    /// each variable's own dominant cycle, found from its periodogram, counted as a season only
    /// with a period of at least 4 steps and a strength of at least 0.1).
    #[arg(long, value_name = "STEPS")]
    pub period: Option<usize>,
    /// Make the seasonal surrogates plain phase-randomised ones, for records known to carry no
    /// outside rhythm (seasons, tides, daily cycles).
    #[arg(long)]
    pub no_seasonal_surrogates: bool,
}

/// Options of the verdict.
#[derive(Debug, Clone, Args)]
pub struct VerdictArgs {
    /// Model file (default: the model built into this binary).
    #[arg(long, value_name = "PATH")]
    pub model: Option<PathBuf>,
    /// Probabilities inside LO,HI are sent to review.
    #[arg(long, default_value = verdict_model::verdict::DEFAULT_BAND_TEXT, value_name = "LO,HI")]
    pub review_band: String,
    /// Reviewer decisions exported from an earlier report of the same input
    /// (decisions.csv): shown beside the model's verdicts in labels.csv and the report.
    #[arg(long, value_name = "FILE")]
    pub decisions: Option<PathBuf>,
    /// Draw every pair's skill figure (in report.html and plots/) on one skill axis, the range
    /// of all pairs' values, so that curve heights compare across figures (default: each axis
    /// fits its own pair).
    #[arg(long)]
    pub shared_skill_axis: bool,
}

impl VerdictArgs {
    /// How the report and the per-pair figures are drawn.
    pub fn report_options(&self) -> review_report::RenderOptions {
        review_report::RenderOptions::default().with_shared_skill_axis(self.shared_skill_axis)
    }
}

/// `scan`.
#[derive(Debug, Args)]
pub struct ScanArgs {
    /// Table of series: a header row, an optional time column, one column per series.
    pub data: PathBuf,
    /// Output directory (created; existing result files are replaced atomically). Finished
    /// work units are checkpointed in DIR/.checkpoint, so rerunning the same command after an
    /// interruption resumes; run.json is written last and marks a complete run.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    #[command(flatten)]
    pub table: TableArgs,
    #[command(flatten)]
    pub select: SelectArgs,
    /// Compute only shard I of N (1-based) into OUT as a shard directory, for `merge`.
    /// Response manifolds are dealt round-robin: shard I takes columns I, I+N, I+2N, ...
    #[arg(long, value_name = "I/N")]
    pub shard: Option<String>,
    /// Run even when the estimated work is above the budget of one process (100,000 pairs,
    /// 8 GiB of memory or 4 GiB of checkpoint).
    #[arg(long)]
    pub over_budget: bool,
    #[command(flatten)]
    pub engine: EngineArgs,
    #[command(flatten)]
    pub verdict: VerdictArgs,
}

/// Which ordered pairs to scan (the pipeline's `PairSelection`).
#[derive(Debug, Clone, Default, Args)]
pub struct SelectArgs {
    /// Scan only these drivers (comma-separated names; default: every series). Only the
    /// manifolds of the chosen drivers and responses are computed.
    #[arg(long, value_name = "NAMES", value_delimiter = ',')]
    pub drivers: Option<Vec<String>>,
    /// Scan only these responses (comma-separated names; default: every series).
    #[arg(long, value_name = "NAMES", value_delimiter = ',')]
    pub responses: Option<Vec<String>>,
}

/// How the series table is read (the pipeline's `TableSettings`).
#[derive(Debug, Clone, Args)]
pub struct TableArgs {
    /// Name of the time column (default: a first column named t, time, date, datetime,
    /// year, month, week or day, in any case). Times are numbers or ISO 8601 dates and
    /// date-times (2020-01-31, 2020-01-31T06:00, 2020-01-31T06:00+02:00).
    #[arg(long, value_name = "NAME")]
    pub time_column: Option<String>,
    /// Field separator: `,` (default), `;`, `tab`, `|` or another single character.
    #[arg(long, value_name = "CHAR", value_parser = triage_pipeline::settings::parse_delimiter)]
    pub delimiter: Option<char>,
    /// Numbers use a decimal comma (3,25), as in many spreadsheet exports; combine with
    /// --delimiter ';'.
    #[arg(long)]
    pub decimal_comma: bool,
    /// When the time axis has uneven steps: `refuse` (default), `fill-gaps` (add rows with
    /// every series missing for skipped time points) or `as-equal` (treat the rows as equally
    /// spaced anyway; delay embedding assumes equal steps).
    #[arg(long, value_name = "WHAT", default_value = "refuse", value_parser = triage_pipeline::settings::UNEVEN_STEPS)]
    pub uneven_steps: String,
}

impl Default for TableArgs {
    fn default() -> Self {
        Self {
            time_column: None,
            delimiter: None,
            decimal_comma: false,
            uneven_steps: "refuse".into(),
        }
    }
}

/// `merge`.
#[derive(Debug, Args)]
pub struct MergeArgs {
    /// Shard directories written by `scan --shard I/N` (all N of them, any order).
    #[arg(required = true, value_name = "SHARD_DIR")]
    pub shards: Vec<PathBuf>,
    /// Output directory.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// The input table, when it is no longer at the path recorded by the shards (its
    /// checksum must match).
    #[arg(long, value_name = "PATH")]
    pub data: Option<PathBuf>,
    /// Merge even when the estimated memory is above the budget of one process.
    #[arg(long)]
    pub over_budget: bool,
    #[command(flatten)]
    pub verdict: VerdictArgs,
}

/// `label`.
#[derive(Debug, Args)]
pub struct LabelArgs {
    /// Ensembles in the curves.csv format: driver,response,library_size,replicate,skill.
    pub curves: PathBuf,
    /// Output directory.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    #[command(flatten)]
    pub verdict: VerdictArgs,
}

/// `features`.
#[derive(Debug, Args)]
pub struct FeaturesArgs {
    /// Ensembles in the curves.csv format.
    pub curves: PathBuf,
    /// Output directory.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
}

/// `simulate`.
#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// Simulator spec (TOML); see training-sim/SPEC.md.
    pub spec: PathBuf,
    /// Output directory.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
}

/// `train`.
#[derive(Debug, Args)]
pub struct TrainArgs {
    /// Simulator spec (TOML) describing the training systems.
    pub spec: PathBuf,
    /// Output directory for model.bin and its card.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Validation suite (a simulator spec of systems never trained on, such as
    /// training-sim/specs/published.toml): each head's model is chosen by log-loss on it, and
    /// its figures go into the card (default: choose by leave-one-family-out).
    #[arg(long, value_name = "SPEC")]
    pub suite: Option<PathBuf>,
    /// Reviewer decisions exported from reports (decisions.csv, repeatable): each causal or
    /// non-causal pair becomes an extra training row with its features from the scan it was
    /// reviewed in (see --decision-scans); unsure pairs are left out.
    #[arg(long, value_name = "FILE")]
    pub decisions: Vec<PathBuf>,
    /// Output folders of the scans the decisions were made in (repeatable); each decisions
    /// file is matched to the scan with its input checksum. The scans must use the settings
    /// given to train.
    #[arg(long, value_name = "DIR")]
    pub decision_scans: Vec<PathBuf>,
    /// How many times each reviewed pair counts among the simulated ones (a repetition
    /// count; 5 is a starting point, not a measured value).
    #[arg(long, default_value_t = triage_pipeline::reviewed::DEFAULT_DECISION_WEIGHT, value_name = "N")]
    pub decision_weight: usize,
    #[command(flatten)]
    pub engine: EngineArgs,
}

/// `evaluate`.
#[derive(Debug, Args)]
pub struct EvaluateArgs {
    /// Model file (default: the model built into this binary).
    #[arg(long, value_name = "PATH")]
    pub model: Option<PathBuf>,
    /// Simulator spec (TOML) describing held-out systems.
    pub spec: PathBuf,
    /// Also write the per-pair predictions and the metrics to this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    #[command(flatten)]
    pub engine: EngineArgs,
    /// Probabilities inside LO,HI are sent to review.
    #[arg(long, default_value = verdict_model::verdict::DEFAULT_BAND_TEXT, value_name = "LO,HI")]
    pub review_band: String,
}

/// `model-card`.
#[derive(Debug, Args)]
pub struct ModelCardArgs {
    /// Model file (default: the model built into this binary).
    pub model: Option<PathBuf>,
    /// Print the card as JSON instead of Markdown.
    #[arg(long)]
    pub json: bool,
}

/// `demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Output directory.
    #[arg(long, default_value = "ccm-triage-demo", value_name = "DIR")]
    pub out: PathBuf,
}
