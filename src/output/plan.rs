//! The tables written by `plan`.

use std::path::Path;

use super::{csv_text, fmt_num, fmt_opt, write_atomic};
use crate::error::Result;
use crate::plan::{year_totals, LogEntry, PlannedSeries};

fn io_err(e: csv::Error) -> std::io::Error {
    std::io::Error::other(e)
}

/// Columns of `plan.csv`.
pub const PLAN_COLUMNS: [&str; 19] = [
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
    "amc_from",
    "amc_to",
    "months_of_stock",
    "min_months",
    "max_months",
    "emergency_months",
    "within_lead_time",
    "flag",
    "expiring",
];

/// `plan.csv`: one row per series and projected month.
pub fn write_plan(path: &Path, series: &[PlannedSeries]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record(PLAN_COLUMNS).map_err(io_err)?;
        for s in series {
            for m in &s.plan.months {
                let flag = m
                    .flags
                    .iter()
                    .map(|f| f.name())
                    .collect::<Vec<_>>()
                    .join(" ");
                c.write_record([
                    &*csv_text(&s.product),
                    &*csv_text(s.site.as_deref().unwrap_or("")),
                    &m.month.to_string(),
                    &fmt_num(m.opening),
                    &fmt_num(m.consumption),
                    &fmt_num(m.arrivals_on_order),
                    &fmt_num(m.arrivals_planned),
                    &fmt_num(m.closing),
                    &fmt_num(m.short),
                    &fmt_num(m.amc),
                    &m.amc_months.0.to_string(),
                    &m.amc_months.1.to_string(),
                    &fmt_opt(m.months_of_stock.map(|v| (v * 100.0).round() / 100.0)),
                    &fmt_num(s.policy.min_months),
                    &fmt_num(s.policy.max_months),
                    &fmt_opt(s.policy.emergency_months),
                    if m.within_lead_time { "yes" } else { "no" },
                    if flag.is_empty() { "ok" } else { &flag },
                    &fmt_num(m.expiring),
                ])
                .map_err(io_err)?;
            }
        }
        c.flush()
    })
}

/// Columns of `orders.csv`.
pub const ORDER_COLUMNS: [&str; 16] = [
    "product",
    "site",
    "order_month",
    "arrival_month",
    "covers_to",
    "stock_at_arrival_without_order",
    "projected_end_without_order",
    "minimum",
    "order_up_to",
    "needed",
    "quantity",
    "pack_size",
    "packs",
    "unit_cost",
    "cost",
    "rule",
];

/// `orders.csv`: one row per proposed order.
pub fn write_orders(path: &Path, series: &[PlannedSeries], rule: &str) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record(ORDER_COLUMNS).map_err(io_err)?;
        for s in series {
            for o in &s.plan.orders {
                c.write_record([
                    &*csv_text(&s.product),
                    &*csv_text(s.site.as_deref().unwrap_or("")),
                    &o.order_month.to_string(),
                    &o.arrival_month.to_string(),
                    &o.covers_to.to_string(),
                    &fmt_num(o.stock_at_arrival),
                    &fmt_num(o.projected_without),
                    &fmt_num(o.minimum),
                    &fmt_num(o.order_up_to),
                    &fmt_num(o.needed),
                    &fmt_num(o.quantity),
                    &fmt_num(s.policy.pack_size),
                    &o.packs.to_string(),
                    &fmt_num(s.policy.unit_cost),
                    &fmt_num((o.cost * 100.0).round() / 100.0),
                    rule,
                ])
                .map_err(io_err)?;
            }
        }
        c.flush()
    })
}

/// `order_totals.csv`: per series, the orders' quantity, packs and cost per
/// calendar year of ordering and for all years (`year` = `all`).
pub fn write_order_totals(path: &Path, series: &[PlannedSeries]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record([
            "product", "site", "year", "orders", "quantity", "packs", "cost",
        ])
        .map_err(io_err)?;
        for s in series {
            for t in year_totals(&s.plan.orders) {
                c.write_record([
                    &*csv_text(&s.product),
                    &*csv_text(s.site.as_deref().unwrap_or("")),
                    &t.year
                        .map(|y| y.to_string())
                        .unwrap_or_else(|| "all".into()),
                    &t.orders.to_string(),
                    &fmt_num(t.quantity),
                    &t.packs.to_string(),
                    &fmt_num((t.cost * 100.0).round() / 100.0),
                ])
                .map_err(io_err)?;
            }
        }
        c.flush()
    })
}

/// `plan_log.csv`: rows and series not used as given, with the reason.
pub fn write_plan_log(path: &Path, log: &[LogEntry]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record(["file", "line", "product", "site", "action", "reason"])
            .map_err(io_err)?;
        for e in log {
            c.write_record([
                e.file.as_str(),
                &e.line.map(|l| l.to_string()).unwrap_or_default(),
                &*csv_text(&e.product),
                &*csv_text(e.site.as_deref().unwrap_or("")),
                e.action,
                &e.reason,
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })
}
