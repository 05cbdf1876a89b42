//! Reading the wide (pivot) layout: one row per product (or product and
//! site), one column per month, as consumption data usually reaches an
//! analyst. Each value goes through the same checks as a row of the long
//! layout ([`Collector`]), so the messages, the rejected-row log and the
//! row accounting are the same; a "row" of the accounting is one value (a
//! product, site and month with something in its cell), and every message
//! names the value's line and column (`line 7, column F (Mar 2024)`).
//!
//! Stockout days and reporting rates come as tables of the same shape (a
//! sheet of the workbook or a separate file, see [`Companion`]), matched
//! by product (and site) and month.

use std::collections::{BTreeSet, HashMap};
use std::path::Path;

use calamine::Data;

use super::read::{normalise_name, Cell, Collector, Columns, InputErr, Reread, RowCells};
use super::sheet::{SheetRow, StoredRow};
use super::text::{Hashing, Records, TextError};
use super::values::{looks_like_month, parse_month_header};
use super::{
    column_letter, Companion, Dataset, Layout, ReadOptions, SheetInfo, SheetLimits, TableLayout,
    WideInfo,
};
use crate::calendar::YearMonth;
use crate::error::{Error, Result};

/// The month forms a month column's header may take, for messages.
pub(crate) const MONTH_HEADERS: &str =
    "2024-03, 2024-03-01, Mar 2024, March 2024, Mar-24, 03/2024, 2024/03, 202403, or a date cell";

/// Product names that mark a totals row of a pivot table, not a product,
/// written without spaces or punctuation ("Sub-total", "TOTAL:" and
/// "Grand total" are `subtotal`, `total` and `grandtotal`); see
/// [`is_total_name`].
const TOTAL_NAMES: [&str; 16] = [
    "total",
    "totals",
    "grandtotal",
    "subtotal",
    "subtotals",
    "sum",
    "sumtotal",
    "totalsum",
    "allproducts",
    "totalgeneral",
    "generaltotal",
    "totalgénéral",
    "overalltotal",
    "totaloverall",
    "alltotal",
    "soustotal",
];

/// Whether a product name marks a totals row (common practice in
/// spreadsheet exports: pivot tables and hand-made sheets add a row of
/// totals under the products). Case, spaces and punctuation are ignored.
pub(crate) fn is_total_name(name: &str) -> bool {
    TOTAL_NAMES.contains(&total_key(name).as_str())
}

/// Site names that mark the sum of the other sites' rows, besides
/// [`TOTAL_NAMES`], written as [`total_key`] writes them.
const ALL_SITES_NAMES: [&str; 6] = [
    "allsites",
    "allfacilities",
    "allhealthfacilities",
    "alldistricts",
    "allregions",
    "sitestotal",
];

/// Whether a site name marks a subtotal of the product's sites (common
/// practice in pivot exports: a `Total` or `All sites` line under each
/// product's sites), which counted as a site would double the product.
pub(crate) fn is_total_site(name: &str) -> bool {
    let key = total_key(name);
    TOTAL_NAMES.contains(&key.as_str()) || ALL_SITES_NAMES.contains(&key.as_str())
}

fn total_key(name: &str) -> String {
    name.chars()
        .filter(|c| c.is_alphanumeric())
        .flat_map(char::to_lowercase)
        .collect()
}

/// One month column of a wide header.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct MonthColumn {
    /// Position in the row (0-based, from the table's first column).
    pub(crate) col: usize,
    /// The month.
    pub(crate) month: YearMonth,
    /// The header as written (`Mar 2024`).
    pub(crate) header: String,
}

/// A header row of the wide layout.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct WideHeader {
    pub(crate) product: usize,
    pub(crate) site: Option<usize>,
    /// In column order.
    pub(crate) months: Vec<MonthColumn>,
    /// Other named columns (kept in the file, not read).
    pub(crate) extra: Vec<String>,
    /// Positions whose header is empty.
    pub(crate) unnamed: Vec<usize>,
    /// Width of the header row.
    pub(crate) width: usize,
}

impl WideHeader {
    /// Whether position `i` holds values that are not read (a column with
    /// no header, or past the header's last column).
    fn unnamed(&self, i: usize) -> bool {
        i >= self.width || self.unnamed.binary_search(&i).is_ok()
    }
}

/// What a header row is.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Header {
    /// Not a header of the wide layout (the long layout's, or a title).
    NotWide,
    /// A header of the wide layout.
    Wide(WideHeader),
    /// Meant as a wide header, but it cannot be read: the column (`column F
    /// (Febuary 2024)`), when one is at fault, and what is wrong.
    Bad {
        column: Option<String>,
        message: String,
    },
}

/// The date a header holds when it is a whole number in the range of
/// spreadsheet date serial numbers for 1990-2100 (days since 1899-12-30,
/// the 1900 date system of spreadsheets; common practice: a date header
/// saved to CSV without its format, or a workbook header cell formatted as
/// a number, shows such a number).
fn serial_date(text: &str) -> Option<chrono::NaiveDate> {
    let n: i64 = text.trim().parse().ok()?;
    if !(32_874..=73_050).contains(&n) {
        return None;
    }
    chrono::NaiveDate::from_ymd_opt(1899, 12, 30)?.checked_add_days(chrono::Days::new(n as u64))
}

/// Reads a row as a header of the wide layout. `letter` names a position
/// as a spreadsheet column. With `forced` (`--layout wide`), any row with
/// a `product` column or a month column is taken as meant to be the
/// header; otherwise the row must have a `product` column, no `month`
/// column, and more month columns (at least two) than other named columns.
pub(crate) fn classify(
    row: &dyn RowCells,
    letter: &dyn Fn(usize) -> String,
    forced: bool,
) -> Header {
    let width = row.width();
    let order = date_order(row);
    let mut product = Vec::new();
    let mut site = Vec::new();
    let mut has_month_column = false;
    let mut months: Vec<MonthColumn> = Vec::new();
    let mut extra = Vec::new();
    let mut unreadable = Vec::new();
    let mut unnamed = Vec::new();
    let mut bad_date = None;
    for i in 0..width {
        let cell = row.cell(i);
        let shown = cell.shown();
        let month = match cell {
            Cell::Date(y, m, _) => match YearMonth::new(y, m) {
                Some(ym) => Some(ym),
                None => {
                    bad_date.get_or_insert((i, shown.clone()));
                    None
                }
            },
            Cell::Text(t) => parse_month_header(t).or_else(|| {
                let (a, b, y) = dated(t)?;
                let month = match order? {
                    DateOrder::DayFirst => b,
                    DateOrder::MonthFirst => a,
                };
                YearMonth::new(y, month)
            }),
            Cell::Number(_) => parse_month_header(&shown),
            _ => None,
        };
        if let Some(month) = month {
            // A date cell is named by its month (its display format is not
            // known): `2024-03`, not `2024-03-01`.
            let header = match cell {
                Cell::Date(..) => month.to_string(),
                _ => shown,
            };
            months.push(MonthColumn {
                col: i,
                month,
                header,
            });
            continue;
        }
        match normalise_name(&shown).as_str() {
            "" => unnamed.push(i),
            "product" => product.push(i),
            "site" => site.push(i),
            "month" => has_month_column = true,
            _ => {
                if looks_like_month(&shown) || serial_date(&shown).is_some() {
                    unreadable.push((i, shown.clone()));
                }
                extra.push(shown);
            }
        }
    }
    // Headers meant as months count as months here, so that a table of
    // misspelt or ambiguous months is refused with the reason, not read as
    // a long table with missing columns.
    let monthly = months.len() + unreadable.len();
    let named_others = extra.len() - unreadable.len();
    let wide = if forced {
        !product.is_empty() || monthly > 0
    } else {
        !has_month_column
            && monthly >= 2
            && monthly > named_others
            && (product.len() + site.len() + extra.len()) > 0
    };
    if !wide {
        return Header::NotWide;
    }
    let at = |i: usize, h: &str| format!("column {} ({h})", letter(i));
    let bad = |column: Option<String>, message: String| Header::Bad { column, message };
    if has_month_column {
        return bad(
            None,
            if months.is_empty() {
                "--layout wide: the header has a 'month' column, so the table is in the long layout (one row per product and month); read it with --layout long or auto".to_string()
            } else {
                "the header has a 'month' column, as in the long layout (one row per product and month), besides month columns; use one layout: drop the month columns, or the 'month' column".to_string()
            },
        );
    }
    if let Some((i, shown)) = bad_date {
        return bad(
            Some(at(i, &shown)),
            "the header's date is outside the years 1900-2100; correct the year".to_string(),
        );
    }
    let [p] = product.as_slice() else {
        return bad(
            None,
            if product.is_empty() {
                format!(
                    "the header has {} month columns (the wide layout: one row per product, one column per month) but no column named 'product'; name the column holding the product names 'product' (a 'site' column is optional)",
                    months.len()
                )
            } else {
                format!(
                    "the header has more than one 'product' column (columns {}); keep one",
                    product
                        .iter()
                        .map(|&i| letter(i))
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            },
        );
    };
    if site.len() > 1 {
        return bad(
            None,
            format!(
                "the header has more than one 'site' column (columns {}); keep one",
                site.iter()
                    .map(|&i| letter(i))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        );
    }
    if let Some((i, shown, day)) = unreadable
        .iter()
        .find_map(|(i, s)| serial_date(s).map(|d| (i, s, d)))
    {
        return bad(
            Some(at(*i, shown)),
            format!(
                "the header {shown} looks like a date stored as a spreadsheet serial number ({shown} is {day}); format the header cells as dates in the spreadsheet, or write the months as {}, before saving",
                day.format("%Y-%m")
            ),
        );
    }
    if let Some((i, shown)) = unreadable.first() {
        if dated(shown).is_some() {
            return bad(
                Some(at(*i, shown)),
                format!(
                    "the month headers are dates such as \"{shown}\" whose order of day and month cannot be told from the header (each order gives valid dates); write the months as 2024-03 or Mar 2024, or as date cells in a workbook"
                ),
            );
        }
        return bad(
            Some(at(*i, shown)),
            format!(
                "the header \"{shown}\" looks like a month but cannot be read as one; month columns are headed like {MONTH_HEADERS}; correct it (a column that is not a month needs a header that names no month)"
            ),
        );
    }
    if months.is_empty() {
        return bad(
            None,
            format!(
                "the header has a 'product' column but no month column; month columns are headed like {MONTH_HEADERS}"
            ),
        );
    }
    let mut seen: HashMap<YearMonth, usize> = HashMap::new();
    for (k, m) in months.iter().enumerate() {
        if let Some(&first) = seen.get(&m.month) {
            let a = &months[first];
            return bad(
                Some(at(m.col, &m.header)),
                format!(
                    "the month {} has two columns, {} and {}; each month must have one column: remove or correct one",
                    m.month,
                    at(a.col, &a.header),
                    at(m.col, &m.header)
                ),
            );
        }
        seen.insert(m.month, k);
    }
    Header::Wide(WideHeader {
        product: *p,
        site: site.first().copied(),
        months,
        extra,
        unnamed,
        width,
    })
}

/// The order of day and month in a header's dates (`01/03/2024`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum DateOrder {
    /// `01/03/2024` is 1 March.
    DayFirst,
    /// `03/01/2024` is 1 March.
    MonthFirst,
}

/// The two leading numbers and the year of a date written `a/b/yyyy`
/// (also with `-` or `.`).
fn dated(t: &str) -> Option<(u32, u32, i32)> {
    let parts: Vec<&str> = t.trim().split(['/', '-', '.']).collect();
    let [a, b, y] = parts.as_slice() else {
        return None;
    };
    let digits = |s: &str, n: std::ops::RangeInclusive<usize>| {
        n.contains(&s.len()) && s.bytes().all(|c| c.is_ascii_digit())
    };
    if !(digits(a, 1..=2) && digits(b, 1..=2) && digits(y, 4..=4)) {
        return None;
    }
    Some((a.parse().ok()?, b.parse().ok()?, y.parse().ok()?))
}

/// The order of day and month in a header of dates such as `01/03/2024`
/// (a spreadsheet's date cells saved as CSV), told from the header as a
/// whole: a number above 12 is a day; otherwise, the first of the month,
/// the day stays the same from column to column while the month changes.
/// `None` when it cannot be told (one such date, or both numbers vary).
fn date_order(row: &dyn RowCells) -> Option<DateOrder> {
    let dates: Vec<(u32, u32)> = (0..row.width())
        .filter_map(|i| match row.cell(i) {
            Cell::Text(t) => dated(t).map(|(a, b, _)| (a, b)),
            _ => None,
        })
        .collect();
    let day_first = dates.iter().any(|&(a, _)| a > 12);
    let month_first = dates.iter().any(|&(_, b)| b > 12);
    match (day_first, month_first) {
        (true, false) => return Some(DateOrder::DayFirst),
        (false, true) => return Some(DateOrder::MonthFirst),
        (true, true) => return None,
        (false, false) => {}
    }
    let (&(a0, b0), rest) = dates.split_first()?;
    let a_same = rest.iter().all(|&(a, _)| a == a0);
    let b_same = rest.iter().all(|&(_, b)| b == b0);
    match (a_same, b_same) {
        (true, false) => Some(DateOrder::DayFirst),
        (false, true) => Some(DateOrder::MonthFirst),
        _ => None,
    }
}

/// A table of stockout days or reporting rates in the wide layout, kept
/// whole: its rows are looked up by product (and site).
pub(crate) struct Grid {
    /// Where it is, for messages: `stockouts.csv`, or `data.xlsx, sheet
    /// 'Stockouts'`.
    pub(crate) name: String,
    /// Whether it is a workbook sheet (rows are "row", not "line").
    pub(crate) in_sheet: bool,
    pub(crate) first_col: u32,
    pub(crate) rows: Vec<StoredRow>,
    pub(crate) formulas: Option<super::sheet::Formulas>,
    /// SHA-256 of the file's bytes, for the run manifest.
    pub(crate) sha256: String,
}

impl Grid {
    fn row(&self, i: usize) -> SheetRow<'_> {
        let r = &self.rows[i];
        SheetRow {
            cells: &r.cells,
            formulas: self.formulas.as_ref(),
            row: r.row,
            first_col: self.first_col,
        }
    }

    fn line(&self, i: usize) -> u64 {
        self.rows[i].row as u64 + 1
    }

    fn letter(&self, col: usize) -> String {
        column_letter(self.first_col.saturating_add(col as u32))
    }

    /// `stockouts.csv: line 4, column F (Mar 2024)`.
    fn place(&self, line: u64, col: usize, header: &str) -> String {
        format!(
            "{}: {} {line}, column {} ({header})",
            self.name,
            if self.in_sheet { "row" } else { "line" },
            self.letter(col)
        )
    }
}

/// Reads a CSV file whole as a grid (a companion table), within the cell
/// limit.
pub(crate) fn csv_grid(path: &Path, options: &ReadOptions) -> Result<Grid> {
    let name = path.display().to_string();
    let io = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        action: "cannot read the file",
        source,
    };
    let file = std::fs::File::open(path).map_err(io)?;
    let text_err = |e: TextError| match e {
        TextError::Io(e) => io(e),
        TextError::Input { line, message } => Error::Input {
            file: name.clone(),
            line,
            column: None,
            message,
        },
    };
    let mut hashing = Hashing::new(file);
    let mut records = Records::open(&mut hashing, options.encoding).map_err(text_err)?;
    let mut rows = Vec::new();
    let mut kept = 0usize;
    while let Some(line) = records.next_record().map_err(text_err)? {
        let fields = records.fields();
        let cells: Vec<(u32, Data)> = fields
            .iter()
            .enumerate()
            .filter(|(_, f)| !f.trim().is_empty())
            .map(|(i, f)| (i as u32, Data::String(f.to_string())))
            .collect();
        if cells.is_empty() {
            continue;
        }
        kept += cells.len();
        if kept > options.limits.max_cells {
            return Err(Error::Input {
                file: name,
                line,
                column: None,
                message: format!(
                    "the table holds more than {} values, kept whole to match it with the consumption table; if it is genuine, raise the limit with the environment variable {}=N",
                    options.limits.max_cells,
                    SheetLimits::CELLS_VAR
                ),
            });
        }
        rows.push(StoredRow {
            row: u32::try_from(line.saturating_sub(1)).unwrap_or(u32::MAX),
            cells,
        });
    }
    drop(records);
    Ok(Grid {
        name,
        in_sheet: false,
        first_col: 0,
        rows,
        formulas: None,
        sha256: hashing.hex(),
    })
}

/// A companion table made ready: its header, its rows by product (and
/// site), and its column for each month of the consumption table.
struct Side {
    /// "stockout days" or "reporting rates".
    what: &'static str,
    grid: Grid,
    header: WideHeader,
    /// Row of each product (and site).
    by_key: HashMap<(String, String), usize>,
    /// Whether each row was matched with a consumption row.
    matched: Vec<bool>,
    /// Its column (position in `header.months`) for each consumption month.
    column_of: Vec<Option<usize>>,
}

/// How many rows a message lists before "and N more".
const LISTED: usize = 5;

/// What a side-table row with no product usually is, said after a
/// warning that lists one.
const MERGED_HINT: &str = "; rows with no product are usually merged cells (a product written once over its sites' rows): unmerge them and write the product on every row";

fn listed(items: &[String]) -> String {
    let mut out: Vec<String> = items.iter().take(LISTED).cloned().collect();
    if items.len() > LISTED {
        out.push(format!("and {} more", items.len() - LISTED));
    }
    out.join(", ")
}

/// The matching key of a row: product and site as written, trimmed.
fn key_of(row: &dyn RowCells, header: &WideHeader) -> (String, String) {
    let site = header.site.map(|s| row.cell(s).shown()).unwrap_or_default();
    (row.cell(header.product).shown(), site)
}

impl Side {
    /// Finds the header of a companion grid and indexes its rows.
    fn new(
        what: &'static str,
        option: &str,
        grid: Grid,
        main: &WideHeader,
        warnings: &mut Vec<String>,
    ) -> Result<Side> {
        let unit = if grid.in_sheet { "row" } else { "line" };
        let err = |line: u64, column: Option<String>, message: String| Error::Input {
            file: grid.name.clone(),
            line: 0,
            column: None,
            message: match (line, column) {
                (0, _) => message,
                (l, Some(c)) => format!("{unit} {l}, {c}: {message}"),
                (l, None) => format!("{unit} {l}: {message}"),
            },
        };
        let letter = |i: usize| grid.letter(i);
        let mut found = None;
        for i in 0..grid.rows.len().min(super::sheet::MAX_TITLE_ROWS) {
            match classify(&grid.row(i), &letter, true) {
                Header::NotWide => {}
                Header::Wide(h) => {
                    found = Some((i, h));
                    break;
                }
                Header::Bad { column, message } => {
                    return Err(err(
                        grid.line(i),
                        column,
                        format!("{what} ({option}): {message}"),
                    ))
                }
            }
        }
        let Some((at, header)) = found else {
            return Err(err(
                0,
                None,
                format!(
                    "{what} ({option}): no header row with a 'product' column and month columns ({MONTH_HEADERS}) in the first {} rows; the table must have the consumption table's shape",
                    super::sheet::MAX_TITLE_ROWS
                ),
            ));
        };
        if header.site.is_some() != main.site.is_some() {
            return Err(err(
                grid.line(at),
                None,
                format!(
                    "{what} ({option}): {}; both need the same rows, by product and site or by product alone",
                    if header.site.is_some() {
                        "the table has a 'site' column and the consumption table has none"
                    } else {
                        "the table has no 'site' column and the consumption table has one"
                    },
                ),
            ));
        }
        let mut by_key = HashMap::new();
        let mut twice = Vec::new();
        let mut blank_product = false;
        for i in at + 1..grid.rows.len() {
            let row = grid.row(i);
            if row.is_blank() {
                continue;
            }
            let key = key_of(&row, &header);
            if let Some(&first) = by_key.get(&key) {
                let name = match (key.0.is_empty(), key.1.is_empty()) {
                    (true, true) => "no product".to_string(),
                    (true, false) => format!("no product, site '{}'", key.1),
                    (false, true) => format!("'{}'", key.0),
                    (false, false) => format!("'{}', site '{}'", key.0, key.1),
                };
                twice.push(format!(
                    "{name} on {unit}s {} and {}",
                    grid.line(first),
                    grid.line(i)
                ));
                if key.0.is_empty() {
                    blank_product = true;
                }
            } else {
                by_key.insert(key, i);
            }
        }
        if !twice.is_empty() {
            warnings.push(format!(
                "{}: {what}: {} pair(s) of rows name the same product{}, and only the first of each is used: {}{}",
                grid.name,
                twice.len(),
                if header.site.is_some() { " and site" } else { "" },
                listed(&twice),
                if blank_product {
                    MERGED_HINT
                } else {
                    ""
                }
            ));
        }
        let months: HashMap<YearMonth, usize> = header
            .months
            .iter()
            .enumerate()
            .map(|(k, m)| (m.month, k))
            .collect();
        let column_of = main
            .months
            .iter()
            .map(|m| months.get(&m.month).copied())
            .collect();
        let main_months: BTreeSet<YearMonth> = main.months.iter().map(|m| m.month).collect();
        let unmatched: Vec<String> = header
            .months
            .iter()
            .filter(|m| !main_months.contains(&m.month))
            .map(|m| format!("{} ({})", grid.letter(m.col), m.header))
            .collect();
        if !unmatched.is_empty() {
            warnings.push(format!(
                "{}: {what}: {} month column(s) have no column in the consumption table, and their values are not used: {}",
                grid.name,
                unmatched.len(),
                listed(&unmatched)
            ));
        }
        let matched = vec![false; grid.rows.len()];
        Ok(Side {
            what,
            grid,
            header,
            by_key,
            matched,
            column_of,
        })
    }

    /// Warns about rows no consumption row matched.
    fn warn_unmatched(&self, warnings: &mut Vec<String>) {
        let mut rows: Vec<usize> = self
            .by_key
            .values()
            .copied()
            .filter(|&i| !self.matched[i])
            .collect();
        rows.sort_unstable();
        if rows.is_empty() {
            return;
        }
        let names: Vec<String> = rows
            .iter()
            .map(|&i| {
                let (p, s) = key_of(&self.grid.row(i), &self.header);
                let site = if s.is_empty() {
                    String::new()
                } else {
                    format!(", site '{s}'")
                };
                let unit = if self.grid.in_sheet { "row" } else { "line" };
                let product = if p.is_empty() {
                    "no product".to_string()
                } else {
                    format!("'{p}'")
                };
                format!("{product}{site} ({unit} {})", self.grid.line(i))
            })
            .collect();
        let blank = rows
            .iter()
            .any(|&i| key_of(&self.grid.row(i), &self.header).0.is_empty());
        warnings.push(format!(
            "{}: {}: {} row(s) match no product{} of the consumption table, and their values are not used: {}{}",
            self.grid.name,
            self.what,
            rows.len(),
            if self.header.site.is_some() { " and site" } else { "" },
            listed(&names),
            if blank {
                MERGED_HINT
            } else {
                ""
            }
        ));
    }
}

/// One value of the wide table as the long layout's row: product, month,
/// consumed, stockout days, reporting rate, site.
struct ValueRow<'a> {
    cells: [Cell<'a>; 6],
}

impl RowCells for ValueRow<'_> {
    fn width(&self) -> usize {
        6
    }
    fn cell(&self, i: usize) -> Cell<'_> {
        self.cells.get(i).copied().unwrap_or(Cell::Empty)
    }
}

/// Where the consumption table is and how its rows are named.
pub(crate) struct MainTable {
    /// The file name as given.
    pub(crate) source: String,
    /// The sheet, for a workbook.
    pub(crate) sheet: Option<String>,
    /// First column of the table (0 for a CSV).
    pub(crate) first_col: u32,
}

impl MainTable {
    fn letter(&self, col: usize) -> String {
        column_letter(self.first_col.saturating_add(col as u32))
    }
}

/// Reads the values of a wide table row by row, through the long layout's
/// checks.
pub(crate) struct WideReader<'o> {
    table: MainTable,
    header: WideHeader,
    /// Each month as `YYYY-MM`, the month cell of its values.
    month_text: Vec<String>,
    collector: Collector<'o>,
    columns: Columns,
    sides: Vec<Side>,
    /// Lines of product rows with no value in any month.
    empty_rows: Vec<u64>,
    /// Values in columns with no header: count and first lines.
    unnamed_values: usize,
    unnamed_lines: Vec<u64>,
    /// Consumption rows with no row in a companion table, per companion.
    unmatched: Vec<Vec<String>>,
}

/// The companion tables, as loaded by the caller.
pub(crate) struct Companions {
    pub(crate) stockout: Option<Grid>,
    pub(crate) rate: Option<Grid>,
}

impl<'o> WideReader<'o> {
    /// Starts reading the values below `header`.
    pub(crate) fn new(
        table: MainTable,
        header: WideHeader,
        companions: Companions,
        options: &'o ReadOptions,
        warnings: &mut Vec<String>,
    ) -> Result<Self> {
        let mut sides = Vec::new();
        if let Some(g) = companions.stockout {
            sides.push(Side::new(
                "stockout days",
                "--stockout-file / --stockout-sheet",
                g,
                &header,
                warnings,
            )?);
        }
        if let Some(g) = companions.rate {
            sides.push(Side::new(
                "reporting rates",
                "--rate-file / --rate-sheet",
                g,
                &header,
                warnings,
            )?);
        }
        let month_columns = header
            .months
            .iter()
            .map(|m| (m.month, m.header.clone()))
            .collect();
        let in_sheet = table.sheet.is_some();
        let unit = if in_sheet { "row" } else { "line" };
        Ok(WideReader {
            month_text: header.months.iter().map(|m| m.month.to_string()).collect(),
            columns: Columns::wide_row(in_sheet, header.site.is_some()),
            unmatched: vec![Vec::new(); sides.len()],
            table,
            header,
            collector: Collector::wide(options, unit, month_columns),
            sides,
            empty_rows: Vec::new(),
            unnamed_values: 0,
            unnamed_lines: Vec::new(),
        })
    }

    fn side(&self, what: &str) -> Option<usize> {
        self.sides.iter().position(|s| s.what == what)
    }

    /// Reads the values of one row of the table.
    pub(crate) fn add_row(&mut self, line: u64, row: &dyn RowCells, raw: &dyn Fn() -> String) {
        if row.is_blank() {
            return;
        }
        let h = &self.header;
        let width = row.width();
        let unnamed = (0..width)
            .filter(|&i| h.unnamed(i) && !matches!(row.cell(i), Cell::Empty))
            .filter(|&i| !row.cell(i).shown().is_empty())
            .count();
        if unnamed > 0 {
            self.unnamed_values += unnamed;
            if self.unnamed_lines.len() < LISTED {
                self.unnamed_lines.push(line);
            }
        }
        let product = row.cell(h.product);
        let site = h.site.map_or(Cell::Empty, |s| row.cell(s));
        let key = key_of(row, h);
        let total_row = is_total_name(&key.0);
        let total_site = !total_row && is_total_site(&key.1);
        // The companion row of this product (and site), per companion.
        let stock_side = self.side("stockout days");
        let rate_side = self.side("reporting rates");
        let mut found: Vec<Option<usize>> = Vec::with_capacity(self.sides.len());
        for (k, side) in self.sides.iter_mut().enumerate() {
            let at = side.by_key.get(&key).copied();
            match at {
                Some(i) => side.matched[i] = true,
                None if !total_row && !total_site && !key.0.is_empty() => {
                    let site = if key.1.is_empty() {
                        String::new()
                    } else {
                        format!(", site '{}'", key.1)
                    };
                    let unit = if self.table.sheet.is_some() {
                        "row"
                    } else {
                        "line"
                    };
                    self.unmatched[k].push(format!("'{}'{site} ({unit} {line})", key.0));
                }
                None => {}
            }
            found.push(at);
        }
        let companion = |k: Option<usize>, m: usize| -> Option<(usize, usize)> {
            let k = k?;
            let side = &self.sides[k];
            let r = found[k]?;
            let c = side.column_of[m]?;
            Some((r, side.header.months[c].col))
        };
        let mut any = false;
        for (m, month) in h.months.iter().enumerate() {
            let consumed = row.cell(month.col);
            let stock_at = companion(stock_side, m);
            let rate_at = companion(rate_side, m);
            let cell_at = |k: Option<usize>, at: Option<(usize, usize)>| match (k, at) {
                (Some(k), Some((r, c))) => self.sides[k].grid.row(r).get(c),
                _ => Cell::Empty,
            };
            let stock = cell_at(stock_side, stock_at);
            let rate = cell_at(rate_side, rate_at);
            if [consumed, stock, rate].iter().all(|c| blank(*c)) {
                continue;
            }
            any = true;
            if total_row {
                self.collector.reject(
                    line,
                    Some(month.header.clone()),
                    consumed.shown(),
                    format!(
                        "the row's product is '{}', a totals row of the table, not a product: provisio adds the products up itself; delete the row (or rename it, if it is a product)",
                        key.0
                    ),
                    raw(),
                );
                continue;
            }
            if total_site {
                self.collector.reject(
                    line,
                    Some(month.header.clone()),
                    consumed.shown(),
                    format!(
                        "the row's site is '{}', a subtotal of the product's sites, not a site: provisio adds the sites up itself, and counting it too would double the product; delete the row (or rename it, if it is a site)",
                        key.1
                    ),
                    raw(),
                );
                continue;
            }
            let value = ValueRow {
                cells: [
                    product,
                    Cell::Text(&self.month_text[m]),
                    consumed,
                    stock,
                    rate,
                    site,
                ],
            };
            let before = self.collector.rejected_len();
            self.collector.add(line, &value, &self.columns, raw);
            let place = |k: Option<usize>, at: Option<(usize, usize)>| match (k, at) {
                (Some(k), Some((r, c))) => {
                    let g = &self.sides[k].grid;
                    let header = self.sides[k]
                        .header
                        .months
                        .iter()
                        .find(|x| x.col == c)
                        .map_or("", |x| x.header.as_str());
                    g.place(g.line(r), c, header)
                }
                _ => String::new(),
            };
            if self.collector.rejected_len() > before {
                let stock_place = place(stock_side, stock_at);
                let rate_place = place(rate_side, rate_at);
                if let Some(r) = self.collector.last_rejected_mut() {
                    let from = match r.column.as_deref() {
                        Some("stockout_days") => Some(("stockout days", stock_place)),
                        Some("reporting_rate") => Some(("reporting rate", rate_place)),
                        _ => None,
                    };
                    if let Some((what, at)) = from {
                        // The row's fields (file, line, column, sheet, cell)
                        // place the consumption cell set aside, so its value
                        // is that cell's; the companion table's value and
                        // place are in the reason.
                        r.reason = format!("{what} at {at}: {}", r.reason);
                        r.value = consumed.shown();
                    }
                    r.column = Some(month.header.clone());
                }
            } else if rate_side.is_some() && !blank(rate) {
                self.collector.rate_read_at(|| place(rate_side, rate_at));
            }
        }
        if !any {
            self.empty_rows.push(line);
        }
    }

    /// Settles what is settled at the end (as for the long layout) and
    /// says what did not match.
    pub(crate) fn finish(
        self,
        sha256: String,
        warnings_before: Vec<String>,
        input_err: &InputErr<'_>,
        reread: &Reread<'_>,
    ) -> Result<Dataset> {
        let WideReader {
            table,
            header,
            collector,
            sides,
            empty_rows,
            unnamed_values,
            unnamed_lines,
            unmatched,
            ..
        } = self;
        let mut warnings = warnings_before;
        for (side, rows) in sides.iter().zip(&unmatched) {
            if !rows.is_empty() {
                warnings.push(format!(
                    "{} row(s) of the consumption table have no row in {} ({}), and are read with no {}: {}",
                    rows.len(),
                    side.grid.name,
                    side.what,
                    side.what,
                    listed(rows)
                ));
            }
            side.warn_unmatched(&mut warnings);
        }
        if !empty_rows.is_empty() {
            let lines: Vec<String> = empty_rows.iter().map(u64::to_string).collect();
            warnings.push(format!(
                "{} row(s) have no value in any month column (lines {}): nothing to read there",
                empty_rows.len(),
                listed(&lines)
            ));
        }
        if unnamed_values > 0 {
            let lines: Vec<String> = unnamed_lines.iter().map(u64::to_string).collect();
            warnings.push(format!(
                "{unnamed_values} value(s) are in columns with no header, and are not read (lines {}{}); give the column its month as header",
                lines.join(", "),
                if unnamed_lines.len() >= LISTED { ", ..." } else { "" }
            ));
        }
        let side_of = |what: &str| sides.iter().find(|s| s.what == what);
        let info = WideInfo {
            months: header
                .months
                .iter()
                .map(|m| (m.header.clone(), table.letter(m.col), m.month))
                .collect(),
            product_column: table.letter(header.product),
            site_column: header.site.map(|s| table.letter(s)),
            stockout_source: side_of("stockout days").map(|s| s.grid.name.clone()),
            stockout_sha256: side_of("stockout days").map(|s| s.grid.sha256.clone()),
            rate_source: side_of("reporting rates").map(|s| s.grid.name.clone()),
            rate_sha256: side_of("reporting rates").map(|s| s.grid.sha256.clone()),
        };
        let mut id_columns = vec![("product".to_string(), info.product_column.clone())];
        if let Some(s) = &info.site_column {
            id_columns.push(("site".to_string(), s.clone()));
        }
        let layout = Layout {
            delimiter: ',',
            had_bom: false,
            has_site: header.site.is_some(),
            has_stockout_days: info.stockout_source.is_some(),
            has_reporting_rate: info.rate_source.is_some(),
            reporting_rate_as_percent: false,
            extra_columns: header.extra.clone(),
            sheet: table.sheet.as_ref().map(|name| SheetInfo {
                name: name.clone(),
                columns: id_columns,
            }),
            wide: Some(info),
        };
        if collector.rows_read() == 0 {
            return Err(input_err(
                0,
                None,
                format!(
                    "the table is in the wide layout ({} month columns) but every month cell is empty: no value to read",
                    header.months.len()
                ),
            ));
        }
        let mut ds = collector.finish(&table.source, sha256, layout, input_err, reread)?;
        // The reader's own warnings first, as for the long layout.
        let own = std::mem::take(&mut ds.warnings);
        ds.warnings = warnings;
        ds.warnings.extend(own);
        Ok(ds)
    }
}

fn blank(c: Cell<'_>) -> bool {
    match c {
        Cell::Empty => true,
        Cell::Text(t) => t.trim().is_empty(),
        _ => false,
    }
}

/// Whether the options ask for the wide layout's companions while the
/// table read is in the long layout: refused with what to do instead.
pub(crate) fn companions_need_wide(options: &ReadOptions) -> Option<String> {
    let given: Vec<&str> = [
        options
            .stockout
            .as_ref()
            .map(|_| "--stockout-file / --stockout-sheet"),
        options.rate.as_ref().map(|_| "--rate-file / --rate-sheet"),
    ]
    .into_iter()
    .flatten()
    .collect();
    if given.is_empty() {
        return None;
    }
    Some(format!(
        "{} give(s) stockout days or reporting rates as tables of the wide layout (one row per product, one column per month), and the table read is in the long layout{}; in the long layout they are the columns stockout_days and reporting_rate",
        given.join(" and "),
        if options.layout == TableLayout::Long {
            " (--layout long)"
        } else {
            ""
        }
    ))
}

/// Reads a companion CSV (the file is not a workbook).
pub(crate) fn companion_csv(c: &Companion, path: &Path, options: &ReadOptions) -> Result<Grid> {
    if let Some(sheet) = &c.sheet {
        return Err(Error::Input {
            file: path.display().to_string(),
            line: 0,
            column: None,
            message: format!(
                "a sheet ('{sheet}') is named for this file, and it is read as a CSV file; name sheets of workbooks only (.xlsx, .xlsm, .xls, .ods)"
            ),
        });
    }
    csv_grid(path, options)
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Row(Vec<&'static str>);
    impl RowCells for Row {
        fn width(&self) -> usize {
            self.0.len()
        }
        fn cell(&self, i: usize) -> Cell<'_> {
            self.0.get(i).map_or(Cell::Empty, |t| Cell::Text(t))
        }
    }

    fn classify_text(cells: Vec<&'static str>, forced: bool) -> Header {
        classify(&Row(cells), &|i| column_letter(i as u32), forced)
    }

    #[test]
    fn a_header_of_months_is_wide() {
        let Header::Wide(h) = classify_text(
            vec![
                "Product",
                "Site",
                "Jan 2024",
                "February 2024",
                "2024-03",
                "04/2024",
                "Total",
            ],
            false,
        ) else {
            panic!("not wide")
        };
        assert_eq!((h.product, h.site), (0, Some(1)));
        let months: Vec<String> = h.months.iter().map(|m| m.month.to_string()).collect();
        assert_eq!(months, ["2024-01", "2024-02", "2024-03", "2024-04"]);
        assert_eq!(h.extra, ["Total"]);
    }

    #[test]
    fn a_long_header_or_a_title_is_not_wide() {
        for cells in [
            vec!["product", "month", "consumed"],
            vec!["Consumption report 2024"],
            vec!["product", "2024-01"],
        ] {
            assert_eq!(
                classify_text(cells.clone(), false),
                Header::NotWide,
                "{cells:?}"
            );
        }
        // Forced: a title row is passed over, a long header is refused.
        assert_eq!(
            classify_text(vec!["Consumption report"], true),
            Header::NotWide
        );
        let Header::Bad { message, .. } = classify_text(vec!["product", "month", "2024-01"], true)
        else {
            panic!()
        };
        assert!(message.contains("'month' column"), "{message}");
    }

    #[test]
    fn dates_as_headers_are_read_when_their_order_shows() {
        let months = |cells: Vec<&'static str>| -> Vec<String> {
            match classify_text(cells, false) {
                Header::Wide(h) => h.months.iter().map(|m| m.month.to_string()).collect(),
                other => panic!("{other:?}"),
            }
        };
        // Day first (the day stays 01), month first (US exports), and a day
        // above 12 (month-end dates) settle the order.
        let want = ["2024-01", "2024-02", "2024-03"];
        assert_eq!(
            months(vec!["product", "01/01/2024", "01/02/2024", "01/03/2024"]),
            want
        );
        assert_eq!(
            months(vec!["product", "1/1/2024", "2/1/2024", "3/1/2024"]),
            want
        );
        assert_eq!(
            months(vec!["product", "31.01.2024", "29.02.2024", "31.03.2024"]),
            want
        );
        assert_eq!(
            months(vec!["product", "1/31/2024", "2/29/2024", "3/31/2024"]),
            want
        );
        // Both numbers change: refused, not guessed.
        let Header::Bad { message, .. } = classify_text(
            vec!["product", "01/02/2024", "02/03/2024", "03/04/2024"],
            false,
        ) else {
            panic!()
        };
        assert!(
            message.contains("order of day and month cannot be told"),
            "{message}"
        );
    }

    #[test]
    fn header_problems_name_the_column() {
        let bad = |cells| match classify_text(cells, false) {
            Header::Bad { column, message } => (column, message),
            other => panic!("{other:?}"),
        };
        let (col, m) = bad(vec!["product", "Jan 2024", "Feb 2024", "2024-01"]);
        assert_eq!(col.as_deref(), Some("column D (2024-01)"));
        assert!(
            m.contains(
                "the month 2024-01 has two columns, column B (Jan 2024) and column D (2024-01)"
            ),
            "{m}"
        );
        let (col, m) = bad(vec!["product", "Jan 2024", "Febuary 2024", "Mar 2024"]);
        assert_eq!(col.as_deref(), Some("column C (Febuary 2024)"));
        assert!(m.contains("cannot be read as one"), "{m}");
        let (col, m) = bad(vec!["item", "Jan 2024", "Feb 2024", "Mar 2024"]);
        assert_eq!(col, None);
        assert!(m.contains("no column named 'product'"), "{m}");
    }

    fn read(text: &str, options: &ReadOptions) -> Dataset {
        super::super::read_csv_bytes("w.csv", text.as_bytes(), options).unwrap()
    }

    #[test]
    fn values_are_rows_of_the_long_layout_placed_by_line_and_column() {
        let d = read(
            "product,site,Jan 2024,Feb 2024,Mar 2024,notes\nORS,North,10,,12,x\nORS,South,4,x5,6,\n",
            &ReadOptions::default(),
        );
        // Five values read (the blank is a month not reported, not a value).
        assert_eq!(d.rows_read, 5);
        assert_eq!(d.rows.len(), 4);
        let r = &d.rejected[0];
        assert_eq!((r.line, r.column.as_deref()), (3, Some("Feb 2024")));
        assert_eq!(d.place(r), "w.csv: line 3, column D (Feb 2024)");
        assert_eq!(d.cell_of(r).as_deref(), Some("D3"));
        assert_eq!(r.raw, "ORS,South,4,x5,6,");
        let north: Vec<(String, Option<f64>)> = d
            .rows
            .iter()
            .filter(|r| r.site.as_deref() == Some("North"))
            .map(|r| (r.month.to_string(), r.consumed))
            .collect();
        assert_eq!(
            north,
            [
                ("2024-01".to_string(), Some(10.0)),
                ("2024-03".to_string(), Some(12.0))
            ]
        );
        assert_eq!(d.layout.extra_columns, ["notes"]);
        assert!(d.layout.wide.is_some() && d.layout.has_site);
    }

    #[test]
    fn keeping_months_up_to_a_date_cuts_values_not_whole_lines() {
        // Every value of a line shares the line: the cut goes by month.
        let mut d = read(
            "product,2024-01,2024-02,2024-03\nORS,1,2,3\nZinc,4,5,6\n",
            &ReadOptions::default(),
        );
        assert_eq!(d.keep_until(YearMonth::known(2024, 2)), 2);
        assert_eq!(d.rows_read, 4);
        assert_eq!(d.rows.len(), 4);
        assert!(d.rows.iter().all(|r| r.month <= YearMonth::known(2024, 2)));
    }

    #[test]
    fn a_product_on_two_rows_is_a_duplicate_of_each_month() {
        let text = "product,2024-01,2024-02\nORS,1,2\nORS,10,\n";
        let d = read(text, &ReadOptions::default());
        // January conflicts (both rejected); February has one value.
        assert_eq!(d.rows_read, 3);
        assert_eq!(d.rows.len(), 1);
        assert_eq!(d.rejected.len(), 2);
        assert!(d
            .rejected
            .iter()
            .all(|r| r.column.as_deref() == Some("2024-01")));
        assert_eq!(d.place(&d.rejected[0]), "w.csv: line 2, column B (2024-01)");
        let sum = ReadOptions {
            duplicates: super::super::DuplicatePolicy::Sum,
            ..ReadOptions::default()
        };
        let d = read(text, &sum);
        assert_eq!(d.merged.len(), 1);
        assert_eq!(d.merged[0].month, YearMonth::known(2024, 1));
        let jan = d.rows.iter().find(|r| r.month == YearMonth::known(2024, 1));
        assert_eq!(jan.and_then(|r| r.consumed), Some(11.0));
        // The accounting holds when one line carries values of many months.
        let settings = crate::clean::CleanSettings::default().check().unwrap();
        let cleaned = crate::clean::clean(&d, &settings);
        assert!(cleaned.verify(&d).is_ok());
        // The two January values were merged (counted adjusted); February is used as reported.
        assert_eq!((cleaned.rows.used, cleaned.rows.adjusted), (1, 2));
    }

    #[test]
    fn the_layout_can_be_forced() {
        let long = ReadOptions {
            layout: TableLayout::Long,
            ..ReadOptions::default()
        };
        let e = super::super::read_csv_bytes("w.csv", b"product,2024-01,2024-02\nORS,1,2\n", &long)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("missing required columns 'month', 'consumed'"),
            "{e}"
        );
        let wide = ReadOptions {
            layout: TableLayout::Wide,
            ..ReadOptions::default()
        };
        // Auto: one month column is too few to tell, and the refusal says
        // which option reads it.
        let e = super::super::read_csv_bytes(
            "w.csv",
            b"product,2024-01\nORS,1\n",
            &ReadOptions::default(),
        )
        .unwrap_err()
        .to_string();
        assert!(e.ends_with("the header has 1 month column(s) (2024-01): a table with one row per product and a column per month is read with --layout wide"), "{e}");
        // One month column is enough when the layout is named.
        let d = read("product,2024-01\nORS,1\n", &wide);
        assert_eq!(d.rows.len(), 1);
        let e = super::super::read_csv_bytes(
            "w.csv",
            b"product,month,consumed\nORS,2024-01,1\n",
            &wide,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("--layout wide: the header has a 'month' column, so the table is in the long layout"), "{e}");
    }
}
