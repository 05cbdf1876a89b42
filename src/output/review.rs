//! The tables written by `review`: review.csv (one row per product and
//! vintage), review_months.csv (one row per reviewed month) and review.json.

use std::path::Path;

use super::{csv_text, fmt_num, fmt_opt, write_atomic};
use crate::error::Result;
use crate::review::{Audit, MonthReview, ProductReview, Review, VintageComparison};

fn io_err(e: csv::Error) -> std::io::Error {
    std::io::Error::other(e)
}

fn yes(b: bool) -> String {
    if b { "yes" } else { "no" }.to_string()
}

fn pct_share(a: &Audit) -> String {
    fmt_opt(a.share.map(|s| 100.0 * s))
}

/// The comparison a product's review belongs to (several vintages), and
/// the review's position in it.
fn find_comparison<'a>(
    comparisons: &'a [VintageComparison],
    r: &ProductReview,
) -> Option<(&'a VintageComparison, usize)> {
    comparisons
        .iter()
        .find(|c| c.product == r.product)
        .and_then(|c| {
            c.vintages
                .iter()
                .position(|&v| v == r.vintage)
                .map(|i| (c, i))
        })
}

const REVIEW_HEADER: [&str; 40] = [
    "product",
    "vintage",
    "status",
    "model",
    "origin",
    "forecast_start",
    "forecast_end",
    "months_with_actuals",
    "months_scored",
    "months_left_out",
    "mape_pct",
    "zero_actuals",
    "bias_pct",
    "wape_pct",
    "coverage_80_pct",
    "coverage_80_p",
    "coverage_95_pct",
    "coverage_95_p",
    "coverage_short",
    "tracking_signal",
    "cumulative_error",
    "mad",
    "tracking_flag",
    "tracking_beyond_since",
    "naive_wape_pct",
    "seasonal_naive_wape_pct",
    "value_added_vs_naive_pts",
    "value_added_vs_seasonal_naive_pts",
    "backtest_mape_pct",
    "backtest_bias_pct",
    "history_not_as_reported_pct",
    "history_rules",
    "review_not_as_reported_pct",
    "review_rules",
    "adjustment_flag",
    "vintages_compared",
    "common_months",
    "wape_common_pct",
    "closest_vintage",
    "findings",
];

/// `review.csv`: one row per product and vintage, reviewed or not (with
/// the reason).
pub fn write_review(path: &Path, review: &Review, adjustment_limit: f64) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record(REVIEW_HEADER).map_err(io_err)?;
        for r in &review.products {
            let s = &r.scores;
            let vintage = &review.vintages[r.vintage].name;
            let cmp = find_comparison(&review.comparisons, r);
            let short = match (s.coverage80_p, s.coverage95_p) {
                (None, None) => String::new(),
                _ => {
                    let mut v = Vec::new();
                    if s.coverage80_short() {
                        v.push("80");
                    }
                    if s.coverage95_short() {
                        v.push("95");
                    }
                    if v.is_empty() {
                        "no".to_string()
                    } else {
                        v.join(" ")
                    }
                }
            };
            let row: Vec<String> = vec![
                csv_text(&r.product).into_owned(),
                vintage.clone(),
                "reviewed".into(),
                r.scored_model().to_string(),
                r.origin.to_string(),
                r.forecast_start.to_string(),
                r.forecast_end.to_string(),
                r.months.len().to_string(),
                s.months.to_string(),
                s.left_out.to_string(),
                fmt_opt(s.mape),
                s.zero_actuals.to_string(),
                fmt_opt(s.bias),
                fmt_opt(s.wape),
                fmt_opt(s.coverage80),
                fmt_opt(s.coverage80_p),
                fmt_opt(s.coverage95),
                fmt_opt(s.coverage95_p),
                short,
                fmt_opt(s.tracking.map(|t| t.value)),
                fmt_opt(s.tracking.map(|t| t.cumulative_error)),
                fmt_opt(s.tracking.map(|t| t.mad)),
                yes(s.tracking_flagged()),
                s.tracking_breach.map(|m| m.to_string()).unwrap_or_default(),
                fmt_opt(s.naive_wape),
                fmt_opt(s.seasonal_naive_wape),
                fmt_opt(s.fva_naive()),
                fmt_opt(s.fva_seasonal_naive()),
                fmt_opt(r.promised.mape),
                fmt_opt(r.promised.bias),
                pct_share(&r.history_audit),
                r.history_audit.responsible(),
                pct_share(&r.period_audit),
                r.period_audit.responsible(),
                yes(r.history_audit.flagged || r.period_audit.flagged),
                cmp.map(|(c, _)| c.vintages.len().to_string())
                    .unwrap_or_else(|| "1".into()),
                cmp.map(|(c, _)| c.common_months.len().to_string())
                    .unwrap_or_default(),
                cmp.map(|(c, i)| fmt_opt(c.wape[i])).unwrap_or_default(),
                cmp.map(|(c, _)| yes(c.closest == Some(r.vintage)))
                    .unwrap_or_default(),
                r.findings(adjustment_limit).join("; "),
            ];
            c.write_record(&row).map_err(io_err)?;
        }
        for n in &review.not_reviewed {
            let mut row = vec![String::new(); REVIEW_HEADER.len()];
            row[0] = csv_text(&n.product).into_owned();
            row[1] = review.vintages[n.vintage].name.clone();
            row[2] = "not reviewed".into();
            row[REVIEW_HEADER.len() - 1] = n.reason.clone();
            c.write_record(&row).map_err(io_err)?;
        }
        c.flush()
    })
}

fn inside(actual: f64, b: Option<(f64, f64)>) -> String {
    b.map(|(l, u)| yes(actual >= l && actual <= u))
        .unwrap_or_default()
}

/// `review_months.csv`: one row per product, vintage and forecast month
/// that has an actual.
pub fn write_review_months(path: &Path, review: &Review) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record([
            "product",
            "vintage",
            "month",
            "horizon",
            "actual",
            "reported",
            "status",
            "imputed_share",
            "scored",
            "forecast",
            "lower_80",
            "upper_80",
            "lower_95",
            "upper_95",
            "error",
            "inside_80",
            "inside_95",
            "naive",
            "seasonal_naive",
            "tracking_signal",
            "revision_from_previous_vintage",
            "closest_vintage",
        ])
        .map_err(io_err)?;
        for r in &review.products {
            for m in &r.months {
                let b = |i: Option<(f64, f64)>, lower: bool| {
                    fmt_opt(i.map(|(l, u)| if lower { l } else { u }))
                };
                c.write_record([
                    csv_text(&r.product).into_owned(),
                    review.vintages[r.vintage].name.clone(),
                    m.month.to_string(),
                    m.horizon.to_string(),
                    fmt_num(m.actual),
                    fmt_opt(m.reported),
                    m.status.name().to_string(),
                    fmt_num(m.imputed_share),
                    yes(m.scored),
                    fmt_num(m.forecast),
                    b(m.interval80, true),
                    b(m.interval80, false),
                    b(m.interval95, true),
                    b(m.interval95, false),
                    fmt_num(m.forecast - m.actual),
                    inside(m.actual, m.interval80),
                    inside(m.actual, m.interval95),
                    fmt_opt(m.naive),
                    fmt_opt(m.seasonal_naive),
                    fmt_opt(m.tracking_signal),
                    fmt_opt(m.revision),
                    m.closest_vintage
                        .map(|v| review.vintages[v].name.clone())
                        .unwrap_or_default(),
                ])
                .map_err(io_err)?;
            }
        }
        c.flush()
    })
}

fn audit_json(a: &Audit) -> serde_json::Value {
    serde_json::json!({
        "months": a.months,
        "cleaned_volume": a.volume,
        "not_as_reported": a.changed,
        "not_as_reported_pct": a.share.map(|s| 100.0 * s),
        "flagged": a.flagged,
        "by_rule": a.by_rule.iter().map(|r| serde_json::json!({
            "rule": r.rule, "change": r.change, "pct_of_volume": 100.0 * r.share,
        })).collect::<Vec<_>>(),
        "rules_responsible": a.responsible(),
    })
}

fn month_json(m: &MonthReview, review: &Review) -> serde_json::Value {
    let pair = |b: Option<(f64, f64)>| b.map(|(l, u)| [l, u]);
    serde_json::json!({
        "month": m.month.to_string(),
        "horizon": m.horizon,
        "actual": m.actual,
        "reported": m.reported,
        "status": m.status.name(),
        "outlier": m.outlier,
        "imputed_share": m.imputed_share,
        "scored": m.scored,
        "forecast": m.forecast,
        "interval_80": pair(m.interval80),
        "interval_95": pair(m.interval95),
        "naive": m.naive,
        "seasonal_naive": m.seasonal_naive,
        "tracking_signal": m.tracking_signal,
        "revision_from_previous_vintage": m.revision,
        "closest_vintage": m.closest_vintage.map(|v| review.vintages[v].name.clone()),
    })
}

/// Builds the JSON document of a review. `run` carries what the caller
/// knows about the run (tool, actuals file and hash, settings, warnings).
pub fn review_json(
    review: &Review,
    adjustment_limit: f64,
    run: serde_json::Value,
) -> serde_json::Value {
    let name = |v: usize| review.vintages[v].name.clone();
    let vintages: Vec<_> = review
        .vintages
        .iter()
        .map(|v| {
            serde_json::json!({
                "name": v.name,
                "forecast_start": v.start.to_string(),
                "forecast_end": v.end.to_string(),
                "until": v.manifest.until,
                "tool": v.manifest.tool,
                "format_version": v.manifest.format_version,
                "input": v.manifest.input,
                "input_sha256": v.manifest.input_sha256,
                "clean_settings": v.manifest.clean_settings,
                "duplicates": v.manifest.duplicates,
                "mostly_imputed_months_scored": !v.exclude_imputed,
            })
        })
        .collect();
    let products: Vec<_> = review
        .products
        .iter()
        .map(|r| {
            let s = &r.scores;
            serde_json::json!({
                "product": r.product,
                "vintage": name(r.vintage),
                "model": r.scored_model(),
                "forecast_scored": r.forecast_scored(),
                "origin": r.origin.to_string(),
                "forecast_start": r.forecast_start.to_string(),
                "forecast_end": r.forecast_end.to_string(),
                "scores": {
                    "months_with_actuals": r.months.len(),
                    "months_scored": s.months,
                    "months_left_out": s.left_out,
                    "mape_pct": s.mape,
                    "zero_actuals": s.zero_actuals,
                    "bias_pct": s.bias,
                    "wape_pct": s.wape,
                    "coverage_80_pct": s.coverage80,
                    "coverage_80_p_value": s.coverage80_p,
                    "coverage_80_short": s.coverage80_short(),
                    "coverage_95_pct": s.coverage95,
                    "coverage_95_p_value": s.coverage95_p,
                    "coverage_95_short": s.coverage95_short(),
                    "tracking_signal": s.tracking,
                    "tracking_flag": s.tracking_flagged(),
                    "tracking_beyond_since": s.tracking_breach.map(|m| m.to_string()),
                    "naive_mape_pct": s.naive_mape,
                    "naive_wape_pct": s.naive_wape,
                    "seasonal_naive_mape_pct": s.seasonal_naive_mape,
                    "seasonal_naive_wape_pct": s.seasonal_naive_wape,
                    "value_added_vs_naive_pts": s.fva_naive(),
                    "value_added_vs_seasonal_naive_pts": s.fva_seasonal_naive(),
                },
                "backtest_promised": r.promised,
                "audit": {
                    "history": audit_json(&r.history_audit),
                    "review_months": audit_json(&r.period_audit),
                },
                "findings": r.findings(adjustment_limit),
                "months": r.months.iter().map(|m| month_json(m, review)).collect::<Vec<_>>(),
            })
        })
        .collect();
    let comparisons: Vec<_> = review
        .comparisons
        .iter()
        .map(|c| {
            serde_json::json!({
                "product": c.product,
                "vintages": c.vintages.iter().map(|&v| name(v)).collect::<Vec<_>>(),
                "common_months": c.common_months.iter().map(|m| m.to_string()).collect::<Vec<_>>(),
                "wape_pct": c.wape,
                "bias_pct": c.bias,
                "closest": c.closest.map(name),
                "revision_pct": c.revision_pct,
            })
        })
        .collect();
    let not_reviewed: Vec<_> = review
        .not_reviewed
        .iter()
        .map(|n| serde_json::json!({"product": n.product, "vintage": name(n.vintage), "reason": n.reason}))
        .collect();
    serde_json::json!({
        "run": run,
        "adjustment_limit_pct": 100.0 * adjustment_limit,
        "actuals_span": review.actuals_span.map(|(a, b)| [a.to_string(), b.to_string()]),
        "vintages": vintages,
        "products": products,
        "vintage_comparisons": comparisons,
        "not_reviewed": not_reviewed,
    })
}
