//! Reading a past `forecast` output directory: forecast.csv, selection.csv,
//! cleaned.csv, adjustments.csv and manifest.json, as written by
//! [`crate::output`] at format version [`FORECAST_FORMAT_VERSION`]. Only
//! the path the caller gives is opened.

use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

use crate::calendar::YearMonth;
use crate::clean::{CleanSettings, MonthStatus};
use crate::data::DuplicatePolicy;
use crate::error::{Error, Result};
use crate::output::FORECAST_FORMAT_VERSION;

/// Files a past forecast directory must hold.
pub const REQUIRED_FILES: [&str; 5] = [
    "forecast.csv",
    "selection.csv",
    "cleaned.csv",
    "adjustments.csv",
    "manifest.json",
];

/// What the past run's manifest recorded that a review needs.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PastManifest {
    /// Tool and version that wrote the directory.
    pub tool: String,
    /// Layout version of the directory.
    pub format_version: u32,
    /// Input file of the past run, as given then.
    pub input: String,
    /// SHA-256 of that input.
    pub input_sha256: String,
    /// Cleaning settings of the past run (the actuals are cleaned with them).
    pub clean_settings: CleanSettings,
    /// Duplicate handling of the past run.
    pub duplicates: String,
    /// Whether the past backtest left mostly-imputed months out of scoring.
    pub exclude_imputed: bool,
    /// The `--until` month of the past run, if one was given.
    pub until: Option<String>,
    /// How the past run read numbers (`--numbers`); `plain` when the
    /// manifest predates the option.
    pub numbers: String,
    /// Text encoding the past run read (`--encoding`); `utf-8` when the
    /// manifest predates the option.
    pub encoding: String,
    /// The sheet the past run read, when its input was a workbook.
    pub sheet: Option<String>,
}

impl PastManifest {
    /// The number format as the reader takes it.
    pub fn number_format(&self) -> crate::data::NumberFormat {
        use crate::data::NumberFormat as N;
        [N::Plain, N::Grouped, N::DecimalComma]
            .into_iter()
            .find(|f| f.name() == self.numbers)
            .unwrap_or_default()
    }

    /// The text encoding as the reader takes it.
    pub fn text_encoding(&self) -> crate::data::Encoding {
        use crate::data::Encoding as E;
        [E::Utf8, E::Latin1, E::Windows1252]
            .into_iter()
            .find(|e| e.name() == self.encoding)
            .unwrap_or_default()
    }

    /// The duplicate policy as the reader takes it.
    pub fn duplicate_policy(&self) -> DuplicatePolicy {
        if self.duplicates == "sum" {
            DuplicatePolicy::Sum
        } else {
            DuplicatePolicy::Reject
        }
    }
}

/// What the past backtest promised for the chosen model (selection.csv).
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct Promised {
    /// Score the model was selected by.
    pub selected_by: String,
    /// Backtest MAPE, %.
    pub mape: Option<f64>,
    /// Backtest bias, %.
    pub bias: Option<f64>,
    /// Backtest WAPE, %.
    pub wape: Option<f64>,
    /// Backtest coverage of the 80% interval, %.
    pub coverage80: Option<f64>,
    /// Backtest coverage of the 95% interval, %.
    pub coverage95: Option<f64>,
}

/// One product of a past forecast.
#[derive(Debug, Clone, PartialEq)]
pub struct PastProduct {
    /// Product.
    pub product: String,
    /// Model that made the forecast.
    pub model: String,
    /// First forecast month.
    pub start: YearMonth,
    /// How many of the first forecast months are bridged (between the
    /// product's last month and the run's common projection start; 0 for
    /// folders written before the `bridged` column).
    pub bridged: usize,
    /// Point forecasts scored, one per month from `start`: the statistical
    /// forecast, or the adjusted one when `adjusted_scored`.
    pub point: Vec<f64>,
    /// The statistical point forecasts (equal to `point` unless
    /// `adjusted_scored`).
    pub statistical: Vec<f64>,
    /// Whether `point` and the intervals are the adjusted forecast: a new
    /// product added by a changes file has no statistical forecast (zero),
    /// so its adjusted forecast is the one that was made.
    pub adjusted_scored: bool,
    /// Lower bounds of the 80% interval (`None` when not given).
    pub lower80: Vec<Option<f64>>,
    /// Upper bounds of the 80% interval.
    pub upper80: Vec<Option<f64>>,
    /// Lower bounds of the 95% interval.
    pub lower95: Vec<Option<f64>>,
    /// Upper bounds of the 95% interval.
    pub upper95: Vec<Option<f64>>,
    /// First month of the cleaned history the forecast was made from.
    pub history_start: YearMonth,
    /// Cleaned history (empty when cleaned.csv has no row for the product).
    pub history: Vec<f64>,
    /// Reported history (sum over sites; `None` = nothing reported).
    pub history_reported: Vec<Option<f64>>,
    /// Provenance of each history month.
    pub history_status: Vec<MonthStatus>,
    /// History months flagged as outliers.
    pub history_outlier: Vec<bool>,
    /// Signed change per cleaning rule over the history, from adjustments.csv.
    pub history_changes: BTreeMap<String, f64>,
    /// What the backtest promised.
    pub promised: Promised,
}

impl PastProduct {
    /// Month of forecast position `k`.
    pub fn month(&self, k: usize) -> YearMonth {
        self.start.plus(k as i64)
    }

    /// Last forecast month.
    pub fn end(&self) -> YearMonth {
        self.start.plus(self.point.len() as i64 - 1)
    }
}

/// A past forecast directory, read and checked.
#[derive(Debug, Clone, PartialEq)]
pub struct PastForecast {
    /// The directory as the user gave it (the vintage's name in outputs).
    pub name: String,
    /// The directory.
    pub dir: PathBuf,
    /// Its manifest.
    pub manifest: PastManifest,
    /// Its products, ordered by name.
    pub products: Vec<PastProduct>,
}

impl PastForecast {
    /// Earliest and latest forecast month over all products.
    pub fn period(&self) -> Option<(YearMonth, YearMonth)> {
        let first = self.products.iter().map(|p| p.start).min()?;
        let last = self.products.iter().map(|p| p.end()).max()?;
        Some((first, last))
    }
}

fn input_err(path: &Path, line: u64, column: Option<&str>, message: impl Into<String>) -> Error {
    Error::Input {
        file: path.display().to_string(),
        line,
        column: column.map(str::to_string),
        message: message.into(),
    }
}

const VALID_DIR: &str = "a past forecast directory holds forecast.csv, selection.csv, cleaned.csv, adjustments.csv and manifest.json, as written by `provisio forecast DATA --out DIR`";

/// Reads and checks a past forecast directory.
pub fn read_past(dir: &Path) -> Result<PastForecast> {
    if !dir.is_dir() {
        return Err(input_err(
            dir,
            0,
            None,
            format!("not a directory; {VALID_DIR}"),
        ));
    }
    let missing: Vec<&str> = REQUIRED_FILES
        .iter()
        .copied()
        .filter(|f| !dir.join(f).is_file())
        .collect();
    if !missing.is_empty() {
        return Err(input_err(
            &dir.join(missing[0]),
            0,
            None,
            format!(
                "missing (the directory lacks: {}); {VALID_DIR}",
                missing.join(", ")
            ),
        ));
    }
    let manifest = read_manifest(&dir.join("manifest.json"))?;
    let forecasts = read_forecast(&dir.join("forecast.csv"))?;
    let promised = read_selection(&dir.join("selection.csv"))?;
    let mut history = read_cleaned(&dir.join("cleaned.csv"))?;
    let mut changes = read_adjustments(&dir.join("adjustments.csv"))?;
    let mut products = Vec::with_capacity(forecasts.len());
    for (product, f) in forecasts {
        let h = history.remove(&product);
        let h = h.unwrap_or(History {
            start: f.start,
            cleaned: Vec::new(),
            reported: Vec::new(),
            status: Vec::new(),
            outlier: Vec::new(),
        });
        let statistical = f.point.clone();
        let (adjusted_scored, point, bounds) = match f.adjusted {
            Some((point, bounds)) if f.model == crate::output::NEW_PRODUCT_MODEL => {
                (true, point, bounds)
            }
            _ => (false, f.point, f.bounds),
        };
        products.push(PastProduct {
            promised: promised.get(&product).cloned().unwrap_or_default(),
            history_changes: changes.remove(&product).unwrap_or_default(),
            model: f.model,
            start: f.start,
            bridged: f.bridged,
            point,
            statistical,
            adjusted_scored,
            lower80: bounds[0].clone(),
            upper80: bounds[1].clone(),
            lower95: bounds[2].clone(),
            upper95: bounds[3].clone(),
            history_start: h.start,
            history: h.cleaned,
            history_reported: h.reported,
            history_status: h.status,
            history_outlier: h.outlier,
            product,
        });
    }
    if products.is_empty() {
        return Err(input_err(
            &dir.join("forecast.csv"),
            0,
            None,
            "no forecast row; the file has only its header, so there is nothing to review",
        ));
    }
    Ok(PastForecast {
        name: dir.display().to_string(),
        dir: dir.to_path_buf(),
        manifest,
        products,
    })
}

fn read_manifest(path: &Path) -> Result<PastManifest> {
    let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        action: "cannot read",
        source,
    })?;
    let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        input_err(
            path,
            e.line() as u64,
            None,
            format!("not valid JSON ({e}); {VALID_DIR}"),
        )
    })?;
    let err = |m: String| input_err(path, 0, None, m);
    let rerun = "run `provisio forecast` again with this version of provisio to make a directory it can review";
    let version = match v.get("format_version") {
        None => {
            return Err(err(format!(
                "no 'format_version': the directory was written by an earlier provisio ({}) whose layout this version does not know; this provisio reads forecast directories of format version {FORECAST_FORMAT_VERSION}; {rerun}",
                v.get("tool").and_then(|t| t.as_str()).unwrap_or("unknown version")
            )))
        }
        Some(x) => x.as_u64().ok_or_else(|| {
            err(format!(
                "'format_version' is {x}, not a whole number; this provisio reads format version {FORECAST_FORMAT_VERSION}"
            ))
        })?,
    };
    if version != FORECAST_FORMAT_VERSION as u64 {
        return Err(err(format!(
            "format version {version} is not one this provisio reads (it reads format version {FORECAST_FORMAT_VERSION}); {rerun}"
        )));
    }
    let command = v.get("command").and_then(|c| c.as_str()).unwrap_or("");
    if command != "forecast" {
        return Err(err(format!(
            "written by the '{command}' command, not 'forecast'; {VALID_DIR}"
        )));
    }
    let text_field = |key: &str| -> Result<String> {
        v.get(key)
            .and_then(|x| x.as_str())
            .map(str::to_string)
            .ok_or_else(|| {
                err(format!(
                    "no '{key}' (text) in the manifest; it is needed to review like with like; {rerun}"
                ))
            })
    };
    let clean_value = v.get("clean_settings").ok_or_else(|| {
        err(format!(
            "no 'clean_settings' in the manifest: the actuals cannot be cleaned with the same rules as the past run; {rerun}"
        ))
    })?;
    let clean_settings: CleanSettings =
        serde_json::from_value(clean_value.clone()).map_err(|e| {
            err(format!(
                "'clean_settings' is incomplete or malformed ({e}); it needs max_stockout_days, reporting_floor, nonreporting_weight, site_trailing_fill, outlier_threshold, replace_outliers; {rerun}"
            ))
        })?;
    clean_settings
        .clone()
        .check()
        .map_err(|e| err(format!("'clean_settings' out of range: {e}")))?;
    let duplicates = text_field("duplicates")?;
    if duplicates != "reject" && duplicates != "sum" {
        return Err(err(format!(
            "'duplicates' is '{duplicates}'; valid: reject, sum"
        )));
    }
    let exclude_imputed = v
        .pointer("/forecast_settings/backtest/exclude_imputed")
        .and_then(|x| x.as_bool())
        .ok_or_else(|| {
            err(format!(
                "no 'forecast_settings.backtest.exclude_imputed' in the manifest; {rerun}"
            ))
        })?;
    // Read rules of the past run; manifests written before the options
    // existed read plain numbers in UTF-8.
    let optional = |key: &str, default: &str, valid: &[&str]| -> Result<String> {
        let value = v
            .get(key)
            .and_then(|x| x.as_str())
            .unwrap_or(default)
            .to_string();
        if valid.contains(&value.as_str()) {
            Ok(value)
        } else {
            Err(err(format!(
                "'{key}' is '{value}'; valid: {}",
                valid.join(", ")
            )))
        }
    };
    let numbers = optional("numbers", "plain", &["plain", "grouped", "decimal-comma"])?;
    let encoding = optional("encoding", "utf-8", &["utf-8", "latin1", "windows-1252"])?;
    Ok(PastManifest {
        numbers,
        encoding,
        tool: text_field("tool")?,
        format_version: version as u32,
        input: text_field("input")?,
        input_sha256: text_field("input_sha256")?,
        clean_settings,
        duplicates,
        exclude_imputed,
        until: v.get("until").and_then(|x| x.as_str()).map(str::to_string),
        sheet: v.get("sheet").and_then(|x| x.as_str()).map(str::to_string),
    })
}

/// A CSV file opened with its header mapped to column positions.
struct Table {
    path: PathBuf,
    columns: HashMap<String, usize>,
    records: Vec<(u64, csv::StringRecord)>,
}

impl Table {
    fn open(path: &Path, needed: &[&str]) -> Result<Table> {
        let bytes = std::fs::read(path)
            .map_err(|e| input_err(path, 0, None, format!("cannot read: {e}")))?;
        let body = crate::data::lf_line_ends(&bytes).into_owned();
        let mut r = csv::ReaderBuilder::new()
            .flexible(true)
            .from_reader(std::io::Cursor::new(body));
        let columns: HashMap<String, usize> = r
            .headers()
            .map_err(|e| input_err(path, 1, None, format!("cannot read the header: {e}")))?
            .iter()
            .enumerate()
            .map(|(i, h)| (h.trim().to_lowercase(), i))
            .collect();
        let absent: Vec<&str> = needed
            .iter()
            .copied()
            .filter(|c| !columns.contains_key(*c))
            .collect();
        if !absent.is_empty() {
            return Err(input_err(
                path,
                1,
                None,
                format!(
                    "missing column(s) {}; the file needs {} (format version {FORECAST_FORMAT_VERSION})",
                    absent.join(", "),
                    needed.join(", ")
                ),
            ));
        }
        let mut records = Vec::new();
        for rec in r.records() {
            let rec = rec.map_err(|e| {
                let line = e.position().map(|p| p.line()).unwrap_or(0);
                input_err(path, line, None, format!("cannot read the row: {e}"))
            })?;
            let line = rec.position().map(|p| p.line()).unwrap_or(0);
            records.push((line, rec));
        }
        Ok(Table {
            path: path.to_path_buf(),
            columns,
            records,
        })
    }

    fn cell<'a>(&self, rec: &'a csv::StringRecord, column: &str) -> &'a str {
        let v = self
            .columns
            .get(column)
            .and_then(|&i| rec.get(i))
            .unwrap_or("")
            .trim();
        // Names were written with formula text quoted (see `output::csv_text`).
        if column == "product" || column == "site" {
            crate::output::csv_text_read(v)
        } else {
            v
        }
    }

    fn month(&self, line: u64, rec: &csv::StringRecord, column: &str) -> Result<YearMonth> {
        YearMonth::parse(self.cell(rec, column))
            .map_err(|m| input_err(&self.path, line, Some(column), m))
    }

    fn number(&self, line: u64, rec: &csv::StringRecord, column: &str) -> Result<Option<f64>> {
        let s = self.cell(rec, column);
        if s.is_empty() {
            return Ok(None);
        }
        match s.parse::<f64>() {
            Ok(v) if v.is_finite() => Ok(Some(v)),
            _ => Err(input_err(
                &self.path,
                line,
                Some(column),
                format!("'{s}' is not a number; expected a plain decimal number such as 1234.5"),
            )),
        }
    }

    fn required(&self, line: u64, rec: &csv::StringRecord, column: &str) -> Result<f64> {
        self.number(line, rec, column)?.ok_or_else(|| {
            input_err(
                &self.path,
                line,
                Some(column),
                "empty; a number is required here",
            )
        })
    }
}

/// Checks that `month` is the next month of a product's rows: the files
/// hold each product's months consecutively, without gaps.
fn in_sequence(
    path: &Path,
    line: u64,
    product: &str,
    month: YearMonth,
    start: YearMonth,
    so_far: usize,
) -> Result<()> {
    let expected = start.plus(so_far as i64);
    if month == expected {
        return Ok(());
    }
    Err(input_err(
        path,
        line,
        Some("month"),
        format!(
            "product '{product}': month {month} out of sequence; expected {expected} (each product's months run consecutively, without gaps)"
        ),
    ))
}

struct ForecastRows {
    model: String,
    start: YearMonth,
    bridged: usize,
    point: Vec<f64>,
    bounds: Bounds,
    /// The adjusted forecast and its ranges, when every row has one (a
    /// run with a changes file); a zero-width range is no range (`None`).
    adjusted: Option<(Vec<f64>, Bounds)>,
}

/// The four range bounds of a forecast, one entry per month
/// (lower 80, upper 80, lower 95, upper 95).
type Bounds = [Vec<Option<f64>>; 4];

const BOUNDS: [&str; 4] = ["lower_80", "upper_80", "lower_95", "upper_95"];

const ADJUSTED_BOUNDS: [&str; 4] = [
    "adjusted_lower_80",
    "adjusted_upper_80",
    "adjusted_lower_95",
    "adjusted_upper_95",
];

/// The adjusted point and ranges of one forecast row; `None` when the file
/// has no adjusted forecast or the row leaves it empty. A range of zero
/// width (a new product's level: no history to measure it) is no range.
fn adjusted_row(t: &Table, line: u64, rec: &csv::StringRecord) -> Result<Option<AdjustedRow>> {
    if !t.columns.contains_key("adjusted") {
        return Ok(None);
    }
    let Some(point) = t.number(line, rec, "adjusted")? else {
        return Ok(None);
    };
    let mut b = [None; 4];
    for (slot, c) in b.iter_mut().zip(ADJUSTED_BOUNDS) {
        if t.columns.contains_key(c) {
            *slot = t.number(line, rec, c)?;
        }
    }
    let pair = |lo: Option<f64>, hi: Option<f64>| match (lo, hi) {
        (Some(l), Some(h)) if h > l => (Some(l), Some(h)),
        _ => (None, None),
    };
    let (l80, u80) = pair(b[0], b[1]);
    let (l95, u95) = pair(b[2], b[3]);
    Ok(Some((point, [l80, u80, l95, u95])))
}

type AdjustedRow = (f64, [Option<f64>; 4]);

fn read_forecast(path: &Path) -> Result<BTreeMap<String, ForecastRows>> {
    let t = Table::open(
        path,
        &[
            "product", "month", "model", "forecast", "lower_80", "upper_80", "lower_95", "upper_95",
        ],
    )?;
    let mut out: BTreeMap<String, ForecastRows> = BTreeMap::new();
    for (line, rec) in &t.records {
        let line = *line;
        let product = t.cell(rec, "product").to_string();
        if product.is_empty() {
            return Err(input_err(path, line, Some("product"), "empty product"));
        }
        let month = t.month(line, rec, "month")?;
        let point = t.required(line, rec, "forecast")?;
        let mut b = [None; 4];
        for (slot, c) in b.iter_mut().zip(BOUNDS) {
            *slot = t.number(line, rec, c)?;
        }
        let model = t.cell(rec, "model").to_string();
        let entry = out.entry(product.clone()).or_insert_with(|| ForecastRows {
            model: model.clone(),
            start: month,
            bridged: 0,
            point: Vec::new(),
            bounds: Default::default(),
            adjusted: Some(Default::default()),
        });
        if t.columns.contains_key("bridged") && t.cell(rec, "bridged") == "yes" {
            entry.bridged += 1;
        }
        in_sequence(path, line, &product, month, entry.start, entry.point.len())?;
        entry.point.push(point);
        for (v, x) in entry.bounds.iter_mut().zip(b) {
            v.push(x);
        }
        entry.adjusted = match (entry.adjusted.take(), adjusted_row(&t, line, rec)?) {
            (Some((mut ps, mut bs)), Some((p, b))) => {
                ps.push(p);
                for (v, x) in bs.iter_mut().zip(b) {
                    v.push(x);
                }
                Some((ps, bs))
            }
            _ => None,
        };
    }
    Ok(out)
}

fn read_selection(path: &Path) -> Result<HashMap<String, Promised>> {
    let t = Table::open(path, &["product", "chosen_model", "selected_by"])?;
    let mut out = HashMap::new();
    for (line, rec) in &t.records {
        let opt = |c: &str| -> Result<Option<f64>> {
            if t.columns.contains_key(c) {
                t.number(*line, rec, c)
            } else {
                Ok(None)
            }
        };
        out.insert(
            t.cell(rec, "product").to_string(),
            Promised {
                selected_by: t.cell(rec, "selected_by").to_string(),
                mape: opt("mape_pct")?,
                bias: opt("bias_pct")?,
                wape: opt("wape_pct")?,
                coverage80: opt("coverage_80_pct")?,
                coverage95: opt("coverage_95_pct")?,
            },
        );
    }
    Ok(out)
}

struct History {
    start: YearMonth,
    cleaned: Vec<f64>,
    reported: Vec<Option<f64>>,
    status: Vec<MonthStatus>,
    outlier: Vec<bool>,
}

const STATUSES: [MonthStatus; 4] = [
    MonthStatus::Reported,
    MonthStatus::Adjusted,
    MonthStatus::PartlyFilled,
    MonthStatus::Imputed,
];

fn read_cleaned(path: &Path) -> Result<HashMap<String, History>> {
    let t = Table::open(
        path,
        &[
            "product", "month", "reported", "cleaned", "status", "outlier",
        ],
    )?;
    let mut out: HashMap<String, History> = HashMap::new();
    for (line, rec) in &t.records {
        let line = *line;
        let product = t.cell(rec, "product").to_string();
        let month = t.month(line, rec, "month")?;
        let cleaned = t.required(line, rec, "cleaned")?;
        let reported = t.number(line, rec, "reported")?;
        let status_name = t.cell(rec, "status");
        let status = STATUSES
            .into_iter()
            .find(|s| s.name() == status_name)
            .ok_or_else(|| {
                let valid: Vec<&str> = STATUSES.iter().map(|s| s.name()).collect();
                input_err(
                    path,
                    line,
                    Some("status"),
                    format!(
                        "'{status_name}' is not a month status; valid: {}",
                        valid.join(", ")
                    ),
                )
            })?;
        let h = out.entry(product.clone()).or_insert_with(|| History {
            start: month,
            cleaned: Vec::new(),
            reported: Vec::new(),
            status: Vec::new(),
            outlier: Vec::new(),
        });
        in_sequence(path, line, &product, month, h.start, h.cleaned.len())?;
        h.cleaned.push(cleaned);
        h.reported.push(reported);
        h.status.push(status);
        h.outlier.push(t.cell(rec, "outlier") == "yes");
    }
    Ok(out)
}

fn read_adjustments(path: &Path) -> Result<HashMap<String, BTreeMap<String, f64>>> {
    let t = Table::open(path, &["product", "month", "before", "after", "rule"])?;
    let mut out: HashMap<String, BTreeMap<String, f64>> = HashMap::new();
    for (line, rec) in &t.records {
        let line = *line;
        let before = t.number(line, rec, "before")?.unwrap_or(0.0);
        let after = t.number(line, rec, "after")?.unwrap_or(0.0);
        let rule = t.cell(rec, "rule");
        if !crate::clean::Rule::ALL.iter().any(|r| r.name() == rule) {
            let valid: Vec<&str> = crate::clean::Rule::ALL.iter().map(|r| r.name()).collect();
            return Err(input_err(
                path,
                line,
                Some("rule"),
                format!(
                    "'{rule}' is not a cleaning rule; valid: {}",
                    valid.join(", ")
                ),
            ));
        }
        *out.entry(t.cell(rec, "product").to_string())
            .or_default()
            .entry(rule.to_string())
            .or_default() += after - before;
    }
    Ok(out)
}
