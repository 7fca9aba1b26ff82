//! Training in one path: the entry points, their settings and the fitted heads they produce.
//!
//! The work is split by job: [`FitConfig`] and [`Candidate`] are the settings, [`HeadModel`]
//! and [`Scorer`] the fitted heads, and [`fit_with_progress`] runs the cross-validated
//! selection of each head with its calibration.

pub use crate::fit_config::{Candidate, FitConfig};
pub use crate::heads::{HeadModel, Scorer};
pub use crate::selection::{fit, fit_with_progress, fit_with_suite};
