//! ccm-triage command-line tool.
fn main() {}
