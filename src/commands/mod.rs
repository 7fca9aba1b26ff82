//! One module per group of subcommands; each reads its inputs, calls the libraries, writes files.

mod demo;
mod model;
mod scan;
mod simulate;
mod tables;

pub use scan::{features, label, merge, scan};
pub use simulate::{demo, evaluate, model_card, simulate, train};
