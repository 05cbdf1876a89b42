//! `provisio generate`: invented data for the demo and for benchmarks.

use std::path::PathBuf;

use clap::Args;

#[derive(Args, Debug)]
pub struct GenerateArgs {
    /// Write the demo scenario (Norvale Region, invented) instead of a synthetic set.
    #[arg(long, conflicts_with_all = ["products", "sites", "months"])]
    demo: bool,
    /// Number of products in a synthetic set.
    #[arg(long, default_value_t = 100)]
    products: usize,
    /// Number of sites per product.
    #[arg(long, default_value_t = 1)]
    sites: usize,
    /// Number of months, from --start.
    #[arg(long, default_value_t = 60)]
    months: usize,
    /// First month of a synthetic set (YYYY-MM); its last month may not be after the current month, which provisio refuses to read as data.
    #[arg(long, default_value = "2021-01", value_name = "YYYY-MM", value_parser = provisio::calendar::YearMonth::parse, conflicts_with = "demo")]
    start: provisio::calendar::YearMonth,
    /// Random seed (same seed, same file).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Also write each site-month's true demand (before stockouts, partial reporting and entry errors) in a last column `true_demand`, to score cleaning and forecasts against the truth (CSV only).
    #[arg(long)]
    true_demand: bool,
    /// Chance (0-1) that a reported site-month carries a data-entry error (x10, or a digit too many).
    #[arg(long, default_value_t = 0.0, value_name = "SHARE")]
    entry_errors: f64,
    /// Chance (0-1) that a product-month is a campaign month: real demand x2 to x4 at every site.
    #[arg(long, default_value_t = 0.0, value_name = "SHARE")]
    campaigns: f64,
    /// Output file: a CSV, or an .xlsx workbook (one sheet, months as date cells).
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
}

pub fn run(a: GenerateArgs) -> anyhow::Result<()> {
    for (name, v) in [("entry-errors", a.entry_errors), ("campaigns", a.campaigns)] {
        if !(0.0..=1.0).contains(&v) {
            anyhow::bail!("--{name} must be a share from 0 to 1, got {v}");
        }
    }
    let mut sc = if a.demo {
        provisio::generate::demo_scenario()
    } else {
        if a.products == 0 || a.sites == 0 {
            anyhow::bail!(
                "--products and --sites must be 1 or more, got {} and {}",
                a.products,
                a.sites
            );
        }
        if a.months == 0 || a.months > 1200 {
            anyhow::bail!("--months must be 1-1200, got {}", a.months);
        }
        let last = a.start.plus(a.months as i64 - 1);
        if let Some(now) = super::current_month().filter(|now| last > *now) {
            let fits = a.start.months_until(now) + 1;
            let hint = if fits >= 1 {
                format!("use --months {fits} or fewer, or an earlier --start")
            } else {
                format!("give a --start of {now} or earlier")
            };
            anyhow::bail!(
                "--months {} from {} runs to {last}, after the current month {now}, and provisio refuses future months as data: {hint}",
                a.months,
                a.start,
            );
        }
        let mut sc = provisio::generate::synthetic_scenario(a.products, a.sites, a.months, a.seed);
        sc.start = a.start;
        sc
    };
    sc.anomalies = provisio::generate::Anomalies {
        entry_errors: a.entry_errors,
        campaigns: a.campaigns,
    };
    let rows = provisio::generate::generate(&sc);
    if provisio::data::is_workbook(&a.out) {
        if a.true_demand {
            anyhow::bail!(
                "{}: --true-demand is written to CSV files only; name the file .csv",
                a.out.display()
            );
        }
        let ext = a.out.extension().and_then(|e| e.to_str()).unwrap_or("");
        if !ext.eq_ignore_ascii_case("xlsx") {
            anyhow::bail!(
                "{}: provisio writes workbooks as .xlsx only; name the file .xlsx, or .csv for a CSV",
                a.out.display()
            );
        }
        let bytes = provisio::generate::workbook_bytes(&rows)
            .map_err(|e| anyhow::anyhow!("{}: cannot build the workbook: {e}", a.out.display()))?;
        provisio::output::write_atomic(&a.out, |w| w.write_all(&bytes))?;
    } else {
        provisio::output::write_atomic(&a.out, |w| {
            provisio::generate::write_rows_with(w, &rows, a.true_demand)
        })?;
    }
    super::json_summary(|| {
        serde_json::json!({
            "command": "generate",
            "out": a.out.display().to_string(),
            "rows": rows.len(),
            "products": sc.products.len(),
            "sites": sc.sites.len(),
            "months": sc.months,
            "invented": true,
            "true_demand": a.true_demand,
            "entry_errors": a.entry_errors,
            "campaigns": a.campaigns,
        })
    });
    super::note!(
        "wrote {} rows ({} products x {} sites x {} months, invented data) to {}",
        rows.len(),
        sc.products.len(),
        sc.sites.len(),
        sc.months,
        a.out.display()
    );
    Ok(())
}
