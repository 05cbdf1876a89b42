//! Reading a forecast output directory back (the files `forecast` writes),
//! so a report can be rebuilt from the files alone.

use std::collections::{BTreeMap, HashMap};
use std::path::Path;

use crate::calendar::YearMonth;
use crate::chart::{BacktestPanel, BacktestPath, HistoryMonth, ProjectedMonth};
use crate::clean::MonthStatus;
use crate::error::{Error, Result};

/// Backtest scores of one model (columns of `selection.csv` and `scores.csv`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Figures {
    /// MAPE, %.
    pub mape: Option<f64>,
    /// Bias, % (positive = over-forecast).
    pub bias: Option<f64>,
    /// WAPE, %.
    pub wape: Option<f64>,
    /// MASE.
    pub mase: Option<f64>,
    /// RMSE, base units.
    pub rmse: Option<f64>,
    /// RMSSE (scaled; the score for intermittent demand). Outputs written
    /// before the column existed leave it empty.
    pub rmsse: Option<f64>,
    /// Share of actuals inside the 80% range, %.
    pub coverage80: Option<f64>,
    /// Share of actuals inside the 95% range, %.
    pub coverage95: Option<f64>,
}

/// The score columns, as `forecast` names them.
const FIGURE_COLUMNS: [&str; 7] = [
    "mape_pct",
    "bias_pct",
    "wape_pct",
    "mase",
    "rmse",
    "coverage_80_pct",
    "coverage_95_pct",
];

/// What `forecast` chose for one product (a row of `selection.csv`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Selection {
    /// Chosen model.
    pub chosen: String,
    /// Members when the chosen model is the combination.
    pub members: String,
    /// Pinned by the user.
    pub pinned: bool,
    /// The model the backtest picked (differs from `chosen` when pinned).
    pub best: String,
    /// Score used to choose ("MAPE", "WAPE", ...).
    pub selected_by: String,
    /// Backtest scores of the chosen model.
    pub scores: Figures,
    /// Runner-up model.
    pub runner_up: String,
    /// Runner-up's score.
    pub runner_up_score: Option<f64>,
    /// How much worse the runner-up is, %.
    pub margin: Option<f64>,
    /// Whether any backtest origin existed.
    pub backtested: bool,
    /// Average monthly consumption of the last 12 cleaned months.
    pub amc_last_12: Option<f64>,
    /// Average monthly consumption of the next 12 projected months.
    pub amc_next_12: Option<f64>,
    /// Projected total of months 1–12.
    pub total_1_12: Option<f64>,
    /// Projected total of months 13–24.
    pub total_13_24: Option<f64>,
    /// Why this model, in plain words.
    pub reason: String,
}

/// The data-quality profile of one product (a row of `quality.csv`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Quality {
    /// Verdict: "fit", "fit with care" or "not fit".
    pub verdict: String,
    /// Reasons for the verdict, in plain words.
    pub reasons: Vec<String>,
    /// Sites reporting.
    pub sites: String,
    /// Months covered.
    pub months: String,
    /// Months with a report.
    pub months_reported: String,
    /// Months with no report.
    pub months_missing: String,
    /// Months with stockout days.
    pub months_with_stockouts: String,
    /// Months whose stockouts were too long to trust, treated as missing
    /// (empty in folders written before the column existed).
    pub months_stocked_out_too_long: String,
    /// Mean reporting rate, %.
    pub mean_reporting_rate: String,
}

/// One candidate's backtest scores (a row of `scores.csv`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScoreRow {
    /// Model name.
    pub model: String,
    /// "complete", "not applicable" or "incomplete".
    pub status: String,
    /// Forecasts scored.
    pub points: Option<f64>,
    /// The scores.
    pub scores: Figures,
    /// Why not applicable, or what is missing.
    pub note: String,
}

/// One entry of the adjustment log (a row of `adjustments.csv`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AdjustmentRow {
    /// Site, when the data has sites.
    pub site: String,
    /// Month adjusted.
    pub month: String,
    /// Input line, when one row is involved.
    pub line: String,
    /// Value before.
    pub before: Option<f64>,
    /// Value after.
    pub after: Option<f64>,
    /// Rule applied.
    pub rule: String,
    /// Reason with the numbers used.
    pub reason: String,
}

/// Everything the report shows about one product.
#[derive(Debug, Clone, PartialEq)]
pub struct ProductResult {
    /// Product name as in the input.
    pub product: String,
    /// The choice of model and its evidence.
    pub selection: Selection,
    /// Data-quality profile, when `quality.csv` has the product.
    pub quality: Option<Quality>,
    /// Reported and cleaned history.
    pub history: Vec<HistoryMonth>,
    /// The projection with its ranges.
    pub projection: Vec<ProjectedMonth>,
    /// The adjusted forecast (`forecast.csv` column `adjusted`) of a
    /// product a known change touched (`changes_summary.csv`); empty for
    /// every other product.
    pub adjusted: Vec<(YearMonth, f64)>,
    /// The unit the product is counted in (`forecast.csv` column `units`,
    /// from the run configuration); `None` when none is configured.
    pub units: Option<String>,
    /// The chosen model's backtest paths, when backtested.
    pub backtest: Option<BacktestPanel>,
    /// Every candidate's scores.
    pub scores: Vec<ScoreRow>,
    /// The adjustment log entries of this product.
    pub adjustments: Vec<AdjustmentRow>,
    /// Warnings that name this product.
    pub warnings: Vec<String>,
}

/// A forecast run read back from its output directory.
#[derive(Debug, Clone, PartialEq)]
pub struct ForecastRun {
    /// `manifest.json` as written.
    pub manifest: serde_json::Value,
    /// One entry per product, in the order of `selection.csv`.
    pub products: Vec<ProductResult>,
    /// Warnings not tied to one product.
    pub warnings: Vec<String>,
    /// Rows of `rejected.csv`.
    pub rejected_rows: usize,
    /// The data files of the folder a reader would open, those present.
    pub files: Vec<String>,
}

/// Data files of an output folder linked from the report, in this order,
/// when they are there: what `forecast` writes (with `--changes`, its two
/// files), then what `crosscheck` and `plan` add.
pub const LINKED_FILES: [&str; 23] = [
    "forecast.xlsx",
    "forecast.csv",
    "forecast_wide.csv",
    "selection.csv",
    "scores.csv",
    "scores_by_horizon.csv",
    "backtest.csv",
    "cleaned.csv",
    "adjustments.csv",
    "quality.csv",
    "rejected.csv",
    "changes_applied.csv",
    "changes_summary.csv",
    "crosscheck.csv",
    "crosscheck_services.csv",
    "crosscheck_rejected.csv",
    "crosscheck.json",
    "plan.csv",
    "orders.csv",
    "order_totals.csv",
    "plan_log.csv",
    "plan.json",
    "manifest.json",
];

/// A CSV file with its header, addressed by column name; rows are read
/// one at a time (`backtest.csv` of a large run is hundreds of megabytes).
pub(super) struct Table {
    file: String,
    columns: HashMap<String, usize>,
    reader: csv::Reader<std::fs::File>,
}

impl Table {
    pub(super) fn read(dir: &Path, name: &str) -> Result<Option<Table>> {
        let path = dir.join(name);
        if !path.exists() {
            return Ok(None);
        }
        let file = path.display().to_string();
        let bad = |line: u64, e: csv::Error| Error::Input {
            file: file.clone(),
            line,
            column: None,
            message: format!("cannot read this CSV file: {e}"),
        };
        let mut reader = csv::ReaderBuilder::new()
            .flexible(false)
            .from_path(&path)
            .map_err(|e| bad(0, e))?;
        let columns = reader
            .headers()
            .map_err(|e| bad(1, e))?
            .iter()
            .enumerate()
            .map(|(i, h)| (h.trim().to_string(), i))
            .collect();
        Ok(Some(Table {
            file,
            columns,
            reader,
        }))
    }

    /// Calls `f` with each row and its line number.
    pub(super) fn each<F>(&mut self, mut f: F) -> Result<()>
    where
        F: FnMut(&Self, u64, &csv::StringRecord) -> Result<()>,
    {
        let mut rec = csv::StringRecord::new();
        loop {
            match self.reader.read_record(&mut rec) {
                Ok(true) => {
                    let line = rec.position().map(|p| p.line()).unwrap_or(0);
                    f(self, line, &rec)?;
                }
                Ok(false) => return Ok(()),
                Err(e) => {
                    return Err(Error::Input {
                        file: self.file.clone(),
                        line: e.position().map(|p| p.line()).unwrap_or(0),
                        column: None,
                        message: format!("cannot read this CSV file: {e}"),
                    })
                }
            }
        }
    }

    fn required(dir: &Path, name: &str) -> Result<Table> {
        Table::read(dir, name)?.ok_or_else(|| Error::Input {
            file: dir.join(name).display().to_string(),
            line: 0,
            column: None,
            message: "file not found; give the output directory of `provisio forecast`".into(),
        })
    }

    /// Column accessor for the named columns; the error names the file.
    /// Position of an optional column.
    /// Each column's name and position.
    pub(super) fn columns(&self) -> impl Iterator<Item = (&str, usize)> {
        self.columns.iter().map(|(n, i)| (n.as_str(), *i))
    }

    pub(super) fn col_opt(&self, name: &str) -> Option<usize> {
        self.columns.get(name).copied()
    }

    pub(super) fn cols<const N: usize>(&self, names: [&str; N]) -> Result<[usize; N]> {
        let mut out = [0; N];
        for (k, n) in names.iter().enumerate() {
            out[k] = *self.columns.get(*n).ok_or_else(|| Error::Input {
                file: self.file.clone(),
                line: 1,
                column: Some(n.to_string()),
                message: format!(
                    "missing column; this file must have the columns {}",
                    names.join(", ")
                ),
            })?;
        }
        Ok(out)
    }

    pub(super) fn num(
        &self,
        line: u64,
        rec: &csv::StringRecord,
        col: usize,
        name: &str,
    ) -> Result<Option<f64>> {
        let v = rec.get(col).unwrap_or("").trim();
        if v.is_empty() {
            return Ok(None);
        }
        v.parse::<f64>()
            .ok()
            .filter(|x| x.is_finite())
            .map(Some)
            .ok_or_else(|| Error::Input {
                file: self.file.clone(),
                line,
                column: Some(name.to_string()),
                message: format!("'{v}' is not a number; expected a plain number or nothing"),
            })
    }

    /// The score columns of a row (columns from `cols(FIGURE_COLUMNS)`).
    fn figures(&self, line: u64, rec: &csv::StringRecord, c: [usize; 7]) -> Result<Figures> {
        let n = |k: usize| self.num(line, rec, c[k], FIGURE_COLUMNS[k]);
        let rmsse = match self.col_opt("rmsse") {
            Some(col) => self.num(line, rec, col, "rmsse")?,
            None => None,
        };
        Ok(Figures {
            rmsse,
            mape: n(0)?,
            bias: n(1)?,
            wape: n(2)?,
            mase: n(3)?,
            rmse: n(4)?,
            coverage80: n(5)?,
            coverage95: n(6)?,
        })
    }

    pub(super) fn month(
        &self,
        line: u64,
        rec: &csv::StringRecord,
        col: usize,
        name: &str,
    ) -> Result<YearMonth> {
        let v = rec.get(col).unwrap_or("").trim();
        YearMonth::parse(v).map_err(|why| Error::Input {
            file: self.file.clone(),
            line,
            column: Some(name.to_string()),
            message: format!("'{v}': {why}"),
        })
    }
}

/// A CSV output of the folder as text: its header and up to `limit` rows,
/// and the number of rows it has; `None` when the file is absent.
pub(crate) type TextTable = (Vec<String>, Vec<Vec<String>>, usize);

/// Reads `name` in `dir` whole as text (see [`TextTable`]).
pub(crate) fn read_text_table(dir: &Path, name: &str, limit: usize) -> Result<Option<TextTable>> {
    let Some(mut t) = Table::read(dir, name)? else {
        return Ok(None);
    };
    let mut header: Vec<(usize, String)> = t.columns.iter().map(|(n, i)| (*i, n.clone())).collect();
    header.sort();
    let header: Vec<String> = header.into_iter().map(|(_, n)| n).collect();
    let mut rows = Vec::new();
    let mut total = 0usize;
    t.each(|_, _, rec| {
        total += 1;
        if rows.len() < limit {
            rows.push(rec.iter().map(str::to_string).collect());
        }
        Ok(())
    })?;
    Ok(Some((header, rows, total)))
}

pub(super) fn text(rec: &csv::StringRecord, col: usize) -> String {
    rec.get(col).unwrap_or("").to_string()
}

/// The unit each product is counted in, from `forecast.csv`'s `units`
/// column (the run configuration's `units`): product → unit, for the
/// products that have one. Empty when there is no `forecast.csv` or it
/// has no such column (folders written before it).
pub fn read_units(dir: &Path) -> Result<HashMap<String, String>> {
    let mut out = HashMap::new();
    let Some(mut t) = Table::read(dir, "forecast.csv")? else {
        return Ok(out);
    };
    let (Some(p), Some(u)) = (t.col_opt("product"), t.col_opt("units")) else {
        return Ok(out);
    };
    t.each(|_, _, rec| {
        let unit = name(rec, u);
        if !unit.trim().is_empty() {
            out.entry(name(rec, p)).or_insert(unit);
        }
        Ok(())
    })?;
    Ok(out)
}

/// A product or site name, as written with formula text quoted (see
/// [`crate::output::csv_text`]).
fn name(rec: &csv::StringRecord, col: usize) -> String {
    crate::output::csv_text_read(rec.get(col).unwrap_or("")).to_string()
}

fn status(name: &str) -> MonthStatus {
    match name {
        "adjusted" => MonthStatus::Adjusted,
        "partly-filled" => MonthStatus::PartlyFilled,
        "imputed" => MonthStatus::Imputed,
        _ => MonthStatus::Reported,
    }
}

/// Keeps the adjusted forecast of the products `changes_summary.csv` names
/// (a change touched them) and drops the others' (equal to their
/// statistical forecast), so only a changed product shows an adjusted one.
/// `with_changes` is false for a run that applied no changes file: a
/// `changes_summary.csv` beside it is an earlier run's and is not read.
fn keep_changed_products(
    dir: &Path,
    with_changes: bool,
    products: &mut [ProductResult],
    index: &HashMap<String, usize>,
) -> Result<()> {
    let mut changed = vec![false; products.len()];
    let summary = if with_changes {
        Table::read(dir, "changes_summary.csv")?
    } else {
        None
    };
    if let Some(mut t) = summary {
        let [c] = t.cols(["product"])?;
        t.each(|_, _, rec| {
            if let Some(&i) = index.get(&name(rec, c)) {
                changed[i] = true;
            }
            Ok(())
        })?;
    }
    for (p, changed) in products.iter_mut().zip(changed) {
        if !changed {
            p.adjusted.clear();
        }
        p.adjusted.sort_by_key(|a| a.0);
    }
    Ok(())
}

/// Reads the output directory of a `forecast` run. `selection.csv`,
/// `forecast.csv`, `cleaned.csv` and `manifest.json` are required; the
/// others add detail when present.
pub fn read_output_dir(dir: &Path) -> Result<ForecastRun> {
    let manifest_path = dir.join("manifest.json");
    let manifest: serde_json::Value = {
        let bytes = std::fs::read(&manifest_path).map_err(|source| Error::Io {
            path: manifest_path.clone(),
            action: "cannot read (give the output directory of `provisio forecast`)",
            source,
        })?;
        serde_json::from_slice(&bytes).map_err(|e| Error::Input {
            file: manifest_path.display().to_string(),
            line: e.line() as u64,
            column: None,
            message: format!("not valid JSON: {e}"),
        })?
    };

    let mut sel = Table::required(dir, "selection.csv")?;
    let names = [
        "product",
        "chosen_model",
        "members",
        "pinned",
        "best_model",
        "selected_by",
        "runner_up",
        "runner_up_score",
        "margin_pct",
        "backtested",
        "amc_last_12",
        "amc_next_12",
        "total_months_1_12",
        "total_months_13_24",
        "reason",
    ];
    let c = sel.cols(names)?;
    let f = sel.cols(FIGURE_COLUMNS)?;
    let mut products: Vec<ProductResult> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    sel.each(|sel, line, rec| {
        let n = |k: usize| sel.num(line, rec, c[k], names[k]);
        let s = Selection {
            chosen: text(rec, c[1]),
            members: text(rec, c[2]),
            pinned: text(rec, c[3]) == "yes",
            best: text(rec, c[4]),
            selected_by: text(rec, c[5]),
            scores: sel.figures(line, rec, f)?,
            runner_up: text(rec, c[6]),
            runner_up_score: n(7)?,
            margin: n(8)?,
            backtested: text(rec, c[9]) == "yes",
            amc_last_12: n(10)?,
            amc_next_12: n(11)?,
            total_1_12: n(12)?,
            total_13_24: n(13)?,
            reason: text(rec, c[14]),
        };
        let product = name(rec, c[0]);
        index.insert(product.clone(), products.len());
        products.push(ProductResult {
            product,
            selection: s,
            quality: None,
            history: Vec::new(),
            projection: Vec::new(),
            adjusted: Vec::new(),
            units: None,
            backtest: None,
            scores: Vec::new(),
            adjustments: Vec::new(),
            warnings: Vec::new(),
        });
        Ok(())
    })?;

    let mut cl = Table::required(dir, "cleaned.csv")?;
    let c = cl.cols([
        "product", "month", "reported", "cleaned", "status", "outlier",
    ])?;
    cl.each(|cl, line, rec| {
        let Some(&i) = index.get(&name(rec, c[0])) else {
            return Ok(());
        };
        products[i].history.push(HistoryMonth {
            month: cl.month(line, rec, c[1], "month")?,
            reported: cl.num(line, rec, c[2], "reported")?,
            cleaned: cl.num(line, rec, c[3], "cleaned")?,
            status: status(rec.get(c[4]).unwrap_or("")),
            outlier: rec.get(c[5]).unwrap_or("") == "yes",
        });
        Ok(())
    })?;

    let mut fc = Table::required(dir, "forecast.csv")?;
    let names = [
        "product", "month", "forecast", "lower_80", "upper_80", "lower_95", "upper_95",
    ];
    let c = fc.cols(names)?;
    // Folders written before the common projection start have no column.
    let bridged = fc.col_opt("bridged");
    // Written only by a run with a changes file.
    let adjusted = fc.col_opt("adjusted");
    let units = fc.col_opt("units");
    fc.each(|fc, line, rec| {
        let Some(&i) = index.get(&name(rec, c[0])) else {
            return Ok(());
        };
        if products[i].units.is_none() {
            products[i].units = units.map(|u| name(rec, u)).filter(|u| !u.trim().is_empty());
        }
        let n = |k: usize| fc.num(line, rec, c[k], names[k]);
        let pair = |a: Option<f64>, b: Option<f64>| a.zip(b);
        let point = n(2)?;
        let adjusted = match adjusted {
            Some(a) => fc.num(line, rec, a, "adjusted")?,
            None => None,
        };
        if point.is_none() && adjusted.is_none() {
            return Ok(());
        }
        let month = fc.month(line, rec, c[1], "month")?;
        if let Some(v) = adjusted {
            products[i].adjusted.push((month, v));
        }
        let Some(point) = point else { return Ok(()) };
        products[i].projection.push(ProjectedMonth {
            month,
            point,
            range80: pair(n(3)?, n(4)?),
            range95: pair(n(5)?, n(6)?),
            bridged: bridged.and_then(|b| rec.get(b)) == Some("yes"),
        });
        Ok(())
    })?;
    let with_changes = crate::output::manifest_has_changes(&manifest);
    keep_changed_products(dir, with_changes, &mut products, &index)?;

    if let Some(mut q) = Table::read(dir, "quality.csv")? {
        let c = q.cols([
            "product",
            "verdict",
            "reasons",
            "sites",
            "months",
            "months_reported",
            "months_missing",
            "months_with_stockouts",
            "mean_reporting_rate_pct",
        ])?;
        let too_long = q.col_opt("months_stocked_out_too_long");
        q.each(|_, _, rec| {
            if let Some(&i) = index.get(&name(rec, c[0])) {
                let reasons = text(rec, c[2]);
                products[i].quality = Some(Quality {
                    verdict: text(rec, c[1]),
                    reasons: reasons
                        .split("; ")
                        .filter(|r| !r.is_empty())
                        .map(str::to_string)
                        .collect(),
                    sites: text(rec, c[3]),
                    months: text(rec, c[4]),
                    months_reported: text(rec, c[5]),
                    months_missing: text(rec, c[6]),
                    months_with_stockouts: text(rec, c[7]),
                    months_stocked_out_too_long: too_long.map(|k| text(rec, k)).unwrap_or_default(),
                    mean_reporting_rate: text(rec, c[8]),
                });
            }
            Ok(())
        })?;
    }

    if let Some(mut t) = Table::read(dir, "scores.csv")? {
        let names = ["product", "model", "status", "points", "note"];
        let c = t.cols(names)?;
        let f = t.cols(FIGURE_COLUMNS)?;
        t.each(|t, line, rec| {
            let Some(&i) = index.get(&name(rec, c[0])) else {
                return Ok(());
            };
            let n = |k: usize| t.num(line, rec, c[k], names[k]);
            products[i].scores.push(ScoreRow {
                model: text(rec, c[1]),
                status: text(rec, c[2]),
                points: n(3)?,
                scores: t.figures(line, rec, f)?,
                note: text(rec, c[4]),
            });
            Ok(())
        })?;
    }

    if let Some(mut t) = Table::read(dir, "backtest.csv")? {
        let c = t.cols(["product", "model", "origin", "month", "forecast"])?;
        let mut paths: Vec<BTreeMap<YearMonth, Vec<(YearMonth, f64)>>> =
            vec![BTreeMap::new(); products.len()];
        t.each(|t, line, rec| {
            let Some(&i) = index.get(&name(rec, c[0])) else {
                return Ok(());
            };
            if rec.get(c[1]) != Some(products[i].selection.chosen.as_str()) {
                return Ok(());
            }
            let origin = t.month(line, rec, c[2], "origin")?;
            let month = t.month(line, rec, c[3], "month")?;
            if let Some(f) = t.num(line, rec, c[4], "forecast")? {
                paths[i].entry(origin).or_default().push((month, f));
            }
            Ok(())
        })?;
        for (p, by_origin) in products.iter_mut().zip(paths) {
            if by_origin.is_empty() {
                continue;
            }
            p.backtest = Some(BacktestPanel {
                model: p.selection.chosen.clone(),
                paths: by_origin
                    .into_iter()
                    .map(|(origin, mut points)| {
                        points.sort_by_key(|q| q.0);
                        BacktestPath { origin, points }
                    })
                    .collect(),
            });
        }
    }

    if let Some(mut t) = Table::read(dir, "adjustments.csv")? {
        let names = [
            "product", "site", "month", "line", "before", "after", "rule", "reason",
        ];
        let c = t.cols(names)?;
        t.each(|t, line, rec| {
            let Some(&i) = index.get(&name(rec, c[0])) else {
                return Ok(());
            };
            products[i].adjustments.push(AdjustmentRow {
                site: name(rec, c[1]),
                month: text(rec, c[2]),
                line: text(rec, c[3]),
                before: t.num(line, rec, c[4], "before")?,
                after: t.num(line, rec, c[5], "after")?,
                rule: text(rec, c[6]),
                reason: text(rec, c[7]),
            });
            Ok(())
        })?;
    }

    let mut rejected_rows = 0;
    if let Some(mut t) = Table::read(dir, "rejected.csv")? {
        t.each(|_, _, _| {
            rejected_rows += 1;
            Ok(())
        })?;
    }

    let mut warnings = Vec::new();
    let all: Vec<String> = manifest
        .get("warnings")
        .and_then(|w| w.as_array())
        .map(|a| {
            a.iter()
                .filter_map(|v| v.as_str().map(str::to_string))
                .collect()
        })
        .unwrap_or_default();
    for w in all {
        // Warnings about one product start "product '<name>': ".
        let owner = w.strip_prefix("product '").and_then(|rest| {
            // The longest matching name wins ("A" vs "A': b").
            products
                .iter()
                .enumerate()
                .filter(|(_, p)| rest.starts_with(&format!("{}': ", p.product)))
                .max_by_key(|(_, p)| p.product.len())
                .map(|(i, _)| i)
        });
        match owner {
            Some(i) => products[i].warnings.push(w),
            None => warnings.push(w),
        }
    }
    // forecast.csv edited or cut short by hand: a product with fewer
    // projected months than the run's horizon is said, not drawn as whole.
    let horizon = manifest
        .pointer("/forecast_settings/horizon")
        .and_then(|h| h.as_u64());
    if let Some(h) = horizon {
        for p in products.iter_mut() {
            let n = p.projection.iter().filter(|m| !m.bridged).count() as u64;
            // A product with no rows and no AMC ahead had no projection.
            if n < h && (n > 0 || p.selection.amc_next_12.is_some()) {
                p.warnings.push(format!(
                    "product '{}': forecast.csv holds {n} projected month(s), fewer than the run's horizon of {h}: the file was edited or cut short after the run; run the forecast again for the whole projection",
                    p.product
                ));
            }
        }
    }

    let files = LINKED_FILES
        .iter()
        .filter(|f| dir.join(f).is_file())
        .filter(|f| with_changes || !crate::output::CHANGES_FILES.contains(f))
        .map(|f| f.to_string())
        .collect();
    Ok(ForecastRun {
        manifest,
        products,
        warnings,
        rejected_rows,
        files,
    })
}
