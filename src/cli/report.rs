//! `provisio report DIR`: rebuild the charts, the HTML report and the
//! workbook from the output directory of a forecast run.

use std::path::PathBuf;

use clap::Args;

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Output directory of `provisio forecast` (with selection.csv, forecast.csv, cleaned.csv, manifest.json, ...); the report, charts and forecast.xlsx are rebuilt.
    dir: PathBuf,
    /// Rebuild only forecast.xlsx (quick for thousands of products; no charts or report.html).
    #[arg(long)]
    workbook_only: bool,
}

pub fn run(a: ReportArgs) -> anyhow::Result<()> {
    // The workbook first, so that the report links to it.
    let book = provisio::report::workbook::write_workbook(&a.dir)?;
    super::say!("wrote {}", book.display());
    let mut written = None;
    if !a.workbook_only {
        let w = provisio::report::write_report(&a.dir)?;
        super::say!(
            "wrote {} and {} chart files ({} products) in {}",
            w.report.display(),
            w.charts.len(),
            w.products,
            a.dir.join("charts").display()
        );
        written = Some(w);
    }
    super::json_summary(|| {
        serde_json::json!({
            "command": "report",
            "report": written.as_ref().map(|w| w.report.display().to_string()),
            "charts": written.as_ref().map_or(0, |w| w.charts.len()),
            "products": written.as_ref().map(|w| w.products),
            "workbook": book.display().to_string(),
        })
    });
    Ok(())
}
