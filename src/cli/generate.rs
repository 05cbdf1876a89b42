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
    /// Number of months (from 2021-01).
    #[arg(long, default_value_t = 60)]
    months: usize,
    /// Random seed (same seed, same file).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Output file: a CSV, or an .xlsx workbook (one sheet, months as date cells).
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
}

pub fn run(a: GenerateArgs) -> anyhow::Result<()> {
    let sc = if a.demo {
        provisio::generate::demo_scenario()
    } else {
        if a.months == 0 || a.months > 1200 {
            anyhow::bail!("--months must be 1-1200, got {}", a.months);
        }
        provisio::generate::synthetic_scenario(a.products, a.sites, a.months, a.seed)
    };
    let rows = provisio::generate::generate(&sc);
    if provisio::data::is_workbook(&a.out) {
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
        provisio::output::write_atomic(&a.out, |w| provisio::generate::write_rows(w, &rows))?;
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
