//! The run configuration file (TOML): every option of `forecast` plus
//! settings per product, so a yearly exercise can be re-run the same way.
//!
//! The caller reads the file and hands its text to [`RunConfig::parse`];
//! every key is optional (an absent key keeps the built-in default or the
//! command-line value). Unknown keys, wrong types and out-of-range values
//! are refused with the file, line and column, and what would be valid.
//! [`KEYS`] and [`PRODUCT_KEYS`] list every key with its type, default,
//! range and meaning; `docs/configuration.md` documents the same.
//!
//! ```
//! use provisio::config::RunConfig;
//! let text = "[projection]\nhorizon = 18\n\n[products.\"ORS sachet\"]\nseasonal = false\npack_size = 100\n";
//! let cfg = RunConfig::parse("run.toml", text).unwrap();
//! assert_eq!(cfg.projection.horizon, Some(18));
//! assert_eq!(cfg.products["ORS sachet"].pack_size, Some(100.0));
//! let e = RunConfig::parse("run.toml", "[projection]\nhorizn = 18\n").unwrap_err();
//! assert!(e.to_string().contains("did you mean 'horizon'?"), "{e}");
//! ```

use std::collections::{BTreeMap, HashMap};
use std::ops::Range;

use serde::{Deserialize, Serialize};

use crate::backtest::{BacktestSettings, COMBINATION};
use crate::calendar::YearMonth;
use crate::clean::CleanSettings;
use crate::error::{Error, Result};
use crate::pipeline::ProductOptions;
use crate::select::SelectSettings;

/// One key of the configuration file: where it goes and what it means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KeyDoc {
    /// Section (table) name; `products."NAME"` for per-product keys.
    pub section: &'static str,
    /// Key name (the command-line option with `_` for `-`).
    pub key: &'static str,
    /// TOML type.
    pub kind: &'static str,
    /// Built-in default, as written in the file (or "not set").
    pub default: &'static str,
    /// Valid values.
    pub range: &'static str,
    /// What it does.
    pub meaning: &'static str,
    /// An example value, as written in the file.
    pub example: &'static str,
}

const fn key(
    section: &'static str,
    key: &'static str,
    kind: &'static str,
    default: &'static str,
    range: &'static str,
    meaning: &'static str,
    example: &'static str,
) -> KeyDoc {
    KeyDoc {
        section,
        key,
        kind,
        default,
        range,
        meaning,
        example,
    }
}

/// Valid names of `input.duplicates`.
pub const DUPLICATES: [&str; 2] = ["reject", "sum"];
/// Valid names of `input.numbers`.
pub const NUMBERS: [&str; 3] = ["plain", "grouped", "decimal-comma"];
/// Valid names of `input.layout`.
pub const LAYOUTS: [&str; 3] = ["auto", "long", "wide"];
/// Valid names of `input.encoding`.
pub const ENCODINGS: [&str; 3] = ["utf-8", "latin1", "windows-1252"];
/// Valid names of `selection.select_by`.
pub const SCORES: [&str; 5] = ["mape", "wape", "mase", "rmse", "rmsse"];
/// Valid names of `selection.default_model`.
pub const DEFAULT_MODELS: [&str; 4] = ["auto", "combination", "best-five-mean", "weighted-mean"];
/// Valid names of `backtest.backtest_detail`.
pub const DETAILS: [&str; 3] = ["chosen", "compared", "all"];
/// Largest `min_months` accepted (100 years).
pub const MAX_MIN_MONTHS: usize = 1200;

/// The sections of the file, in the order they are written.
pub const SECTIONS: [&str; 6] = [
    "input",
    "cleaning",
    "backtest",
    "selection",
    "projection",
    "output",
];

/// Every key of the run sections, in the order they are written.
pub const KEYS: &[KeyDoc] = &[
    key("input", "data", "text (path)", "not set", "a file", "the input consumption file; relative to the folder of the configuration file; the DATA argument overrides it", "\"consumption.csv\""),
    key("input", "until", "text (YYYY-MM)", "not set", "a month 1900-01 to 2100-12", "use only rows dated up to this month, as if forecasting then", "\"2025-10\""),
    key("input", "duplicates", "text", "\"reject\"", "\"reject\", \"sum\"", "two rows for the same product, month and site: reject them, or add their quantities", "\"reject\""),
    key("input", "numbers", "text", "\"plain\"", "\"plain\", \"grouped\", \"decimal-comma\"", "how numbers are written in the file", "\"plain\""),
    key("input", "encoding", "text", "\"utf-8\"", "\"utf-8\", \"latin1\", \"windows-1252\"", "text encoding of the file", "\"utf-8\""),
    key("input", "sheet", "text", "the active sheet", "a sheet name of the workbook", "sheet to read when the input is a workbook (.xlsx, .xlsm, .xls, .ods)", "\"Consumption\""),
    key("input", "layout", "text", "\"auto\"", "\"auto\", \"long\", \"wide\"", "how the table is laid out: a row per product and month (long), a row per product (and site) and a column per month (wide), or found from the header (auto)", "\"wide\""),
    key("input", "stockout_file", "text (path)", "not set", "a CSV file or workbook", "wide layout: stockout days as a table of the same shape; relative to the folder of the configuration file", "\"stockout_days.csv\""),
    key("input", "stockout_sheet", "text", "not set", "a sheet name", "wide layout: the sheet of stockout days (of stockout_file when set, else of the input workbook)", "\"Stockout days\""),
    key("input", "rate_file", "text (path)", "not set", "a CSV file or workbook", "wide layout: reporting rates as a table of the same shape; relative to the folder of the configuration file", "\"reporting_rates.csv\""),
    key("input", "rate_sheet", "text", "not set", "a sheet name", "wide layout: the sheet of reporting rates (of rate_file when set, else of the input workbook)", "\"Reporting rates\""),
    key("cleaning", "max_stockout_days", "number", "15.0", "0 to 31", "a month with more stockout days is treated as missing", "15.0"),
    key("cleaning", "reporting_floor", "number", "0.5", "above 0, at most 1", "a month reported below this rate (fraction) is treated as missing", "0.5"),
    key("cleaning", "nonreporting_weight", "number", "1.0", "0 to 1", "k: consumption assumed for non-reporting facilities relative to reporting ones (1 = divide by the rate)", "1.0"),
    key("cleaning", "site_trailing_fill", "integer", "3", "0 to 24", "months a site is still filled after its last report", "3"),
    key("cleaning", "outlier_threshold", "number", "5.0", "above 0", "interquartile ranges beyond the quartiles of the seasonal decomposition's remainder at which a month is flagged as an outlier", "5.0"),
    key("cleaning", "replace_outliers", "true/false", "true", "true, false", "fit on the expected value of a flagged outlier month instead of the reported one (false: flag only); the reported value stays in cleaned.csv", "true"),
    key("backtest", "origins", "integer", "12", "1 to 60", "number of rolling backtest origins (K)", "12"),
    key("backtest", "backtest_horizon", "integer", "12", "1 to 36", "months forecast at each backtest origin (H)", "12"),
    key("backtest", "score_imputed", "true/false", "false", "true, false", "also score months that are mostly imputed", "false"),
    key("backtest", "backtest_detail", "text", "\"chosen\"", "\"chosen\", \"compared\", \"all\"", "models whose backtest forecasts and scores by months ahead are written to backtest.csv and scores_by_horizon.csv: the chosen model; the chosen model, runner-up and combination; or every model", "\"chosen\""),
    key("selection", "select_by", "text", "\"mase\"", "\"mape\", \"wape\", \"mase\", \"rmse\", \"rmsse\"", "score to choose models by (intermittent demand is always scored by RMSSE; MAPE falls back to WAPE when over a third of the backtest months are zero)", "\"mase\""),
    key("selection", "tie_margin", "number", "0.5", "0 to 0.9", "relative gap by which another model must beat the default (the run's default, see default_model; SBA for intermittent demand), besides winning at enough backtest origins", "0.5"),
    key("selection", "default_model", "text", "\"auto\"", "\"auto\", \"combination\", \"best-five-mean\", \"weighted-mean\"", "the default each product starts from (intermittent demand keeps SBA): the fixed combination, the mean of the product's five best models by backtest, the run's weighted mean (weights learned across its products' backtests), or chosen for the run on its own backtest", "\"auto\""),
    key("selection", "pin", "text (path)", "not set", "a CSV file with columns product, model", "pinned models; relative to the folder of the configuration file", "\"pins.csv\""),
    key("projection", "changes", "text (path)", "not set", "a CSV file or workbook of known changes", "known changes ahead applied to the statistical projection (the adjusted forecast); relative to the folder of the configuration file", "\"changes.csv\""),
    key("projection", "horizon", "integer", "24", "1 to 60", "months projected, from the month after the data set's last month", "24"),
    key("projection", "silence_limit", "integer", "6", "0 to 120", "months a product may go without a report before the data set's last month without the possibly-discontinued warning", "6"),
    key("output", "out", "text (path)", "not set", "a folder", "folder for the outputs; relative to the folder of the configuration file; --out overrides it", "\"forecast-2026\""),
    key("output", "overwrite", "true/false", "false", "true, false", "write into the folder even if it holds files provisio did not write", "false"),
    key("output", "no_report", "true/false", "false", "true, false", "skip report.html", "false"),
    key("output", "no_workbook", "true/false", "false", "true, false", "skip the planner's workbook forecast.xlsx", "false"),
    key("output", "chart_files", "list of text", "[] (none)", "[\"all\"], or product names", "also write chart image files (PNG and SVG under charts/) for these products, or every product", "[\"all\"]"),
];

/// Every key of a `[products."NAME"]` table.
pub const PRODUCT_KEYS: &[KeyDoc] = &[
    key("products.\"NAME\"", "seasonal", "true/false", "not set", "true, false", "false: no seasonal model competes; true: only seasonal models (and the combination of them) compete when the cleaned history has at least 24 months, otherwise every model competes and a warning says why", "false"),
    key("products.\"NAME\"", "model", "text", "not set", "a model listed by `provisio models`, or \"combination\"", "use this model for the product (as the pin file does); the backtest still runs and the reason names the model it would have chosen", "\"ets-damped\""),
    key("products.\"NAME\"", "min_months", "integer", "not set", "1 to 1200", "with fewer months of cleaned history the product is not backtested: it gets the simplest applicable model, and the reason says why", "24"),
    key("products.\"NAME\"", "max_stockout_days", "number", "the [cleaning] value", "0 to 31", "stockout threshold of this product: a month with more stockout days is treated as missing", "10.0"),
    key("products.\"NAME\"", "units", "text", "not set", "any text", "base unit the quantities are counted in; written to forecast.csv", "\"sachet\""),
    key("products.\"NAME\"", "pack_size", "number", "not set", "0.01 to 1,000,000,000", "base units per pack; forecast.csv then also gives the forecast in packs", "100"),
];

/// `[input]`: the input file and how to read it.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct InputSection {
    /// Input file, relative to the configuration file's folder.
    pub data: Option<String>,
    /// Use only rows up to this month (`YYYY-MM`).
    pub until: Option<String>,
    /// Duplicate policy name (see [`DUPLICATES`]).
    pub duplicates: Option<String>,
    /// Number format name (see [`NUMBERS`]).
    pub numbers: Option<String>,
    /// Encoding name (see [`ENCODINGS`]).
    pub encoding: Option<String>,
    /// Sheet of a workbook input (default: the active sheet, else the
    /// first visible one).
    pub sheet: Option<String>,
    /// Table layout name (see [`LAYOUTS`]).
    pub layout: Option<String>,
    /// Wide layout: file of stockout days, relative to the configuration file's folder.
    pub stockout_file: Option<String>,
    /// Wide layout: sheet of stockout days.
    pub stockout_sheet: Option<String>,
    /// Wide layout: file of reporting rates, relative to the configuration file's folder.
    pub rate_file: Option<String>,
    /// Wide layout: sheet of reporting rates.
    pub rate_sheet: Option<String>,
}

/// `[cleaning]`: the fields of [`CleanSettings`].
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CleaningSection {
    /// See [`CleanSettings::max_stockout_days`].
    pub max_stockout_days: Option<f64>,
    /// See [`CleanSettings::reporting_floor`].
    pub reporting_floor: Option<f64>,
    /// See [`CleanSettings::nonreporting_weight`].
    pub nonreporting_weight: Option<f64>,
    /// See [`CleanSettings::site_trailing_fill`].
    pub site_trailing_fill: Option<u32>,
    /// See [`CleanSettings::outlier_threshold`].
    pub outlier_threshold: Option<f64>,
    /// See [`CleanSettings::replace_outliers`].
    pub replace_outliers: Option<bool>,
}

/// `[backtest]`: the rolling-origin evaluation.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct BacktestSection {
    /// Number of origins K.
    pub origins: Option<usize>,
    /// Months forecast at each origin, H.
    pub backtest_horizon: Option<usize>,
    /// Also score mostly-imputed months.
    pub score_imputed: Option<bool>,
    /// Backtest forecasts kept (see [`DETAILS`]).
    pub backtest_detail: Option<String>,
}

/// `[selection]`: how a model is chosen per product.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SelectionSection {
    /// Score name (see [`SCORES`]).
    pub select_by: Option<String>,
    /// Near-tie margin.
    pub tie_margin: Option<f64>,
    /// How the default is set (see [`DEFAULT_MODELS`]).
    pub default_model: Option<String>,
    /// Pin file, relative to the configuration file's folder.
    pub pin: Option<String>,
}

/// `[projection]`: the forecast itself.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ProjectionSection {
    /// Months projected.
    pub horizon: Option<usize>,
    /// Changes file, relative to the configuration file's folder.
    pub changes: Option<String>,
    /// Months without a report before the warning "possibly discontinued".
    pub silence_limit: Option<usize>,
}

/// `[output]`: where and what to write.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct OutputSection {
    /// Output folder, relative to the configuration file's folder.
    pub out: Option<String>,
    /// Write into a folder holding other files.
    pub overwrite: Option<bool>,
    /// Skip the charts and the HTML report.
    pub no_report: Option<bool>,
    /// Skip the planner's workbook `forecast.xlsx`.
    pub no_workbook: Option<bool>,
    /// Products (or `all`) whose chart image files are written.
    pub chart_files: Option<Vec<String>>,
}

/// `[products."NAME"]`: settings of one product (see [`PRODUCT_KEYS`]).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ProductConfig {
    /// Whether seasonal models compete (see [`ProductOptions::seasonal`]).
    pub seasonal: Option<bool>,
    /// Pinned model.
    pub model: Option<String>,
    /// Minimum months of history for a backtest.
    pub min_months: Option<usize>,
    /// Stockout threshold of this product (days).
    pub max_stockout_days: Option<f64>,
    /// Base unit of the quantities.
    pub units: Option<String>,
    /// Base units per pack.
    pub pack_size: Option<f64>,
}

/// The whole configuration file. Every field is optional.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct RunConfig {
    /// `[input]`.
    pub input: InputSection,
    /// `[cleaning]`.
    pub cleaning: CleaningSection,
    /// `[backtest]`.
    pub backtest: BacktestSection,
    /// `[selection]`.
    pub selection: SelectionSection,
    /// `[projection]`.
    pub projection: ProjectionSection,
    /// `[output]`.
    pub output: OutputSection,
    /// `[products."NAME"]` tables, by product name.
    pub products: BTreeMap<String, ProductConfig>,
}

/// The key of the `key = value` line holding byte `at`, when the line has
/// that shape.
fn key_before(text: &str, at: usize) -> Option<&str> {
    let start = text.get(..at)?.rfind('\n').map_or(0, |i| i + 1);
    let line = &text[start..];
    let line = line.split('\n').next().unwrap_or("");
    let (k, _) = line.split_once('=')?;
    let k = k.trim().trim_matches('"');
    (!k.is_empty() && k.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')).then_some(k)
}

/// Serde's Rust type names in plain words.
fn plain_types(message: &str) -> String {
    let m = message
        .replace("expected f64", "expected a number such as 15 or 0.5")
        .replace("expected usize", "expected a whole number (0 or more)")
        .replace("expected u32", "expected a whole number (0 or more)")
        .replace("expected a boolean", "expected true or false")
        .replace(" as i128,", ", too large;")
        .replace(
            "expected a sequence",
            "expected a list in brackets, such as [\"all\"] or [\"ORS sachet\", \"Zinc\"]",
        );
    // A bare date such as `until = 2025-06` is TOML's own date type, and
    // incomplete; the key wants a quoted month.
    if m.starts_with("invalid date") {
        return format!("{m}: write a month in quotes, such as \"2025-06\"");
    }
    m
}

/// Line and column (1-based, in characters) of a byte offset.
fn line_col(text: &str, offset: usize) -> (u64, u64) {
    let mut off = offset.min(text.len());
    while !text.is_char_boundary(off) {
        off -= 1;
    }
    let before = &text[..off];
    let line = before.matches('\n').count() as u64 + 1;
    let start = before.rfind('\n').map_or(0, |i| i + 1);
    let col = before[start..].chars().count() as u64 + 1;
    (line, col)
}

fn config_error(file: &str, text: &str, span: Option<Range<usize>>, message: String) -> Error {
    let (line, column) = span.map_or((0, 0), |s| line_col(text, s.start));
    Error::Config {
        file: file.to_string(),
        line,
        column,
        message,
    }
}

/// The valid key closest to `word` by edit distance, when close enough to
/// be a likely typing error.
pub fn nearest<'a>(word: &str, valid: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    valid
        .into_iter()
        .map(|v| (strsim::damerau_levenshtein(word, v), v))
        .filter(|(d, v)| {
            let prefix = word.len() >= 3 && (v.starts_with(word) || word.starts_with(v));
            *d <= 2.max(v.len() / 3) || prefix
        })
        .min_by_key(|(d, _)| *d)
        .map(|(_, v)| v)
}

/// "; did you mean 'X'?" for the name of `known` a user most likely meant
/// by `name` ([`nearest_name`]), or `otherwise` when none is near.
pub fn did_you_mean<'a>(
    name: &str,
    known: impl IntoIterator<Item = &'a str> + Clone,
    otherwise: &str,
) -> String {
    nearest_name(name, known).map_or_else(
        || otherwise.to_string(),
        |n| format!("; did you mean '{n}'?"),
    )
}

/// The name in `known` a user most likely meant by `name`, which is not
/// among them: one equal to it but for letter case and spacing first (a
/// product typed in another case, or with a double space), else the
/// closest by edit distance ([`nearest`]).
pub fn nearest_name<'a>(
    name: &str,
    known: impl IntoIterator<Item = &'a str> + Clone,
) -> Option<&'a str> {
    let fold = |s: &str| {
        s.split_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
            .to_lowercase()
    };
    let folded = fold(name);
    known
        .clone()
        .into_iter()
        .find(|k| fold(k) == folded)
        .or_else(|| nearest(name, known))
}

fn unknown(
    file: &str,
    text: &str,
    span: Range<usize>,
    word: &str,
    place: &str,
    valid: &[&str],
) -> Error {
    let hint = nearest(word, valid.iter().copied())
        .map(|n| format!("; did you mean '{n}'?"))
        .unwrap_or_default();
    config_error(
        file,
        text,
        Some(span),
        format!(
            "unknown key '{word}' {place}{hint} (valid: {})",
            valid.join(", ")
        ),
    )
}

type DeTable<'i> = toml::de::DeTable<'i>;

fn check_keys(file: &str, text: &str, doc: &DeTable) -> Result<()> {
    let mut top: Vec<&str> = SECTIONS.to_vec();
    top.push("products");
    for (k, v) in doc.iter() {
        let name: &str = k.get_ref();
        if !top.contains(&name) {
            return Err(unknown(
                file,
                text,
                k.span(),
                name,
                "at the top level",
                &top,
            ));
        }
        let Some(table) = v.get_ref().as_table() else {
            return Err(config_error(
                file,
                text,
                Some(k.span()),
                format!(
                    "'{name}' must be a table: write [{name}] on a line of its own, then its keys"
                ),
            ));
        };
        if name == "products" {
            let valid: Vec<&str> = PRODUCT_KEYS.iter().map(|d| d.key).collect();
            for (p, pv) in table.iter() {
                let product: &str = p.get_ref();
                let Some(pt) = pv.get_ref().as_table() else {
                    return Err(config_error(
                        file,
                        text,
                        Some(p.span()),
                        format!("'products.{product}' must be a table: write [products.\"{product}\"], then its keys (valid: {})", valid.join(", ")),
                    ));
                };
                for (pk, _) in pt.iter() {
                    let word: &str = pk.get_ref();
                    if !valid.contains(&word) {
                        let place = format!("in [products.\"{product}\"]");
                        return Err(unknown(file, text, pk.span(), word, &place, &valid));
                    }
                }
            }
        } else {
            let valid: Vec<&str> = KEYS
                .iter()
                .filter(|d| d.section == name)
                .map(|d| d.key)
                .collect();
            for (sk, _) in table.iter() {
                let word: &str = sk.get_ref();
                if !valid.contains(&word) {
                    // A key of another section is a likely slip: say where it goes.
                    let elsewhere = KEYS
                        .iter()
                        .find(|d| d.key == word)
                        .map(|d| format!("; '{word}' belongs in [{}]", d.section))
                        .unwrap_or_default();
                    let mut e =
                        unknown(file, text, sk.span(), word, &format!("in [{name}]"), &valid);
                    if let Error::Config { message, .. } = &mut e {
                        message.push_str(&elsewhere);
                    }
                    return Err(e);
                }
            }
        }
    }
    Ok(())
}

/// Span of a key's value: `section` is a run section, or `products` with
/// `product` given.
fn value_span(
    doc: &DeTable,
    section: &str,
    product: Option<&str>,
    key: &str,
) -> Option<Range<usize>> {
    let mut table = doc.get(section)?.get_ref().as_table()?;
    if let Some(p) = product {
        table = table.get(p)?.get_ref().as_table()?;
    }
    table.get(key).map(|v| v.span())
}

impl RunConfig {
    /// Parses and checks the text of a configuration file; `file` names it
    /// in messages. Errors give the line and column, and what would be
    /// valid (for an unknown key, the nearest valid one).
    pub fn parse(file: &str, text: &str) -> Result<RunConfig> {
        let de_err = |e: toml::de::Error| {
            // A value of the wrong type says what the key takes.
            let valid = e
                .span()
                .and_then(|sp| key_before(text, sp.start))
                .and_then(|k| {
                    let mut docs = KEYS.iter().filter(|d| d.key == k);
                    match (docs.next(), docs.next()) {
                        (Some(d), None) => Some(format!(" ({k}: {})", d.range)),
                        _ => None,
                    }
                })
                .unwrap_or_default();
            config_error(
                file,
                text,
                e.span(),
                format!(
                    "{}{valid}",
                    plain_types(e.message().trim()).replace('\n', " ")
                ),
            )
        };
        let doc = DeTable::parse(text).map_err(de_err)?;
        check_keys(file, text, doc.get_ref())?;
        let cfg: RunConfig = toml::from_str(text).map_err(de_err)?;
        cfg.check_values(file, text, doc.get_ref())?;
        Ok(cfg)
    }

    fn check_values(&self, file: &str, text: &str, doc: &DeTable) -> Result<()> {
        let at = |section: &str, product: Option<&str>, key: &str, message: String| {
            config_error(
                file,
                text,
                value_span(doc, section, product, key),
                format!("{key}: {message}"),
            )
        };
        let one_of = |section: &str, key: &str, v: &Option<String>, valid: &[&str]| match v {
            Some(x) if !valid.contains(&x.as_str()) => Err(at(
                section,
                None,
                key,
                format!(
                    "'{x}' is not valid; {}valid: {}",
                    nearest(x, valid.iter().copied())
                        .map(|n| format!("did you mean '{n}'? "))
                        .unwrap_or_default(),
                    valid.join(", ")
                ),
            )),
            _ => Ok(()),
        };
        one_of("input", "duplicates", &self.input.duplicates, &DUPLICATES)?;
        one_of("input", "numbers", &self.input.numbers, &NUMBERS)?;
        one_of("input", "encoding", &self.input.encoding, &ENCODINGS)?;
        one_of("input", "layout", &self.input.layout, &LAYOUTS)?;
        one_of("selection", "select_by", &self.selection.select_by, &SCORES)?;
        one_of(
            "selection",
            "default_model",
            &self.selection.default_model,
            &DEFAULT_MODELS,
        )?;
        one_of(
            "backtest",
            "backtest_detail",
            &self.backtest.backtest_detail,
            &DETAILS,
        )?;
        if let Some(u) = &self.input.until {
            YearMonth::parse(u).map_err(|e| at("input", None, "until", e))?;
        }
        for (section, key, v) in [
            ("input", "data", &self.input.data),
            ("selection", "pin", &self.selection.pin),
            ("projection", "changes", &self.projection.changes),
            ("output", "out", &self.output.out),
        ] {
            if v.as_deref().is_some_and(|s| s.trim().is_empty()) {
                return Err(at(
                    section,
                    None,
                    key,
                    "must name a file or folder, got an empty text".into(),
                ));
            }
        }
        // Ranges: the library's own checks, located at the key.
        let setting_at = |section: &'static str, e: Error| match e {
            Error::Setting { name, message } => {
                let key = name.replace('-', "_");
                at(section, None, &key, message)
            }
            other => other,
        };
        // A product's own stockout threshold first, located at its table.
        for (name, p) in &self.products {
            if let Some(d) = p.max_stockout_days.filter(|d| !(0.0..=31.0).contains(d)) {
                return Err(at(
                    "products",
                    Some(name),
                    "max_stockout_days",
                    format!("must be between 0 and 31 days, got {d}"),
                ));
            }
        }
        self.clean_settings(CleanSettings::default())
            .check()
            .map_err(|e| setting_at("cleaning", e))?;
        let b = BacktestSettings::default();
        BacktestSettings {
            origins: self.backtest.origins.unwrap_or(b.origins),
            horizon: self.backtest.backtest_horizon.unwrap_or(b.horizon),
            exclude_imputed: b.exclude_imputed,
        }
        .check()
        .map_err(|e| setting_at("backtest", e))?;
        SelectSettings {
            tie_margin: self
                .selection
                .tie_margin
                .unwrap_or(SelectSettings::default().tie_margin),
            ..SelectSettings::default()
        }
        .check()
        .map_err(|e| setting_at("selection", e))?;
        if let Some(h) = self.projection.horizon {
            crate::project::check_horizon(h).map_err(|e| setting_at("projection", e))?;
        }
        if let Some(l) = self.projection.silence_limit {
            crate::project::check_silence_limit(l).map_err(|e| setting_at("projection", e))?;
        }
        let models: Vec<String> = crate::models::candidates()
            .iter()
            .map(|m| m.name())
            .chain(std::iter::once(COMBINATION.to_string()))
            .collect();
        for (name, p) in &self.products {
            let at = |key: &str, message: String| at("products", Some(name), key, message);
            if let Some(m) = &p.model {
                if !models.contains(m) {
                    let hint = nearest(m, models.iter().map(String::as_str))
                        .map(|n| format!("did you mean '{n}'? "))
                        .unwrap_or_default();
                    return Err(at(
                        "model",
                        format!(
                            "'{m}' is not a candidate model; {hint}valid: {}",
                            models.join(", ")
                        ),
                    ));
                }
            }
            if let Some(n) = p.min_months {
                if !(1..=MAX_MIN_MONTHS).contains(&n) {
                    return Err(at(
                        "min_months",
                        format!("must be 1-{MAX_MIN_MONTHS} months, got {n}"),
                    ));
                }
            }
            if let Some(s) = p.pack_size {
                use crate::plan::read::{MAX_PACK_SIZE, MIN_PACK_SIZE};
                if !(MIN_PACK_SIZE..=MAX_PACK_SIZE).contains(&s) {
                    return Err(at(
                        "pack_size",
                        format!("must be the base units in one pack, from 0.01 to 1,000,000,000 (1 when counted by the unit), got {s}"),
                    ));
                }
            }
            if p.units.as_deref().is_some_and(|u| u.trim().is_empty()) {
                return Err(at(
                    "units",
                    "must be a name such as \"tablet\", got an empty text".into(),
                ));
            }
        }
        Ok(())
    }

    /// `base` with the `[cleaning]` values given here, and each product's
    /// own stockout threshold.
    pub fn clean_settings(&self, base: CleanSettings) -> CleanSettings {
        let c = &self.cleaning;
        let mut s = CleanSettings {
            max_stockout_days: c.max_stockout_days.unwrap_or(base.max_stockout_days),
            reporting_floor: c.reporting_floor.unwrap_or(base.reporting_floor),
            nonreporting_weight: c.nonreporting_weight.unwrap_or(base.nonreporting_weight),
            site_trailing_fill: c.site_trailing_fill.unwrap_or(base.site_trailing_fill),
            outlier_threshold: c.outlier_threshold.unwrap_or(base.outlier_threshold),
            replace_outliers: c.replace_outliers.unwrap_or(base.replace_outliers),
            stockout_days_by_product: base.stockout_days_by_product,
        };
        for (name, p) in &self.products {
            if let Some(d) = p.max_stockout_days {
                s.stockout_days_by_product.insert(name.clone(), d);
            }
        }
        s
    }

    /// The pipeline options of every product with a `[products]` table.
    pub fn product_options(&self) -> HashMap<String, ProductOptions> {
        self.products
            .iter()
            .map(|(name, p)| {
                (
                    name.clone(),
                    ProductOptions {
                        seasonal: p.seasonal,
                        model: p.model.clone(),
                        min_months: p.min_months,
                    },
                )
            })
            .collect()
    }

    /// The configuration as TOML text: every key of [`KEYS`] in order, each
    /// with a comment giving its meaning, default and range; keys not set
    /// are written commented out with an example. [`RunConfig::parse`]
    /// reads it back to the same configuration.
    pub fn to_toml(&self) -> String {
        let value = toml::Value::try_from(self).unwrap_or(toml::Value::Table(Default::default()));
        let mut out = String::from(
            "# provisio run configuration. Every key is optional; a key given on the\n\
             # command line overrides the value here. Paths are relative to this\n\
             # file's folder. See docs/configuration.md for every key.\n",
        );
        let get = |section: &str, key: &str| -> Option<String> {
            value
                .get(section)
                .and_then(|t| t.get(key))
                .map(|v| v.to_string())
        };
        for section in SECTIONS {
            out.push_str(&format!("\n[{section}]\n"));
            for d in KEYS.iter().filter(|d| d.section == section) {
                out.push_str(&format!(
                    "# {}\n#   {}; default {}; valid: {}\n",
                    d.meaning, d.kind, d.default, d.range
                ));
                match get(section, d.key) {
                    Some(v) => out.push_str(&format!("{} = {v}\n", d.key)),
                    None => out.push_str(&format!("# {} = {}\n", d.key, d.example)),
                }
            }
        }
        if self.products.is_empty() {
            out.push_str("\n# Settings of one product (see docs/configuration.md), e.g.\n");
            out.push_str("# [products.\"ORS sachet\"]\n");
            for d in PRODUCT_KEYS {
                out.push_str(&format!("# {} = {}\n", d.key, d.example));
            }
        }
        for (name, p) in &self.products {
            let pv = toml::Value::try_from(p).unwrap_or(toml::Value::Table(Default::default()));
            let quoted = toml::Value::String(name.clone()).to_string();
            out.push_str(&format!("\n[products.{quoted}]\n"));
            for d in PRODUCT_KEYS {
                if let Some(v) = pv.get(d.key) {
                    out.push_str(&format!("{} = {v}\n", d.key));
                }
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn full() -> RunConfig {
        let mut products = BTreeMap::new();
        products.insert(
            "ORS \"low\" sachet".to_string(),
            ProductConfig {
                seasonal: Some(false),
                model: Some("ets-damped".into()),
                min_months: Some(30),
                max_stockout_days: Some(8.5),
                units: Some("sachet".into()),
                pack_size: Some(100.0),
            },
        );
        products.insert("Zinc".to_string(), ProductConfig::default());
        RunConfig {
            input: InputSection {
                data: Some("consumption.csv".into()),
                until: Some("2025-10".into()),
                duplicates: Some("sum".into()),
                numbers: Some("decimal-comma".into()),
                encoding: Some("latin1".into()),
                sheet: Some("Consumption 2025".into()),
                layout: Some("wide".into()),
                stockout_file: Some("stockout_days.csv".into()),
                stockout_sheet: None,
                rate_file: Some("rates.xlsx".into()),
                rate_sheet: Some("Rates".into()),
            },
            cleaning: CleaningSection {
                max_stockout_days: Some(12.0),
                reporting_floor: Some(0.6),
                nonreporting_weight: Some(0.8),
                site_trailing_fill: Some(2),
                outlier_threshold: Some(4.0),
                replace_outliers: Some(true),
            },
            backtest: BacktestSection {
                origins: Some(6),
                backtest_horizon: Some(9),
                score_imputed: Some(true),
                backtest_detail: Some("all".into()),
            },
            selection: SelectionSection {
                select_by: Some("mase".into()),
                tie_margin: Some(0.05),
                default_model: Some("combination".into()),
                pin: Some("pins.csv".into()),
            },
            projection: ProjectionSection {
                horizon: Some(18),
                changes: Some("changes.csv".into()),
                silence_limit: Some(9),
            },
            output: OutputSection {
                out: Some("out dir".into()),
                overwrite: Some(true),
                no_report: Some(false),
                no_workbook: Some(true),
                chart_files: Some(vec!["all".into(), "ORS \"sachet\"".into()]),
            },
            products,
        }
    }

    #[test]
    fn nearest_name_prefers_the_same_name_in_another_case_or_spacing() {
        // Common practice: hand-typed names differ in case and spacing.
        let known = ["Zinc 20 mg", "Zinc 10 mg", "ORS sachet"];
        assert_eq!(nearest_name("zinc  10 MG", known), Some("Zinc 10 mg"));
        assert_eq!(nearest_name("ORS sachets", known), Some("ORS sachet"));
        assert_eq!(nearest_name("Amoxicillin", known), None);
    }

    #[test]
    fn written_file_reads_back_the_same() {
        for cfg in [full(), RunConfig::default()] {
            let text = cfg.to_toml();
            let back = RunConfig::parse("w.toml", &text).unwrap_or_else(|e| panic!("{e}\n{text}"));
            assert_eq!(back, cfg, "{text}");
            // Every key is written, set or commented out.
            for d in KEYS {
                assert!(text.contains(&format!("{} = ", d.key)), "{}", d.key);
            }
        }
    }

    #[test]
    fn unknown_keys_name_line_column_and_nearest() {
        let e = RunConfig::parse("run.toml", "# note\n[projection]\nhorizn = 3\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.starts_with("run.toml line 3, column 1: unknown key 'horizn'"),
            "{e}"
        );
        assert!(e.contains("did you mean 'horizon'?"), "{e}");
        let e = RunConfig::parse("run.toml", "[clean]\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 1, column 2") && e.contains("'cleaning'"),
            "{e}"
        );
        let e = RunConfig::parse("r.toml", "[products.A]\nseasonl = true\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 2, column 1") && e.contains("'seasonal'"),
            "{e}"
        );
        // A key of another section says where it belongs.
        let e = RunConfig::parse("r.toml", "[backtest]\nhorizon = 3\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("belongs in [projection]"), "{e}");
        // Nothing close: no guess.
        let e = RunConfig::parse("r.toml", "[output]\nzzzzzzzz = 1\n")
            .unwrap_err()
            .to_string();
        assert!(!e.contains("did you mean"), "{e}");
    }

    #[test]
    fn bad_syntax_types_and_ranges_are_located() {
        let cases: [(&str, &str); 17] = [
            ("[projection]\nhorizon = \n", "line 2"),
            ("[projection]\nhorizon = \"12\"\n", "line 2, column 11"),
            (
                "[projection]\nhorizon = 0\n",
                "line 2, column 11: horizon: must be 1-60",
            ),
            (
                "[cleaning]\nmax_stockout_days = 40\n",
                "line 2, column 21: max_stockout_days: must be between 0 and 31",
            ),
            ("[backtest]\norigins = -3\n", "line 2, column 11"),
            (
                "[selection]\nselect_by = \"mean\"\n",
                "valid: mape, wape, mase, rmse",
            ),
            ("[input]\nencoding = \"utf8\"\n", "did you mean 'utf-8'?"),
            (
                "[input]\nuntil = \"2025/10\"\n",
                "line 2, column 9: until: month",
            ),
            (
                "[products.\"A\"]\nmodel = \"ets-dampd\"\n",
                "did you mean 'ets-damped'?",
            ),
            (
                "[products.\"A\"]\npack_size = 0\n",
                "line 2, column 13: pack_size: must be the base units in one pack, from 0.01",
            ),
            // The stock file's range (src/plan/read.rs): a pack of 0.00004
            // units would make forecast.csv's pack size print as 0.
            (
                "[products.\"A\"]\npack_size = 0.00004\n",
                "line 2, column 13: pack_size: must be the base units in one pack, from 0.01",
            ),
            (
                "[output]\nchart_files = \"all\"\n",
                "line 2, column 15: invalid type: string \"all\", expected a list in brackets, such as [\"all\"]",
            ),
            (
                "[input]\nuntil = 2025-06\n",
                "line 2, column 9: invalid date, expected `-` (MM-DD): write a month in quotes, such as \"2025-06\"",
            ),
            (
                "[projection]\nhorizon = 99999999999999999999\n",
                "too large; expected a whole number (0 or more) (horizon: 1 to 60)",
            ),
            (
                "[projection]\nhorizon = -3\n",
                "(horizon: 1 to 60)",
            ),
            (
                "[projection]\nhorizon = \"24\"\n",
                "(horizon: 1 to 60)",
            ),
            (
                "[products.\"A\"]\nmax_stockout_days = 40\n",
                "line 2, column 21: max_stockout_days: must be between 0 and 31 days, got 40",
            ),
        ];
        for (text, want) in cases {
            let e = RunConfig::parse("r.toml", text).unwrap_err().to_string();
            assert!(e.starts_with("r.toml line"), "{e}");
            assert!(e.contains(want), "{text:?}: {e}");
        }
        let e = RunConfig::parse("r.toml", "projection = 3\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("must be a table"), "{e}");
    }

    #[test]
    fn integers_are_accepted_for_numbers() {
        let c = RunConfig::parse("r.toml", "[cleaning]\nmax_stockout_days = 10\n").unwrap();
        assert_eq!(c.cleaning.max_stockout_days, Some(10.0));
    }

    #[test]
    fn product_settings_reach_cleaning_and_pipeline() {
        let c = full();
        let s = c.clean_settings(CleanSettings::default());
        assert_eq!(s.max_stockout_days, 12.0);
        assert_eq!(s.stockout_days_by_product["ORS \"low\" sachet"], 8.5);
        let o = c.product_options();
        assert_eq!(o["ORS \"low\" sachet"].seasonal, Some(false));
        assert_eq!(o["ORS \"low\" sachet"].min_months, Some(30));
        assert_eq!(o["Zinc"], ProductOptions::default());
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(300))]
        /// Any text, and any cut or byte flip of a valid file, gives a
        /// configuration or an error, never a panic; errors are located.
        #[test]
        fn hostile_text_never_panics(
            text in "\\PC{0,200}",
            cut in 0usize..2000,
            flip in 0usize..2000,
            byte in proptest::prelude::any::<u8>(),
        ) {
            let _ = RunConfig::parse("r.toml", &text);
            let valid = full().to_toml();
            let mut cut_at = cut.min(valid.len());
            while !valid.is_char_boundary(cut_at) {
                cut_at -= 1;
            }
            let _ = RunConfig::parse("r.toml", &valid[..cut_at]);
            let mut bytes = valid.into_bytes();
            let i = flip % bytes.len();
            bytes[i] = byte;
            if let Ok(t) = std::str::from_utf8(&bytes) {
                if let Err(e) = RunConfig::parse("r.toml", t) {
                    proptest::prop_assert!(e.to_string().starts_with("r.toml"), "{}", e);
                }
            }
        }
    }
}
