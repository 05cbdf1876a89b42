//! The supply plan section of the report: read back from `plan.csv`,
//! `orders.csv` and `plan.json` when `provisio plan` has written them into
//! the forecast's folder, so `provisio report DIR` keeps the section.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::calendar::{describe_months, YearMonth};
use crate::chart::{self, StockChart, StockMonth};
use crate::error::Result;
use crate::plan::read::SeriesKey;

use super::html::{escape, Cell, Kind, Table as HtmlTable};
use super::read::{text, Table};

/// One month of `plan.csv` as read back.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanRow {
    /// Month.
    pub month: YearMonth,
    /// Opening stock.
    pub opening: f64,
    /// Forecast consumption.
    pub consumption: f64,
    /// Arrivals on order.
    pub on_order: f64,
    /// Arrivals of proposed orders.
    pub planned: f64,
    /// Closing stock.
    pub closing: f64,
    /// Quantity short.
    pub short: f64,
    /// AMC.
    pub amc: f64,
    /// Months of stock.
    pub months_of_stock: Option<f64>,
    /// Minimum months.
    pub min_months: f64,
    /// Maximum months.
    pub max_months: f64,
    /// Emergency months.
    pub emergency_months: Option<f64>,
    /// Flags, space-separated ("ok" when none).
    pub flag: String,
    /// Quantity expected to expire before use (0 when none; plans written
    /// before the `expiring` column read as 0).
    pub expiring: f64,
}

/// One row of `orders.csv` as read back.
#[derive(Debug, Clone, PartialEq)]
pub struct OrderRow {
    /// Order month.
    pub order_month: YearMonth,
    /// Arrival month.
    pub arrival_month: YearMonth,
    /// Last month covered.
    pub covers_to: String,
    /// Quantity.
    pub quantity: f64,
    /// Packs.
    pub packs: f64,
    /// Cost.
    pub cost: f64,
}

/// A series' plan as read back.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PlanSeries {
    /// Months.
    pub months: Vec<PlanRow>,
    /// Orders.
    pub orders: Vec<OrderRow>,
}

/// The plan files read back.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanRead {
    /// `plan.json`, when present.
    pub run: serde_json::Value,
    /// Per series, in file order of `plan.csv`.
    pub series: Vec<(SeriesKey, PlanSeries)>,
    /// `forecast.csv` has changed since the plan was made (its SHA-256
    /// differs from the one in `plan.json`): the plan is out of date.
    pub stale: bool,
    /// The unit each product is counted in (`forecast.csv`'s `units`),
    /// for the products that have one.
    pub units: std::collections::HashMap<String, String>,
}

/// Reads the plan files of `dir`; `None` when it has no `plan.csv`.
pub fn read_plan(dir: &Path) -> Result<Option<PlanRead>> {
    let Some(mut t) = Table::read(dir, "plan.csv")? else {
        return Ok(None);
    };
    let names = [
        "product",
        "site",
        "month",
        "opening",
        "consumption",
        "arrivals_on_order",
        "arrivals_planned",
        "closing",
        "short",
        "amc",
        "months_of_stock",
        "min_months",
        "max_months",
        "emergency_months",
        "flag",
    ];
    let c = t.cols(names)?;
    let expiring = t.col_opt("expiring");
    let mut series: Vec<(SeriesKey, PlanSeries)> = Vec::new();
    let mut index: BTreeMap<SeriesKey, usize> = BTreeMap::new();
    let key = |rec: &csv::StringRecord, p: usize, s: usize| -> SeriesKey {
        let site = text(rec, s);
        (text(rec, p), (!site.is_empty()).then_some(site))
    };
    t.each(|t, line, rec| {
        let n = |k: usize| t.num(line, rec, c[k], names[k]);
        let z = |k: usize| n(k).map(|v| v.unwrap_or(0.0));
        let row = PlanRow {
            month: t.month(line, rec, c[2], names[2])?,
            opening: z(3)?,
            consumption: z(4)?,
            on_order: z(5)?,
            planned: z(6)?,
            closing: z(7)?,
            short: z(8)?,
            amc: z(9)?,
            months_of_stock: n(10)?,
            min_months: z(11)?,
            max_months: z(12)?,
            emergency_months: n(13)?,
            flag: text(rec, c[14]),
            expiring: match expiring {
                Some(e) => t.num(line, rec, e, "expiring")?.unwrap_or(0.0),
                None => 0.0,
            },
        };
        let k = key(rec, c[0], c[1]);
        let i = *index.entry(k.clone()).or_insert_with(|| {
            series.push((k, PlanSeries::default()));
            series.len() - 1
        });
        series[i].1.months.push(row);
        Ok(())
    })?;
    if let Some(mut t) = Table::read(dir, "orders.csv")? {
        let names = [
            "product",
            "site",
            "order_month",
            "arrival_month",
            "covers_to",
            "quantity",
            "packs",
            "cost",
        ];
        let c = t.cols(names)?;
        t.each(|t, line, rec| {
            let Some(&i) = index.get(&key(rec, c[0], c[1])) else {
                return Ok(());
            };
            let z = |k: usize| t.num(line, rec, c[k], names[k]).map(|v| v.unwrap_or(0.0));
            series[i].1.orders.push(OrderRow {
                order_month: t.month(line, rec, c[2], names[2])?,
                arrival_month: t.month(line, rec, c[3], names[3])?,
                covers_to: text(rec, c[4]),
                quantity: z(5)?,
                packs: z(6)?,
                cost: z(7)?,
            });
            Ok(())
        })?;
    }
    let run = std::fs::read(dir.join("plan.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .unwrap_or(serde_json::Value::Null);
    let stale = made_from_another_forecast(dir, &run);
    let units = super::read_units(dir)?;
    Ok(Some(PlanRead {
        run,
        series,
        stale,
        units,
    }))
}

/// Whether `forecast.csv` in `dir` differs from the one the plan
/// (`plan.json`, given as `run`) was made from: its SHA-256 no longer
/// matches, or it cannot be read.
pub(crate) fn made_from_another_forecast(dir: &Path, run: &serde_json::Value) -> bool {
    match run.get("forecast_sha256").and_then(|v| v.as_str()) {
        Some(made_from) => std::fs::read(dir.join("forecast.csv"))
            .map(|b| crate::output::sha256_hex(&b) != made_from)
            .unwrap_or(true),
        None => false,
    }
}

/// Title of a series: the product, and its site.
pub fn series_title(k: &SeriesKey) -> String {
    match &k.1 {
        Some(s) => format!("{} — {s}", k.0),
        None => k.0.clone(),
    }
}

/// File stem of a series' stock chart (`plan-` + the usual product stem).
pub fn series_stem(k: &SeriesKey) -> String {
    let name = match &k.1 {
        Some(s) => format!("{}\u{1f}{s}", k.0),
        None => k.0.clone(),
    };
    format!("plan-{}", chart::file_stem(&name))
}

/// The stock chart of a series, from its rows; `units` is the unit the
/// product is counted in (`None`: base units).
pub fn stock_chart(k: &SeriesKey, s: &PlanSeries, units: Option<&str>) -> StockChart {
    let unit = chart::units_plural(units);
    let first = s.months.first();
    let count_month = first
        .map(|m| m.month.plus(-1))
        .unwrap_or(YearMonth::known(2000, 1));
    let stock_on_hand = first.map(|m| m.opening).unwrap_or(0.0);
    let short: f64 = s.months.iter().map(|m| m.short).sum();
    let total: f64 = s.orders.iter().map(|o| o.quantity).sum();
    let mut subtitle = format!(
        "stock on hand {} at the end of {}",
        chart::fmt_quantity(stock_on_hand),
        chart::month_label(count_month)
    );
    if let Some(m) = first {
        let _ = write!(
            subtitle,
            " · min {} / max {} months of AMC",
            m.min_months, m.max_months
        );
    }
    if s.orders.is_empty() {
        subtitle.push_str(" · no order proposed");
    } else {
        let _ = write!(
            subtitle,
            " · {} proposed order(s), {} {unit}",
            s.orders.len(),
            chart::fmt_quantity(total)
        );
    }
    if short > 0.0 {
        let _ = write!(subtitle, " · short {}", chart::fmt_quantity(short));
    }
    let expiry = s
        .months
        .iter()
        .filter(|m| m.flag.split(' ').any(|f| f == "expiry-risk"))
        .count();
    if s.months.iter().any(|m| m.expiring > 0.0) {
        // Drawn as the top of those months' columns (what stands above
        // AMC × shelf life), so the count refers to something visible.
        let _ = write!(
            subtitle,
            " · {expiry} month(s) with stock expected to expire"
        );
    } else if expiry > 0 {
        let _ = write!(
            subtitle,
            " · {expiry} month(s) above shelf life (expiry risk; see the table)"
        );
    }
    StockChart {
        title: series_title(k),
        subtitle,
        stock_on_hand,
        count_month,
        units: units.map(str::to_string),
        months: s
            .months
            .iter()
            .map(|m| StockMonth {
                month: m.month,
                closing: m.closing,
                short: m.short,
                stockout: m.flag.split(' ').any(|f| f == "stockout"),
                above_max: m.flag.split(' ').any(|f| f == "above-max"),
                min_qty: m.min_months * m.amc,
                max_qty: m.max_months * m.amc,
                emergency_qty: m.emergency_months.map(|e| e * m.amc),
                on_order: m.on_order,
                planned: m.planned,
                expiring: m.expiring,
                order_placed: s.orders.iter().any(|o| o.order_month == m.month),
            })
            .collect(),
    }
}

/// Draws every series' stock chart (PNG and SVG) into `charts_dir`;
/// returns the SVGs (same order as the series) and the files written;
/// none when the plan is out of date.
pub fn draw_charts(plan: &PlanRead, charts_dir: &Path) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let mut svgs = Vec::new();
    let mut files = Vec::new();
    if plan.stale {
        return Ok((svgs, files));
    }
    for (k, s) in &plan.series {
        let c = stock_chart(k, s, plan.units.get(&k.0).map(String::as_str));
        let stem = series_stem(k);
        let svg = chart::stock_svg(&c)?;
        let svg_path = charts_dir.join(format!("{stem}.svg"));
        crate::output::write_atomic(&svg_path, |w| w.write_all(svg.as_bytes()))?;
        let png_path = charts_dir.join(format!("{stem}.png"));
        chart::stock_png(&png_path, &c)?;
        files.push(png_path);
        files.push(svg_path);
        svgs.push(svg);
    }
    Ok((svgs, files))
}

fn q(v: f64) -> String {
    chart::fmt_quantity(v)
}

/// The note that replaces the section when the forecast has changed since
/// the plan was made.
pub const STALE_NOTE: &str = "The plan files in this folder (plan.csv, orders.csv) were made from an earlier forecast.csv: its SHA-256 differs from the one recorded in plan.json. They are not shown; run `provisio plan` again on this folder.";

/// The HTML of the supply plan section (without its heading).
pub fn section(plan: &PlanRead, svgs: &[String]) -> String {
    let mut b = String::new();
    if plan.stale {
        let _ = writeln!(
            b,
            "<div class=\"caution\" role=\"note\"><strong>Out of date.</strong> {}</div>",
            escape(STALE_NOTE)
        );
        return b;
    }
    let j = |path: &[&str]| {
        let mut cur = &plan.run;
        for k in path {
            cur = match cur.get(k) {
                Some(x) => x,
                None => return String::new(),
            };
        }
        match cur {
            serde_json::Value::String(s) => s.clone(),
            serde_json::Value::Null => String::new(),
            v => v.to_string(),
        }
    };
    b.push_str("<div class=\"caution\" role=\"note\"><strong>Caution.</strong> Proposed orders are decision support computed from a forecast and a stock file: review quantities, dates and costs with the responsible programme staff before ordering; national guidelines and local regulations take precedence.</div>\n");
    let facts = [
        ("Stock file", j(&["stock_file"])),
        ("Stock file SHA-256", j(&["stock_sha256"])),
        ("Shipments on order", j(&["on_order_file"])),
        ("Stock balance", j(&["rules", "balance"])),
        ("AMC", j(&["rules", "amc"])),
        ("Ordering rule", j(&["rules", "orders"])),
        ("Series", j(&["rules", "series"])),
    ];
    b.push_str("<dl class=\"facts\">");
    for (k, v) in facts.iter().filter(|(_, v)| !v.is_empty()) {
        let _ = write!(b, "<dt>{}</dt><dd>{}</dd>", escape(k), escape(v));
    }
    b.push_str("</dl>\n");
    if let Some(w) = plan.run.get("warnings").and_then(|w| w.as_array()) {
        if !w.is_empty() {
            b.push_str("<h3>Warnings about the plan</h3><ul class=\"warn\">");
            for x in w.iter().filter_map(|x| x.as_str()) {
                let _ = write!(b, "<li>{}</li>", escape(x));
            }
            b.push_str("</ul>\n<p class=\"note\">Each is also a row of plan_log.csv.</p>\n");
        }
    }
    let sites = plan.series.iter().any(|(k, _)| k.1.is_some());
    let mut columns = vec![("product", Kind::Text)];
    if sites {
        columns.push(("site", Kind::Text));
    }
    columns.extend([
        ("stock on hand", Kind::Num),
        ("months of stock at start", Kind::Num),
        ("stockout months", Kind::Text),
        ("quantity short", Kind::Num),
        ("months above max", Kind::Num),
        ("months at expiry risk", Kind::Num),
        ("orders", Kind::Num),
        ("quantity ordered", Kind::Num),
        ("cost", Kind::Num),
    ]);
    let mut t = HtmlTable::new(&columns, true);
    for (k, s) in &plan.series {
        let has = |f: &'static str| {
            s.months
                .iter()
                .filter(move |m| m.flag.split(' ').any(|x| x == f))
        };
        let out: Vec<YearMonth> = has("stockout").map(|m| m.month).collect();
        let first = s.months.first();
        let mos0 = first.and_then(|m| (m.amc > 0.0).then(|| m.opening / m.amc));
        let mut cells = vec![Cell::html(
            format!("<a href=\"#{}\">{}</a>", series_stem(k), escape(&k.0)),
            &k.0,
        )];
        if sites {
            cells.push(Cell::text(k.1.as_deref().unwrap_or("")));
        }
        cells.extend([
            Cell::num(first.map(|m| m.opening), q),
            Cell::num(mos0, |v| format!("{v:.1}")),
            if out.is_empty() {
                Cell::text("none")
            } else {
                Cell::html(
                    format!(
                        "<span class=\"pill bad\">stockout</span> {}",
                        escape(&describe_months(&out))
                    ),
                    &describe_months(&out),
                )
            },
            Cell::num(Some(s.months.iter().map(|m| m.short).sum()), q),
            Cell::num(Some(has("above-max").count() as f64), |v| format!("{v:.0}")),
            Cell::num(Some(has("expiry-risk").count() as f64), |v| {
                format!("{v:.0}")
            }),
            Cell::num(Some(s.orders.len() as f64), |v| format!("{v:.0}")),
            Cell::num(Some(s.orders.iter().map(|o| o.quantity).sum()), q),
            Cell::num(Some(s.orders.iter().map(|o| o.cost).sum()), q),
        ]);
        t.row((!out.is_empty()).then_some("chosen"), cells);
    }
    b.push_str("<p class=\"note\">One row per planned series; rows with a projected stockout are highlighted. Months of stock at start: stock on hand ÷ the AMC of the first projected month.</p>\n");
    b.push_str(&t.html());
    for ((k, s), svg) in plan.series.iter().zip(svgs) {
        let stem = series_stem(k);
        let _ = writeln!(
            b,
            "<section class=\"product\" id=\"{stem}\"><h2>Stock plan: {}</h2>",
            escape(&series_title(k))
        );
        let _ = writeln!(
            b,
            "<figure class=\"chart\" role=\"img\" aria-label=\"Stock chart of {}\">{svg}<figcaption>Projected closing stock in {}, one column a month coloured against the minimum and maximum (min and max months × AMC, drawn as lines with the emergency point), arrivals as stems, order months on the axis, stock expected to expire before use as the top of its column, and projected stockout months shaded with the quantity short written in them. Files: <a href=\"charts/{stem}.png\">PNG</a>, <a href=\"charts/{stem}.svg\">SVG</a>.</figcaption></figure>",
            escape(&series_title(k)),
            escape(&chart::units_plural(plan.units.get(&k.0).map(String::as_str)))
        );
        if s.orders.is_empty() {
            b.push_str("<p class=\"note\">No order proposed over the horizon.</p>\n");
        } else {
            let mut o = HtmlTable::new(
                &[
                    ("order month", Kind::Text),
                    ("arrival month", Kind::Text),
                    ("covers to", Kind::Text),
                    ("quantity", Kind::Num),
                    ("packs", Kind::Num),
                    ("cost", Kind::Num),
                ],
                false,
            );
            for r in &s.orders {
                o.row(
                    None,
                    vec![
                        Cell::text(&r.order_month.to_string()),
                        Cell::text(&r.arrival_month.to_string()),
                        Cell::text(&r.covers_to),
                        Cell::num(Some(r.quantity), q),
                        Cell::num(Some(r.packs), q),
                        Cell::num(Some(r.cost), q),
                    ],
                );
            }
            b.push_str("<h3>Proposed orders</h3>\n");
            b.push_str(&o.html());
        }
        let mut m = HtmlTable::new(
            &[
                ("month", Kind::Text),
                ("opening", Kind::Num),
                ("consumption", Kind::Num),
                ("arrivals", Kind::Num),
                ("closing", Kind::Num),
                ("short", Kind::Num),
                ("AMC", Kind::Num),
                ("months of stock", Kind::Num),
                ("flag", Kind::Text),
            ],
            false,
        );
        for r in &s.months {
            m.row(
                None,
                vec![
                    Cell::text(&r.month.to_string()),
                    Cell::num(Some(r.opening), q),
                    Cell::num(Some(r.consumption), q),
                    Cell::num(Some(r.on_order + r.planned), q),
                    Cell::num(Some(r.closing), q),
                    Cell::num(Some(r.short), q),
                    Cell::num(Some(r.amc), q),
                    Cell::num(r.months_of_stock, |v| format!("{v:.1}")),
                    Cell::text(&r.flag),
                ],
            );
        }
        b.push_str("<details><summary>Month by month</summary>\n");
        b.push_str(&m.html());
        b.push_str("</details>\n</section>\n");
    }
    b
}
