//! Reading the input contract from a workbook sheet (`.xlsx`, `.xlsm`,
//! `.xls`, `.ods`) with calamine: the same columns, checks, rejected-row
//! log and warnings as a CSV, with places named by sheet, row and column
//! letter. Cells are typed: a number cell is a number (`--numbers` applies
//! to text cells only), a date cell is a date, and text is read as in a CSV.

use std::collections::{BTreeSet, HashMap};
use std::io::Cursor;
use std::path::Path;

use calamine::{Data, Range, Reader};

use super::read::{map_header, Cell, Collector, RowCells, REQUIRED};
use super::{read_csv_path, Dataset, Layout, ReadOptions, SheetInfo};
use crate::error::{Error, Result};

/// File extensions read as workbooks (case-insensitive).
pub const WORKBOOK_EXTENSIONS: [&str; 4] = ["xlsx", "xlsm", "xls", "ods"];

/// How many non-blank rows at the top of a sheet may be titles above the
/// header row.
const MAX_TITLE_ROWS: usize = 20;

/// Whether the file's extension marks it as a workbook.
pub fn is_workbook(path: &Path) -> bool {
    path.extension().and_then(|e| e.to_str()).is_some_and(|e| {
        WORKBOOK_EXTENSIONS
            .iter()
            .any(|w| w.eq_ignore_ascii_case(e))
    })
}

/// Reads an input file from disk: a workbook sheet when the extension says
/// so, otherwise the long CSV.
pub fn read_path(path: &Path, options: &ReadOptions) -> Result<Dataset> {
    if is_workbook(path) {
        let bytes = std::fs::read(path).map_err(|source| Error::Io {
            path: path.to_path_buf(),
            action: "cannot read input",
            source,
        })?;
        read_sheet_bytes(&path.display().to_string(), &bytes, options)
    } else {
        refuse_sheet_for_csv(&path.display().to_string(), options)?;
        read_csv_path(path, options)
    }
}

/// Reads input given as bytes; `source` names the file, and its extension
/// picks workbook or CSV as in [`read_path`].
pub fn read_bytes(source: &str, bytes: &[u8], options: &ReadOptions) -> Result<Dataset> {
    if is_workbook(Path::new(source)) {
        read_sheet_bytes(source, bytes, options)
    } else {
        refuse_sheet_for_csv(source, options)?;
        super::read_csv_bytes(source, bytes, options)
    }
}

fn refuse_sheet_for_csv(source: &str, options: &ReadOptions) -> Result<()> {
    match &options.sheet {
        Some(s) => Err(Error::Input {
            file: source.to_string(),
            line: 0,
            column: None,
            message: format!(
                "--sheet {s} applies to workbooks ({}), and this file is read as a CSV",
                WORKBOOK_EXTENSIONS.map(|e| format!(".{e}")).join(", ")
            ),
        }),
        None => Ok(()),
    }
}

/// The spreadsheet letter of a 0-based column: 0 → A, 25 → Z, 26 → AA.
pub fn column_letter(col: u32) -> String {
    let mut n = col as u64 + 1;
    let mut out = Vec::new();
    while n > 0 {
        let r = ((n - 1) % 26) as u8;
        out.push((b'A' + r) as char);
        n = (n - 1) / 26;
    }
    out.iter().rev().collect()
}

fn error_text(e: &calamine::CellErrorType) -> &'static str {
    use calamine::CellErrorType as E;
    match e {
        E::Div0 => "#DIV/0!",
        E::NA => "#N/A",
        E::Name => "#NAME?",
        E::Null => "#NULL!",
        E::Num => "#NUM!",
        E::Ref => "#REF!",
        E::Value => "#VALUE!",
        E::GettingData => "#DATA!",
    }
}

/// An empty cell, or an empty text (what some programs save for a formula
/// they did not calculate).
fn is_empty(d: &Data) -> bool {
    match d {
        Data::Empty => true,
        Data::String(s) => s.is_empty(),
        _ => false,
    }
}

/// A cell as the contract reads it.
fn cell(d: &Data) -> Cell<'_> {
    use chrono::Datelike;
    match d {
        Data::Empty => Cell::Empty,
        Data::String(s) => Cell::Text(s),
        Data::Int(i) => Cell::Number(*i as f64),
        Data::Float(x) => Cell::Number(*x),
        Data::Bool(b) => Cell::Bool(*b),
        Data::Error(e) => Cell::Error(error_text(e)),
        Data::DateTime(dt) if dt.is_datetime() => match dt.as_datetime() {
            Some(t) => Cell::Date(t.year(), t.month(), t.day()),
            None => Cell::Error("an invalid date"),
        },
        Data::DateTime(dt) => Cell::Number(dt.as_f64()),
        // OpenDocument stores dates as ISO 8601 text: 2024-03-01 or
        // 2024-03-01T00:00:00.
        Data::DateTimeIso(s) => {
            let day = s.get(..10).and_then(|d| {
                let y = d.get(..4)?.parse().ok()?;
                let m = d.get(5..7)?.parse().ok()?;
                let dd = d.get(8..10)?.parse().ok()?;
                (d.as_bytes().get(4) == Some(&b'-')).then_some((y, m, dd))
            });
            match day {
                Some((y, m, dd)) => Cell::Date(y, m, dd),
                None => Cell::Text(s),
            }
        }
        Data::DurationIso(s) => Cell::Text(s),
    }
}

/// One row of the sheet, with the formulas of its empty cells when known.
struct SheetRow<'a> {
    cells: &'a [Data],
    formulas: Option<&'a Range<String>>,
    /// 0-based absolute row and first column of the range.
    row: u32,
    first_col: u32,
}

impl RowCells for SheetRow<'_> {
    fn width(&self) -> usize {
        self.cells.len()
    }
    fn cell(&self, i: usize) -> Cell<'_> {
        let Some(d) = self.cells.get(i) else {
            return Cell::Empty;
        };
        if let (true, Some(f)) = (is_empty(d), self.formulas) {
            if let Some(text) = f.get_value((self.row, self.first_col + i as u32)) {
                if !text.is_empty() {
                    return Cell::Uncalculated(text);
                }
            }
        }
        cell(d)
    }
}

impl SheetRow<'_> {
    fn is_blank(&self) -> bool {
        (0..self.width()).all(|i| match self.cell(i) {
            Cell::Empty => true,
            Cell::Text(t) => t.trim().is_empty(),
            _ => false,
        })
    }

    /// The row as read: the shown values, joined by tabs.
    fn raw(&self) -> String {
        let shown: Vec<String> = (0..self.width()).map(|i| self.cell(i).shown()).collect();
        let end = shown
            .iter()
            .rposition(|s| !s.is_empty())
            .map_or(0, |p| p + 1);
        shown[..end].join("\t")
    }
}

/// Reads the input contract from a sheet of a workbook given as bytes
/// (the first sheet unless `options.sheet` names one). The manifest's hash
/// is of the workbook's bytes.
pub fn read_sheet_bytes(source: &str, bytes: &[u8], options: &ReadOptions) -> Result<Dataset> {
    let file_err =
        |sheet: Option<&str>, row: u64, column: Option<String>, message: String| Error::Sheet {
            file: source.to_string(),
            sheet: sheet.map(str::to_string),
            row,
            column,
            message,
        };
    let mut book = calamine::open_workbook_auto_from_rs(Cursor::new(bytes)).map_err(|e| {
        file_err(
            None,
            0,
            None,
            format!(
                "cannot be read as a workbook ({e}); provisio reads .xlsx, .xlsm, .xls and .ods workbooks by their extension, and other files as CSV: if this is a CSV file, name it .csv"
            ),
        )
    })?;
    let sheets = book.sheet_names();
    let listed = || {
        sheets
            .iter()
            .map(|s| format!("'{s}'"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let name = match &options.sheet {
        None => sheets.first().cloned().ok_or_else(|| {
            file_err(None, 0, None, "the workbook has no sheets".to_string())
        })?,
        Some(wanted) => sheets
            .iter()
            .find(|s| *s == wanted)
            .or_else(|| sheets.iter().find(|s| s.eq_ignore_ascii_case(wanted)))
            .cloned()
            .ok_or_else(|| {
                file_err(
                    None,
                    0,
                    None,
                    format!(
                        "the workbook has no sheet named '{wanted}'; its sheets are {}; give one of them with --sheet",
                        listed()
                    ),
                )
            })?,
    };
    let sheet_err = |row: u64, column: Option<String>, message: String| {
        file_err(Some(&name), row, column, message)
    };
    let range = book
        .worksheet_range(&name)
        .map_err(|e| sheet_err(0, None, format!("cannot read the sheet: {e}")))?;
    let empty = || {
        sheet_err(
            0,
            None,
            format!(
                "the sheet is empty; expected a header row naming at least the columns {}{}",
                REQUIRED.join(", "),
                if sheets.len() > 1 {
                    format!(
                        " (the workbook's sheets are {}; choose one with --sheet)",
                        listed()
                    )
                } else {
                    String::new()
                }
            ),
        )
    };
    let Some((first_row, first_col)) = range.start() else {
        return Err(empty());
    };
    let rows: Vec<SheetRow<'_>> = range
        .rows()
        .enumerate()
        .map(|(i, cells)| SheetRow {
            cells,
            formulas: None,
            row: first_row + i as u32,
            first_col,
        })
        .collect();
    let line_of = |r: &SheetRow<'_>| r.row as u64 + 1;

    // The header is the first non-blank row that names the required
    // columns; title rows above it are skipped, with a warning.
    let non_blank: Vec<usize> = rows
        .iter()
        .enumerate()
        .filter(|(_, r)| !r.is_blank())
        .map(|(i, _)| i)
        .take(MAX_TITLE_ROWS)
        .collect();
    let Some(&first) = non_blank.first() else {
        return Err(empty());
    };
    let header_of = |i: usize| -> Vec<String> {
        (0..rows[i].width())
            .map(|c| rows[i].cell(c).shown())
            .collect()
    };
    let mut found = None;
    for &i in &non_blank {
        let names = header_of(i);
        let refs: Vec<&str> = names.iter().map(String::as_str).collect();
        if let Ok(m) = map_header(&refs) {
            found = Some((i, m));
            break;
        }
    }
    let (header_at, (mut columns, extra_columns)) = match found {
        Some(f) => f,
        None => {
            let names = header_of(first);
            let refs: Vec<&str> = names.iter().map(String::as_str).collect();
            let message = match map_header(&refs) {
                Err(m) => m,
                Ok(_) => "no header row found".to_string(),
            };
            return Err(sheet_err(line_of(&rows[first]), None, message));
        }
    };
    columns.in_sheet = true;
    let skipped: Vec<u64> = non_blank
        .iter()
        .take_while(|&&i| i < header_at)
        .map(|&i| line_of(&rows[i]))
        .collect();

    // Formulas are read only when a contract cell is empty: it may be a
    // formula that was never calculated, which must not pass as "not reported".
    let contract = columns.present();
    let any_empty = rows[header_at + 1..].iter().any(|r| {
        !r.is_blank()
            && contract
                .iter()
                .any(|(_, c)| r.cells.get(*c).map_or(true, is_empty))
    });
    let formulas = if any_empty {
        book.worksheet_formula(&name)
            .ok()
            .filter(|f| f.start().is_some())
    } else {
        None
    };

    let letters: Vec<(String, String)> = contract
        .iter()
        .map(|(n, c)| (n.to_string(), column_letter(first_col + *c as u32)))
        .collect();
    let info = SheetInfo {
        name: name.clone(),
        columns: letters,
    };
    let mut collector = Collector::new(options, "row");
    for r in &rows[header_at + 1..] {
        let r = SheetRow {
            formulas: formulas.as_ref(),
            ..*r
        };
        if r.is_blank() {
            continue;
        }
        collector.add(line_of(&r), &r, &columns, || r.raw());
    }
    let layout = Layout {
        delimiter: '\t',
        had_bom: false,
        has_site: columns.site.is_some(),
        has_stockout_days: columns.stockout_days.is_some(),
        has_reporting_rate: columns.reporting_rate.is_some(),
        reporting_rate_as_percent: false,
        extra_columns,
        sheet: Some(info.clone()),
    };
    let input_err = |row: u64, column: Option<&str>, message: String| {
        sheet_err(row, column.map(|c| info.column(c)), message)
    };
    let reread = |wanted: &BTreeSet<u64>| -> HashMap<u64, String> {
        rows.iter()
            .filter(|r| wanted.contains(&line_of(r)))
            .map(|r| (line_of(r), r.raw()))
            .collect()
    };
    let mut ds = collector.finish(
        source,
        crate::output::sha256_hex(bytes),
        layout,
        &input_err,
        &reread,
    )?;
    if !skipped.is_empty() {
        ds.warnings.insert(
            0,
            format!(
                "sheet '{name}': row(s) {} above the header row {} were not read (titles?)",
                skipped
                    .iter()
                    .map(u64::to_string)
                    .collect::<Vec<_>>()
                    .join(", "),
                line_of(&rows[header_at])
            ),
        );
    }
    if options.encoding != super::Encoding::Utf8 {
        ds.warnings.push(format!(
            "--encoding {} applies to CSV files only; a workbook stores its own text encoding",
            options.encoding.name()
        ));
    }
    Ok(ds)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_letters() {
        // Spreadsheet column naming (common practice): A..Z, AA..AZ, BA...
        assert_eq!(column_letter(0), "A");
        assert_eq!(column_letter(25), "Z");
        assert_eq!(column_letter(26), "AA");
        assert_eq!(column_letter(51), "AZ");
        assert_eq!(column_letter(52), "BA");
        assert_eq!(column_letter(701), "ZZ");
        assert_eq!(column_letter(702), "AAA");
    }

    #[test]
    fn extensions_pick_the_reader() {
        assert!(is_workbook(Path::new("a/Data.XLSX")));
        assert!(is_workbook(Path::new("b.ods")));
        assert!(is_workbook(Path::new("b.xls")));
        assert!(!is_workbook(Path::new("b.csv")));
        assert!(!is_workbook(Path::new("xlsx")));
    }
}
