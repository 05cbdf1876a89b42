//! The adjusted forecast beside the statistical one: extra columns of
//! `forecast.csv`, extra rows of `forecast_wide.csv`, and the trace files
//! `changes_applied.csv` and `changes_summary.csv`.
//!
//! `forecast.csv` and `forecast_wide.csv` are written first as without
//! changes; [`add_adjusted`] then reads them back and rewrites them with the
//! adjusted figures, so whatever columns they have are kept as they are.

use std::collections::HashMap;
use std::path::Path;

use super::{csv_text, csv_text_read, fmt_num, write_atomic};
use crate::calendar::YearMonth;
use crate::changes::{AdjustedProduct, Applied};
use crate::error::{Error, Result};

/// Columns added to `forecast.csv` (and row labels added to
/// `forecast_wide.csv`) when a changes file was applied.
pub const ADJUSTED_COLUMNS: [&str; 5] = [
    "adjusted",
    "adjusted_lower_80",
    "adjusted_upper_80",
    "adjusted_lower_95",
    "adjusted_upper_95",
];

/// The `model` written for a product without history.
pub const NEW_PRODUCT_MODEL: &str = "none (new product)";

/// The trace files written when a changes file was applied.
pub const CHANGES_FILES: [&str; 2] = ["changes_applied.csv", "changes_summary.csv"];

/// Whether the run whose `manifest.json` is `manifest` applied a changes
/// file (its `changes_file` names one). The report and the workbook read
/// [`CHANGES_FILES`] only then: files of an earlier run into the same
/// folder describe another forecast.
pub fn manifest_has_changes(manifest: &serde_json::Value) -> bool {
    manifest
        .get("changes_file")
        .and_then(|v| v.as_str())
        .is_some_and(|f| !f.is_empty())
}

/// [`manifest_has_changes`] of the `manifest.json` in `dir`; false when
/// it cannot be read.
pub fn changes_recorded(dir: &Path) -> bool {
    std::fs::read(dir.join("manifest.json"))
        .ok()
        .and_then(|b| serde_json::from_slice::<serde_json::Value>(&b).ok())
        .is_some_and(|m| manifest_has_changes(&m))
}

fn io_err(e: csv::Error) -> std::io::Error {
    std::io::Error::other(e)
}

fn read_back(path: &Path) -> Result<(Vec<String>, Vec<Vec<String>>)> {
    let mut r = csv::ReaderBuilder::new()
        .flexible(true)
        .from_path(path)
        .map_err(|e| Error::Output {
            path: path.to_path_buf(),
            message: format!("cannot read back: {e}"),
        })?;
    let header: Vec<String> = r
        .headers()
        .map_err(|e| Error::Output {
            path: path.to_path_buf(),
            message: format!("cannot read back: {e}"),
        })?
        .iter()
        .map(str::to_string)
        .collect();
    let mut rows = Vec::new();
    for rec in r.records() {
        let rec = rec.map_err(|e| Error::Output {
            path: path.to_path_buf(),
            message: format!("cannot read back: {e}"),
        })?;
        rows.push(rec.iter().map(str::to_string).collect());
    }
    Ok((header, rows))
}

fn five(b: &crate::changes::Bands, k: usize) -> [f64; 5] {
    [
        b.point[k],
        b.lower80[k],
        b.upper80[k],
        b.lower95[k],
        b.upper95[k],
    ]
}

/// Rewrites `forecast.csv` and `forecast_wide.csv` in `dir` with the
/// adjusted forecast beside the statistical one (new products get rows
/// with a statistical forecast of zero), and writes `changes_applied.csv`
/// and `changes_summary.csv`.
pub fn add_adjusted(dir: &Path, applied: &Applied) -> Result<()> {
    let by: HashMap<&str, &AdjustedProduct> = applied
        .products
        .iter()
        .map(|p| (p.product.as_str(), p))
        .collect();
    // forecast.csv: five columns more.
    let path = dir.join("forecast.csv");
    let (header, rows) = read_back(&path)?;
    let col = |n: &str| header.iter().position(|h| h == n);
    let (Some(pc), Some(mc)) = (col("product"), col("month")) else {
        return Err(Error::Output {
            path,
            message: "no product or month column to add the adjusted forecast to".into(),
        });
    };
    let width = header.len();
    // With pack sizes, the adjusted forecast in packs too (adjusted ÷ pack
    // size, not rounded, as `packs` is the statistical forecast's).
    let size_col = col("pack_size");
    let packs_of = |row: &[String], adjusted: Option<f64>| -> String {
        let size = size_col
            .and_then(|i| row.get(i))
            .and_then(|t| t.parse::<f64>().ok())
            .filter(|s| *s > 0.0);
        size.zip(adjusted)
            .map(|(s, a)| fmt_num(a / s))
            .unwrap_or_default()
    };
    write_atomic(&path, |w| {
        let mut c = csv::Writer::from_writer(w);
        let mut h = header.clone();
        h.extend(ADJUSTED_COLUMNS.iter().map(|s| s.to_string()));
        if size_col.is_some() {
            h.push("adjusted_packs".to_string());
        }
        c.write_record(&h).map_err(io_err)?;
        for row in &rows {
            let product = csv_text_read(row.get(pc).map(String::as_str).unwrap_or(""));
            let month = row.get(mc).and_then(|m| YearMonth::parse(m).ok());
            let vals = by.get(product).zip(month).and_then(|(p, m)| {
                let k = p.adjusted.start.months_until(m);
                (k >= 0 && (k as usize) < p.adjusted.point.len())
                    .then(|| five(&p.adjusted, k as usize))
            });
            let mut out = row.clone();
            out.resize(width, String::new());
            match vals {
                Some(v) => out.extend(v.iter().map(|x| fmt_num(*x))),
                None => out.extend(std::iter::repeat(String::new()).take(5)),
            }
            if size_col.is_some() {
                out.push(packs_of(row, vals.map(|v| v[0])));
            }
            c.write_record(&out).map_err(io_err)?;
        }
        for p in applied.products.iter().filter(|p| p.new_product) {
            for k in 0..p.adjusted.point.len() {
                let mut out = vec![String::new(); width];
                out[pc] = csv_text(&p.product).into_owned();
                out[mc] = p.adjusted.start.plus(k as i64).to_string();
                for (name, v) in [
                    ("model", NEW_PRODUCT_MODEL.to_string()),
                    ("forecast", "0".into()),
                    ("lower_80", "0".into()),
                    ("upper_80", "0".into()),
                    ("lower_95", "0".into()),
                    ("upper_95", "0".into()),
                ] {
                    if let Some(i) = col(name) {
                        out[i] = v;
                    }
                }
                out.extend(five(&p.adjusted, k).iter().map(|x| fmt_num(*x)));
                if size_col.is_some() {
                    // A new product has no pack size in forecast.csv's rows
                    // (no configuration row names it): left empty.
                    out.push(String::new());
                }
                c.write_record(&out).map_err(io_err)?;
            }
        }
        c.flush()
    })?;

    // forecast_wide.csv: five rows more per product, after its own.
    let path = dir.join("forecast_wide.csv");
    let (header, rows) = read_back(&path)?;
    let months: Vec<Option<YearMonth>> = header
        .iter()
        .map(|h| YearMonth::parse(h).ok().filter(|_| h.len() == 7))
        .collect();
    let wide_rows = |p: &AdjustedProduct, model: &str, adjusted: bool| -> Vec<Vec<String>> {
        let b = if adjusted {
            &p.adjusted
        } else {
            &p.statistical
        };
        let labels = if adjusted {
            ADJUSTED_COLUMNS
        } else {
            ["forecast", "lower_80", "upper_80", "lower_95", "upper_95"]
        };
        (0..5)
            .map(|j| {
                let mut rec = vec![
                    csv_text(&p.product).into_owned(),
                    model.to_string(),
                    labels[j].to_string(),
                ];
                rec.extend(months.iter().skip(3).map(|m| {
                    m.and_then(|m| {
                        let k = b.start.months_until(m);
                        (k >= 0 && (k as usize) < b.point.len())
                            .then(|| fmt_num(five(b, k as usize)[j]))
                    })
                    .unwrap_or_default()
                }));
                rec
            })
            .collect()
    };
    write_atomic(&path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record(&header).map_err(io_err)?;
        for (i, row) in rows.iter().enumerate() {
            c.write_record(row).map_err(io_err)?;
            let name = csv_text_read(row.first().map(String::as_str).unwrap_or(""));
            let next = rows
                .get(i + 1)
                .map(|r| csv_text_read(r.first().map(String::as_str).unwrap_or("")));
            if next != Some(name) {
                if let Some(p) = by.get(name) {
                    let model = row.get(1).cloned().unwrap_or_default();
                    for r in wide_rows(p, &model, true) {
                        c.write_record(&r).map_err(io_err)?;
                    }
                }
            }
        }
        for p in applied.products.iter().filter(|p| p.new_product) {
            for r in wide_rows(p, NEW_PRODUCT_MODEL, false)
                .into_iter()
                .chain(wide_rows(p, NEW_PRODUCT_MODEL, true))
            {
                c.write_record(&r).map_err(io_err)?;
            }
        }
        c.flush()
    })?;

    // changes_applied.csv: every month each row changed.
    write_atomic(&dir.join("changes_applied.csv"), |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record([
            "product",
            "month",
            "change_row",
            "kind",
            "statistical",
            "before_change",
            "after_change",
            "adjusted",
            "clipped_at_zero",
            "note",
        ])
        .map_err(io_err)?;
        for t in &applied.trace {
            let adjusted = by.get(t.product.as_str()).and_then(|p| {
                let k = p.adjusted.start.months_until(t.month);
                p.adjusted.point.get(usize::try_from(k).ok()?).copied()
            });
            c.write_record([
                &*csv_text(&t.product),
                &t.month.to_string(),
                &t.row.to_string(),
                t.kind.name(),
                &fmt_num(t.statistical),
                &fmt_num(t.before),
                &fmt_num(t.after),
                &adjusted.map(fmt_num).unwrap_or_default(),
                if t.clipped { "yes" } else { "no" },
                &*csv_text(&t.note),
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })?;

    // changes_summary.csv: each row's effect on each product's totals.
    write_atomic(&dir.join("changes_summary.csv"), |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record([
            "change_row",
            "kind",
            "product",
            "first_month",
            "last_month",
            "change_months_1_12",
            "change_months_1_24",
            "statistical_months_1_12",
            "adjusted_months_1_12",
            "statistical_months_1_24",
            "adjusted_months_1_24",
            "new_product",
            "note",
        ])
        .map_err(io_err)?;
        for e in &applied.effects {
            let p = by.get(e.product.as_str());
            let tot = |adj: bool, n: usize| {
                p.map(|p| {
                    let b = if adj { &p.adjusted } else { &p.statistical };
                    fmt_num(b.total(0, n))
                })
                .unwrap_or_default()
            };
            c.write_record([
                e.row.to_string(),
                e.kind.name().to_string(),
                csv_text(&e.product).into_owned(),
                e.first.to_string(),
                e.last.map(|m| m.to_string()).unwrap_or_default(),
                fmt_num(e.delta_12),
                fmt_num(e.delta_24),
                tot(false, 12),
                tot(true, 12),
                tot(false, 24),
                tot(true, 24),
                if p.is_some_and(|p| p.new_product) {
                    "yes"
                } else {
                    "no"
                }
                .to_string(),
                csv_text(&e.note).into_owned(),
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })
}
