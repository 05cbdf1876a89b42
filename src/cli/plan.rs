//! `provisio plan FORECAST_DIR --stock STOCK [--on-order FILE]`: project
//! stock month by month from a forecast and propose orders.

use std::collections::HashSet;
use std::path::PathBuf;

use clap::{Args, ValueEnum};

use provisio::output;
use provisio::plan::{self, read, Level, LogEntry, PlanSettings, PlannedSeries, Safety};

#[derive(Args, Debug)]
pub struct PlanArgs {
    /// Output directory of `provisio forecast`; the plan is written into it.
    #[arg(value_name = "FORECAST_DIR")]
    dir: PathBuf,
    /// Stock file (CSV): one row per product (or product and site) with stock on hand, its month, lead time, min/max months, review period, pack size, unit cost.
    #[arg(long, value_name = "STOCK")]
    stock: PathBuf,
    /// Shipments on order (CSV): product, site (optional), quantity, arrival_month.
    #[arg(long, value_name = "FILE")]
    on_order: Option<PathBuf>,
    /// Months of forecast averaged into the AMC (from the month after each month-end on).
    #[arg(long, default_value_t = plan::DEFAULT_AMC_MONTHS, value_name = "MONTHS")]
    amc_months: usize,
    /// How the ordering minimum and maximum are set: fixed months from the stock file, or a safety stock from the forecast's upper 80% / 95% bound.
    #[arg(long, value_enum, default_value_t = SafetyArg::Months)]
    safety_stock: SafetyArg,
    /// How numbers are written in the stock and on-order files (the same rules as the consumption data's --numbers).
    #[arg(long, value_enum, default_value_t = super::Numbers::Plain)]
    numbers: super::Numbers,
    /// Write the plan files and stock charts only; do not rebuild report.html.
    #[arg(long)]
    no_report: bool,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
enum SafetyArg {
    /// min_months and max_months of the stock file, times the AMC.
    Months,
    /// Safety stock from the upper bound of the 80% range.
    #[value(name = "upper-80")]
    Upper80,
    /// Safety stock from the upper bound of the 95% range.
    #[value(name = "upper-95")]
    Upper95,
}

fn where_(product: &str, site: Option<&str>) -> String {
    match site {
        Some(s) => format!("product '{product}' at site '{s}'"),
        None => format!("product '{product}'"),
    }
}

pub fn run(a: PlanArgs) -> anyhow::Result<()> {
    let settings = PlanSettings {
        amc_months: a.amc_months,
        safety: match a.safety_stock {
            SafetyArg::Months => Safety::Months,
            SafetyArg::Upper80 => Safety::Upper(Level::P80),
            SafetyArg::Upper95 => Safety::Upper(Level::P95),
        },
    }
    .check()?;
    require_forecast(&a.dir)?;
    super::refuse_input_named_as_output(
        "plan",
        &a.dir,
        &[
            "plan.csv",
            "orders.csv",
            "order_totals.csv",
            "plan_log.csv",
            "plan.json",
            "report.html",
            "forecast.xlsx",
        ],
        &[
            ("--stock", Some(&a.stock)),
            ("--on-order", a.on_order.as_deref()),
        ],
    )?;
    let out = output::OutputDir::check(&a.dir, false)?;
    // Held from here: no other run writes the folder while it is planned.
    let mut folder = out.start()?;
    let forecast = read::read_forecast(&a.dir)?;
    let numbers = match a.numbers {
        super::Numbers::Plain => provisio::data::NumberFormat::Plain,
        super::Numbers::Grouped => provisio::data::NumberFormat::Grouped,
        super::Numbers::DecimalComma => provisio::data::NumberFormat::DecimalComma,
    };
    let stock_name = a.stock.display().to_string();
    let stock_bytes = std::fs::read(&a.stock)
        .map_err(|e| anyhow::anyhow!("{stock_name}: cannot read the stock file: {e}"))?;
    let (stock, mut warnings) = read::read_stock(&stock_name, &stock_bytes, numbers)?;
    // A count of stock on hand is of a month that has come.
    if let Some(now) = super::current_month() {
        if let Some(r) = stock.iter().find(|r| r.policy.stock_date > now) {
            anyhow::bail!(
                "{stock_name}:{}: column 'stock_date': {} is after the current month ({now}): stock on hand is counted, so its month cannot be one that has not come yet; check the year",
                r.line,
                r.policy.stock_date
            );
        }
    }
    // An order up to more months than the shelf life lets stock expire
    // by design.
    for r in &stock {
        if let Some(life) = r
            .policy
            .shelf_life_months
            .filter(|l| r.policy.max_months > *l)
        {
            warnings.push(format!(
                "{stock_name}:{}: '{}': max_months {} is above shelf_life_months {}: orders up to the maximum will leave stock to expire; lower max_months, or check the shelf life",
                r.line,
                r.product,
                r.policy.max_months,
                life
            ));
        }
    }
    if forecast.adjusted {
        warnings.push(format!(
            "{}: the forecast run applied a changes file; the plan uses the adjusted forecast (columns adjusted, adjusted_upper_80, adjusted_upper_95)",
            a.dir.join("forecast.csv").display()
        ));
    }
    let mut on_order = Vec::new();
    let mut on_order_sha = None;
    let on_order_name = a.on_order.as_ref().map(|p| p.display().to_string());
    if let (Some(path), Some(name)) = (&a.on_order, &on_order_name) {
        let bytes = std::fs::read(path)
            .map_err(|e| anyhow::anyhow!("{name}: cannot read the on-order file: {e}"))?;
        let (rows, w) = read::read_on_order(name, &bytes, numbers)?;
        warnings.extend(w);
        on_order = rows;
        on_order_sha = Some(output::sha256_hex(&bytes));
    }

    let mut log: Vec<LogEntry> = Vec::new();
    let mut planned: Vec<PlannedSeries> = Vec::new();
    let stock_keys: HashSet<(String, Option<String>)> = stock
        .iter()
        .map(|r| (r.product.clone(), r.site.clone()))
        .collect();
    for r in &stock {
        let who = where_(&r.product, r.site.as_deref());
        let entry = |action: &'static str, reason: String| LogEntry {
            file: stock_name.clone(),
            line: Some(r.line),
            product: r.product.clone(),
            site: r.site.clone(),
            action,
            reason,
        };
        for why in policy_notes(r, &forecast, &a.dir) {
            warnings.push(format!("{stock_name}:{}: {who}: {why}", r.line));
            log.push(entry("note", why));
        }
        let arrivals: Vec<(u64, plan::Arrival)> = on_order
            .iter()
            .filter(|o| o.product == r.product && o.site == r.site)
            .map(|o| (o.line, o.arrival))
            .collect();
        let result = forecast
            .for_key(&r.product, r.site.as_deref())
            .and_then(|fc| {
                let only: Vec<plan::Arrival> = arrivals.iter().map(|a| a.1).collect();
                plan::plan_series(&r.policy, &fc, &only, &settings)
                    .map(|p| (fc, p))
                    .map_err(|e| e.0)
            });
        match result {
            Err(why) => {
                warnings.push(format!("{stock_name}:{}: {who} not planned: {why}", r.line));
                log.push(entry("not planned", why));
                // Its shipments are not used either: say so, line by line.
                let name = on_order_name.clone().unwrap_or_default();
                for (line, arr) in &arrivals {
                    let reason = format!(
                        "its stock row ({stock_name} line {}) was not planned, so the shipment is not used",
                        r.line
                    );
                    warnings.push(format!(
                        "{name}:{line}: shipment of {} for {who} ignored: {reason}",
                        output::fmt_num(arr.quantity)
                    ));
                    log.push(LogEntry {
                        file: name.clone(),
                        line: Some(*line),
                        product: r.product.clone(),
                        site: r.site.clone(),
                        action: "ignored",
                        reason,
                    });
                }
            }
            Ok((fc, p)) => {
                if p.skipped_forecast_months > 0 {
                    let why = format!(
                        "the stock count (end of {}) is taken after the forecast starts ({}): the {} forecast month(s) {} are not used",
                        r.policy.stock_date,
                        fc.start,
                        p.skipped_forecast_months,
                        if p.skipped_forecast_months == 1 {
                            format!("of {}", fc.start)
                        } else {
                            format!("{} to {}", fc.start, r.policy.stock_date)
                        }
                    );
                    warnings.push(format!("{stock_name}:{}: {who}: {why}", r.line));
                    log.push(entry("note", why));
                }
                if let Some(why) = expiry_note(&p, &r.policy) {
                    warnings.push(format!("{stock_name}:{}: {who}: {why}", r.line));
                    log.push(entry("note", why));
                }
                for (arr, why) in &p.ignored_arrivals {
                    let line = arrivals.iter().find(|x| x.1 == *arr).map(|x| x.0);
                    let name = on_order_name.clone().unwrap_or_default();
                    warnings.push(format!(
                        "{name}:{}: shipment of {} for {who} ignored: {why}",
                        line.unwrap_or(0),
                        output::fmt_num(arr.quantity)
                    ));
                    log.push(LogEntry {
                        file: name,
                        line,
                        product: r.product.clone(),
                        site: r.site.clone(),
                        action: "ignored",
                        reason: why.clone(),
                    });
                }
                planned.push(PlannedSeries {
                    product: r.product.clone(),
                    site: r.site.clone(),
                    policy: r.policy.clone(),
                    plan: p,
                });
            }
        }
    }
    for o in &on_order {
        if !stock_keys.contains(&(o.product.clone(), o.site.clone())) {
            let name = on_order_name.clone().unwrap_or_default();
            let hint = provisio::config::did_you_mean(
                &o.product,
                stock.iter().map(|r| r.product.as_str()),
                "",
            );
            let why = format!(
                "no row of the stock file for {}{hint}; the shipment is not used",
                where_(&o.product, o.site.as_deref())
            );
            warnings.push(format!("{name}:{}: {why}", o.line));
            log.push(LogEntry {
                file: name,
                line: Some(o.line),
                product: o.product.clone(),
                site: o.site.clone(),
                action: "ignored",
                reason: why,
            });
        }
    }
    for p in &forecast.products {
        if !stock.iter().any(|r| &r.product == p) {
            let why = "in the forecast but not in the stock file: not planned".to_string();
            warnings.push(format!("product '{p}': {why}"));
            log.push(LogEntry {
                file: a.dir.join("forecast.csv").display().to_string(),
                line: None,
                product: p.clone(),
                site: None,
                action: "not planned",
                reason: why,
            });
        }
    }
    if planned.is_empty() {
        for w in &warnings {
            super::warn(w);
        }
        let first = log
            .iter()
            .find(|e| e.action == "not planned")
            .map(|e| format!("; {}: {}", where_(&e.product, e.site.as_deref()), e.reason))
            .unwrap_or_default();
        anyhow::bail!(
            "{stock_name}: no row could be planned against the forecast in {}{first}",
            a.dir.display()
        );
    }

    // Written into a staging copy of the folder that replaces it at the
    // end: the plan, the charts, the report and the workbook together.
    let dir = super::stage(&mut folder)?;
    // This plan replaces the earlier one whole: the earlier plan's stock
    // charts go with it, so a series left out now keeps no chart of the
    // old plan (only the files that plan named: a product chart is kept).
    if let Ok(Some(old)) = provisio::report::plan::read_plan(&dir) {
        for (k, _) in &old.series {
            let stem = provisio::report::plan::series_stem(k);
            for ext in ["png", "svg"] {
                let f = dir.join("charts").join(format!("{stem}.{ext}"));
                if f.is_file() {
                    std::fs::remove_file(&f).map_err(|err| {
                        anyhow::anyhow!(
                            "{}: cannot replace the earlier plan's chart: {err}",
                            f.display()
                        )
                    })?;
                }
            }
        }
    }
    let rule = settings.get().safety.rule();
    output::write_plan(&dir.join("plan.csv"), &planned)?;
    output::write_orders(
        &dir.join("orders.csv"),
        &planned,
        settings.get().safety.name(),
    )?;
    output::write_order_totals(&dir.join("order_totals.csv"), &planned)?;
    output::write_plan_log(&dir.join("plan_log.csv"), &log)?;
    let amc_rule = format!(
        "AMC at the end of a month = mean forecast consumption of the next {} month(s) (near the end of the horizon, the last {} forecast months); plan.csv names the months (amc_from, amc_to); months of stock = closing stock ÷ AMC",
        settings.get().amc_months, settings.get().amc_months
    );
    let series_rule = if forecast.per_site {
        "the forecast is per site: a stock row with a site is planned against that site's forecast; a row without a site against the sum of the product's sites (upper bounds summed)"
    } else {
        "the forecast is per product (sites summed): one plan per product; stock rows must leave site empty"
    };
    let run = serde_json::json!({
        "tool": format!("provisio {}", env!("CARGO_PKG_VERSION")),
        "command": "plan",
        "forecast_dir": a.dir.display().to_string(),
        "stock_file": stock_name,
        "stock_sha256": output::sha256_hex(&stock_bytes),
        "forecast_sha256": std::fs::read(a.dir.join("forecast.csv")).ok().map(|b| output::sha256_hex(&b)),
        "on_order_file": on_order_name,
        "on_order_sha256": on_order_sha,
        "settings": {
            "amc_months": settings.get().amc_months,
            "safety_stock": settings.get().safety.name(),
        },
        "rules": {
            "balance": "stock on hand is counted at the end of stock_date; each month closing = max(0, opening + arrivals − consumption), the rest is the quantity short; arrivals are available for the whole month they arrive in",
            "amc": amc_rule,
            "orders": format!("reviews every review_period_months from the first projected month; an order placed at a review arrives lead_time_months later and covers one review period; {rule}; rounded up to whole packs; cost = quantity × unit_cost"),
            "series": series_rule,
        },
        "series_planned": planned.len(),
        "log_entries": log.len(),
        "warnings": warnings,
    });
    output::write_json(&dir.join("plan.json"), &run)?;
    let charts = if a.no_report {
        let charts_dir = dir.join("charts");
        std::fs::create_dir_all(&charts_dir)
            .map_err(|e| anyhow::anyhow!("{}: cannot create: {e}", charts_dir.display()))?;
        match provisio::report::plan::read_plan(&dir)? {
            Some(p) => {
                let files = provisio::report::plan::draw_charts(&p, &charts_dir)?.1;
                let names = p.series.iter().map(|(k, _)| k.0.as_str());
                if let (false, Some(w)) =
                    (files.is_empty(), provisio::chart::png_names_warning(names))
                {
                    super::warn(&w);
                }
                files.len()
            }
            None => 0,
        }
    } else {
        for w in provisio::report::write_report(&dir)?.warnings {
            super::warn(&w);
        }
        planned.len() * 2
    };
    // The planner's workbook gets the plan's sheets (Supply plan, Orders,
    // Order totals) when the forecast wrote one.
    let workbook = dir.join(provisio::report::workbook::WORKBOOK_FILE);
    let rebuilt_workbook = workbook.is_file();
    if rebuilt_workbook {
        provisio::report::workbook::write_workbook(&dir)?;
    }
    folder.commit()?;
    print_summary(&planned);
    super::json_summary(|| {
        let files = [
            "plan.csv",
            "orders.csv",
            "order_totals.csv",
            "plan_log.csv",
            "plan.json",
        ];
        serde_json::json!({
            "command": "plan",
            "dir": a.dir.display().to_string(),
            "series_planned": planned.len(),
            "series": planned.iter().map(|s| serde_json::json!({"product": s.product, "site": s.site})).collect::<Vec<_>>(),
            "log_entries": log.len(),
            "files": files.iter().map(|f| out.join(f).display().to_string()).collect::<Vec<_>>(),
            "warnings": warnings,
        })
    });
    for w in &warnings {
        super::warn(w);
    }
    super::say!(
        "planned {} series; wrote plan.csv, orders.csv, order_totals.csv, plan_log.csv ({} entries), plan.json and {} stock chart files (charts/plan-*){}{} in {}",
        planned.len(),
        log.len(),
        charts,
        if a.no_report { "" } else { ", and rebuilt report.html" },
        if rebuilt_workbook { "; forecast.xlsx now has the sheets Supply plan, Orders and Order totals" } else { "" },
        a.dir.display()
    );
    super::say!("Decision support only: review proposed orders with the responsible programme staff; national guidelines and local regulations take precedence.");
    Ok(())
}

/// Refuses a folder without a forecast, saying so (before anything is
/// read or written there).
fn require_forecast(dir: &std::path::Path) -> anyhow::Result<()> {
    if !dir.is_dir() {
        anyhow::bail!(
            "{}: no such folder; give the output folder of `provisio forecast` (run `provisio forecast DATA --out {}` first)",
            dir.display(),
            dir.display()
        );
    }
    if !dir.join("forecast.csv").is_file() {
        anyhow::bail!(
            "{}: no forecast in this folder (no forecast.csv); plan works from the output folder of `provisio forecast`: run `provisio forecast DATA --out {}` first, then plan it",
            dir.display(),
            dir.display()
        );
    }
    Ok(())
}

/// Notes on a stock row's policy, before planning: a pack size that
/// differs from the run configuration's (as `forecast.csv` gives it), a
/// minimum below the lead time plus a safety margin, and a maximum below
/// the minimum plus the review period.
fn policy_notes(
    r: &read::StockRow,
    forecast: &read::ForecastSeries,
    dir: &std::path::Path,
) -> Vec<String> {
    let mut notes = Vec::new();
    if let Some((size, line)) = forecast.pack_sizes.get(&r.product) {
        if *size != r.policy.pack_size {
            notes.push(format!(
                "pack_size {} differs from the run configuration's pack_size {} ({} line {}); orders are rounded to the stock file's packs of {}, while forecast.csv counts packs of {}: check which is right",
                output::fmt_num(r.policy.pack_size),
                output::fmt_num(*size),
                dir.join("forecast.csv").display(),
                line,
                output::fmt_num(r.policy.pack_size),
                output::fmt_num(*size),
            ));
        }
    }
    if let Some(why) = plan::minimum_below_lead_time(&r.policy) {
        notes.push(why);
    }
    if let Some(why) = plan::maximum_below_minimum_plus_review(&r.policy) {
        notes.push(why);
    }
    notes
}

/// The largest quantity expected to expire over the projection, with its
/// month, when any.
fn expiry_note(p: &plan::SeriesPlan, policy: &plan::Policy) -> Option<String> {
    let worst = p
        .months
        .iter()
        .filter(|m| m.expiring > 0.0)
        .max_by(|a, b| a.expiring.total_cmp(&b.expiring))?;
    let first = p.months.iter().find(|m| m.expiring > 0.0)?;
    Some(format!(
        "about {} units expected to expire (stock above the AMC × shelf life of {} months, at {}; from {} on; plan.csv column expiring)",
        provisio::chart::fmt_quantity(worst.expiring),
        output::fmt_num(policy.shelf_life_months.unwrap_or(0.0)),
        worst.month,
        first.month
    ))
}

/// The projected stockout months of a series in words ("none" without).
fn stockout_text(s: &PlannedSeries) -> String {
    let out: Vec<_> = s.plan.stockout_months().map(|m| m.month).collect();
    if out.is_empty() {
        "none".to_string()
    } else {
        provisio::calendar::describe_months(&out)
    }
}

fn print_summary(planned: &[PlannedSeries]) {
    let name = |s: &PlannedSeries| match &s.site {
        Some(site) => format!("{} @ {site}", s.product),
        None => s.product.clone(),
    };
    let w = super::name_width(planned.iter().map(name));
    let cut = |s: &str| super::pad(&super::truncate(s, w), w);
    let sw = planned
        .iter()
        .map(|s| stockout_text(s).chars().count())
        .max()
        .unwrap_or(0)
        .max(8);
    super::say!(
        "{}  {:>9} {:>6}  {:<sw$} {:>9} {:>5} {:>6} {:>10} {:>12}",
        cut("product"),
        "on hand",
        "MOS",
        "stockout",
        "short",
        ">max",
        "orders",
        "quantity",
        "cost"
    );
    for s in planned {
        let m = &s.plan.months;
        let stockout = stockout_text(s);
        let mos0 = m
            .first()
            .and_then(|f| plan::months_of_stock(f.opening, f.amc))
            .map(|v| format!("{v:.1}"))
            .unwrap_or_else(|| "-".into());
        let above = m
            .iter()
            .filter(|x| x.flags.contains(&plan::Flag::AboveMax))
            .count();
        super::say!(
            "{}  {:>9} {:>6}  {:<sw$} {:>9} {:>5} {:>6} {:>10} {:>12}",
            cut(&name(s)),
            provisio::chart::fmt_quantity(s.policy.stock_on_hand),
            mos0,
            stockout,
            provisio::chart::fmt_quantity(m.iter().map(|x| x.short).sum()),
            above,
            s.plan.orders.len(),
            provisio::chart::fmt_quantity(s.plan.orders.iter().map(|o| o.quantity).sum()),
            provisio::chart::fmt_quantity(s.plan.orders.iter().map(|o| o.cost).sum()),
        );
    }
    super::say!("(MOS: months of stock at the start = stock on hand ÷ AMC of the first projected month; stockout: months with projected stock at zero; short: quantity not covered; >max: months above the maximum)");
}
