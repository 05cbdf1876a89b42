//! Reading a changes file: a CSV, or a sheet of a workbook (`.xlsx`,
//! `.xlsm`, `.xls`, `.ods`; the sheet named `changes`, else the first).
//!
//! Columns (header names, any order, case ignored): `product`, `kind`,
//! `first_month` are required; `last_month`, `value`, `start_value`,
//! `other_product`, `factor`, `note` are optional. Months are `YYYY-MM`
//! (a day, or a date cell, is accepted and ignored). Errors name the file,
//! the line (or sheet row) and the column.

use std::collections::HashMap;
use std::path::Path;

use calamine::Data;

use super::{Change, Kind, KINDS};
use crate::calendar::YearMonth;
use crate::data::{parse_number, NumberFormat};
use crate::error::{Error, Result};

/// Every column a changes file may have.
pub const COLUMNS: [&str; 9] = [
    "product",
    "kind",
    "first_month",
    "last_month",
    "value",
    "start_value",
    "other_product",
    "factor",
    "note",
];

/// A changes file as read.
#[derive(Debug, Clone, PartialEq)]
pub struct ChangesFile {
    /// The path as given.
    pub file: String,
    /// The sheet read, for a workbook.
    pub sheet: Option<String>,
    /// SHA-256 of the file's bytes (hex).
    pub sha256: String,
    /// The rows, in file order.
    pub changes: Vec<Change>,
    /// Problems that did not stop the reading (empty notes).
    pub warnings: Vec<String>,
}

/// One table row as text cells, with its 1-based number.
struct Row {
    number: u64,
    cells: Vec<String>,
    /// Cells a workbook stored as numbers (read as they are, whatever
    /// `--numbers` says); empty for a CSV file.
    typed: Vec<bool>,
}

/// Reads a changes file from disk, its numbers written as `numbers` says
/// (the forecast's `--numbers`, as for the data; a workbook's number
/// cells are numbers whatever it says).
pub fn read_changes(path: &Path, numbers: NumberFormat) -> Result<ChangesFile> {
    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        action: "cannot read the changes file",
        source,
    })?;
    read_changes_bytes(&path.display().to_string(), &bytes, numbers)
}

/// Reads a changes file given as bytes; `file` names it (its extension
/// picks workbook or CSV).
pub fn read_changes_bytes(file: &str, bytes: &[u8], numbers: NumberFormat) -> Result<ChangesFile> {
    use sha2::Digest;
    let sha256 = sha2::Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    let (sheet, (header_row, header), rows) = if crate::data::is_workbook(Path::new(file)) {
        let (s, h, r) = sheet_rows(file, bytes)?;
        (Some(s), h, r)
    } else {
        let (h, r) = csv_rows(file, bytes)?;
        (None, h, r)
    };
    let place = |n: u64| match &sheet {
        Some(_) => format!("row {n}"),
        None => format!("line {n}"),
    };
    let at = |row: u64, col: Option<usize>, message: String| -> Error {
        match &sheet {
            Some(s) => Error::Sheet {
                file: file.to_string(),
                sheet: Some(s.clone()),
                row,
                column: col.map(|c| {
                    format!(
                        "column {} ({})",
                        crate::data::column_letter(c as u32),
                        header.get(c).map(String::as_str).unwrap_or("")
                    )
                }),
                message,
            },
            None => Error::Input {
                file: file.to_string(),
                line: row,
                column: col.and_then(|c| header.get(c).cloned()),
                message,
            },
        }
    };
    let field = |c: usize| match &sheet {
        Some(_) => format!("column {}", crate::data::column_letter(c as u32)),
        None => format!("field {}", c + 1),
    };
    for (i, h) in header.iter().enumerate() {
        if h.is_empty() {
            continue;
        }
        if let Some(j) = header[..i].iter().position(|x| x == h) {
            return Err(at(
                header_row,
                Some(i),
                format!(
                    "column '{h}' appears twice ({} and {}); keep one, so no value is read from the wrong one",
                    field(j),
                    field(i)
                ),
            ));
        }
        if !COLUMNS.contains(&h.as_str()) {
            let hint = crate::config::nearest(h, COLUMNS)
                .map(|n| format!("did you mean '{n}'? "))
                .unwrap_or_default();
            return Err(at(
                header_row,
                Some(i),
                format!(
                    "unknown column '{h}'; {hint}valid columns: {}",
                    COLUMNS.join(", ")
                ),
            ));
        }
    }
    let col = |name: &str| header.iter().position(|h| h == name);
    for req in ["product", "kind", "first_month"] {
        if col(req).is_none() {
            return Err(at(
                header_row,
                None,
                format!(
                    "missing column '{req}'; a changes file needs product, kind, first_month and may have {}",
                    COLUMNS[3..].join(", ")
                ),
            ));
        }
    }
    // A value under no column name would be dropped unseen.
    for r in &rows {
        let stray =
            r.cells.iter().enumerate().find(|(i, c)| {
                !c.trim().is_empty() && header.get(*i).map_or(true, String::is_empty)
            });
        if let Some((i, c)) = stray {
            let named = header.iter().filter(|h| !h.is_empty()).count();
            return Err(at(
                r.number,
                None,
                format!(
                    "'{}' in {} has no column name above it (the header names {named} columns): a value in the wrong column, or a delimiter inside a value that is not quoted (a note with a comma must be in double quotes); move it under its column",
                    c.trim(),
                    field(i)
                ),
            ));
        }
    }
    let mut changes = Vec::new();
    let mut warnings = Vec::new();
    // A row typed twice is applied twice (+10% twice is +21%): both are
    // kept, since two equal changes can be meant, and the repeat is named.
    let mut seen: HashMap<Vec<String>, u64> = HashMap::new();
    for r in &rows {
        let key: Vec<String> = r.cells.iter().map(|c| c.trim().to_string()).collect();
        if let Some(first) = seen.get(&key) {
            warnings.push(format!(
                "{file}: {} repeats {} exactly; both are applied, one after the other (a percentage change then compounds): delete one if it was entered twice",
                place(r.number),
                place(*first)
            ));
        } else {
            seen.insert(key, r.number);
        }
    }
    for r in &rows {
        let get = |name: &str| -> (Option<usize>, &str) {
            match col(name) {
                Some(i) => (Some(i), r.cells.get(i).map(|s| s.trim()).unwrap_or("")),
                None => (None, ""),
            }
        };
        let n = r.number;
        let (pc, product) = get("product");
        let product = crate::output::csv_text_read(product).to_string();
        if product.is_empty() {
            return Err(at(
                n,
                pc,
                "the product is empty; name a product as in the data".into(),
            ));
        }
        let (kc, k) = get("kind");
        let kind = Kind::parse(k).ok_or_else(|| {
            let hint = crate::config::nearest(&k.to_lowercase(), KINDS)
                .map(|n| format!("did you mean '{n}'? "))
                .unwrap_or_default();
            at(
                n,
                kc,
                format!(
                    "'{k}' is not a kind of change; {hint}valid: {}",
                    KINDS.join(", ")
                ),
            )
        })?;
        let month = |name: &str, required: bool| -> Result<Option<YearMonth>> {
            let (c, v) = get(name);
            if v.is_empty() {
                if required {
                    return Err(at(
                        n,
                        c,
                        format!("{name} is empty; give a month as YYYY-MM"),
                    ));
                }
                return Ok(None);
            }
            YearMonth::parse(v)
                .map(Some)
                .map_err(|e| at(n, c, format!("'{v}' is not a month ({e}); give YYYY-MM")))
        };
        let first =
            month("first_month", true)?.ok_or_else(|| at(n, None, "no first month".into()))?;
        let last = month("last_month", false)?;
        let number = |name: &str, limit: f64| -> Result<Option<f64>> {
            let (c, v) = get(name);
            if v.is_empty() {
                return Ok(None);
            }
            let typed = c.is_some_and(|i| r.typed.get(i).copied().unwrap_or(false));
            let format = if typed { NumberFormat::Plain } else { numbers };
            // As the data: "1,5" could be 1.5 or 15, so it is read only
            // as `--numbers` says, and refused otherwise.
            let x = match parse_number(v, format) {
                Ok(Some(x)) => x,
                Ok(None) | Err(_) if v.ends_with('%') => {
                    return Err(at(n, c, format!("'{v}': write the percentage without the % sign, e.g. {}", v.trim_end_matches('%').trim())));
                }
                Ok(None) => return Ok(None),
                Err(why) => return Err(at(n, c, format!("{why} (a quantity in base units a month, a percentage without the % sign, or a factor)"))),
            };
            if x.abs() > limit {
                return Err(at(
                    n,
                    c,
                    format!("{v} is beyond what a change can be; give a number between -{limit:e} and {limit:e} (a quantity in base units a month, a percentage, or a factor)"),
                ));
            }
            Ok(Some(x))
        };
        // The largest quantity the data readers take (10^15 units a month);
        // a factor of units of one product per unit of another up to 10^6.
        let value = number("value", 1e15)?;
        let start_value = number("start_value", 1e15)?;
        let factor = number("factor", 1e6)?;
        let (oc, other) = get("other_product");
        let other = (!other.is_empty()).then(|| crate::output::csv_text_read(other).to_string());
        let note = get("note").1.to_string();
        let cidx = |name: &str| col(name);
        let bad = |name: &str, m: String| at(n, cidx(name), format!("{} row: {m}", kind.name()));
        if let Some(l) = last {
            if l < first {
                return Err(bad(
                    "last_month",
                    format!("last month {l} is before the first month {first}"),
                ));
            }
        }
        let need = |name: &str, v: Option<f64>, what: &str| -> Result<f64> {
            v.ok_or_else(|| bad(name, format!("{name} is empty; give {what}")))
        };
        let none = |name: &str, given: bool, why: &str| -> Result<()> {
            if given {
                Err(bad(name, format!("{name} must be empty: {why}")))
            } else {
                Ok(())
            }
        };
        match kind {
            Kind::Percent => {
                let v = need("value", value, "the percentage change, e.g. 20 or -15")?;
                if v < -100.0 {
                    return Err(bad(
                        "value",
                        format!("{v}% would take more than everything; give -100 or more (phase-out takes a product to zero)"),
                    ));
                }
                if let Some(w) = looks_like_fraction(v, true) {
                    warnings.push(format!(
                        "{file}: {}: value {v} is read as {v:+}%; {w}",
                        place(n)
                    ));
                }
            }
            Kind::Quantity => {
                need("value", value, "units per month, negative to remove")?;
            }
            Kind::Target => {
                let v = need("value", value, "the monthly level to reach")?;
                if v < 0.0 {
                    return Err(bad(
                        "value",
                        format!("a level of {v} is below zero; give 0 or more"),
                    ));
                }
            }
            Kind::PhaseOut => {
                none(
                    "value",
                    value.is_some(),
                    "a phase-out goes to zero by last_month (at once when empty)",
                )?;
            }
            Kind::Switch => {
                if other.is_none() {
                    return Err(at(
                        n,
                        oc,
                        "switch row: other_product is empty; name the product consumption moves to"
                            .into(),
                    ));
                }
                if let Some(v) = value {
                    if !(v > 0.0 && v <= 100.0) {
                        return Err(bad("value", format!("{v} is not a share; give the percent of the product's consumption that moves, above 0 and at most 100")));
                    }
                    if let Some(w) = looks_like_fraction(v, false) {
                        warnings.push(format!("{file}: {}: value {v} is read as {v}% of the product's consumption moving; {w}", place(n)));
                    }
                }
                if let Some(f) = factor {
                    if f <= 0.0 {
                        return Err(bad("factor", format!("{f}: give the units of the new product per unit of the old, above 0")));
                    }
                }
            }
            Kind::NewFromAnalogue => {
                if other.is_none() {
                    return Err(at(
                        n,
                        oc,
                        "new-from-analogue row: other_product is empty; name the analogue product"
                            .into(),
                    ));
                }
                let f = need(
                    "factor",
                    factor,
                    "the factor on the analogue's forecast, e.g. 0.5",
                )?;
                if f <= 0.0 {
                    return Err(bad("factor", format!("{f}: give a factor above 0")));
                }
                none(
                    "value",
                    value.is_some(),
                    "the new product follows its analogue × factor",
                )?;
                none(
                    "last_month",
                    last.is_some(),
                    "the new product follows its analogue from first_month on",
                )?;
            }
            Kind::NewFromLevel => {
                let s = need(
                    "start_value",
                    start_value,
                    "the monthly level in the first month",
                )?;
                if s < 0.0 {
                    return Err(bad("start_value", format!("{s} is below zero")));
                }
                if let Some(v) = value {
                    if v < 0.0 {
                        return Err(bad("value", format!("{v} is below zero")));
                    }
                    if !last.is_some_and(|l| l > first) {
                        return Err(bad("last_month", "a ramp-up to value needs a last_month after first_month (the month value is reached)".into()));
                    }
                }
            }
        }
        if !matches!(kind, Kind::Switch | Kind::NewFromAnalogue) && other.is_some() {
            return Err(bad(
                "other_product",
                "other_product is used only by switch and new-from-analogue rows".into(),
            ));
        }
        if !matches!(kind, Kind::Switch | Kind::NewFromAnalogue) && factor.is_some() {
            return Err(bad(
                "factor",
                "factor is used only by switch and new-from-analogue rows".into(),
            ));
        }
        if kind != Kind::NewFromLevel && start_value.is_some() {
            return Err(bad(
                "start_value",
                "start_value is used only by new-from-level rows".into(),
            ));
        }
        if note.is_empty() {
            warnings.push(format!(
                "{file}: {}: the note is empty; say why and on whose decision, so the trace keeps it",
                place(n)
            ));
        }
        changes.push(Change {
            place: place(n),
            row: n,
            product,
            kind,
            first,
            last,
            value,
            start_value,
            other,
            factor,
            note,
        });
    }
    if changes.is_empty() {
        return Err(at(0, None, "no change rows under the header".into()));
    }
    Ok(ChangesFile {
        file: file.to_string(),
        sheet,
        sha256,
        changes,
        warnings,
    })
}

/// What to check when a percentage looks written as a fraction (`0.25`
/// for 25%) or, for a percentage change (`factor_too`), as a factor
/// (`1.2` for +20%). Whole numbers, and anything else, read as meant.
fn looks_like_fraction(v: f64, factor_too: bool) -> Option<String> {
    let shown = |x: f64| format!("{}", (x * 1e6).round() / 1e6);
    if v.fract() == 0.0 {
        None
    } else if v.abs() < 1.0 {
        let p = shown(v * 100.0);
        Some(format!(
            "values are percentages: if {p}% was meant, write {p}"
        ))
    } else if factor_too && v > 1.0 && v < 2.0 {
        let p = shown((v - 1.0) * 100.0);
        Some(format!(
            "values are percentages: if a factor of {v} (+{p}%) was meant, write {p}"
        ))
    } else {
        None
    }
}

fn header_names(cells: &[String]) -> Vec<String> {
    cells
        .iter()
        .map(|h| {
            h.trim()
                .trim_start_matches('\u{feff}')
                .to_lowercase()
                .replace(' ', "_")
        })
        .collect()
}

/// A header: its row number and its column names.
type Header = (u64, Vec<String>);

/// Rows of a CSV file with their line numbers.
type Records = Vec<(u64, csv::StringRecord)>;

fn csv_rows(file: &str, bytes: &[u8]) -> Result<(Header, Vec<Row>)> {
    let lf = crate::data::lf_line_ends(bytes);
    let bytes: &[u8] = &lf;
    let text = std::str::from_utf8(bytes).map_err(|e| Error::Input {
        file: file.to_string(),
        line: 0,
        column: None,
        message: format!(
            "not UTF-8 text (bad byte at offset {}); save the changes file as UTF-8 CSV",
            e.valid_up_to()
        ),
    })?;
    // The separator the first line that is not a comment uses most, as
    // the other side files are read: spreadsheets set to a decimal comma
    // save CSV with semicolons.
    let first = text
        .lines()
        .find(|l| !l.trim().is_empty() && !l.trim_start().starts_with('#'))
        .unwrap_or("");
    let delimiter = [b',', b';', b'\t']
        .into_iter()
        .max_by_key(|d| first.bytes().filter(|b| b == d).count())
        .unwrap_or(b',');
    let mut r = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .flexible(true)
        .has_headers(false)
        .from_reader(text.as_bytes());
    let mut header: Option<(u64, Vec<String>)> = None;
    let mut rows = Vec::new();
    for rec in r.records() {
        let rec = rec.map_err(|e| Error::Input {
            file: file.to_string(),
            line: e.position().map(|p| p.line()).unwrap_or(0),
            column: None,
            message: format!("cannot read the row: {e}"),
        })?;
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        if let Some(message) = crate::data::runaway_quote(line, header.is_none(), rec.iter()) {
            return Err(Error::Input {
                file: file.to_string(),
                line,
                column: None,
                message,
            });
        }
        let cells: Vec<String> = rec.iter().map(str::to_string).collect();
        if cells.iter().all(|c| c.trim().is_empty()) || cells[0].trim_start().starts_with('#') {
            continue;
        }
        match header {
            None => header = Some((line, header_names(&cells))),
            Some(_) => rows.push(Row {
                number: line,
                cells,
                typed: Vec::new(),
            }),
        }
    }
    let header = header.ok_or_else(|| Error::Input {
        file: file.to_string(),
        line: 0,
        column: None,
        message: "the changes file is empty; it needs a header (product, kind, first_month, ...) and one row per change".into(),
    })?;
    Ok((header, rows))
}

fn sheet_cell(d: &Data) -> std::result::Result<String, String> {
    use chrono::Datelike;
    Ok(match d {
        Data::Empty => String::new(),
        Data::String(s) => s.clone(),
        Data::Int(i) => i.to_string(),
        // Every digit kept (a factor of 1/12 must not become 0.0833).
        Data::Float(x) => format!("{x}"),
        Data::Bool(b) => b.to_string(),
        Data::Error(e) => return Err(format!("the cell holds an error ({e:?})")),
        Data::DateTime(dt) => match dt.as_datetime() {
            Some(t) => format!("{:04}-{:02}-{:02}", t.year(), t.month(), t.day()),
            None => return Err("the cell holds an invalid date".into()),
        },
        Data::DateTimeIso(s) | Data::DurationIso(s) => s.clone(),
    })
}

fn sheet_rows(file: &str, bytes: &[u8]) -> Result<(String, Header, Vec<Row>)> {
    let err = |sheet: Option<&str>, row: u64, message: String| Error::Sheet {
        file: file.to_string(),
        sheet: sheet.map(str::to_string),
        row,
        column: None,
        message,
    };
    // Read as the data reader reads a sheet: sizes checked first, only the
    // cells with something in them kept (a stray far cell costs one cell).
    let pick = |names: &[String]| {
        names
            .iter()
            .find(|n| n.trim().eq_ignore_ascii_case("changes"))
            .or_else(|| names.first())
            .cloned()
    };
    let (name, stored) =
        crate::data::read_sheet_cells(bytes, &crate::data::SheetLimits::default(), &pick)
            .map_err(|(sheet, m)| err(sheet.as_deref(), 0, m))?;
    let mut header: Option<(u64, Vec<String>)> = None;
    let mut rows = Vec::new();
    for row in stored {
        let number = u64::from(row.row) + 1;
        let width = row.cells.last().map_or(0, |(c, _)| *c as usize + 1);
        let mut cells = vec![String::new(); width];
        let mut typed = vec![false; width];
        for (col, d) in &row.cells {
            typed[*col as usize] = matches!(d, Data::Int(_) | Data::Float(_));
            cells[*col as usize] = sheet_cell(d).map_err(|m| Error::Sheet {
                file: file.to_string(),
                sheet: Some(name.clone()),
                row: number,
                column: Some(format!("column {}", crate::data::column_letter(*col))),
                message: format!("{m}; give a plain value"),
            })?;
        }
        if cells.iter().all(|c| c.trim().is_empty()) {
            continue;
        }
        match header {
            None => header = Some((number, header_names(&cells))),
            Some(_) => rows.push(Row {
                number,
                cells,
                typed,
            }),
        }
    }
    let header = header.ok_or_else(|| err(Some(&name), 0, "the sheet is empty; it needs a header (product, kind, first_month, ...) and one row per change".into()))?;
    Ok((name, header, rows))
}

/// One line of a past run's `changes_applied.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct PastTrace {
    /// Product.
    pub product: String,
    /// Month.
    pub month: YearMonth,
    /// Row of the changes file.
    pub row: u64,
    /// Kind, as written.
    pub kind: String,
    /// Forecast before the row.
    pub before: f64,
    /// Forecast after the row.
    pub after: f64,
    /// The row's note.
    pub note: String,
}

/// What a past forecast directory keeps of its changes: the adjusted
/// forecast per (product, month) and the trace. `None` when the run had no
/// changes file.
pub type PastChanges = (
    std::collections::HashMap<(String, YearMonth), f64>,
    Vec<PastTrace>,
);

fn table(path: &Path) -> Result<Option<(Vec<String>, Records)>> {
    if !path.exists() {
        return Ok(None);
    }
    let e = |line: u64, m: String| Error::Input {
        file: path.display().to_string(),
        line,
        column: None,
        message: m,
    };
    let mut r = csv::ReaderBuilder::new()
        .flexible(true)
        .from_path(path)
        .map_err(|x| e(0, format!("cannot read: {x}")))?;
    let header: Vec<String> = r
        .headers()
        .map_err(|x| e(1, format!("cannot read the header: {x}")))?
        .iter()
        .map(|h| h.trim().to_string())
        .collect();
    let mut rows = Vec::new();
    for rec in r.records() {
        let rec = rec.map_err(|x| {
            e(
                x.position().map(|p| p.line()).unwrap_or(0),
                format!("cannot read the row: {x}"),
            )
        })?;
        rows.push((rec.position().map(|p| p.line()).unwrap_or(0), rec));
    }
    Ok(Some((header, rows)))
}

/// Reads the adjusted forecast and the trace of a past forecast directory.
pub fn read_past_changes(dir: &Path) -> Result<Option<PastChanges>> {
    let fpath = dir.join("forecast.csv");
    let Some((h, rows)) = table(&fpath)? else {
        return Ok(None);
    };
    let col = |h: &[String], n: &str| h.iter().position(|x| x == n);
    let Some(ac) = col(&h, "adjusted") else {
        return Ok(None);
    };
    let file = fpath.display().to_string();
    let bad = |file: &str, line: u64, c: &str, v: &str, what: &str| Error::Input {
        file: file.to_string(),
        line,
        column: Some(c.to_string()),
        message: format!("'{v}' is not {what}"),
    };
    let (Some(pc), Some(mc)) = (col(&h, "product"), col(&h, "month")) else {
        return Err(Error::Input {
            file,
            line: 1,
            column: None,
            message: "missing column product or month".into(),
        });
    };
    let mut adjusted = std::collections::HashMap::new();
    for (line, rec) in &rows {
        let p = crate::output::csv_text_read(rec.get(pc).unwrap_or("")).to_string();
        let m = rec.get(mc).unwrap_or("");
        let month = YearMonth::parse(m).map_err(|_| bad(&file, *line, "month", m, "a month"))?;
        let v = rec.get(ac).unwrap_or("");
        if v.is_empty() {
            continue;
        }
        let x: f64 = v
            .parse()
            .map_err(|_| bad(&file, *line, "adjusted", v, "a number"))?;
        adjusted.insert((p, month), x);
    }
    let tpath = dir.join("changes_applied.csv");
    let tfile = tpath.display().to_string();
    let mut trace = Vec::new();
    if let Some((h, rows)) = table(&tpath)? {
        let need = [
            "product",
            "month",
            "change_row",
            "kind",
            "before_change",
            "after_change",
            "note",
        ];
        let mut idx = Vec::new();
        for n in need {
            idx.push(col(&h, n).ok_or_else(|| Error::Input {
                file: tfile.clone(),
                line: 1,
                column: Some(n.to_string()),
                message: "missing column".into(),
            })?);
        }
        for (line, rec) in &rows {
            let g = |i: usize| rec.get(idx[i]).unwrap_or("");
            let num = |i: usize| -> Result<f64> {
                g(i).parse::<f64>()
                    .map_err(|_| bad(&tfile, *line, need[i], g(i), "a number"))
            };
            trace.push(PastTrace {
                product: crate::output::csv_text_read(g(0)).to_string(),
                month: YearMonth::parse(g(1))
                    .map_err(|_| bad(&tfile, *line, "month", g(1), "a month"))?,
                row: g(2)
                    .parse()
                    .map_err(|_| bad(&tfile, *line, "change_row", g(2), "a row number"))?,
                kind: g(3).to_string(),
                before: num(4)?,
                after: num(5)?,
                note: crate::output::csv_text_read(g(6)).to_string(),
            });
        }
    }
    Ok(Some((adjusted, trace)))
}
