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
    if !a.workbook_only {
        let w = provisio::report::write_report(&a.dir)?;
        println!(
            "wrote {} and {} chart files ({} products) in {}",
            w.report.display(),
            w.charts.len(),
            w.products,
            a.dir.join("charts").display()
        );
    }
    let book = provisio::report::workbook::write_workbook(&a.dir)?;
    println!("wrote {}", book.display());
    Ok(())
}
