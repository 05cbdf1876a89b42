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
