//! `provisio report DIR`: rebuild the HTML report and the workbook (and
//! chart files on request) from the output directory of a forecast run.

use std::path::PathBuf;

use clap::Args;

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Output directory of `provisio forecast` (with selection.csv, forecast.csv, cleaned.csv, manifest.json, ...); report.html and forecast.xlsx are rebuilt.
    dir: PathBuf,
    /// Rebuild only forecast.xlsx (no report.html).
    #[arg(long)]
    workbook_only: bool,
    /// Also write chart image files (PNG and SVG under charts/) for this product, or `all`; repeat for several.
    #[arg(long, value_name = "PRODUCT", conflicts_with = "workbook_only")]
    chart_files: Vec<String>,
}

pub fn run(a: ReportArgs) -> anyhow::Result<()> {
    // Both are written into a staging copy of the folder that replaces it
    // at the end: a refusal half-way (a damaged scores.csv found after the
    // workbook was built) leaves the folder as it was.
    let mut folder = super::start_existing(&a.dir)?;
    let dir = super::stage_existing(&mut folder, &a.dir)?;
    // The workbook first, so that the report links to it.
    provisio::report::workbook::write_workbook(&dir)?;
    let book = a.dir.join(provisio::report::workbook::WORKBOOK_FILE);
    let mut written = None;
    if !a.workbook_only {
        let options = provisio::report::ReportOptions {
            chart_files: provisio::report::ChartFiles::from_values(&a.chart_files),
            workbook_linked: true,
        };
        let mut w = provisio::report::write_report_with(&dir, &options)?;
        w.report = a.dir.join("report.html");
        written = Some(w);
    }
    if let Some(f) = folder {
        f.commit()?;
    }
    super::say!("wrote {}", book.display());
    if let Some(w) = &written {
        for warning in &w.warnings {
            super::warn(warning);
        }
        if w.charts.is_empty() {
            super::say!("wrote {} ({} products)", w.report.display(), w.products);
        } else {
            super::say!(
                "wrote {} ({} products) and {} chart files in {}",
                w.report.display(),
                w.products,
                w.charts.len(),
                a.dir.join("charts").display()
            );
        }
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
