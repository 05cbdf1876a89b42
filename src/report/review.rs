//! The review page: `review.html` and a chart per product and vintage
//! (the actuals against the past forecast and its 80%/95% ranges), in the
//! style of the forecast report (same stylesheet, script, tables, chart
//! functions and escaping).

use std::collections::HashMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

use super::html::{self, escape, Cell, Kind, Table};
use super::{pct, Written, CAUTION};
use crate::calendar::YearMonth;
use crate::chart::{self, HistoryMonth, ProductChart, ProjectedMonth};
use crate::error::{Error, Result};
use crate::review::{Audit, PastForecast, ProductReview, Review};

/// Months of history before the forecast origin shown on a review chart.
pub const HISTORY_SHOWN: usize = 24;

fn signed(v: f64) -> String {
    crate::chart::fmt_signed(v)
}

/// The chart of one reviewed product: the last [`HISTORY_SHOWN`] months
/// of the past run's cleaned history, then the cleaned actuals, against the
/// past forecast (up to the last actual month) and its ranges.
pub fn review_chart(past: &PastForecast, r: &ProductReview) -> ProductChart {
    let mut history = Vec::new();
    if let Some(p) = past.products.iter().find(|p| p.product == r.product) {
        let from = p.history.len().saturating_sub(HISTORY_SHOWN);
        for t in from..p.history.len() {
            history.push(HistoryMonth {
                month: p.history_start.plus(t as i64),
                reported: p.history_reported.get(t).copied().flatten(),
                cleaned: Some(p.history[t]),
                status: p.history_status[t],
                outlier: p.history_outlier.get(t).copied().unwrap_or(false),
            });
        }
    }
    for m in &r.months {
        history.push(HistoryMonth {
            month: m.month,
            reported: m.reported,
            cleaned: Some(m.actual),
            status: m.status,
            outlier: m.outlier,
        });
    }
    let projection = r
        .months
        .iter()
        .map(|m| ProjectedMonth {
            month: m.month,
            point: m.forecast,
            range80: m.interval80,
            range95: m.interval95,
            bridged: false,
        })
        .collect();
    let s = &r.scores;
    let mut subtitle = format!("forecast by {} made after {}", r.scored_model(), r.origin);
    for (label, v, f) in [
        ("MAPE", s.mape, pct as fn(f64) -> String),
        ("bias", s.bias, |v| format!("{}%", signed(v))),
        ("in 80% range", s.coverage80, |v| format!("{v:.0}%")),
        ("tracking signal", s.tracking.map(|t| t.value), signed),
    ] {
        if let Some(v) = v {
            let _ = write!(subtitle, " · {label} {}", f(v));
        }
    }
    ProductChart {
        title: r.product.clone(),
        subtitle,
        history_label: "cleaned consumption (actuals from the forecast start)".into(),
        projection_label: format!("past forecast ({})", r.scored_model()),
        history,
        projection,
        backtest: None,
        adjusted: Vec::new(),
        units: None,
    }
}

/// File stem of a review chart: the product's stem, plus the vintage
/// number when there are several.
fn stem(product_stem: &str, vintage: usize, vintages: usize) -> String {
    if vintages > 1 {
        format!("review-{product_stem}-vintage-{}", vintage + 1)
    } else {
        format!("review-{product_stem}")
    }
}

/// What the page needs besides the review itself.
pub struct ReviewPage<'a> {
    /// The review.
    pub review: &'a Review,
    /// The past forecasts, in the order of `review.vintages`.
    pub pasts: &'a [&'a PastForecast],
    /// Audit limit (share of volume).
    pub adjustment_limit: f64,
    /// Actuals file as given.
    pub actuals: &'a str,
    /// SHA-256 of the actuals.
    pub actuals_sha256: &'a str,
    /// Tool and version.
    pub tool: &'a str,
    /// Warnings of the run.
    pub warnings: &'a [String],
}

/// Draws the review charts (PNG and SVG under `dir/charts/`) and writes
/// `dir/review.html`.
pub fn write_review_report(dir: &Path, page: &ReviewPage<'_>) -> Result<Written> {
    let charts_dir = dir.join("charts");
    std::fs::create_dir_all(&charts_dir).map_err(|source| Error::Io {
        path: charts_dir.clone(),
        action: "cannot create the charts directory",
        source,
    })?;
    let review = page.review;
    let names: Vec<&str> = review.products.iter().map(|p| p.product.as_str()).collect();
    let product_stems = chart::file_stems(&names);
    let stems: Vec<String> = review
        .products
        .iter()
        .zip(&product_stems)
        .map(|(r, s)| stem(s, r.vintage, review.vintages.len()))
        .collect();
    // Each past forecast's units (its forecast.csv), for the axis titles.
    let units = units_of_pasts(page.pasts)?;
    let drawn: Vec<Result<(String, Vec<PathBuf>)>> = review
        .products
        .par_iter()
        .zip(stems.par_iter())
        .map(|(r, stem)| {
            let past = page.pasts.get(r.vintage).ok_or_else(|| Error::Chart {
                what: r.product.clone(),
                message: "its past forecast is missing".into(),
            })?;
            let mut c = review_chart(past, r);
            c.units = units
                .get(r.vintage)
                .and_then(|u| u.get(&r.product))
                .cloned();
            let svg = chart::product_svg(&c)?;
            let svg_path = charts_dir.join(format!("{stem}.svg"));
            crate::output::write_atomic(&svg_path, |w| w.write_all(svg.as_bytes()))?;
            let png_path = charts_dir.join(format!("{stem}.png"));
            chart::product_png(&png_path, &c)?;
            Ok((svg, vec![png_path, svg_path]))
        })
        .collect();
    let mut charts = Vec::new();
    let mut svgs = Vec::with_capacity(drawn.len());
    for d in drawn {
        let (svg, files) = d?;
        svgs.push(svg);
        charts.extend(files);
    }
    let html = render_with(page, &stems, &svgs, &units);
    let report = dir.join("review.html");
    crate::output::write_atomic(&report, |w| w.write_all(html.as_bytes()))?;
    Ok(Written {
        report,
        charts,
        products: review.products.len(),
        warnings: chart::png_names_warning(names).into_iter().collect(),
    })
}

fn anchor(stem: &str) -> String {
    format!("r-{stem}")
}

fn span(a: YearMonth, b: YearMonth) -> String {
    format!(
        "{} to {} ({} months)",
        chart::month_label(a),
        chart::month_label(b),
        a.months_until(b) + 1
    )
}

/// Builds `review.html` from the page data, the charts' file stems and each
/// reviewed product's chart SVG (same order as `review.products`).
pub fn render(page: &ReviewPage<'_>, stems: &[String], svgs: &[String]) -> String {
    // Units only name the charts' quantities: a folder whose forecast.csv
    // cannot be read again says "base units".
    let units = units_of_pasts(page.pasts).unwrap_or_default();
    render_with(page, stems, svgs, &units)
}

/// Each past forecast's units (product → unit, from its `forecast.csv`), in
/// the order of the vintages.
fn units_of_pasts(pasts: &[&PastForecast]) -> Result<Vec<HashMap<String, String>>> {
    pasts.iter().map(|p| super::read_units(&p.dir)).collect()
}

fn render_with(
    page: &ReviewPage<'_>,
    stems: &[String],
    svgs: &[String],
    units: &[HashMap<String, String>],
) -> String {
    let review = page.review;
    let mut b = String::new();
    b.push_str("<header class=\"top\"><div class=\"inner\"><h1>Review of past forecasts</h1>");
    let _ = writeln!(
        b,
        "<p>{} product forecast(s) from {} vintage(s) against <span class=\"mono\">{}</span> · {}</p></div></header>",
        review.products.len(),
        review.vintages.len(),
        escape(page.actuals),
        escape(page.tool)
    );
    let several = review.vintages.len() > 1;
    let _ = writeln!(
        b,
        "<nav class=\"jump\" aria-label=\"sections\"><div class=\"inner\"><a href=\"#summary\">Summary</a><a href=\"#reading\">How to read</a><a href=\"#products\">Products</a>{}<a href=\"#details\">Product details</a><a href=\"#caution\">Caution</a></div></nav>\n<main>",
        if several { "<a href=\"#vintages\">Vintages</a>" } else { "" }
    );
    let _ = writeln!(
        b,
        "<div class=\"caution\" role=\"note\"><strong>Caution.</strong> {}</div>",
        escape(CAUTION)
    );
    summary(&mut b, page);
    reading(&mut b, page.adjustment_limit);
    products_table(&mut b, review, stems);
    if several {
        vintages_table(&mut b, review);
    }
    if !review.not_reviewed.is_empty() {
        b.push_str("<h3>Not reviewed</h3><ul class=\"warn\">");
        for n in &review.not_reviewed {
            let _ = write!(
                b,
                "<li>{} ({}): {}</li>",
                escape(&n.product),
                escape(&review.vintages[n.vintage].name),
                escape(&n.reason)
            );
        }
        b.push_str("</ul>\n");
    }
    if !page.warnings.is_empty() {
        b.push_str("<h3>Warnings about the run</h3><ul class=\"warn\">");
        for w in page.warnings {
            let _ = write!(b, "<li>{}</li>", escape(w));
        }
        b.push_str("</ul>\n");
    }
    b.push_str("<h2 id=\"details\">Product details</h2>\n");
    for ((r, stem), svg) in review.products.iter().zip(stems).zip(svgs) {
        let unit = units.get(r.vintage).and_then(|u| u.get(&r.product));
        product_section(&mut b, page, r, stem, svg, unit.map(String::as_str));
    }
    let _ = write!(
        b,
        "<h2 id=\"caution\">Caution</h2><p>{}</p>\n</main>\n<footer>Made by {} with <code>provisio review</code>; review.csv, review_months.csv and review.json in this folder hold every number shown. The demo data shipped with provisio is an invented scenario.</footer>",
        escape(CAUTION),
        escape(page.tool)
    );
    html::page("Review of past forecasts", &b)
}

fn summary(b: &mut String, page: &ReviewPage<'_>) {
    let review = page.review;
    let mut facts: Vec<(String, String)> = vec![
        (
            "Actuals file".into(),
            format!("<span class=\"mono\">{}</span>", escape(page.actuals)),
        ),
        (
            "Actuals SHA-256".into(),
            format!(
                "<span class=\"mono\">{}</span>",
                escape(page.actuals_sha256)
            ),
        ),
    ];
    if let Some((a, z)) = review.actuals_span {
        facts.push(("Actuals period".into(), escape(&span(a, z))));
    }
    for (i, v) in review.vintages.iter().enumerate() {
        let mut text = format!(
            "<span class=\"mono\">{}</span>: forecast {}",
            escape(&v.name),
            escape(&span(v.start, v.end))
        );
        if let Some(u) = &v.manifest.until {
            let _ = write!(text, ", made from data up to {}", escape(u));
        }
        let _ = write!(
            text,
            " from <span class=\"mono\">{}</span> by {}",
            escape(&v.manifest.input),
            escape(&v.manifest.tool)
        );
        let cs = serde_json::to_value(&v.manifest.clean_settings)
            .ok()
            .and_then(|x| x.as_object().map(super::as_options))
            .unwrap_or_default();
        let _ = write!(
            text,
            "; actuals cleaned with its settings ({}, --duplicates {}){}",
            escape(&cs),
            escape(&v.manifest.duplicates),
            if v.exclude_imputed {
                "; mostly imputed months not scored"
            } else {
                "; mostly imputed months scored"
            }
        );
        facts.push((format!("Vintage {}", i + 1), text));
    }
    facts.push((
        "Audit limit".into(),
        escape(&format!(
            "{:.0}% of a product's volume not as reported",
            100.0 * page.adjustment_limit
        )),
    ));
    b.push_str("<h2 id=\"summary\">Summary</h2>\n<dl class=\"facts\">");
    for (k, v) in facts {
        let _ = write!(b, "<dt>{}</dt><dd>{v}</dd>", escape(&k));
    }
    b.push_str("</dl>\n");
}

fn reading(b: &mut String, limit: f64) {
    let _ = writeln!(
        b,
        "<h2 id=\"reading\">How to read this review</h2><ul>\
<li><strong>MAPE, WAPE</strong>: average error of the past forecast over the months that now have actuals, per month and weighted by volume.</li>\
<li><strong>Bias</strong>: Σ(forecast − actual) ÷ Σ actual; above 0 the forecast was too high (over-forecast), below 0 too low.</li>\
<li><strong>In 80% / 95% range</strong>: share of actuals inside the past forecast's ranges. Well below 80% / 95% means the ranges were too narrow; it is flagged when a binomial test says the shortfall is beyond chance (p &lt; 0.05).</li>\
<li><strong>Tracking signal</strong>: cumulative error ÷ mean absolute error. It grows when errors keep one sign; beyond ±2.46 √months (8.5 over 12 months: an unbiased forecast crosses it by chance 1 time in 20) the errors add up in one direction and the model should be looked at again (the findings say when one large month carries it).</li>\
<li><strong>Value added</strong>: the WAPE of a naive forecast (“same as the last month”) and of a seasonal naive one (“same month a year before”), both made at the same time from the same cleaned history, minus the model's WAPE. Below 0 the simple rule would have done better.</li>\
<li><strong>Not as reported</strong>: share of the cleaned volume that cleaning added or changed (stockout and reporting adjustments, filled months), for the history the forecast was made from and for the review months; flagged above {:.0}%, with the rules responsible.</li></ul>",
        100.0 * limit
    );
}

fn flags(r: &ProductReview) -> Vec<&'static str> {
    let s = &r.scores;
    let mut f = Vec::new();
    if s.tracking_flagged() {
        f.push("tracking");
    }
    if s.coverage80_short() || s.coverage95_short() {
        f.push("ranges too narrow");
    }
    for nb in s.naive_better() {
        f.push(match nb.short {
            "naive" => "naive better",
            _ => "seasonal naive better",
        });
    }
    // Which part was heavily cleaned is said, and both shares are in the
    // table (a tester saw the flag beside a history share of 18.6%; it came
    // from the reviewed months, 33.4%).
    match (r.history_audit.flagged, r.period_audit.flagged) {
        (true, true) => f.push("heavily cleaned"),
        (true, false) => f.push("history heavily cleaned"),
        (false, true) => f.push("reviewed months heavily cleaned"),
        (false, false) => {}
    }
    f
}

fn flag_pills(r: &ProductReview) -> String {
    let f = flags(r);
    if f.is_empty() {
        return "<span class=\"pill fit\">nothing stands out</span>".into();
    }
    f.iter()
        .map(|x| format!("<span class=\"pill care\">{}</span>", escape(x)))
        .collect::<Vec<_>>()
        .join(" ")
}

fn products_table(b: &mut String, review: &Review, stems: &[String]) {
    let several = review.vintages.len() > 1;
    let mut cols = vec![("product", Kind::Text)];
    if several {
        cols.push(("vintage", Kind::Num));
    }
    cols.extend([
        ("model", Kind::Text),
        ("months scored", Kind::Num),
        ("MAPE", Kind::Num),
        ("bias", Kind::Num),
        ("WAPE", Kind::Num),
        ("in 80% range", Kind::Num),
        ("in 95% range", Kind::Num),
        ("tracking signal", Kind::Num),
        ("added vs naive", Kind::Num),
        ("added vs seasonal naive", Kind::Num),
        ("history changed by cleaning", Kind::Num),
        ("reviewed months changed by cleaning", Kind::Num),
        ("flags", Kind::Text),
    ]);
    let mut t = Table::new(&cols, true);
    for (r, stem) in review.products.iter().zip(stems) {
        let s = &r.scores;
        let mut cells = vec![Cell::html(
            format!("<a href=\"#{}\">{}</a>", anchor(stem), escape(&r.product)),
            &r.product,
        )];
        if several {
            cells.push(Cell::num(Some((r.vintage + 1) as f64), |v| {
                format!("{v:.0}")
            }));
        }
        cells.extend([
            Cell::text(r.scored_model()),
            Cell::num(Some(s.months as f64), |v| format!("{v:.0}")),
            Cell::num(s.mape, pct),
            Cell::num(s.bias, |v| format!("{}%", signed(v))),
            Cell::num(s.wape, pct),
            Cell::num(s.coverage80, |v| format!("{v:.0}%")),
            Cell::num(s.coverage95, |v| format!("{v:.0}%")),
            Cell::num(s.tracking.map(|t| t.value), signed),
            Cell::num(s.fva_naive(), signed),
            Cell::num(s.fva_seasonal_naive(), signed),
            Cell::num(r.history_audit.share.map(|x| 100.0 * x), pct),
            Cell::num(r.period_audit.share.map(|x| 100.0 * x), pct),
            Cell::html(flag_pills(r), &flags(r).join(" ")),
        ]);
        t.row(None, cells);
    }
    b.push_str("<h2 id=\"products\">Products</h2>\n<p class=\"note\">Click a column heading to sort. Value added in WAPE points (above 0: the model beat the simple rule). History changed by cleaning: share of the volume the forecast was made from that is not as reported; reviewed months changed by cleaning: the same for the actuals it is scored against.</p>\n");
    b.push_str(&t.html());
}

fn vintages_table(b: &mut String, review: &Review) {
    let mut t = Table::new(
        &[
            ("product", Kind::Text),
            ("common months", Kind::Num),
            ("WAPE by vintage (oldest first)", Kind::Text),
            ("bias by vintage", Kind::Text),
            ("closest", Kind::Text),
            ("forecast moved by", Kind::Num),
        ],
        true,
    );
    for c in &review.comparisons {
        let list = |v: &[Option<f64>], f: fn(f64) -> String| {
            c.vintages
                .iter()
                .zip(v)
                .map(|(i, x)| format!("{}: {}", i + 1, x.map(f).unwrap_or_else(|| "–".into())))
                .collect::<Vec<_>>()
                .join(" · ")
        };
        let closest = c
            .closest
            .map(|v| format!("vintage {} ({})", v + 1, review.vintages[v].name))
            .unwrap_or_else(|| "–".into());
        t.row(
            None,
            vec![
                Cell::text(&c.product),
                Cell::num(Some(c.common_months.len() as f64), |v| format!("{v:.0}")),
                Cell::text(&list(&c.wape, pct)),
                Cell::text(&list(&c.bias, |v| format!("{}%", signed(v)))),
                Cell::text(&closest),
                Cell::num(c.revision_pct, pct),
            ],
        );
    }
    b.push_str("<h2 id=\"vintages\">Vintages</h2>\n<p class=\"note\">Each product's forecasts of the months every vintage covered and that have scored actuals: WAPE and bias of each vintage there, the closest one, and how far the forecast of those months moved from the oldest vintage to the newest (Σ|change| ÷ the oldest forecast's total).</p>\n");
    b.push_str(&t.html());
}

fn audit_table(b: &mut String, window: &str, a: &Audit) {
    let _ = write!(
        b,
        "<p>{}: {} of {} cleaned over {} month(s) not as reported{}.</p>",
        escape(window),
        a.share
            .map(|s| pct(100.0 * s))
            .unwrap_or_else(|| "–".into()),
        escape(&chart::fmt_quantity(a.volume)),
        a.months,
        if a.flagged {
            " <span class=\"pill care\">above the limit</span>"
        } else {
            ""
        }
    );
    if a.by_rule.is_empty() {
        return;
    }
    let mut t = Table::new(
        &[
            ("rule", Kind::Text),
            ("change (base units)", Kind::Num),
            ("share of volume", Kind::Num),
        ],
        false,
    );
    for r in &a.by_rule {
        t.row(
            None,
            vec![
                Cell::text(&r.rule),
                Cell::num(Some(r.change), chart::fmt_quantity),
                Cell::num(Some(100.0 * r.share), |v| format!("{}%", signed(v))),
            ],
        );
    }
    b.push_str(&t.html());
}

fn product_section(
    b: &mut String,
    page: &ReviewPage<'_>,
    r: &ProductReview,
    stem: &str,
    svg: &str,
    units: Option<&str>,
) {
    let review = page.review;
    let s = &r.scores;
    let class = if flags(r).is_empty() { "fit" } else { "care" };
    let vintage = if review.vintages.len() > 1 {
        format!(" — vintage {}", r.vintage + 1)
    } else {
        String::new()
    };
    let _ = writeln!(
        b,
        "<section class=\"product {class}\" id=\"{}\" data-product=\"{}\">\n<h2>{}{} {}</h2>",
        anchor(stem),
        escape(&r.product),
        escape(&r.product),
        escape(&vintage),
        flag_pills(r)
    );
    let _ = writeln!(
        b,
        "<p>Forecast by <strong>{}</strong> made after {} (<span class=\"mono\">{}</span>), {} to {}; {} month(s) with actuals, {} scored.</p>",
        escape(r.scored_model()),
        escape(&chart::month_label(r.origin)),
        escape(&review.vintages[r.vintage].name),
        escape(&chart::month_label(r.forecast_start)),
        escape(&chart::month_label(r.forecast_end)),
        r.months.len(),
        s.months
    );
    let findings = r.findings(page.adjustment_limit);
    if findings.is_empty() {
        b.push_str("<p class=\"note\">Nothing stands out: tracking signal within its limit, ranges not short of their nominal coverage, no worse than the simple rules, data changed by cleaning within the limit.</p>\n");
    } else {
        b.push_str("<ul class=\"warn\">");
        for f in &findings {
            let _ = write!(b, "<li>{}</li>", escape(f));
        }
        b.push_str("</ul>\n");
    }
    let key = |v: String, l: &str| {
        format!(
            "<div class=\"key\"><div class=\"v\">{}</div><div class=\"l\">{}</div></div>",
            escape(&v),
            escape(l)
        )
    };
    let dash = || "–".to_string();
    b.push_str("<div class=\"keys\">");
    b.push_str(&key(
        match (s.mape, r.promised.mape) {
            (Some(m), Some(p)) => format!("{} (backtest {})", pct(m), pct(p)),
            (Some(m), None) => pct(m),
            _ => dash(),
        },
        "MAPE",
    ));
    b.push_str(&key(
        s.bias
            .map(|v| format!("{}%", signed(v)))
            .unwrap_or_else(dash),
        "bias (> 0 over-forecast)",
    ));
    b.push_str(&key(
        match (s.coverage80, s.coverage95) {
            (Some(a), Some(c)) => format!("{a:.0}% / {c:.0}%"),
            _ => dash(),
        },
        "in 80% / 95% range",
    ));
    b.push_str(&key(
        s.tracking.map(|t| signed(t.value)).unwrap_or_else(dash),
        "tracking signal (limit ±2.46 √months)",
    ));
    b.push_str(&key(
        match (s.fva_naive(), s.fva_seasonal_naive()) {
            (Some(a), Some(c)) => format!("{} / {}", signed(a), signed(c)),
            (Some(a), None) => signed(a),
            _ => dash(),
        },
        "value added vs naive / seasonal naive",
    ));
    b.push_str("</div>\n");
    let _ = writeln!(
        b,
        "<figure class=\"chart\" role=\"img\" aria-label=\"Actuals against the past forecast of {}\">{svg}<figcaption>Consumption in {} per month: the cleaned history the forecast was made from, then the cleaned actuals, against the past forecast and its ranges. Files: <a href=\"charts/{stem}.png\">PNG</a>, <a href=\"charts/{stem}.svg\">SVG</a>.</figcaption></figure>",
        escape(&r.product),
        escape(&crate::chart::units_plural(units))
    );

    b.push_str("<h3>Month by month</h3>\n");
    let mut t = Table::new(
        &[
            ("month", Kind::Text),
            ("actual", Kind::Num),
            ("status", Kind::Text),
            ("forecast", Kind::Num),
            ("80% range", Kind::Text),
            ("95% range", Kind::Text),
            ("error", Kind::Num),
            ("naive", Kind::Num),
            ("seasonal naive", Kind::Num),
            ("tracking signal", Kind::Num),
            ("scored", Kind::Text),
        ],
        false,
    );
    let range = |x: Option<(f64, f64)>, a: f64| match x {
        Some((l, u)) => format!(
            "{}–{}{}",
            chart::fmt_quantity(l),
            chart::fmt_quantity(u),
            if a < l || a > u { " (outside)" } else { "" }
        ),
        None => "–".into(),
    };
    for m in &r.months {
        t.row(
            None,
            vec![
                Cell::text(&m.month.to_string()),
                Cell::num(Some(m.actual), chart::fmt_quantity),
                Cell::text(m.status.name()),
                Cell::num(Some(m.forecast), chart::fmt_quantity),
                Cell::text(&range(m.interval80, m.actual)),
                Cell::text(&range(m.interval95, m.actual)),
                Cell::num(Some(m.forecast - m.actual), |v| {
                    let q = chart::fmt_quantity(v);
                    if v > 0.0 {
                        format!("+{q}")
                    } else {
                        q
                    }
                }),
                Cell::num(m.naive, chart::fmt_quantity),
                Cell::num(m.seasonal_naive, chart::fmt_quantity),
                Cell::num(m.tracking_signal, signed),
                Cell::text(if m.scored {
                    "yes"
                } else {
                    "no (mostly imputed)"
                }),
            ],
        );
    }
    b.push_str(&t.html());

    b.push_str("<h3>Audit of adjustments</h3>\n");
    audit_table(b, "History the forecast was made from", &r.history_audit);
    audit_table(
        b,
        "Review months (cleaning of the actuals)",
        &r.period_audit,
    );
    b.push_str("</section>\n");
}
