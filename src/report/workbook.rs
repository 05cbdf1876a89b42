//! `forecast.xlsx` built from a forecast output folder, like the HTML
//! report: the workbook shows exactly what the CSV files say.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use super::read::read_text_table;
use crate::calendar::YearMonth;
use crate::error::{Error, Result};
use crate::output::{
    csv_text_read, ColumnKind, WorkbookContent, WorkbookForecast, WorkbookMonth, WorkbookTable,
    MAX_TABLE_ROWS,
};

/// Name of the workbook in the output folder.
pub const WORKBOOK_FILE: &str = "forecast.xlsx";

/// Columns whose text comes from the input data; the CSV outputs write
/// them with formula text quoted, which the workbook does not need.
const INPUT_TEXT: [&str; 4] = ["product", "site", "value", "row"];

/// How a column of a CSV output is shown, by its name; `None` for a name
/// not listed (see [`column_kinds`]).
fn kind_of(column: &str) -> Option<ColumnKind> {
    use ColumnKind::{Count, Decimal, Plain, Price, Quantity, Score, Text};
    let kind = match column {
        // Counts, line numbers and calendar years.
        "line" | "points" | "sites" | "months" | "longest_gap" | "horizon" | "adjustments"
        | "orders" | "zero_actuals" | "change_row" | "year" => Count,
        // Scores the selection compares between models.
        "mase" | "rmsse" | "rmse" | "runner_up_score" => Score,
        "unit_cost" => Price,
        "pack_size" => Plain,
        "months_of_stock" | "min_months" | "max_months" | "emergency_months" => Decimal,
        // Quantities: adjustments, the supply plan (plan.csv, orders.csv,
        // order_totals.csv) and the annual totals.
        "before"
        | "after"
        | "opening"
        | "consumption"
        | "arrivals_on_order"
        | "arrivals_planned"
        | "closing"
        | "short"
        | "amc"
        | "expiring"
        | "stock_at_arrival_without_order"
        | "projected_end_without_order"
        | "minimum"
        | "order_up_to"
        | "needed"
        | "quantity"
        | "packs"
        | "cost"
        | "total"
        | "adjusted_total" => Quantity,
        // Names, months, flags and explanations.
        "product" | "site" | "value" | "row" | "file" | "column" | "reason" | "sheet" | "cell"
        | "month" | "first_month" | "last_month" | "amc_from" | "amc_to" | "order_month"
        | "arrival_month" | "covers_to" | "within_lead_time" | "flag" | "rule" | "kind"
        | "new_product" | "note" | "chosen_model" | "members" | "pinned" | "best_model"
        | "selected_by" | "runner_up" | "backtested" | "ranges" | "warnings" | "outlier_months"
        | "verdict" | "reasons" | "units" | "model" | "status" => Text,
        c if c.ends_with("_pct") => Decimal,
        c if c.starts_with("months_") => Count,
        // amc_last_12, total_months_1_12, and the known changes' totals
        // (change_months_1_12, statistical_months_1_24, adjusted_months_1_24).
        c if [
            "amc_",
            "total_",
            "change_months_",
            "statistical_months_",
            "adjusted_months_",
        ]
        .iter()
        .any(|p| c.starts_with(p)) =>
        {
            Quantity
        }
        _ => return None,
    };
    Some(kind)
}

/// The kind of each column of a table: by its name, or for a name
/// [`kind_of`] does not know, a plain number when every value given reads
/// as one (so a column new to a CSV output is not numbers stored as text),
/// otherwise text.
fn column_kinds(header: &[String], rows: &[Vec<String>]) -> Vec<(String, ColumnKind)> {
    header
        .iter()
        .enumerate()
        .map(|(i, h)| {
            let kind = kind_of(h).unwrap_or_else(|| {
                let mut given = rows
                    .iter()
                    .filter_map(|r| r.get(i))
                    .map(|v| v.trim())
                    .filter(|v| !v.is_empty())
                    .peekable();
                let numbers = given.peek().is_some()
                    && given.all(|v| v.parse::<f64>().is_ok_and(f64::is_finite));
                if numbers {
                    ColumnKind::Plain
                } else {
                    ColumnKind::Text
                }
            });
            (h.clone(), kind)
        })
        .collect()
}

/// Positions of the columns in `header` whose text comes from the input.
fn input_columns(header: &[String]) -> Vec<usize> {
    header
        .iter()
        .enumerate()
        .filter(|(_, h)| INPUT_TEXT.contains(&h.as_str()))
        .map(|(i, _)| i)
        .collect()
}

/// Input text in `row` at `input` as read, without the CSV's formula quote.
fn plain_input_text(row: &mut [String], input: &[usize]) {
    for &i in input {
        if let Some(v) = row.get_mut(i) {
            *v = csv_text_read(v).to_string();
        }
    }
}

/// A CSV output of `dir` as a sheet; `None` when the file is absent.
fn table(dir: &Path, file: &str, sheet: &str) -> Result<Option<WorkbookTable>> {
    let Some((header, mut rows, total)) = read_text_table(dir, file, MAX_TABLE_ROWS)? else {
        return Ok(None);
    };
    let input = input_columns(&header);
    for r in &mut rows {
        plain_input_text(r, &input);
    }
    let note = (total > rows.len()).then(|| {
        format!(
            "the first {} of {total} rows; {file} has them all",
            rows.len()
        )
    });
    Ok(Some(WorkbookTable {
        sheet: sheet.to_string(),
        columns: column_kinds(&header, &rows),
        rows,
        note,
    }))
}

/// Count, first and last month, totals before and after of one product's
/// adjustments by one rule.
type AdjustmentSum = (usize, String, String, f64, f64);

/// The "Adjustments" sheet from `adjustments.csv`: every adjustment when
/// they fit in `limit` rows; otherwise one row per product and rule (how
/// many, the months they span, the totals before and after), so every
/// product keeps its line where a cut list would drop the later ones.
fn adjustments(dir: &Path, limit: usize) -> Result<Option<WorkbookTable>> {
    const FILE: &str = "adjustments.csv";
    let Some(mut t) = super::read::Table::read(dir, FILE)? else {
        return Ok(None);
    };
    let mut header: Vec<(usize, String)> = t.columns().map(|(n, i)| (i, n.to_string())).collect();
    header.sort();
    let header: Vec<String> = header.into_iter().map(|(_, n)| n).collect();
    let [product, month, before, after, rule] =
        t.cols(["product", "month", "before", "after", "rule"])?;
    let input = input_columns(&header);
    // (product, rule) in order of first appearance → count, first and
    // last month, totals before and after.
    let mut order: Vec<(String, String)> = Vec::new();
    let mut sums: HashMap<(String, String), AdjustmentSum> = HashMap::new();
    let mut rows: Vec<Vec<String>> = Vec::new();
    let mut total = 0usize;
    t.each(|t, line, rec| {
        total += 1;
        if rows.len() < limit {
            let mut r: Vec<String> = rec.iter().map(str::to_string).collect();
            plain_input_text(&mut r, &input);
            rows.push(r);
        }
        let get = |c: usize| rec.get(c).unwrap_or("");
        // A value that is not a number is refused with its line, as the
        // report refuses it, rather than summed as nothing.
        let (b, a) = (
            t.num(line, rec, before, "before")?,
            t.num(line, rec, after, "after")?,
        );
        let key = (
            csv_text_read(get(product)).to_string(),
            get(rule).to_string(),
        );
        let m = get(month);
        let e = sums.entry(key).or_insert_with_key(|k| {
            order.push(k.clone());
            (0, m.to_string(), m.to_string(), 0.0, 0.0)
        });
        e.0 += 1;
        if m < e.1.as_str() {
            e.1 = m.to_string();
        }
        if m > e.2.as_str() {
            e.2 = m.to_string();
        }
        e.3 += b.unwrap_or(0.0);
        e.4 += a.unwrap_or(0.0);
        Ok(())
    })?;
    if total <= limit {
        return Ok(Some(WorkbookTable {
            sheet: "Adjustments".to_string(),
            columns: column_kinds(&header, &rows),
            rows,
            note: None,
        }));
    }
    drop(rows);
    let columns: [&str; 7] = [
        "product",
        "rule",
        "adjustments",
        "first_month",
        "last_month",
        "before",
        "after",
    ];
    let rows: Vec<Vec<String>> = order
        .into_iter()
        .map(|k| {
            let (n, first, last, b, a) = sums.remove(&k).unwrap_or_default();
            vec![
                k.0,
                k.1,
                n.to_string(),
                first,
                last,
                crate::output::fmt_num(b),
                crate::output::fmt_num(a),
            ]
        })
        .collect();
    Ok(Some(WorkbookTable {
        sheet: "Adjustments".to_string(),
        columns: column_kinds(&columns.map(String::from), &rows),
        rows,
        note: Some(format!(
            "{total} adjustments, more than the {limit} rows this sheet lists one by one: one row per product and rule here, before and after as totals (a blank value counts as nothing); {FILE} lists each adjustment"
        )),
    }))
}

/// Flattens the manifest into setting, value pairs: nested settings as
/// `clean_settings.max_stockout_days`, each warning a row of its own.
fn flatten(prefix: &str, v: &serde_json::Value, out: &mut Vec<(String, String)>) {
    use serde_json::Value;
    match v {
        Value::Object(map) => {
            for (k, x) in map {
                let key = if prefix.is_empty() {
                    k.clone()
                } else {
                    format!("{prefix}.{k}")
                };
                flatten(&key, x, out);
            }
        }
        Value::Array(items) if items.is_empty() => {
            out.push((prefix.to_string(), "none".to_string()));
        }
        // Each warning on a row of its own; short lists on one row.
        Value::Array(items) if prefix == "warnings" => {
            for (i, x) in items.iter().enumerate() {
                let key = if i == 0 {
                    prefix.to_string()
                } else {
                    String::new()
                };
                flatten_scalar(key, x, out);
            }
        }
        Value::Array(items) if items.iter().all(|x| !x.is_object() && !x.is_array()) => {
            let mut joined = Vec::new();
            for x in items {
                flatten_scalar(String::new(), x, &mut joined);
            }
            let text: Vec<String> = joined.into_iter().map(|(_, v)| v).collect();
            out.push((prefix.to_string(), text.join(", ")));
        }
        Value::Array(items) => {
            for (i, x) in items.iter().enumerate() {
                flatten(&format!("{prefix}.{}", i + 1), x, out);
            }
        }
        scalar => flatten_scalar(prefix.to_string(), scalar, out),
    }
}

fn flatten_scalar(key: String, v: &serde_json::Value, out: &mut Vec<(String, String)>) {
    let text = match v {
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Null => "none".to_string(),
        other => other.to_string(),
    };
    out.push((key, text));
}

/// The run parameters: the facts a reader looks for first, then every
/// setting of the manifest.
fn parameters(manifest: &serde_json::Value) -> Vec<(String, String)> {
    let mut all = Vec::new();
    flatten("", manifest, &mut all);
    let first = [
        "tool",
        "date",
        "command",
        "input",
        "sheet",
        "input_sha256",
        "until",
        "default_model.default",
        "default_model.reason",
    ];
    let mut out: Vec<(String, String)> = first
        .iter()
        .filter_map(|k| all.iter().find(|(n, _)| n == k).cloned())
        .collect();
    if !out.iter().any(|(k, _)| k == "date") {
        out.insert(1, ("date".to_string(), "not recorded".to_string()));
    }
    // A warning's continuation rows have an empty key: keep them with it.
    let mut in_first = false;
    for (k, v) in all {
        if !k.is_empty() {
            in_first = first.contains(&k.as_str());
        }
        if !in_first {
            out.push((k, v));
        }
    }
    out
}

/// Reads a forecast output folder into the workbook's content.
pub fn workbook_content(dir: &Path) -> Result<WorkbookContent> {
    let manifest_path = dir.join("manifest.json");
    let manifest: serde_json::Value = std::fs::read(&manifest_path)
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .ok_or_else(|| Error::Input {
            file: manifest_path.display().to_string(),
            line: 0,
            column: None,
            message: "missing or not valid JSON; give the output directory of `provisio forecast`"
                .into(),
        })?;
    // Known-changes files count only when this run applied a changes file.
    let with_changes = crate::output::manifest_has_changes(&manifest);
    let Some((header, rows, _)) = read_text_table(dir, "forecast.csv", usize::MAX)? else {
        return Err(Error::Input {
            file: dir.join("forecast.csv").display().to_string(),
            line: 0,
            column: None,
            message: "file not found; give the output directory of `provisio forecast`".into(),
        });
    };
    let col = |name: &str| {
        header
            .iter()
            .position(|h| h == name)
            .ok_or_else(|| Error::Input {
                file: dir.join("forecast.csv").display().to_string(),
                line: 1,
                column: Some(name.to_string()),
                message: "missing column".into(),
            })
    };
    let c = [
        col("product")?,
        col("month")?,
        col("model")?,
        col("forecast")?,
        col("lower_80")?,
        col("upper_80")?,
        col("lower_95")?,
        col("upper_95")?,
    ];
    // Folders written before the common projection start have no column.
    let bridged = header.iter().position(|h| h == "bridged");
    let units_col = header.iter().position(|h| h == "units");
    let mut forecasts: Vec<WorkbookForecast> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    for (i, r) in rows.iter().enumerate() {
        let get = |k: usize| r.get(c[k]).map(String::as_str).unwrap_or("");
        let num = |k: usize| get(k).trim().parse::<f64>().ok();
        let bad = |what: &str| Error::Input {
            file: dir.join("forecast.csv").display().to_string(),
            line: i as u64 + 2,
            column: Some(what.to_string()),
            message: format!(
                "'{}' cannot be read",
                get(if what == "month" { 1 } else { 3 })
            ),
        };
        let month = YearMonth::parse(get(1).trim()).map_err(|_| bad("month"))?;
        let point = num(3).ok_or_else(|| bad("forecast"))?;
        let product = csv_text_read(get(0)).to_string();
        let k = *index.entry(product.clone()).or_insert_with(|| {
            forecasts.push(WorkbookForecast {
                product,
                model: get(2).to_string(),
                months: Vec::new(),
                bridged: 0,
                units: units_col
                    .and_then(|u| r.get(u))
                    .map(|u| u.trim().to_string())
                    .unwrap_or_default(),
            });
            forecasts.len() - 1
        });
        if bridged.and_then(|b| r.get(b)).is_some_and(|v| v == "yes") {
            forecasts[k].bridged += 1;
        }
        forecasts[k]
            .months
            .push((month, point, num(4).zip(num(5)), num(6).zip(num(7))));
    }
    // A run with a changes file: the adjusted forecast follows each
    // changed product's statistical one, under a model of its own.
    if let Some(a) = header.iter().position(|h| h == "adjusted") {
        let ac: Vec<Option<usize>> = crate::output::ADJUSTED_COLUMNS
            .iter()
            .map(|n| header.iter().position(|h| h == n))
            .collect();
        let mut adjusted: HashMap<String, Vec<WorkbookMonth>> = HashMap::new();
        for r in &rows {
            let num = |k: Option<usize>| {
                k.and_then(|k| r.get(k))
                    .and_then(|v| v.trim().parse::<f64>().ok())
            };
            let (Some(month), Some(point)) = (
                r.get(c[1]).and_then(|m| YearMonth::parse(m.trim()).ok()),
                num(Some(a)),
            ) else {
                continue;
            };
            adjusted
                .entry(csv_text_read(r.get(c[0]).map(String::as_str).unwrap_or("")).to_string())
                .or_default()
                .push((
                    month,
                    point,
                    num(ac[1]).zip(num(ac[2])),
                    num(ac[3]).zip(num(ac[4])),
                ));
        }
        let summary = if with_changes {
            read_text_table(dir, "changes_summary.csv", usize::MAX)?
        } else {
            None
        };
        let changed: Vec<String> = summary
            .map(|(h, rows, _)| {
                let pc = h.iter().position(|x| x == "product");
                rows.iter()
                    .filter_map(|r| pc.and_then(|p| r.get(p)))
                    .map(|p| csv_text_read(p).to_string())
                    .collect()
            })
            .unwrap_or_default();
        let mut with = Vec::with_capacity(forecasts.len() * 2);
        for f in forecasts {
            let extra = changed
                .contains(&f.product)
                .then(|| adjusted.remove(&f.product))
                .flatten();
            let product = f.product.clone();
            let bridged = f.bridged;
            let units = f.units.clone();
            with.push(f);
            if let Some(months) = extra {
                with.push(WorkbookForecast {
                    product,
                    model: "adjusted (known changes)".into(),
                    months,
                    bridged,
                    units: units.clone(),
                });
            }
        }
        forecasts = with;
    }
    let mut tables = vec![annual_totals(&header, &rows)];
    // A plan made from an earlier forecast in this folder is not shown
    // beside the new one (the report says the same).
    let plan_stale = std::fs::read(dir.join("plan.json"))
        .ok()
        .and_then(|b| serde_json::from_slice::<serde_json::Value>(&b).ok())
        .is_some_and(|run| super::plan::made_from_another_forecast(dir, &run));
    if plan_stale {
        tables.push(WorkbookTable {
            sheet: "Supply plan".to_string(),
            columns: Vec::new(),
            rows: Vec::new(),
            note: Some(
                "Out of date: forecast.csv has changed since the supply plan in this folder was made (its SHA-256 differs from plan.json's), so the plan, its orders and order totals are left out; run provisio plan again".to_string(),
            ),
        });
    }
    for (file, sheet) in [
        ("plan.csv", "Supply plan"),
        ("orders.csv", "Orders"),
        ("order_totals.csv", "Order totals"),
        ("changes_summary.csv", "Known changes"),
        ("selection.csv", "Selection"),
        ("quality.csv", "Data quality"),
        ("rejected.csv", "Rejected rows"),
    ] {
        if file == "quality.csv" {
            tables.extend(adjustments(dir, MAX_TABLE_ROWS)?);
        }
        if plan_stale && matches!(file, "plan.csv" | "orders.csv" | "order_totals.csv") {
            continue;
        }
        // An earlier run's known changes are not this forecast's.
        if !with_changes && crate::output::CHANGES_FILES.contains(&file) {
            continue;
        }
        if let Some(t) = table(dir, file, sheet)? {
            tables.push(t);
        }
    }
    Ok(WorkbookContent {
        forecasts,
        tables,
        parameters: parameters(&manifest),
        caution: super::CAUTION.to_string(),
    })
}

/// Product, site and year of an annual total.
type YearKey = (String, String, String);
/// Months, total, units and pack size of an annual total.
type YearSum = (usize, f64, String, String);

/// The "Annual totals" sheet from `forecast.csv`'s header and rows: per
/// product (and site, when given) and calendar year, the months forecast,
/// the total forecast (the adjusted one, under the header
/// `adjusted_total`, when the run applied known changes), and in packs of
/// that total where the run configuration gave a pack size.
fn annual_totals(header: &[String], rows: &[Vec<String>]) -> WorkbookTable {
    let at = |name: &str| header.iter().position(|h| h == name);
    let adjusted = at("adjusted");
    let point = adjusted.or_else(|| at("forecast"));
    let (product, site, month) = (at("product"), at("site"), at("month"));
    let (units, pack) = (at("units"), at("pack_size"));
    let get = |r: &Vec<String>, c: Option<usize>| -> String {
        c.and_then(|c| r.get(c)).cloned().unwrap_or_default()
    };
    // (product, site, year) → (months, total, units, pack size), in file order.
    let mut order: Vec<YearKey> = Vec::new();
    let mut sums: HashMap<YearKey, YearSum> = HashMap::new();
    for r in rows {
        let m = get(r, month);
        let Some(v) = get(r, point).trim().parse::<f64>().ok() else {
            continue;
        };
        let key = (
            csv_text_read(&get(r, product)).to_string(),
            csv_text_read(&get(r, site)).to_string(),
            m.get(..4).unwrap_or("").to_string(),
        );
        let e = sums.entry(key.clone()).or_insert_with(|| {
            order.push(key);
            (0, 0.0, get(r, units), get(r, pack))
        });
        e.0 += 1;
        e.1 += v;
    }
    let rows = order
        .into_iter()
        .filter_map(|k| {
            let (n, total, units, pack) = sums.remove(&k)?;
            // Packs from the total as shown, so that total ÷ pack size =
            // packs holds within the row.
            let total = total.round();
            let packs = pack
                .trim()
                .parse::<f64>()
                .ok()
                .filter(|p| *p > 0.0)
                .map(|p| crate::output::fmt_num((total / p * 10.0).round() / 10.0))
                .unwrap_or_default();
            Some(vec![
                k.0,
                k.1,
                k.2,
                n.to_string(),
                crate::output::fmt_num(total),
                units,
                pack,
                packs,
            ])
        })
        .collect();
    use ColumnKind::{Count, Decimal, Plain, Quantity, Text};
    let total = if adjusted.is_some() {
        "adjusted_total"
    } else {
        "total"
    };
    // Packs are a tenth of a pack here (a share of the year's total), not
    // the whole packs of an order.
    let columns = [
        ("product", Text),
        ("site", Text),
        ("year", Count),
        ("months", Count),
        (total, Quantity),
        ("units", Text),
        ("pack_size", Plain),
        ("packs", Decimal),
    ];
    let what = if adjusted.is_some() {
        "adjusted forecast (known changes applied; the statistical forecast of a product no change touches)"
    } else {
        "forecast"
    };
    WorkbookTable {
        sheet: "Annual totals".to_string(),
        columns: columns.iter().map(|(c, k)| (c.to_string(), *k)).collect(),
        rows,
        note: Some(format!(
            "{what} per calendar year (a year the horizon covers only in part says how many months); packs = {total} ÷ pack size, where the run configuration gave one"
        )),
    }
}

/// Reads the forecast output folder `dir` and writes `forecast.xlsx` into
/// it (atomically); returns its path.
pub fn write_workbook(dir: &Path) -> Result<PathBuf> {
    let content = workbook_content(dir)?;
    let path = dir.join(WORKBOOK_FILE);
    crate::output::write_workbook(&path, &content)?;
    Ok(path)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A hand-written log in the layout `forecast` writes (plumbing only:
    /// the totals are checked against sums done by hand on these rows).
    const LOG: &str = "product,site,month,line,before,after,rule,reason\n\
        A,S1,2024-03,4,10,12.5,reporting-scaled,r\n\
        A,S1,2024-01,2,,7,site-filled,r\n\
        A,S1,2024-05,6,20,25,reporting-scaled,r\n\
        '=B,S2,2024-02,3,5,,stockout-missing,r\n\
        A,S2,2024-04,5,1,2,reporting-scaled,r\n";

    #[test]
    fn a_column_without_a_named_kind_is_a_number_when_its_values_are() {
        let header: Vec<String> = ["product", "new_count", "new_label", "new_empty", "year"]
            .map(String::from)
            .to_vec();
        let rows = vec![
            ["12", "3", "4", "", "2026"].map(String::from).to_vec(),
            ["B", "4.5", "n/a", "", "all"].map(String::from).to_vec(),
        ];
        let kinds: Vec<ColumnKind> = column_kinds(&header, &rows)
            .into_iter()
            .map(|(_, k)| k)
            .collect();
        // A product named 12 stays a name; a year column keeps its kind
        // with an `all` row (the writer makes that cell text).
        assert_eq!(
            kinds,
            [
                ColumnKind::Text,
                ColumnKind::Plain,
                ColumnKind::Text,
                ColumnKind::Text,
                ColumnKind::Count
            ]
        );
    }

    #[test]
    fn adjustments_are_summed_per_product_and_rule_past_the_limit() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("adjustments.csv"), LOG).unwrap();
        let listed = adjustments(dir.path(), 5).unwrap().unwrap();
        assert_eq!(listed.rows.len(), 5);
        assert!(listed.note.is_none());
        // Formula text quoted in the CSV is shown plain.
        assert_eq!(listed.rows[3][0], "=B");

        let summed = adjustments(dir.path(), 4).unwrap().unwrap();
        let names: Vec<&str> = summed.columns.iter().map(|c| c.0.as_str()).collect();
        assert_eq!(
            names,
            [
                "product",
                "rule",
                "adjustments",
                "first_month",
                "last_month",
                "before",
                "after"
            ]
        );
        let rows: Vec<Vec<&str>> = summed
            .rows
            .iter()
            .map(|r| r.iter().map(String::as_str).collect())
            .collect();
        assert_eq!(
            rows,
            [
                vec![
                    "A",
                    "reporting-scaled",
                    "3",
                    "2024-03",
                    "2024-05",
                    "31",
                    "39.5"
                ],
                vec!["A", "site-filled", "1", "2024-01", "2024-01", "0", "7"],
                vec![
                    "=B",
                    "stockout-missing",
                    "1",
                    "2024-02",
                    "2024-02",
                    "5",
                    "0"
                ],
            ]
        );
        let note = summed.note.unwrap();
        assert!(
            note.starts_with("5 adjustments, more than the 4 rows"),
            "{note}"
        );
    }
}
