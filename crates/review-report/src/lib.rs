//! A self-contained HTML review report for ccm-triage runs.
//!
//! The report is one file: inline CSS and inline SVG figures drawn with plotters'
//! SVG backend, and one inline script for the reviewer's decisions (kept in the
//! browser's local storage until exported as CSV); no fonts, images or scripts are
//! fetched from anywhere, so it opens offline in any browser. It renders from a plain view model ([`ReportData`]) so it
//! can be built and tested without the rest of the pipeline.
//!
//! The page starts with the caution paragraph and a summary (a verdict matrix with
//! drivers as rows and responses as columns, the embedding table, run parameters,
//! model identity), then one panel per pair: review cases first, then causal, then
//! non-causal. Every caption asks the question in driver → response terms.
//!
//! ```
//! use review_report::{render_html, PairView, ReportData, VerdictKind, CAUTION};
//!
//! let pair = PairView {
//!     driver: "rain".into(),
//!     response: "flow".into(),
//!     p_causal: 0.91,
//!     verdict: VerdictKind::Causal,
//!     reasons: vec![],
//!     library_sizes: vec![20, 40, 80],
//!     forward: vec![vec![0.20, 0.25], vec![0.40, 0.45], vec![0.60, 0.62]],
//!     reverse: None,
//!     reverse_library_sizes: None,
//!     decision: None,
//!     lag_profile: None,
//!     surrogate_skills: Some(vec![0.01, 0.05, -0.02]),
//!     seasonal_surrogate_skills: Some(vec![0.3, 0.35, 0.28]),
//!     key_features: vec![("skill gain".into(), Some(0.4))],
//!     answer_key: None,
//! };
//! let data = ReportData {
//!     title: "ccm-triage report — example.csv".into(),
//!     input_name: "example.csv".into(),
//!     input_sha256: None,
//!     tool_version: "0.1.0".into(),
//!     model_identity: "none".into(),
//!     params: vec![("seed".into(), "7".into())],
//!     variables: vec!["rain".into(), "flow".into()],
//!     embeddings: vec![],
//!     pairs: vec![pair],
//!     notes: vec![],
//! };
//! let html = render_html(&data)?;
//! assert!(html.contains("Does <b>rain</b> drive <b>flow</b>?"));
//! assert!(html.contains(CAUTION));
//! # Ok::<(), review_report::ReportError>(())
//! ```
#![deny(missing_docs)]

mod error;
mod escape;
mod html;
mod model;
mod order;
mod plots;
mod stats;
mod table;

pub use error::ReportError;
pub use model::{EmbeddingRow, GivenDecision, KnownAnswer, PairView, ReportData, VerdictKind};
pub use table::{DEFAULT_TABLE_ROWS, TableOptions, TableRow, verdict_table};

/// The caution shown prominently at the top of every report (and reusable elsewhere).
pub const CAUTION: &str = "Each label is evidence from one method, convergent cross mapping, and holds only as far as \
its assumptions do: that the system is deterministic enough to be reconstructed from delay embeddings, that the \
series are long and clean enough, and that no shared driver or shared seasonality is imitating a link. A label is \
not proof of cause. Treat causal and review verdicts as leads to check against domain knowledge and, where \
possible, experiments or interventions before acting on them.";

/// Options that shape the page but not its content.
#[derive(Debug, Clone, PartialEq, Eq)]
#[non_exhaustive]
pub struct RenderOptions {
    /// Pairs beyond this many (in display order) get a row in a compact table instead of plots.
    pub max_panels: usize,
    /// Draw every pair's skill figure on one skill axis (the range of all pairs' values), so
    /// that curve heights compare across figures; otherwise each axis fits its own pair.
    pub shared_skill_axis: bool,
}

impl Default for RenderOptions {
    fn default() -> Self {
        // Two figures per pair cost roughly 10 kB of SVG; 200 pairs keep the page light enough to open quickly.
        Self {
            max_panels: 200,
            shared_skill_axis: false,
        }
    }
}

impl RenderOptions {
    /// The default options with the skill axis shared across pairs or not.
    pub fn with_shared_skill_axis(mut self, shared: bool) -> Self {
        self.shared_skill_axis = shared;
        self
    }
}

/// One pair's skill figure as a standalone SVG file, for papers and slides.
#[derive(Debug, Clone, PartialEq)]
pub struct PairFigure {
    /// A file name made from the pair's display position and its names (letters, digits,
    /// `-`, `_` and `.` kept, anything else `_`), ending in `.svg`; unique within a run.
    pub file_name: String,
    /// The SVG document.
    pub svg: String,
}

/// The skill figure of each of the first `max` pairs in the report's display order (review
/// first), drawn as in the report with the same `options`. Same data, same bytes.
pub fn pair_figures(
    data: &ReportData,
    options: &RenderOptions,
    max: usize,
) -> Result<Vec<PairFigure>, ReportError> {
    html::figures(data, options, max)
}

/// Renders the report with default options. Same data, same bytes.
pub fn render_html(data: &ReportData) -> Result<String, ReportError> {
    render_html_with(data, &RenderOptions::default())
}

/// Renders the report with the given options. Same data and options, same bytes.
pub fn render_html_with(data: &ReportData, options: &RenderOptions) -> Result<String, ReportError> {
    html::render(data, options)
}
