//! One module per group of subcommands; each turns flags into pipeline calls and prints.

mod demo;
mod scan;
mod simulate;

pub use scan::{features, label, merge, scan};
pub use simulate::{demo, evaluate, model_card, simulate, train};
