//! Reading the input contract from a workbook sheet (`.xlsx`, `.xlsm`,
//! `.xls`, `.ods`) with calamine: the same columns, checks, rejected-row
//! log and warnings as a CSV, with places named by sheet, row and column
//! letter. Cells are typed: a number cell is a number (`--numbers` applies
//! to text cells only), a date cell is a date, and text is read as in a CSV.

use std::collections::{BTreeSet, HashMap};
use std::io::Cursor;
use std::path::Path;

use std::io::{Read, Seek};

use calamine::{Data, Reader, Sheet, SheetType, SheetVisible, Sheets};

use super::read::SheetLimits;
use super::read::{map_header, Cell, Collector, RowCells, REQUIRED};
use super::wide;
use super::{read_csv_path, Companion, Dataset, Layout, ReadOptions, SheetInfo, TableLayout};
use crate::error::{Error, Result};

/// File extensions read as workbooks (case-insensitive).
pub const WORKBOOK_EXTENSIONS: [&str; 4] = ["xlsx", "xlsm", "xls", "ods"];

/// How many non-blank rows at the top of a sheet may be titles above the
/// header row.
pub(crate) const MAX_TITLE_ROWS: usize = 20;

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
                "sheet {s} (--sheet, or sheet in the [input] section of a --config file) applies to workbooks ({}), and this file is read as a CSV: leave the sheet out",
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

/// Formulas of a sheet by 0-based (row, column), only the non-empty ones.
pub(crate) type Formulas = HashMap<(u32, u32), String>;

/// One row of a sheet as stored: only the cells that hold something, by
/// 0-based column, in column order. Memory follows the cells that exist,
/// never the sheet's bounding box (one stray cell at XFD1048576 costs one
/// cell, not a grid of 17 billion).
pub(crate) struct StoredRow {
    /// 0-based absolute row.
    pub(crate) row: u32,
    pub(crate) cells: Vec<(u32, Data)>,
}

/// One row of the sheet, with the formulas of its empty cells when known.
#[derive(Clone, Copy)]
pub(crate) struct SheetRow<'a> {
    pub(crate) cells: &'a [(u32, Data)],
    pub(crate) formulas: Option<&'a Formulas>,
    /// 0-based absolute row, and the first column of the sheet's data.
    pub(crate) row: u32,
    pub(crate) first_col: u32,
}

impl RowCells for SheetRow<'_> {
    fn width(&self) -> usize {
        self.cells
            .last()
            .map_or(0, |(c, _)| (c - self.first_col) as usize + 1)
    }
    fn cell(&self, i: usize) -> Cell<'_> {
        self.get(i)
    }
    fn is_blank(&self) -> bool {
        SheetRow::is_blank(self)
    }
}

impl<'a> SheetRow<'a> {
    /// Value `i` (0-based from the first column), borrowed from the sheet.
    pub(crate) fn get(&self, i: usize) -> Cell<'a> {
        let Some(col) = u32::try_from(i)
            .ok()
            .and_then(|i| self.first_col.checked_add(i))
        else {
            return Cell::Empty;
        };
        let value = self
            .cells
            .binary_search_by_key(&col, |(c, _)| *c)
            .ok()
            .map(|k| &self.cells[k].1);
        if value.map_or(true, is_empty) {
            if let Some(text) = self.formulas.and_then(|f| f.get(&(self.row, col))) {
                return Cell::Uncalculated(text);
            }
        }
        value.map_or(Cell::Empty, cell)
    }
}

impl SheetRow<'_> {
    /// Whether every cell that exists is blank (looking only at the cells
    /// stored, so a far-away cell costs nothing).
    fn is_blank(&self) -> bool {
        self.cells
            .iter()
            .all(|(c, _)| match self.cell((c - self.first_col) as usize) {
                Cell::Empty => true,
                Cell::Text(t) => t.trim().is_empty(),
                _ => false,
            })
    }

    /// The row as read: the shown values, joined by tabs, up to `width`
    /// columns (the header's); a cell beyond them is added as
    /// `LETTER=value`, so a stray far cell does not become thousands of tabs.
    pub(crate) fn raw(&self, width: usize) -> String {
        let mut out = String::new();
        let mut at = 0usize;
        for (c, _) in self.cells {
            let i = (c - self.first_col) as usize;
            let shown = self.cell(i).shown();
            if shown.is_empty() {
                continue;
            }
            if i < width {
                while at < i {
                    out.push('\t');
                    at += 1;
                }
                out.push_str(&shown);
            } else {
                if !out.is_empty() || at > 0 {
                    out.push('\t');
                }
                out.push_str(&column_letter(*c));
                out.push('=');
                out.push_str(&shown);
                at = width;
            }
        }
        out
    }
}

/// Reads the input contract from a sheet of a workbook given as bytes
/// (the active sheet, or the first visible one, unless `options.sheet`
/// names one). The manifest's hash is of the workbook's bytes.
pub fn read_sheet_bytes(source: &str, bytes: &[u8], options: &ReadOptions) -> Result<Dataset> {
    guarded(|| read_sheet_unguarded(source, bytes, options)).unwrap_or_else(|message| {
        Err(Error::Sheet {
            file: source.to_string(),
            sheet: None,
            row: 0,
            column: None,
            message,
        })
    })
}

thread_local! {
    /// Set while a guarded workbook read runs on this thread.
    static IN_GUARDED_READ: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

/// Runs a workbook read, turning a panic of the workbook reader into the
/// message that refuses the file: calamine panics on some damaged files (a
/// cut-short .xls, found by tests/hostile_props.rs), and such a file is
/// refused like any other. The panic's own text and backtrace are not
/// printed (the refusal says what happened); panics anywhere else still
/// reach the hook that was installed before.
fn guarded<T>(read: impl FnOnce() -> T) -> std::result::Result<T, String> {
    static QUIET_HOOK: std::sync::Once = std::sync::Once::new();
    QUIET_HOOK.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if !IN_GUARDED_READ.with(|g| g.get()) {
                previous(info);
            }
        }));
    });
    let outer = IN_GUARDED_READ.with(|g| g.replace(true));
    let result = std::panic::catch_unwind(std::panic::AssertUnwindSafe(read));
    IN_GUARDED_READ.with(|g| g.set(outer));
    result.map_err(|panic| {
        let why = panic
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| panic.downcast_ref::<String>().cloned())
            .unwrap_or_default();
        format!(
            "the workbook is damaged: the workbook reader stopped ({why}); open it in a spreadsheet program and save it again, or save the sheet as a CSV file"
        )
    })
}

/// A sheet of another workbook input (the changes file), read as the data
/// reader reads it: the unpacked size and an .xls's laid-out size checked
/// first, only the cells with something in them kept (within the cell
/// limit, so memory follows the cells, not the sheet's extent), and a
/// panic of the workbook reader turned into an error. `pick` chooses the
/// sheet from the workbook's sheet names. Returns the sheet's name and its
/// rows; an error carries the sheet's name when one was chosen.
pub(crate) fn read_sheet_cells(
    bytes: &[u8],
    limits: &SheetLimits,
    pick: &dyn Fn(&[String]) -> Option<String>,
) -> std::result::Result<(String, Vec<StoredRow>), (Option<String>, String)> {
    guarded(|| {
        let padded = super::xls::whole_sectors(bytes);
        let bytes: &[u8] = &padded;
        check_unpacked(bytes, limits).map_err(|m| (None, m))?;
        super::xls::check_xls(bytes, limits).map_err(|m| (None, m))?;
        let mut book = calamine::open_workbook_auto_from_rs(Cursor::new(bytes))
            .map_err(|e| (None, format!("cannot open the workbook: {e}")))?;
        let name = pick(&book.sheet_names())
            .ok_or_else(|| (None, "the workbook has no sheet".to_string()))?;
        let rows = read_cells(&mut book, &name, limits).map_err(|m| (Some(name.clone()), m))?;
        Ok((name, rows))
    })
    .unwrap_or_else(|message| Err((None, message)))
}

fn read_sheet_unguarded(source: &str, bytes: &[u8], options: &ReadOptions) -> Result<Dataset> {
    let file_err =
        |sheet: Option<&str>, row: u64, column: Option<String>, message: String| Error::Sheet {
            file: source.to_string(),
            sheet: sheet.map(str::to_string),
            row,
            column,
            message,
        };
    let padded = super::xls::whole_sectors(bytes);
    let bytes: &[u8] = &padded;
    let active = check_unpacked(bytes, &options.limits).map_err(|m| file_err(None, 0, None, m))?;
    super::xls::check_xls(bytes, &options.limits).map_err(|m| file_err(None, 0, None, m))?;
    let mut book = calamine::open_workbook_auto_from_rs(Cursor::new(bytes)).map_err(|e| {
        // A zip or an old-style workbook that fails to open is damaged or
        // cut short; only other bytes may be a CSV with the wrong name.
        let workbook_bytes = bytes.starts_with(b"PK") || bytes.starts_with(b"\xD0\xCF\x11\xE0");
        file_err(
            None,
            0,
            None,
            if bytes.is_empty() {
                "the file is empty (0 bytes): it was probably not saved completely or not copied; save the workbook again, or copy it again from where it came".to_string()
            } else if workbook_bytes {
                format!(
                    "the workbook is damaged or cut short ({e}); open it in a spreadsheet program and save it again, or copy it again from where it came"
                )
            } else {
                format!(
                    "cannot be read as a workbook ({e}); provisio reads .xlsx, .xlsm, .xls and .ods workbooks by their extension, and other files as CSV: if this is a CSV file, name it .csv"
                )
            },
        )
    })?;
    let sheets = book.sheet_names();
    let meta = book.sheets_metadata().to_vec();
    let listed = || {
        meta.iter()
            .map(|s| match s.visible {
                SheetVisible::Visible => format!("'{}'", s.name),
                _ => format!("'{}' (hidden)", s.name),
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let (name, why) = match &options.sheet {
        None => default_sheet(&meta, active).ok_or_else(|| {
            file_err(None, 0, None, "the workbook has no sheets".to_string())
        })?,
        Some(wanted) => sheets
            .iter()
            .find(|s| *s == wanted)
            .or_else(|| sheets.iter().find(|s| s.eq_ignore_ascii_case(wanted)))
            .cloned()
            .map(|n| (n, "named by --sheet"))
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
    let stored =
        read_cells(&mut book, &name, &options.limits).map_err(|m| sheet_err(0, None, m))?;
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
    let Some(first_col) = stored
        .iter()
        .filter_map(|r| r.cells.first().map(|(c, _)| *c))
        .min()
    else {
        return Err(empty());
    };
    let rows: Vec<SheetRow<'_>> = stored
        .iter()
        .map(|r| SheetRow {
            cells: &r.cells,
            formulas: None,
            row: r.row,
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
    let mut wide_found = None;
    let letter =
        |i: usize| column_letter(first_col.saturating_add(u32::try_from(i).unwrap_or(u32::MAX)));
    for &i in &non_blank {
        if options.layout != TableLayout::Long {
            match wide::classify(&rows[i], &letter, options.layout == TableLayout::Wide) {
                wide::Header::Wide(h) => {
                    wide_found = Some((i, h));
                    break;
                }
                wide::Header::Bad { column, message } => {
                    return Err(sheet_err(line_of(&rows[i]), column, message))
                }
                wide::Header::NotWide => {}
            }
            if options.layout == TableLayout::Wide {
                continue;
            }
        }
        let names = header_of(i);
        let refs: Vec<&str> = names.iter().map(String::as_str).collect();
        if let Ok(m) = map_header(&refs) {
            found = Some((i, m));
            break;
        }
    }
    if let Some((header_at, header)) = wide_found {
        let header_line = line_of(&rows[header_at]);
        let all_rows = &rows;
        let rows: Vec<SheetRow<'_>> = rows[header_at + 1..].to_vec();
        let formulas = read_formulas(&mut book, &name, &options.limits).filter(|f| !f.is_empty());
        let companions = load_companions(
            source,
            &crate::output::sha256_hex(bytes),
            options,
            Some(&mut book),
        )?;
        let mut warnings = Vec::new();
        let table = wide::MainTable {
            source: source.to_string(),
            sheet: Some(name.clone()),
            first_col,
        };
        let mut reader = wide::WideReader::new(table, header, companions, options, &mut warnings)?;
        let width = header_width_of(&rows);
        for r in &rows {
            let r = SheetRow {
                formulas: formulas.as_ref(),
                ..*r
            };
            reader.add_row(line_of(&r), &r, &|| r.raw(width));
        }
        let input_err = |row: u64, column: Option<&str>, message: String| {
            sheet_err(row, column.map(str::to_string), message)
        };
        let reread = |wanted: &BTreeSet<u64>| -> HashMap<u64, String> {
            rows.iter()
                .filter(|r| wanted.contains(&line_of(r)))
                .map(|r| (line_of(r), r.raw(width)))
                .collect()
        };
        let mut ds = reader.finish(
            crate::output::sha256_hex(bytes),
            warnings,
            &input_err,
            &reread,
        )?;
        let above: Vec<String> = non_blank
            .iter()
            .map(|&i| line_of(&all_rows[i]))
            .filter(|&l| l < header_line)
            .map(|l| l.to_string())
            .collect();
        if !above.is_empty() {
            ds.warnings.insert(
                0,
                format!(
                    "sheet '{name}': row(s) {} above the header row {header_line} were not read (titles?)",
                    above.join(", ")
                ),
            );
        }
        add_sheet_warnings(&mut ds, options, &name, why, sheets.len(), &listed());
        return Ok(ds);
    }
    if let Some(m) = wide::companions_need_wide(options) {
        return Err(sheet_err(0, None, m));
    }
    let (header_at, (mut columns, extra_columns)) = match found {
        Some(f) => f,
        None => {
            let names = header_of(first);
            let refs: Vec<&str> = names.iter().map(String::as_str).collect();
            let mut message = match map_header(&refs) {
                Err(_) if options.layout == TableLayout::Wide => format!(
                    "--layout wide: no header row with a 'product' column and month columns ({}) in the first {MAX_TITLE_ROWS} rows",
                    wide::MONTH_HEADERS
                ),
                Err(m) => format!("{m}{}", super::read::wide_hint(&refs)),
                Ok(_) => "no header row found".to_string(),
            };
            // A row of one cell is a title, not a header to correct.
            let filled = names.iter().filter(|n| !n.trim().is_empty()).count();
            if sheets.len() > 1 || filled < 2 {
                let this = format!(
                    "no header row in the first {MAX_TITLE_ROWS} rows of this sheet names the columns {} (long layout) or a 'product' column and month columns (wide layout); its first cells are {}",
                    REQUIRED.join(", "),
                    first_cells(&rows[first])
                );
                message = if filled >= 2 {
                    format!(
                        "{this}; if row {} is meant as the header: {message}",
                        line_of(&rows[first])
                    )
                } else {
                    this
                };
                if sheets.len() > 1 {
                    let listing = describe_sheets(&mut book, &meta, &name, options);
                    message = format!(
                        "{message}. The workbook's sheets: {listing}. Choose the sheet that holds the data with --sheet NAME"
                    );
                }
            }
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
                .any(|(_, c)| matches!(r.cell(*c), Cell::Empty | Cell::Text("")))
    });
    let formulas = if any_empty {
        read_formulas(&mut book, &name, &options.limits).filter(|f| !f.is_empty())
    } else {
        None
    };
    let header_width = rows[header_at].width();

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
        collector.add(line_of(&r), &r, &columns, || r.raw(header_width));
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
        wide: None,
    };
    let input_err = |row: u64, column: Option<&str>, message: String| {
        sheet_err(row, column.map(|c| info.column(c)), message)
    };
    let reread = |wanted: &BTreeSet<u64>| -> HashMap<u64, String> {
        rows.iter()
            .filter(|r| wanted.contains(&line_of(r)))
            .map(|r| (line_of(r), r.raw(header_width)))
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
    add_sheet_warnings(&mut ds, options, &name, why, sheets.len(), &listed());
    Ok(ds)
}

/// The warnings every sheet read may carry: which sheet was read when the
/// workbook has several, and an encoding that does not apply.
fn add_sheet_warnings(
    ds: &mut Dataset,
    options: &ReadOptions,
    name: &str,
    why: &str,
    sheets: usize,
    listed: &str,
) {
    if options.sheet.is_none() && sheets > 1 {
        ds.warnings.insert(
            0,
            format!(
                "sheet '{name}' was read ({why}); the workbook's sheets are {listed}; choose another with --sheet"
            ),
        );
    }
    if options.encoding != super::Encoding::Utf8 {
        ds.warnings.push(format!(
            "--encoding {} applies to CSV files only; a workbook stores its own text encoding",
            options.encoding.name()
        ));
    }
}

/// The first cells of a row that hold something, quoted (at most four,
/// each cut to 40 characters).
fn first_cells(row: &SheetRow<'_>) -> String {
    let cells: Vec<String> = row
        .cells
        .iter()
        .map(|(c, _)| row.get((c - row.first_col) as usize).shown())
        .filter(|t| !t.is_empty())
        .take(4)
        .map(|t| format!("\"{}\"", crate::chart::cut(&t, 40)))
        .collect();
    if cells.is_empty() {
        "empty".to_string()
    } else {
        cells.join(", ")
    }
}

/// Each sheet of the workbook with its first cells, and whether a header
/// provisio reads is on it: `'Data': "product", "month", "consumed" (a
/// header provisio reads, row 1)`.
fn describe_sheets<RS: Read + Seek>(
    book: &mut Sheets<RS>,
    meta: &[Sheet],
    current: &str,
    options: &ReadOptions,
) -> String {
    let mut out = Vec::new();
    for sheet in meta {
        let mut text = format!("'{}'", sheet.name);
        if sheet.visible != SheetVisible::Visible {
            text.push_str(" (hidden)");
        }
        if sheet.name == current {
            text.push_str(" (this one)");
        }
        match read_cells(book, &sheet.name, &options.limits) {
            Err(_) => text.push_str(": cannot be read"),
            Ok(stored) => {
                let first_col = stored
                    .iter()
                    .filter_map(|r| r.cells.first().map(|(c, _)| *c))
                    .min()
                    .unwrap_or(0);
                let rows: Vec<SheetRow<'_>> = stored
                    .iter()
                    .map(|r| SheetRow {
                        cells: &r.cells,
                        formulas: None,
                        row: r.row,
                        first_col,
                    })
                    .filter(|r| !r.is_blank())
                    .take(MAX_TITLE_ROWS)
                    .collect();
                match rows.first() {
                    None => text.push_str(": empty"),
                    Some(r) => text.push_str(&format!(": {}", first_cells(r))),
                }
                let letter = |i: usize| column_letter(first_col.saturating_add(i as u32));
                let header = rows.iter().find_map(|r| {
                    let wide = matches!(wide::classify(r, &letter, false), wide::Header::Wide(_));
                    let names: Vec<String> = (0..r.width()).map(|c| r.get(c).shown()).collect();
                    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
                    let long = map_header(&refs).is_ok();
                    (wide || long).then(|| {
                        format!(
                            " (a header provisio reads, {} layout, row {})",
                            if wide { "wide" } else { "long" },
                            r.row as u64 + 1
                        )
                    })
                });
                if let Some(h) = header {
                    text.push_str(&h);
                }
            }
        }
        out.push(text);
    }
    out.join("; ")
}

/// Widest row, for the rows' text in the rejected-row log.
fn header_width_of(rows: &[SheetRow<'_>]) -> usize {
    rows.iter().map(|r| r.width()).max().unwrap_or(0)
}

type Book<'b> = Sheets<Cursor<&'b [u8]>>;

/// Loads the tables of stockout days and reporting rates the options name
/// (wide layout): sheets of the input workbook (`main`), or other files.
pub(crate) fn load_companions(
    source: &str,
    input_sha256: &str,
    options: &ReadOptions,
    mut main: Option<&mut Book<'_>>,
) -> Result<wide::Companions> {
    let mut load = |c: &Option<Companion>, what: &str| -> Result<Option<wide::Grid>> {
        let Some(c) = c else {
            return Ok(None);
        };
        match &c.file {
            Some(path) if is_workbook(path) => {
                let file = path.display().to_string();
                let bytes = std::fs::read(path).map_err(|source| Error::Io {
                    path: path.clone(),
                    action: "cannot read the file",
                    source,
                })?;
                let err = |m: String| Error::Sheet {
                    file: file.clone(),
                    sheet: None,
                    row: 0,
                    column: None,
                    message: m,
                };
                let active = check_unpacked(&bytes, &options.limits).map_err(err)?;
                let mut book = calamine::open_workbook_auto_from_rs(Cursor::new(&bytes[..]))
                    .map_err(|e| err(format!("cannot be read as a workbook ({e})")))?;
                let name = match &c.sheet {
                    Some(s) => find_sheet(&book, s).ok_or_else(|| {
                        err(format!(
                            "the workbook has no sheet named '{s}' ({what}); its sheets are {}",
                            book.sheet_names().join(", ")
                        ))
                    })?,
                    None => default_sheet(book.sheets_metadata(), active)
                        .map(|(n, _)| n)
                        .ok_or_else(|| err("the workbook has no sheets".to_string()))?,
                };
                let mut grid = sheet_grid(&mut book, &file, &name, options)?;
                grid.sha256 = crate::output::sha256_hex(&bytes);
                Ok(Some(grid))
            }
            Some(path) => wide::companion_csv(c, path, options).map(Some),
            None => {
                let sheet = c.sheet.clone().unwrap_or_default();
                match main.as_mut() {
                    Some(book) => {
                        let name = find_sheet(book, &sheet).ok_or_else(|| Error::Sheet {
                            file: source.to_string(),
                            sheet: None,
                            row: 0,
                            column: None,
                            message: format!(
                                "the workbook has no sheet named '{sheet}' ({what}); its sheets are {}",
                                book.sheet_names().join(", ")
                            ),
                        })?;
                        let mut grid = sheet_grid(book, source, &name, options)?;
                        grid.sha256 = input_sha256.to_string();
                        Ok(Some(grid))
                    }
                    None => Err(Error::Input {
                        file: source.to_string(),
                        line: 0,
                        column: None,
                        message: format!(
                            "{what}: the sheet '{sheet}' is named, and the input is a CSV file, not a workbook; give the file that holds the table with {}",
                            if what == "stockout days" { "--stockout-file" } else { "--rate-file" }
                        ),
                    }),
                }
            }
        }
    };
    Ok(wide::Companions {
        stockout: load(&options.stockout, "stockout days")?,
        rate: load(&options.rate, "reporting rates")?,
    })
}

/// A sheet's name as the workbook spells it: exact, or ignoring case.
fn find_sheet<RS: Read + Seek>(book: &Sheets<RS>, wanted: &str) -> Option<String> {
    let names = book.sheet_names();
    names
        .iter()
        .find(|s| *s == wanted)
        .or_else(|| names.iter().find(|s| s.eq_ignore_ascii_case(wanted)))
        .cloned()
}

/// A sheet read whole as a grid (a table of stockout days or rates).
fn sheet_grid<RS: Read + Seek>(
    book: &mut Sheets<RS>,
    file: &str,
    name: &str,
    options: &ReadOptions,
) -> Result<wide::Grid> {
    let rows = read_cells(book, name, &options.limits).map_err(|m| Error::Sheet {
        file: file.to_string(),
        sheet: Some(name.to_string()),
        row: 0,
        column: None,
        message: m,
    })?;
    let first_col = rows
        .iter()
        .filter_map(|r| r.cells.first().map(|(c, _)| *c))
        .min()
        .unwrap_or(0);
    let formulas = read_formulas(book, name, &options.limits).filter(|f| !f.is_empty());
    Ok(wide::Grid {
        name: format!("{file}, sheet '{name}'"),
        in_sheet: true,
        first_col,
        rows,
        formulas,
        sha256: String::new(),
    })
}

/// The sheet read when none is named: the active sheet when it is a
/// visible worksheet, else the first visible worksheet, else the first.
fn default_sheet(meta: &[Sheet], active: Option<usize>) -> Option<(String, &'static str)> {
    let shown = |i: &usize| {
        meta.get(*i)
            .is_some_and(|s| s.visible == SheetVisible::Visible && s.typ == SheetType::WorkSheet)
    };
    let (i, why) = active
        .filter(shown)
        .map(|i| (i, "the active sheet"))
        .or_else(|| {
            (0..meta.len())
                .find(shown)
                .map(|i| (i, "the first visible sheet"))
        })
        .or_else(|| (!meta.is_empty()).then_some((0, "the first sheet; no sheet is visible")))?;
    Some((meta[i].name.clone(), why))
}

/// Unpacks every part of a zipped workbook (.xlsx, .xlsm, .ods) once,
/// counting bytes without keeping them, and refuses it past the limit:
/// a few megabytes of repetitive XML can unpack to gigabytes. Returns the
/// active sheet's position from `xl/workbook.xml` when there is one. A file
/// that is not a readable zip is left to calamine to name.
fn check_unpacked(
    bytes: &[u8],
    limits: &SheetLimits,
) -> std::result::Result<Option<usize>, String> {
    // Not only files that start as a zip: the zip reader (and calamine
    // with it) finds an archive after other bytes too.
    let Ok(mut zip) = zip::ZipArchive::new(Cursor::new(bytes)) else {
        return Ok(None);
    };
    let limit = limits.max_unpacked_bytes;
    let too_large = |name: &str| {
        format!(
            "the workbook unpacks to more than {} MiB (stopped in its part {name}); a workbook this large is more often damaged or built to exhaust memory than real data. If it is genuine, raise the limit with the environment variable {}=MIB, or save the sheet as a CSV file",
            limit >> 20,
            SheetLimits::UNPACKED_VAR
        )
    };
    // A binary workbook (.xlsb), whatever its name: calamine would open it,
    // but its .xlsb reader stops with a panic on many damaged files (found
    // by the read_workbook fuzz target), so it is refused by name.
    if zip.by_name("xl/workbook.bin").is_ok() && zip.by_name("xl/workbook.xml").is_err() {
        return Err(
            "the file is a binary workbook (.xlsb), which provisio does not read; it reads .xlsx, .xlsm, .xls and .ods workbooks and CSV files: open it in the spreadsheet program and save it as an .xlsx workbook or as CSV".to_string(),
        );
    }
    let mut total = 0u64;
    let mut active = None;
    let is_ods = zip.by_name("content.xml").is_ok();
    for i in 0..zip.len() {
        let Ok(part) = zip.by_index(i) else {
            continue;
        };
        let name = part.name().to_string();
        let mut counted = Counted {
            inner: part,
            total: &mut total,
            limit,
        };
        if is_ods && name == "content.xml" {
            let grid = ods_grid(&mut counted);
            if *counted.total > limit {
                return Err(too_large(&name));
            }
            let grid = grid.map_err(|e| format!(
                "the workbook is damaged: its part {name} cannot be read ({e}); open it in a spreadsheet program and save it again, or save the sheet as a CSV file"
            ))?;
            if grid > limits.max_cells as u64 {
                return Err(format!(
                    "the workbook's sheets span {grid} cells once their repeated rows and columns are laid out (a cell far from the data, or a repeat count in the millions); provisio stops at {} cells. If it is genuine, raise the limit with the environment variable {}=N, or save the sheet as a CSV file",
                    limits.max_cells,
                    SheetLimits::CELLS_VAR
                ));
            }
            continue;
        }
        let keep = name == "xl/workbook.xml";
        let mut kept = Vec::new();
        let mut buf = [0u8; 1 << 14];
        let start = *counted.total;
        loop {
            match counted.read(&mut buf) {
                Ok(0) | Err(_) => break,
                Ok(n) if keep && kept.len() < 1 << 20 => kept.extend_from_slice(&buf[..n]),
                Ok(_) => {}
            }
        }
        if *counted.total > limit {
            return Err(too_large(&name));
        }
        // calamine keeps every shared string in memory, not streamed.
        let strings_limit = limit / SHARED_STRINGS_SHARE;
        if name == "xl/sharedStrings.xml" && *counted.total - start > strings_limit {
            return Err(format!(
                "the workbook's shared strings (its part {name}) unpack to more than {} KiB, one {SHARED_STRINGS_SHARE}th of the workbook limit, and are all kept in memory; if the workbook is genuine, raise the limit with the environment variable {}=MIB, or save the sheet as a CSV file",
                strings_limit >> 10,
                SheetLimits::UNPACKED_VAR
            ));
        }
        if keep {
            active = active_tab(&kept);
        }
    }
    Ok(active)
}

/// The share of the unpacked limit the shared strings of an .xlsx may
/// take: calamine holds them all in memory (32 MiB by default).
const SHARED_STRINGS_SHARE: u64 = 16;

/// A reader that adds what it reads to a running total and fails once the
/// total passes the limit.
struct Counted<'t, R> {
    inner: R,
    total: &'t mut u64,
    limit: u64,
}

impl<R: Read> Read for Counted<'_, R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        if *self.total > self.limit {
            return Err(std::io::Error::other("unpack limit reached"));
        }
        let n = self.inner.read(buf)?;
        *self.total += n as u64;
        Ok(n)
    }
}

/// How many cells calamine lays out for the sheets of an OpenDocument
/// `content.xml`: it expands repeated cells and rows into a grid from the
/// first to the last row holding something, as wide as the widest such
/// row, and keeps each row's cells up to its last value on the way. An
/// upper estimate, read as leniently as calamine reads it (end tags not
/// matched to their start); a part that cannot be read even so (not XML,
/// cut short, a checksum that fails) is an error, as a count that stopped
/// there would let calamine lay out what follows (found by fuzzing).
fn ods_grid(part: impl Read) -> std::result::Result<u64, String> {
    use quick_xml::events::Event;
    let repeat = |e: &quick_xml::events::BytesStart<'_>, key: &[u8]| -> u64 {
        e.try_get_attribute(key)
            .ok()
            .flatten()
            .and_then(|a| std::str::from_utf8(&a.value).ok()?.trim().parse().ok())
            .unwrap_or(1)
    };
    let mut xml = quick_xml::Reader::from_reader(std::io::BufReader::new(part));
    let config = xml.config_mut();
    config.check_end_names = false;
    config.check_comments = false;
    let mut buf = Vec::new();
    let mut total = 0u64;
    // Per sheet: rows laid out so far, first and end of the rows holding
    // something, widest such row; per row: its repeat, column reached,
    // empty cells waiting for a value, last column holding something.
    let (mut row_at, mut first, mut end, mut widest) = (0u64, None::<u64>, 0u64, 0u64);
    let (mut rows_repeated, mut col, mut waiting, mut last) = (1u64, 0u64, 0u64, None::<u64>);
    loop {
        buf.clear();
        let (e, open) = match xml.read_event_into(&mut buf) {
            Ok(Event::Start(e)) => (e, true),
            Ok(Event::Empty(e)) => (e, false),
            Ok(Event::End(e)) => {
                match e.name().as_ref() {
                    b"table:table-row" => {
                        if let Some(l) = last {
                            first.get_or_insert(row_at);
                            end = row_at.saturating_add(rows_repeated);
                            widest = widest.max(l + 1);
                        }
                        row_at = row_at.saturating_add(rows_repeated);
                    }
                    b"table:table" => {
                        if let Some(f) = first {
                            total = total.saturating_add((end - f).saturating_mul(widest));
                        }
                        (row_at, first, end, widest) = (0, None, 0, 0);
                    }
                    _ => {}
                }
                continue;
            }
            Ok(Event::Eof) => break,
            Err(e) => return Err(e.to_string()),
            Ok(_) => continue,
        };
        match e.name().as_ref() {
            b"table:table-row" => {
                rows_repeated = repeat(&e, b"table:number-rows-repeated").max(1);
                (col, waiting, last) = (0, 0, None);
                if !open {
                    row_at = row_at.saturating_add(rows_repeated);
                }
            }
            b"table:table-cell" | b"table:covered-table-cell" => {
                let n = repeat(&e, b"table:number-columns-repeated").max(1);
                let holds = open
                    || e.try_get_attribute(b"office:value-type")
                        .ok()
                        .flatten()
                        .is_some()
                    || e.try_get_attribute(b"table:formula")
                        .ok()
                        .flatten()
                        .is_some();
                if holds {
                    total = total.saturating_add(waiting.saturating_add(n));
                    waiting = 0;
                    last = Some(col.saturating_add(n - 1));
                } else {
                    waiting = waiting.saturating_add(n);
                }
                col = col.saturating_add(n);
            }
            _ => {}
        }
    }
    Ok(total)
}

/// The `activeTab` of the workbook view in `xl/workbook.xml` (absent: 0).
fn active_tab(xml: &[u8]) -> Option<usize> {
    let key = b"activeTab=\"";
    let at = xml.windows(key.len()).position(|w| w == key)? + key.len();
    let digits: Vec<u8> = xml[at..]
        .iter()
        .take_while(|b| b.is_ascii_digit())
        .copied()
        .collect();
    std::str::from_utf8(&digits).ok()?.parse().ok()
}

/// Bytes of cell text that count as one cell against the limit (a cell
/// kept costs about 40 bytes before its text).
const TEXT_BYTES_PER_CELL: usize = 16;

/// The message when a sheet holds more cells than the limit.
fn too_many_cells(limits: &SheetLimits) -> String {
    format!(
        "the sheet holds more than {} cells with something in them (or more than {} MB of text); provisio stops there, as a sheet this large is more often damaged or built to exhaust memory than real data. If it is genuine, raise the limit with the environment variable {}=N, or save the sheet as a CSV file",
        limits.max_cells,
        limits.max_cells.saturating_mul(TEXT_BYTES_PER_CELL) / 1_000_000,
        SheetLimits::CELLS_VAR
    )
}

/// Reads the cells of a sheet that hold something, row by row. An .xlsx or
/// .xlsb sheet is streamed cell by cell; .xls and .ods go through
/// calamine's range (their laid-out size was checked first).
fn read_cells<RS: Read + Seek>(
    book: &mut Sheets<RS>,
    name: &str,
    limits: &SheetLimits,
) -> std::result::Result<Vec<StoredRow>, String> {
    let mut rows: Vec<StoredRow> = Vec::new();
    let mut kept = 0usize;
    let mut text = 0usize;
    let mut keep = |rows: &mut Vec<StoredRow>, (r, c): (u32, u32), d: Data| {
        if is_empty(&d) {
            return Ok(());
        }
        kept += 1;
        if let Data::String(t) = &d {
            text += t.len();
        }
        // Text counts too: a cell of long distinct text costs many cells.
        if kept > limits.max_cells || text / TEXT_BYTES_PER_CELL > limits.max_cells {
            return Err(too_many_cells(limits));
        }
        match rows.last_mut() {
            Some(last) if last.row == r => last.cells.push((c, d)),
            _ => rows.push(StoredRow {
                row: r,
                cells: vec![(c, d)],
            }),
        }
        Ok(())
    };
    match book {
        Sheets::Xlsx(x) => {
            let mut cells = x
                .worksheet_cells_reader(name)
                .map_err(|e| format!("cannot read the sheet: {e}"))?;
            while let Some(c) = cells
                .next_cell()
                .map_err(|e| format!("cannot read the sheet: {e}"))?
            {
                let at = c.get_position();
                keep(&mut rows, at, Data::from(c.get_value().clone()))?;
            }
        }
        // A binary workbook (.xlsb) is refused before it is opened (see
        // check_unpacked); should one get through, its cells are streamed
        // too, as calamine's range would lay out the whole bounding box.
        Sheets::Xlsb(x) => {
            let mut cells = x
                .worksheet_cells_reader(name)
                .map_err(|e| format!("cannot read the sheet: {e}"))?;
            while let Some(c) = cells
                .next_cell()
                .map_err(|e| format!("cannot read the sheet: {e}"))?
            {
                let at = c.get_position();
                keep(&mut rows, at, Data::from(c.get_value().clone()))?;
            }
        }
        other => {
            let range = other
                .worksheet_range(name)
                .map_err(|e| format!("cannot read the sheet: {e}"))?;
            let (r0, c0) = range.start().unwrap_or((0, 0));
            for (r, c, d) in range.used_cells() {
                keep(&mut rows, (r0 + r as u32, c0 + c as u32), d.clone())?;
            }
        }
    }
    // Rows and cells are in order in every file seen; a file that lists
    // them otherwise is put in order, a later cell at the same place winning.
    if !rows.windows(2).all(|w| w[0].row < w[1].row) {
        rows.sort_by_key(|r| r.row);
        let mut merged: Vec<StoredRow> = Vec::with_capacity(rows.len());
        for r in rows {
            match merged.last_mut() {
                Some(last) if last.row == r.row => last.cells.extend(r.cells),
                _ => merged.push(r),
            }
        }
        rows = merged;
    }
    for r in &mut rows {
        if !r.cells.windows(2).all(|w| w[0].0 < w[1].0) {
            r.cells.reverse();
            r.cells.sort_by_key(|(c, _)| *c);
            r.cells.dedup_by_key(|(c, _)| *c);
        }
        r.cells.shrink_to_fit();
    }
    rows.shrink_to_fit();
    Ok(rows)
}

/// The non-empty formulas of a sheet, streamed for .xlsx and .xlsb; at
/// most the cell limit of them are kept.
fn read_formulas<RS: Read + Seek>(
    book: &mut Sheets<RS>,
    name: &str,
    limits: &SheetLimits,
) -> Option<Formulas> {
    let mut out = Formulas::new();
    match book {
        Sheets::Xlsx(x) => {
            let mut cells = x.worksheet_cells_reader(name).ok()?;
            while let Ok(Some(c)) = cells.next_formula() {
                if !c.get_value().is_empty() && out.len() < limits.max_cells {
                    out.insert(c.get_position(), c.get_value().clone());
                }
            }
        }
        Sheets::Xlsb(x) => {
            let mut cells = x.worksheet_cells_reader(name).ok()?;
            while let Ok(Some(c)) = cells.next_formula() {
                if !c.get_value().is_empty() && out.len() < limits.max_cells {
                    out.insert(c.get_position(), c.get_value().clone());
                }
            }
        }
        other => {
            let range = other.worksheet_formula(name).ok()?;
            let (r0, c0) = range.start()?;
            for (r, c, f) in range.used_cells() {
                if !f.is_empty() && out.len() < limits.max_cells {
                    out.insert((r0 + r as u32, c0 + c as u32), f.clone());
                }
            }
        }
    }
    Some(out)
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
