//! The CSV and JSON tables written by `inspect` and `clean`.

use std::path::Path;

use super::{csv_text, fmt_num, fmt_opt, write_atomic};
use crate::clean::{Adjustment, CleanSeries, CleanSettings, RowAccount};
use crate::data::{Dataset, RejectedRow, SheetInfo};
use crate::error::Result;
use crate::quality::QualityProfile;

fn csv_writer(w: &mut dyn std::io::Write) -> csv::Writer<&mut dyn std::io::Write> {
    csv::WriterBuilder::new().from_writer(w)
}

fn io_err(e: csv::Error) -> std::io::Error {
    std::io::Error::other(e)
}

/// `cleaned.csv`: product, month, reported, cleaned, status, imputed share, outlier.
pub fn write_cleaned(path: &Path, series: &[CleanSeries]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv_writer(w);
        c.write_record([
            "product",
            "month",
            "reported",
            "cleaned",
            "status",
            "imputed_share",
            "outlier",
        ])
        .map_err(io_err)?;
        for s in series {
            for t in 0..s.len() {
                c.write_record([
                    &*csv_text(&s.product),
                    &s.month(t).to_string(),
                    &fmt_opt(s.reported[t]),
                    &fmt_num(s.values[t]),
                    s.status[t].name(),
                    &fmt_num(s.imputed_share[t]),
                    if s.outlier[t] { "yes" } else { "" },
                ])
                .map_err(io_err)?;
            }
        }
        c.flush()
    })
}

/// `adjustments.csv`: the adjustment log.
pub fn write_adjustments<'a>(
    path: &Path,
    log: impl IntoIterator<Item = &'a Adjustment>,
) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv_writer(w);
        c.write_record([
            "product", "site", "month", "line", "before", "after", "rule", "reason",
        ])
        .map_err(io_err)?;
        // The reason is formatted here, into one reused buffer.
        let mut reason = String::new();
        for a in log {
            reason.clear();
            a.write_reason(&mut reason);
            c.write_record([
                &*csv_text(&a.product),
                &csv_text(a.site.as_deref().unwrap_or("")),
                &a.month.to_string(),
                &a.line.map(|l| l.to_string()).unwrap_or_default(),
                &fmt_opt(a.before),
                &fmt_opt(a.after),
                a.rule().name(),
                reason.as_str(),
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })
}

/// `rejected.csv`: rows not used, with the reason and the row as read.
pub fn write_rejected(path: &Path, source: &str, rejected: &[RejectedRow]) -> Result<()> {
    write_rejected_rows(path, source, None, rejected, &|_| None)
}

/// `rejected.csv` of a dataset: for a workbook, `line` is the sheet row,
/// and the `sheet` and `cell` (`C14`) columns say where the value is.
pub fn write_rejected_of(path: &Path, ds: &Dataset) -> Result<()> {
    write_rejected_rows(
        path,
        &ds.source,
        ds.layout.sheet.as_ref(),
        &ds.rejected,
        &|r| ds.cell_of(r),
    )
}

fn write_rejected_rows(
    path: &Path,
    source: &str,
    sheet: Option<&SheetInfo>,
    rejected: &[RejectedRow],
    cell_of: &dyn Fn(&RejectedRow) -> Option<String>,
) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv_writer(w);
        c.write_record([
            "file", "line", "column", "value", "reason", "row", "sheet", "cell",
        ])
        .map_err(io_err)?;
        for r in rejected {
            let cell = cell_of(r).unwrap_or_default();
            c.write_record([
                &*csv_text(source),
                &r.line.to_string(),
                r.column.as_deref().unwrap_or(""),
                &csv_text(&r.value),
                r.reason.as_str(),
                &csv_text(&r.raw),
                sheet.map(|s| s.name.as_str()).unwrap_or(""),
                &cell,
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })
}

fn pct(v: Option<f64>) -> String {
    v.map(|x| format!("{:.1}", x * 100.0)).unwrap_or_default()
}

/// One product's quality profile as JSON, under `quality.csv`'s column
/// names and in its units (percentages 0–100; `outlier_months` and
/// `reasons` as lists), plus `months_affected` and `verdict_text` (README,
/// "JSON summary"): a pipeline reading either gets the same fields.
pub fn quality_json(p: &QualityProfile) -> serde_json::Value {
    let pct = |v: Option<f64>| v.map(|x| (x * 1000.0).round() / 10.0);
    serde_json::json!({
        "product": p.product,
        "sites": p.sites,
        "first_month": p.first,
        "last_month": p.last,
        "months": p.months,
        "months_reported": p.months_reported,
        "months_missing": p.months_missing,
        "longest_gap": p.longest_gap,
        "months_with_stockouts": p.months_with_stockouts,
        "months_stocked_out_too_long": p.months_stocked_out_too_long,
        "mean_reporting_rate_pct": pct(p.mean_reporting_rate),
        "min_reporting_rate_pct": pct(p.min_reporting_rate),
        "zero_share_pct": pct(Some(p.zero_share)),
        "outlier_months": p.outliers,
        "months_imputed": p.months_imputed,
        "months_affected": p.months_affected,
        "verdict": p.verdict.name(),
        "reasons": p.reasons,
        "verdict_text": p.verdict_text(),
    })
}

/// `quality.csv`: the data-quality profile per product.
pub fn write_quality(path: &Path, profiles: &[QualityProfile]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv_writer(w);
        c.write_record([
            "product",
            "sites",
            "first_month",
            "last_month",
            "months",
            "months_reported",
            "months_missing",
            "longest_gap",
            "months_with_stockouts",
            "months_stocked_out_too_long",
            "mean_reporting_rate_pct",
            "min_reporting_rate_pct",
            "zero_share_pct",
            "outlier_months",
            "months_imputed",
            "verdict",
            "reasons",
        ])
        .map_err(io_err)?;
        for p in profiles {
            c.write_record([
                &*csv_text(&p.product),
                &p.sites.to_string(),
                p.first.as_str(),
                p.last.as_str(),
                &p.months.to_string(),
                &p.months_reported.to_string(),
                &p.months_missing.to_string(),
                &p.longest_gap.to_string(),
                &p.months_with_stockouts.to_string(),
                &p.months_stocked_out_too_long.to_string(),
                &pct(p.mean_reporting_rate),
                &pct(p.min_reporting_rate),
                &format!("{:.1}", p.zero_share * 100.0),
                &p.outliers.join(" "),
                &p.months_imputed.to_string(),
                p.verdict.name(),
                &p.reasons.join("; "),
            ])
            .map_err(io_err)?;
        }
        c.flush()
    })
}

/// The run manifest of a `clean` run: enough to reproduce it.
#[derive(Debug, Clone, serde::Serialize)]
pub struct CleanManifest {
    /// Tool name and version.
    pub tool: String,
    /// Command run.
    pub command: String,
    /// Input file as given.
    pub input: String,
    /// SHA-256 of the input bytes.
    pub input_sha256: String,
    /// Cleaning settings used.
    pub settings: CleanSettings,
    /// Duplicate handling used.
    pub duplicates: String,
    /// Number format the input was read with.
    pub numbers: String,
    /// Text encoding the input was read with.
    pub encoding: String,
    /// The sheet read, when the input is a workbook.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
    /// The wide layout's record ([`crate::data::WideInfo::manifest`]), when read so.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub wide: Option<serde_json::Value>,
    /// Row accounting.
    pub rows: RowAccount,
    /// Products cleaned.
    pub products: usize,
    /// Products left out (no usable month).
    pub products_unusable: usize,
    /// Adjustment-log entries per rule.
    pub adjustments_by_rule: std::collections::BTreeMap<String, usize>,
    /// Warnings raised.
    pub warnings: Vec<String>,
    /// Run configuration file given with `--config`, if any.
    pub config_file: Option<String>,
    /// SHA-256 of the run configuration file.
    pub config_sha256: Option<String>,
}

/// Writes `manifest.json`.
pub fn write_clean_manifest(path: &Path, manifest: &CleanManifest) -> Result<()> {
    write_atomic(path, |w| {
        serde_json::to_writer_pretty(&mut *w, manifest).map_err(std::io::Error::other)?;
        w.write_all(b"\n")
    })
}
