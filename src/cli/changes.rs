//! `forecast --changes FILE`: the known changes applied after the
//! projections, said on the terminal and in the JSON summary.

use provisio::changes::{Applied, Bands, ChangesFile};
use provisio::pipeline::ProductForecast;

use super::{say, warn};

/// The statistical projections of a run as the changes module takes them.
fn base(results: &[ProductForecast]) -> Vec<(String, Bands)> {
    results
        .iter()
        .filter_map(|r| {
            let p = r.projection.as_ref()?;
            let f = &p.forecast;
            let pick = |level: f64, lower: bool| -> Vec<f64> {
                match f.interval(level) {
                    Some(i) if lower => i.lower.clone(),
                    Some(i) => i.upper.clone(),
                    None => f.point.clone(),
                }
            };
            Some((
                r.product.clone(),
                Bands {
                    start: p.start,
                    point: f.point.clone(),
                    lower80: pick(0.80, true),
                    upper80: pick(0.80, false),
                    lower95: pick(0.95, true),
                    upper95: pick(0.95, false),
                },
            ))
        })
        .collect()
}

/// Applies the changes file to the run's projections; warnings are said.
pub(super) fn apply(c: &ChangesFile, results: &[ProductForecast]) -> anyhow::Result<Applied> {
    let applied = provisio::changes::apply(&c.file, &base(results), &c.changes)?;
    for w in c.warnings.iter().chain(&applied.warnings) {
        warn(w);
    }
    Ok(applied)
}

/// The changed products' statistical and adjusted totals, as a table.
pub(super) fn print_applied(c: &ChangesFile, ap: &Applied) {
    say!(
        "applied {} change(s) from {} (SHA-256 {}) in file order; the statistical forecast is kept beside the adjusted one",
        c.changes.len(),
        c.file,
        &c.sha256[..12.min(c.sha256.len())]
    );
    if !super::human() {
        return;
    }
    let changed: Vec<_> = ap.products.iter().filter(|p| !p.rows.is_empty()).collect();
    let w = super::name_width(changed.iter().map(|p| &p.product));
    println!(
        "{}  {:>14} {:>14} {:>14} {:>14}  rows",
        super::pad("product", w),
        "stat. 1-12",
        "adjusted 1-12",
        "stat. 1-24",
        "adjusted 1-24"
    );
    for p in changed {
        let rows: Vec<String> = p.rows.iter().map(|r| r.to_string()).collect();
        println!(
            "{}  {:>14.0} {:>14.0} {:>14.0} {:>14.0}  {}{}",
            super::pad(&super::truncate(&p.product, w), w),
            p.statistical.total(0, 12),
            p.adjusted.total(0, 12),
            p.statistical.total(0, 24),
            p.adjusted.total(0, 24),
            rows.join(" "),
            if p.new_product { " (new product)" } else { "" }
        );
    }
}

/// The changed products in the JSON summary.
pub(super) fn changes_json(ap: &Applied) -> serde_json::Value {
    let products: Vec<serde_json::Value> = ap
        .products
        .iter()
        .filter(|p| !p.rows.is_empty())
        .map(|p| {
            serde_json::json!({
                "product": p.product,
                "new_product": p.new_product,
                "rows": p.rows,
                "statistical_months_1_12": p.statistical.total(0, 12),
                "adjusted_months_1_12": p.adjusted.total(0, 12),
                "statistical_months_1_24": p.statistical.total(0, 24),
                "adjusted_months_1_24": p.adjusted.total(0, 24),
            })
        })
        .collect();
    serde_json::json!({ "products": products, "warnings": ap.warnings })
}

/// `review`: for each past run that applied a changes file, the statistical
/// and the adjusted forecast scored against the actuals, per product and
/// per change row, written to `review_changes.csv` and printed. Returns
/// the figures for the JSON summary when the file was written.
pub(super) fn review(
    pasts: &[provisio::review::PastForecast],
    result: &provisio::review::Review,
    out: &std::path::Path,
) -> anyhow::Result<Option<serde_json::Value>> {
    use provisio::changes::score::{value_added, ValueAdded};
    use provisio::output::fmt_num;
    // (vintage, product, what is scored, the row's note, scores, why not
    // scored when no month it touched has an actual yet).
    type Line = (String, String, String, String, ValueAdded, Option<String>);
    let mut lines: Vec<Line> = Vec::new();
    for (vi, v) in result.vintages.iter().enumerate() {
        let Some(past) = pasts.iter().find(|p| p.name == v.name) else {
            continue;
        };
        let Some((adjusted, trace)) = provisio::changes::read::read_past_changes(&past.dir)? else {
            continue;
        };
        for pr in result.products.iter().filter(|p| p.vintage == vi) {
            let scored: Vec<&provisio::review::MonthReview> =
                pr.months.iter().filter(|m| m.scored).collect();
            let pts: Vec<(f64, f64, f64)> = scored
                .iter()
                .filter_map(|m| {
                    let a = adjusted.get(&(pr.product.clone(), m.month))?;
                    Some((m.actual, m.statistical, *a))
                })
                .collect();
            let mine: Vec<&provisio::changes::read::PastTrace> =
                trace.iter().filter(|t| t.product == pr.product).collect();
            if mine.is_empty() || pts.is_empty() {
                continue;
            }
            // Months a trace covers, and the months scored, for a line
            // that cannot be scored yet.
            let span = |ms: &mut dyn Iterator<Item = provisio::calendar::YearMonth>| {
                let ms: Vec<_> = ms.collect();
                let (a, b) = (ms.iter().min(), ms.iter().max());
                a.zip(b).map(|(a, b)| {
                    if a == b {
                        a.to_string()
                    } else {
                        format!("{a} to {b}")
                    }
                })
            };
            let reviewed = span(&mut scored.iter().map(|m| m.month)).unwrap_or_default();
            let unscored = |touched: String| {
                format!(
                    "not scored yet: the months it changed ({touched}) have no scored actual; the months scored are {reviewed}"
                )
            };
            let touched_scored = |rows: &[&provisio::changes::read::PastTrace]| {
                rows.iter()
                    .any(|t| scored.iter().any(|m| m.month == t.month))
            };
            lines.push(if touched_scored(&mine) {
                (
                    v.name.clone(),
                    pr.product.clone(),
                    "all changes".into(),
                    String::new(),
                    value_added(&pts),
                    None,
                )
            } else {
                (
                    v.name.clone(),
                    pr.product.clone(),
                    "all changes".into(),
                    String::new(),
                    value_added(&[]),
                    Some(unscored(
                        span(&mut mine.iter().map(|t| t.month)).unwrap_or_default(),
                    )),
                )
            });
            let mut rows: Vec<u64> = mine.iter().map(|t| t.row).collect();
            rows.sort();
            rows.dedup();
            for row in rows {
                let of_row: Vec<&provisio::changes::read::PastTrace> =
                    mine.iter().copied().filter(|t| t.row == row).collect();
                let pts: Vec<(f64, f64, f64)> = of_row
                    .iter()
                    .filter_map(|t| {
                        let m = scored.iter().find(|m| m.month == t.month)?;
                        Some((m.actual, t.before, t.after))
                    })
                    .collect();
                let t = of_row[0];
                let why = pts.is_empty().then(|| {
                    unscored(span(&mut of_row.iter().map(|t| t.month)).unwrap_or_default())
                });
                lines.push((
                    v.name.clone(),
                    pr.product.clone(),
                    format!("row {row} ({})", t.kind),
                    t.note.clone(),
                    value_added(&pts),
                    why,
                ));
            }
        }
    }
    if lines.is_empty() {
        return Ok(None);
    }
    let opt = |x: Option<f64>| x.map(fmt_num).unwrap_or_default();
    provisio::output::write_atomic(&out.join("review_changes.csv"), |w| {
        let mut c = csv::Writer::from_writer(w);
        let e = std::io::Error::other;
        c.write_record([
            "vintage",
            "product",
            "scored",
            "months",
            "actual",
            "wape_without_pct",
            "wape_with_pct",
            "bias_without_pct",
            "bias_with_pct",
            "value_added_points",
            "note",
            "not_scored",
        ])
        .map_err(e)?;
        for (v, p, what, note, s, why) in &lines {
            c.write_record([
                v.clone(),
                provisio::output::csv_text(p).into_owned(),
                what.clone(),
                s.months.to_string(),
                if why.is_some() {
                    String::new()
                } else {
                    fmt_num(s.actual)
                },
                opt(s.wape_without),
                opt(s.wape_with),
                opt(s.bias_without),
                opt(s.bias_with),
                opt(s.value_added),
                provisio::output::csv_text(note).into_owned(),
                why.clone().unwrap_or_default(),
            ])
            .map_err(e)?;
        }
        c.flush()
    })?;
    say!("forecast value added of the known changes (WAPE without − WAPE with, points; above 0: the adjustment helped):");
    for (_, p, what, _, s, why) in &lines {
        if let Some(why) = why {
            say!("  {p} · {what}: {why}");
            continue;
        }
        let f = |x: Option<f64>| x.map(|v| format!("{v:.1}")).unwrap_or_else(|| "-".into());
        say!(
            "  {p} · {what}: {} month(s), WAPE statistical/before {} %, adjusted/after {} %, value added {}",
            s.months,
            f(s.wape_without),
            f(s.wape_with),
            f(s.value_added)
        );
    }
    let json: Vec<serde_json::Value> = lines
        .iter()
        .map(|(v, p, what, _, s, why)| {
            serde_json::json!({
                "vintage": v,
                "product": p,
                "scored": what,
                "months": s.months,
                "wape_without_pct": s.wape_without,
                "wape_with_pct": s.wape_with,
                "bias_without_pct": s.bias_without,
                "bias_with_pct": s.bias_with,
                "value_added_points": s.value_added,
                "not_scored": why,
            })
        })
        .collect();
    Ok(Some(serde_json::Value::Array(json)))
}
