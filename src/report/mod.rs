//! The charts and the HTML report of a forecast run.
//!
//! Both `forecast` (at the end of a run) and `report DIR` (later) build the
//! report from the output directory's files, so the report always shows
//! exactly what the files say. [`write_report`] draws every product's chart
//! (PNG and SVG under `charts/`), the overview chart, and `report.html`: one
//! file with the charts inline as SVG and its style and script inline, so it
//! opens offline and can be mailed as it is.

pub mod changes;
pub mod crosscheck;
pub mod html;
pub mod plan;
mod read;
pub mod review;
pub mod workbook;

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

pub use read::{
    read_output_dir, AdjustmentRow, Figures, ForecastRun, ProductResult, Quality, ScoreRow,
    Selection, LINKED_FILES,
};

use crate::chart::{self, ProductChart, ScoreBar};
use crate::error::{Error, Result};
use html::{escape, Cell, Kind, Table};

/// The caution every report carries.
pub const CAUTION: &str = "These projections are decision support, not decisions. Every quantity must be reviewed by the responsible programme staff before it is used for procurement or supply planning, and national treatment guidelines and local regulations take precedence over anything this report shows.";

/// Adjustment-log rows listed per product before the list is cut (the
/// whole log is in `adjustments.csv`).
pub const MAX_ADJUSTMENT_ROWS: usize = 400;

/// What [`write_report`] wrote.
#[derive(Debug, Clone)]
pub struct Written {
    /// `report.html`.
    pub report: PathBuf,
    /// Every chart file (PNG and SVG), overview first.
    pub charts: Vec<PathBuf>,
    /// Products in the report.
    pub products: usize,
}

/// The chart data of one product, as the report draws it.
pub fn product_chart(p: &ProductResult) -> ProductChart {
    let s = &p.selection;
    let mut subtitle = format!("chosen model: {}", s.chosen);
    if !s.members.is_empty() {
        let _ = write!(subtitle, " ({})", s.members);
    }
    if s.pinned {
        subtitle.push_str(", pinned");
    }
    if let Some((name, v)) = chosen_score(s) {
        let _ = write!(subtitle, " · backtest {name} {v}");
    }
    if let Some(b) = s.scores.bias {
        let _ = write!(subtitle, " · bias {b:+.1}%");
    }
    if let Some(t) = s.total_1_12 {
        let _ = write!(subtitle, " · next 12 months: {}", chart::fmt_quantity(t));
    }
    ProductChart {
        title: p.product.clone(),
        subtitle,
        history_label: "cleaned".into(),
        projection_label: format!("projection ({})", s.chosen),
        history: p.history.clone(),
        projection: p.projection.clone(),
        backtest: p.backtest.clone(),
        adjusted: Vec::new(),
    }
}

/// Reads the forecast output directory `dir` and writes `charts/` and
/// `report.html` into it.
pub fn write_report(dir: &Path) -> Result<Written> {
    let run = read_output_dir(dir)?;
    let charts_dir = dir.join("charts");
    std::fs::create_dir_all(&charts_dir).map_err(|source| Error::Io {
        path: charts_dir.clone(),
        action: "cannot create the charts directory",
        source,
    })?;
    let names: Vec<&str> = run.products.iter().map(|p| p.product.as_str()).collect();
    let stems = chart::file_stems(&names);
    // The known changes, when the run applied a changes file: the adjusted
    // line of the product charts and a section of its own.
    let changes_part = changes::changes_part(dir, &charts_dir)?;
    let drawn: Vec<Result<(String, Vec<PathBuf>)>> = run
        .products
        .par_iter()
        .zip(stems.par_iter())
        .map(|(p, stem)| {
            let mut c = product_chart(p);
            if let Some(a) = changes_part
                .as_ref()
                .and_then(|x| x.adjusted.get(&p.product))
            {
                c.adjusted = a.clone();
            }
            let svg = chart::product_svg(&c)?;
            let svg_path = charts_dir.join(format!("{stem}.svg"));
            crate::output::write_atomic(&svg_path, |w| w.write_all(svg.as_bytes()))?;
            let png_path = charts_dir.join(format!("{stem}.png"));
            chart::product_png(&png_path, &c)?;
            Ok((svg, vec![png_path, svg_path]))
        })
        .collect();
    let bars = score_bars(&run);
    let overview = chart::overview_svg(&bars)?;
    let mut charts = vec![
        charts_dir.join("overview.png"),
        charts_dir.join("overview.svg"),
    ];
    chart::overview_png(&charts[0], &bars)?;
    crate::output::write_atomic(&charts[1], |w| w.write_all(overview.as_bytes()))?;
    let mut svgs = Vec::with_capacity(drawn.len());
    for d in drawn {
        let (svg, files) = d?;
        svgs.push(svg);
        charts.extend(files);
    }
    let mut sections = Vec::new();
    if let Some(part) = changes_part {
        charts.extend(part.files);
        sections.push(Section {
            id: "changes",
            title: "Known changes ahead",
            nav: "Known changes",
            html: part.html,
        });
    }
    // The cross-check section, when `provisio crosscheck` has run here.
    if let Some((html, files)) = crosscheck::write_section(dir)? {
        charts.extend(files);
        sections.push(Section {
            id: "crosscheck",
            title: "Cross-check against services and population estimates",
            nav: "Cross-check",
            html,
        });
    }
    if let Some(p) = plan::read_plan(dir)? {
        let (plan_svgs, files) = plan::draw_charts(&p, &charts_dir)?;
        charts.extend(files);
        sections.push(Section {
            id: "plan",
            title: "Supply plan",
            nav: "Supply plan",
            html: plan::section(&p, &plan_svgs),
        });
    }
    let page = render_sections(&run, &stems, &svgs, &overview, &sections);
    let report = dir.join("report.html");
    crate::output::write_atomic(&report, |w| w.write_all(page.as_bytes()))?;
    Ok(Written {
        report,
        charts,
        products: run.products.len(),
    })
}

/// The overview's bars: each product's chosen-model MAPE and bias.
pub fn score_bars(run: &ForecastRun) -> Vec<ScoreBar> {
    run.products
        .iter()
        .map(|p| ScoreBar {
            product: p.product.clone(),
            mape: p.selection.scores.mape,
            bias: p.selection.scores.bias,
        })
        .collect()
}

/// The score the model was chosen by, named and formatted ("MAPE", "4.8%").
fn chosen_score(s: &Selection) -> Option<(String, String)> {
    let by = if s.selected_by.is_empty() {
        "MAPE".to_string()
    } else {
        s.selected_by.to_uppercase()
    };
    let v = match by.as_str() {
        "WAPE" => s.scores.wape.map(pct),
        "MASE" => s.scores.mase.map(|v| format!("{v:.2}")),
        "RMSE" => s.scores.rmse.map(chart::fmt_quantity),
        _ => s.scores.mape.map(pct),
    }?;
    Some((by, v))
}

fn pct(v: f64) -> String {
    format!("{v:.1}%")
}

fn signed_pct(v: f64) -> String {
    if v.abs() < 0.05 {
        "0.0%".into()
    } else {
        format!("{v:+.1}%")
    }
}

fn verdict_class(v: Option<&str>) -> &'static str {
    match v {
        Some("fit") => "fit",
        Some("fit with care") => "care",
        Some("not fit") => "bad",
        _ => "none",
    }
}

fn verdict_pill(q: Option<&Quality>) -> String {
    let v = q.map(|q| q.verdict.as_str());
    let text = v.filter(|v| !v.is_empty()).unwrap_or("no profile");
    format!(
        "<span class=\"pill {}\">{}</span>",
        verdict_class(v),
        escape(text)
    )
}

fn anchor(stem: &str) -> String {
    format!("p-{stem}")
}

fn json_str(v: &serde_json::Value, path: &[&str]) -> String {
    let mut cur = v;
    for k in path {
        match cur.get(k) {
            Some(x) => cur = x,
            None => return String::new(),
        }
    }
    match cur {
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Null => String::new(),
        other => other.to_string(),
    }
}

/// A section added to the report after the product details (e.g. the
/// supply plan), with its own link in the jump bar.
#[derive(Debug, Clone)]
pub struct Section {
    /// Anchor id.
    pub id: &'static str,
    /// Heading.
    pub title: &'static str,
    /// Short label in the navigation bar.
    pub nav: &'static str,
    /// Body HTML (text already escaped).
    pub html: String,
}

/// Builds `report.html` from a run, the charts' file stems, each product's
/// chart SVG (same order as the products) and the overview SVG.
pub fn render(run: &ForecastRun, stems: &[String], svgs: &[String], overview: &str) -> String {
    render_sections(run, stems, svgs, overview, &[])
}

/// [`render`] with extra sections after the product details.
pub fn render_sections(
    run: &ForecastRun,
    stems: &[String],
    svgs: &[String],
    overview: &str,
    sections: &[Section],
) -> String {
    let m = &run.manifest;
    let mut b = String::new();
    let input = json_str(m, &["input"]);
    b.push_str("<header class=\"top\"><div class=\"inner\"><h1>Consumption forecast report</h1>");
    let _ = writeln!(
        b,
        "<p>{} products from <span class=\"mono\">{}</span> · {}</p></div></header>",
        run.products.len(),
        escape(&input),
        escape(&json_str(m, &["tool"]))
    );
    b.push_str("<nav class=\"jump\" aria-label=\"sections\"><div class=\"inner\"><a href=\"#summary\">Run summary</a><a href=\"#products\">Products</a><a href=\"#details\">Product details</a>");
    for sec in sections {
        let _ = write!(b, "<a href=\"#{}\">{}</a>", sec.id, escape(sec.nav));
    }
    b.push_str("<a href=\"#caution\">Caution</a></div></nav>\n<main>\n");
    let _ = writeln!(
        b,
        "<div class=\"caution\" role=\"note\"><strong>Caution.</strong> {}</div>",
        escape(CAUTION)
    );

    summary(&mut b, run);
    products_table(&mut b, run, stems);
    let _ = writeln!(
        b,
        "<figure class=\"chart\" role=\"img\" aria-label=\"Backtest MAPE and bias of every product\">{overview}<figcaption>Overview: backtest accuracy of each product's chosen model. Files: <a href=\"charts/overview.png\">PNG</a>, <a href=\"charts/overview.svg\">SVG</a>.</figcaption></figure>"
    );
    if !run.warnings.is_empty() {
        b.push_str("<h3>Warnings about the run</h3><ul class=\"warn\">");
        for w in &run.warnings {
            let _ = write!(b, "<li>{}</li>", escape(w));
        }
        b.push_str("</ul>\n");
    }

    b.push_str("<h2 id=\"details\">Product details</h2>\n");
    for ((p, stem), svg) in run.products.iter().zip(stems).zip(svgs) {
        product_section(&mut b, p, stem, svg);
    }
    for sec in sections {
        let _ = writeln!(
            b,
            "<h2 id=\"{}\">{}</h2>\n{}",
            sec.id,
            escape(sec.title),
            sec.html
        );
    }
    let _ = write!(
        b,
        "<h2 id=\"caution\">Caution</h2><p>{}</p>\n</main>\n<footer>Made by {} from the files in this folder; rebuild with <code>provisio report &lt;folder&gt;</code>. The demo data shipped with provisio is an invented scenario.</footer>",
        escape(CAUTION),
        escape(&json_str(m, &["tool"]))
    );
    html::page("Consumption forecast report", &b)
}

fn summary(b: &mut String, run: &ForecastRun) {
    let m = &run.manifest;
    let first = run
        .products
        .iter()
        .filter_map(|p| p.history.first().map(|h| h.month))
        .min();
    let last = run
        .products
        .iter()
        .filter_map(|p| p.history.last().map(|h| h.month))
        .max();
    // The projection period leaves out bridged months (forecast between a
    // product's last month and the common start), which the row below counts.
    let fc_first = run
        .products
        .iter()
        .filter_map(|p| p.projection.iter().find(|h| !h.bridged).map(|h| h.month))
        .min();
    let fc_last = run
        .products
        .iter()
        .filter_map(|p| p.projection.last().map(|h| h.month))
        .max();
    let bridged_products = run
        .products
        .iter()
        .filter(|p| p.projection.iter().any(|h| h.bridged))
        .count();
    let span =
        |a: Option<crate::calendar::YearMonth>, z: Option<crate::calendar::YearMonth>| match (a, z)
        {
            (Some(a), Some(z)) => format!(
                "{} to {} ({} months)",
                chart::month_label(a),
                chart::month_label(z),
                a.months_until(z) + 1
            ),
            _ => "none".into(),
        };
    let rows = |k: &str| json_str(m, &["rows", k]);
    let mut facts: Vec<(&str, String)> = vec![
        (
            "Input file",
            format!(
                "<span class=\"mono\">{}</span>",
                escape(&json_str(m, &["input"]))
            ),
        ),
        (
            "Input SHA-256",
            format!(
                "<span class=\"mono\">{}</span>",
                escape(&json_str(m, &["input_sha256"]))
            ),
        ),
        ("Data period", escape(&span(first, last))),
        ("Projection period", escape(&span(fc_first, fc_last))),
        (
            "Bridged months",
            escape(&if bridged_products == 0 {
                "none: every product reported up to the data's last month".to_string()
            } else {
                format!(
                    "{bridged_products} product(s) not reported up to the data's last month: forecast through the missing months too (marked bridged), outside the projection period"
                )
            }),
        ),
        (
            "Products",
            escape(&format!(
                "{} forecast; {} left out (no usable month)",
                run.products.len(),
                json_str(m, &["products_unusable"])
            )),
        ),
        (
            "Rows read",
            escape(&format!(
                "{} = {} used as reported + {} adjusted + {} rejected",
                rows("read"),
                rows("used"),
                rows("adjusted"),
                rows("rejected")
            )),
        ),
    ];
    if let Some(by_rule) = m.get("adjustments_by_rule").and_then(|v| v.as_object()) {
        let list: Vec<String> = by_rule.iter().map(|(k, v)| format!("{v} {k}")).collect();
        facts.push(("Adjustments", escape(&list.join(", "))));
    }
    let fs = |k: &[&str]| {
        let mut p = vec!["forecast_settings"];
        p.extend_from_slice(k);
        json_str(m, &p)
    };
    facts.push((
        "Backtest",
        escape(&format!(
            "{} rolling origins × {} months ahead, scored against the cleaned series{}",
            fs(&["backtest", "origins"]),
            fs(&["backtest", "horizon"]),
            if fs(&["backtest", "exclude_imputed"]) == "true" {
                "; mostly imputed months not scored"
            } else {
                ""
            }
        )),
    ));
    facts.push((
        "Selection",
        escape(&format!(
            "lowest {}; models within {} of the best count as tied",
            fs(&["select", "score"]).to_uppercase(),
            fs(&["select", "tie_margin"])
                .parse::<f64>()
                .map(|v| format!("{}%", v * 100.0))
                .unwrap_or_else(|_| fs(&["select", "tie_margin"]))
        )),
    ));
    facts.push(("Horizon", escape(&format!("{} months", fs(&["horizon"])))));
    if !run.files.is_empty() {
        let links: Vec<String> = run
            .files
            .iter()
            .map(|f| {
                let f = escape(f);
                format!("<a class=\"mono\" href=\"{f}\">{f}</a>")
            })
            .collect();
        facts.push(("Files in this folder", links.join(", ")));
    }
    if let Some(cs) = m.get("clean_settings").and_then(|v| v.as_object()) {
        facts.push(("Cleaning settings", escape(&as_options(cs))));
    }
    let pin = json_str(m, &["pin_file"]);
    if !pin.is_empty() {
        facts.push(("Pinned models from", escape(&pin)));
    }
    if let Some(c) = m.get("candidates").and_then(|v| v.as_array()) {
        facts.push((
            "Candidate models",
            escape(&format!("{} (see scores per product)", c.len())),
        ));
    }
    facts.push(("Tool", escape(&json_str(m, &["tool"]))));
    facts.push((
        "Rejected rows",
        escape(&format!("{} (listed in rejected.csv)", run.rejected_rows)),
    ));
    b.push_str("<h2 id=\"summary\">Run summary</h2>\n<dl class=\"facts\">");
    for (k, v) in facts {
        let _ = write!(b, "<dt>{}</dt><dd>{v}</dd>", escape(k));
    }
    b.push_str("</dl>\n");
}

/// Settings written as the command-line options that set them.
fn as_options(settings: &serde_json::Map<String, serde_json::Value>) -> String {
    settings
        .iter()
        .map(|(k, v)| match v {
            serde_json::Value::Bool(true) => format!("--{}", k.replace('_', "-")),
            serde_json::Value::Bool(false) => format!("no --{}", k.replace('_', "-")),
            v => format!("--{} {v}", k.replace('_', "-")),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

fn products_table(b: &mut String, run: &ForecastRun, stems: &[String]) {
    let mut t = Table::new(
        &[
            ("product", Kind::Text),
            ("data quality", Kind::Text),
            ("chosen model", Kind::Text),
            ("MAPE", Kind::Num),
            ("bias", Kind::Num),
            ("next 12 months total", Kind::Num),
            ("AMC last 12", Kind::Num),
            ("AMC next 12", Kind::Num),
        ],
        true,
    );
    for (p, stem) in run.products.iter().zip(stems) {
        let s = &p.selection;
        let verdict = p
            .quality
            .as_ref()
            .map(|q| q.verdict.clone())
            .unwrap_or_default();
        let mut model = escape(&s.chosen);
        if s.pinned {
            model.push_str(" <span class=\"pill none\">pinned</span>");
        }
        if !s.backtested {
            model.push_str(" <span class=\"pill none\">not backtested</span>");
        }
        t.row(
            None,
            vec![
                Cell::html(
                    format!("<a href=\"#{}\">{}</a>", anchor(stem), escape(&p.product)),
                    &p.product,
                ),
                Cell::html(verdict_pill(p.quality.as_ref()), &verdict),
                Cell::html(model, &s.chosen),
                Cell::num(s.scores.mape, pct),
                Cell::num(s.scores.bias, signed_pct),
                Cell::num(s.total_1_12, chart::fmt_quantity),
                Cell::num(s.amc_last_12, chart::fmt_quantity),
                Cell::num(s.amc_next_12, chart::fmt_quantity),
            ],
        );
    }
    b.push_str("<h2 id=\"products\">Products</h2>\n<p class=\"note\">Click a column heading to sort. MAPE and bias are the chosen model's backtest scores (bias &gt; 0: over-forecast). AMC: average monthly consumption, in base units.</p>\n");
    b.push_str(&t.html());
}

fn product_section(b: &mut String, p: &ProductResult, stem: &str, svg: &str) {
    let s = &p.selection;
    let q = p.quality.as_ref();
    let _ = writeln!(
        b,
        "<section class=\"product {}\" id=\"{}\" data-product=\"{}\">\n<h2>{} {}</h2>",
        verdict_class(q.map(|q| q.verdict.as_str())),
        anchor(stem),
        escape(&p.product),
        escape(&p.product),
        verdict_pill(q)
    );
    let mut chosen = format!("<strong>{}</strong>", escape(&s.chosen));
    if !s.members.is_empty() {
        let _ = write!(chosen, " (mean of {})", escape(&s.members));
    }
    if s.pinned {
        let _ = write!(
            chosen,
            "; pinned by the user (the backtest would choose {})",
            escape(&s.best)
        );
    }
    let _ = writeln!(
        b,
        "<p>Chosen model: {chosen}. {}</p>",
        escape(&capitalise(&s.reason))
    );
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
        s.total_1_12.map(chart::fmt_quantity).unwrap_or_else(dash),
        "projected, next 12 months",
    ));
    b.push_str(&key(
        s.total_13_24.map(chart::fmt_quantity).unwrap_or_else(dash),
        "projected, months 13–24",
    ));
    b.push_str(&key(
        match (s.amc_last_12, s.amc_next_12) {
            (Some(a), Some(n)) => {
                format!("{} → {}", chart::fmt_quantity(a), chart::fmt_quantity(n))
            }
            _ => dash(),
        },
        "AMC: last 12 → next 12",
    ));
    match chosen_score(s) {
        Some((name, v)) => b.push_str(&key(v, &format!("backtest {name} (chosen by)"))),
        None => b.push_str(&key(dash(), "backtest score")),
    }
    b.push_str(&key(
        s.scores.bias.map(signed_pct).unwrap_or_else(dash),
        "bias (> 0 over-forecast)",
    ));
    b.push_str(&key(
        s.margin
            .map(|v| format!("{} {}", signed_pct(v.max(0.0)), s.runner_up))
            .unwrap_or_else(dash),
        "runner-up, worse by",
    ));
    b.push_str("</div>\n");
    let _ = writeln!(
        b,
        "<figure class=\"chart\" role=\"img\" aria-label=\"Chart of {}\">{svg}<figcaption>Consumption in base units per month. Files: <a href=\"charts/{stem}.png\">PNG</a>, <a href=\"charts/{stem}.svg\">SVG</a>.</figcaption></figure>",
        escape(&p.product)
    );

    b.push_str("<h3>Candidate models</h3>\n");
    scores_table(b, p);

    b.push_str("<h3>Data quality</h3>\n");
    match q {
        Some(q) => {
            let _ = write!(
                b,
                "<p>{} — {} months covered, {} reported, {} missing; {} with stockouts; mean reporting rate {}%; {} site(s).</p>",
                verdict_pill(Some(q)),
                escape(&q.months),
                escape(&q.months_reported),
                escape(&q.months_missing),
                escape(&q.months_with_stockouts),
                escape(if q.mean_reporting_rate.is_empty() { "–" } else { &q.mean_reporting_rate }),
                escape(&q.sites)
            );
            if !q.reasons.is_empty() {
                b.push_str("<ul>");
                for r in &q.reasons {
                    let _ = write!(b, "<li>{}</li>", escape(r));
                }
                b.push_str("</ul>\n");
            }
        }
        None => b.push_str("<p class=\"note\">No data-quality profile in quality.csv.</p>\n"),
    }

    b.push_str("<h3>Adjustments to the data</h3>\n");
    adjustments(b, p);

    b.push_str("<h3>Warnings</h3>\n");
    if p.warnings.is_empty() {
        b.push_str("<p class=\"note\">None.</p>\n");
    } else {
        b.push_str("<ul class=\"warn\">");
        for w in &p.warnings {
            let _ = write!(b, "<li>{}</li>", escape(w));
        }
        b.push_str("</ul>\n");
    }
    b.push_str("<p class=\"note\"><a href=\"#products\">↑ products table</a></p>\n</section>\n");
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

fn scores_table(b: &mut String, p: &ProductResult) {
    let by = p.selection.selected_by.to_lowercase();
    let pick = |r: &ScoreRow| match by.as_str() {
        "wape" => r.scores.wape,
        "mase" => r.scores.mase,
        "rmse" => r.scores.rmse,
        _ => r.scores.mape,
    };
    let mut rows: Vec<&ScoreRow> = p.scores.iter().collect();
    rows.sort_by(|a, b| {
        let (x, y) = (pick(a), pick(b));
        match (x, y) {
            (Some(x), Some(y)) => x.total_cmp(&y),
            (Some(_), None) => std::cmp::Ordering::Less,
            (None, Some(_)) => std::cmp::Ordering::Greater,
            (None, None) => a.model.cmp(&b.model),
        }
    });
    let mut t = Table::new(
        &[
            ("model", Kind::Text),
            ("status", Kind::Text),
            ("MAPE", Kind::Num),
            ("bias", Kind::Num),
            ("WAPE", Kind::Num),
            ("MASE", Kind::Num),
            ("RMSE", Kind::Num),
            ("in 80% range", Kind::Num),
            ("in 95% range", Kind::Num),
            ("forecasts", Kind::Num),
            ("note", Kind::Text),
        ],
        true,
    );
    for r in rows {
        let class = (r.model == p.selection.chosen).then_some("chosen");
        t.row(
            class,
            vec![
                Cell::text(&r.model),
                Cell::text(&r.status),
                Cell::num(r.scores.mape, pct),
                Cell::num(r.scores.bias, signed_pct),
                Cell::num(r.scores.wape, pct),
                Cell::num(r.scores.mase, |v| format!("{v:.2}")),
                Cell::num(r.scores.rmse, |v| {
                    // One decimal for small quantities, so the column reads evenly.
                    if v.abs() < 100.0 {
                        format!("{v:.1}")
                    } else {
                        chart::fmt_quantity(v)
                    }
                }),
                Cell::num(r.scores.coverage80, |v| format!("{v:.0}%")),
                Cell::num(r.scores.coverage95, |v| format!("{v:.0}%")),
                Cell::num(r.points, |v| format!("{v:.0}")),
                Cell::text(&r.note),
            ],
        );
    }
    if t.is_empty() {
        b.push_str(
            "<p class=\"note\">No backtest scores (scores.csv has none for this product).</p>\n",
        );
    } else {
        let _ = writeln!(
            b,
            "<p class=\"note\">Ordered by {} (the score the choice was made by); the chosen model is highlighted.</p>",
            escape(&p.selection.selected_by)
        );
        b.push_str(&t.html());
    }
}

fn adjustments(b: &mut String, p: &ProductResult) {
    if p.adjustments.is_empty() {
        b.push_str("<p class=\"note\">None: every month is used as reported.</p>\n");
        return;
    }
    let mut by_rule: BTreeMap<&str, usize> = BTreeMap::new();
    for a in &p.adjustments {
        *by_rule.entry(a.rule.as_str()).or_default() += 1;
    }
    let counts: Vec<String> = by_rule.iter().map(|(r, n)| format!("{n} {r}")).collect();
    let _ = writeln!(
        b,
        "<details><summary>{} adjustment(s): {}</summary>",
        p.adjustments.len(),
        escape(&counts.join(", "))
    );
    let mut t = Table::new(
        &[
            ("month", Kind::Text),
            ("site", Kind::Text),
            ("rule", Kind::Text),
            ("before", Kind::Num),
            ("after", Kind::Num),
            ("reason", Kind::Text),
            ("input line", Kind::Num),
        ],
        true,
    );
    for a in p.adjustments.iter().take(MAX_ADJUSTMENT_ROWS) {
        t.row(
            None,
            vec![
                Cell::text(&a.month),
                Cell::text(&a.site),
                Cell::text(&a.rule),
                Cell::num(a.before, chart::fmt_quantity),
                Cell::num(a.after, chart::fmt_quantity),
                Cell::text(&a.reason),
                Cell::num(a.line.parse().ok(), |v| format!("{v:.0}")),
            ],
        );
    }
    b.push_str(&t.html());
    if p.adjustments.len() > MAX_ADJUSTMENT_ROWS {
        let _ = write!(
            b,
            "<p class=\"note\">The first {MAX_ADJUSTMENT_ROWS} of {} are listed; adjustments.csv has them all.</p>",
            p.adjustments.len()
        );
    }
    b.push_str("</details>\n");
}
