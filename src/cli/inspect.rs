//! `provisio inspect DATA`: the data-quality profile.

use std::path::PathBuf;

use clap::Args;

use super::{load, pad, print_accounting, truncate, CleanArgs, ReadArgs};

#[derive(Args, Debug)]
pub struct InspectArgs {
    /// Input data: a CSV, or a workbook (.xlsx, .xlsm, .xls, .ods; see --sheet); long layout (product, month, consumed, optional stockout_days, reporting_rate, site) or wide (product, optional site, one column per month; see --layout).
    data: PathBuf,
    /// Also write the profile as CSV to this file.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// Write rejected rows, with reasons, to this file.
    #[arg(long, value_name = "FILE")]
    rejected: Option<PathBuf>,
    /// Run configuration file (TOML): its [input] reading options, [cleaning] and the products' stockout thresholds apply; options given here override it.
    #[arg(long, value_name = "FILE")]
    config: Option<std::path::PathBuf>,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    clean: CleanArgs,
}

pub fn run(mut a: InspectArgs, given: &super::Given) -> anyhow::Result<()> {
    let config = super::forecast::LoadedConfig::load_opt(a.config.as_ref())?;
    if let Some(c) = &config {
        c.apply_cleaning(given, &mut a.read, &mut a.clean)?;
    }
    let mut inputs = vec![
        ("input", Some(a.data.as_path())),
        ("--config", a.config.as_deref()),
    ];
    inputs.extend(a.read.companion_files());
    super::refuse_same_file(
        &[
            ("--csv", a.csv.as_deref()),
            ("--rejected", a.rejected.as_deref()),
        ],
        &inputs,
    )?;
    let (ds, cleaned) = load(&a.data, &a.read, &a.clean)?;
    let profiles = provisio::quality::profile_all(&cleaned);
    super::json_summary(|| {
        let products: Vec<serde_json::Value> = profiles
            .iter()
            .map(provisio::output::quality_json)
            .collect();
        serde_json::json!({
            "command": "inspect",
            "input": ds.source,
            "layout": if ds.layout.wide.is_some() { "wide" } else { "long" },
            "rows": cleaned.rows,
            "products": products,
            "products_unusable": cleaned.unusable.iter().map(|(p, r)| serde_json::json!({"product": p, "reason": r})).collect::<Vec<_>>(),
        })
    });
    let name_w = super::name_width(profiles.iter().map(|p| &p.product));
    super::say!(
        "{}  {:>5} {:>16} {:>7} {:>5} {:>8} {:>10} {:>5} {:>8}  verdict",
        pad("product", name_w),
        "sites",
        "period",
        "months",
        "gaps",
        "stockout",
        "rep. rate",
        "zero",
        "outliers"
    );
    for p in &profiles {
        let rate = match (p.mean_reporting_rate, p.min_reporting_rate) {
            (Some(m), Some(lo)) => format!("{:.0}/{:.0}%", m * 100.0, lo * 100.0),
            _ => "-".to_string(),
        };
        super::say!(
            "{}  {:>5} {:>16} {:>7} {:>5} {:>8} {:>10} {:>4.0}% {:>8}  {}",
            pad(&truncate(&p.product, name_w), name_w),
            p.sites,
            format!("{}..{}", p.first, p.last),
            format!("{}/{}", p.months_reported, p.months),
            p.months_missing,
            p.months_with_stockouts,
            rate,
            p.zero_share * 100.0,
            p.outliers.len(),
            p.verdict.name()
        );
    }
    super::say!();
    for p in &profiles {
        super::say!("{}: {}", truncate(&p.product, 60), p.verdict_text());
    }
    super::say!("\n(months: reported/calendar; gaps: months not reported; stockout: months with stockout days; rep. rate: mean/minimum, from the reporting_rate column, or else the share of a product's sites that reported)");
    super::note!("layout: {}", layout_text(&ds));
    print_accounting(&ds, &cleaned, 20);
    if let Some(path) = &a.csv {
        provisio::output::write_quality(path, &profiles)?;
        super::note!("wrote {}", path.display());
    }
    if let Some(path) = &a.rejected {
        provisio::output::write_rejected_of(path, &ds)?;
        super::note!("wrote {}", path.display());
    }
    Ok(())
}

/// The layout read, in words.
fn layout_text(ds: &provisio::data::Dataset) -> String {
    match &ds.layout.wide {
        Some(w) => w.describe(),
        None => "long: one row per product (and site) and month".to_string(),
    }
}
