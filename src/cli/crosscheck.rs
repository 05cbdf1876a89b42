//! `provisio crosscheck FORECAST_DIR --services FILE --population FILE`:
//! compare the consumption forecast with what services and population
//! data imply, and add the comparison to the forecast's report.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use provisio::calendar::YearMonth;
use provisio::crosscheck::{self, cyp, read, services, Flag, Method};
use provisio::output;

#[derive(Args, Debug)]
#[command(group = clap::ArgGroup::new("inputs").required(true).multiple(true).args(["services", "population"]))]
pub struct CrossCheckArgs {
    /// Output directory of `provisio forecast`; the cross-check files are written into it.
    #[arg(value_name = "FORECAST_DIR")]
    dir: PathBuf,
    /// Services file: product, month, services, units_per_service (optional: site, allowance, reporting_rate).
    #[arg(long, value_name = "SERVICES")]
    services: Option<PathBuf>,
    /// Population file: one row per product and target group, method morbidity or demographic.
    #[arg(long, value_name = "POPULATION")]
    population: Option<PathBuf>,
    /// CYP table replacing or adding to the default (USAID, updated August 2021): method, cyp_per_unit or units_per_cyp.
    #[arg(long, value_name = "FILE")]
    cyp: Option<PathBuf>,
    /// Share above or below the consumption forecast beyond which an estimate is flagged (0.25 or 25% = ±25%).
    #[arg(long, default_value_t = crosscheck::DEFAULT_THRESHOLD, value_name = "SHARE", value_parser = share)]
    threshold: f64,
    /// First month of the 12-month comparison period (default: the first projected month).
    #[arg(long, value_name = "YYYY-MM")]
    start: Option<String>,
    /// Do not rebuild report.html and the charts (`provisio report DIR` does it later).
    #[arg(long)]
    no_report: bool,
}

/// Warnings for target groups of one product, method and population whose
/// shares add up to more than 1: the groups then count the same people
/// more than once.
fn group_shares_over_one(
    rows: &[provisio::crosscheck::population::PopulationRow],
    path: &std::path::Path,
) -> Vec<String> {
    let mut sums: std::collections::BTreeMap<(String, &str, u64), (f64, Vec<u64>)> =
        Default::default();
    for r in rows {
        let e = sums
            .entry((r.product.clone(), r.method.name(), r.population.to_bits()))
            .or_default();
        e.0 += r.group_share;
        e.1.push(r.line);
    }
    sums.into_iter()
        .filter(|(_, (sum, lines))| lines.len() > 1 && *sum > 1.0 + 1e-9)
        .map(|((product, method, pop), (sum, lines))| {
            format!(
                "{}: the {method} groups of '{product}' over a population of {} (lines {}) have shares adding up to {}: together they count more people than there are; check group_share",
                path.display(),
                provisio::chart::fmt_quantity(f64::from_bits(pop)),
                lines.iter().map(u64::to_string).collect::<Vec<_>>().join(", "),
                provisio::chart::fmt_quantity(sum)
            )
        })
        .collect()
}

/// A share written as a fraction (0.25) or a percentage (25%).
fn share(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let value = match t.strip_suffix('%') {
        Some(p) => p.trim().parse::<f64>().map(|v| v / 100.0),
        None => t.parse::<f64>(),
    };
    value.ok().filter(|v| v.is_finite()).ok_or_else(|| {
        format!("'{text}' is not a share; write it as a fraction (0.25) or a percentage (25%)")
    })
}

pub fn run(a: CrossCheckArgs) -> anyhow::Result<()> {
    let threshold = crosscheck::check_threshold(a.threshold)?;
    super::refuse_input_named_as_output(
        "crosscheck",
        &a.dir,
        &[
            "crosscheck.csv",
            "crosscheck_services.csv",
            "crosscheck_rejected.csv",
            "crosscheck.json",
            "report.html",
            "forecast.xlsx",
        ],
        &[
            ("--services", a.services.as_deref()),
            ("--population", a.population.as_deref()),
            ("--cyp", a.cyp.as_deref()),
        ],
    )?;
    // Held from here: the forecast read and the files written belong to
    // one version of the folder.
    let mut folder = super::start_existing(&a.dir)?;
    let fc = read::read_forecast_dir(&a.dir)?;
    let start = match &a.start {
        Some(s) => YearMonth::parse(s).map_err(|e| {
            anyhow::anyhow!(
                "invalid setting start: '{s}': {e}; write the first month of the period as YYYY-MM"
            )
        })?,
        None => fc.first_month,
    };
    let mut table = cyp::usaid_2021();
    let mut warnings = fc.warnings.clone();
    if let Some(p) = &a.cyp {
        let (factors, cyp_warnings) = read::read_cyp(p)?;
        table = table.with_overrides(factors);
        warnings.extend(cyp_warnings);
    }
    // Read every input before any work, so a refusal comes at once.
    let pop = match &a.population {
        Some(p) => Some(read::read_population(p, &table)?),
        None => None,
    };
    let sv = match &a.services {
        Some(p) => Some(read::read_services(p, super::current_month())?),
        None => None,
    };
    if let (Some(p), Some(path)) = (&pop, &a.population) {
        warnings.extend(p.warnings.iter().cloned());
        warnings.extend(group_shares_over_one(&p.rows, path));
    }
    if let Some(d) = &sv {
        warnings.extend(d.warnings.iter().cloned());
    }
    let (estimates, sv_warnings) = match &sv {
        Some(d) => services::estimate(d, start, &fc.settings, &fc.clean_settings)?,
        None => (Vec::new(), Vec::new()),
    };
    warnings.extend(sv_warnings);
    if let Some(d) = &sv {
        super::note!(
            "services rows read: {} = {} accepted + {} rejected",
            d.rows_read,
            d.rows.len(),
            d.rejected.len()
        );
        for r in d.rejected.iter().take(5) {
            let col = r
                .column
                .as_deref()
                .map(|c| format!(": column '{c}'"))
                .unwrap_or_default();
            eprintln!(
                "{} {}",
                super::prefix("rejected", 33),
                super::terminal_text(&format!("{}:{}{col}: {}", d.source, r.line, r.reason))
            );
        }
        if d.rejected.len() > 5 {
            eprintln!(
                "{} ... and {} more (crosscheck_rejected.csv)",
                super::prefix("rejected", 33),
                d.rejected.len() - 5
            );
        }
    }
    let rows = pop.as_ref().map(|p| p.rows.as_slice()).unwrap_or(&[]);
    let cc = crosscheck::build(
        &fc.products,
        fc.forecast_used,
        start,
        &estimates,
        rows,
        threshold,
    );
    warnings.extend(cc.warnings.iter().cloned());

    // Written into a staging copy of the folder that replaces it at the
    // end: the tables, the report and its charts together.
    let staged = super::stage_existing(&mut folder, &a.dir)?;
    let dir = &staged;
    output::write_crosscheck(&dir.join("crosscheck.csv"), &cc)?;
    if let Some(d) = &sv {
        output::write_crosscheck_services(&dir.join("crosscheck_services.csv"), &cc)?;
        output::write_rejected(&dir.join("crosscheck_rejected.csv"), &d.source, &d.rejected)?;
    } else {
        // Files of an earlier cross-check with services would no longer match.
        for name in ["crosscheck_services.csv", "crosscheck_rejected.csv"] {
            match std::fs::remove_file(dir.join(name)) {
                Err(e) if e.kind() != std::io::ErrorKind::NotFound => {
                    return Err(e).with_context(|| {
                        format!("{}: cannot remove the earlier {name}", dir.display())
                    })
                }
                _ => {}
            }
        }
    }
    let forecast_sha = std::fs::read(dir.join("forecast.csv"))
        .map(|b| output::sha256_hex(&b))
        .with_context(|| format!("{}: cannot read forecast.csv", dir.display()))?;
    let json = serde_json::json!({
        "tool": format!("provisio {}", env!("CARGO_PKG_VERSION")),
        "command": "crosscheck",
        "forecast_dir": dir.display().to_string(),
        "forecast_sha256": forecast_sha,
        "period": {"start": start.to_string(), "end": start.plus(11).to_string(), "months": crosscheck::PERIOD_MONTHS},
        "threshold": threshold,
        "forecast_used": cc.forecast_used.name(),
        "changes_file": fc.manifest.get("changes_file").and_then(|v| v.as_str()).filter(|_| cc.forecast_used == crosscheck::ForecastUsed::Adjusted),
        "annual_range": "the forecast keeps monthly 80% bounds only; the 80% range of the 12-month total is bracketed by the range with months' errors independent (root of the sum of squared monthly half-widths) and the sum of the monthly bounds (months moving together)",
        "services": sv.as_ref().map(|d| serde_json::json!({
            "file": d.source,
            "sha256": d.sha256,
            "rows_read": d.rows_read,
            "rows_accepted": d.rows.len(),
            "rows_rejected": d.rejected.len(),
            "projected_with": "the forecast run's backtest, selection and cleaning settings",
        })),
        "population": a.population.as_ref().zip(pop.as_ref()).map(|(p, d)| serde_json::json!({
            "file": p.display().to_string(),
            "sha256": d.sha256,
            "rows": d.rows.len(),
        })),
        "cyp_override": a.cyp.as_ref().map(|p| p.display().to_string()),
        "cyp_table": table.factors.iter().map(|f| serde_json::json!({
            "method": f.method, "cyp_per_unit": f.cyp_per_unit, "units_per_user_year": f.units_per_user_year(), "unit": f.unit, "source": f.source,
        })).collect::<Vec<_>>(),
        "warnings": warnings,
    });
    output::write_json(&dir.join("crosscheck.json"), &json)?;

    let mut report = None;
    if !a.no_report {
        let w = provisio::report::write_report(dir)?;
        for warning in &w.warnings {
            super::warn(warning);
        }
        report = Some((
            a.dir.join("report.html").display().to_string(),
            w.charts.len(),
        ));
    }
    if let Some(f) = folder {
        f.commit()?;
    }
    let dir = &a.dir;
    print_summary(&cc);
    for w in &warnings {
        super::warn(w);
    }
    let mut wrote = vec!["crosscheck.csv", "crosscheck.json"];
    if sv.is_some() {
        wrote.extend(["crosscheck_services.csv", "crosscheck_rejected.csv"]);
    }
    super::say!(
        "cross-checked {} product(s) for {} to {}; wrote {} in {}",
        cc.rows
            .iter()
            .filter(|r| r.method == Method::Consumption)
            .count(),
        start,
        start.plus(11),
        wrote.join(", "),
        dir.display()
    );
    if let Some((shown, charts)) = &report {
        super::say!(
            "rebuilt {shown} with the cross-check section, and {charts} chart files (charts/)"
        );
    }
    let report = report.map(|r| r.0);
    super::say!("Decision support only: review with the responsible programme staff; national guidelines and local regulations take precedence.");
    super::json_summary(|| {
        serde_json::json!({
            "command": "crosscheck",
            "dir": dir.display().to_string(),
            "period": {"start": start.to_string(), "end": start.plus(11).to_string()},
            "threshold": threshold,
            "forecast_used": cc.forecast_used.name(),
            "estimates": cc.rows.iter().filter(|r| r.method != Method::Consumption).map(|r| {
                let c = r.comparison.as_ref();
                serde_json::json!({
                    "product": r.product,
                    "method": r.method.name(),
                    "quantity": r.quantity,
                    "consumption": r.consumption.map(|c| c.total),
                    "ratio": c.and_then(|c| c.ratio),
                    "flag": c.map(|c| c.flag.name()),
                    "explanation": c.map(|c| c.explanation.clone()),
                })
            }).collect::<Vec<_>>(),
            "files": wrote.iter().map(|f| dir.join(f).display().to_string()).collect::<Vec<_>>(),
            "report": report,
            "warnings": warnings,
        })
    });
    Ok(())
}

fn print_summary(cc: &crosscheck::CrossCheck) {
    let w = super::name_width(cc.rows.iter().map(|r| &r.product));
    let cut = |s: &str| super::pad(&super::truncate(s, w), w);
    let q = |v: Option<f64>| v.map(provisio::chart::fmt_quantity).unwrap_or("-".into());
    // The forecast column is headed by the forecast it holds when that is
    // the adjusted one: the statistical total, printed by `forecast`
    // beside it, differs.
    let (head, cw) = match cc.forecast_used {
        crosscheck::ForecastUsed::Statistical => ("consumption", 14),
        crosscheck::ForecastUsed::Adjusted => ("adjusted forecast", 18),
    };
    super::say!(
        "{}  {:<12} {:>14} {:>cw$} {:>7}  flag",
        cut("product"),
        "method",
        "12 months",
        head,
        "ratio"
    );
    for r in cc.rows.iter().filter(|r| r.method != Method::Consumption) {
        let c = r.comparison.as_ref();
        super::say!(
            "{}  {:<12} {:>14} {:>cw$} {:>7}  {}",
            cut(&r.product),
            r.method.name(),
            q(r.quantity),
            q(r.consumption.map(|c| c.total)),
            c.and_then(|c| c.ratio)
                .map(crosscheck::fmt_ratio)
                .unwrap_or("-".into()),
            c.map(|c| c.flag.name()).unwrap_or("not computed")
        );
    }
    for r in &cc.rows {
        if let Some(c) = r
            .comparison
            .as_ref()
            .filter(|c| matches!(c.flag, Flag::Above | Flag::Below))
        {
            super::say!("{}: {}", super::truncate(&r.product, 60), c.explanation);
        }
    }
}
