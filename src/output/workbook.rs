//! `forecast.xlsx`: the planner's workbook, written with rust_xlsxwriter
//! from plain values. Every text, and above all every text from the input
//! data (product and site names), is written as a string cell; the
//! workbook holds no formula, so a name such as `=SUM(A1)` stays a name.

use std::path::Path;

use rust_xlsxwriter::{Color, Format, FormatAlign, Workbook, Worksheet, XlsxError};

use super::write_atomic;
use crate::calendar::YearMonth;
use crate::error::{Error, Result};

/// One projected month: the month, the point forecast, and the 80% and
/// 95% ranges (lower, upper; `None` when not given).
pub type WorkbookMonth = (YearMonth, f64, Option<(f64, f64)>, Option<(f64, f64)>);

/// The projection of one product, as the Forecast sheet shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct WorkbookForecast {
    /// Product name as in the input.
    pub product: String,
    /// Model that made the projection.
    pub model: String,
    /// Months, in order.
    pub months: Vec<WorkbookMonth>,
    /// How many of the first months are bridged (forecast between the
    /// product's last month and the common projection start).
    pub bridged: usize,
    /// The unit the product is counted in (`forecast.csv`'s `units`),
    /// named on its forecast row; empty when none was configured.
    pub units: String,
}

/// How a table column is written. Every kind but `Text` writes a value
/// that reads as a number as a number cell (a spreadsheet can sum it), and
/// any other value, such as `all` in a year column, as a string cell.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColumnKind {
    /// Text, written as a string cell.
    Text,
    /// A quantity: thousands separators, no decimals (`#,##0`).
    Quantity,
    /// A percentage, share or months of stock: one decimal (`#,##0.0`).
    Decimal,
    /// A backtest score compared between models (MASE, RMSSE, RMSE, the
    /// runner-up's score): three decimals (`#,##0.000`), as the selection
    /// reason quotes them, so two close scores show apart.
    Score,
    /// A unit price: two to four decimals (`#,##0.00##`), so a price such
    /// as 0.03 shows as written and quantity × price = cost can be read.
    Price,
    /// A number shown as written, with its decimals if it has any (the
    /// spreadsheet's General format): pack sizes, and a column whose
    /// values are all numbers but whose name has no kind.
    Plain,
    /// A count, line number or year: a whole number without separators (`0`).
    Count,
}

impl ColumnKind {
    /// The number format of the kind's number cells (`None`: text).
    pub fn number_format(self) -> Option<&'static str> {
        match self {
            ColumnKind::Text => None,
            ColumnKind::Quantity => Some("#,##0"),
            ColumnKind::Decimal => Some("#,##0.0"),
            ColumnKind::Score => Some("#,##0.000"),
            ColumnKind::Price => Some("#,##0.00##"),
            ColumnKind::Plain => Some("General"),
            ColumnKind::Count => Some("0"),
        }
    }
}

/// A table copied into a sheet (a CSV output, read back).
#[derive(Debug, Clone, PartialEq)]
pub struct WorkbookTable {
    /// Sheet name (at most 31 characters).
    pub sheet: String,
    /// Column headers and how each is written.
    pub columns: Vec<(String, ColumnKind)>,
    /// Rows of values as text; a number column's text is written as a
    /// number when it reads as one, otherwise as a string.
    pub rows: Vec<Vec<String>>,
    /// A line shown above the table (for example that rows were cut).
    pub note: Option<String>,
}

/// Everything `forecast.xlsx` holds.
#[derive(Debug, Clone, PartialEq)]
pub struct WorkbookContent {
    /// One entry per product, in the order of the Forecast sheet.
    pub forecasts: Vec<WorkbookForecast>,
    /// Further sheets (Selection, Adjustments, Data quality, ...).
    pub tables: Vec<WorkbookTable>,
    /// The Run parameters sheet: setting, value.
    pub parameters: Vec<(String, String)>,
    /// The caution shown first on the Forecast and Run parameters sheets.
    pub caution: String,
}

/// Longest text Excel holds in a cell (32,767 characters); longer texts are
/// cut, saying so.
const MAX_CELL_CHARS: usize = 32_000;

/// Rows of a table sheet before it is cut (the CSV keeps every row).
pub const MAX_TABLE_ROWS: usize = 100_000;

fn cell_text(s: &str) -> std::borrow::Cow<'_, str> {
    if s.len() <= MAX_CELL_CHARS {
        return std::borrow::Cow::Borrowed(s);
    }
    let cut: String = s.chars().take(MAX_CELL_CHARS).collect();
    if cut.len() == s.len() {
        std::borrow::Cow::Borrowed(s)
    } else {
        std::borrow::Cow::Owned(format!(
            "{cut} … (cut at {MAX_CELL_CHARS} characters; the CSV output has it whole)"
        ))
    }
}

/// Labels of the five rows each product has on the Forecast sheet.
pub const FORECAST_ROW_LABELS: [&str; 5] =
    ["forecast", "80% low", "80% high", "95% low", "95% high"];

/// Writes `forecast.xlsx` atomically (built in memory, written to a
/// temporary file, then renamed into place).
pub fn write_workbook(path: &Path, content: &WorkbookContent) -> Result<()> {
    let bytes = build_workbook(content).map_err(|e| Error::Output {
        path: path.to_path_buf(),
        message: format!("cannot build the workbook: {e}"),
    })?;
    write_atomic(path, |w| w.write_all(&bytes))
}

/// The workbook's bytes.
pub fn build_workbook(content: &WorkbookContent) -> std::result::Result<Vec<u8>, XlsxError> {
    let mut book = Workbook::new();
    let header = Format::new()
        .set_bold()
        .set_background_color(Color::RGB(0xE8EEF4))
        .set_align(FormatAlign::Center);
    let header_left = Format::new()
        .set_bold()
        .set_background_color(Color::RGB(0xE8EEF4));
    let note = Format::new()
        .set_italic()
        .set_font_color(Color::RGB(0x555555));
    let point = Format::new().set_num_format("#,##0").set_bold();
    let range = Format::new()
        .set_num_format("#,##0")
        .set_font_color(Color::RGB(0x666666));
    let range_label = Format::new().set_font_color(Color::RGB(0x666666));
    let bridged_point = point
        .clone()
        .set_italic()
        .set_background_color(Color::RGB(0xEEEEEE));
    let bridged_range = range
        .clone()
        .set_italic()
        .set_background_color(Color::RGB(0xEEEEEE));
    let bold = Format::new().set_bold();

    // Forecast: a block of five rows per product (point, then the 80% and
    // 95% ranges), months as columns.
    let months: Vec<YearMonth> = {
        let mut m: Vec<YearMonth> = content
            .forecasts
            .iter()
            .flat_map(|f| f.months.iter().map(|x| x.0))
            .collect();
        m.sort();
        m.dedup();
        m
    };
    // Low-memory mode: each row goes to a temporary file once the next row
    // starts (rows here are written strictly in order, as it requires).
    let ws = book.add_worksheet_with_low_memory();
    ws.set_name("Forecast")?;
    ws.write_string_with_format(0, 0, cell_text(&content.caution), &note)?;
    if content.forecasts.iter().any(|f| f.bridged > 0) {
        ws.write_string_with_format(
            1,
            0,
            "Grey italic months are bridged: forecast between a product's last reported month and the common projection start; they are not in the horizon, the totals or the AMC.",
            &note,
        )?;
    }
    let top = 2u32;
    for (c, h) in ["product", "model", "row"].iter().enumerate() {
        ws.write_string_with_format(top, c as u16, *h, &header_left)?;
    }
    for (k, m) in months.iter().enumerate() {
        ws.write_string_with_format(top, 3 + k as u16, m.to_string(), &header)?;
    }
    let mut row = top + 1;
    for f in &content.forecasts {
        let by_month: std::collections::HashMap<YearMonth, usize> =
            f.months.iter().enumerate().map(|(i, x)| (x.0, i)).collect();
        for (k, label) in FORECAST_ROW_LABELS.iter().enumerate() {
            ws.write_string(row, 0, cell_text(&f.product))?;
            ws.write_string(row, 1, cell_text(&f.model))?;
            if k == 0 && !f.units.is_empty() {
                // The unit beside the quantities (a tester found it only
                // on the Annual totals sheet).
                let named = format!(
                    "{label} ({})",
                    crate::chart::units_plural(Some(f.units.as_str()))
                );
                ws.write_string_with_format(row, 2, cell_text(&named), &bold)?;
            } else if k == 0 {
                ws.write_string_with_format(row, 2, *label, &bold)?;
            } else {
                ws.write_string_with_format(row, 2, *label, &range_label)?;
            }
            for (c, m) in months.iter().enumerate() {
                let Some(&i) = by_month.get(m) else { continue };
                let (_, p, r80, r95) = f.months[i];
                let v = match k {
                    0 => Some(p),
                    1 => r80.map(|r| r.0),
                    2 => r80.map(|r| r.1),
                    3 => r95.map(|r| r.0),
                    _ => r95.map(|r| r.1),
                };
                if let Some(v) = v.filter(|v| v.is_finite()) {
                    let fmt = match (k == 0, i < f.bridged) {
                        (true, false) => &point,
                        (false, false) => &range,
                        (true, true) => &bridged_point,
                        (false, true) => &bridged_range,
                    };
                    ws.write_number_with_format(row, 3 + c as u16, v, fmt)?;
                }
            }
            row += 1;
        }
    }
    let longest = content
        .forecasts
        .iter()
        .map(|f| f.product.chars().count())
        .max()
        .unwrap_or(8);
    ws.set_column_width(0, (longest.clamp(8, 40) + 2) as f64)?;
    let model_width = content
        .forecasts
        .iter()
        .map(|f| f.model.chars().count())
        .max()
        .unwrap_or(8);
    ws.set_column_width(1, (model_width.clamp(8, 30) + 2) as f64)?;
    ws.set_column_width(2, 10)?;
    for c in 0..months.len() {
        ws.set_column_width(3 + c as u16, 11)?;
    }
    ws.set_freeze_panes(top + 1, 3)?;
    ws.autofilter(
        top,
        0,
        row.saturating_sub(1).max(top),
        2 + months.len() as u16,
    )?;

    for t in &content.tables {
        let ws = book.add_worksheet_with_low_memory();
        ws.set_name(&t.sheet)?;
        let mut r = 0u32;
        if let Some(n) = &t.note {
            ws.write_string_with_format(0, 0, cell_text(n), &note)?;
            r = 2;
        }
        let head = r;
        for (c, (h, _)) in t.columns.iter().enumerate() {
            ws.write_string_with_format(r, c as u16, cell_text(h), &header_left)?;
        }
        r += 1;
        let mut widths: Vec<usize> = t.columns.iter().map(|(h, _)| h.chars().count()).collect();
        let formats: Vec<Option<Format>> = t
            .columns
            .iter()
            .map(|(_, kind)| {
                kind.number_format()
                    .map(|f| Format::new().set_num_format(f))
            })
            .collect();
        for values in &t.rows {
            for (c, v) in values.iter().take(t.columns.len()).enumerate() {
                let col = c as u16;
                if v.is_empty() {
                    continue;
                }
                let number = v.trim().parse::<f64>().ok().filter(|x| x.is_finite());
                match (number, &formats[c]) {
                    (Some(x), Some(f)) => {
                        ws.write_number_with_format(r, col, x, f)?;
                    }
                    _ => {
                        ws.write_string(r, col, cell_text(v))?;
                    }
                }
                widths[c] = widths[c].max(v.chars().count());
            }
            r += 1;
        }
        for (c, w) in widths.iter().enumerate() {
            ws.set_column_width(c as u16, (*w).clamp(6, 60) as f64 + 2.0)?;
        }
        ws.set_freeze_panes(head + 1, 0)?;
        if !t.columns.is_empty() {
            ws.autofilter(
                head,
                0,
                r.saturating_sub(1).max(head),
                t.columns.len() as u16 - 1,
            )?;
        }
    }

    let ws = book.add_worksheet();
    ws.set_name("Run parameters")?;
    write_parameters(ws, content, &header_left, &bold)?;
    book.save_to_buffer()
}

fn write_parameters(
    ws: &mut Worksheet,
    content: &WorkbookContent,
    header: &Format,
    bold: &Format,
) -> std::result::Result<(), XlsxError> {
    let wrap = Format::new().set_text_wrap().set_bold();
    ws.write_string_with_format(0, 0, "caution", bold)?;
    ws.write_string_with_format(0, 1, cell_text(&content.caution), &wrap)?;
    ws.write_string_with_format(2, 0, "setting", header)?;
    ws.write_string_with_format(2, 1, "value", header)?;
    for (i, (k, v)) in content.parameters.iter().enumerate() {
        ws.write_string(3 + i as u32, 0, cell_text(k))?;
        ws.write_string(3 + i as u32, 1, cell_text(v))?;
    }
    let key_width = content
        .parameters
        .iter()
        .map(|(k, _)| k.chars().count())
        .max()
        .unwrap_or(10);
    ws.set_column_width(0, (key_width.clamp(10, 50) + 2) as f64)?;
    ws.set_column_width(1, 100)?;
    ws.set_freeze_panes(3, 0)?;
    Ok(())
}
