//! `provisio clean DATA --out DIR`: cleaned series and the adjustment log.

use std::path::PathBuf;

use clap::Args;

use super::{load, print_accounting, CleanArgs, ReadArgs};
use provisio::output;

#[derive(Args, Debug)]
pub struct CleanCmdArgs {
    /// Input data: a CSV, or a workbook (.xlsx, .xlsm, .xls, .ods; see --sheet); long layout (product, month, consumed, optional stockout_days, reporting_rate, site) or wide (product, optional site, a column per month; see --layout).
    data: PathBuf,
    /// Directory for the outputs (created if needed).
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// Write into DIR even if it holds files provisio did not write.
    #[arg(long)]
    overwrite: bool,
    /// Run configuration file (TOML): its [input] reading options, [cleaning] and the products' stockout thresholds apply; options given here override it.
    #[arg(long, value_name = "FILE")]
    config: Option<std::path::PathBuf>,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    clean: CleanArgs,
}

pub fn run(mut a: CleanCmdArgs, given: &super::Given) -> anyhow::Result<()> {
    let config = super::forecast::LoadedConfig::load_opt(a.config.as_ref())?;
    if let Some(c) = &config {
        c.apply_cleaning(given, &mut a.read, &mut a.clean)?;
    }
    let (config_file, config_sha256) = super::forecast::LoadedConfig::manifest(config.as_ref());
    let out = output::OutputDir::check(&a.out, a.overwrite)?;
    out.refuse_input_inside(&a.data)?;
    let mut run = out.start()?;
    let (ds, cleaned) = load(&a.data, &a.read, &a.clean)?;
    let dir = super::stage(&mut run)?;
    let (by_rule, warnings) = super::write_clean_outputs(&dir, &ds, &cleaned)?;
    let manifest = output::CleanManifest {
        tool: format!("provisio {}", env!("CARGO_PKG_VERSION")),
        command: "clean".to_string(),
        input: ds.source.clone(),
        input_sha256: ds.input_sha256.clone(),
        settings: a.clean.settings(),
        duplicates: format!("{:?}", a.read.options().duplicates).to_lowercase(),
        numbers: a.read.options().numbers.name().to_string(),
        encoding: a.read.options().encoding.name().to_string(),
        sheet: ds.layout.sheet.as_ref().map(|s| s.name.clone()),
        wide: ds.layout.wide.as_ref().map(|w| w.manifest()),
        rows: cleaned.rows,
        products: cleaned.series.len(),
        products_unusable: cleaned.unusable.len(),
        adjustments_by_rule: by_rule.clone(),
        warnings,
        config_file,
        config_sha256,
    };
    output::write_clean_manifest(&dir.join("manifest.json"), &manifest)?;
    run.commit()?;
    print_accounting(&ds, &cleaned, 10);
    super::json_summary(|| {
        let files = [
            "cleaned.csv",
            "adjustments.csv",
            "rejected.csv",
            "quality.csv",
            "manifest.json",
        ];
        serde_json::json!({
            "command": "clean",
            "input": ds.source,
            "out": a.out.display().to_string(),
            "rows": cleaned.rows,
            "products": cleaned.series.len(),
            "products_unusable": cleaned.unusable.len(),
            "adjustments_by_rule": by_rule,
            "files": files.iter().map(|f| a.out.join(f).display().to_string()).collect::<Vec<_>>(),
        })
    });
    let months: usize = cleaned.series.iter().map(|s| s.len()).sum();
    super::say!(
        "cleaned {} product(s), {} product-months{}",
        cleaned.series.len(),
        months,
        if cleaned.unusable.is_empty() {
            String::new()
        } else {
            format!("; {} left out (no usable month)", cleaned.unusable.len())
        }
    );
    for (rule, n) in &by_rule {
        super::say!("  {rule:<18} {n}");
    }
    super::print_reporting_uplift(&cleaned, "adjustments.csv");
    super::say!(
        "wrote cleaned.csv, adjustments.csv, rejected.csv, quality.csv, manifest.json in {}",
        a.out.display()
    );
    Ok(())
}
