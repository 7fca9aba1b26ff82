//! Writes sample reports from synthetic view data, for looking at the design:
//! `cargo run -p review-report --example sample_report -- OUT_DIR`.

#[path = "../tests/common/mod.rs"]
mod common;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::path::PathBuf::from(std::env::args().nth(1).unwrap_or_else(|| ".".into()));
    std::fs::create_dir_all(&dir)?;
    for (name, data) in [
        ("small.html", common::small()),
        ("wide40.html", common::wide(40)),
    ] {
        let html = review_report::render_html(&data)?;
        std::fs::write(dir.join(name), &html)?;
        println!("{name}: {} bytes", html.len());
    }
    Ok(())
}
