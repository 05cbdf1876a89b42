//! Input records: reading the long CSV (or a workbook sheet, with
//! [`read_path`] / [`read_bytes`], which pick the reader by extension),
//! validating it, and building one gap-free monthly series per product
//! (and per site).

mod read;
mod series;
mod sheet;
mod text;
mod values;
mod wide;
pub(crate) mod xls;

pub(crate) use read::{missing_columns_message, normalise_name};
pub use read::{
    read_csv_bytes, read_csv_path, Companion, DuplicatePolicy, ReadOptions, SheetLimits,
    TableLayout, MAX_QUANTITY,
};
pub use series::{build_series, MonthObs, ProductData, SiteSeries};
pub(crate) use sheet::read_sheet_cells;
pub use sheet::{
    column_letter, is_workbook, read_bytes, read_path, read_sheet_bytes, WORKBOOK_EXTENSIONS,
};
pub use text::{lf_line_ends, runaway_quote, Encoding, MAX_ROW_BYTES};
pub use values::{parse_month, parse_number, NumberFormat};

use std::sync::Arc;

use crate::calendar::YearMonth;

/// One accepted input row, with values parsed and checked.
#[derive(Debug, Clone, PartialEq)]
pub struct InputRow {
    /// 1-based line of the row in the input file (where the record starts).
    pub line: u64,
    /// Product code or name (shared by every row of the product).
    pub product: Arc<str>,
    /// Site, when the file has a `site` column (shared by its rows).
    pub site: Option<Arc<str>>,
    /// Calendar month.
    pub month: YearMonth,
    /// Quantity dispensed; `None` = not reported.
    pub consumed: Option<f64>,
    /// Days out of stock in the month; `None` = not given.
    pub stockout_days: Option<f64>,
    /// Share of expected reports received, as a fraction 0–1; `None` = not given.
    pub reporting_rate: Option<f64>,
}

/// An input row that was not used, with the reason.
#[derive(Debug, Clone, PartialEq)]
pub struct RejectedRow {
    /// 1-based line of the row in the input file.
    pub line: u64,
    /// Column at fault, if one.
    pub column: Option<String>,
    /// The offending value as found (in the wide layout, for a bad value
    /// of the stockout or rate table, the consumption cell's value: the
    /// reason names the other table's value and place).
    pub value: String,
    /// What was wrong and what would be valid.
    pub reason: String,
    /// The whole row as read, fields joined by the file's delimiter (a
    /// field holding the delimiter, a quote or a line break quoted, so the
    /// row reads back as the same fields).
    pub raw: String,
}

/// A row that was accepted but changed while reading (for example merged
/// with a duplicate), kept so the row accounting adds up.
#[derive(Debug, Clone, PartialEq)]
pub struct MergedRow {
    /// Line of the row that was merged into another.
    pub line: u64,
    /// Line of the row that now carries its quantity.
    pub into_line: u64,
    /// Month of both (in the wide layout a line holds many months).
    pub month: YearMonth,
    /// Product of both rows.
    pub product: Arc<str>,
    /// Site of both rows.
    pub site: Option<Arc<str>>,
    /// Quantity of the receiving row before this row was added to it.
    pub before: Option<f64>,
    /// Quantity of the receiving row after this row was added to it.
    pub after: Option<f64>,
}

/// What was read from one input file.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// The file name as given by the user, used in messages.
    pub source: String,
    /// SHA-256 of the file's bytes, lowercase hex (for the run manifest).
    pub input_sha256: String,
    /// Data rows in the file (header excluded, blank lines included).
    pub rows_read: usize,
    /// Accepted rows.
    pub rows: Vec<InputRow>,
    /// Rejected rows, with reasons.
    pub rejected: Vec<RejectedRow>,
    /// Rows folded into another row (duplicates summed on request).
    pub merged: Vec<MergedRow>,
    /// Warnings about the file as a whole (not tied to one row).
    pub warnings: Vec<String>,
    /// Layout facts found while reading.
    pub layout: Layout,
}

/// Facts about the file's layout, recorded for the run manifest.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    /// The delimiter detected.
    pub delimiter: char,
    /// Whether a UTF-8 byte-order mark was stripped.
    pub had_bom: bool,
    /// Whether a `site` column is present.
    pub has_site: bool,
    /// Whether a `stockout_days` column is present.
    pub has_stockout_days: bool,
    /// Whether a `reporting_rate` column is present.
    pub has_reporting_rate: bool,
    /// Whether plain reporting-rate numbers were read as percentages
    /// (because some value in the column exceeds 1).
    pub reporting_rate_as_percent: bool,
    /// Columns present but not part of the contract (kept in the file, ignored).
    pub extra_columns: Vec<String>,
    /// For a workbook: the sheet read and where the contract's columns are.
    pub sheet: Option<SheetInfo>,
    /// For the wide layout (one row per product, one column per month):
    /// where the month columns are and where stockout days and reporting
    /// rates came from. `None`: the long layout.
    pub wide: Option<WideInfo>,
}

/// The wide layout as read: one row per product (and site), one column
/// per month. A "row" of the row accounting is then one value: one
/// product, site and month with something in its cell.
#[derive(Debug, Clone, PartialEq)]
pub struct WideInfo {
    /// The month columns: header as written, spreadsheet letter, month.
    pub months: Vec<(String, String, YearMonth)>,
    /// Letter of the `product` column.
    pub product_column: String,
    /// Letter of the `site` column, when there is one.
    pub site_column: Option<String>,
    /// Where stockout days were read from (`stockouts.csv`, `sheet
    /// 'Stockouts'`), when given.
    pub stockout_source: Option<String>,
    /// SHA-256 of the file stockout days were read from.
    pub stockout_sha256: Option<String>,
    /// Where reporting rates were read from, when given.
    pub rate_source: Option<String>,
    /// SHA-256 of the file reporting rates were read from.
    pub rate_sha256: Option<String>,
}

impl WideInfo {
    /// The spreadsheet letter of a month column, by its header as written.
    pub fn letter(&self, header: &str) -> Option<&str> {
        self.months
            .iter()
            .find(|(h, _, _)| h == header)
            .map(|(_, l, _)| l.as_str())
    }

    /// The run manifest's record of the layout and of the tables read
    /// beside the consumption table, with their hashes.
    pub fn manifest(&self) -> serde_json::Value {
        serde_json::json!({
            "layout": "wide",
            "month_columns": self.months.len(),
            "stockout_days_from": self.stockout_source,
            "stockout_days_sha256": self.stockout_sha256,
            "reporting_rates_from": self.rate_source,
            "reporting_rates_sha256": self.rate_sha256,
        })
    }

    /// One line for `inspect`: the layout read and what a counted value is.
    pub fn describe(&self) -> String {
        let span = match (self.months.first(), self.months.last()) {
            (Some(a), Some(b)) if self.months.len() > 1 => {
                format!(
                    "{} month columns, columns {} to {}",
                    self.months.len(),
                    a.1,
                    b.1
                )
            }
            (Some(a), _) => format!("1 month column, column {}", a.1),
            _ => "no month column".to_string(),
        };
        let mut extra = Vec::new();
        if let Some(s) = &self.stockout_source {
            extra.push(format!("stockout days from {s}"));
        }
        if let Some(s) = &self.rate_source {
            extra.push(format!("reporting rates from {s}"));
        }
        format!(
            "wide: one row per product{}, one column per month ({span}){}; values are counted one per product{} and month with something in its cell",
            if self.site_column.is_some() { " and site" } else { "" },
            if extra.is_empty() {
                String::new()
            } else {
                format!("; {}", extra.join("; "))
            },
            if self.site_column.is_some() { ", site" } else { "" },
        )
    }
}

/// Where the data was found in a workbook.
#[derive(Debug, Clone, PartialEq)]
pub struct SheetInfo {
    /// Name of the sheet read.
    pub name: String,
    /// The contract's columns present, with their spreadsheet letters
    /// (`("consumed", "C")`).
    pub columns: Vec<(String, String)>,
}

impl SheetInfo {
    /// "column C (consumed)" for a contract column, or the name alone.
    pub fn column(&self, name: &str) -> String {
        match self.columns.iter().find(|(n, _)| n == name) {
            Some((_, letter)) => format!("column {letter} ({name})"),
            None => format!("column '{name}'"),
        }
    }

    /// The cell of a contract column in a row (`C14`), when the column is known.
    pub fn cell(&self, row: u64, name: &str) -> Option<String> {
        self.columns
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, letter)| format!("{letter}{row}"))
    }
}

impl Dataset {
    /// Where a rejected row is, for messages: `data.csv:14: column
    /// 'consumed'`, or for a workbook `data.xlsx: sheet 'Data', row 14,
    /// column C (consumed)`; in the wide layout `data.csv: line 7, column
    /// F (Mar 2024)`.
    pub fn place(&self, row: &RejectedRow) -> String {
        if let Some(wide) = &self.layout.wide {
            let col = row
                .column
                .as_deref()
                .map(|c| match wide.letter(c) {
                    Some(l) => format!(", column {l} ({c})"),
                    None => format!(", column '{c}'"),
                })
                .unwrap_or_default();
            return match &self.layout.sheet {
                None => format!("{}: line {}{col}", self.source, row.line),
                Some(sheet) => format!(
                    "{}: sheet '{}', row {}{col}",
                    self.source, sheet.name, row.line
                ),
            };
        }
        match &self.layout.sheet {
            None => {
                let col = row
                    .column
                    .as_deref()
                    .map(|c| format!(": column '{c}'"))
                    .unwrap_or_default();
                format!("{}:{}{col}", self.source, row.line)
            }
            Some(sheet) => {
                let col = row
                    .column
                    .as_deref()
                    .map(|c| format!(", {}", sheet.column(c)))
                    .unwrap_or_default();
                format!(
                    "{}: sheet '{}', row {}{col}",
                    self.source, sheet.name, row.line
                )
            }
        }
    }

    /// The cell of a rejected row's value (`F7`), when its column is known:
    /// in a workbook, or in the wide layout.
    pub fn cell_of(&self, row: &RejectedRow) -> Option<String> {
        let col = row.column.as_deref()?;
        match (&self.layout.wide, &self.layout.sheet) {
            (Some(w), _) => w.letter(col).map(|l| format!("{l}{}", row.line)),
            (None, Some(s)) => s.cell(row.line, col),
            (None, None) => None,
        }
    }

    /// Rows accepted (used as they are or merged into another row).
    pub fn rows_accepted(&self) -> usize {
        self.rows.len() + self.merged.len()
    }

    /// Keeps only accepted rows dated up to `last` (to forecast as if at an
    /// earlier date). Rows left out are taken out of `rows_read` so the row
    /// accounting still adds up, and a warning says how many; rejected rows
    /// stay rejected. Returns the number left out.
    pub fn keep_until(&mut self, last: YearMonth) -> usize {
        // A row and the rows merged into it share its month.
        let late = self.rows.iter().filter(|r| r.month > last).count();
        if late == 0 {
            return 0;
        }
        self.rows.retain(|r| r.month <= last);
        let merged_before = self.merged.len();
        self.merged.retain(|m| m.month <= last);
        let left_out = late + merged_before - self.merged.len();
        self.rows_read -= left_out;
        self.warnings.push(format!(
            "{left_out} row(s) dated after {last} left out as asked (until {last}); the row accounting covers the other {} row(s)",
            self.rows_read
        ));
        left_out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keep_until_drops_later_rows_and_keeps_accounting() {
        let csv =
            "product,month,consumed\nA,2024-01,1\nA,2024-02,2\nA,2024-03,3\nA,2024-03,4\nA,bad,5\n";
        let opts = ReadOptions {
            duplicates: DuplicatePolicy::Sum,
            ..ReadOptions::default()
        };
        let mut ds = read_csv_bytes("t.csv", csv.as_bytes(), &opts).unwrap();
        assert_eq!(ds.rows_read, 5);
        assert_eq!(ds.merged.len(), 1);
        let left = ds.keep_until(YearMonth::parse("2024-02").unwrap());
        // The two March rows (one merged into the other) go; the rejected row stays.
        assert_eq!(left, 2);
        assert_eq!(ds.rows_read, 3);
        assert_eq!(ds.rows.len(), 2);
        assert!(ds.merged.is_empty());
        assert_eq!(ds.rejected.len(), 1);
        assert_eq!(ds.rows_accepted() + ds.rejected.len(), ds.rows_read);
        assert!(ds.warnings.iter().any(|w| w.contains("until 2024-02")));
        assert_eq!(ds.keep_until(YearMonth::parse("2024-02").unwrap()), 0);
    }
}
