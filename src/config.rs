//! Raw flags become the pipeline's settings here, before any work starts.

use triage_pipeline::PairSelection;
use triage_pipeline::orchestration::InputChoice;
use triage_pipeline::settings::{EngineSettings, TableSettings};

use crate::cli::{EngineArgs, ScanArgs, SelectArgs, TableArgs};

impl From<&TableArgs> for TableSettings {
    fn from(a: &TableArgs) -> Self {
        TableSettings {
            time_column: a.time_column.clone(),
            delimiter: a.delimiter,
            decimal_comma: a.decimal_comma,
            uneven_steps: a.uneven_steps.clone(),
        }
    }
}

impl From<&SelectArgs> for PairSelection {
    fn from(a: &SelectArgs) -> Self {
        PairSelection {
            drivers: a.drivers.clone(),
            responses: a.responses.clone(),
        }
    }
}

impl ScanArgs {
    /// How the table is read and which pairs are scanned, as the pipeline takes them.
    pub fn input_choice(&self) -> InputChoice {
        InputChoice {
            table: TableSettings::from(&self.table),
            select: PairSelection::from(&self.select),
        }
    }
}

impl From<&EngineArgs> for EngineSettings {
    fn from(a: &EngineArgs) -> Self {
        EngineSettings {
            seed: a.seed,
            dim: a.dim,
            max_dim: a.max_dim,
            delay: a.delay,
            sizes: a.sizes.clone(),
            replicates: a.replicates,
            theiler_window: a.theiler_window,
            max_lag: a.max_lag,
            surrogates: a.surrogates,
            period: a.period,
            no_seasonal_surrogates: a.no_seasonal_surrogates,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[test]
    fn flag_defaults_are_the_pipelines() {
        #[derive(Parser)]
        struct Defaults {
            #[command(flatten)]
            engine: EngineArgs,
        }
        let parsed = Defaults::parse_from(["defaults"]).engine;
        assert_eq!(EngineSettings::from(&parsed), EngineSettings::default());
        #[derive(Parser)]
        struct TableDefaults {
            #[command(flatten)]
            table: TableArgs,
        }
        let parsed = TableDefaults::parse_from(["defaults"]).table;
        assert_eq!(TableSettings::from(&parsed), TableSettings::default());
    }
}
