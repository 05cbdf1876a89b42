//! Reading the plan's inputs: the stock file, the shipments on order, and
//! the forecast of a `forecast` output directory.
//!
//! Stock and on-order files are small tables a planner fills in a
//! spreadsheet: header names are case-insensitive (spaces and hyphens count
//! as underscores), column order is free, the delimiter (comma, semicolon or
//! tab) is taken from the header, extra columns are ignored with a warning.
//! Any bad value refuses the whole file, naming file, line, column and what
//! would be valid: orders must not be proposed from half a stock file.

use std::collections::{BTreeMap, HashMap};
use std::path::Path;

use super::{Arrival, ForecastMonth, Policy, SeriesForecast};
use crate::calendar::YearMonth;
use crate::data::{parse_month, parse_number, NumberFormat};
use crate::error::{Error, Result};

/// A series: product, and site when planned per site.
pub type SeriesKey = (String, Option<String>);

/// A row of the stock file.
#[derive(Debug, Clone, PartialEq)]
pub struct StockRow {
    /// Physical line in the file.
    pub line: u64,
    /// Product, as in the forecast.
    pub product: String,
    /// Site, when the stock is held per site.
    pub site: Option<String>,
    /// The policy and position.
    pub policy: Policy,
}

/// A row of the on-order file.
#[derive(Debug, Clone, PartialEq)]
pub struct OnOrderRow {
    /// Physical line in the file.
    pub line: u64,
    /// Product.
    pub product: String,
    /// Site, when given.
    pub site: Option<String>,
    /// The shipment.
    pub arrival: Arrival,
}

/// The columns of the stock file: (name, required, what it holds).
pub const STOCK_COLUMNS: [(&str, bool, &str); 12] = [
    ("product", true, "product as named in the forecast"),
    (
        "site",
        false,
        "site or store, when the forecast is per site; empty = the product's total",
    ),
    (
        "stock_on_hand",
        true,
        "usable stock counted, base units (0 or more)",
    ),
    (
        "stock_date",
        true,
        "month of the count, YYYY-MM (stock at the end of that month)",
    ),
    (
        "lead_time_months",
        true,
        "whole months from placing an order to its arrival (0-36)",
    ),
    (
        "min_months",
        true,
        "minimum stock in months of AMC (0 or more, at most max_months)",
    ),
    (
        "max_months",
        true,
        "maximum stock in months of AMC (above 0)",
    ),
    (
        "review_period_months",
        true,
        "whole months between reviews and orders (1-24)",
    ),
    (
        "pack_size",
        true,
        "base units per pack (0.01 to 10^9); orders are whole packs",
    ),
    (
        "unit_cost",
        true,
        "cost of one base unit (0 or more), in the currency of your choice",
    ),
    (
        "shelf_life_months",
        false,
        "months a unit keeps from arrival (above 0); empty = not checked",
    ),
    (
        "emergency_months",
        false,
        "emergency point in months of AMC (0 to min_months); empty = not checked",
    ),
];

/// The columns of the on-order file.
pub const ON_ORDER_COLUMNS: [(&str, bool, &str); 5] = [
    ("product", true, "product as in the stock file"),
    ("site", false, "site, as in the stock file"),
    ("quantity", true, "quantity expected, base units (above 0)"),
    ("arrival_month", true, "expected month of arrival, YYYY-MM"),
    (
        "reference",
        false,
        "order or shipment reference, for you (not used)",
    ),
];

/// A small delimited table held in memory with its header mapped.
struct Sheet {
    file: String,
    rows: Vec<(u64, Vec<String>)>,
    columns: HashMap<String, usize>,
    warnings: Vec<String>,
    /// How numbers are written (stock and on-order files follow
    /// `--numbers`; `forecast.csv` is plain).
    numbers: NumberFormat,
}

fn normalise(name: &str) -> String {
    name.trim()
        .to_lowercase()
        .chars()
        .map(|c| if c == ' ' || c == '-' { '_' } else { c })
        .collect()
}

impl Sheet {
    /// Reads a table; `allow_empty`: a header alone is a table of no rows
    /// (nothing on order), not a refusal.
    fn parse(
        file: &str,
        bytes: &[u8],
        known: &[(&str, bool, &str)],
        allow_empty: bool,
    ) -> Result<Sheet> {
        let refuse = |line: u64, column: Option<&str>, message: String| Error::Input {
            file: file.to_string(),
            line,
            column: column.map(str::to_string),
            message,
        };
        let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
        let lf = crate::data::lf_line_ends(bytes);
        let bytes: &[u8] = &lf;
        let text = std::str::from_utf8(bytes).map_err(|e| {
            let line = 1 + bytes[..e.valid_up_to()]
                .iter()
                .filter(|b| **b == b'\n')
                .count();
            refuse(
                line as u64,
                None,
                "not UTF-8 text; save the sheet as CSV UTF-8".to_string(),
            )
        })?;
        let header_line = text.lines().next().unwrap_or("");
        let delimiter = [b',', b';', b'\t']
            .into_iter()
            .max_by_key(|d| header_line.bytes().filter(|b| b == d).count())
            .unwrap_or(b',');
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .has_headers(true)
            .flexible(true)
            .from_reader(text.as_bytes());
        let raw_header = reader
            .headers()
            .map_err(|e| refuse(1, None, format!("cannot read the header: {e}")))?;
        if let Some(message) = crate::data::runaway_quote(1, true, raw_header.iter()) {
            return Err(refuse(1, None, message));
        }
        let header: Vec<String> = raw_header.iter().map(normalise).collect();
        if header.iter().all(|h| h.is_empty()) {
            return Err(refuse(
                0,
                None,
                format!(
                    "the file is empty; it needs a header with the columns {}",
                    names(known, true)
                ),
            ));
        }
        let mut columns = HashMap::new();
        let mut extra = Vec::new();
        for (i, h) in header.iter().enumerate() {
            if columns.insert(h.clone(), i).is_some() {
                return Err(refuse(
                    1,
                    Some(h),
                    "this column appears twice; keep one".to_string(),
                ));
            }
            if !known.iter().any(|k| k.0 == h) && !h.is_empty() {
                extra.push(h.clone());
            }
        }
        for (name, required, _) in known {
            if *required && !columns.contains_key(*name) {
                return Err(refuse(
                    1,
                    Some(name),
                    format!(
                        "missing column; the file must have the columns {} (optional: {})",
                        names(known, true),
                        names(known, false)
                    ),
                ));
            }
        }
        let mut warnings = Vec::new();
        if !extra.is_empty() {
            warnings.push(format!(
                "{file}: column(s) {} are not used by plan and were ignored",
                extra.join(", ")
            ));
        }
        let mut rows = Vec::new();
        for rec in reader.records() {
            let rec = rec.map_err(|e| {
                let line = e.position().map(|p| p.line()).unwrap_or(0);
                refuse(line, None, format!("cannot read this row: {e}"))
            })?;
            let line = rec.position().map(|p| p.line()).unwrap_or(0);
            if let Some(message) = crate::data::runaway_quote(line, false, rec.iter()) {
                return Err(refuse(line, None, message));
            }
            if rec.iter().all(|v| v.trim().is_empty()) {
                continue;
            }
            if rec.len() > header.len() {
                return Err(refuse(
                    line,
                    None,
                    format!(
                        "{} values but the header has {} columns; check for a stray delimiter",
                        rec.len(),
                        header.len()
                    ),
                ));
            }
            rows.push((line, rec.iter().map(|v| v.trim().to_string()).collect()));
        }
        if rows.is_empty() && !allow_empty {
            return Err(refuse(
                0,
                None,
                "the file has a header but no rows; give one row per product".to_string(),
            ));
        }
        Ok(Sheet {
            file: file.to_string(),
            rows,
            columns,
            warnings,
            numbers: NumberFormat::Plain,
        })
    }

    fn err(&self, line: u64, column: &str, message: String) -> Error {
        Error::Input {
            file: self.file.clone(),
            line,
            column: Some(column.to_string()),
            message,
        }
    }

    fn get<'a>(&self, row: &'a [String], column: &str) -> &'a str {
        self.columns
            .get(column)
            .and_then(|&i| row.get(i))
            .map(String::as_str)
            .unwrap_or("")
    }

    /// Why a required value is missing: the row ends before its column
    /// (a lost delimiter or an unclosed quote), or the cell is empty.
    fn missing(&self, row: &[String], column: &str, what: &str) -> String {
        match self.columns.get(column) {
            Some(&i) if i >= row.len() => format!(
                "the row ends before this column: {} values but the header has {} columns; check for a missing delimiter or an unclosed quote",
                row.len(),
                self.columns.len()
            ),
            _ => format!("empty; {what}"),
        }
    }

    fn text(&self, line: u64, row: &[String], column: &str) -> Result<String> {
        let v = self.get(row, column);
        if v.is_empty() {
            return Err(self.err(
                line,
                column,
                self.missing(row, column, "a value is required"),
            ));
        }
        Ok(v.to_string())
    }

    fn optional_text(&self, row: &[String], column: &str) -> Option<String> {
        let v = self.get(row, column);
        (!v.is_empty()).then(|| v.to_string())
    }

    /// A number within `valid` (described by `what`); `None` when empty.
    fn number(
        &self,
        line: u64,
        row: &[String],
        column: &str,
        ok: impl Fn(f64) -> bool,
        what: &str,
    ) -> Result<Option<f64>> {
        let v = self.get(row, column);
        let x = parse_number(v, self.numbers).map_err(|_| {
            let how = match self.numbers {
                NumberFormat::Plain => "a plain number; write it like 1250 or 1250.5 (a point as decimal mark, no thousands separator), or give --numbers grouped for 1,250.5 or --numbers decimal-comma for 1.250,5",
                NumberFormat::Grouped => "a number as --numbers grouped reads them: 1250, 1,250.5 or 1 250.5 (a point as decimal mark; comma or space between groups of three digits)",
                NumberFormat::DecimalComma => "a number as --numbers decimal-comma reads them: 1250, 1250,5, 1.250,5 or 1 250,5 (a comma as decimal mark; point or space between groups of three digits)",
            };
            self.err(line, column, format!("\"{v}\" is not {how}; {what}"))
        })?;
        match x {
            Some(x) if !ok(x) => Err(self.err(line, column, format!("{v} is not valid; {what}"))),
            x => Ok(x),
        }
    }

    fn required_number(
        &self,
        line: u64,
        row: &[String],
        column: &str,
        ok: impl Fn(f64) -> bool,
        what: &str,
    ) -> Result<f64> {
        self.number(line, row, column, ok, what)?
            .ok_or_else(|| self.err(line, column, self.missing(row, column, what)))
    }

    fn whole(
        &self,
        line: u64,
        row: &[String],
        column: &str,
        lo: u32,
        hi: u32,
        what: &str,
    ) -> Result<u32> {
        let x = self.required_number(
            line,
            row,
            column,
            |x| x.fract() == 0.0 && x >= f64::from(lo) && x <= f64::from(hi),
            what,
        )?;
        Ok(x as u32)
    }

    fn month(&self, line: u64, row: &[String], column: &str) -> Result<YearMonth> {
        let v = self.get(row, column);
        if v.is_empty() {
            return Err(self.err(line, column, "empty; write the month as YYYY-MM".into()));
        }
        parse_month(v).map_err(|m| self.err(line, column, m))
    }
}

fn names(known: &[(&str, bool, &str)], required: bool) -> String {
    known
        .iter()
        .filter(|k| k.1 == required)
        .map(|k| k.0)
        .collect::<Vec<_>>()
        .join(", ")
}

/// Smallest pack size: orders are whole packs, and the number of packs of
/// the largest need (10^15 units a month for 120 months) must stay a whole
/// number a computer can count; a pack size such as 1e-320 gave
/// 18446744073709551615 packs of cost 0.
pub const MIN_PACK_SIZE: f64 = 0.01;

/// Largest pack size (base units in one pack).
pub const MAX_PACK_SIZE: f64 = 1e9;

/// Reads a stock file, its numbers written as `numbers` says (the
/// `--numbers` rules of the consumption data). Returns its rows and
/// warnings (ignored columns).
pub fn read_stock(
    file: &str,
    bytes: &[u8],
    numbers: NumberFormat,
) -> Result<(Vec<StockRow>, Vec<String>)> {
    let mut sheet = Sheet::parse(file, bytes, &STOCK_COLUMNS, false)?;
    sheet.numbers = numbers;
    let mut out: Vec<StockRow> = Vec::new();
    let mut seen: HashMap<SeriesKey, u64> = HashMap::new();
    for (line, row) in &sheet.rows {
        let line = *line;
        let product = sheet.text(line, row, "product")?;
        let site = sheet.optional_text(row, "site");
        let nonneg = |x: f64| (0.0..=1e15).contains(&x);
        let stock_on_hand = sheet.required_number(
            line,
            row,
            "stock_on_hand",
            nonneg,
            "give the stock counted in base units, from 0 to 10^15",
        )?;
        let stock_date = sheet.month(line, row, "stock_date")?;
        let lead_time_months = sheet.whole(
            line,
            row,
            "lead_time_months",
            0,
            36,
            "give whole months from 0 to 36",
        )?;
        let min_months = sheet.required_number(
            line,
            row,
            "min_months",
            |x| (0.0..=120.0).contains(&x),
            "give months of stock from 0 to 120",
        )?;
        let max_months = sheet.required_number(
            line,
            row,
            "max_months",
            |x| (0.1..=120.0).contains(&x),
            "give months of stock from 0.1 to 120",
        )?;
        if min_months > max_months {
            return Err(sheet.err(
                line,
                "min_months",
                format!(
                    "min_months {min_months} is above max_months {max_months}; the minimum must not exceed the maximum"
                ),
            ));
        }
        let review_period_months = sheet.whole(
            line,
            row,
            "review_period_months",
            1,
            24,
            "give whole months from 1 to 24",
        )?;
        let pack_size = sheet.required_number(
            line,
            row,
            "pack_size",
            |x| (MIN_PACK_SIZE..=MAX_PACK_SIZE).contains(&x),
            "give the base units in one pack, from 0.01 to 1,000,000,000 (1 when ordered by the unit)",
        )?;
        let unit_cost = sheet.required_number(
            line,
            row,
            "unit_cost",
            nonneg,
            "give the cost of one base unit, from 0 to 10^15",
        )?;
        let shelf_life_months = sheet.number(
            line,
            row,
            "shelf_life_months",
            |x| (0.1..=600.0).contains(&x),
            "give months from 0.1 to 600, or leave empty",
        )?;
        let emergency_months = sheet.number(
            line,
            row,
            "emergency_months",
            |x| x >= 0.0 && x <= min_months,
            &format!("give months of stock from 0 to min_months ({min_months}), or leave empty"),
        )?;
        let key = (product.clone(), site.clone());
        if let Some(first) = seen.insert(key, line) {
            return Err(sheet.err(
                line,
                "product",
                format!(
                    "'{product}'{} already has a row (line {first}); give one row per product{}",
                    site.as_deref()
                        .map(|s| format!(" at site '{s}'"))
                        .unwrap_or_default(),
                    if site.is_some() { " and site" } else { "" }
                ),
            ));
        }
        out.push(StockRow {
            line,
            product,
            site,
            policy: Policy {
                stock_on_hand,
                stock_date,
                lead_time_months,
                min_months,
                max_months,
                review_period_months,
                pack_size,
                unit_cost,
                shelf_life_months,
                emergency_months,
            },
        });
    }
    Ok((out, sheet.warnings))
}

/// Reads an on-order file: one row per shipment expected, numbers written
/// as `numbers` says.
pub fn read_on_order(
    file: &str,
    bytes: &[u8],
    numbers: NumberFormat,
) -> Result<(Vec<OnOrderRow>, Vec<String>)> {
    let mut sheet = Sheet::parse(file, bytes, &ON_ORDER_COLUMNS, true)?;
    sheet.numbers = numbers;
    let mut out = Vec::new();
    for (line, row) in &sheet.rows {
        let line = *line;
        out.push(OnOrderRow {
            line,
            product: sheet.text(line, row, "product")?,
            site: sheet.optional_text(row, "site"),
            arrival: Arrival {
                quantity: sheet.required_number(
                    line,
                    row,
                    "quantity",
                    |x| x > 0.0 && x <= 1e15,
                    "give the quantity expected in base units, above 0 and at most 10^15",
                )?,
                month: sheet.month(line, row, "arrival_month")?,
            },
        });
    }
    // Two shipments alike in every field may be real, or one entered
    // twice: both count, and the planner is told.
    for (i, r) in out.iter().enumerate() {
        let same = out[..i].iter().find(|e| {
            (&e.product, &e.site, e.arrival.month) == (&r.product, &r.site, r.arrival.month)
                && e.arrival.quantity == r.arrival.quantity
        });
        if let Some(e) = same {
            sheet.warnings.push(format!(
                "{file}: line {} repeats line {} (product '{}', arrival {}, quantity {}): both shipments are counted; if it was entered twice, delete one",
                r.line, e.line, r.product, r.arrival.month, r.arrival.quantity
            ));
        }
    }
    Ok((out, sheet.warnings))
}

/// The forecast of a `forecast` output directory, per series. A
/// `forecast.csv` with a `site` column holds one series per product and
/// site; without it, one per product (sites summed).
#[derive(Debug, Clone, PartialEq)]
pub struct ForecastSeries {
    /// Series in file order.
    pub series: BTreeMap<SeriesKey, SeriesForecast>,
    /// Products in file order (first appearance).
    pub products: Vec<String>,
    /// Whether the forecast is per site.
    pub per_site: bool,
    /// The model of each product (first row's).
    pub models: HashMap<String, String>,
    /// Whether the points and bounds are the adjusted forecast (the run
    /// applied a changes file: `forecast.csv` has an `adjusted` column).
    pub adjusted: bool,
    /// The pack size of each product that the run configuration gave one
    /// (`forecast.csv`'s `pack_size` column), with the line it was read on.
    pub pack_sizes: HashMap<String, (f64, u64)>,
}

impl ForecastSeries {
    /// Why `product` has no forecast, with the product the user most
    /// likely meant.
    fn not_found(&self, product: &str) -> String {
        let hint = crate::config::did_you_mean(
            product,
            self.series.keys().map(|(p, _)| p.as_str()),
            " (names must match forecast.csv exactly)",
        );
        format!("product '{product}' is not in the forecast{hint}")
    }

    /// The forecast a stock row is planned against: the series itself; for
    /// a row without a site on a per-site forecast, the sum over the
    /// product's sites (points and upper bounds summed: the summed bound
    /// assumes the sites' errors move together). `Err` says why none.
    pub fn for_key(
        &self,
        product: &str,
        site: Option<&str>,
    ) -> std::result::Result<SeriesForecast, String> {
        match (site, self.per_site) {
            (Some(s), true) => self
                .series
                .get(&(product.to_string(), Some(s.to_string())))
                .cloned()
                .ok_or_else(|| format!("the forecast has no series for product '{product}' at site '{s}'")),
            (Some(s), false) => Err(format!(
                "the forecast is per product (sites summed), so stock held at site '{s}' cannot be planned against it; leave site empty to plan the product's total stock"
            )),
            (None, false) => self
                .series
                .get(&(product.to_string(), None))
                .cloned()
                .ok_or_else(|| self.not_found(product)),
            (None, true) => {
                let parts: Vec<&SeriesForecast> = self
                    .series
                    .iter()
                    .filter(|((p, _), _)| p == product)
                    .map(|(_, f)| f)
                    .collect();
                let Some(first) = parts.first() else {
                    return Err(self.not_found(product));
                };
                let start = parts.iter().map(|f| f.start).max().unwrap_or(first.start);
                let end = parts.iter().map(|f| f.end()).min().unwrap_or(first.end());
                let mut months = Vec::new();
                let mut m = start;
                while m <= end {
                    let mut sum = ForecastMonth {
                        point: 0.0,
                        upper80: Some(0.0),
                        upper95: Some(0.0),
                    };
                    for f in &parts {
                        let k = f.start.months_until(m) as usize;
                        let x = f.months[k];
                        sum.point += x.point;
                        sum.upper80 = sum.upper80.zip(x.upper80).map(|(a, b)| a + b);
                        sum.upper95 = sum.upper95.zip(x.upper95).map(|(a, b)| a + b);
                    }
                    months.push(sum);
                    m = m.plus(1);
                }
                Ok(SeriesForecast { start, months })
            }
        }
    }
}

/// Reads `forecast.csv` of a forecast output directory.
pub fn read_forecast(dir: &Path) -> Result<ForecastSeries> {
    let path = dir.join("forecast.csv");
    let file = path.display().to_string();
    let bytes = std::fs::read(&path).map_err(|source| Error::Io {
        path: path.clone(),
        action: "cannot read (give the output directory of `provisio forecast`)",
        source,
    })?;
    let known = [
        ("product", true, ""),
        ("site", false, ""),
        ("month", true, ""),
        ("model", false, ""),
        ("forecast", true, ""),
        ("lower_80", false, ""),
        ("upper_80", false, ""),
        ("lower_95", false, ""),
        ("upper_95", false, ""),
        ("adjusted", false, ""),
        ("adjusted_lower_80", false, ""),
        ("adjusted_upper_80", false, ""),
        ("adjusted_lower_95", false, ""),
        ("adjusted_upper_95", false, ""),
        ("adjusted_packs", false, ""),
        ("bridged", false, ""),
        ("units", false, ""),
        ("pack_size", false, ""),
        ("packs", false, ""),
    ];
    let sheet = Sheet::parse(&file, &bytes, &known, false)?;
    let per_site = sheet.columns.contains_key("site");
    // A run with a changes file has the adjusted forecast beside the
    // statistical one: the plan uses the adjusted one.
    let adjusted = sheet.columns.contains_key("adjusted");
    let (c_point, c_u80, c_u95) = if adjusted {
        ("adjusted", "adjusted_upper_80", "adjusted_upper_95")
    } else {
        ("forecast", "upper_80", "upper_95")
    };
    let mut series: BTreeMap<SeriesKey, SeriesForecast> = BTreeMap::new();
    let mut products = Vec::new();
    let mut models = HashMap::new();
    let mut pack_sizes = HashMap::new();
    for (line, row) in &sheet.rows {
        let line = *line;
        // forecast.csv writes formula-like names with a leading apostrophe.
        let product = crate::output::csv_text_read(sheet.get(row, "product")).to_string();
        let site = if per_site {
            sheet
                .optional_text(row, "site")
                .map(|s| crate::output::csv_text_read(&s).to_string())
        } else {
            None
        };
        // Bridged months (forecast between a product's last month and the
        // common projection start) lie before the stock date: the plan
        // starts at the common start like the horizon.
        if sheet.optional_text(row, "bridged").as_deref() == Some("yes") {
            continue;
        }
        let month = sheet.month(line, row, "month")?;
        // provisio never forecasts below zero: a negative value was
        // entered by hand, and the plan would otherwise read it as zero.
        let nonneg = |x: f64| (0.0..=1e15).contains(&x);
        let what = "a forecast from 0 to 10^15 (forecast.csv was edited: correct the value)";
        let point = sheet.required_number(line, row, c_point, nonneg, what)?;
        let upper80 = sheet.number(line, row, c_u80, nonneg, what)?;
        let upper95 = sheet.number(line, row, c_u95, nonneg, what)?;
        if let Some(size) = sheet.number(line, row, "pack_size", |x| x > 0.0, "a number above 0")? {
            pack_sizes.entry(product.clone()).or_insert((size, line));
        }
        if !models.contains_key(&product) {
            products.push(product.clone());
            models.insert(product.clone(), sheet.get(row, "model").to_string());
        }
        let entry = series
            .entry((product.clone(), site))
            .or_insert_with(|| SeriesForecast {
                start: month,
                months: Vec::new(),
            });
        let expected = entry.start.plus(entry.months.len() as i64);
        if month != expected {
            return Err(sheet.err(
                line,
                "month",
                format!(
                    "{month} for product '{product}' does not follow {}; forecast.csv must list each series' months in order without gaps",
                    expected.plus(-1)
                ),
            ));
        }
        entry.months.push(ForecastMonth {
            point,
            upper80,
            upper95,
        });
    }
    Ok(ForecastSeries {
        series,
        products,
        per_site,
        models,
        adjusted,
        pack_sizes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost,shelf_life_months\n";

    fn stock(row: &str) -> Result<(Vec<StockRow>, Vec<String>)> {
        read_stock(
            "stock.csv",
            format!("{HEADER}{row}\n").as_bytes(),
            NumberFormat::Plain,
        )
    }

    #[test]
    fn numeric_fields_outside_their_range_are_refused_with_line_and_column() {
        assert!(stock("ORS,100,2024-06,3,2,4,1,10,0.5,24").is_ok());
        // (issue 20, item 11) A subnormal pack size used to give
        // u64::MAX packs at cost 0; each field past its range is refused.
        for (row, column) in [
            ("ORS,100,2024-06,3,2,4,1,1e-320,0.5,24", "pack_size"),
            ("ORS,100,2024-06,3,2,4,1,0.001,0.5,24", "pack_size"),
            ("ORS,100,2024-06,3,2,1e-320,1,10,0.5,24", "max_months"),
            ("ORS,100,2024-06,3,0,4,1,10,0.5,1e-320", "shelf_life_months"),
            ("ORS,1e300,2024-06,3,2,4,1,10,0.5,24", "stock_on_hand"),
            ("ORS,100,2024-06,3,2,4,1,10,1e300,24", "unit_cost"),
            ("ORS,100,2024-06,3,2,4,1,NaN,0.5,24", "pack_size"),
        ] {
            let e = stock(row).unwrap_err().to_string();
            assert!(
                e.contains("stock.csv") && e.contains(":2") && e.contains(column),
                "{row}: {e}"
            );
        }
    }
}
