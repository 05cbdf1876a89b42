//! The services method: project the number of services (clients treated,
//! tests performed) with the same backtest → select → project machinery as
//! consumption, and convert to product quantities.
//!
//! ```text
//! quantity = projected services over the period × units_per_service × (1 + allowance)
//! ```
//!
//! The services series are cleaned like consumption, with the forecast
//! run's cleaning settings: totals from incomplete reporting scaled up by the
//! reporting rate when the file gives one, sites summed, gaps filled,
//! outliers flagged (there is no stockout column: services are not limited
//! by the product's stock in the same way). The units per service and allowance are those of the
//! product's latest month in the file (services-weighted over its sites), so
//! a change of guideline takes effect from the month it is recorded; a
//! warning says when they changed over the history. Months of the period
//! already in the services file are taken as cleaned, not projected.

use std::collections::BTreeMap;
use std::sync::Arc;

use rayon::prelude::*;

use crate::calendar::YearMonth;
use crate::clean::{clean, CleanSeries, CleanSettings};
use crate::data::{Dataset, InputRow, Layout, RejectedRow};
use crate::models::candidates;
use crate::pipeline::{forecast_product, ForecastSettings};
use crate::project::MAX_HORIZON;

/// One accepted row of the services file.
#[derive(Debug, Clone, PartialEq)]
pub struct ServiceRow {
    /// 1-based line in the file.
    pub line: u64,
    /// Product the services use.
    pub product: String,
    /// Site, when the file has a `site` column.
    pub site: Option<String>,
    /// Month.
    pub month: YearMonth,
    /// Services given that month; `None` = not reported.
    pub services: Option<f64>,
    /// Product units used per service.
    pub units_per_service: f64,
    /// Share added for repeats and losses (0.1 = 10%).
    pub allowance: f64,
    /// Share of expected reports received (0–1), when given.
    pub reporting_rate: Option<f64>,
}

/// What was read from a services file.
#[derive(Debug, Clone)]
pub struct ServicesData {
    /// File name as given.
    pub source: String,
    /// SHA-256 of the file.
    pub sha256: String,
    /// Data rows read.
    pub rows_read: usize,
    /// Accepted rows.
    pub rows: Vec<ServiceRow>,
    /// Rejected rows with reasons.
    pub rejected: Vec<RejectedRow>,
    /// Whether the file has a `site` column.
    pub has_site: bool,
    /// Whether the file has a `reporting_rate` column.
    pub has_reporting_rate: bool,
    /// Warnings met reading the file (columns not used).
    pub warnings: Vec<String>,
}

/// A product's services estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct ServicesEstimate {
    /// Product.
    pub product: String,
    /// Services over the period (projected and observed), when computed.
    pub services: Option<f64>,
    /// Annual quantity, when computed.
    pub quantity: Option<f64>,
    /// Model the services were projected with (empty when none was needed).
    pub model: String,
    /// How it was computed, or why it could not be.
    pub basis: String,
    /// The projected services, month by month (for the record).
    pub months: Vec<(YearMonth, f64, &'static str)>,
}

/// Projects every product's services over the 12 months from
/// `period_start` and converts them to quantities, products in parallel.
/// `settings` and `clean_settings` are the forecast run's (the horizon is
/// set here). Returns the estimates and the warnings met.
pub fn estimate(
    data: &ServicesData,
    period_start: YearMonth,
    settings: &ForecastSettings,
    clean_settings: &CleanSettings,
) -> crate::Result<(Vec<ServicesEstimate>, Vec<String>)> {
    let period_end = period_start.plus(super::PERIOD_MONTHS as i64 - 1);
    let mut warnings = Vec::new();
    let ds = as_dataset(data);
    let cleaned = clean(&ds, &clean_settings.clone().check()?);
    warnings.extend(cleaned.warnings.iter().map(|w| format!("services: {w}")));
    let units = units_per_product(&data.rows, &mut warnings);
    let mut out = Vec::new();
    for (product, why) in &cleaned.unusable {
        out.push(ServicesEstimate {
            product: product.clone(),
            services: None,
            quantity: None,
            model: String::new(),
            basis: format!("no services estimate: {why}"),
            months: Vec::new(),
        });
    }
    let projected: Vec<crate::Result<ServicesEstimate>> = cleaned
        .series
        .par_iter()
        .map_init(candidates, |models, s| {
            let (upw, upw_text) = units
                .get(&s.product)
                .cloned()
                .unwrap_or((0.0, "no units per service".to_string()));
            one(
                s,
                period_start,
                period_end,
                settings,
                models,
                upw,
                &upw_text,
            )
        })
        .collect();
    for p in projected {
        out.push(p?);
    }
    out.sort_by(|a, b| a.product.cmp(&b.product));
    Ok((out, warnings))
}

fn one(
    s: &CleanSeries,
    period_start: YearMonth,
    period_end: YearMonth,
    settings: &ForecastSettings,
    models: &[Box<dyn crate::models::AnyModel>],
    upw: f64,
    upw_text: &str,
) -> crate::Result<ServicesEstimate> {
    let first = s.start;
    let last = s.month(s.len().saturating_sub(1));
    let none = |basis: String| ServicesEstimate {
        product: s.product.clone(),
        services: None,
        quantity: None,
        model: String::new(),
        basis,
        months: Vec::new(),
    };
    if first > period_start {
        return Ok(none(format!(
            "no services estimate: the services data starts in {first}, after the period starts ({period_start}); give services for months before the period"
        )));
    }
    let mut months: Vec<(YearMonth, f64, &'static str)> = Vec::new();
    for t in 0..s.len() {
        let m = s.month(t);
        if m >= period_start && m <= period_end {
            // A month the cleaning filled (no row, or a row left out) is
            // not an observation.
            let filled = s.imputed_share.get(t).is_some_and(|x| *x >= 0.5);
            months.push((m, s.values[t], if filled { "filled" } else { "observed" }));
        }
    }
    let mut model = String::new();
    if last < period_end {
        let horizon = last.months_until(period_end) as usize;
        if horizon > MAX_HORIZON {
            return Ok(none(format!(
                "no services estimate: the services data ends in {last}, {horizon} months before the end of the period ({period_end}); at most {MAX_HORIZON} months are projected"
            )));
        }
        let checked = ForecastSettings {
            horizon,
            ..settings.clone()
        }
        .check()?;
        let r = forecast_product(s, models, &checked, None);
        let Some(p) = r.projection else {
            return Ok(none(format!(
                "no services estimate: the services series could not be projected ({})",
                r.warnings.join("; ")
            )));
        };
        model = p.model.clone();
        for (k, v) in p.forecast.point.iter().enumerate() {
            let m = p.start.plus(k as i64);
            if m >= period_start && m <= period_end {
                months.push((m, *v, "projected"));
            }
        }
    }
    let services: f64 = months.iter().map(|m| m.1).sum();
    let quantity = services * upw;
    let projected = months.iter().filter(|m| m.2 == "projected").count();
    let how = if projected == 0 {
        "all 12 months observed in the services data".to_string()
    } else {
        format!(
            "{projected} month(s) projected with {model} from the services history {first} to {last} (backtested and selected as for consumption){}",
            if projected < months.len() {
                format!(", {} observed", months.len() - projected)
            } else {
                String::new()
            }
        )
    };
    Ok(ServicesEstimate {
        product: s.product.clone(),
        services: Some(services),
        quantity: Some(quantity),
        model,
        basis: format!(
            "{} services ({how}) × {upw_text} = {}",
            crate::chart::fmt_quantity(services),
            crate::chart::fmt_quantity(quantity)
        ),
        months,
    })
}

/// The services rows as consumption-contract rows, so the cleaning and
/// forecasting machinery applies unchanged.
fn as_dataset(data: &ServicesData) -> Dataset {
    let mut names: BTreeMap<String, Arc<str>> = BTreeMap::new();
    let mut name = |s: &str| -> Arc<str> {
        names
            .entry(s.to_string())
            .or_insert_with(|| Arc::from(s))
            .clone()
    };
    let rows = data
        .rows
        .iter()
        .map(|r| InputRow {
            line: r.line,
            product: name(&r.product),
            site: r.site.as_deref().map(&mut name),
            month: r.month,
            consumed: r.services,
            stockout_days: None,
            reporting_rate: r.reporting_rate,
        })
        .collect();
    Dataset {
        source: data.source.clone(),
        input_sha256: data.sha256.clone(),
        rows_read: data.rows_read,
        rows,
        rejected: data.rejected.clone(),
        merged: Vec::new(),
        warnings: Vec::new(),
        layout: Layout {
            delimiter: ',',
            had_bom: false,
            has_site: data.has_site,
            has_stockout_days: false,
            has_reporting_rate: data.has_reporting_rate,
            reporting_rate_as_percent: false,
            extra_columns: Vec::new(),
            sheet: None,
            wide: None,
        },
    }
}

/// Units per service × (1 + allowance) per product, from its latest month
/// (services-weighted over sites), with the text of how.
fn units_per_product(
    rows: &[ServiceRow],
    warnings: &mut Vec<String>,
) -> BTreeMap<String, (f64, String)> {
    let mut by: BTreeMap<&str, Vec<&ServiceRow>> = BTreeMap::new();
    for r in rows {
        by.entry(r.product.as_str()).or_default().push(r);
    }
    let mut out = BTreeMap::new();
    for (product, rs) in by {
        let Some(latest) = rs.iter().map(|r| r.month).max() else {
            continue;
        };
        let at: Vec<&&ServiceRow> = rs.iter().filter(|r| r.month == latest).collect();
        let weight: f64 = at.iter().map(|r| r.services.unwrap_or(0.0)).sum();
        let avg = |f: &dyn Fn(&ServiceRow) -> f64| {
            if weight > 0.0 {
                at.iter()
                    .map(|r| f(r) * r.services.unwrap_or(0.0))
                    .sum::<f64>()
                    / weight
            } else {
                at.iter().map(|r| f(r)).sum::<f64>() / at.len() as f64
            }
        };
        let ups = avg(&|r| r.units_per_service);
        let allowance = avg(&|r| r.allowance);
        let factor = |r: &ServiceRow| r.units_per_service * (1.0 + r.allowance);
        let (lo, hi) = rs.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |a, r| {
            (a.0.min(factor(r)), a.1.max(factor(r)))
        });
        if hi - lo > 1e-9 * hi.abs().max(1.0) {
            warnings.push(format!(
                "services: product '{product}': units per service × (1 + allowance) varies in the file ({} to {}); the latest month's ({latest}) value is used",
                crate::chart::fmt_figure(lo),
                crate::chart::fmt_figure(hi)
            ));
        }
        let per = crate::chart::fmt_figure(ups);
        let text = format!(
            "{per} {} per service × (1 + {} allowance for repeats and losses) (as of {latest})",
            crate::chart::units_word(&per),
            crate::chart::fmt_figure(allowance)
        );
        out.insert(product.to_string(), (ups * (1.0 + allowance), text));
    }
    out
}
