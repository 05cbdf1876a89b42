//! `provisio review PAST_DIR [PAST_DIR...] --actuals DATA --out DIR`:
//! score past forecasts against the consumption reported since.

use std::path::PathBuf;

use clap::Args;

use super::print_accounting;
use provisio::clean::Cleaned;
use provisio::data::Dataset;
use provisio::output;
use provisio::review::{self, Actuals, PastForecast, ReviewSettings};

#[derive(Args, Debug)]
pub struct ReviewArgs {
    /// Output directories of earlier `forecast` runs (several = vintages to compare).
    #[arg(required = true, value_name = "PAST_DIR")]
    past: Vec<PathBuf>,
    /// The consumption reported, in the input contract: the whole history, so it is cleaned like the past run's data (actuals holding only later months are warned).
    #[arg(long, value_name = "DATA")]
    actuals: PathBuf,
    /// Directory for the outputs (created if needed).
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// Share of a product's volume changed by cleaning above which the audit flags it (0.2 = 20%).
    #[arg(long, default_value_t = review::DEFAULT_ADJUSTMENT_LIMIT, value_name = "SHARE")]
    adjustment_limit: f64,
    /// Also score months whose actual is mostly imputed (default: as the past run's backtest did).
    #[arg(long)]
    score_imputed: bool,
    /// Sheet of an actuals workbook to read (default: the sheet the past run read, or the active sheet).
    #[arg(long, value_name = "NAME")]
    sheet: Option<String>,
    /// Actuals in the wide layout: stockout days as a table of the same shape in this file.
    #[arg(long, value_name = "FILE")]
    stockout_file: Option<PathBuf>,
    /// Actuals in the wide layout: stockout days on this sheet (of --stockout-file, else of the actuals workbook).
    #[arg(long, value_name = "NAME")]
    stockout_sheet: Option<String>,
    /// Actuals in the wide layout: reporting rates as a table of the same shape in this file.
    #[arg(long, value_name = "FILE")]
    rate_file: Option<PathBuf>,
    /// Actuals in the wide layout: reporting rates on this sheet (of --rate-file, else of the actuals workbook).
    #[arg(long, value_name = "NAME")]
    rate_sheet: Option<String>,
    /// How numbers are written in the actuals (default: as the past run read its data).
    #[arg(long, value_enum)]
    numbers: Option<super::Numbers>,
    /// Text encoding of the actuals (default: the past run's).
    #[arg(long, value_enum)]
    encoding: Option<super::Encoding>,
}

pub fn run(a: ReviewArgs) -> anyhow::Result<()> {
    let settings = ReviewSettings {
        adjustment_limit: a.adjustment_limit,
        score_imputed: a.score_imputed.then_some(true),
    }
    .check()?;
    let mut pasts: Vec<PastForecast> = Vec::new();
    for (i, dir) in a.past.iter().enumerate() {
        let same = |p: &PathBuf| match (p.canonicalize(), dir.canonicalize()) {
            (Ok(x), Ok(y)) => x == y,
            _ => p == dir,
        };
        if a.past[..i].iter().any(same) {
            anyhow::bail!(
                "{}: given twice; give each past forecast directory once",
                dir.display()
            );
        }
        pasts.push(review::read_past(dir)?);
    }
    let bytes = std::fs::read(&a.actuals)
        .map_err(|e| anyhow::anyhow!("{}: cannot read actuals: {e}", a.actuals.display()))?;
    let source = a.actuals.display().to_string();
    // The actuals are cleaned once per distinct set of past settings.
    let mut cleanings: Vec<(usize, Dataset, Cleaned)> = Vec::new();
    let mut which = Vec::with_capacity(pasts.len());
    for (i, p) in pasts.iter().enumerate() {
        let same = cleanings.iter().position(|(j, _, _)| {
            let m = &pasts[*j].manifest;
            m.clean_settings == p.manifest.clean_settings && m.duplicates == p.manifest.duplicates
        });
        match same {
            Some(k) => which.push(k),
            None => {
                let tables = [
                    super::companion(&a.stockout_file, &a.stockout_sheet),
                    super::companion(&a.rate_file, &a.rate_sheet),
                ];
                let read = review::ActualsReading {
                    sheet: a.sheet.as_deref(),
                    numbers: a.numbers.map(super::Numbers::format),
                    encoding: a.encoding.map(super::Encoding::encoding),
                };
                let (ds, cleaned) =
                    review::clean_actuals_with(&source, &bytes, &p.manifest, &read, tables)?;
                which.push(cleanings.len());
                cleanings.push((i, ds, cleaned));
            }
        }
    }
    // Nothing readable: the reason of the first refused row says why (a
    // number format or encoding other than the past run's, most often).
    for (_, ds, cleaned) in &cleanings {
        if let (true, Some(r)) = (cleaned.series.is_empty(), ds.rejected.first()) {
            return Err(provisio::error::Error::Input {
                file: source.clone(),
                line: r.line,
                column: r.column.clone(),
                message: format!(
                    "no product of the actuals has a usable month ({} row(s) rejected); the first rejected: {}",
                    ds.rejected.len(),
                    r.reason
                ),
            }
            .into());
        }
    }
    let mut warnings = Vec::new();
    if cleanings.len() > 1 {
        warnings.push(format!(
            "the past runs used {} different sets of cleaning settings; the actuals were cleaned with each run's own, so vintages are compared against slightly different actuals",
            cleanings.len()
        ));
    }
    let actuals: Vec<Actuals> = which
        .iter()
        .map(|&k| Actuals {
            source: &source,
            cleaned: &cleanings[k].2,
        })
        .collect();
    let result = review::review_all(&pasts, &actuals, &settings)?;
    let (_, ds0, cleaned0) = &cleanings[0];
    print_accounting(ds0, cleaned0, 5);
    let unforecast: Vec<&str> = cleaned0
        .series
        .iter()
        .map(|s| s.product.as_str())
        .filter(|p| {
            !pasts
                .iter()
                .any(|v| v.products.iter().any(|q| q.product == *p))
        })
        .collect();
    if !unforecast.is_empty() {
        warnings.push(format!(
            "{} product(s) in the actuals are in no past forecast and were not reviewed: {}",
            unforecast.len(),
            unforecast.join(", ")
        ));
    }
    for v in &result.vintages {
        if let Some(short) = &v.short_history {
            warnings.push(short.message(&v.name));
        }
    }
    for n in &result.not_reviewed {
        warnings.push(format!(
            "product '{}' of {} not reviewed: {}",
            n.product, result.vintages[n.vintage].name, n.reason
        ));
    }
    // Written into a staging copy of the folder that replaces it at the
    // end, under the folder's lock: the review's files appear together.
    let mut folder = output::FolderRun::start(&a.out)?;
    let out = super::stage(&mut folder)?;
    let limit = settings.get().adjustment_limit;
    output::write_review(&out.join("review.csv"), &result, limit)?;
    output::write_review_months(&out.join("review_months.csv"), &result)?;
    let run = serde_json::json!({
        "tool": format!("provisio {}", env!("CARGO_PKG_VERSION")),
        "command": "review",
        "actuals": source,
        "actuals_sha256": output::sha256_hex(&bytes),
        "past_dirs": a.past.iter().map(|p| p.display().to_string()).collect::<Vec<_>>(),
        "settings": settings.get(),
        "rows": cleaned0.rows,
        "warnings": warnings,
    });
    output::write_json(
        &out.join("review.json"),
        &output::review_json(&result, limit, run),
    )?;
    let ordered: Vec<&PastForecast> = result
        .vintages
        .iter()
        .filter_map(|v| pasts.iter().find(|p| p.name == v.name))
        .collect();
    let sha = output::sha256_hex(&bytes);
    let tool = format!("provisio {}", env!("CARGO_PKG_VERSION"));
    let page = provisio::report::review::ReviewPage {
        review: &result,
        pasts: &ordered,
        adjustment_limit: limit,
        actuals: &source,
        actuals_sha256: &sha,
        tool: &tool,
        warnings: &warnings,
    };
    let written = provisio::report::review::write_review_report(&out, &page)?;
    for w in &written.warnings {
        super::warn(w);
    }
    let changes_json = super::changes::review(&pasts, &result, &out)?;
    if changes_json.is_some() {
        super::say!("wrote review_changes.csv: the statistical and the adjusted forecast scored, per product and per change");
    }
    folder.commit()?;
    print_summary(&result, limit);
    super::json_summary(|| {
        let products: Vec<serde_json::Value> = result
            .products
            .iter()
            .map(|p| {
                let s = &p.scores;
                serde_json::json!({
                    "product": p.product,
                    "vintage": result.vintages.get(p.vintage).map(|v| v.name.clone()),
                    "model": p.scored_model(),
                    "forecast_scored": p.forecast_scored(),
                    "months_scored": s.months,
                    "mape_pct": s.mape,
                    "bias_pct": s.bias,
                    "wape_pct": s.wape,
                    "coverage_80_pct": s.coverage80,
                    "coverage_95_pct": s.coverage95,
                    "tracking_signal": s.tracking.map(|t| t.value),
                    "tracking_flagged": s.tracking_flagged(),
                })
            })
            .collect();
        let mut files = vec![
            "review.csv",
            "review_months.csv",
            "review.json",
            "review.html",
        ];
        if changes_json.is_some() {
            files.push("review_changes.csv");
        }
        serde_json::json!({
            "command": "review",
            "out": a.out.display().to_string(),
            "products": products,
            "changes_value_added": changes_json,
            "files": files.iter().map(|f| a.out.join(f).display().to_string()).collect::<Vec<_>>(),
            "warnings": warnings,
        })
    });
    for w in &warnings {
        super::warn(w);
    }
    super::say!(
        "reviewed {} product forecast(s) from {} vintage(s); wrote review.csv, review_months.csv, review.json, review.html and {} chart files (charts/) in {}",
        result.products.len(),
        result.vintages.len(),
        written.charts.len(),
        a.out.display()
    );
    super::say!("Decision support only: review with the responsible programme staff; national guidelines and local regulations take precedence.");
    Ok(())
}

fn print_summary(r: &review::Review, limit: f64) {
    let w = super::name_width(r.products.iter().map(|p| &p.product));
    let cut = |s: &str| super::pad(&super::truncate(s, w), w);
    let f = |v: Option<f64>, plus: bool| match v {
        Some(x) if plus => provisio::chart::fmt_signed(x),
        Some(x) => format!("{x:.1}"),
        None => "-".into(),
    };
    let several = r.vintages.len() > 1;
    for (i, v) in r.vintages.iter().enumerate() {
        super::say!(
            "vintage {}: {} (forecast {} to {})",
            i + 1,
            v.name,
            v.start,
            v.end
        );
    }
    super::say!(
        "{}  {}{:<22} {:>6} {:>7} {:>7} {:>7} {:>7} {:>7} {:>6} {:>7} {:>7}  flags",
        cut("product"),
        if several { "vint " } else { "" },
        "model",
        "months",
        "MAPE%",
        "bias%",
        "WAPE%",
        "in80%",
        "in95%",
        "TS",
        "FVA-nv",
        "FVA-sn"
    );
    for p in &r.products {
        let s = &p.scores;
        let mut flags = Vec::new();
        if s.tracking_flagged() {
            flags.push("tracking");
        }
        if s.coverage80_short() || s.coverage95_short() {
            flags.push("coverage");
        }
        for nb in s.naive_better() {
            flags.push(match nb.short {
                "naive" => "naive-better",
                _ => "seasonal-naive-better",
            });
        }
        if p.history_audit.flagged || p.period_audit.flagged {
            flags.push("heavily-cleaned");
        }
        let closest = r
            .comparisons
            .iter()
            .find(|c| c.product == p.product)
            .is_some_and(|c| c.closest == Some(p.vintage));
        if closest {
            flags.push("closest");
        }
        super::say!(
            "{}  {}{:<22} {:>6} {:>7} {:>7} {:>7} {:>7} {:>7} {:>6} {:>7} {:>7}  {}",
            cut(&p.product),
            if several {
                format!("{:<5}", p.vintage + 1)
            } else {
                String::new()
            },
            super::truncate(p.scored_model(), 22),
            format!("{}/{}", s.months, p.months.len()),
            f(s.mape, false),
            f(s.bias, true),
            f(s.wape, false),
            f(s.coverage80, false),
            f(s.coverage95, false),
            f(s.tracking.map(|t| t.value), true),
            f(s.fva_naive(), true),
            f(s.fva_seasonal_naive(), true),
            flags.join(" ")
        );
    }
    super::say!(
        "(months: scored/with actuals; bias > 0 = over-forecast; TS: tracking signal, flagged beyond ±2.46 √months, the 5% chance bound (8.5 over 12 months); FVA-nv / FVA-sn: WAPE of the naive (same as the last month) / seasonal naive (same month a year before) forecast made at the same time minus the model's, > 0 = the model added value; naive-better / seasonal-naive-better: lower WAPE and closer in more months than chance explains (sign test p ≤ 0.05); heavily-cleaned: over {:.0}% of the volume changed by cleaning, not as reported)",
        100.0 * limit
    );
}
