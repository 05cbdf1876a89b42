//! The report's "Known changes ahead" section, when the forecast run
//! applied a changes file: each change and its effect on the 12- and
//! 24-month totals (from `changes_summary.csv`), a chart of each new
//! product, and the adjusted forecast of every product (from
//! `forecast.csv`) for the product charts.

use std::collections::HashMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::html::{escape, Cell, Kind, Table};
use crate::calendar::YearMonth;
use crate::chart::{self, ProductChart, ProjectedMonth};
use crate::error::{Error, Result};

/// What the report shows of the changes.
#[derive(Debug, Clone, Default)]
pub struct ChangesPart {
    /// Adjusted forecast per product (for the product charts).
    pub adjusted: HashMap<String, Vec<(YearMonth, f64)>>,
    /// The section's HTML.
    pub html: String,
    /// Chart files written.
    pub files: Vec<PathBuf>,
}

fn read(path: &Path) -> Result<Option<Vec<HashMap<String, String>>>> {
    if !path.exists() {
        return Ok(None);
    }
    let err = |line: u64, m: String| Error::Input {
        file: path.display().to_string(),
        line,
        column: None,
        message: m,
    };
    let mut r = csv::Reader::from_path(path).map_err(|e| err(0, format!("cannot read: {e}")))?;
    let h: Vec<String> = r
        .headers()
        .map_err(|e| err(1, format!("cannot read the header: {e}")))?
        .iter()
        .map(str::to_string)
        .collect();
    let mut rows = Vec::new();
    for rec in r.records() {
        let rec = rec.map_err(|e| {
            err(
                e.position().map(|p| p.line()).unwrap_or(0),
                format!("cannot read the row: {e}"),
            )
        })?;
        rows.push(
            h.iter()
                .cloned()
                .zip(rec.iter().map(str::to_string))
                .collect(),
        );
    }
    Ok(Some(rows))
}

fn name(s: Option<&String>) -> String {
    crate::output::csv_text_read(s.map(String::as_str).unwrap_or("")).to_string()
}

fn number(s: Option<&String>) -> Option<f64> {
    s.and_then(|v| v.parse::<f64>().ok())
}

/// Reads the changes of the output folder `dir` and draws what the report
/// shows of them; `None` when the run had no changes file.
/// A `changes_summary.csv` left by an earlier run is not this run's: the
/// section is drawn only when `manifest.json` names a changes file.
pub fn changes_part(dir: &Path, charts_dir: &Path) -> Result<Option<ChangesPart>> {
    let manifest: Option<serde_json::Value> = std::fs::read(dir.join("manifest.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok());
    if !manifest
        .as_ref()
        .is_some_and(crate::output::manifest_has_changes)
    {
        return Ok(None);
    }
    let Some(summary) = read(&dir.join("changes_summary.csv"))? else {
        return Ok(None);
    };
    let Some(forecast) = read(&dir.join("forecast.csv"))? else {
        return Ok(None);
    };
    let mut part = ChangesPart::default();
    let mut statistical: HashMap<String, Vec<ProjectedMonth>> = HashMap::new();
    let mut models: HashMap<String, String> = HashMap::new();
    for r in &forecast {
        let (Some(m), Some(a)) = (
            r.get("month").and_then(|m| YearMonth::parse(m).ok()),
            number(r.get("adjusted")),
        ) else {
            continue;
        };
        let p = name(r.get("product"));
        part.adjusted.entry(p.clone()).or_default().push((m, a));
        let pair = |l: &str, u: &str| number(r.get(l)).zip(number(r.get(u)));
        statistical
            .entry(p.clone())
            .or_default()
            .push(ProjectedMonth {
                month: m,
                point: number(r.get("forecast")).unwrap_or(0.0),
                range80: pair("lower_80", "upper_80"),
                range95: pair("lower_95", "upper_95"),
                bridged: r.get("bridged").is_some_and(|b| b == "yes"),
            });
        models.insert(p, r.get("model").cloned().unwrap_or_default());
    }
    // Only the changed products get the adjusted line.
    let changed: Vec<String> = summary.iter().map(|r| name(r.get("product"))).collect();
    part.adjusted.retain(|p, _| changed.contains(p));
    let field = |k: &str| {
        manifest
            .as_ref()
            .and_then(|m| m.get(k))
            .and_then(|v| v.as_str())
            .unwrap_or("")
            .to_string()
    };
    let b = &mut part.html;
    let _ = writeln!(
        b,
        "<p>The statistical projection was followed by the known changes of <span class=\"mono\">{}</span> (SHA-256 <span class=\"mono\">{}</span>), applied in file order. Both forecasts are kept: <span class=\"mono\">forecast.csv</span> has the statistical forecast (<span class=\"mono\">forecast</span>) and the adjusted one (<span class=\"mono\">adjusted</span>) side by side, and every month a change touched is in <span class=\"mono\">changes_applied.csv</span>. The ranges move with the adjustment: scaled by the same ratio for a multiplicative change (percent change, phase-out, the product a switch moves away from, a target level), shifted by the same quantity for an additive one (quantity per month, the product a switch moves to, a new product's level), never below zero. <code>plan</code> and <code>crosscheck</code> use the adjusted forecast; <code>review</code> later scores both.</p>",
        escape(&field("changes_file")),
        escape(&field("changes_sha256"))
    );
    let mut table = Table::new(
        &[
            ("row", Kind::Num),
            ("kind", Kind::Text),
            ("product", Kind::Text),
            ("first to last month", Kind::Text),
            ("effect, months 1-12", Kind::Num),
            ("effect, months 1-24", Kind::Num),
            ("statistical 1-12", Kind::Num),
            ("adjusted 1-12", Kind::Num),
            ("statistical 1-24", Kind::Num),
            ("adjusted 1-24", Kind::Num),
            ("why, on what authority", Kind::Text),
        ],
        true,
    );
    let signed = |v: f64| {
        let s = chart::fmt_quantity(v.abs());
        if v < 0.0 {
            format!("−{s}")
        } else {
            format!("+{s}")
        }
    };
    let mut new_products: Vec<String> = Vec::new();
    for r in &summary {
        let product = name(r.get("product"));
        if r.get("new_product").map(String::as_str) == Some("yes")
            && !new_products.contains(&product)
        {
            new_products.push(product.clone());
        }
        let first = r.get("first_month").cloned().unwrap_or_default();
        let last = r.get("last_month").cloned().unwrap_or_default();
        let months = if last.is_empty() {
            format!("from {first}")
        } else {
            format!("{first} to {last}")
        };
        let n = |k: &str| number(r.get(k));
        table.row(
            None,
            vec![
                Cell::num(n("change_row"), |v| format!("{v:.0}")),
                Cell::text(r.get("kind").map(String::as_str).unwrap_or("")),
                Cell::text(&product),
                Cell::text(&months),
                Cell::num(n("change_months_1_12"), signed),
                Cell::num(n("change_months_1_24"), signed),
                Cell::num(n("statistical_months_1_12"), chart::fmt_quantity),
                Cell::num(n("adjusted_months_1_12"), chart::fmt_quantity),
                Cell::num(n("statistical_months_1_24"), chart::fmt_quantity),
                Cell::num(n("adjusted_months_1_24"), chart::fmt_quantity),
                Cell::text(&name(r.get("note"))),
            ],
        );
    }
    b.push_str(&table.html());
    b.push_str("<p>In the chart of each product a change touched (under Products, above), the adjusted forecast is the dashed line over the statistical projection and its ranges; the product index and each product's key numbers give its adjusted 12-month totals beside the statistical ones.</p>\n");
    if !new_products.is_empty() {
        std::fs::create_dir_all(charts_dir).map_err(|source| Error::Io {
            path: charts_dir.to_path_buf(),
            action: "cannot create the charts directory",
            source,
        })?;
        let units = super::read_units(dir)?;
        let names: Vec<String> = new_products.iter().map(|p| format!("new {p}")).collect();
        let stems = chart::file_stems(&names.iter().map(String::as_str).collect::<Vec<_>>());
        for (p, stem) in new_products.iter().zip(stems) {
            let c = ProductChart {
                title: p.clone(),
                subtitle: "new product: no history; its forecast comes from the changes file"
                    .into(),
                history_label: "cleaned".into(),
                projection_label: format!(
                    "statistical ({})",
                    models.get(p).map(String::as_str).unwrap_or("")
                ),
                history: Vec::new(),
                projection: statistical.get(p).cloned().unwrap_or_default(),
                backtest: None,
                adjusted: part.adjusted.get(p).cloned().unwrap_or_default(),
                units: units.get(p).cloned(),
            };
            let svg = chart::product_svg(&c)?;
            let path = charts_dir.join(format!("{stem}.svg"));
            crate::output::write_atomic(&path, |w| w.write_all(svg.as_bytes()))?;
            part.files.push(path);
            let _ = writeln!(
                b,
                "<h3>{}</h3>\n<figure class=\"chart\">{svg}</figure>",
                escape(p)
            );
        }
    }
    Ok(Some(part))
}
