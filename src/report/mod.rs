//! The HTML report of a forecast run, and chart files on request.
//!
//! Both `forecast` (at the end of a run) and `report DIR` (later) build the
//! report from the output directory's files, so the report always shows
//! exactly what the files say. [`write_report`] writes `report.html`: one
//! file with its style, script and data inline, so it opens offline and can
//! be mailed as it is. It is built for 10 to 10,000 products: the first
//! view (run summary, portfolio figures, the products that need attention)
//! is plain HTML; the product index is one compact JSON row per product,
//! searched, filtered and sorted by the page's own script; each product's
//! detail (chart, scores, data quality, adjustments, warnings) is a compact
//! JSON record drawn only when the product is opened (runs of up to
//! [`ALL_DETAILS_UP_TO`] products draw every detail when the page opens).
//! Chart image files (PNG and SVG under `charts/`) are written only when
//! asked for ([`ChartFiles`]).

pub mod changes;
pub mod crosscheck;
pub mod detail;
pub mod html;
pub mod plan;
mod read;
pub mod review;
pub mod workbook;

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

pub use read::{
    read_output_dir, read_units, AdjustmentRow, Figures, ForecastRun, ProductResult, Quality,
    ScoreRow, Selection, LINKED_FILES,
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
    /// Every chart file (PNG and SVG) written, overview first.
    pub charts: Vec<PathBuf>,
    /// Products in the report.
    pub products: usize,
    /// What the caller should pass on as warnings (names the PNG charts
    /// could not draw whole).
    pub warnings: Vec<String>,
}

/// Which products get chart image files (PNG and SVG under `charts/`),
/// for documents and slides; the report itself draws its charts.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub enum ChartFiles {
    /// None (the default).
    #[default]
    None,
    /// Every product, and the overview.
    All,
    /// These products (names as in the data).
    Named(Vec<String>),
}

impl ChartFiles {
    /// From the values of `--chart-files`: `all`, or product names.
    pub fn from_values(values: &[String]) -> ChartFiles {
        if values.is_empty() {
            ChartFiles::None
        } else if values.iter().any(|v| v == "all") {
            ChartFiles::All
        } else {
            ChartFiles::Named(values.to_vec())
        }
    }
    fn wants(&self, product: &str) -> bool {
        match self {
            ChartFiles::None => false,
            ChartFiles::All => true,
            ChartFiles::Named(names) => names.iter().any(|n| n == product),
        }
    }
}

/// How the report is written.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ReportOptions {
    /// Chart image files to write.
    pub chart_files: ChartFiles,
    /// Link `forecast.xlsx` even if it is not there yet (`forecast`
    /// writes it beside the report).
    pub workbook_linked: bool,
}

/// Runs of at most this many products show every product's detail (with
/// its chart) below the index when the page opens; larger runs draw a
/// product's detail when it is opened.
pub const ALL_DETAILS_UP_TO: usize = 60;

/// Runs of at most this many products get the overview bar chart.
pub const OVERVIEW_UP_TO: usize = 100;

/// Products listed per "needs attention" list on the first view.
pub const ATTENTION_SHOWN: usize = 10;

/// The chart subtitle of one product: chosen model, score, bias, total
/// (statistical and adjusted, when a known change touched the product).
fn subtitle(p: &ProductResult) -> String {
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
        let _ = write!(subtitle, " · bias {}%", chart::fmt_signed(b));
    }
    match (s.total_1_12, adjusted_total(p, 0, 12)) {
        (Some(t), Some(a)) => {
            let _ = write!(
                subtitle,
                " · next 12 months: {} statistical, {} adjusted",
                chart::fmt_quantity(t),
                chart::fmt_quantity(a)
            );
        }
        (Some(t), None) => {
            let _ = write!(subtitle, " · next 12 months: {}", chart::fmt_quantity(t));
        }
        _ => {}
    }
    subtitle
}

/// Total of the adjusted forecast over projected months `from` to `to`
/// (0-based, `to` excluded), as `changes_summary.csv` counts them; `None`
/// when no known change touched the product or it has no such month.
pub fn adjusted_total(p: &ProductResult, from: usize, to: usize) -> Option<f64> {
    (p.adjusted.len() > from).then(|| {
        p.adjusted
            .iter()
            .skip(from)
            .take(to.saturating_sub(from))
            .map(|a| a.1)
            .sum()
    })
}

/// The chart data of one product, as the chart files draw it.
pub fn product_chart(p: &ProductResult) -> ProductChart {
    let s = &p.selection;
    ProductChart {
        title: p.product.clone(),
        subtitle: subtitle(p),
        history_label: "cleaned".into(),
        projection_label: format!("projection ({})", s.chosen),
        history: p.history.clone(),
        projection: p.projection.clone(),
        backtest: p.backtest.clone(),
        adjusted: p.adjusted.clone(),
        units: p.units.clone(),
    }
}

fn create_dir(path: &Path) -> Result<()> {
    std::fs::create_dir_all(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        action: "cannot create the charts directory",
        source,
    })
}

/// Draws the chart files asked for (PNG and SVG per product, in parallel,
/// and the overview when every product is asked for).
fn write_chart_files(
    run: &ForecastRun,
    stems: &[String],
    charts_dir: &Path,
    which: &ChartFiles,
) -> Result<Vec<PathBuf>> {
    if *which == ChartFiles::None {
        return Ok(Vec::new());
    }
    create_dir(charts_dir)?;
    let mut charts = Vec::new();
    if *which == ChartFiles::All {
        let bars = score_bars(run);
        let png = charts_dir.join("overview.png");
        let svg_path = charts_dir.join("overview.svg");
        chart::overview_png(&png, &bars)?;
        let svg = chart::overview_svg(&bars)?;
        crate::output::write_atomic(&svg_path, |w| w.write_all(svg.as_bytes()))?;
        charts.push(png);
        charts.push(svg_path);
    }
    let drawn: Vec<Result<Vec<PathBuf>>> = run
        .products
        .par_iter()
        .zip(stems.par_iter())
        .filter(|(p, _)| which.wants(&p.product))
        .map(|(p, stem)| {
            let c = product_chart(p);
            let svg = chart::product_svg(&c)?;
            let svg_path = charts_dir.join(format!("{stem}.svg"));
            crate::output::write_atomic(&svg_path, |w| w.write_all(svg.as_bytes()))?;
            let png_path = charts_dir.join(format!("{stem}.png"));
            chart::product_png(&png_path, &c)?;
            Ok(vec![png_path, svg_path])
        })
        .collect();
    for d in drawn {
        charts.extend(d?);
    }
    Ok(charts)
}

/// Reads the forecast output directory `dir` and writes `report.html`
/// into it (no chart files; see [`write_report_with`]).
pub fn write_report(dir: &Path) -> Result<Written> {
    write_report_with(dir, &ReportOptions::default())
}

/// Reads the forecast output directory `dir` and writes `report.html`,
/// and the chart files `options` asks for under `charts/`.
pub fn write_report_with(dir: &Path, options: &ReportOptions) -> Result<Written> {
    let mut run = read_output_dir(dir)?;
    if options.workbook_linked && !run.files.iter().any(|f| f == workbook::WORKBOOK_FILE) {
        run.files.insert(0, workbook::WORKBOOK_FILE.to_string());
    }
    let charts_dir = dir.join("charts");
    let names: Vec<&str> = run.products.iter().map(|p| p.product.as_str()).collect();
    let stems = chart::file_stems(&names);
    if let ChartFiles::Named(asked) = &options.chart_files {
        for n in asked {
            if !names.contains(&n.as_str()) {
                return Err(Error::Input {
                    file: dir.join("selection.csv").display().to_string(),
                    line: 0,
                    column: Some("product".into()),
                    message: format!("no product '{n}' for --chart-files; give a product name as in selection.csv, or all"),
                });
            }
        }
    }
    let mut charts = write_chart_files(&run, &stems, &charts_dir, &options.chart_files)?;
    // The known changes, when the run applied a changes file: a section of
    // their own (the product records carry the adjusted forecast).
    let changes_part = changes::changes_part(dir, &charts_dir)?;
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
    let mut attention = attention_lists(&run);
    // Names drawn into the PNG titles of the plan's and the cross-check's
    // charts.
    let mut drawn_elsewhere: Vec<String> = Vec::new();
    // The cross-check section, when `provisio crosscheck` has run here.
    let crosscheck_rows = crosscheck::read_crosscheck(dir)?;
    if let Some(rows) = &crosscheck_rows {
        attention.push(crosscheck_attention(&run, rows));
    }
    if let Some((html, files)) = crosscheck::write_section(dir)? {
        if !files.is_empty() {
            drawn_elsewhere.extend(crosscheck_rows.iter().flatten().map(|r| r.product.clone()));
        }
        charts.extend(files);
        sections.push(Section {
            id: "crosscheck",
            title: "Cross-check against services and population estimates",
            nav: "Cross-check",
            html,
        });
    }
    if let Some(p) = plan::read_plan(dir)? {
        attention.push(plan_attention(&run, &p));
        create_dir(&charts_dir)?;
        let (plan_svgs, files) = plan::draw_charts(&p, &charts_dir)?;
        if !files.is_empty() {
            drawn_elsewhere.extend(p.series.iter().map(|(k, _)| k.0.clone()));
        }
        charts.extend(files);
        sections.push(Section {
            id: "plan",
            title: "Supply plan",
            nav: "Supply plan",
            html: plan::section(&p, &plan_svgs),
        });
    }
    let with_files: Vec<bool> = run
        .products
        .iter()
        .map(|p| options.chart_files.wants(&p.product))
        .collect();
    let report = dir.join("report.html");
    crate::output::write_atomic(&report, |w| {
        write_page(w, &run, &stems, &with_files, &attention, &sections)
    })?;
    // Every name a PNG title carries: the products with chart files, and
    // those of the plan's and the cross-check's charts.
    let mut drawn: Vec<&str> = run
        .products
        .iter()
        .zip(&with_files)
        .filter(|(_, w)| **w)
        .map(|(p, _)| p.product.as_str())
        .collect();
    drawn.extend(drawn_elsewhere.iter().map(String::as_str));
    drawn.sort_unstable();
    drawn.dedup();
    Ok(Written {
        report,
        charts,
        products: run.products.len(),
        warnings: chart::png_names_warning(drawn).into_iter().collect(),
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
        "RMSSE" => s.scores.rmsse.map(|v| format!("{v:.2}")),
        _ => s.scores.mape.map(pct),
    }?;
    Some((by, v))
}

fn pct(v: f64) -> String {
    format!("{v:.1}%")
}

fn signed_pct(v: f64) -> String {
    format!("{}%", chart::fmt_signed(v))
}

fn verdict_class(v: Option<&str>) -> &'static str {
    match v {
        Some("fit") => "fit",
        Some("fit with care") => "care",
        Some("not fit") => "bad",
        _ => "none",
    }
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

/// One "needs attention" list of the first view: the products on it, most
/// pressing first, each with a short note.
#[derive(Debug, Clone)]
pub struct AttentionList {
    /// Heading.
    pub title: &'static str,
    /// What puts a product on the list.
    pub why: &'static str,
    /// Product (index into the run's products) and note.
    pub items: Vec<(usize, String)>,
}

/// The lists every run has: warnings, worst data quality, largest bias.
/// Other sections (the cross-check, the plan) add theirs.
pub fn attention_lists(run: &ForecastRun) -> Vec<AttentionList> {
    let mut warned: Vec<(usize, String)> = run
        .products
        .iter()
        .enumerate()
        .filter(|(_, p)| !p.warnings.is_empty())
        .map(|(i, p)| (i, chart::cut(&p.warnings[0], 160)))
        .collect();
    warned.sort_by_key(|(i, _)| std::cmp::Reverse(run.products[*i].warnings.len()));
    let rank = |v: &str| match v {
        "not fit" => 0,
        "fit with care" => 1,
        _ => 2,
    };
    let mut quality: Vec<(usize, usize, usize)> = run
        .products
        .iter()
        .enumerate()
        .filter_map(|(i, p)| {
            let q = p.quality.as_ref()?;
            let r = rank(&q.verdict);
            (r < 2).then(|| (i, r, months_missing(q)))
        })
        .collect();
    quality.sort_by_key(|&(i, r, missing)| (r, std::cmp::Reverse(missing), i));
    let quality = quality
        .into_iter()
        .map(|(i, _, _)| {
            let q = run.products[i].quality.as_ref();
            let verdict = q.map(|q| q.verdict.as_str()).unwrap_or("");
            let reason = q.and_then(|q| q.reasons.first()).map(String::as_str);
            // Said apart, as the product's own data-quality line says them
            // (a tester read "16 month(s) missing" here against "0
            // missing; 27 with stockouts" there).
            let months = q.map(missing_words).unwrap_or_default();
            let note = match reason {
                Some(r) => format!("{verdict}, {months}: {r}"),
                None => format!("{verdict}, {months}"),
            };
            (i, chart::cut(&note, 160))
        })
        .collect();
    let mut biased: Vec<(usize, f64)> = run
        .products
        .iter()
        .enumerate()
        .filter_map(|(i, p)| {
            let b = p.selection.scores.bias?;
            (b.abs() > detail::LARGE_BIAS_PCT).then_some((i, b))
        })
        .collect();
    biased.sort_by(|x, y| y.1.abs().total_cmp(&x.1.abs()));
    let biased = biased
        .into_iter()
        .map(|(i, b)| {
            let s = &run.products[i].selection;
            let mut note = format!("bias {} ({})", signed_pct(b), s.chosen);
            if let Some(m) = s.scores.mape {
                let _ = write!(note, ", MAPE {}", pct(m));
            }
            (i, note)
        })
        .collect();
    vec![
        AttentionList {
            title: "Warnings",
            why: "the run warned about these products",
            items: warned,
        },
        AttentionList {
            title: "Weakest data",
            why: "data quality \"not fit\" first, then \"fit with care\"; within each, most months missing first (not reported, or stocked out too long to trust and treated as missing: quality.csv months_missing + months_stocked_out_too_long)",
            items: quality,
        },
        AttentionList {
            title: "Largest backtest bias",
            why: "the chosen model's backtest bias is beyond ±20% (> 0: over-forecast)",
            items: biased,
        },
    ]
}

/// Months a product's history lacks: months not reported, plus reported
/// months whose stockouts were too long to trust and are treated as
/// missing (the two never overlap: only a reported month is treated so).
/// "3 month(s) missing, 16 stocked out too long to use" (either part left
/// out when zero; "no month missing" when both are).
fn missing_words(q: &Quality) -> String {
    let n = |v: &str| v.trim().parse::<usize>().unwrap_or(0);
    let (missing, stocked_out) = (n(&q.months_missing), n(&q.months_stocked_out_too_long));
    let mut parts = Vec::new();
    if missing > 0 {
        parts.push(format!("{missing} month(s) missing"));
    }
    if stocked_out > 0 {
        parts.push(format!(
            "{stocked_out} month(s) stocked out too long to use"
        ));
    }
    if parts.is_empty() {
        "no month missing".to_string()
    } else {
        parts.join(", ")
    }
}

fn months_missing(q: &Quality) -> usize {
    let n = |v: &str| v.trim().parse::<usize>().unwrap_or(0);
    n(&q.months_missing).saturating_add(n(&q.months_stocked_out_too_long))
}

fn product_index(run: &ForecastRun) -> std::collections::HashMap<&str, usize> {
    run.products
        .iter()
        .enumerate()
        .map(|(i, p)| (p.product.as_str(), i))
        .collect()
}

/// Products whose services or population estimate is flagged above or
/// below the consumption forecast.
fn crosscheck_attention(run: &ForecastRun, rows: &[crosscheck::CrossCheckRow]) -> AttentionList {
    let index = product_index(run);
    let mut items: Vec<(usize, String)> = Vec::new();
    for r in rows
        .iter()
        .filter(|r| r.flag == "above" || r.flag == "below")
    {
        let Some(&i) = index.get(r.product.as_str()) else {
            continue;
        };
        if items.iter().any(|(k, _)| *k == i) {
            continue;
        }
        let ratio = r
            .ratio
            .map(|x| format!(" (ratio {x:.2})"))
            .unwrap_or_default();
        items.push((i, format!("{}: {}{ratio}", r.method, r.flag)));
    }
    AttentionList {
        title: "Cross-check divergences",
        why: "a services or population estimate differs from the consumption forecast beyond the threshold",
        items,
    }
}

/// Products whose supply plan projects a stockout.
fn plan_attention(run: &ForecastRun, p: &plan::PlanRead) -> AttentionList {
    let index = product_index(run);
    let mut items: Vec<(usize, String)> = Vec::new();
    for ((product, site), s) in &p.series {
        let Some(&i) = index.get(product.as_str()) else {
            continue;
        };
        let Some(first) = s
            .months
            .iter()
            .find(|m| m.flag.split(' ').any(|f| f == "stockout"))
        else {
            continue;
        };
        let at = site
            .as_ref()
            .map(|x| format!(" at {x}"))
            .unwrap_or_default();
        items.push((
            i,
            format!(
                "stockout projected{at} from {}",
                chart::month_label(first.month)
            ),
        ));
    }
    AttentionList {
        title: "Projected stockouts",
        why: "the supply plan runs out of stock in some month",
        items,
    }
}

/// Writes `report.html`: the first view (summary, portfolio figures, the
/// products that need attention), the product index, and each product's
/// detail record, drawn by the page's script when the product is opened.
fn write_page(
    w: &mut dyn std::io::Write,
    run: &ForecastRun,
    stems: &[String],
    with_files: &[bool],
    attention: &[AttentionList],
    sections: &[Section],
) -> std::io::Result<()> {
    let mut listed = vec![false; run.products.len()];
    for l in attention {
        for (i, _) in &l.items {
            listed[*i] = true;
        }
    }
    let first = first_view(run, stems, attention, sections);
    w.write_all(html::page_start("Consumption forecast report").as_bytes())?;
    w.write_all(first.as_bytes())?;
    // The index: one compact row per product, rendered by the script.
    let rows: Vec<detail::IndexRow> = run
        .products
        .iter()
        .zip(stems)
        .zip(&listed)
        .map(|((p, stem), l)| detail::index_row(p, stem, *l))
        .collect();
    let index = detail::safe_json(&serde_json::to_string(&rows).map_err(std::io::Error::other)?);
    writeln!(
        w,
        "<script type=\"application/json\" id=\"index-data\">{index}</script>"
    )?;
    w.write_all(html::page_scripts(&[html::SCRIPT, REPORT_SCRIPT]).as_bytes())?;
    // Detail records, drawn in parallel a block at a time.
    const BLOCK: usize = 256;
    let large = run.products.len() > ALL_DETAILS_UP_TO;
    for (k, block) in run.products.chunks(BLOCK).enumerate() {
        let base = k * BLOCK;
        let parts: Vec<String> = block
            .par_iter()
            .enumerate()
            .map(|(j, p)| {
                let i = base + j;
                format!(
                    "<script type=\"application/json\" id=\"d-{}\">{}</script>\n",
                    stems[i],
                    detail::detail_json(p, with_files[i], large)
                )
            })
            .collect();
        for part in parts {
            w.write_all(part.as_bytes())?;
        }
    }
    w.write_all(html::page_end().as_bytes())
}

/// The report's own script: the product index and the product details.
pub const REPORT_SCRIPT: &str = include_str!("report.js");

fn first_view(
    run: &ForecastRun,
    stems: &[String],
    attention: &[AttentionList],
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
    b.push_str("<nav class=\"jump\" aria-label=\"sections\"><div class=\"inner\"><a href=\"#summary\">Run summary</a><a href=\"#portfolio\">Portfolio</a><a href=\"#attention\">Needs attention</a><a href=\"#products\">Products</a>");
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
    portfolio(&mut b, run);
    attention_section(&mut b, run, stems, attention);
    index_section(&mut b, run);
    b.push_str("<div id=\"detail\"></div>\n");
    if run.products.len() <= ALL_DETAILS_UP_TO {
        b.push_str("<h2 id=\"details\">Product details</h2>\n<div id=\"every-detail\" data-all=\"yes\"></div>\n");
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
        "<h2 id=\"caution\">Caution</h2><p>{}</p>\n</main>\n<footer>Made by {} from the files in this folder; rebuild with <code>provisio report &lt;folder&gt;</code>. The demo data shipped with provisio is an invented scenario.</footer>\n",
        escape(CAUTION),
        escape(&json_str(m, &["tool"]))
    );
    b
}

/// Portfolio figures: products by verdict, accuracy bands, bias, and the
/// overview chart for runs small enough to read it.
fn portfolio(b: &mut String, run: &ForecastRun) {
    let n = run.products.len();
    let count = |f: &dyn Fn(&ProductResult) -> bool| run.products.iter().filter(|p| f(p)).count();
    let verdict = |v: &'static str| {
        move |p: &ProductResult| p.quality.as_ref().is_some_and(|q| q.verdict == v)
    };
    let mut mapes: Vec<f64> = run
        .products
        .iter()
        .filter_map(|p| p.selection.scores.mape)
        .collect();
    mapes.sort_by(f64::total_cmp);
    let median = (!mapes.is_empty()).then(|| {
        let k = mapes.len();
        if k % 2 == 1 {
            mapes[k / 2]
        } else {
            0.5 * (mapes[k / 2 - 1] + mapes[k / 2])
        }
    });
    let key = |b: &mut String, v: String, l: &str| {
        let _ = write!(
            b,
            "<div class=\"key\"><div class=\"v\">{}</div><div class=\"l\">{}</div></div>",
            escape(&v),
            escape(l)
        );
    };
    b.push_str("<h2 id=\"portfolio\">Portfolio</h2>\n<div class=\"keys\">");
    key(b, n.to_string(), "products forecast");
    key(
        b,
        count(&verdict("fit")).to_string(),
        "data fit to forecast from",
    );
    key(
        b,
        count(&verdict("fit with care")).to_string(),
        "fit with care",
    );
    key(b, count(&verdict("not fit")).to_string(), "not fit");
    key(
        b,
        median.map(pct).unwrap_or_else(|| "–".into()),
        "median backtest MAPE",
    );
    key(
        b,
        count(&|p| {
            p.selection
                .scores
                .bias
                .is_some_and(|x| x.abs() > detail::LARGE_BIAS_PCT)
        })
        .to_string(),
        "bias beyond ±20%",
    );
    key(
        b,
        count(&|p| !p.warnings.is_empty()).to_string(),
        "with warnings",
    );
    key(b, count(&|p| p.selection.pinned).to_string(), "pinned");
    b.push_str("</div>\n");
    let bands: [(&str, f64, f64); 4] = [
        ("under 10%", 0.0, 10.0),
        ("10% to 20%", 10.0, 20.0),
        ("20% to 50%", 20.0, 50.0),
        ("50% or more", 50.0, f64::INFINITY),
    ];
    let mut t = Table::new(
        &[("backtest MAPE", Kind::Text), ("products", Kind::Num)],
        false,
    );
    for (label, lo, hi) in bands {
        let k = mapes.iter().filter(|&&v| v >= lo && v < hi).count();
        t.row(
            None,
            vec![
                Cell::text(label),
                Cell::num(Some(k as f64), |v| format!("{v:.0}")),
            ],
        );
    }
    t.row(
        None,
        vec![
            Cell::text("no MAPE (not backtested, or zero months)"),
            Cell::num(Some((n - mapes.len()) as f64), |v| format!("{v:.0}")),
        ],
    );
    b.push_str("<p class=\"note\">Accuracy of each product's chosen model in its backtest. Quantities are not added across products: their units differ.</p>\n");
    b.push_str(&t.html());
    if n <= OVERVIEW_UP_TO {
        if let Ok(svg) = chart::overview_svg(&score_bars(run)) {
            let _ = writeln!(
                b,
                "<figure class=\"chart\" role=\"img\" aria-label=\"Backtest MAPE and bias of every product\">{svg}<figcaption>Overview: backtest accuracy of each product's chosen model.</figcaption></figure>"
            );
        }
    }
    if !run.warnings.is_empty() {
        b.push_str("<h3>Warnings about the run</h3><ul class=\"warn\">");
        for w in run.warnings.iter().take(MAX_RUN_WARNINGS) {
            let _ = write!(b, "<li>{}</li>", escape(w));
        }
        b.push_str("</ul>\n");
        if run.warnings.len() > MAX_RUN_WARNINGS {
            let _ = writeln!(
                b,
                "<p class=\"note\">The first {MAX_RUN_WARNINGS} of {} warnings; manifest.json has them all.</p>",
                run.warnings.len()
            );
        }
    }
}

/// Run warnings listed on the first view before the list is cut.
pub const MAX_RUN_WARNINGS: usize = 50;

fn attention_section(
    b: &mut String,
    run: &ForecastRun,
    stems: &[String],
    attention: &[AttentionList],
) {
    b.push_str("<h2 id=\"attention\">Needs attention first</h2>\n");
    let total: usize = attention.iter().map(|l| l.items.len()).sum();
    if total == 0 {
        b.push_str("<p class=\"note\">No product has warnings, weak data or a backtest bias beyond ±20%.</p>\n");
        return;
    }
    b.push_str("<div class=\"attention\">");
    for l in attention.iter().filter(|l| !l.items.is_empty()) {
        let _ = write!(
            b,
            "<div class=\"list\"><h3>{} <span class=\"pill care\">{}</span></h3><p class=\"note\">{}</p><ol>",
            escape(l.title),
            l.items.len(),
            escape(l.why)
        );
        for (i, note) in l.items.iter().take(ATTENTION_SHOWN) {
            let p = &run.products[*i];
            let _ = write!(
                b,
                "<li><a href=\"#{}\">{}</a> <span class=\"note\">{}</span></li>",
                anchor(&stems[*i]),
                escape(&p.product),
                escape(note)
            );
        }
        b.push_str("</ol>");
        if l.items.len() > ATTENTION_SHOWN {
            let _ = write!(
                b,
                "<p class=\"note\">The first {ATTENTION_SHOWN} of {}; tick \"needs attention only\" in the product index for all.</p>",
                l.items.len()
            );
        }
        b.push_str("</div>");
    }
    b.push_str("</div>\n");
}

fn index_section(b: &mut String, run: &ForecastRun) {
    b.push_str("<h2 id=\"products\">Products</h2>\n");
    b.push_str("<form id=\"index-form\" class=\"find\" role=\"search\" hidden><label>Find a product <input id=\"find\" type=\"search\" autocomplete=\"off\" placeholder=\"name or part of it\"></label> <label>Data quality <select id=\"verdict\"><option value=\"\">any</option><option value=\"fit\">fit</option><option value=\"care\">fit with care</option><option value=\"bad\">not fit</option><option value=\"none\">no profile</option></select></label> <label><input id=\"attention-only\" type=\"checkbox\"> needs attention only</label></form>\n");
    let _ = writeln!(
        b,
        "<p class=\"note\" id=\"index-count\">{} products.</p>",
        run.products.len()
    );
    b.push_str("<noscript><p class=\"note\">The product index and each product's detail are drawn by this page's own script, which is turned off. Every figure is also in selection.csv, forecast.csv and scores.csv in this folder.</p></noscript>\n");
    b.push_str("<p class=\"note\">Click a product to open its chart, scores, data quality and adjustments; click a column heading to sort. MAPE and bias are the chosen model's backtest scores (bias &gt; 0: over-forecast). AMC: average monthly consumption, in each product's unit (as configured; base units when none is).");
    if run.products.iter().any(|p| !p.adjusted.is_empty()) {
        b.push_str(" Totals and AMC are of the statistical forecast; the adjusted total (known changes applied, as the supply plan and the cross-check use it) is given for the products a change touched.");
    }
    b.push_str("</p>\n");
    let mut columns = vec![
        ("product", Kind::Text),
        ("data quality", Kind::Text),
        ("chosen model", Kind::Text),
        ("MAPE", Kind::Num),
        ("bias", Kind::Num),
        ("next 12 months total", Kind::Num),
        ("AMC last 12", Kind::Num),
        ("AMC next 12", Kind::Num),
    ];
    // With known changes, the adjusted total beside the statistical one
    // (the script fills the column when the body says so).
    let changed = run.products.iter().any(|p| !p.adjusted.is_empty());
    if changed {
        columns[5].0 = "next 12 months total, statistical";
        columns.insert(
            6,
            (
                "next 12 months total, adjusted for known changes",
                Kind::Num,
            ),
        );
    }
    let t = Table::new(&columns, false);
    let body = if changed {
        "<tbody id=\"index-body\" data-adjusted=\"yes\">"
    } else {
        "<tbody id=\"index-body\">"
    };
    b.push_str(&t.html().replace("<tbody>", body));
    b.push_str("<p><button id=\"index-more\" type=\"button\" hidden>Show more</button></p>\n");
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
                "{} = {} used as reported + {} corrected by cleaning + {} rejected",
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
            "by {}: each product keeps the default ({}; SBA for intermittent demand, scored by RMSSE) unless another model's score is more than {} lower and it is better at 10 of 12 backtest origins. Default for this run: {}",
            fs(&["select", "score"]).to_uppercase(),
            if json_str(m, &["default_model", "default"]) == crate::default_rule::BEST_MEAN {
                "the mean of the product's five best models by backtest"
            } else if json_str(m, &["default_model", "default"]) == crate::weights::WEIGHTED_MEAN {
                "the run's weighted mean, with weights learned across its products' backtests"
            } else {
                "the fixed combination of ets-auto, arima-auto and theta"
            },
            fs(&["select", "tie_margin"])
                .parse::<f64>()
                .map(|v| format!("{}%", v * 100.0))
                .unwrap_or_else(|_| fs(&["select", "tie_margin"])),
            match json_str(m, &["default_model", "reason"]) {
                r if r.is_empty() => "not recorded (a forecast folder written before the choice was made per run)".to_string(),
                r => r,
            }
        )),
    ));
    facts.push((
        "Ranges",
        escape(
            &format!("80% and 95%, calibrated on the backtest errors: each product's factor is the mean of its own and the one pooled over the run's products of its demand class, at most ×{} the model's own range (more is warned as a likely break in the history); the 95% range is never narrower than the model's own (selection.csv, column ranges)", crate::calibrate::MAX_FACTOR),
        ),
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
    let config = json_str(m, &["config_file"]);
    if !config.is_empty() {
        facts.push(("Configuration file", escape(&config)));
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
        .filter(|(k, v)| {
            // Empty per-product settings are no setting at all.
            !(k.as_str() == "stockout_days_by_product"
                && v.as_object().is_some_and(|o| o.is_empty()))
        })
        .map(|(k, v)| match v {
            // Set per product in the configuration file: no option sets it.
            serde_json::Value::Object(o) if k == "stockout_days_by_product" => format!(
                "max_stockout_days of [products] in the configuration file: {}",
                o.iter()
                    .map(|(p, d)| format!("{p} {d}"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            serde_json::Value::Bool(true) => format!("--{}", k.replace('_', "-")),
            serde_json::Value::Bool(false) => format!("no --{}", k.replace('_', "-")),
            v => format!("--{} {v}", k.replace('_', "-")),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}
