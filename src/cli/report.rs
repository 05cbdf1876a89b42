//! `provisio report DIR`: rebuild the charts and the HTML report from the
//! output directory of a forecast run.

use std::path::PathBuf;

use clap::Args;

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Output directory of `provisio forecast` (with selection.csv, forecast.csv, cleaned.csv, manifest.json, ...).
    dir: PathBuf,
}

pub fn run(a: ReportArgs) -> anyhow::Result<()> {
    let w = provisio::report::write_report(&a.dir)?;
    super::json_summary(|| {
        serde_json::json!({
            "command": "report",
            "report": w.report.display().to_string(),
            "charts": w.charts.len(),
            "products": w.products,
        })
    });
    super::say!(
        "wrote {} and {} chart files ({} products) in {}",
        w.report.display(),
        w.charts.len(),
        w.products,
        a.dir.join("charts").display()
    );
    Ok(())
}
