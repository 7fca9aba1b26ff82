//! Raw flags become validated settings here, before any work starts.

use anyhow::{Context, bail};
use crossmap_engine::{CrossMapParams, EmbeddingSettings, LibrarySizes};
use triage_pipeline::{AnalysisSettings, QualityThresholds};

use crate::cli::{EngineArgs, TableArgs};

/// How to read the series table, from the table flags.
pub fn read_options(args: &TableArgs) -> series_io::ReadOptions {
    let mut opts = series_io::ReadOptions::default()
        .with_decimal_comma(args.decimal_comma)
        .with_uneven_steps(match args.uneven_steps.as_str() {
            "fill-gaps" => series_io::UnevenSteps::FillGaps,
            "as-equal" => series_io::UnevenSteps::AsEqual,
            _ => series_io::UnevenSteps::Refuse,
        });
    if let Some(d) = args.delimiter {
        // The parser only accepts ASCII separators.
        opts = opts.with_delimiter(d as u8);
    }
    if let Some(t) = &args.time_column {
        opts = opts.with_time_column(t.clone());
    }
    opts
}

/// The analysis settings named by the engine flags.
pub fn analysis_settings(args: &EngineArgs) -> anyhow::Result<AnalysisSettings> {
    Ok(AnalysisSettings {
        embedding: EmbeddingSettings {
            e: args.dim,
            tau: args.delay,
            max_e: args.max_dim,
            theiler: args.theiler_window,
        },
        crossmap: CrossMapParams {
            library_sizes: parse_sizes(&args.sizes)?,
            replicates: args.replicates,
            theiler: args.theiler_window,
            max_lag: args.max_lag,
            surrogates: args.surrogates,
            period: args.period,
            seasonal: !args.no_seasonal_surrogates,
            seed: args.seed,
        },
        quality: QualityThresholds::default(),
    })
}

/// `--sizes`: one whole number is a count of log-spaced sizes, a comma list is explicit.
pub fn parse_sizes(text: &str) -> anyhow::Result<LibrarySizes> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let numbers = parts
        .iter()
        .map(|p| p.parse::<usize>())
        .collect::<Result<Vec<_>, _>>()
        .with_context(|| {
            format!("--sizes `{text}`: give a count such as 12 or a list such as 20,40,80")
        })?;
    if numbers.len() == 1 {
        if numbers[0] < 2 {
            bail!(
                "--sizes {}: at least 2 library sizes are needed to see convergence",
                numbers[0]
            );
        }
        return Ok(LibrarySizes::Auto { count: numbers[0] });
    }
    if numbers.windows(2).any(|w| w[0] >= w[1]) {
        bail!("--sizes `{text}`: list the library sizes in increasing order without repeats");
    }
    Ok(LibrarySizes::Explicit(numbers))
}

/// `--review-band LO,HI` with 0 <= LO <= 0.5 <= HI <= 1.
pub fn parse_band(text: &str) -> anyhow::Result<(f64, f64)> {
    let bad = || {
        format!(
            "--review-band `{text}`: give two probabilities LO,HI with 0 <= LO <= 0.5 <= HI <= 1, e.g. 0.3,0.7"
        )
    };
    let (lo, hi) = text.split_once(',').with_context(bad)?;
    let lo: f64 = lo.trim().parse().ok().with_context(bad)?;
    let hi: f64 = hi.trim().parse().ok().with_context(bad)?;
    if !(0.0..=0.5).contains(&lo) || !(0.5..=1.0).contains(&hi) {
        bail!(bad());
    }
    Ok((lo, hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_count_or_list() {
        assert_eq!(parse_sizes("12").unwrap(), LibrarySizes::Auto { count: 12 });
        assert_eq!(
            parse_sizes("20, 40,80").unwrap(),
            LibrarySizes::Explicit(vec![20, 40, 80])
        );
        assert!(parse_sizes("40,20").is_err());
        assert!(parse_sizes("1").is_err());
        assert!(parse_sizes("ten").is_err());
    }

    #[test]
    fn band_bounds() {
        assert_eq!(parse_band("0.2,0.8").unwrap(), (0.2, 0.8));
        assert!(parse_band("0.6,0.8").is_err());
        assert!(parse_band("0.2").is_err());
    }
}
