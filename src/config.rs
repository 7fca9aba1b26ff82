//! Raw flags become the pipeline's settings here, before any work starts.

use triage_pipeline::settings::EngineSettings;

use crate::cli::EngineArgs;

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
    }
}
