//! The cross-check section of `report.html`, built from `crosscheck.csv`
//! (and `crosscheck.json` for the settings) when `provisio crosscheck` has
//! written them into the forecast directory; its charts go to
//! `charts/crosscheck-<product>.png` and `.svg`.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::html::{escape, Cell, Kind, Table};
use crate::chart::{self, CrossCheckChart, EstimateBar};
use crate::crosscheck::{AnnualConsumption, ForecastUsed};
use crate::error::{Error, Result};

/// One row of `crosscheck.csv` as read back.
#[derive(Debug, Clone, PartialEq)]
pub struct CrossCheckRow {
    /// Product.
    pub product: String,
    /// Method name.
    pub method: String,
    /// First month of the period.
    pub period_start: String,
    /// Last month of the period.
    pub period_end: String,
    /// Annual quantity.
    pub quantity: Option<f64>,
    /// Consumption forecast total and its ranges (narrow, wide).
    pub consumption: Option<AnnualConsumption>,
    /// Ratio to consumption.
    pub ratio: Option<f64>,
    /// Flag name.
    pub flag: String,
    /// Plain-words explanation.
    pub explanation: String,
    /// How the quantity was computed.
    pub basis: String,
    /// The forecast compared with (`None` in a file written before the
    /// column was added).
    pub forecast_used: Option<ForecastUsed>,
}

/// Reads `crosscheck.csv` of `dir`; `None` when there is none.
pub fn read_crosscheck(dir: &Path) -> Result<Option<Vec<CrossCheckRow>>> {
    let path = dir.join("crosscheck.csv");
    if !path.exists() {
        return Ok(None);
    }
    let file = path.display().to_string();
    let bad = |line: u64, column: Option<&str>, message: String| Error::Input {
        file: file.clone(),
        line,
        column: column.map(str::to_string),
        message,
    };
    let mut reader = csv::Reader::from_path(&path)
        .map_err(|e| bad(0, None, format!("cannot read this CSV file: {e}")))?;
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| bad(1, None, format!("cannot read the header: {e}")))?
        .iter()
        .map(str::to_string)
        .collect();
    let col = |name: &str| {
        header.iter().position(|h| h == name).ok_or_else(|| {
            bad(
                1,
                Some(name),
                "missing column; rewrite it with `provisio crosscheck`".into(),
            )
        })
    };
    let mut idx = BTreeMap::new();
    for name in crate::output::CROSSCHECK_COLUMNS {
        if name != "forecast_used" {
            idx.insert(name, col(name)?);
        }
    }
    let used_col = header.iter().position(|h| h == "forecast_used");
    let mut rows = Vec::new();
    for rec in reader.records() {
        let rec = rec.map_err(|e| {
            bad(
                e.position().map(|p| p.line()).unwrap_or(0),
                None,
                format!("cannot read this CSV row: {e}"),
            )
        })?;
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        let text = |n: &str| rec.get(idx[n]).unwrap_or("").to_string();
        let num = |n: &str| -> Result<Option<f64>> {
            let v = rec.get(idx[n]).unwrap_or("").trim();
            if v.is_empty() {
                return Ok(None);
            }
            v.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .map(Some)
                .ok_or_else(|| bad(line, Some(n), format!("'{v}' is not a number")))
        };
        let consumption = match (
            num("consumption_forecast")?,
            num("consumption_low80_independent")?,
            num("consumption_high80_independent")?,
            num("consumption_low80_sum_of_bounds")?,
            num("consumption_high80_sum_of_bounds")?,
        ) {
            (Some(total), Some(a), Some(b), Some(c), Some(d)) => Some(AnnualConsumption {
                total,
                narrow: (a, b),
                wide: (c, d),
            }),
            _ => None,
        };
        rows.push(CrossCheckRow {
            product: crate::output::csv_text_read(&text("product")).to_string(),
            method: text("method"),
            period_start: text("period_start"),
            period_end: text("period_end"),
            quantity: num("quantity")?,
            consumption,
            ratio: num("ratio_to_consumption")?,
            flag: text("flag"),
            explanation: text("explanation"),
            basis: text("basis"),
            forecast_used: used_col
                .and_then(|c| rec.get(c))
                .and_then(ForecastUsed::parse),
        });
    }
    Ok(Some(rows))
}

/// `crosscheck.json` of `dir`, when readable.
fn settings(dir: &Path) -> Option<serde_json::Value> {
    std::fs::read_to_string(dir.join("crosscheck.json"))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
}

/// Whether `forecast.csv` is still the one the cross-check was made from.
fn stale(dir: &Path, settings: Option<&serde_json::Value>) -> bool {
    let recorded = settings
        .and_then(|v| v.get("forecast_sha256"))
        .and_then(|x| x.as_str());
    match (recorded, std::fs::read(dir.join("forecast.csv"))) {
        (Some(r), Ok(bytes)) => crate::output::sha256_hex(&bytes) != r,
        _ => false,
    }
}

/// Rows grouped by product, in file order.
fn by_product(rows: &[CrossCheckRow]) -> Vec<(&str, Vec<&CrossCheckRow>)> {
    let mut out: Vec<(&str, Vec<&CrossCheckRow>)> = Vec::new();
    for r in rows {
        match out.last_mut() {
            Some((p, v)) if *p == r.product => v.push(r),
            _ => out.push((r.product.as_str(), vec![r])),
        }
    }
    out
}

/// The forecast the cross-check of `dir` compared with: as
/// `crosscheck.csv` records it, else as `crosscheck.json` does; `None` for
/// files written before either recorded it.
fn forecast_used(rows: &[CrossCheckRow], json: Option<&serde_json::Value>) -> Option<ForecastUsed> {
    rows.iter().find_map(|r| r.forecast_used).or_else(|| {
        json.and_then(|v| v.get("forecast_used"))
            .and_then(|x| x.as_str())
            .and_then(ForecastUsed::parse)
    })
}

/// The chart data of one product's rows.
pub fn chart_of(
    product: &str,
    rows: &[&CrossCheckRow],
    threshold: f64,
    units: Option<&str>,
) -> CrossCheckChart {
    let consumption = rows
        .iter()
        .find(|r| r.method == "consumption")
        .and_then(|r| r.consumption);
    let period = rows
        .first()
        .map(|r| format!("{} to {}", r.period_start, r.period_end))
        .unwrap_or_default();
    let used = rows.iter().find_map(|r| r.forecast_used);
    let band = match used {
        Some(ForecastUsed::Adjusted) => "adjusted forecast",
        _ => "consumption",
    };
    CrossCheckChart {
        title: product.to_string(),
        subtitle: format!(
            "Annual quantity {period} by each method; bars beyond the shaded band ({band} ±{}%) are flagged.",
            (threshold * 100.0).round()
        ),
        consumption,
        forecast_used: used,
        estimates: rows
            .iter()
            .filter(|r| r.method != "consumption")
            .map(|r| EstimateBar {
                label: r.method.clone(),
                quantity: r.quantity,
                ratio: r.ratio,
                flag: r.flag.clone(),
            })
            .collect(),
        threshold,
        units: units.map(str::to_string),
    }
}

/// Draws the cross-check charts into `dir/charts` and returns the report
/// section and the chart files; `None` when `dir` has no `crosscheck.csv`.
pub fn write_section(dir: &Path) -> Result<Option<(String, Vec<PathBuf>)>> {
    let Some(rows) = read_crosscheck(dir)? else {
        return Ok(None);
    };
    let json = settings(dir);
    let t = json
        .as_ref()
        .and_then(|v| v.get("threshold").and_then(|x| x.as_f64()))
        .unwrap_or(crate::crosscheck::DEFAULT_THRESHOLD);
    let charts_dir = dir.join("charts");
    std::fs::create_dir_all(&charts_dir).map_err(|source| Error::Io {
        path: charts_dir.clone(),
        action: "cannot create the charts directory",
        source,
    })?;
    let groups = by_product(&rows);
    let names: Vec<&str> = groups.iter().map(|g| g.0).collect();
    let stems = chart::file_stems(&names);
    let mut files = Vec::new();
    let mut b = String::new();
    let period = rows
        .first()
        .map(|r| format!("{} to {}", r.period_start, r.period_end))
        .unwrap_or_default();
    let pct = (t * 100.0).round();
    let used = forecast_used(&rows, json.as_ref());
    let (which, column) = match used {
        Some(ForecastUsed::Adjusted) => (
            "<p>The forecast compared here is <strong>the adjusted forecast</strong>: the statistical forecast with the known changes applied (section Known changes ahead). Its 12-month totals differ from the statistical totals in the product index, and are the adjusted totals shown beside them.</p>\n",
            "adjusted forecast (known changes)",
        ),
        Some(ForecastUsed::Statistical) => (
            "<p>The forecast compared here is <strong>the statistical forecast</strong>: the run applied no known changes.</p>\n",
            "statistical forecast",
        ),
        None => ("", "consumption forecast"),
    };
    let _ = writeln!(
        b,
        "<p>Each product's consumption forecast for the 12 months {} is compared with what services data and population data imply for the same months. An estimate more than ±{pct}% from the consumption forecast is flagged with the likely reasons. Population-based figures usually give an upper bound. The 80% range of a 12-month total is not in the forecast files, which keep monthly ranges only: it lies between the narrow range (months' errors independent) and the sum of the monthly 80% bounds (months moving together), and both are shown. The inputs and every number used are in <span class=\"mono\">crosscheck.csv</span> and <span class=\"mono\">crosscheck.json</span>.</p>",
        escape(&period)
    );
    b.push_str(which);
    let mut table = Table::new(
        &[
            ("product", Kind::Text),
            ("method", Kind::Text),
            ("12-month quantity", Kind::Num),
            (column, Kind::Num),
            ("ratio", Kind::Num),
            ("flag", Kind::Text),
            ("what it may mean", Kind::Text),
        ],
        true,
    );
    for r in rows.iter().filter(|r| r.method != "consumption") {
        let pill = match r.flag.as_str() {
            "agrees" => "fit",
            "above" | "below" => "care",
            _ => "none",
        };
        table.row(
            None,
            vec![
                Cell::text(&r.product),
                Cell::text(&r.method),
                Cell::num(r.quantity, chart::fmt_quantity),
                Cell::num(r.consumption.map(|c| c.total), chart::fmt_quantity),
                Cell::num(r.ratio, crate::crosscheck::fmt_ratio),
                Cell::html(
                    format!("<span class=\"pill {pill}\">{}</span>", escape(&r.flag)),
                    &r.flag,
                ),
                Cell::text(if r.explanation.is_empty() {
                    &r.basis
                } else {
                    &r.explanation
                }),
            ],
        );
    }
    if stale(dir, json.as_ref()) {
        b.push_str("<ul class=\"warn\"><li>forecast.csv has changed since this cross-check was made (its SHA-256 differs from the one in crosscheck.json): the figures below compare with an earlier forecast; run <code>provisio crosscheck</code> again.</li></ul>\n");
    }
    b.push_str(&table.html());
    let units = super::read_units(dir)?;
    for ((product, rs), stem) in groups.iter().zip(&stems) {
        let c = chart_of(product, rs, t, units.get(*product).map(String::as_str));
        let svg = chart::crosscheck_svg(&c)?;
        let name = format!("crosscheck-{stem}");
        let svg_path = charts_dir.join(format!("{name}.svg"));
        crate::output::write_atomic(&svg_path, |w| w.write_all(svg.as_bytes()))?;
        let png_path = charts_dir.join(format!("{name}.png"));
        chart::crosscheck_png(&png_path, &c)?;
        files.push(png_path);
        files.push(svg_path);
        let _ = writeln!(
            b,
            "<h3>{}</h3><figure class=\"chart\" role=\"img\" aria-label=\"Cross-check of {}\">{svg}<figcaption>Files: <a href=\"charts/{name}.png\">PNG</a>, <a href=\"charts/{name}.svg\">SVG</a>.</figcaption></figure>\n<ul>",
            escape(product),
            escape(product)
        );
        for r in rs {
            let _ = write!(
                b,
                "<li><strong>{}</strong>: {}</li>",
                escape(&r.method),
                escape(&r.basis)
            );
        }
        b.push_str("</ul>\n");
    }
    Ok(Some((b, files)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calendar::YearMonth;
    use crate::crosscheck::{build, population::PopulationRow, ForecastMonth, Method};

    #[test]
    fn crosscheck_csv_reads_back_as_written() {
        let start = YearMonth::new(2027, 1).unwrap();
        let mut fc = std::collections::BTreeMap::new();
        fc.insert(
            "<b>A</b>, 10 mg".to_string(),
            (0..12)
                .map(|i| ForecastMonth {
                    month: start.plus(i),
                    point: 100.0 + i as f64,
                    lower80: 80.0,
                    upper80: 130.0,
                })
                .collect::<Vec<_>>(),
        );
        let row = PopulationRow {
            line: 2,
            product: "<b>A</b>, 10 mg".into(),
            group: "adults".into(),
            method: Method::Morbidity,
            population: 10_000.0,
            group_share: 1.0,
            rate: 0.2,
            care_seeking: 0.5,
            treated: 1.0,
            quantity_per_course: 3.0,
            method_share: 0.0,
            public_share: 1.0,
            units_per_user_year: 0.0,
            units_basis: String::new(),
            loss_allowance: 0.0,
        };
        let cc = build(&fc, Default::default(), start, &[], &[row], 0.25);
        let dir = tempfile::tempdir().unwrap();
        crate::output::write_crosscheck(&dir.path().join("crosscheck.csv"), &cc).unwrap();
        let back = read_crosscheck(dir.path()).unwrap().unwrap();
        assert_eq!(back.len(), 2);
        let want = cc.rows[0].consumption.unwrap();
        let got = back[0].consumption.unwrap();
        assert!((got.total - want.total).abs() < 1e-3);
        assert!((got.narrow.0 - want.narrow.0).abs() < 1e-3);
        assert!((got.wide.1 - want.wide.1).abs() < 1e-3);
        // 10,000 × 0.2 × 0.5 × 3 = 3,000 against 1,266: above.
        assert_eq!(back[1].quantity, Some(3000.0));
        assert_eq!(back[1].flag, "above");
        assert_eq!(back[1].product, "<b>A</b>, 10 mg");
        let (html, files) = write_section(dir.path()).unwrap().unwrap();
        assert_eq!(files.len(), 2);
        assert!(html.contains("&lt;b&gt;A&lt;/b&gt;, 10 mg"));
        assert!(!html.contains("<b>A</b>"));
        assert!(write_section(&dir.path().join("none")).unwrap().is_none());
    }
}
