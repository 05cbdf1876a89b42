//! Reading and validating the long CSV input, streaming: one row is
//! decoded at a time and only its parsed values are kept (product and site
//! names are shared between rows), so memory grows with the number of rows
//! but not with the size of the file's text.

use std::collections::{BTreeMap, BTreeSet, HashMap, HashSet};
use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::text::{Encoding, Fields, Hashing, Records, TextError};
use super::values::{parse_month, parse_number, NumberFormat};
use super::wide;
use super::{Dataset, InputRow, Layout, MergedRow, RejectedRow};
use crate::calendar::YearMonth;
use crate::error::{Error, Result};

/// What to do with two rows for the same product, month (and site).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DuplicatePolicy {
    /// Reject conflicting duplicates (all of them); keep the first of
    /// exact copies and reject the others.
    #[default]
    Reject,
    /// Add the quantities together (for files split by programme or
    /// batch); stockout days and reporting rate must then agree.
    Sum,
}

/// Options for reading input.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// Handling of duplicate product + month (+ site) rows.
    pub duplicates: DuplicatePolicy,
    /// How numbers are written.
    pub numbers: NumberFormat,
    /// Text encoding of the file.
    pub encoding: Encoding,
    /// Latest month a row may have (the month the run happens in); rows
    /// for later months are rejected. `None`: no limit beyond the calendar's.
    pub latest_month: Option<YearMonth>,
    /// Sheet to read from a workbook (`None`: the active sheet when it is
    /// visible, else the first visible one). Refused
    /// for a CSV file.
    pub sheet: Option<String>,
    /// How much of a workbook may be unpacked and stored.
    pub limits: SheetLimits,
    /// Long layout (a row per product and month), wide (a column per
    /// month), or found from the header.
    pub layout: TableLayout,
    /// Stockout days in the wide layout: a sheet or file of the same shape.
    pub stockout: Option<Companion>,
    /// Reporting rates in the wide layout: a sheet or file of the same shape.
    pub rate: Option<Companion>,
}

/// How the input table is laid out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TableLayout {
    /// Found from the header: wide when it has a `product` column, no
    /// `month` column, and its other columns are mostly months.
    #[default]
    Auto,
    /// One row per product (and site) and month.
    Long,
    /// One row per product (and site), one column per month.
    Wide,
}

impl TableLayout {
    /// The name used on the command line and in the configuration.
    pub fn name(self) -> &'static str {
        match self {
            TableLayout::Auto => "auto",
            TableLayout::Long => "long",
            TableLayout::Wide => "wide",
        }
    }
}

/// Where a wide table of stockout days or reporting rates is: a sheet of
/// the input workbook, a separate file (CSV or workbook), or a sheet of a
/// separate workbook. Its rows and month columns are matched with the
/// consumption table's by product (and site) and month.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Companion {
    /// A separate file; `None`: the input workbook itself.
    pub file: Option<PathBuf>,
    /// The sheet to read (of `file` when given, else of the input workbook).
    pub sheet: Option<String>,
}

/// Limits on what a workbook may cost to read. A workbook is compressed:
/// a file of a few megabytes can unpack to gigabytes, so reading stops at
/// these limits with a message naming them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SheetLimits {
    /// Most cells holding something that are kept from the sheet read.
    pub max_cells: usize,
    /// Most bytes the workbook's parts may unpack to, all together.
    pub max_unpacked_bytes: u64,
}

impl SheetLimits {
    /// Environment variable the command line reads to raise [`SheetLimits::max_cells`].
    pub const CELLS_VAR: &'static str = "PROVISIO_MAX_SHEET_CELLS";
    /// Environment variable the command line reads to raise
    /// [`SheetLimits::max_unpacked_bytes`] (in MiB).
    pub const UNPACKED_VAR: &'static str = "PROVISIO_MAX_UNPACKED_MIB";
}

impl Default for SheetLimits {
    /// 2,000,000 cells (400,000 rows of five columns; about 150 MB kept at
    /// most) and 512 MiB unpacked:
    /// well above a national monthly dataset, well below the memory of a
    /// laptop.
    fn default() -> Self {
        SheetLimits {
            max_cells: 2_000_000,
            max_unpacked_bytes: 512 << 20,
        }
    }
}

/// Largest quantity accepted in one row. Far above any real monthly
/// quantity, and far enough below the largest float that scaling for
/// stockouts and reporting, and summing, stay finite.
pub const MAX_QUANTITY: f64 = 1e15;

impl ReadOptions {
    /// Every combination of the options, picked by one byte. The fuzz target
    /// and the property tests take the first byte of an arbitrary input this
    /// way, so that random input exercises every reading mode.
    pub fn from_byte(b: u8) -> Self {
        ReadOptions {
            duplicates: if b & 1 == 0 {
                DuplicatePolicy::Reject
            } else {
                DuplicatePolicy::Sum
            },
            numbers: match (b >> 1) % 3 {
                0 => NumberFormat::Plain,
                1 => NumberFormat::Grouped,
                _ => NumberFormat::DecimalComma,
            },
            encoding: match (b >> 3) % 3 {
                0 => Encoding::Utf8,
                1 => Encoding::Latin1,
                _ => Encoding::Windows1252,
            },
            latest_month: if b & 0x40 == 0 {
                None
            } else {
                YearMonth::new(2024, 6)
            },
            sheet: None,
            limits: SheetLimits::default(),
            layout: TableLayout::Auto,
            stockout: None,
            rate: None,
        }
    }
}

pub(crate) const REQUIRED: [&str; 3] = ["product", "month", "consumed"];
const OPTIONAL: [&str; 3] = ["stockout_days", "reporting_rate", "site"];

/// Reads an input file from disk, streaming, and hashes it on the way.
/// See [`read_csv_bytes`] for what is checked.
pub fn read_csv_path(path: &Path, options: &ReadOptions) -> Result<Dataset> {
    let source = path.display().to_string();
    let io_err = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        action: "cannot read input",
        source,
    };
    let before = std::fs::metadata(path).map_err(io_err)?;
    if !before.is_file() {
        // A named pipe, standard input or a device can be read only once:
        // read it whole, then work from the bytes (rejected rows are read
        // again from them, not from the pipe).
        let mut bytes = Vec::new();
        std::fs::File::open(path)
            .and_then(|mut f| f.read_to_end(&mut bytes))
            .map_err(io_err)?;
        return read_csv_bytes(&source, &bytes, options);
    }
    let open = || -> std::io::Result<Box<dyn Read>> { Ok(Box::new(std::fs::File::open(path)?)) };
    let ds = read_from(&source, path, &open, options)?;
    // A file written or cut while it was read gives rows of neither
    // version and a hash of neither: refuse it rather than forecast from it.
    let after = std::fs::metadata(path).map_err(io_err)?;
    if after.len() != before.len() || after.modified().ok() != before.modified().ok() {
        return Err(Error::Input {
            file: source,
            line: 0,
            column: None,
            message: format!(
                "the file changed while it was read ({} bytes before, {} after); run again once the program writing it has finished",
                before.len(),
                after.len()
            ),
        });
    }
    Ok(ds)
}

/// Reads the long CSV contract from bytes. `source` names the file in
/// messages. Problems with the file as a whole are errors; problems with a
/// row reject that row (with the reason) and reading goes on.
pub fn read_csv_bytes(source: &str, bytes: &[u8], options: &ReadOptions) -> Result<Dataset> {
    let open = || -> std::io::Result<Box<dyn Read + '_>> { Ok(Box::new(bytes)) };
    read_from(source, Path::new(source), &open, options)
}

type Open<'a> = dyn Fn() -> std::io::Result<Box<dyn Read + 'a>> + 'a;

/// Shares one allocation per distinct product or site name.
#[derive(Default)]
struct Names {
    all: HashSet<Arc<str>>,
    /// The name asked for last: files list many rows of one product or
    /// site in a row, and comparing with it is cheaper than hashing.
    last: Option<Arc<str>>,
}

impl Names {
    fn get(&mut self, name: &str) -> Arc<str> {
        if let Some(n) = self.last.as_ref().filter(|n| ***n == *name) {
            return n.clone();
        }
        let n = match self.all.get(name) {
            Some(n) => n.clone(),
            None => {
                let n: Arc<str> = Arc::from(name);
                self.all.insert(n.clone());
                n
            }
        };
        self.last = Some(n.clone());
        n
    }
}

/// Product and site names, each shared between the rows that carry them.
#[derive(Default)]
struct Interned {
    products: Names,
    sites: Names,
}

fn read_from(source: &str, path: &Path, open: &Open<'_>, options: &ReadOptions) -> Result<Dataset> {
    let input_err = |line: u64, column: Option<&str>, message: String| Error::Input {
        file: source.to_string(),
        line,
        column: column.map(str::to_string),
        message,
    };
    let text_err = |e: TextError| match e {
        TextError::Io(e) => Error::Io {
            path: PathBuf::from(path),
            action: "cannot read input",
            source: e,
        },
        TextError::Input { line, message } => input_err(line, None, message),
    };
    let file = open().map_err(|e| text_err(TextError::Io(e)))?;
    let mut hashing = Hashing::new(file);
    let mut records = Records::open(&mut hashing, options.encoding).map_err(text_err)?;
    let delimiter = records.delimiter as char;
    let had_bom = records.had_bom;

    // The header is the first row that is not all blank.
    let mut header = None;
    while let Some(line) = records.next_record().map_err(text_err)? {
        if records.fields().iter().any(|f| !f.trim().is_empty()) {
            header = Some(line);
            break;
        }
    }
    let Some(header_line) = header else {
        return Err(input_err(
            0,
            None,
            format!(
                "the file is empty; expected a header line naming at least the columns {}",
                REQUIRED.join(", ")
            ),
        ));
    };
    if options.layout != TableLayout::Long {
        let fields = records.fields();
        let letter = |i: usize| super::column_letter(u32::try_from(i).unwrap_or(u32::MAX));
        match wide::classify(&fields, &letter, options.layout == TableLayout::Wide) {
            wide::Header::Wide(header) => {
                let companions = super::sheet::load_companions(source, "", options, None)?;
                let mut warnings = Vec::new();
                let table = wide::MainTable {
                    source: source.to_string(),
                    sheet: None,
                    first_col: 0,
                };
                let mut reader =
                    wide::WideReader::new(table, header, companions, options, &mut warnings)?;
                while let Some(line) = records.next_record().map_err(text_err)? {
                    let fields = records.fields();
                    reader.add_row(line, &fields, &|| fields.joined(delimiter));
                }
                drop(records);
                let reread = |wanted: &BTreeSet<u64>| reread_rows(open, options.encoding, wanted);
                let mut ds = reader.finish(hashing.hex(), warnings, &input_err, &reread)?;
                ds.layout.delimiter = delimiter;
                ds.layout.had_bom = had_bom;
                return Ok(ds);
            }
            wide::Header::Bad { column, message } => {
                return Err(input_err(
                    header_line,
                    None,
                    match column {
                        Some(c) => format!("{c}: {message}"),
                        None => message,
                    },
                ))
            }
            wide::Header::NotWide if options.layout == TableLayout::Wide => {
                return Err(input_err(
                    header_line,
                    None,
                    format!(
                        "--layout wide: the header has neither a 'product' column nor month columns; the wide layout has one row per product (a 'product' column, optionally 'site') and one column per month, headed like {}",
                        wide::MONTH_HEADERS
                    ),
                ))
            }
            wide::Header::NotWide => {}
        }
    }
    if let Some(m) = wide::companions_need_wide(options) {
        return Err(input_err(0, None, m));
    }
    let header_names: Vec<&str> = records.fields().iter().collect();
    let (mut columns, extra_columns) = map_header(&header_names).map_err(|m| {
        // One column whose name holds another separator: the file is
        // delimited by a character provisio does not read, and renaming
        // the header would not help.
        let other = match header_names.as_slice() {
            [only] => ['|', '^', '~', ':'].into_iter().find(|c| only.contains(*c)),
            _ => None,
        };
        match other {
            Some(c) => input_err(
                header_line,
                None,
                format!(
                    "the header is one column holding '{c}' between names: the file seems to be delimited by '{c}', and provisio reads commas, semicolons and tabs; save it as CSV with commas"
                ),
            ),
            None => input_err(header_line, None, format!("{m}{}", wide_hint(&header_names))),
        }
    })?;
    columns.delimiter = delimiter;

    let mut rows = Collector::new(options, "line");
    while let Some(line) = records.next_record().map_err(text_err)? {
        let fields = records.fields();
        let problem = csv_row_problem(line, &fields, &columns);
        if problem.is_none() && records.open_quote {
            rows.reject(
                line,
                None,
                String::new(),
                "a quote (\") opened on this line is never closed before the end of the file, so the rest of the file would be one value; close the quote, or remove it".to_string(),
                fields.joined(delimiter),
            );
            continue;
        }
        match problem.or_else(|| short_row_problem(&fields, &columns)) {
            Some(reason) => {
                rows.reject(line, None, String::new(), reason, fields.joined(delimiter))
            }
            None => rows.add(line, &fields, &columns, || fields.joined(delimiter)),
        }
    }
    let input_sha256 = hashing.hex();
    let layout = Layout {
        delimiter,
        had_bom,
        has_site: columns.site.is_some(),
        has_stockout_days: columns.stockout_days.is_some(),
        has_reporting_rate: columns.reporting_rate.is_some(),
        reporting_rate_as_percent: false,
        extra_columns,
        sheet: None,
        wide: None,
    };
    // Rows rejected as duplicates carry their text, read again from the
    // file: keeping the text of every row in case it has a duplicate would
    // cost more memory than the rows themselves.
    let reread = |wanted: &BTreeSet<u64>| reread_rows(open, options.encoding, wanted);
    rows.finish(source, input_sha256, layout, &input_err, &reread)
}

/// For a header refused as the long layout's: when it has month columns,
/// the option that reads a table with a column per month.
pub(crate) fn wide_hint(header: &[&str]) -> String {
    let months: Vec<&str> = header
        .iter()
        .copied()
        .filter(|h| super::values::parse_month_header(h).is_some())
        .collect();
    if months.is_empty() {
        return String::new();
    }
    format!(
        "; the header has {} month column(s) ({}): a table with one row per product and a column per month is read with --layout wide",
        months.len(),
        months.iter().take(3).map(|m| m.trim()).collect::<Vec<_>>().join(", ")
    )
}

/// One value of an input row as found: a CSV field is text; a workbook's
/// cells are typed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Cell<'a> {
    /// Nothing in the cell.
    Empty,
    /// Text (every CSV field).
    Text(&'a str),
    /// A number cell.
    Number(f64),
    /// A date cell: year, month, day.
    Date(i32, u32, u32),
    /// A true/false cell.
    Bool(bool),
    /// An error value such as `#N/A` or `#DIV/0!`.
    Error(&'a str),
    /// A formula whose value was never calculated and saved (the formula).
    Uncalculated(&'a str),
}

impl Cell<'_> {
    /// The value as shown in messages and in the rejected-row log.
    pub(crate) fn shown(&self) -> String {
        match *self {
            Cell::Empty => String::new(),
            Cell::Text(t) => t.trim().to_string(),
            Cell::Number(x) => format_number(x),
            Cell::Date(y, m, d) => format!("{y:04}-{m:02}-{d:02}"),
            Cell::Bool(b) => if b { "TRUE" } else { "FALSE" }.to_string(),
            Cell::Error(e) => e.to_string(),
            Cell::Uncalculated(f) if f.starts_with('=') => f.to_string(),
            Cell::Uncalculated(f) => format!("={f}"),
        }
    }

    fn is_blank(&self) -> bool {
        match *self {
            Cell::Empty => true,
            Cell::Text(t) => t.trim().is_empty(),
            _ => false,
        }
    }
}

/// A number as a person would write it: `1234`, `12.5`.
pub(crate) fn format_number(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e15 {
        format!("{}", x as i64)
    } else {
        format!("{x}")
    }
}

/// A row of input values, by column position.
pub(crate) trait RowCells {
    /// Number of values in the row.
    fn width(&self) -> usize;
    /// Value `i` (`Cell::Empty` past the end).
    fn cell(&self, i: usize) -> Cell<'_>;
    /// Whether every value is blank.
    fn is_blank(&self) -> bool {
        (0..self.width()).all(|i| self.cell(i).is_blank())
    }
}

impl RowCells for Fields<'_> {
    fn width(&self) -> usize {
        self.len()
    }
    fn cell(&self, i: usize) -> Cell<'_> {
        match self.get(i) {
            Some(t) => Cell::Text(t),
            None => Cell::Empty,
        }
    }
}

/// Builds an error about the input as a whole: line (or sheet row),
/// column, message.
pub(crate) type InputErr<'a> = dyn Fn(u64, Option<&str>, String) -> Error + 'a;
/// Reads the text of the rows at the given lines again.
pub(crate) type Reread<'a> = dyn Fn(&BTreeSet<u64>) -> HashMap<u64, String> + 'a;

/// Collects the rows of one input, accepted or rejected, and settles what
/// can only be settled at the end (percentages, duplicates, spans).
pub(crate) struct Collector<'o> {
    options: &'o ReadOptions,
    /// What a row's number is called in messages ("line" or "row").
    unit: &'static str,
    names: Interned,
    rows: Vec<InputRow>,
    /// Rows whose reporting rate was a plain number (no % sign): read as a
    /// fraction, or as a percentage when any plain value in the column
    /// exceeds 1, which is known only at the end.
    plain_rate: Vec<usize>,
    rejected: Vec<RejectedRow>,
    rows_read: usize,
    /// In the wide layout, the header of each month's column: rejections
    /// settled at the end name it as their column.
    month_columns: Option<HashMap<YearMonth, String>>,
    /// In the wide layout with a separate reporting-rate table: where each
    /// plain rate was read (file, line and column of that table), by the
    /// row's line and month, so messages about the rate point there.
    rate_places: HashMap<(u64, YearMonth), String>,
}

impl<'o> Collector<'o> {
    pub(crate) fn new(options: &'o ReadOptions, unit: &'static str) -> Self {
        Collector {
            options,
            unit,
            names: Interned::default(),
            rows: Vec::new(),
            plain_rate: Vec::new(),
            rejected: Vec::new(),
            rows_read: 0,
            month_columns: None,
            rate_places: HashMap::new(),
        }
    }

    /// A collector for the wide layout: rejections name the month's column.
    pub(crate) fn wide(
        options: &'o ReadOptions,
        unit: &'static str,
        month_columns: HashMap<YearMonth, String>,
    ) -> Self {
        Collector {
            month_columns: Some(month_columns),
            ..Collector::new(options, unit)
        }
    }

    /// Rows (values) read so far.
    pub(crate) fn rows_read(&self) -> usize {
        self.rows_read
    }

    /// Rejections so far.
    pub(crate) fn rejected_len(&self) -> usize {
        self.rejected.len()
    }

    /// The rejection made last, to say more about where it is.
    pub(crate) fn last_rejected_mut(&mut self) -> Option<&mut RejectedRow> {
        self.rejected.last_mut()
    }

    /// Counts a row that is refused before its values are read.
    pub(crate) fn reject(
        &mut self,
        line: u64,
        column: Option<String>,
        value: String,
        reason: String,
        raw: String,
    ) {
        self.rows_read += 1;
        self.rejected.push(RejectedRow {
            line,
            column,
            value,
            reason,
            raw,
        });
    }

    /// Reads one data row: accepted, or rejected with the reason.
    pub(crate) fn add(
        &mut self,
        line: u64,
        cells: &dyn RowCells,
        columns: &Columns,
        raw: impl FnOnce() -> String,
    ) {
        self.rows_read += 1;
        match parse_row(line, cells, columns, self.options, &mut self.names) {
            Ok((row, plain)) => {
                if plain {
                    self.plain_rate.push(self.rows.len());
                }
                self.rows.push(row);
            }
            Err((column, value, reason)) => self.rejected.push(RejectedRow {
                line,
                column,
                value,
                reason,
                raw: raw(),
            }),
        }
    }

    /// Says where the plain reporting rate of the row just added was read,
    /// when it came from another table than the consumption's; nothing
    /// when the last row added had no plain rate.
    pub(crate) fn rate_read_at(&mut self, place: impl FnOnce() -> String) {
        let last = self.rows.len().wrapping_sub(1);
        if self.plain_rate.last() == Some(&last) {
            let r = &self.rows[last];
            self.rate_places.insert((r.line, r.month), place());
        }
    }

    /// Settles percentages, duplicates and spans, and checks that something
    /// usable was read.
    pub(crate) fn finish(
        self,
        source: &str,
        input_sha256: String,
        mut layout: Layout,
        input_err: &InputErr<'_>,
        reread: &Reread<'_>,
    ) -> Result<Dataset> {
        let Collector {
            unit,
            rows,
            plain_rate,
            mut rejected,
            rows_read,
            options,
            month_columns,
            rate_places,
            ..
        } = self;
        // The column a rejection settled here names: the contract's column,
        // or in the wide layout the month's column.
        let column_of = |row: &InputRow, contract: Option<&str>| -> Option<String> {
            match &month_columns {
                Some(m) => m.get(&row.month).cloned(),
                None => contract.map(str::to_string),
            }
        };
        let mut warnings = Vec::new();
        let rate_place = |row: &InputRow| rate_places.get(&(row.line, row.month)).cloned();
        let (mut rows, percent) = settle_rate_scale(
            rows,
            &plain_rate,
            unit,
            &mut rejected,
            &mut warnings,
            (&column_of, &rate_place),
        );
        drop(plain_rate);
        rows.shrink_to_fit();

        let mut merged = Vec::new();
        let mut rows = resolve_duplicates(
            rows,
            options.duplicates,
            unit,
            &mut rejected,
            &mut merged,
            &column_of,
        );
        rows.shrink_to_fit();
        check_span(&rows).map_err(|(line, m)| input_err(line, None, m))?;
        let wanted: BTreeSet<u64> = rejected
            .iter()
            .filter(|r| r.raw.is_empty())
            .map(|r| r.line)
            .collect();
        if !wanted.is_empty() {
            let texts = reread(&wanted);
            for r in rejected.iter_mut().filter(|r| r.raw.is_empty()) {
                if let Some(t) = texts.get(&r.line) {
                    r.raw = t.clone();
                }
            }
        }
        rejected.sort_by_key(|r| r.line);
        merged.sort_by_key(|m| m.line);

        if !layout.extra_columns.is_empty() {
            warnings.push(format!(
                "extra columns kept in the file but not used: {}",
                layout.extra_columns.join(", ")
            ));
        }
        if rows_read == 0 {
            return Err(input_err(
                0,
                None,
                format!(
                    "the {} has a header but no data rows",
                    if layout.sheet.is_some() {
                        "sheet"
                    } else {
                        "file"
                    }
                ),
            ));
        }
        if rows.is_empty() && merged.is_empty() {
            let first = rejected
                .first()
                .map(|r| format!("; first problem, {unit} {}: {}", r.line, r.reason))
                .unwrap_or_default();
            return Err(input_err(
                0,
                None,
                format!("no usable rows: all {rows_read} data rows were rejected{first}"),
            ));
        }
        layout.reporting_rate_as_percent = percent;
        Ok(Dataset {
            source: source.to_string(),
            input_sha256,
            rows_read,
            rows,
            rejected,
            merged,
            warnings,
            layout,
        })
    }
}

/// The column a rejection names, from its row and the contract's column.
type ColumnOf<'a> = dyn Fn(&InputRow, Option<&str>) -> Option<String> + 'a;

/// Where a row's reporting rate was read, when another table than the
/// consumption's held it.
type RatePlace<'a> = dyn Fn(&InputRow) -> Option<String> + 'a;

/// Lines as a short list: the first ten, then how many more.
fn some_lines(lines: &[u64]) -> String {
    let mut out: Vec<String> = lines.iter().take(10).map(u64::to_string).collect();
    if lines.len() > 10 {
        out.push(format!("and {} more", lines.len() - 10));
    }
    out.join(", ")
}

/// Settles, product by product, the scale of reporting rates written as
/// plain numbers (no % sign): fractions (0.9) unless the product's plain
/// rates are above 1 (90), then percentages. A product whose plain rates
/// mix the two (0.9 and 95) is not reread either way: the rates of the
/// smaller group are refused, naming the lines of both (on a tie, all of
/// them), so one typing slip never rescales a column. A rate of 0 is 0 on
/// either scale. Returns the rows kept and whether any product's plain
/// rates were read as percentages.
fn settle_rate_scale(
    mut rows: Vec<InputRow>,
    plain: &[usize],
    unit: &str,
    rejected: &mut Vec<RejectedRow>,
    warnings: &mut Vec<String>,
    (column_of, rate_place): (&ColumnOf<'_>, &RatePlace<'_>),
) -> (Vec<InputRow>, bool) {
    // Per product: rows with a plain rate in (0, 1] and above 1.
    let mut by_product: BTreeMap<Arc<str>, (Vec<usize>, Vec<usize>)> = BTreeMap::new();
    for &i in plain {
        let Some(r) = rows[i].reporting_rate else {
            continue;
        };
        if r == 0.0 {
            continue;
        }
        let e = by_product.entry(rows[i].product.clone()).or_default();
        if r > 1.0 {
            e.1.push(i);
        } else {
            e.0.push(i);
        }
    }
    let mut refuse = vec![false; rows.len()];
    let mut percent_products = Vec::new();
    for (product, (fractions, percents)) in &by_product {
        if percents.is_empty() {
            continue;
        }
        // Where the rates were read: the lines of the table, or in the
        // wide layout with a rate table, that table's cells.
        let places = |ix: &[usize]| {
            let at: Vec<String> = ix.iter().filter_map(|&i| rate_place(&rows[i])).collect();
            if at.len() == ix.len() && !at.is_empty() {
                let mut shown: Vec<String> = at.iter().take(10).cloned().collect();
                if at.len() > 10 {
                    shown.push(format!("and {} more", at.len() - 10));
                }
                shown.join("; ")
            } else {
                let lines = ix.iter().map(|&i| rows[i].line).collect::<Vec<_>>();
                format!("{unit}s {}", some_lines(&lines))
            }
        };
        if !fractions.is_empty() {
            let (f, p) = (places(fractions), places(percents));
            let what = format!(
                "the plain reporting rates of {product} mix fractions 0-1 ({f}) and percentages above 1 ({p})"
            );
            let bad: Vec<usize> = match fractions.len().cmp(&percents.len()) {
                std::cmp::Ordering::Greater => percents.clone(),
                std::cmp::Ordering::Less => fractions.clone(),
                std::cmp::Ordering::Equal => fractions.iter().chain(percents).copied().collect(),
            };
            for &i in &bad {
                refuse[i] = true;
                let v = rows[i].reporting_rate.unwrap_or(0.0);
                rejected.push(RejectedRow {
                    line: rows[i].line,
                    column: column_of(&rows[i], Some("reporting_rate")),
                    value: format_number(v),
                    reason: format!(
                        "reporting_rate {}{}: {what}; the fewer are refused rather than rescaled: write a fraction (0.95) or a percentage with its sign (95%)",
                        format_number(v),
                        rate_place(&rows[i]).map(|at| format!(" at {at}")).unwrap_or_default()
                    ),
                    raw: String::new(),
                });
            }
            warnings.push(format!(
                "{what}: {} rate(s) refused, the others read as {}",
                bad.len(),
                match fractions.len().cmp(&percents.len()) {
                    std::cmp::Ordering::Greater => "fractions",
                    std::cmp::Ordering::Less => "percentages",
                    std::cmp::Ordering::Equal => "neither (as many of each)",
                }
            ));
            if fractions.len() >= percents.len() {
                continue;
            }
        }
        percent_products.push(product.to_string());
    }
    // Percent products: every plain rate of theirs, zeros included, is /100.
    let percent_set: HashSet<&str> = percent_products.iter().map(String::as_str).collect();
    for &i in plain {
        if !refuse[i] && percent_set.contains(&*rows[i].product) {
            if let Some(r) = rows[i].reporting_rate.as_mut() {
                *r /= 100.0;
            }
        }
    }
    if !percent_products.is_empty() {
        let mut names: Vec<String> = percent_products.iter().take(5).cloned().collect();
        if percent_products.len() > 5 {
            names.push(format!("and {} more", percent_products.len() - 5));
        }
        warnings.push(format!(
            "reporting_rate: plain numbers are read as percentages (80 = 80%) for {}, whose plain rates are above 1; as fractions (0.8 = 80%) elsewhere",
            names.join(", ")
        ));
    }
    if refuse.iter().any(|&r| r) {
        let mut k = 0;
        rows.retain(|_| {
            k += 1;
            !refuse[k - 1]
        });
    }
    (rows, !percent_products.is_empty())
}

/// Cleaning lays every site of a product on the product's whole calendar,
/// so its memory grows with sites × months spanned, not with rows. A year
/// typed wrong (1926 for 2026) in a file with many sites, or a hostile file,
/// could make that thousands of times the rows; such files are refused
/// before any of it is allocated.
pub const MAX_CELLS_PER_ROW: usize = 100;
/// Site-months always allowed, however few the rows.
pub const MIN_CELL_LIMIT: usize = 20_000_000;

fn check_span(rows: &[InputRow]) -> std::result::Result<(), (u64, String)> {
    struct Span {
        first: (YearMonth, u64),
        last: YearMonth,
        sites: HashSet<usize>,
    }
    let mut spans: HashMap<usize, Span> = HashMap::new();
    for r in rows {
        let (product, site, month) = key_of(r);
        let s = spans.entry(product).or_insert_with(|| Span {
            first: (month, r.line),
            last: month,
            sites: HashSet::new(),
        });
        if month < s.first.0 {
            s.first = (month, r.line);
        }
        s.last = s.last.max(month);
        s.sites.insert(site);
    }
    let cells = |s: &Span| s.sites.len() * (s.first.0.months_until(s.last) as usize + 1);
    let total: usize = spans.values().map(cells).sum();
    let limit = MIN_CELL_LIMIT.max(MAX_CELLS_PER_ROW * rows.len());
    if total <= limit {
        return Ok(());
    }
    let Some((product, worst)) = spans.iter().max_by_key(|(_, s)| cells(s)) else {
        return Ok(());
    };
    let name = rows
        .iter()
        .find(|r| Arc::as_ptr(&r.product) as *const u8 as usize == *product)
        .map(|r| r.product.to_string())
        .unwrap_or_default();
    Err((
        worst.first.1,
        format!(
            "the rows span {total} site-months (each site over its product's first to last month), more than {MAX_CELLS_PER_ROW} for each of the {} rows; product '{name}' alone has {} site(s) from {} to {}: a year is probably mistyped (the earliest month is on this line)",
            rows.len(),
            worst.sites.len(),
            worst.first.0,
            worst.last
        ),
    ))
}

/// Reads the file again and returns the text of the rows at `lines`.
fn reread_rows(open: &Open<'_>, encoding: Encoding, lines: &BTreeSet<u64>) -> HashMap<u64, String> {
    let mut found = HashMap::new();
    let Ok(file) = open() else {
        return found;
    };
    let Ok(mut records) = Records::open(file, encoding) else {
        return found;
    };
    let delimiter = records.delimiter as char;
    let last = lines.last().copied().unwrap_or(0);
    while let Ok(Some(line)) = records.next_record() {
        if lines.contains(&line) {
            found.insert(line, records.fields().joined(delimiter));
        }
        if line >= last {
            break;
        }
    }
    found
}

/// Column positions of the contract's fields in one file.
pub(crate) struct Columns {
    pub(crate) product: usize,
    pub(crate) month: usize,
    pub(crate) consumed: usize,
    pub(crate) stockout_days: Option<usize>,
    pub(crate) reporting_rate: Option<usize>,
    pub(crate) site: Option<usize>,
    width: usize,
    delimiter: char,
    /// Whether the input is a workbook sheet (messages mention merged cells).
    pub(crate) in_sheet: bool,
}

impl Columns {
    /// Positions in a row built from one value of the wide layout:
    /// product, month, consumed, stockout days, reporting rate, site.
    pub(crate) fn wide_row(in_sheet: bool, has_site: bool) -> Columns {
        Columns {
            product: 0,
            month: 1,
            consumed: 2,
            stockout_days: Some(3),
            reporting_rate: Some(4),
            site: has_site.then_some(5),
            width: 6,
            delimiter: ',',
            in_sheet,
        }
    }

    /// The contract's columns present, with their positions.
    pub(crate) fn present(&self) -> Vec<(&'static str, usize)> {
        let mut v = vec![
            ("product", self.product),
            ("month", self.month),
            ("consumed", self.consumed),
        ];
        let optional = [
            ("stockout_days", self.stockout_days),
            ("reporting_rate", self.reporting_rate),
            ("site", self.site),
        ];
        v.extend(optional.iter().filter_map(|(n, c)| c.map(|c| (*n, c))));
        v
    }
}

/// A header name as matched: trimmed, lowercase, spaces and hyphens as underscores.
pub(crate) fn normalise_name(name: &str) -> String {
    name.trim()
        .to_lowercase()
        .chars()
        .map(|c| if c == ' ' || c == '-' { '_' } else { c })
        .collect()
}

/// The message for a header without some required columns: which are
/// missing, what the header has, and what is required and optional.
pub(crate) fn missing_columns_message(
    missing: &[&str],
    header: &[&str],
    required: &[&str],
    optional: &[&str],
) -> String {
    format!(
        "missing required column{} {}; the header has: {}; required: {} (optional: {})",
        if missing.len() > 1 { "s" } else { "" },
        missing
            .iter()
            .map(|m| format!("'{m}'"))
            .collect::<Vec<_>>()
            .join(", "),
        header.join(", "),
        required.join(", "),
        optional.join(", "),
    )
}
/// Finds the contract's columns in a header; returns them and the names
/// of the extra columns.
pub(crate) fn map_header(header: &[&str]) -> std::result::Result<(Columns, Vec<String>), String> {
    let names: Vec<String> = header.iter().map(|h| normalise_name(h)).collect();
    let mut found: HashMap<&str, usize> = HashMap::new();
    let mut extra = Vec::new();
    for (i, name) in names.iter().enumerate() {
        let known = REQUIRED
            .iter()
            .chain(OPTIONAL.iter())
            .find(|k| **k == name.as_str());
        match known {
            Some(k) => {
                if let Some(prev) = found.insert(k, i) {
                    return Err(format!(
                        "column '{k}' appears twice (fields {} and {}); keep one",
                        prev + 1,
                        i + 1
                    ));
                }
            }
            None if name.is_empty() => {}
            None => extra.push(header.get(i).copied().unwrap_or("").trim().to_string()),
        }
    }
    let missing: Vec<&str> = REQUIRED
        .iter()
        .copied()
        .filter(|k| !found.contains_key(k))
        .collect();
    if !missing.is_empty() {
        let shown: Vec<&str> = header.iter().map(|h| h.trim()).collect();
        let mut msg = missing_columns_message(&missing, &shown, &REQUIRED, &OPTIONAL);
        for m in &missing {
            if let Some(codes) = names.iter().find_map(|n| invisible_in(n, m)) {
                msg.push_str(&format!(
                    "; the header's '{m}' holds the invisible character(s) {codes} (shown as <U+...>): delete that name and type it again"
                ));
                continue;
            }
            if let Some(near) = names.iter().find(|n| is_near(n, m)) {
                msg.push_str(&format!("; did you mean to name '{near}' as '{m}'?"));
            }
        }
        return Err(msg);
    }
    Ok((
        Columns {
            product: found["product"],
            month: found["month"],
            consumed: found["consumed"],
            stockout_days: found.get("stockout_days").copied(),
            reporting_rate: found.get("reporting_rate").copied(),
            site: found.get("site").copied(),
            width: names.len(),
            delimiter: ',',
            in_sheet: false,
        },
        extra,
    ))
}

/// Why a reporting rate written with a % sign is not a number, quoting the
/// value as written (with its sign).
fn percent_problem(t: &str, num: &str, why: String) -> String {
    if num.ends_with('%') {
        return format!("\"{t}\" has more than one % sign; write one, as in 85%");
    }
    let joined: String = num.chars().filter(|c| !c.is_whitespace()).collect();
    if joined != num
        && !joined.is_empty()
        && joined.bytes().all(|b| b.is_ascii_digit() || b == b'.')
    {
        return format!(
            "\"{t}\" has a space between its digits; a reporting rate has no digit groups: write it without the space ({joined}%, if that is the rate), as in 85%"
        );
    }
    why.replace(&format!("\"{num}\""), &format!("\"{t}\""))
}

/// Characters that show as nothing: zero-width spaces and joiners, the
/// soft hyphen, direction marks, overrides and isolates, the byte-order mark.
fn is_invisible(c: char) -> bool {
    matches!(c, '\u{ad}' | '\u{200b}'..='\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2060}'..='\u{2064}' | '\u{2066}'..='\u{2069}' | '\u{feff}')
}

/// When `name` is `wanted` with invisible characters in it, those
/// characters' code points ("U+200B").
fn invisible_in(name: &str, wanted: &str) -> Option<String> {
    let codes: Vec<String> = name
        .chars()
        .filter(|c| is_invisible(*c))
        .map(|c| format!("U+{:04X}", c as u32))
        .collect();
    let visible: String = name.chars().filter(|c| !is_invisible(*c)).collect();
    (!codes.is_empty() && visible == wanted).then(|| codes.join(", "))
}

/// Loose match for suggesting a column name: shared prefix of four letters.
fn is_near(candidate: &str, wanted: &str) -> bool {
    candidate.len() >= 4 && wanted.len() >= 4 && candidate[..].get(..4) == wanted.get(..4)
}

type RowProblem = (Option<String>, String, String);

/// A CSV row that cannot be read value by value: a quote left open, or
/// more fields than the header.
fn csv_row_problem(line: u64, rec: &Fields<'_>, cols: &Columns) -> Option<String> {
    if rec.iter().all(|f| f.trim().is_empty()) {
        return None;
    }
    // A value running over lines that hold as many delimiters as a whole
    // row is rows swallowed by a quote that was opened and never closed.
    let row_like = |l: &str| cols.width > 1 && l.matches(cols.delimiter).count() + 1 >= cols.width;
    if let Some(f) = rec.iter().find(|f| f.lines().skip(1).any(row_like)) {
        let n = f.lines().count();
        return Some(format!(
            "a quoted value runs over {n} lines (lines {line}-{}) and holds delimiters: a quote (\") is probably opened and never closed, so those lines were read as one value; close or remove the quote",
            line + n as u64 - 1
        ));
    }
    // One field holding another delimiter, under a header with several:
    // the rows are delimited differently from the header.
    let filled: Vec<&str> = rec.iter().filter(|f| !f.trim().is_empty()).collect();
    if let ([only], true) = (filled.as_slice(), cols.width > 1 && !cols.in_sheet) {
        let other = [';', '\t', ',', '|']
            .into_iter()
            .find(|&c| c != cols.delimiter && only.matches(c).count() + 1 >= cols.width);
        if let Some(c) = other {
            let shown = if c == '\t' {
                "tab".to_string()
            } else {
                format!("'{c}'")
            };
            let header = if cols.delimiter == '\t' {
                "tab".to_string()
            } else {
                format!("'{}'", cols.delimiter)
            };
            return Some(format!(
                "the row is one field holding {shown} between values, but the header is delimited by {header}: the rows and the header use different delimiters; save the file with one delimiter throughout"
            ));
        }
    }
    if rec.len() > cols.width && rec.iter().skip(cols.width).any(|f| !f.trim().is_empty()) {
        return Some(format!(
            "the row has {} fields but the header has {}; check for an unquoted delimiter inside a value (a thousands separator as in 1,234, or a comma in a name: put the value in quotes)",
            rec.len(),
            cols.width
        ));
    }
    None
}

/// Too few fields: a required column with no field at all is a row cut
/// short (a missing delimiter), not a blank value; missing optional
/// columns at the end are read as blank, as some programs drop them.
fn short_row_problem(rec: &Fields<'_>, cols: &Columns) -> Option<String> {
    if rec.iter().all(|f| f.trim().is_empty()) {
        return None;
    }
    let required = [
        ("product", cols.product),
        ("month", cols.month),
        ("consumed", cols.consumed),
    ];
    if let Some((name, _)) = required.iter().find(|(_, i)| *i >= rec.len()) {
        return Some(format!(
            "the row has {} field(s) but the header has {}: there is no field for '{name}' (a blank value still needs its delimiter, as in A,2024-02,); add the missing value or delimiter",
            rec.len(),
            cols.width
        ));
    }
    None
}

/// Why a cell that should hold text or a number cannot be used, or `None`.
fn cell_refusal(cell: Cell<'_>, what: &str) -> Option<String> {
    match cell {
        Cell::Bool(b) => Some(format!(
            "the cell holds the true/false value {}, not {what}",
            if b { "TRUE" } else { "FALSE" }
        )),
        Cell::Error(e) => Some(format!(
            "the cell holds the spreadsheet error {e}, not {what}; correct the formula or the value it refers to"
        )),
        Cell::Uncalculated(_) => Some(format!(
            "the cell holds the formula {} with no saved value (the workbook was written by a program that does not calculate); open and save it in a spreadsheet program, or paste the values",
            cell.shown()
        )),
        _ => None,
    }
}

fn problem(col: &str, value: &str, reason: String) -> RowProblem {
    (Some(col.to_string()), value.to_string(), reason)
}

/// Text of a name column: text as it is, a number as written.
fn name_cell<'a>(
    rec: &'a dyn RowCells,
    col: &str,
    i: usize,
) -> std::result::Result<std::borrow::Cow<'a, str>, RowProblem> {
    let cell = rec.cell(i);
    if let Some(why) = cell_refusal(cell, "a name") {
        return Err(problem(col, &cell.shown(), why));
    }
    let text = match cell {
        Cell::Text(t) => std::borrow::Cow::Borrowed(t.trim()),
        other => std::borrow::Cow::Owned(other.shown()),
    };
    if let Some((at, c)) = text
        .chars()
        .enumerate()
        .find(|(_, c)| is_refused_control(*c))
    {
        return Err(problem(
            col,
            &text,
            format!(
                "{col} holds the control character U+{:04X} at character {}; a name may hold any printable text, tabs and line breaks, but not control characters (they corrupt terminals and other programs): remove it",
                c as u32,
                at + 1
            ),
        ));
    }
    Ok(text)
}

/// A control character refused in names: C0 and C1 controls and DEL,
/// except tab, line feed and carriage return (a quoted CSV name may hold
/// them, and the outputs quote them).
pub(crate) fn is_refused_control(c: char) -> bool {
    c.is_control() && !matches!(c, '\t' | '\n' | '\r')
}

/// A quantity and its text as found: text is read in the declared number
/// format; a number cell is a number.
fn number_cell(
    rec: &dyn RowCells,
    col: &str,
    i: usize,
    numbers: NumberFormat,
) -> std::result::Result<(Option<f64>, String), RowProblem> {
    let cell = rec.cell(i);
    if let Some(why) = cell_refusal(cell, "a number") {
        return Err(problem(col, &cell.shown(), why));
    }
    match cell {
        Cell::Text(t) => {
            let t = t.trim();
            let v = parse_number(t, numbers).map_err(|m| problem(col, t, m))?;
            Ok((v, t.to_string()))
        }
        Cell::Number(x) if x.is_finite() => Ok((Some(x), format_number(x))),
        Cell::Empty => Ok((None, String::new())),
        other => {
            let shown = other.shown();
            let what = match other {
                Cell::Date(..) => format!("the date {shown}"),
                _ => format!("\"{shown}\""),
            };
            Err(problem(
                col,
                &shown,
                format!("the cell holds {what}, not a number; expected a number, or an empty cell for not reported"),
            ))
        }
    }
}

/// Parses one data row. Returns the row and whether its reporting rate is
/// a plain number (no % sign), whose scale is settled after the last row.
fn parse_row(
    line: u64,
    rec: &dyn RowCells,
    cols: &Columns,
    options: &ReadOptions,
    names: &mut Interned,
) -> std::result::Result<(InputRow, bool), RowProblem> {
    if rec.is_blank() {
        return Err((None, String::new(), "the row is empty".to_string()));
    }
    let problem =
        |col: &str, value: &str, reason: String| (Some(col.to_string()), value.to_string(), reason);
    let merged_hint = if cols.in_sheet {
        " (a merged cell keeps its value in its first row only: unmerge the cells and fill the value into every row)"
    } else {
        ""
    };
    let name = |col: &str, i: usize| name_cell(rec, col, i);
    let number = |col: &str, i: usize| number_cell(rec, col, i, options.numbers);

    let product = name("product", cols.product)?;
    if product.is_empty() {
        return Err(problem(
            "product",
            "",
            format!("product is empty; every row needs a product code or name{merged_hint}"),
        ));
    }
    if super::wide::is_total_name(&product) {
        return Err(problem(
            "product",
            &product,
            format!("the row's product is '{product}', a totals row, not a product: provisio adds the products up itself; delete the row (or rename it, if it is a product)"),
        ));
    }
    let month_cell = rec.cell(cols.month);
    let month_text = month_cell.shown();
    let month_text = month_text.as_str();
    if let Some(why) = cell_refusal(month_cell, "a month") {
        return Err(problem("month", month_text, why));
    }
    let month = match month_cell {
        Cell::Date(y, m, _) => YearMonth::new(y, m).ok_or_else(|| {
            problem(
                "month",
                month_text,
                format!("the date {month_text} is outside the years 1900-2100"),
            )
        })?,
        Cell::Number(_) => parse_month(month_text).map_err(|m| {
            problem(
                "month",
                month_text,
                format!("{m} (the cell holds a number, not a date: format the column as a date, or write the month as text such as 2024-03)"),
            )
        })?,
        _ => parse_month(month_text).map_err(|m| problem("month", month_text, m))?,
    };
    if let Some(latest) = options.latest_month {
        if month > latest {
            return Err(problem(
                "month",
                month_text,
                format!("month {month} is after the current month ({latest}): consumption cannot be reported for a month that has not come yet; check the year"),
            ));
        }
    }

    let (consumed, consumed_text) = number("consumed", cols.consumed)?;
    let consumed_text = consumed_text.as_str();
    if let Some(c) = consumed {
        if c > MAX_QUANTITY {
            return Err(problem(
                "consumed",
                consumed_text,
                format!("consumed {consumed_text} is over 10^15 units in a month, more than any real quantity (and large enough to break the arithmetic); check the value"),
            ));
        }
        if c < 0.0 {
            return Err(problem(
                "consumed",
                consumed_text,
                format!("consumed {consumed_text} is negative; expected a quantity of 0 or more (a correction belongs in the month it corrects)"),
            ));
        }
    }

    let stockout_days = match cols.stockout_days {
        None => None,
        Some(i) => {
            let (v, t) = number("stockout_days", i)?;
            if let Some(d) = v {
                let dim = month.days();
                if d < 0.0 || d > dim as f64 {
                    return Err(problem(
                        "stockout_days",
                        &t,
                        format!("stockout_days {t} is outside 0-{dim} ({month} has {dim} days)"),
                    ));
                }
            }
            v
        }
    };

    let mut plain = false;
    let reporting_rate = match cols.reporting_rate {
        None => None,
        Some(i) => {
            let (v, t, percent) = match rec.cell(i) {
                Cell::Text(t) => {
                    let t = t.trim();
                    let (num, percent) = match t.strip_suffix('%') {
                        Some(n) => (n.trim(), true),
                        None => (t, false),
                    };
                    if percent && num.is_empty() {
                        return Err(problem(
                            "reporting_rate",
                            t,
                            "reporting_rate is a % sign with no number; write the rate (85%), or leave the cell empty when it is not known".to_string(),
                        ));
                    }
                    let v = parse_number(num, options.numbers).map_err(|m| {
                        let why = if percent {
                            percent_problem(t, num, m)
                        } else {
                            m
                        };
                        problem("reporting_rate", t, why)
                    })?;
                    (v, t.to_string(), percent)
                }
                // A cell formatted as a percentage holds the fraction.
                _ => {
                    let (v, t) = number("reporting_rate", i)?;
                    (v, t, false)
                }
            };
            let t = t.as_str();
            match v {
                None => None,
                Some(r) => {
                    // A plain number may still turn out to be a percentage
                    // (when another plain value exceeds 1): only 0-100 can
                    // be valid either way.
                    let (frac, limit) = if percent {
                        (r / 100.0, 1.0)
                    } else {
                        (r, 100.0)
                    };
                    if !(0.0..=limit).contains(&frac) {
                        return Err(problem(
                            "reporting_rate",
                            t,
                            format!("reporting_rate {t} is outside 0-100%; expected a fraction 0-1 (0.85) or a percentage 0-100 (85 or 85%)"),
                        ));
                    }
                    if frac == 0.0 && consumed.is_some_and(|c| c > 0.0) {
                        return Err(problem(
                            "reporting_rate",
                            t,
                            format!("reporting_rate is 0 but consumed is {consumed_text}: a month with no reports cannot have consumption; leave consumed empty or correct the rate"),
                        ));
                    }
                    plain = !percent;
                    Some(frac)
                }
            }
        }
    };

    let site = match cols.site {
        None => None,
        Some(i) => {
            let s = name("site", i)?;
            if s.is_empty() {
                return Err(problem(
                    "site",
                    "",
                    format!("site is empty while the file has a site column; name the site, or put all-site totals in a file of their own{merged_hint}"),
                ));
            }
            if super::wide::is_total_site(&s) {
                return Err(problem(
                    "site",
                    &s,
                    format!("the row's site is '{s}', a subtotal of the product's sites, not a site: provisio adds the sites up itself, and counting it too would double the product; delete the row (or rename it, if it is a site)"),
                ));
            }
            Some(names.sites.get(&s))
        }
    };

    Ok((
        InputRow {
            line,
            product: names.products.get(&product),
            site,
            month,
            consumed,
            stockout_days,
            reporting_rate,
        },
        plain,
    ))
}

/// Product, site and month of a row. Names are shared (one allocation per
/// distinct name), so their addresses identify them.
type Key = (usize, usize, YearMonth);

fn key_of(row: &InputRow) -> Key {
    (
        Arc::as_ptr(&row.product) as *const u8 as usize,
        row.site
            .as_ref()
            .map_or(0, |s| Arc::as_ptr(s) as *const u8 as usize),
        row.month,
    )
}

/// Settles rows with the same key. Rejected rows get an empty `raw`, filled
/// in by the caller.
///
/// The rows are settled in place: the copies of a key are found by sorting
/// row numbers by key (8 bytes a row) rather than with a map from key to
/// row and a second list of the rows, which on a national file took more
/// memory than the rows themselves. Copies are settled in file order, as
/// the messages and sums depend on it.
fn resolve_duplicates(
    mut rows: Vec<InputRow>,
    policy: DuplicatePolicy,
    unit: &str,
    rejected: &mut Vec<RejectedRow>,
    merged: &mut Vec<MergedRow>,
    column_of: &ColumnOf<'_>,
) -> Vec<InputRow> {
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_unstable_by_key(|&i| (key_of(&rows[i]), i));
    let mut dropped = vec![false; rows.len()];
    // Settled copies, by row number, put in file order below.
    let mut later: Vec<(usize, RejectedRow)> = Vec::new();
    let mut folded: Vec<(usize, MergedRow)> = Vec::new();
    let mut conflicted: Vec<usize> = Vec::new();
    let mut start = 0;
    while start < order.len() {
        let idx = order[start];
        let key = key_of(&rows[idx]);
        let mut end = start + 1;
        while end < order.len() && key_of(&rows[order[end]]) == key {
            end += 1;
        }
        let copies = &order[start + 1..end];
        start = end;
        for &j in copies {
            dropped[j] = true;
            let (first, row) = (&rows[idx], &rows[j]);
            let first_line = first.line;
            let what = describe_key(row);
            let same = first.consumed == row.consumed
                && first.stockout_days == row.stockout_days
                && first.reporting_rate == row.reporting_rate;
            let reject = |reason: String| RejectedRow {
                line: row.line,
                column: column_of(row, None),
                value: String::new(),
                reason,
                raw: String::new(),
            };
            match policy {
                DuplicatePolicy::Reject if same => later.push((
                    j,
                    reject(format!(
                        "exact duplicate of {unit} {first_line} ({what}); the first copy is used"
                    )),
                )),
                DuplicatePolicy::Reject => {
                    if conflicted.last() != Some(&idx) {
                        conflicted.push(idx);
                    }
                    later.push((
                        j,
                        reject(format!(
                            "duplicate of {unit} {first_line} ({what}) with different values; both rejected, the month is treated as missing (use --duplicates sum to add them)"
                        )),
                    ));
                }
                DuplicatePolicy::Sum => {
                    let agree = first.stockout_days == row.stockout_days
                        && first.reporting_rate == row.reporting_rate;
                    if agree {
                        let (line, month, consumed) = (row.line, row.month, row.consumed);
                        let (product, site) = (row.product.clone(), row.site.clone());
                        let f = &mut rows[idx];
                        let before = f.consumed;
                        f.consumed = match (f.consumed, consumed) {
                            (None, None) => None,
                            (a, b) => Some(a.unwrap_or(0.0) + b.unwrap_or(0.0)),
                        };
                        folded.push((
                            j,
                            MergedRow {
                                line,
                                into_line: first_line,
                                month,
                                product,
                                site,
                                before,
                                after: f.consumed,
                            },
                        ));
                    } else {
                        later.push((
                            j,
                            reject(format!(
                                "duplicate of {unit} {first_line} ({what}) with different stockout_days or reporting_rate, so the quantities cannot be added"
                            )),
                        ));
                    }
                }
            }
        }
    }
    later.sort_unstable_by_key(|(j, _)| *j);
    rejected.extend(later.into_iter().map(|(_, r)| r));
    folded.sort_unstable_by_key(|(j, _)| *j);
    merged.extend(folded.into_iter().map(|(_, m)| m));
    conflicted.sort_unstable();
    for idx in conflicted {
        dropped[idx] = true;
        let row = &rows[idx];
        let what = describe_key(row);
        rejected.push(RejectedRow {
            line: row.line,
            column: column_of(row, None),
            value: String::new(),
            reason: format!("has a duplicate with different values later in the file ({what}); both rejected, the month is treated as missing"),
            raw: String::new(),
        });
    }
    let mut k = 0;
    rows.retain(|_| {
        k += 1;
        !dropped[k - 1]
    });
    rows
}

fn describe_key(row: &InputRow) -> String {
    match &row.site {
        Some(s) => format!(
            "product '{}', site '{}', month {}",
            row.product, s, row.month
        ),
        None => format!("product '{}', month {}", row.product, row.month),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Dataset> {
        read_csv_bytes("t.csv", text.as_bytes(), &ReadOptions::default())
    }

    #[test]
    fn detects_semicolon_and_bom() {
        let d = read("\u{feff}Product;Month;Consumed\nA;2024-01;5\nA;2024-02;6\n").unwrap();
        assert_eq!(d.layout.delimiter, ';');
        assert!(d.layout.had_bom);
        assert_eq!(d.rows.len(), 2);
        assert_eq!(d.rows[1].consumed, Some(6.0));
        assert_eq!(d.rows[1].line, 3);
    }

    #[test]
    fn detects_tab() {
        let d = read("product\tmonth\tconsumed\nA\t2024-01-31\t5\n").unwrap();
        assert_eq!(d.layout.delimiter, '\t');
        assert_eq!(d.rows[0].month.to_string(), "2024-01");
    }

    #[test]
    fn reporting_rate_fraction_or_percent() {
        let d = read("product,month,consumed,reporting_rate\nA,2024-01,5,0.8\nA,2024-02,5,90%\n")
            .unwrap();
        assert_eq!(d.rows[0].reporting_rate, Some(0.8));
        assert!((d.rows[1].reporting_rate.unwrap() - 0.9).abs() < 1e-12);
        let d = read(
            "product,month,consumed,reporting_rate\nA,2024-01,5,80\nA,2024-02,,0\nB,2024-01,5,0.5\n",
        )
        .unwrap();
        assert!(d.layout.reporting_rate_as_percent);
        assert!((d.rows[0].reporting_rate.unwrap() - 0.8).abs() < 1e-12);
        assert_eq!(d.rows[1].reporting_rate, Some(0.0));
        // Another product's plain rates keep their own scale.
        assert_eq!(d.rows[2].reporting_rate, Some(0.5));
    }

    #[test]
    fn one_rate_on_the_other_scale_is_refused_not_used_to_rescale_the_product() {
        // 36 months at 0.9 and one 95: the 95 is refused with the lines of
        // both groups; the 0.9s stay 0.9 (issue 20, item 3).
        let mut text = String::from("product,month,consumed,reporting_rate\n");
        for m in 0..36 {
            let rate = if m == 20 { "95" } else { "0.9" };
            text.push_str(&format!(
                "ORS,{}-{:02},100,{rate}\n",
                2021 + m / 12,
                m % 12 + 1
            ));
        }
        text.push_str("ZINC,2021-01,5,95\nZINC,2021-02,5,80\n");
        let d = read(&text).unwrap();
        assert_eq!(d.rejected.len(), 1);
        let r = &d.rejected[0];
        assert_eq!(
            (r.line, r.column.as_deref(), r.value.as_str()),
            (22, Some("reporting_rate"), "95")
        );
        assert!(r.reason.contains("mix fractions 0-1 (lines 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, and 25 more) and percentages above 1 (lines 22)"), "{}", r.reason);
        assert!(r.raw.contains("ORS,2022-09,100,95"), "{}", r.raw);
        let ors: Vec<f64> = d
            .rows
            .iter()
            .filter(|r| &*r.product == "ORS")
            .filter_map(|r| r.reporting_rate)
            .collect();
        assert_eq!(ors.len(), 35);
        assert!(ors.iter().all(|&r| r == 0.9));
        // ZINC's plain rates are all above 1: percentages.
        let zinc: Vec<f64> = d
            .rows
            .iter()
            .filter(|r| &*r.product == "ZINC")
            .filter_map(|r| r.reporting_rate)
            .collect();
        assert!((zinc[0] - 0.95).abs() < 1e-12 && (zinc[1] - 0.8).abs() < 1e-12);
        assert!(
            d.warnings.iter().any(|w| w.contains("for ZINC")),
            "{:?}",
            d.warnings
        );
        // One 1.5 among 0.9s: the 1.5 row is refused, naming the column.
        let d = read("product,month,consumed,reporting_rate\nA,2024-01,5,0.9\nA,2024-02,5,1.5\nA,2024-03,5,0.9\n").unwrap();
        assert_eq!(d.rejected.len(), 1);
        assert_eq!(d.rejected[0].line, 3);
        assert!(d.rejected[0].reason.starts_with("reporting_rate 1.5: "));
        // Two above 1 against one fraction: the fraction is refused.
        let d = read("product,month,consumed,reporting_rate\nA,2024-01,5,0.9\nA,2024-02,5,90\nA,2024-03,5,5\n").unwrap();
        assert_eq!(d.rejected.iter().map(|r| r.line).collect::<Vec<_>>(), [2]);
        assert!((d.rows[0].reporting_rate.unwrap() - 0.9).abs() < 1e-12);
        assert!((d.rows[1].reporting_rate.unwrap() - 0.05).abs() < 1e-12);
        // As many of each: neither scale is guessed, both are refused.
        let d = read("product,month,consumed,reporting_rate\nA,2024-01,5,0.9\nA,2024-02,5,90\nA,2024-03,5,\n").unwrap();
        assert_eq!(
            d.rejected.iter().map(|r| r.line).collect::<Vec<_>>(),
            [2, 3]
        );
        assert!(!d.layout.reporting_rate_as_percent);
    }

    #[test]
    fn control_characters_in_names_are_refused_with_line_and_column() {
        // A NUL inside a product name (issue 20, item 5) and an ESC in a site.
        let d = read("product,month,consumed,site\nOR\0S,2024-01,5,A\nORS,2024-02,5,B\u{1b}]0;X\u{7}\nORS,2024-03,5,A\n").unwrap();
        assert_eq!(d.rows.len(), 1);
        let r = &d.rejected;
        assert_eq!((r[0].line, r[0].column.as_deref()), (2, Some("product")));
        assert!(
            r[0].reason
                .contains("control character U+0000 at character 3"),
            "{}",
            r[0].reason
        );
        assert_eq!((r[1].line, r[1].column.as_deref()), (3, Some("site")));
        assert!(
            r[1].reason.contains("U+001B at character 2"),
            "{}",
            r[1].reason
        );
        // Tabs and line breaks stay allowed in quoted names.
        let d = read("product,month,consumed\n\"a\tb\nc\",2024-01,5\n").unwrap();
        assert_eq!(&*d.rows[0].product, "a\tb\nc");
    }

    #[test]
    fn a_quote_left_open_on_the_last_line_rejects_that_row() {
        for text in [
            "product,month,consumed\nA,2024-01,5\nA,\"2024-02,6\n",
            "product,month,consumed\nA,2024-01,5\nA,\"2024-02,6",
        ] {
            let d = read(text).unwrap();
            assert_eq!(d.rows.len(), 1, "{text:?}");
            assert_eq!(d.rejected.len(), 1, "{text:?}");
            assert_eq!(d.rejected[0].line, 3);
            assert!(d.rejected[0]
                .reason
                .contains("never closed before the end of the file"));
        }
        // A closed quote on the last line, with or without a line end, is fine.
        for text in [
            "product,month,consumed\nA,2024-01,5\n\"A\",2024-02,6\n",
            "product,month,consumed\nA,2024-01,5\n\"A \"\"x\"\"\",2024-02,6",
        ] {
            let d = read(text).unwrap();
            assert_eq!((d.rows.len(), d.rejected.len()), (2, 0), "{text:?}");
        }
    }

    #[test]
    fn a_pipe_delimited_file_is_told_its_delimiter_not_to_rename_its_header() {
        let e = read("product|month|consumed\nA|2024-01|5\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("delimited by '|'"), "{e}");
    }

    #[test]
    fn a_lone_percent_sign_is_refused_not_read_as_no_rate() {
        let d = read(
            "product,month,consumed,reporting_rate\nA,2024-01,5,%\nA,2024-02,5, % \nA,2024-03,5,\n",
        )
        .unwrap();
        assert_eq!(
            d.rejected.iter().map(|r| r.line).collect::<Vec<_>>(),
            [2, 3]
        );
        assert!(d.rejected[0].reason.contains("a % sign with no number"));
        assert_eq!(d.rows[0].reporting_rate, None);
    }

    #[test]
    fn a_rate_above_100_is_refused_and_does_not_rescale_the_others() {
        // 120 is refused on either scale; the 0.9 stays a fraction.
        let d = read("product,month,consumed,reporting_rate\nA,2024-01,5,0.9\nA,2024-02,5,120\nA,2024-03,5,90%\n")
            .unwrap();
        assert!(!d.layout.reporting_rate_as_percent);
        assert_eq!(d.rejected.len(), 1);
        assert_eq!(d.rows[0].reporting_rate, Some(0.9));
        assert!((d.rows[1].reporting_rate.unwrap() - 0.9).abs() < 1e-12);
    }

    #[test]
    fn future_months_are_rejected_when_a_limit_is_given() {
        let opts = ReadOptions {
            latest_month: YearMonth::new(2024, 2),
            ..ReadOptions::default()
        };
        let d = read_csv_bytes(
            "t.csv",
            b"product,month,consumed\nA,2024-02,5\nA,2024-03,5\n",
            &opts,
        )
        .unwrap();
        assert_eq!(d.rows.len(), 1);
        assert!(d.rejected[0]
            .reason
            .contains("after the current month (2024-02)"));
    }

    #[test]
    fn decimal_comma_and_latin1_on_request() {
        let opts = ReadOptions {
            numbers: NumberFormat::DecimalComma,
            encoding: Encoding::Latin1,
            ..ReadOptions::default()
        };
        let d = read_csv_bytes(
            "t.csv",
            b"product;month;consumed;reporting_rate\nCaf\xE9;2024-01;1.234,5;85,5%\n",
            &opts,
        )
        .unwrap();
        assert_eq!(&*d.rows[0].product, "Caf\u{e9}");
        assert_eq!(d.rows[0].consumed, Some(1234.5));
        assert!((d.rows[0].reporting_rate.unwrap() - 0.855).abs() < 1e-12);
    }

    #[test]
    fn names_are_shared_between_rows() {
        let d = read("product,site,month,consumed\nA,s,2024-01,5\nA,s,2024-02,5\n").unwrap();
        assert!(Arc::ptr_eq(&d.rows[0].product, &d.rows[1].product));
        assert!(Arc::ptr_eq(
            d.rows[0].site.as_ref().unwrap(),
            d.rows[1].site.as_ref().unwrap()
        ));
    }

    #[test]
    fn a_mistyped_year_across_many_sites_is_refused_before_cleaning() {
        // 20,000 sites with a row each; one more row dated 1926 instead of
        // 2026 would lay every site on 100 years: 24 million site-months.
        let mut text = String::from("product,site,month,consumed\n");
        for s in 0..20_000 {
            text.push_str(&format!("A,s{s},2026-01,1\n"));
        }
        assert!(read(&text).is_ok());
        text.push_str("A,s7,1926-02,1\n");
        let e = read(&text).unwrap_err().to_string();
        assert!(
            e.starts_with("t.csv:20002: the rows span 24000000 site-months"),
            "{e}"
        );
        assert!(
            e.contains("product 'A' alone has 20000 site(s) from 1926-02 to 2026-01"),
            "{e}"
        );
    }
}
