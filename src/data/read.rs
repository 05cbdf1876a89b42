//! Reading and validating the long CSV input.

use std::collections::HashMap;
use std::path::Path;

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
}

const REQUIRED: [&str; 3] = ["product", "month", "consumed"];
const OPTIONAL: [&str; 3] = ["stockout_days", "reporting_rate", "site"];

/// Reads an input file from disk. See [`read_csv_bytes`].
pub fn read_csv_path(path: &Path, options: &ReadOptions) -> Result<Dataset> {
    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        action: "cannot read input",
        source,
    })?;
    read_csv_bytes(&path.display().to_string(), &bytes, options)
}

/// Column positions of the contract's fields in one file.
struct Columns {
    product: usize,
    month: usize,
    consumed: usize,
    stockout_days: Option<usize>,
    reporting_rate: Option<usize>,
    site: Option<usize>,
    width: usize,
}

/// Reads the long CSV contract from bytes. `source` names the file in
/// messages. Problems with the file as a whole are errors; problems with a
/// row reject that row (with the reason) and reading goes on.
pub fn read_csv_bytes(source: &str, bytes: &[u8], options: &ReadOptions) -> Result<Dataset> {
    let input_err = |line: u64, column: Option<&str>, message: String| Error::Input {
        file: source.to_string(),
        line,
        column: column.map(str::to_string),
        message,
    };
    let (bytes, had_bom) = match bytes.strip_prefix(b"\xEF\xBB\xBF") {
        Some(rest) => (rest, true),
        None => (bytes, false),
    };
    let text = std::str::from_utf8(bytes).map_err(|e| {
        let at = e.valid_up_to();
        let line = 1 + bytes[..at].iter().filter(|&&b| b == b'\n').count() as u64;
        let byte = bytes.get(at).copied().unwrap_or(0);
        input_err(
            line,
            None,
            format!(
                "the file is not UTF-8 text (byte 0x{byte:02X} cannot start a UTF-8 character); \
                 it is probably a Latin-1 / Windows-1252 export: save it again as \"CSV UTF-8\""
            ),
        )
    })?;
    if text.trim().is_empty() {
        return Err(input_err(
            0,
            None,
            format!(
                "the file is empty; expected a header line naming at least the columns {}",
                REQUIRED.join(", ")
            ),
        ));
    }
    let delimiter = detect_delimiter(text);
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(text.as_bytes());
    let mut records = reader.records();
    let header = match records.next() {
        Some(Ok(h)) => h,
        Some(Err(e)) => return Err(input_err(1, None, format!("cannot read the header: {e}"))),
        None => {
            return Err(input_err(
                0,
                None,
                "the file has no header line".to_string(),
            ));
        }
    };
    let (columns, extra_columns) = map_header(&header).map_err(|m| input_err(1, None, m))?;

    // First pass over the raw records: needed to decide, column-wide,
    // whether plain reporting-rate numbers are fractions or percentages.
    let mut raw: Vec<(u64, csv::StringRecord)> = Vec::new();
    for rec in records {
        match rec {
            Ok(r) => {
                let line = r.position().map(|p| p.line()).unwrap_or(0);
                raw.push((line, r));
            }
            Err(e) => {
                let line = e.position().map(|p| p.line()).unwrap_or(0);
                return Err(input_err(line, None, format!("cannot read the row: {e}")));
            }
        }
    }
    let rate_as_percent = columns.reporting_rate.is_some_and(|c| {
        raw.iter().any(|(_, r)| {
            r.get(c)
                .map(str::trim)
                .filter(|v| !v.ends_with('%'))
                .and_then(|v| v.parse::<f64>().ok())
                .is_some_and(|v| v.is_finite() && v > 1.0)
        })
    });

    let delim_char = delimiter as char;
    let mut rows: Vec<InputRow> = Vec::with_capacity(raw.len());
    let mut rejected = Vec::new();
    for (line, rec) in &raw {
        match parse_row(*line, rec, &columns, rate_as_percent) {
            Ok(row) => rows.push(row),
            Err((column, value, reason)) => rejected.push(RejectedRow {
                line: *line,
                column,
                value,
                reason,
                raw: rec.iter().collect::<Vec<_>>().join(&delim_char.to_string()),
            }),
        }
    }
    let rows_read = raw.len();
    let raw_by_line: HashMap<u64, &csv::StringRecord> = raw.iter().map(|(l, r)| (*l, r)).collect();
    let mut merged = Vec::new();
    let rows = resolve_duplicates(
        rows,
        options.duplicates,
        &mut rejected,
        &mut merged,
        |line| {
            raw_by_line
                .get(&line)
                .map(|r| r.iter().collect::<Vec<_>>().join(&delim_char.to_string()))
                .unwrap_or_default()
        },
    );
    rejected.sort_by_key(|r| r.line);

    let mut warnings = Vec::new();
    if rate_as_percent {
        warnings.push(
            "reporting_rate has values above 1, so plain numbers in that column are read as percentages (80 = 80%)"
                .to_string(),
        );
    }
    if !extra_columns.is_empty() {
        warnings.push(format!(
            "extra columns kept in the file but not used: {}",
            extra_columns.join(", ")
        ));
    }
    if rows.is_empty() && rows_read > 0 {
        let first = rejected
            .first()
            .map(|r| format!("; first problem, line {}: {}", r.line, r.reason))
            .unwrap_or_default();
        return Err(input_err(
            0,
            None,
            format!("no usable rows: all {rows_read} data rows were rejected{first}"),
        ));
    }
    if rows_read == 0 {
        return Err(input_err(
            0,
            None,
            "the file has a header but no data rows".to_string(),
        ));
    }
    let _ = columns.width;
    Ok(Dataset {
        source: source.to_string(),
        rows_read,
        rows,
        rejected,
        merged,
        warnings,
        layout: Layout {
            delimiter: delim_char,
            had_bom,
            has_site: columns.site.is_some(),
            has_stockout_days: columns.stockout_days.is_some(),
            has_reporting_rate: columns.reporting_rate.is_some(),
            reporting_rate_as_percent: rate_as_percent,
            extra_columns,
        },
    })
}

/// Picks the delimiter that splits the header line into the most fields,
/// ignoring delimiters inside quotes. Comma wins ties.
fn detect_delimiter(text: &str) -> u8 {
    let header = text.lines().find(|l| !l.trim().is_empty()).unwrap_or("");
    let mut counts = [(b',', 0usize), (b';', 0), (b'\t', 0)];
    let mut in_quotes = false;
    for b in header.bytes() {
        if b == b'"' {
            in_quotes = !in_quotes;
        } else if !in_quotes {
            for c in counts.iter_mut() {
                if c.0 == b {
                    c.1 += 1;
                }
            }
        }
    }
    let mut best = counts[0];
    for c in counts {
        if c.1 > best.1 {
            best = c;
        }
    }
    best.0
}

fn normalise_name(name: &str) -> String {
    name.trim()
        .to_lowercase()
        .chars()
        .map(|c| if c == ' ' || c == '-' { '_' } else { c })
        .collect()
}

fn map_header(header: &csv::StringRecord) -> std::result::Result<(Columns, Vec<String>), String> {
    let names: Vec<String> = header.iter().map(normalise_name).collect();
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
            None => extra.push(header.get(i).unwrap_or("").trim().to_string()),
        }
    }
    let missing: Vec<&str> = REQUIRED
        .iter()
        .copied()
        .filter(|k| !found.contains_key(k))
        .collect();
    if !missing.is_empty() {
        let shown: Vec<&str> = header.iter().map(str::trim).collect();
        let mut msg = format!(
            "missing required column{} {}; the header has: {}; required: {} (optional: {})",
            if missing.len() > 1 { "s" } else { "" },
            missing
                .iter()
                .map(|m| format!("'{m}'"))
                .collect::<Vec<_>>()
                .join(", "),
            shown.join(", "),
            REQUIRED.join(", "),
            OPTIONAL.join(", "),
        );
        for m in &missing {
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
        },
        extra,
    ))
}

/// Loose match for suggesting a column name: shared prefix of four letters.
fn is_near(candidate: &str, wanted: &str) -> bool {
    candidate.len() >= 4 && wanted.len() >= 4 && candidate[..].get(..4) == wanted.get(..4)
}

type RowProblem = (Option<String>, String, String);

fn parse_row(
    line: u64,
    rec: &csv::StringRecord,
    cols: &Columns,
    rate_as_percent: bool,
) -> std::result::Result<InputRow, RowProblem> {
    let _ = line;
    if rec.iter().all(|f| f.trim().is_empty()) {
        return Err((None, String::new(), "the row is empty".to_string()));
    }
    if rec.len() > cols.width && rec.iter().skip(cols.width).any(|f| !f.trim().is_empty()) {
        return Err((
            None,
            String::new(),
            format!(
                "the row has {} fields but the header has {}; check for an unquoted delimiter inside a value (a thousands separator as in 1,234, or a comma in a name: put the value in quotes)",
                rec.len(),
                cols.width
            ),
        ));
    }
    let field = |i: usize| rec.get(i).unwrap_or("").trim();
    let problem =
        |col: &str, value: &str, reason: String| (Some(col.to_string()), value.to_string(), reason);

    let product = field(cols.product);
    if product.is_empty() {
        return Err(problem(
            "product",
            "",
            "product is empty; every row needs a product code or name".into(),
        ));
    }
    let month_text = field(cols.month);
    let month = YearMonth::parse(month_text).map_err(|m| problem("month", month_text, m))?;

    let consumed_text = field(cols.consumed);
    let consumed =
        parse_number(consumed_text).map_err(|m| problem("consumed", consumed_text, m))?;
    if let Some(c) = consumed {
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
            let t = field(i);
            let v = parse_number(t).map_err(|m| problem("stockout_days", t, m))?;
            if let Some(d) = v {
                let dim = month.days();
                if d < 0.0 || d > dim as f64 {
                    return Err(problem(
                        "stockout_days",
                        t,
                        format!("stockout_days {t} is outside 0-{dim} ({month} has {dim} days)"),
                    ));
                }
            }
            v
        }
    };

    let reporting_rate = match cols.reporting_rate {
        None => None,
        Some(i) => {
            let t = field(i);
            let (num, percent) = match t.strip_suffix('%') {
                Some(n) => (n.trim(), true),
                None => (t, rate_as_percent),
            };
            let v = parse_number(num).map_err(|m| problem("reporting_rate", t, m))?;
            match v {
                None => None,
                Some(r) => {
                    let frac = if percent { r / 100.0 } else { r };
                    if !(0.0..=1.0).contains(&frac) {
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
                    Some(frac)
                }
            }
        }
    };

    let site = match cols.site {
        None => None,
        Some(i) => {
            let s = field(i);
            if s.is_empty() {
                return Err(problem(
                    "site",
                    "",
                    "site is empty while the file has a site column; name the site, or put all-site totals in a file of their own".into(),
                ));
            }
            Some(s.to_string())
        }
    };

    Ok(InputRow {
        line,
        product: product.to_string(),
        site,
        month,
        consumed,
        stockout_days,
        reporting_rate,
    })
}

/// Parses a plain decimal number; empty is `None`. Refuses infinities, NaN,
/// decimal commas and thousands separators with a message saying so.
fn parse_number(text: &str) -> std::result::Result<Option<f64>, String> {
    let t = text.trim();
    if t.is_empty() {
        return Ok(None);
    }
    let valid = "expected a plain number such as 1250 or 1250.5 (point as decimal mark, no thousands separator), or empty for not reported";
    if t.contains(',') {
        return Err(format!(
            "\"{t}\" has a comma (decimal comma or thousands separator); {valid}"
        ));
    }
    if t.contains(' ') || t.contains('\u{a0}') {
        return Err(format!(
            "\"{t}\" has a space inside (thousands separator?); {valid}"
        ));
    }
    let ok_chars = t
        .bytes()
        .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b'-' | b'+' | b'e' | b'E'));
    match t.parse::<f64>() {
        Ok(v) if ok_chars && v.is_finite() => Ok(Some(v)),
        _ => Err(format!("\"{t}\" is not a number; {valid}")),
    }
}

type Key = (String, Option<String>, YearMonth);

fn resolve_duplicates(
    rows: Vec<InputRow>,
    policy: DuplicatePolicy,
    rejected: &mut Vec<RejectedRow>,
    merged: &mut Vec<MergedRow>,
    raw_of: impl Fn(u64) -> String,
) -> Vec<InputRow> {
    let mut first_of: HashMap<Key, usize> = HashMap::with_capacity(rows.len());
    let mut keep: Vec<Option<InputRow>> = Vec::with_capacity(rows.len());
    let mut conflicted: Vec<bool> = Vec::with_capacity(rows.len());
    for row in rows {
        let key = (row.product.clone(), row.site.clone(), row.month);
        match first_of.get(&key) {
            None => {
                first_of.insert(key, keep.len());
                keep.push(Some(row));
                conflicted.push(false);
            }
            Some(&idx) => {
                let first_line = keep[idx].as_ref().map(|r| r.line).unwrap_or(0);
                let what = describe_key(&row);
                let first = keep[idx].as_ref();
                let same = first.is_some_and(|f| {
                    f.consumed == row.consumed
                        && f.stockout_days == row.stockout_days
                        && f.reporting_rate == row.reporting_rate
                });
                match policy {
                    DuplicatePolicy::Reject if same => rejected.push(RejectedRow {
                        line: row.line,
                        column: None,
                        value: String::new(),
                        reason: format!(
                            "exact duplicate of line {first_line} ({what}); the first copy is used"
                        ),
                        raw: raw_of(row.line),
                    }),
                    DuplicatePolicy::Reject => {
                        conflicted[idx] = true;
                        rejected.push(RejectedRow {
                            line: row.line,
                            column: None,
                            value: String::new(),
                            reason: format!(
                                "duplicate of line {first_line} ({what}) with different values; both rejected, the month is treated as missing (use --duplicates sum to add them)"
                            ),
                            raw: raw_of(row.line),
                        });
                    }
                    DuplicatePolicy::Sum => {
                        let agree = first.is_some_and(|f| {
                            f.stockout_days == row.stockout_days
                                && f.reporting_rate == row.reporting_rate
                        });
                        if agree {
                            if let Some(f) = keep[idx].as_mut() {
                                f.consumed = match (f.consumed, row.consumed) {
                                    (None, None) => None,
                                    (a, b) => Some(a.unwrap_or(0.0) + b.unwrap_or(0.0)),
                                };
                            }
                            merged.push(MergedRow {
                                line: row.line,
                                into_line: first_line,
                            });
                        } else {
                            rejected.push(RejectedRow {
                                line: row.line,
                                column: None,
                                value: String::new(),
                                reason: format!(
                                    "duplicate of line {first_line} ({what}) with different stockout_days or reporting_rate, so the quantities cannot be added"
                                ),
                                raw: raw_of(row.line),
                            });
                        }
                    }
                }
            }
        }
    }
    let mut out = Vec::with_capacity(keep.len());
    for (row, bad) in keep.into_iter().zip(conflicted) {
        let Some(row) = row else { continue };
        if bad {
            let what = describe_key(&row);
            rejected.push(RejectedRow {
                line: row.line,
                column: None,
                value: String::new(),
                reason: format!("has a duplicate with different values later in the file ({what}); both rejected, the month is treated as missing"),
                raw: raw_of(row.line),
            });
        } else {
            out.push(row);
        }
    }
    out
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
        let d =
            read("product,month,consumed,reporting_rate\nA,2024-01,5,80\nA,2024-02,5,1\n").unwrap();
        assert!(d.layout.reporting_rate_as_percent);
        assert!((d.rows[0].reporting_rate.unwrap() - 0.8).abs() < 1e-12);
        assert!((d.rows[1].reporting_rate.unwrap() - 0.01).abs() < 1e-12);
    }

    #[test]
    fn missing_column_is_fatal_and_named() {
        let e = read("product,month,consumption\nA,2024-01,5\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("t.csv:1"), "{e}");
        assert!(e.contains("'consumed'"), "{e}");
        assert!(e.contains("did you mean to name 'consumption'"), "{e}");
    }

    #[test]
    fn bad_values_are_rejected_with_line_and_column() {
        let d = read(
            "product,month,consumed,stockout_days\nA,2024-01,5,0\nA,2024-02,x,0\nA,2024-13,5,0\nA,2024-03,-1,0\nA,2023-02,5,29\nA,2024-04,inf,0\n",
        )
        .unwrap();
        assert_eq!(d.rows.len(), 1);
        let lines: Vec<u64> = d.rejected.iter().map(|r| r.line).collect();
        assert_eq!(lines, vec![3, 4, 5, 6, 7]);
        assert_eq!(d.rejected[0].column.as_deref(), Some("consumed"));
        assert_eq!(d.rejected[1].column.as_deref(), Some("month"));
        assert!(
            d.rejected[3].reason.contains("outside 0-28"),
            "{}",
            d.rejected[3].reason
        );
    }

    #[test]
    fn duplicates_rejected_or_summed() {
        let text = "product,month,consumed\nA,2024-01,5\nA,2024-01,7\nA,2024-02,3\nA,2024-02,3\n";
        let d = read(text).unwrap();
        assert_eq!(d.rows.len(), 1); // only 2024-02 first copy
        assert_eq!(d.rejected.len(), 3);
        assert_eq!(d.rows_accepted() + d.rejected.len(), d.rows_read);
        let d = read_csv_bytes(
            "t.csv",
            text.as_bytes(),
            &ReadOptions {
                duplicates: DuplicatePolicy::Sum,
            },
        )
        .unwrap();
        assert_eq!(d.rows[0].consumed, Some(12.0));
        assert_eq!(d.rows[1].consumed, Some(6.0));
        assert_eq!(d.merged.len(), 2);
        assert_eq!(d.rows_accepted() + d.rejected.len(), d.rows_read);
    }

    #[test]
    fn not_utf8_names_line() {
        let mut bytes = b"product,month,consumed\nA,2024-01,5\n".to_vec();
        bytes.extend_from_slice(b"Caf\xE9,2024-01,5\n");
        let e = read_csv_bytes("t.csv", &bytes, &ReadOptions::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("t.csv:3"), "{e}");
        assert!(e.contains("not UTF-8"), "{e}");
    }

    #[test]
    fn empty_and_header_only() {
        assert!(read("").unwrap_err().to_string().contains("empty"));
        assert!(read("product,month,consumed\n")
            .unwrap_err()
            .to_string()
            .contains("no data rows"));
    }

    #[test]
    fn quoted_fields_with_delimiters_and_newlines() {
        let d = read("product,month,consumed\n\"Tabs, 10 mg\nbox\",2024-01,5\n").unwrap();
        assert_eq!(d.rows[0].product, "Tabs, 10 mg\nbox");
    }
}
