//! The settings of a run as a user gives them (flags of the command line, keyword arguments
//! of the Python module), their defaults, and their checking into [`AnalysisSettings`].
//!
//! [`EngineSettings`] is what shard manifests record, so a renamed command-line flag cannot
//! make old shards unreadable: its serialised field names are part of the shard format.

use anyhow::{Context, bail};
use crossmap_engine::{CrossMapParams, EmbeddingSettings, LibrarySizes};
use serde::{Deserialize, Serialize};
use verdict_model::VerdictPolicy;

use crate::{AnalysisSettings, QualityThresholds};

/// Default master seed.
pub const DEFAULT_SEED: u64 = 1;
/// Default largest embedding dimension tried.
pub const DEFAULT_MAX_DIM: usize = 10;
/// Default library sizes: a count of log-spaced sizes.
pub const DEFAULT_SIZES: &str = "12";
/// Default random libraries per library size.
pub const DEFAULT_REPLICATES: usize = 100;
/// Default surrogate drivers of each kind per pair.
pub const DEFAULT_SURROGATES: usize = 39;

/// The options that fix the cross-map computation, as given (before validation).
///
/// `None` means "chosen from the data". Field names are the command line's flag names with
/// `_` for `-`; they are stored in shard manifests.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct EngineSettings {
    /// Master seed of the random libraries and surrogates.
    pub seed: u64,
    /// Embedding dimension for every variable.
    pub dim: Option<usize>,
    /// Largest embedding dimension tried when choosing it.
    pub max_dim: usize,
    /// Embedding delay for every variable.
    pub delay: Option<usize>,
    /// Library sizes: a count of log-spaced sizes (`12`) or an increasing list (`20,40,80`).
    pub sizes: String,
    /// Random libraries per library size.
    pub replicates: usize,
    /// Theiler window in time steps.
    pub theiler_window: Option<usize>,
    /// Largest absolute cross-map lag of the lag profile.
    pub max_lag: Option<usize>,
    /// Surrogate drivers of each kind (phase-randomised and seasonal) per pair.
    pub surrogates: usize,
    /// Seasonal period in time steps kept by every variable's seasonal surrogates.
    pub period: Option<usize>,
    /// Make the seasonal surrogates plain phase-randomised ones.
    #[serde(default)]
    pub no_seasonal_surrogates: bool,
}

impl Default for EngineSettings {
    fn default() -> Self {
        Self {
            seed: DEFAULT_SEED,
            dim: None,
            max_dim: DEFAULT_MAX_DIM,
            delay: None,
            sizes: DEFAULT_SIZES.into(),
            replicates: DEFAULT_REPLICATES,
            theiler_window: None,
            max_lag: None,
            surrogates: DEFAULT_SURROGATES,
            period: None,
            no_seasonal_surrogates: false,
        }
    }
}

impl EngineSettings {
    /// The analysis settings these options name; a malformed `sizes` is refused here.
    pub fn analysis_settings(&self) -> anyhow::Result<AnalysisSettings> {
        Ok(AnalysisSettings {
            embedding: EmbeddingSettings {
                e: self.dim,
                tau: self.delay,
                max_e: self.max_dim,
                theiler: self.theiler_window,
            },
            crossmap: CrossMapParams {
                library_sizes: parse_sizes(&self.sizes)?,
                replicates: self.replicates,
                theiler: self.theiler_window,
                max_lag: self.max_lag,
                surrogates: self.surrogates,
                period: self.period,
                seasonal: !self.no_seasonal_surrogates,
                seed: self.seed,
            },
            quality: QualityThresholds::default(),
        })
    }

    /// The settings as the report lists them.
    pub fn display(&self, policy: &VerdictPolicy) -> Vec<(String, String)> {
        let auto =
            |v: Option<usize>| v.map_or("chosen per variable".to_string(), |x| x.to_string());
        vec![
            ("seed".into(), self.seed.to_string()),
            ("embedding dimension".into(), auto(self.dim)),
            ("largest dimension tried".into(), self.max_dim.to_string()),
            ("delay".into(), auto(self.delay)),
            ("library sizes".into(), self.sizes.clone()),
            ("replicates per size".into(), self.replicates.to_string()),
            ("Theiler window".into(), auto(self.theiler_window)),
            ("largest cross-map lag".into(), auto(self.max_lag)),
            (
                "surrogates per pair".into(),
                format!(
                    "{} phase-randomised + {} seasonal",
                    self.surrogates, self.surrogates
                ),
            ),
            (
                "seasonal period".into(),
                self.period
                    .map_or("each variable's dominant cycle".into(), |p| {
                        format!("{p} steps")
                    }),
            ),
            (
                "review band".into(),
                format!("{} to {}", policy.band.0, policy.band.1),
            ),
        ]
    }
}

/// How the series table is read, as given: the time column, separator, decimal comma and
/// what to do with uneven time steps. Shard manifests record it under `flags.table`, so its
/// serialised field names are part of the shard format.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct TableSettings {
    /// Name of the time column (default: a first column named `t`, `time`, `date`,
    /// `datetime`, `year`, `month`, `week` or `day`, in any case).
    #[serde(default)]
    pub time_column: Option<String>,
    /// Field separator (default `,`); see [`parse_delimiter`].
    #[serde(default)]
    pub delimiter: Option<char>,
    /// Numbers are written with a decimal comma (`3,25`).
    #[serde(default)]
    pub decimal_comma: bool,
    /// Uneven time steps: `refuse`, `fill-gaps` or `as-equal` (see [`UNEVEN_STEPS`]).
    #[serde(default = "refuse")]
    pub uneven_steps: String,
}

/// The accepted values of [`TableSettings::uneven_steps`].
pub const UNEVEN_STEPS: [&str; 3] = ["refuse", "fill-gaps", "as-equal"];

fn refuse() -> String {
    "refuse".into()
}

impl Default for TableSettings {
    fn default() -> Self {
        Self {
            time_column: None,
            delimiter: None,
            decimal_comma: false,
            uneven_steps: refuse(),
        }
    }
}

impl TableSettings {
    /// Only the time column named, the rest at the defaults.
    pub fn with_time_column(time_column: Option<&str>) -> Self {
        Self {
            time_column: time_column.map(String::from),
            ..Self::default()
        }
    }

    /// The reader's options; an unknown `uneven_steps` or a separator that cannot separate
    /// fields is refused.
    pub fn read_options(&self) -> anyhow::Result<series_io::ReadOptions> {
        let uneven = match self.uneven_steps.as_str() {
            "refuse" => series_io::UnevenSteps::Refuse,
            "fill-gaps" => series_io::UnevenSteps::FillGaps,
            "as-equal" => series_io::UnevenSteps::AsEqual,
            other => bail!(
                "uneven steps `{other}`: give one of {}",
                UNEVEN_STEPS.join(", ")
            ),
        };
        let mut opts = series_io::ReadOptions::default()
            .with_decimal_comma(self.decimal_comma)
            .with_uneven_steps(uneven);
        if let Some(d) = self.delimiter {
            let d = parse_delimiter(&d.to_string()).map_err(anyhow::Error::msg)?;
            // parse_delimiter only accepts ASCII separators.
            opts = opts.with_delimiter(d as u8);
        }
        if let Some(t) = &self.time_column {
            opts = opts.with_time_column(t.clone());
        }
        Ok(opts)
    }
}

/// A field separator: one ASCII punctuation character, or the word `tab`.
pub fn parse_delimiter(text: &str) -> Result<char, String> {
    let c = match text {
        "tab" | "\\t" | "\t" => '\t',
        _ => {
            let mut chars = text.chars();
            match (chars.next(), chars.next()) {
                (Some(c), None) => c,
                _ => {
                    return Err(format!(
                        "give one character such as ; or the word tab, not `{text}`"
                    ));
                }
            }
        }
    };
    if !c.is_ascii() || matches!(c, '"' | '\n' | '\r') || c.is_ascii_alphanumeric() {
        return Err(format!(
            "`{text}` cannot separate fields: give an ASCII punctuation character such as ; or |, or tab"
        ));
    }
    Ok(c)
}

/// `sizes`: one whole number is a count of log-spaced sizes, a comma list is explicit.
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

/// `review band` `LO,HI` with 0 <= LO <= 0.5 <= HI <= 1.
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

/// The verdict policy with the review band `text` (`LO,HI`).
pub fn policy(review_band: &str) -> anyhow::Result<VerdictPolicy> {
    Ok(VerdictPolicy {
        band: parse_band(review_band)?,
        ..VerdictPolicy::default()
    })
}

/// The analysis settings as given (before validation against any data), as recorded in
/// run.json and training-settings.json.
pub fn analysis_settings_json(settings: &AnalysisSettings) -> serde_json::Value {
    let c = &settings.crossmap;
    serde_json::json!({
        "seed": c.seed,
        "embedding": {
            "dim": settings.embedding.e,
            "max_dim": settings.embedding.max_e,
            "delay": settings.embedding.tau,
            "theiler_window": settings.embedding.theiler,
        },
        "library_sizes": match &c.library_sizes {
            LibrarySizes::Auto { count } => serde_json::json!({"log_spaced_count": count}),
            LibrarySizes::Explicit(v) => serde_json::json!(v),
        },
        "replicates": c.replicates,
        "theiler_window": c.theiler,
        "max_lag": c.max_lag,
        "surrogates": c.surrogates,
        "period": c.period,
        "seasonal_surrogates": c.seasonal,
        "quality_thresholds": {
            "min_largest_library": settings.quality.min_largest_library,
            "min_self_forecast": settings.quality.min_self_forecast,
            "converged_skill": settings.quality.converged_skill,
        },
    })
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
    fn table_settings_read_options() {
        assert!(TableSettings::default().read_options().is_ok());
        let bad = TableSettings {
            uneven_steps: "sometimes".into(),
            ..TableSettings::default()
        };
        assert!(bad.read_options().is_err());
        assert_eq!(parse_delimiter("tab"), Ok('\t'));
        assert_eq!(parse_delimiter(";"), Ok(';'));
        assert!(parse_delimiter("a").is_err());
        assert!(parse_delimiter(";;").is_err());
        // Manifests from before the other table flags hold only the time column.
        let old: TableSettings = serde_json::from_str(r#"{"time_column":"date"}"#).unwrap();
        assert_eq!(old, TableSettings::with_time_column(Some("date")));
    }

    #[test]
    fn band_bounds() {
        assert_eq!(parse_band("0.2,0.8").unwrap(), (0.2, 0.8));
        assert!(parse_band("0.6,0.8").is_err());
        assert!(parse_band("0.2").is_err());
    }

    #[test]
    fn default_band_is_the_verdict_models() {
        let p = policy(verdict_model::verdict::DEFAULT_BAND_TEXT).unwrap();
        assert_eq!(p.band, verdict_model::verdict::DEFAULT_BAND);
    }
}
