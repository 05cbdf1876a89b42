//! The cross-check's files: `crosscheck.csv` and `crosscheck_services.csv`.

use std::path::Path;

use super::{csv_text, fmt_num, fmt_opt, write_atomic};
use crate::crosscheck::CrossCheck;
use crate::error::Result;

fn io_err(e: csv::Error) -> std::io::Error {
    std::io::Error::other(e)
}

/// Columns of `crosscheck.csv`, in order (the report reads them back;
/// `forecast_used`, `statistical` or `adjusted` for known changes, came
/// last and may be missing from an older file).
pub const CROSSCHECK_COLUMNS: [&str; 15] = [
    "product",
    "method",
    "period_start",
    "period_end",
    "quantity",
    "consumption_forecast",
    "consumption_low80_independent",
    "consumption_high80_independent",
    "consumption_low80_sum_of_bounds",
    "consumption_high80_sum_of_bounds",
    "ratio_to_consumption",
    "flag",
    "explanation",
    "basis",
    "forecast_used",
];

/// `crosscheck.csv`: one row per product and method (consumption first),
/// with the annual quantity, the consumption forecast and its two 80%
/// ranges, the ratio, the flag, its explanation, how the quantity was
/// computed, and which forecast it was compared with.
pub fn write_crosscheck(path: &Path, cc: &CrossCheck) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::WriterBuilder::new().from_writer(w);
        c.write_record(CROSSCHECK_COLUMNS).map_err(io_err)?;
        for r in &cc.rows {
            let cons = r.consumption;
            let cmp = r.comparison.as_ref();
            c.write_record([
                &*csv_text(&r.product),
                r.method.name(),
                &r.period_start.to_string(),
                &r.period_end.to_string(),
                &fmt_opt(r.quantity),
                &fmt_opt(cons.map(|c| c.total)),
                &fmt_opt(cons.map(|c| c.narrow.0)),
                &fmt_opt(cons.map(|c| c.narrow.1)),
                &fmt_opt(cons.map(|c| c.wide.0)),
                &fmt_opt(cons.map(|c| c.wide.1)),
                &cmp.and_then(|c| c.ratio)
                    .map(|v| format!("{v:.3}"))
                    .unwrap_or_default(),
                cmp.map(|c| c.flag.name()).unwrap_or(""),
                cmp.map(|c| c.explanation.as_str()).unwrap_or(""),
                r.basis.as_str(),
                cc.forecast_used.name(),
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })
}

/// `crosscheck_services.csv`: the services per product and month of the
/// period, observed or projected.
pub fn write_crosscheck_services(path: &Path, cc: &CrossCheck) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::WriterBuilder::new().from_writer(w);
        c.write_record(["product", "month", "services", "source"])
            .map_err(io_err)?;
        for (p, m, v, how) in &cc.services_months {
            c.write_record([&*csv_text(p), &m.to_string(), &fmt_num(*v), how])
                .map_err(io_err)?;
        }
        c.flush()
    })
}
