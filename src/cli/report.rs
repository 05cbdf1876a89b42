//! `provisio report DIR`: rebuild the charts and the HTML report from the
//! output directory of a forecast run.

use std::path::PathBuf;

use clap::Args;

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Output directory of `provisio forecast` (with selection.csv, forecast.csv, cleaned.csv, manifest.json, ...); the report, charts and forecast.xlsx are rebuilt.
    dir: PathBuf,
}

pub fn run(a: ReportArgs) -> anyhow::Result<()> {
    let w = provisio::report::write_report(&a.dir)?;
    let book = provisio::report::workbook::write_workbook(&a.dir)?;
    println!("wrote {}", book.display());
    println!(
        "wrote {} and {} chart files ({} products) in {}",
        w.report.display(),
        w.charts.len(),
        w.products,
        a.dir.join("charts").display()
    );
    Ok(())
}
