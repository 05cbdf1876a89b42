//! Reading the cross-check inputs: the services file, the population file,
//! a CYP table to override the default, and the consumption forecast from a
//! `forecast` output directory.
//!
//! Header names are case-insensitive (spaces and hyphens count as
//! underscores), column order is free, the delimiter (comma, semicolon,
//! tab) is detected from the header, and a UTF-8 byte-order mark is
//! stripped. Numbers are plain (`1234.5`); shares are a fraction (`0.25`)
//! or a percentage with a sign (`25%`). A column a file does not use is
//! ignored with a warning, unless its name is near one it uses and lacks:
//! then it is a misspelling and refuses the file.
//!
//! A bad row of the **services** file is rejected (logged with file, line,
//! column, value and reason) and the rest used, as for consumption data. A
//! bad row of the **population** or **CYP** file refuses the whole file:
//! these are short hand-made tables where a dropped row (one weight band)
//! would silently change a total.

use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::Path;

use super::cyp::{CypFactor, CypTable};
use super::population::{PopulationData, PopulationRow};
use super::services::{ServiceRow, ServicesData};
use super::{ForecastMonth, Method};
use crate::calendar::YearMonth;
use crate::data::{parse_month, parse_number, NumberFormat, RejectedRow};
use crate::error::{Error, Result};
use crate::pipeline::ForecastSettings;

/// A small CSV file read whole, columns addressed by normalised name.
struct Sheet {
    file: String,
    columns: HashMap<String, usize>,
    header: Vec<String>,
    records: Vec<(u64, csv::StringRecord)>,
    delimiter: u8,
    sha256: String,
}

fn input_error(file: &str, line: u64, column: Option<&str>, message: String) -> Error {
    Error::Input {
        file: file.to_string(),
        line,
        column: column.map(str::to_string),
        message,
    }
}

impl Sheet {
    fn read(path: &Path, what: &str) -> Result<Sheet> {
        let file = path.display().to_string();
        let bytes = std::fs::read(path).map_err(|source| Error::Io {
            path: path.to_path_buf(),
            action: "cannot read",
            source,
        })?;
        let sha256 = crate::output::sha256_hex(&bytes);
        let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(&bytes);
        let lf = crate::data::lf_line_ends(body);
        let body: &[u8] = &lf;
        if let Err(e) = std::str::from_utf8(body) {
            let line = 1 + body[..e.valid_up_to()]
                .iter()
                .filter(|&&b| b == b'\n')
                .count() as u64;
            return Err(input_error(
                &file,
                line,
                None,
                format!("not UTF-8 text; save the {what} as CSV UTF-8"),
            ));
        }
        let first = body.split(|&b| b == b'\n').next().unwrap_or_default();
        let delimiter = [b',', b';', b'\t']
            .into_iter()
            .max_by_key(|d| first.iter().filter(|&&b| b == *d).count())
            .unwrap_or(b',');
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .flexible(true)
            .from_reader(body);
        let raw_header = reader
            .headers()
            .map_err(|e| input_error(&file, 1, None, format!("cannot read the header: {e}")))?;
        if let Some(message) = crate::data::runaway_quote(1, true, raw_header.iter()) {
            return Err(input_error(&file, 1, None, message));
        }
        let header: Vec<String> = raw_header.iter().map(crate::data::normalise_name).collect();
        if header.iter().all(|h| h.is_empty()) {
            return Err(input_error(
                &file,
                1,
                None,
                format!("the {what} is empty; expected a header line and one row per line"),
            ));
        }
        let mut columns = HashMap::new();
        for (i, h) in header.iter().enumerate() {
            if !h.is_empty() && columns.insert(h.clone(), i).is_some() {
                return Err(input_error(
                    &file,
                    1,
                    Some(h),
                    "this column appears twice; keep one".into(),
                ));
            }
        }
        let mut records = Vec::new();
        for rec in reader.records() {
            let rec = rec.map_err(|e| {
                input_error(
                    &file,
                    e.position().map(|p| p.line()).unwrap_or(0),
                    None,
                    format!("cannot read this CSV row: {e}"),
                )
            })?;
            let line = rec.position().map(|p| p.line()).unwrap_or(0);
            if let Some(message) = crate::data::runaway_quote(line, false, rec.iter()) {
                return Err(input_error(&file, line, None, message));
            }
            if rec.iter().all(|f| f.trim().is_empty()) {
                continue;
            }
            // Values beyond the header would be dropped unread (empty
            // trailing cells, as spreadsheets write them, are no values).
            if rec.iter().skip(header.len()).any(|f| !f.trim().is_empty()) {
                return Err(input_error(
                    &file,
                    line,
                    None,
                    format!(
                        "{} values but the header has {} columns; check for a stray delimiter, or a value without its column",
                        (0..rec.len()).rev().find(|&i| !rec[i].trim().is_empty()).map_or(0, |i| i + 1),
                        header.len()
                    ),
                ));
            }
            records.push((line, rec));
        }
        Ok(Sheet {
            file,
            columns,
            header,
            records,
            delimiter,
            sha256,
        })
    }

    fn require(&self, names: &[&str], optional: &[&str]) -> Result<()> {
        let missing: Vec<&str> = names
            .iter()
            .copied()
            .filter(|n| !self.columns.contains_key(*n))
            .collect();
        if missing.is_empty() {
            return Ok(());
        }
        Err(input_error(
            &self.file,
            1,
            None,
            crate::data::missing_columns_message(
                &missing,
                &self.header.iter().map(String::as_str).collect::<Vec<_>>(),
                names,
                optional,
            ),
        ))
    }

    /// Checks the header's other columns against `known`, the columns the
    /// file can have. A column near one of them that the header lacks (a
    /// typing slip such as `loss_alowance`) refuses the file: ignoring it
    /// would drop its values and change an estimate without a word. Any
    /// other column is not used; the warning naming it is returned.
    fn unknown_columns(&self, known: &[&str], what: &str) -> Result<Option<String>> {
        let absent: Vec<&str> = known
            .iter()
            .copied()
            .filter(|k| !self.columns.contains_key(*k))
            .collect();
        let mut unused = Vec::new();
        for h in &self.header {
            if h.is_empty() || known.contains(&h.as_str()) {
                continue;
            }
            // A slip of a letter or two in a long name; a short or
            // different name (`note` beside `site`) is only warned about.
            let slip = |near: &&str| {
                let d = strsim::damerau_levenshtein(h, near);
                d <= 1 || (d <= 2 && near.len() >= 8)
            };
            if let Some(near) = crate::config::nearest_name(h, absent.iter().copied()).filter(slip)
            {
                return Err(input_error(
                    &self.file,
                    1,
                    Some(h),
                    format!(
                        "unknown column '{h}'; did you mean '{near}'? A column this close to one crosscheck reads is refused rather than ignored, so its values are not lost; rename it (columns of the {what}: {})",
                        known.join(", ")
                    ),
                ));
            }
            unused.push(format!("'{h}'"));
        }
        Ok((!unused.is_empty()).then(|| {
            format!(
                "{}: column(s) {} not used by crosscheck and ignored (columns of the {what}: {})",
                self.file,
                unused.join(", "),
                known.join(", ")
            )
        }))
    }

    fn get<'r>(&self, rec: &'r csv::StringRecord, name: &str) -> &'r str {
        self.columns
            .get(name)
            .and_then(|&i| rec.get(i))
            .unwrap_or("")
            .trim()
    }

    fn raw(&self, rec: &csv::StringRecord) -> String {
        rec.iter()
            .collect::<Vec<_>>()
            .join(&char::from(self.delimiter).to_string())
    }
}

/// A problem with one value: column, value, reason.
type Problem = (String, String, String);

fn problem(column: &str, value: &str, reason: String) -> Problem {
    (column.to_string(), value.to_string(), reason)
}

/// Why a value is not read as a number: the cross-check files take plain
/// numbers only (the reader's advice about `--numbers` is for the
/// consumption data, an option `crosscheck` does not have).
fn plain_number(v: &str) -> String {
    format!(
        "'{v}' is not a plain number; write it as 1234.5, with a point as decimal mark and no thousands separators"
    )
}

/// A non-negative number (empty → `None`).
fn quantity(
    sheet: &Sheet,
    rec: &csv::StringRecord,
    col: &str,
) -> std::result::Result<Option<f64>, Problem> {
    let v = sheet.get(rec, col);
    let n = parse_number(v, NumberFormat::Plain).map_err(|_| problem(col, v, plain_number(v)))?;
    match n {
        Some(x) if x < 0.0 => Err(problem(
            col,
            v,
            format!("{col} {v} is negative; expected 0 or more"),
        )),
        Some(x) if x > crate::data::MAX_QUANTITY => Err(problem(
            col,
            v,
            format!("{col} {v} is over 10^15, more than any real figure; check the value"),
        )),
        other => Ok(other),
    }
}

/// A share: a fraction, or a percentage with `%` (empty → `None`). Shares
/// above `max` are refused.
fn share(
    sheet: &Sheet,
    rec: &csv::StringRecord,
    col: &str,
    max: f64,
) -> std::result::Result<Option<f64>, Problem> {
    let valid = if max > 1.0 {
        format!("a share from 0 to {max} (0.1 or 10%)")
    } else {
        "a share from 0 to 1 (0.25 or 25%)".to_string()
    };
    share_as(sheet, rec, col, max, &valid)
}

/// The `rate` of a population row, read as its method means it: episodes
/// per person a year (or a prevalence) for morbidity, up to 10; the
/// contraceptive prevalence, a share up to 1, for demographic.
fn rate(
    sheet: &Sheet,
    rec: &csv::StringRecord,
    method: Method,
) -> std::result::Result<Option<f64>, Problem> {
    if method == Method::Demographic {
        share_as(
            sheet,
            rec,
            "rate",
            1.0,
            "the contraceptive prevalence of the demographic method, a share from 0 to 1 (0.28 or 28%)",
        )
    } else {
        share_as(
            sheet,
            rec,
            "rate",
            10.0,
            "a rate from 0 to 10: episodes per person a year, or a share (0.25 or 25%)",
        )
    }
}

/// A share up to `max` (empty → `None`); `valid` says what is expected.
fn share_as(
    sheet: &Sheet,
    rec: &csv::StringRecord,
    col: &str,
    max: f64,
    valid: &str,
) -> std::result::Result<Option<f64>, Problem> {
    let v = sheet.get(rec, col);
    let (num, pct) = match v.strip_suffix('%') {
        Some(n) => (n.trim(), true),
        None => (v, false),
    };
    let n = parse_number(num, NumberFormat::Plain)
        .map_err(|_| problem(col, v, format!("'{v}' is not a number; expected {valid}")))?;
    match n.map(|x| if pct { x / 100.0 } else { x }) {
        // A plain number above 1 could be a percentage without its sign
        // (10 for 10%) or a multiple (10 for 1000%): refused, not guessed.
        // A rate is episodes per person a year, where 2 means 2.
        Some(x) if !pct && col != "rate" && x > 1.0 && x <= max => Err(problem(
            col,
            v,
            format!(
                "{col} {v} is a plain number above 1, which could mean {v}% or {}%; write {v}% or {} for {v}%, or {}% for {}%",
                crate::chart::fmt_quantity(x * 100.0),
                crate::chart::fmt_quantity(x / 100.0),
                crate::chart::fmt_quantity(x * 100.0),
                crate::chart::fmt_quantity(x * 100.0),
            ),
        )),
        Some(x) if !(0.0..=max).contains(&x) => Err(problem(
            col,
            v,
            format!(
                "{col} {v} is out of range; expected {valid}{}",
                if !pct && x > 1.0 && x <= 100.0 {
                    " (write a percentage with its % sign)"
                } else {
                    ""
                }
            ),
        )),
        other => Ok(other),
    }
}

/// The product name of a row; empty is refused.
fn product<'r>(sheet: &Sheet, rec: &'r csv::StringRecord) -> std::result::Result<&'r str, Problem> {
    let p = sheet.get(rec, "product");
    if p.is_empty() {
        return Err(problem(
            "product",
            "",
            "product is empty; expected a product name as in the forecast".into(),
        ));
    }
    Ok(p)
}

fn required<T>(v: Option<T>, col: &str, method: &str) -> std::result::Result<T, Problem> {
    v.ok_or_else(|| {
        problem(
            col,
            "",
            format!("{col} is required for the {method} method"),
        )
    })
}

/// Columns of the services file.
pub const SERVICES_COLUMNS: [&str; 4] = ["product", "month", "services", "units_per_service"];
/// Optional columns of the services file.
pub const SERVICES_OPTIONAL: [&str; 3] = ["site", "allowance", "reporting_rate"];

/// Reads a services file. Rows with a bad value, or a second row for the
/// same product, site and month, are rejected with the reason.
/// `latest`: the current month; rows for later months are rejected (a
/// service cannot have been delivered in a month that has not come yet).
pub fn read_services(path: &Path, latest: Option<YearMonth>) -> Result<ServicesData> {
    let sheet = Sheet::read(path, "services file")?;
    sheet.require(&SERVICES_COLUMNS, &SERVICES_OPTIONAL)?;
    let known: Vec<&str> = SERVICES_COLUMNS
        .iter()
        .chain(&SERVICES_OPTIONAL)
        .copied()
        .collect();
    let warnings: Vec<String> = sheet
        .unknown_columns(&known, "services file")?
        .into_iter()
        .collect();
    let has_site = sheet.columns.contains_key("site");
    let mut rows = Vec::new();
    let mut rejected = Vec::new();
    let mut seen: HashMap<(String, Option<String>, YearMonth), u64> = HashMap::new();
    for (line, rec) in &sheet.records {
        let parsed = (|| -> std::result::Result<ServiceRow, Problem> {
            let product = product(&sheet, rec)?;
            let m = sheet.get(rec, "month");
            let month = parse_month(m).map_err(|e| problem("month", m, e))?;
            if let Some(latest) = latest.filter(|l| month > *l) {
                return Err(problem(
                    "month",
                    m,
                    format!("month {month} is after the current month ({latest}): services cannot be reported for a month that has not come yet; check the year"),
                ));
            }
            let services = quantity(&sheet, rec, "services")?;
            let ups = quantity(&sheet, rec, "units_per_service")?.ok_or_else(|| {
                problem("units_per_service", "", "units_per_service is empty; expected the product units used per service (e.g. 1 test kit per test)".into())
            })?;
            let allowance = share(&sheet, rec, "allowance", 10.0)?.unwrap_or(0.0);
            let reporting_rate = share(&sheet, rec, "reporting_rate", 1.0)?;
            if reporting_rate == Some(0.0) && services.is_some_and(|v| v > 0.0) {
                return Err(problem(
                    "reporting_rate",
                    sheet.get(rec, "reporting_rate"),
                    "reporting_rate is 0 but services are reported; leave services empty or correct the rate".into(),
                ));
            }
            let site = has_site
                .then(|| sheet.get(rec, "site").to_string())
                .filter(|s| !s.is_empty());
            Ok(ServiceRow {
                line: *line,
                product: product.to_string(),
                site,
                month,
                services,
                units_per_service: ups,
                allowance,
                reporting_rate,
            })
        })();
        match parsed {
            Ok(r) => {
                let key = (r.product.clone(), r.site.clone(), r.month);
                if let Some(first) = seen.get(&key) {
                    rejected.push(RejectedRow {
                        line: *line,
                        column: None,
                        value: String::new(),
                        reason: format!(
                            "a second row for product '{}', {}month {} (first on line {first}); give one row per product, site and month",
                            r.product,
                            r.site.as_deref().map(|s| format!("site '{s}', ")).unwrap_or_default(),
                            r.month
                        ),
                        raw: sheet.raw(rec),
                    });
                } else {
                    seen.insert(key, *line);
                    rows.push(r);
                }
            }
            Err((column, value, reason)) => rejected.push(RejectedRow {
                line: *line,
                column: Some(column),
                value,
                reason,
                raw: sheet.raw(rec),
            }),
        }
    }
    if rows.is_empty() {
        let why = rejected
            .first()
            .map(|r| format!("; line {}: {}", r.line, r.reason))
            .unwrap_or_default();
        return Err(input_error(
            &sheet.file,
            0,
            None,
            format!("no usable row of services{why}"),
        ));
    }
    Ok(ServicesData {
        source: sheet.file.clone(),
        sha256: sheet.sha256.clone(),
        rows_read: sheet.records.len(),
        rows,
        rejected,
        has_site,
        has_reporting_rate: sheet.columns.contains_key("reporting_rate"),
        warnings,
    })
}

/// Required columns of the population file.
pub const POPULATION_COLUMNS: [&str; 4] = ["product", "method", "population", "rate"];
/// Optional columns of the population file (some required per method).
pub const POPULATION_OPTIONAL: [&str; 10] = [
    "group",
    "group_share",
    "care_seeking",
    "treated",
    "quantity_per_course",
    "method_share",
    "public_share",
    "cyp_method",
    "units_per_user_year",
    "loss_allowance",
];

/// Columns only the morbidity method uses.
const MORBIDITY_ONLY: [&str; 4] = [
    "group_share",
    "care_seeking",
    "treated",
    "quantity_per_course",
];
/// Columns only the demographic method uses.
const DEMOGRAPHIC_ONLY: [&str; 4] = [
    "method_share",
    "public_share",
    "cyp_method",
    "units_per_user_year",
];

/// A value in a column the row's method does not use is refused: it would
/// be ignored, and a figure meant for the estimate (or a row given the
/// wrong method) would pass unseen.
fn other_methods_columns(
    sheet: &Sheet,
    rec: &csv::StringRecord,
    method: Method,
) -> std::result::Result<(), Problem> {
    let (own, others) = if method == Method::Morbidity {
        (MORBIDITY_ONLY, DEMOGRAPHIC_ONLY)
    } else {
        (DEMOGRAPHIC_ONLY, MORBIDITY_ONLY)
    };
    let Some(col) = others.iter().find(|c| !sheet.get(rec, c).is_empty()) else {
        return Ok(());
    };
    let name = method.name();
    let v = sheet.get(rec, col);
    Err(problem(
        col,
        v,
        format!(
            "{col} '{v}' is given on a {name} row, which does not use it; the {name} method uses population, rate, {}, loss_allowance (and group as a label); leave {col} empty on this row, or correct the row's method",
            own.join(", ")
        ),
    ))
}

/// Reads the population file; the demographic rows' units per user per
/// year come from `cyp` unless given. Any bad value refuses the file.
pub fn read_population(path: &Path, cyp: &CypTable) -> Result<PopulationData> {
    let sheet = Sheet::read(path, "population file")?;
    sheet.require(&POPULATION_COLUMNS, &POPULATION_OPTIONAL)?;
    let known: Vec<&str> = POPULATION_COLUMNS
        .iter()
        .chain(&POPULATION_OPTIONAL)
        .copied()
        .collect();
    let warnings: Vec<String> = sheet
        .unknown_columns(&known, "population file")?
        .into_iter()
        .collect();
    let mut rows = Vec::new();
    let mut groups: HashSet<(String, Method, String)> = HashSet::new();
    for (line, rec) in &sheet.records {
        let parsed = (|| -> std::result::Result<PopulationRow, Problem> {
            let product = product(&sheet, rec)?;
            let m = sheet.get(rec, "method");
            let method = match Method::parse(m) {
                Some(x @ (Method::Morbidity | Method::Demographic)) => x,
                _ => {
                    return Err(problem(
                        "method",
                        m,
                        format!("method '{m}' is not known; expected morbidity or demographic"),
                    ))
                }
            };
            other_methods_columns(&sheet, rec, method)?;
            let name = method.name();
            let population = required(quantity(&sheet, rec, "population")?, "population", name)?;
            let rate = required(rate(&sheet, rec, method)?, "rate", name)?;
            let loss_allowance = share(&sheet, rec, "loss_allowance", 10.0)?.unwrap_or(0.0);
            let mut row = PopulationRow {
                line: *line,
                product: product.to_string(),
                group: sheet.get(rec, "group").to_string(),
                method,
                population,
                group_share: 1.0,
                rate,
                care_seeking: 0.0,
                treated: 0.0,
                quantity_per_course: 0.0,
                method_share: 0.0,
                public_share: 1.0,
                units_per_user_year: 0.0,
                units_basis: String::new(),
                loss_allowance,
            };
            if method == Method::Morbidity {
                row.group_share = share(&sheet, rec, "group_share", 1.0)?.unwrap_or(1.0);
                row.care_seeking = required(
                    share(&sheet, rec, "care_seeking", 1.0)?,
                    "care_seeking",
                    name,
                )?;
                row.treated = required(share(&sheet, rec, "treated", 1.0)?, "treated", name)?;
                row.quantity_per_course = required(
                    quantity(&sheet, rec, "quantity_per_course")?,
                    "quantity_per_course",
                    name,
                )?;
            } else {
                row.method_share = required(
                    share(&sheet, rec, "method_share", 1.0)?,
                    "method_share",
                    name,
                )?;
                row.public_share = share(&sheet, rec, "public_share", 1.0)?.unwrap_or(1.0);
                let given = quantity(&sheet, rec, "units_per_user_year")?;
                let key = sheet.get(rec, "cyp_method");
                match (given, key.is_empty()) {
                    (Some(u), true) => {
                        row.units_per_user_year = u;
                        row.units_basis = "given in the file".into();
                    }
                    (Some(_), false) => {
                        return Err(problem(
                            "units_per_user_year",
                            sheet.get(rec, "units_per_user_year"),
                            "give either units_per_user_year or cyp_method, not both".into(),
                        ))
                    }
                    (None, _) => {
                        let f = cyp.get(key).ok_or_else(|| {
                            problem(
                                "cyp_method",
                                key,
                                format!(
                                    "{}; expected one of: {} (or give units_per_user_year)",
                                    if key.is_empty() {
                                        "cyp_method is empty".to_string()
                                    } else {
                                        format!("'{key}' is not in the CYP table")
                                    },
                                    cyp.keys()
                                ),
                            )
                        })?;
                        row.units_per_user_year = f.units_per_user_year();
                        row.units_basis = format!(
                            "1 / {} CYP per {}, {}",
                            crate::chart::fmt_figure(f.cyp_per_unit),
                            f.unit,
                            f.source
                        );
                    }
                }
            }
            Ok(row)
        })();
        let row = parsed.map_err(|(column, _value, reason)| {
            input_error(&sheet.file, *line, Some(&column), reason)
        })?;
        if !groups.insert((row.product.clone(), row.method, row.group.clone())) {
            return Err(input_error(
                &sheet.file,
                *line,
                Some("group"),
                format!(
                    "a second {} row for product '{}' and group '{}'; give each target group once (name groups apart in the group column)",
                    row.method.name(),
                    row.product,
                    row.group
                ),
            ));
        }
        rows.push(row);
    }
    if rows.is_empty() {
        return Err(input_error(
            &sheet.file,
            0,
            None,
            "no row; expected one row per product and target group".into(),
        ));
    }
    Ok(PopulationData {
        rows,
        sha256: sheet.sha256,
        warnings,
    })
}

/// Columns of a CYP table.
const CYP_COLUMNS: [&str; 5] = ["method", "cyp_per_unit", "units_per_cyp", "unit", "source"];

/// Reads a CYP table (`method`, `cyp_per_unit` or `units_per_cyp`, and
/// optional `unit`, `source`), with the warnings met (columns not used).
/// Any bad value refuses the file.
pub fn read_cyp(path: &Path) -> Result<(Vec<CypFactor>, Vec<String>)> {
    let sheet = Sheet::read(path, "CYP table")?;
    sheet.require(&CYP_COLUMNS[..1], &CYP_COLUMNS[1..])?;
    let warnings: Vec<String> = sheet
        .unknown_columns(&CYP_COLUMNS, "CYP table")?
        .into_iter()
        .collect();
    let has = |c: &str| sheet.columns.contains_key(c);
    if !has("cyp_per_unit") && !has("units_per_cyp") {
        return Err(input_error(
            &sheet.file,
            1,
            None,
            "expected a column cyp_per_unit (e.g. 2.5 for a 3-year implant) or units_per_cyp (e.g. 120 for condoms)".into(),
        ));
    }
    let mut out: Vec<CypFactor> = Vec::new();
    for (line, rec) in &sheet.records {
        let err = |col: &str, m: String| input_error(&sheet.file, *line, Some(col), m);
        let method = sheet.get(rec, "method").to_ascii_lowercase();
        if method.is_empty() {
            return Err(err(
                "method",
                "method is empty; expected a method key such as condom".into(),
            ));
        }
        let num = |col: &str| -> Result<Option<f64>> {
            let v = sheet.get(rec, col);
            let n = parse_number(v, NumberFormat::Plain).map_err(|_| err(col, plain_number(v)))?;
            match n {
                Some(x) if x <= 0.0 => Err(err(col, format!("{v} must be above 0"))),
                o => Ok(o),
            }
        };
        // Published factors run from 1/120 (a condom) to about 10 (a
        // sterilisation); far outside, a value is a slip, and one of
        // 1e-300 or 1e308 overflows the estimate.
        let within = |col: &str, x: f64, lo: f64, hi: f64| -> Result<f64> {
            if (lo..=hi).contains(&x) {
                Ok(x)
            } else {
                Err(err(
                    col,
                    format!(
                        "{} is outside the range of any method ({lo} to {hi}); check the value",
                        sheet.get(rec, col)
                    ),
                ))
            }
        };
        let cyp = match (num("cyp_per_unit")?, num("units_per_cyp")?) {
            (Some(c), None) => within("cyp_per_unit", c, 0.0001, 100.0)?,
            (None, Some(u)) => 1.0 / within("units_per_cyp", u, 0.01, 10_000.0)?,
            (Some(_), Some(_)) => {
                return Err(err(
                    "units_per_cyp",
                    "give cyp_per_unit or units_per_cyp, not both".into(),
                ))
            }
            (None, None) => {
                return Err(err(
                    "cyp_per_unit",
                    "empty; give cyp_per_unit or units_per_cyp".into(),
                ))
            }
        };
        if out.iter().any(|f| f.method == method) {
            return Err(err(
                "method",
                format!("'{method}' appears twice; give each method once"),
            ));
        }
        let source = sheet.get(rec, "source");
        out.push(CypFactor {
            method,
            cyp_per_unit: cyp,
            unit: match sheet.get(rec, "unit") {
                "" => "unit".to_string(),
                u => u.to_string(),
            },
            source: if source.is_empty() {
                sheet.file.clone()
            } else {
                source.to_string()
            },
        });
    }
    Ok((out, warnings))
}

/// The consumption forecast read from a `forecast` output directory.
#[derive(Debug, Clone)]
pub struct ForecastInput {
    /// Projected months per product, in month order.
    pub products: BTreeMap<String, Vec<ForecastMonth>>,
    /// The run's forecast settings (defaults when the manifest lacks them).
    pub settings: ForecastSettings,
    /// The run's cleaning settings (defaults when the manifest lacks them).
    pub clean_settings: crate::clean::CleanSettings,
    /// The run's manifest.
    pub manifest: serde_json::Value,
    /// The forecast read: the adjusted one when the run applied known
    /// changes, else the statistical one.
    pub forecast_used: super::ForecastUsed,
    /// First projected month over all products.
    pub first_month: YearMonth,
    /// Problems met.
    pub warnings: Vec<String>,
}

/// Reads `forecast.csv` and `manifest.json` from a forecast output directory.
pub fn read_forecast_dir(dir: &Path) -> Result<ForecastInput> {
    if !dir.is_dir() {
        return Err(input_error(
            &dir.display().to_string(),
            0,
            None,
            "not a directory; give the output directory of `provisio forecast`".into(),
        ));
    }
    let mpath = dir.join("manifest.json");
    let mtext = std::fs::read_to_string(&mpath).map_err(|source| Error::Io {
        path: mpath.clone(),
        action: "cannot read (give the output directory of `provisio forecast`)",
        source,
    })?;
    let manifest: serde_json::Value = serde_json::from_str(&mtext).map_err(|e| {
        input_error(
            &mpath.display().to_string(),
            e.line() as u64,
            None,
            format!("not valid JSON: {e}"),
        )
    })?;
    let mut warnings = Vec::new();
    let settings = match manifest.get("forecast_settings") {
        Some(v) => serde_json::from_value(v.clone()).map_err(|e| {
            input_error(
                &mpath.display().to_string(),
                0,
                Some("forecast_settings"),
                format!("cannot read the forecast settings: {e}"),
            )
        })?,
        None => {
            warnings.push(format!(
                "{}: no forecast settings (not written by `forecast`?); services are projected with the default settings",
                mpath.display()
            ));
            ForecastSettings::default()
        }
    };
    let clean_settings = match manifest.get("clean_settings") {
        Some(v) => serde_json::from_value(v.clone()).map_err(|e| {
            input_error(
                &mpath.display().to_string(),
                0,
                Some("clean_settings"),
                format!("cannot read the cleaning settings: {e}"),
            )
        })?,
        None => {
            warnings.push(format!(
                "{}: no cleaning settings; services are cleaned with the default settings",
                mpath.display()
            ));
            crate::clean::CleanSettings::default()
        }
    };
    let fpath = dir.join("forecast.csv");
    if !fpath.exists() {
        return Err(input_error(
            &fpath.display().to_string(),
            0,
            None,
            "file not found; give the output directory of `provisio forecast`".into(),
        ));
    }
    let sheet = Sheet::read(&fpath, "forecast file")?;
    sheet.require(
        &["product", "month", "forecast", "lower_80", "upper_80"],
        &[],
    )?;
    // A run with a changes file has the adjusted forecast beside the
    // statistical one: the cross-check uses the adjusted one.
    let adjusted = sheet.columns.contains_key("adjusted");
    let (c_point, c_l80, c_u80) = if adjusted {
        ("adjusted", "adjusted_lower_80", "adjusted_upper_80")
    } else {
        ("forecast", "lower_80", "upper_80")
    };
    if adjusted {
        warnings.push(format!(
            "{}: the run applied a changes file ({}); the adjusted forecast is cross-checked",
            fpath.display(),
            manifest
                .get("changes_file")
                .and_then(|v| v.as_str())
                .unwrap_or("named in manifest.json")
        ));
    }
    let mut products: BTreeMap<String, Vec<ForecastMonth>> = BTreeMap::new();
    for (line, rec) in &sheet.records {
        let err = |col: &str, m: String| input_error(&sheet.file, *line, Some(col), m);
        let num = |col: &str| -> Result<f64> {
            let v = sheet.get(rec, col);
            v.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| err(col, format!("'{v}' is not a number")))
        };
        // Bridged months (before the common projection start) are not
        // part of the projection period compared here.
        if sheet.get(rec, "bridged") == "yes" {
            continue;
        }
        let m = sheet.get(rec, "month");
        let month = YearMonth::parse(m).map_err(|e| err("month", format!("'{m}': {e}")))?;
        products
            // forecast.csv writes formula-like names with a leading apostrophe.
            .entry(crate::output::csv_text_read(sheet.get(rec, "product")).to_string())
            .or_default()
            .push(ForecastMonth {
                month,
                point: num(c_point)?,
                lower80: num(c_l80)?,
                upper80: num(c_u80)?,
            });
    }
    for v in products.values_mut() {
        v.sort_by_key(|m| m.month);
    }
    let first_month = products
        .values()
        .filter_map(|v| v.first().map(|m| m.month))
        .min()
        .ok_or_else(|| {
            input_error(
                &sheet.file,
                0,
                None,
                "no projected month; the forecast run projected nothing".into(),
            )
        })?;
    Ok(ForecastInput {
        products,
        settings,
        clean_settings,
        manifest,
        forecast_used: if adjusted {
            super::ForecastUsed::Adjusted
        } else {
            super::ForecastUsed::Statistical
        },
        first_month,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn population(text: &str) -> Result<Vec<PopulationRow>> {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("pop.csv");
        std::fs::write(&path, text).unwrap();
        read_population(&path, &super::super::cyp::usaid_2021()).map(|r| r.rows)
    }

    #[test]
    fn population_reads_percentages_semicolons_and_names_problems() {
        let rows = population(
            "\u{feff}Product;Method;Population;Rate;Care Seeking;Treated;Quantity-per-course;Loss allowance\n\
             ORS;morbidity;1000;50%;0.8;90%;2;5%\n",
        )
        .unwrap();
        assert_eq!(rows.len(), 1);
        assert_eq!(rows[0].rate, 0.5);
        assert_eq!(rows[0].treated, 0.9);
        assert_eq!(rows[0].loss_allowance, 0.05);
        // 1000 × 0.5 × 0.8 × 0.9 × 2 × 1.05 (common-practice arithmetic).
        assert!((rows[0].quantity() - 756.0).abs() < 1e-9);
        let e = population("product,method,population,rate\nORS,morbidity,1000,0.5\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains(
                ":2: column 'care_seeking': care_seeking is required for the morbidity method"
            ),
            "{e}"
        );
        let e = population("product,method,population,rate,care_seeking,treated,quantity_per_course\nORS,morbidity,1000,0.5,1,1,1\nORS,morbidity,1000,0.5,1,1,1\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains(":3: column 'group': a second morbidity row"),
            "{e}"
        );
        let e = population("product,method,population,rate\nORS,stock,1000,0.5\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("expected morbidity or demographic"), "{e}");
        let e = population("product,method,population,rate,method_share,cyp_method,units_per_user_year\nC,demographic,1000,0.3,0.5,condom,100\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("not both"), "{e}");
        let e = population("product,method,population,rate,care_seeking,treated,quantity_per_course\nORS,morbidity,1000,12,1,1,1\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("a rate from 0 to 10"), "{e}");
        let e = population("product,method,population,rate,care_seeking,treated,quantity_per_course\nORS,morbidity,-5,0.1,1,1,1\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("column 'population'") && e.contains("negative"),
            "{e}"
        );
    }

    #[test]
    fn a_value_in_another_methods_column_is_refused() {
        // Common practice (and the README's column table): a morbidity row
        // has no method or public-sector share, a demographic row no group
        // share, care seeking, treatment or course; a value there would be
        // ignored, so it is refused, naming the columns the method uses.
        let head = "product,method,population,rate,group_share,care_seeking,treated,quantity_per_course,method_share,public_share,cyp_method\n";
        let e = population(&format!("{head}ORS,morbidity,1000,0.5,1,0.8,0.9,2,,0.6,\n"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains(":2: column 'public_share': public_share '0.6' is given on a morbidity row")
                && e.contains("the morbidity method uses population, rate, group_share, care_seeking, treated, quantity_per_course, loss_allowance"),
            "{e}"
        );
        for (col, row) in [
            ("group_share", "C,demographic,1000,0.3,0.5,,,,0.2,1,condom"),
            ("care_seeking", "C,demographic,1000,0.3,,0.8,,,0.2,1,condom"),
            ("treated", "C,demographic,1000,0.3,,,90%,,0.2,1,condom"),
        ] {
            let e = population(&format!("{head}{row}\n"))
                .unwrap_err()
                .to_string();
            assert!(
                e.contains(&format!(":2: column '{col}'"))
                    && e.contains("on a demographic row")
                    && e.contains("the demographic method uses population, rate, method_share, public_share, cyp_method, units_per_user_year"),
                "{e}"
            );
        }
        // Empty cells of the other method's columns are what a mixed file has.
        let rows = population(&format!(
            "{head}ORS,morbidity,1000,0.5,1,0.8,0.9,2,,,\nC,demographic,1000,0.3,,,,,0.2,1,condom\n"
        ))
        .unwrap();
        assert_eq!(rows.len(), 2);
    }

    #[test]
    fn a_demographic_rate_out_of_range_is_named_as_a_prevalence() {
        // Common practice: the message describes what the row's method
        // reads; a contraceptive prevalence is a share, not episodes.
        let e = population("product,method,population,rate,method_share,cyp_method\nC,demographic,1000,12,0.5,condom\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("column 'rate'")
                && e.contains(
                    "contraceptive prevalence of the demographic method, a share from 0 to 1"
                )
                && !e.contains("episodes"),
            "{e}"
        );
    }

    #[test]
    fn a_misspelt_column_is_refused_and_another_warned() {
        // Common practice: headers are typed by hand; a name one slip from
        // a column crosscheck reads is a misspelling whose values would be
        // lost, any other name a column of the user's own.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("pop.csv");
        let body = "ORS,morbidity,1000,0.5,0.8,0.9,2,5%\n";
        std::fs::write(
            &path,
            format!("product,method,population,rate,care_seeking,treated,quantity_per_course,loss_alowance\n{body}"),
        )
        .unwrap();
        let e = read_population(&path, &super::super::cyp::usaid_2021())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("pop.csv:1: column 'loss_alowance': unknown column 'loss_alowance'; did you mean 'loss_allowance'?"),
            "{e}"
        );
        std::fs::write(
            &path,
            format!("product,method,population,rate,care_seeking,treated,quantity_per_course,loss_allowance,Notes\n{}", body.replace('\n', ",checked 2025\n")),
        )
        .unwrap();
        let p = read_population(&path, &super::super::cyp::usaid_2021()).unwrap();
        assert_eq!(p.rows[0].loss_allowance, 0.05);
        assert_eq!(p.warnings.len(), 1);
        assert!(
            p.warnings[0].contains("column(s) 'notes' not used by crosscheck and ignored"),
            "{:?}",
            p.warnings
        );
        let path = dir.path().join("services.csv");
        for (typo, right) in [
            ("allowence", "allowance"),
            ("ReportingRate", "reporting_rate"),
        ] {
            std::fs::write(
                &path,
                format!("product,month,services,units_per_service,{typo}\nRDT,2025-01,10,1,10%\n"),
            )
            .unwrap();
            let e = read_services(&path, None).unwrap_err().to_string();
            assert!(
                e.contains(&format!("services.csv:1: column '{}'", typo.to_lowercase()))
                    && e.contains(&format!("did you mean '{right}'?")),
                "{e}"
            );
        }
        std::fs::write(
            &path,
            "product,month,services,units_per_service,district\nRDT,2025-01,10,1,North\n",
        )
        .unwrap();
        let d = read_services(&path, None).unwrap();
        assert!(
            d.warnings[0].contains("column(s) 'district' not used by crosscheck and ignored"),
            "{:?}",
            d.warnings
        );
        // A short name two letters from an absent column (`note`, `site`)
        // is a column of the user's own: warned, not refused.
        std::fs::write(
            &path,
            "product,month,services,units_per_service,note\nRDT,2025-01,10,1,ok\n",
        )
        .unwrap();
        let d = read_services(&path, None).unwrap();
        assert!(
            d.warnings[0].contains("column(s) 'note' not used by crosscheck and ignored"),
            "{:?}",
            d.warnings
        );
        // A CYP table is read the same way.
        let path = dir.path().join("cyp.csv");
        std::fs::write(
            &path,
            "method,units_per_cyp,souce\npatch,13,national list\n",
        )
        .unwrap();
        let e = read_cyp(&path).unwrap_err().to_string();
        assert!(e.contains("did you mean 'source'?"), "{e}");
    }

    #[test]
    fn bridged_forecast_months_are_not_part_of_the_period() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("manifest.json"), "{}").unwrap();
        std::fs::write(
            dir.path().join("forecast.csv"),
            "product,month,model,forecast,lower_80,upper_80,lower_95,upper_95,bridged\n\
             A,2025-11,naive,5,4,6,3,7,yes\n\
             A,2025-12,naive,5,4,6,3,7,yes\n\
             A,2026-01,naive,5,4,6,3,7,no\n\
             B,2026-01,naive,9,8,10,7,11,no\n",
        )
        .unwrap();
        let f = read_forecast_dir(dir.path()).unwrap();
        assert_eq!(f.first_month, YearMonth::known(2026, 1));
        assert_eq!(f.products["A"].len(), 1);
        assert_eq!(f.products["A"][0].month, YearMonth::known(2026, 1));
    }

    #[test]
    fn cyp_file_needs_one_factor_per_method() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("cyp.csv");
        std::fs::write(&path, "method,cyp_per_unit\nring,0.1\nring,0.2\n").unwrap();
        let e = read_cyp(&path).unwrap_err().to_string();
        assert!(
            e.contains(":3: column 'method': 'ring' appears twice"),
            "{e}"
        );
        std::fs::write(&path, "method,units_per_cyp\npatch,0\n").unwrap();
        assert!(read_cyp(&path)
            .unwrap_err()
            .to_string()
            .contains("must be above 0"));
        std::fs::write(&path, "method,units_per_cyp\nPatch,13\n").unwrap();
        let (f, _) = read_cyp(&path).unwrap();
        assert_eq!(f[0].method, "patch");
        assert!((f[0].units_per_user_year() - 13.0).abs() < 1e-12);
    }
}
