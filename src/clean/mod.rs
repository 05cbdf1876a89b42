//! Cleaning: stockout and reporting adjustments, site filling, imputation
//! and outlier flagging, each change recorded in the adjustment log.

pub mod impute;
mod log;
pub mod outliers;
pub mod reporting;
pub mod stockout;

pub use log::{Adjustment, AdjustmentLog, FillCause, Reason, Rule};

use std::collections::{BTreeMap, HashMap, HashSet};
use std::sync::Arc;

use rayon::prelude::*;

use crate::calendar::YearMonth;
use crate::data::{build_series, Dataset, ProductData, SiteSeries};
use crate::error::{Error, Result};
use impute::impute;

/// Cleaning settings as the user gives them. Check them with
/// [`CleanSettings::check`] before use.
///
/// | setting | default | range |
/// |---|---|---|
/// | `max_stockout_days` | 15 | 0–31: months with more stockout days are treated as missing |
/// | `reporting_floor` | 0.5 | 0–1: months reported below this rate are treated as missing |
/// | `nonreporting_weight` (k) | 1.0 | 0–1: relative consumption assumed for non-reporting facilities |
/// | `site_trailing_fill` | 3 | 0–24: months a site may be filled after its last report |
/// | `outlier_threshold` | 5.0 | > 0: interquartile ranges beyond the quartiles of the decomposition remainder at which a month is flagged |
/// | `replace_outliers` | true | replace flagged months by the robust expected value (measured: forecasts true demand better; README) |
/// | `stockout_days_by_product` | none | 0–31 per product: its own `max_stockout_days` |
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct CleanSettings {
    /// Stockout days above which a month is treated as missing.
    pub max_stockout_days: f64,
    /// Reporting rate below which a month is treated as missing.
    pub reporting_floor: f64,
    /// k in N = N_rep + N_rep × (1/c − 1) × k.
    pub nonreporting_weight: f64,
    /// Months after a site's last row that are still filled.
    pub site_trailing_fill: u32,
    /// Interquartile ranges beyond the quartiles of the remainder at which
    /// a month is flagged (see [`outliers`]).
    pub outlier_threshold: f64,
    /// Replace flagged outliers (otherwise only flag them).
    pub replace_outliers: bool,
    /// Products with their own stockout threshold (days), replacing
    /// `max_stockout_days` for that product.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub stockout_days_by_product: BTreeMap<String, f64>,
}

impl Default for CleanSettings {
    fn default() -> Self {
        CleanSettings {
            max_stockout_days: 15.0,
            reporting_floor: 0.5,
            nonreporting_weight: 1.0,
            site_trailing_fill: 3,
            outlier_threshold: outliers::DEFAULT_THRESHOLD,
            replace_outliers: true,
            stockout_days_by_product: BTreeMap::new(),
        }
    }
}

/// Settings that passed [`CleanSettings::check`].
#[derive(Debug, Clone, PartialEq)]
pub struct CheckedCleanSettings(CleanSettings);

impl CheckedCleanSettings {
    /// The checked values.
    pub fn get(&self) -> &CleanSettings {
        &self.0
    }
}

impl CleanSettings {
    /// Validates every setting; the error names the bad value.
    pub fn check(self) -> Result<CheckedCleanSettings> {
        let s = &self;
        if !(0.0..=31.0).contains(&s.max_stockout_days) {
            return Err(Error::setting(
                "max-stockout-days",
                format!("must be between 0 and 31, got {}", s.max_stockout_days),
            ));
        }
        if !(s.reporting_floor > 0.0 && s.reporting_floor <= 1.0) {
            return Err(Error::setting(
                "reporting-floor",
                format!(
                    "must be above 0 and at most 1 (a fraction), got {}",
                    s.reporting_floor
                ),
            ));
        }
        if !(0.0..=1.0).contains(&s.nonreporting_weight) {
            return Err(Error::setting(
                "nonreporting-weight",
                format!("must be between 0 and 1, got {}", s.nonreporting_weight),
            ));
        }
        if s.site_trailing_fill > 24 {
            return Err(Error::setting(
                "site-trailing-fill",
                format!("must be at most 24 months, got {}", s.site_trailing_fill),
            ));
        }
        if !(s.outlier_threshold.is_finite() && s.outlier_threshold > 0.0) {
            return Err(Error::setting(
                "outlier-threshold",
                format!("must be a positive number, got {}", s.outlier_threshold),
            ));
        }
        for (product, &d) in &s.stockout_days_by_product {
            if !(0.0..=31.0).contains(&d) {
                return Err(Error::setting(
                    "max-stockout-days",
                    format!("of product '{product}' must be between 0 and 31, got {d}"),
                ));
            }
        }
        Ok(CheckedCleanSettings(self))
    }
}

/// Where a cleaned month's value comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum MonthStatus {
    /// As reported (every site as reported).
    Reported,
    /// Reported, then adjusted (stockout, reporting, outlier replacement).
    Adjusted,
    /// Some sites reported; the others were filled from their own history.
    PartlyFilled,
    /// No trusted report: the whole value is imputed.
    Imputed,
}

impl MonthStatus {
    /// Stable name used in output files.
    pub fn name(self) -> &'static str {
        match self {
            MonthStatus::Reported => "reported",
            MonthStatus::Adjusted => "adjusted",
            MonthStatus::PartlyFilled => "partly-filled",
            MonthStatus::Imputed => "imputed",
        }
    }
}

/// The cleaned monthly series of one product (sites summed).
#[derive(Debug, Clone, PartialEq)]
pub struct CleanSeries {
    /// Product.
    pub product: String,
    /// First month.
    pub start: YearMonth,
    /// Reported consumption summed over sites; `None` when nothing was reported.
    pub reported: Vec<Option<f64>>,
    /// Cleaned consumption, every month filled.
    pub values: Vec<f64>,
    /// Provenance of each cleaned month.
    pub status: Vec<MonthStatus>,
    /// Share of each cleaned month's value that was filled or imputed (0–1).
    pub imputed_share: Vec<f64>,
    /// Months flagged as outliers.
    pub outlier: Vec<bool>,
    /// Number of sites (1 for files without sites).
    pub sites: usize,
}

impl CleanSeries {
    /// A series whose every month was reported as it stands and needs no
    /// cleaning: for forecasting monthly values from Rust code (see
    /// `examples/forecast_one_series.rs`).
    pub fn observed(product: &str, start: YearMonth, values: Vec<f64>) -> CleanSeries {
        let n = values.len();
        CleanSeries {
            product: product.to_string(),
            start,
            reported: values.iter().map(|&v| Some(v)).collect(),
            values,
            status: vec![MonthStatus::Reported; n],
            imputed_share: vec![0.0; n],
            outlier: vec![false; n],
            sites: 1,
        }
    }

    /// Month of position `t`.
    pub fn month(&self, t: usize) -> YearMonth {
        self.start.plus(t as i64)
    }

    /// Number of months.
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// True when the series has no month.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }
}

/// How the input rows were accounted for; `used + adjusted + rejected ==
/// read` always holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
pub struct RowAccount {
    /// Data rows read.
    pub read: usize,
    /// Rows whose value was used as reported (including rows reporting
    /// nothing, whose month is then filled).
    pub used: usize,
    /// Rows whose value cleaning changed, set to missing, or merged.
    pub adjusted: usize,
    /// Rows rejected while reading.
    pub rejected: usize,
}

impl RowAccount {
    /// Whether the counts add up.
    pub fn balances(&self) -> bool {
        self.used + self.adjusted + self.rejected == self.read
    }
}

/// Everything cleaning produced.
#[derive(Debug, Clone)]
pub struct Cleaned {
    /// Cleaned series, one per usable product, ordered by product.
    pub series: Vec<CleanSeries>,
    /// The per-product input series the cleaning started from.
    pub inputs: Vec<ProductData>,
    /// Every change made, in product, site and month order.
    pub log: AdjustmentLog,
    /// Warnings about products and sites (not tied to one row).
    pub warnings: Vec<String>,
    /// Products with no usable month, with the reason.
    pub unusable: Vec<(String, String)>,
    /// Row accounting.
    pub rows: RowAccount,
}

/// Cleans every product of a dataset (in parallel).
pub fn clean(data: &Dataset, settings: &CheckedCleanSettings) -> Cleaned {
    clean_inputs(build_series(&data.rows), data.rows.len(), data, settings)
}

/// [`clean`], moving the accepted rows out of `data` into the cleaned
/// inputs (`Cleaned::inputs` holds the same values by product and month)
/// instead of holding both: `data.rows` is left empty. For a caller that
/// has no use for the rows afterwards; on a national file they are a
/// sixth of the memory.
pub fn clean_taking_rows(data: &mut Dataset, settings: &CheckedCleanSettings) -> Cleaned {
    let rows = std::mem::take(&mut data.rows);
    let accepted = rows.len();
    let inputs = build_series(&rows);
    drop(rows);
    clean_inputs(inputs, accepted, data, settings)
}

/// Products, and sites, whose names differ only in letter case or spacing
/// ("ORS" and "ors "): usually one typed two ways, which would be forecast
/// as two products, or counted as two sites of one (a site filled on top
/// of its other spelling doubles the months where both appear). Common
/// practice: check names against the master lists. Named, not merged:
/// provisio does not guess which spelling is right.
fn names_differing_in_case(inputs: &[ProductData]) -> Vec<String> {
    let fold = |n: &str| {
        n.split_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
            .to_lowercase()
    };
    let groups = |names: &mut dyn Iterator<Item = &str>| -> Vec<Vec<String>> {
        let mut by_key: BTreeMap<String, Vec<String>> = BTreeMap::new();
        for n in names {
            let same = by_key.entry(fold(n)).or_default();
            if !same.iter().any(|x| x == n) {
                same.push(n.to_string());
            }
        }
        by_key.into_values().filter(|v| v.len() > 1).collect()
    };
    let shown = |names: &[String]| {
        names
            .iter()
            .map(|n| format!("'{}'", visible(n)))
            .collect::<Vec<_>>()
            .join(" and ")
    };
    let mut out: Vec<String> = groups(&mut inputs.iter().map(|p| p.product.as_str()))
        .iter()
        .map(|names| {
            format!(
                "products {} differ only in letter case or spacing: they are forecast as {} separate products; if they are one, write its name one way throughout",
                shown(names),
                names.len()
            )
        })
        .collect();
    let mut sites = inputs
        .iter()
        .flat_map(|p| p.sites.iter().filter_map(|s| s.site.as_deref()));
    out.extend(groups(&mut sites).iter().map(|names| {
        format!(
            "sites {} differ only in letter case or spacing: they are read as {} separate sites, so a month one spelling misses may be filled on top of the other's report; if they are one, write its name one way throughout",
            shown(names),
            names.len()
        )
    }));
    out
}

/// A name with the characters that look like others shown as escapes:
/// spaces other than the plain one (a no-break space copied from a
/// spreadsheet) and invisible marks, so two names that print alike can be
/// told apart.
pub(crate) fn visible(name: &str) -> String {
    let mut out = String::with_capacity(name.len());
    for c in name.chars() {
        let odd = (c.is_whitespace() && c != ' ')
            || matches!(
                c,
                '\u{200b}'..='\u{200f}' | '\u{2060}' | '\u{feff}' | '\u{00ad}'
            );
        if odd {
            out.push_str(&format!("\\u{{{:04x}}}", c as u32));
        } else {
            out.push(c);
        }
    }
    out
}

/// Cleans the per-product series built from `data`'s `accepted` rows.
fn clean_inputs(
    inputs: Vec<ProductData>,
    accepted: usize,
    data: &Dataset,
    settings: &CheckedCleanSettings,
) -> Cleaned {
    let results: Vec<ProductResult> = inputs
        .par_iter()
        .map(|p| clean_product(p, settings.get()))
        .collect();
    // Keyed by line and month: in the wide layout one line holds a value
    // for each month.
    let merged_keys: HashSet<(u64, YearMonth)> = data
        .merged
        .iter()
        .flat_map(|m| [(m.line, m.month), (m.into_line, m.month)])
        .collect();
    let mut series = Vec::new();
    let mut log = AdjustmentLog::default();
    let mut warnings = names_differing_in_case(&inputs);
    let mut unusable = Vec::new();
    // Every merged row was changed (folded into another); of the accepted
    // rows, those with a value-changing entry or a row merged into them.
    // Counted per row, not per distinct line, so the accounting holds
    // whatever the line numbers are.
    let mut adjusted = data.merged.len();
    // Rows summed while reading, logged first for their product: the
    // first step taken on its data.
    let mut summed: HashMap<&str, Vec<Adjustment>> = HashMap::new();
    for m in &data.merged {
        summed.entry(&m.product).or_default().push(Adjustment {
            product: m.product.clone(),
            site: m.site.clone(),
            month: m.month,
            line: Some(m.line),
            before: m.before,
            after: m.after,
            why: Reason::DuplicateSummed {
                into_line: m.into_line,
            },
        });
    }
    for (p, r) in inputs.iter().zip(results) {
        adjusted += changed_rows(p, &r.log, &merged_keys);
        if let Some(entries) = summed.remove(p.product.as_str()) {
            log.push_product(entries);
        }
        log.push_product(r.log);
        warnings.extend(r.warnings);
        match r.series {
            Ok(s) => series.push(s),
            Err(reason) => unusable.push((r.product, reason)),
        }
    }
    let accepted = accepted + data.merged.len();
    let rows = RowAccount {
        read: data.rows_read,
        used: accepted - adjusted,
        adjusted,
        rejected: data.rejected.len(),
    };
    Cleaned {
        series,
        inputs,
        log,
        warnings,
        unusable,
        rows,
    }
}

/// Rows of one product whose value cleaning changed (by the product's own
/// log entries) or that another row was merged into.
fn changed_rows(p: &ProductData, log: &[Adjustment], merged: &HashSet<(u64, YearMonth)>) -> usize {
    let mut changed: Vec<(u64, YearMonth)> = log
        .iter()
        .filter(|a| a.rule().changes_value())
        .filter_map(|a| a.line.map(|l| (l, a.month)))
        .collect();
    changed.sort_unstable();
    changed.dedup();
    let mut n = 0;
    for site in &p.sites {
        for (k, m) in site.months.iter().enumerate() {
            let Some(line) = m.line else { continue };
            let key = (line, site.start.plus(k as i64));
            if changed.binary_search(&key).is_ok() || merged.contains(&key) {
                n += 1;
            }
        }
    }
    n
}

/// Reads an input file given as bytes and cleans it: the whole path from
/// raw bytes to cleaned series (a workbook when `source` ends in a
/// workbook extension, otherwise a CSV). The fuzz target (`fuzz/`) and the property
/// tests drive this with arbitrary bytes.
pub fn read_and_clean(
    source: &str,
    bytes: &[u8],
    read: &crate::data::ReadOptions,
    settings: &CheckedCleanSettings,
) -> Result<(Dataset, Cleaned)> {
    let data = crate::data::read_bytes(source, bytes, read)?;
    let cleaned = clean(&data, settings);
    Ok((data, cleaned))
}

impl Cleaned {
    /// Checks the promises every cleaning result keeps, and says which one
    /// failed: the row accounting adds up; every cleaned value is finite
    /// and not negative; per product, the cleaned total equals the reported
    /// total plus the changes in the adjustment log.
    pub fn verify(&self, data: &Dataset) -> std::result::Result<(), String> {
        let r = self.rows;
        if !r.balances() || r.read != data.rows_read || r.rejected != data.rejected.len() {
            return Err(format!(
                "row accounting does not add up: {r:?}, {} rows read",
                data.rows_read
            ));
        }
        let mut reported: std::collections::HashMap<&str, f64> = std::collections::HashMap::new();
        for row in &data.rows {
            *reported.entry(&*row.product).or_default() += row.consumed.unwrap_or(0.0);
        }
        let mut delta: std::collections::HashMap<&str, f64> = std::collections::HashMap::new();
        for a in &self.log {
            *delta.entry(&*a.product).or_default() += a.delta();
        }
        for s in &self.series {
            if let Some(t) = s.values.iter().position(|v| !v.is_finite() || *v < 0.0) {
                return Err(format!(
                    "product '{}': cleaned value {} in {}",
                    s.product,
                    s.values[t],
                    s.month(t)
                ));
            }
            let cleaned: f64 = s.values.iter().sum();
            let rep = reported.get(s.product.as_str()).copied().unwrap_or(0.0);
            let d = delta.get(s.product.as_str()).copied().unwrap_or(0.0);
            let scale = cleaned.abs().max(rep.abs()).max(1.0);
            if (cleaned - (rep + d)).abs() > 1e-9 * scale {
                return Err(format!(
                    "product '{}': cleaned total {cleaned} is not reported {rep} + logged changes {d}",
                    s.product
                ));
            }
        }
        Ok(())
    }
}

struct ProductResult {
    product: String,
    series: std::result::Result<CleanSeries, String>,
    log: Vec<Adjustment>,
    warnings: Vec<String>,
}

/// One site's cleaned values on the product calendar.
struct SiteClean {
    /// Cleaned value per product month, `None` outside the site's span.
    values: Vec<Option<f64>>,
    /// Whether the value was filled (imputed) rather than reported.
    filled: Vec<bool>,
    /// Whether the reported value was adjusted.
    adjusted: Vec<bool>,
    /// Whether the month was flagged as an outlier.
    outlier: Vec<bool>,
    /// Whether a flagged value was replaced.
    replaced: Vec<bool>,
}

/// Months with nothing reported, in a row, from which a gap inside the
/// history is called out: two years is longer than any reporting lapse
/// cleaning is meant to bridge, and usually a mistyped year (a row far
/// from the rest) or a product stopped and started again (common practice).
pub const LONG_GAP_MONTHS: usize = 24;

/// A warning for the longest run of unreported months inside the product's
/// history when it reaches [`LONG_GAP_MONTHS`], naming the months around
/// it and the line of the row before it.
fn long_gap_warning(p: &ProductData, reported: &[Option<f64>]) -> Option<String> {
    let (mut best, mut run) = ((0, 0), 0);
    for (t, v) in reported.iter().enumerate() {
        run = if v.is_none() { run + 1 } else { 0 };
        if run > best.1 {
            best = (t + 1 - run, run);
        }
    }
    let (from, len) = best;
    // Only gaps with reports on both sides: a trailing run is a product
    // that stopped, warned about elsewhere.
    if len < LONG_GAP_MONTHS || from == 0 || from + len >= reported.len() {
        return None;
    }
    let before = p.start.plus(from as i64 - 1);
    let after = p.start.plus((from + len) as i64);
    let line = p.sites.iter().find_map(|s| {
        let k = s.start.months_until(before);
        usize::try_from(k)
            .ok()
            .and_then(|k| s.months.get(k))
            .and_then(|m| m.line)
    });
    let line = line.map_or(String::new(), |l| format!(" (line {l})"));
    Some(format!(
        "product '{}': nothing reported for {len} months between {before}{line} and {after}; the months in between are filled and forecast from as history: if a year is mistyped, correct it; if the product restarted, remove the rows before the gap",
        p.product
    ))
}

fn clean_product(p: &ProductData, s: &CleanSettings) -> ProductResult {
    // A product's own stockout threshold replaces the run's.
    let own;
    let s = match s.stockout_days_by_product.get(&p.product) {
        Some(&d) => {
            own = CleanSettings {
                max_stockout_days: d,
                stockout_days_by_product: BTreeMap::new(),
                ..s.clone()
            };
            &own
        }
        None => s,
    };
    let mut log = Vec::new();
    let mut warnings = Vec::new();
    let n = p.len();
    // One copy of the name, shared by every log entry of the product.
    let name: Arc<str> = Arc::from(p.product.as_str());
    let has_sites = p.sites.iter().any(|x| x.site.is_some());
    let mut site_cleans = Vec::with_capacity(p.sites.len());
    for site in &p.sites {
        match clean_site(p, &name, site, s, &mut log, &mut warnings) {
            Some(c) => site_cleans.push(c),
            None => {
                if has_sites {
                    warnings.push(format!(
                        "product '{}', site '{}': no month has a usable quantity; the site is left out",
                        p.product,
                        site.site.as_deref().unwrap_or("")
                    ));
                }
            }
        }
    }
    if site_cleans.is_empty() {
        let reason =
            "no month has a usable quantity (all empty, or all treated as missing)".to_string();
        warnings.push(format!("product '{}': {reason}; it is left out", p.product));
        return ProductResult {
            product: p.product.clone(),
            series: Err(reason),
            log,
            warnings,
        };
    }
    let mut reported = vec![None; n];
    for site in &p.sites {
        let off = p.start.months_until(site.start) as usize;
        for (k, m) in site.months.iter().enumerate() {
            if let Some(c) = m.consumed {
                let slot: &mut Option<f64> = &mut reported[off + k];
                *slot = Some(slot.unwrap_or(0.0) + c);
            }
        }
    }
    if let Some(w) = long_gap_warning(p, &reported) {
        warnings.push(w);
    }
    let mut total: Vec<Option<f64>> = vec![None; n];
    let mut filled_amount = vec![0.0; n];
    let mut any_filled = vec![false; n];
    let mut any_adjusted = vec![false; n];
    let mut all_filled = vec![true; n];
    for sc in &site_cleans {
        for t in 0..n {
            if let Some(v) = sc.values[t] {
                total[t] = Some(total[t].unwrap_or(0.0) + v);
                if sc.filled[t] {
                    filled_amount[t] += v;
                    any_filled[t] = true;
                } else {
                    all_filled[t] = false;
                }
                any_adjusted[t] |= sc.adjusted[t];
            }
        }
    }
    let status: Vec<MonthStatus> = (0..n)
        .map(|t| {
            if total[t].is_none() || all_filled[t] {
                MonthStatus::Imputed
            } else if any_filled[t] {
                MonthStatus::PartlyFilled
            } else if any_adjusted[t] {
                MonthStatus::Adjusted
            } else {
                MonthStatus::Reported
            }
        })
        .collect();
    // Months no site covers (gaps between site spans) are imputed on the total.
    let values = if total.iter().any(Option::is_none) {
        match impute(&total, p.start) {
            Some((vals, method)) => {
                for t in 0..n {
                    if total[t].is_none() {
                        filled_amount[t] = vals[t];
                        log.push(Adjustment {
                            product: name.clone(),
                            site: None,
                            month: p.start.plus(t as i64),
                            line: None,
                            before: None,
                            after: Some(vals[t]),
                            why: Reason::Imputed {
                                cause: FillCause::NoSiteCovers,
                                method,
                            },
                        });
                    }
                }
                vals
            }
            None => unreachable_total(&total),
        }
    } else {
        total.iter().map(|v| v.unwrap_or(0.0)).collect()
    };
    let mut imputed_share: Vec<f64> = (0..n)
        .map(|t| {
            if values[t] > 0.0 {
                (filled_amount[t] / values[t]).clamp(0.0, 1.0)
            } else if status[t] == MonthStatus::Imputed {
                1.0
            } else {
                0.0
            }
        })
        .collect();

    let mut outlier = vec![false; n];
    for sc in &site_cleans {
        for t in 0..n {
            outlier[t] |= sc.outlier[t];
            if sc.replaced[t] {
                imputed_share[t] = imputed_share[t].max(0.0);
            }
        }
    }
    ProductResult {
        product: p.product.clone(),
        series: Ok(CleanSeries {
            product: p.product.clone(),
            start: p.start,
            reported,
            values,
            status,
            imputed_share,
            outlier,
            sites: p.sites.len(),
        }),
        log,
        warnings,
    }
}

/// At least one site has a value, so the total has one: imputation only
/// fails on an all-missing series. Kept total-free to avoid a panic path.
fn unreachable_total(total: &[Option<f64>]) -> Vec<f64> {
    total.iter().map(|v| v.unwrap_or(0.0)).collect()
}

fn clean_site(
    p: &ProductData,
    name: &Arc<str>,
    site: &SiteSeries,
    s: &CleanSettings,
    log: &mut Vec<Adjustment>,
    warnings: &mut Vec<String>,
) -> Option<SiteClean> {
    let n = p.len();
    let off = p.start.months_until(site.start) as usize;
    // The site is expected from its first row to its last, and for up to
    // `site_trailing_fill` months after (late reports); after that it is
    // taken to have stopped.
    let trailing = site.end().months_until(p.end).max(0) as usize;
    let fill_after = if site.site.is_some() {
        trailing.min(s.site_trailing_fill as usize)
    } else {
        0
    };
    if site.site.is_some() && trailing > fill_after {
        warnings.push(format!(
            "product '{}', site '{}': no rows after {} ({} months before the product's last month {}); filled for {} month(s), then treated as no longer supplied",
            p.product,
            site.site.as_deref().unwrap_or(""),
            site.end(),
            trailing,
            p.end,
            fill_after
        ));
    }
    let span = site.months.len() + fill_after;
    let mut vals: Vec<Option<f64>> = Vec::with_capacity(span);
    let mut adjusted = vec![false; span];
    let site_name: Option<Arc<str>> = site.site.as_deref().map(Arc::from);
    let entry = |month: YearMonth,
                 line: Option<u64>,
                 before: Option<f64>,
                 after: Option<f64>,
                 why: Reason| Adjustment {
        product: name.clone(),
        site: site_name.clone(),
        month,
        line,
        before,
        after,
        why,
    };
    for (k, adjusted_k) in adjusted.iter_mut().enumerate() {
        let month = site.start.plus(k as i64);
        let Some(obs) = site.months.get(k) else {
            vals.push(None);
            continue;
        };
        let Some(mut v) = obs.consumed else {
            vals.push(None);
            continue;
        };
        let days = month.days();
        let sd = obs.stockout_days.unwrap_or(0.0);
        if sd > 0.0 {
            if sd > s.max_stockout_days || sd >= days as f64 {
                log.push(entry(
                    month,
                    obs.line,
                    Some(v),
                    None,
                    Reason::StockoutMissing {
                        days_out: sd,
                        limit: s.max_stockout_days,
                    },
                ));
                vals.push(None);
                continue;
            }
            if v > 0.0 {
                if let Some(a) = stockout::adjust_month(v, days, sd) {
                    log.push(entry(
                        month,
                        obs.line,
                        Some(v),
                        Some(a),
                        Reason::StockoutScaled { days_out: sd },
                    ));
                    v = a;
                    *adjusted_k = true;
                }
            }
        }
        if let Some(c) = obs.reporting_rate {
            if c < s.reporting_floor {
                log.push(entry(
                    month,
                    obs.line,
                    Some(v),
                    None,
                    Reason::ReportingMissing {
                        rate: c,
                        floor: s.reporting_floor,
                    },
                ));
                vals.push(None);
                continue;
            }
            if c < 1.0 && v > 0.0 {
                let a = reporting::adjust(v, c, s.nonreporting_weight);
                log.push(entry(
                    month,
                    obs.line,
                    Some(v),
                    Some(a),
                    Reason::ReportingScaled {
                        rate: c,
                        weight: s.nonreporting_weight,
                    },
                ));
                v = a;
                *adjusted_k = true;
            }
        }
        vals.push(Some(v));
    }
    // Outliers are judged per series, before filling, so that an entry
    // error never serves as a neighbour for a filled month.
    let dense: Vec<f64> = vals.iter().map(|v| v.unwrap_or(0.0)).collect();
    let trusted: Vec<bool> = vals.iter().map(Option::is_some).collect();
    let found = outliers::find_outliers(&dense, &trusted, site.start, s.outlier_threshold);
    let mut fill_input = vals.clone();
    for o in &found {
        fill_input[o.t] = None;
    }
    // Flagged months are kept (replaced only on request), so they must not
    // make the site disappear: when every trusted month is flagged, fill
    // from them as they are.
    let (filled, method) = match impute(&fill_input, site.start) {
        Some(f) => f,
        None => impute(&vals, site.start)?,
    };
    let mut out = SiteClean {
        values: vec![None; n],
        filled: vec![false; n],
        adjusted: vec![false; n],
        outlier: vec![false; n],
        replaced: vec![false; n],
    };
    for o in &found {
        let k = o.t;
        let month = site.start.plus(k as i64);
        let line = site.months.get(k).and_then(|m| m.line);
        let v = dense[k];
        let why = |replaced| Reason::Outlier {
            score: o.score,
            limit: s.outlier_threshold,
            expected: filled[k],
            replaced,
        };
        log.push(entry(month, line, Some(v), Some(v), why(false)));
        out.outlier[off + k] = true;
        if s.replace_outliers {
            log.push(entry(month, line, Some(v), Some(filled[k]), why(true)));
            out.replaced[off + k] = true;
            adjusted[k] = true;
        }
    }
    for k in 0..span {
        let month = site.start.plus(k as i64);
        let value = if vals[k].is_none() {
            let line = site.months.get(k).and_then(|m| m.line);
            let cause = match site.months.get(k) {
                None => FillCause::NoRow,
                Some(m) if m.line.is_none() => FillCause::NoRow,
                Some(m) if m.consumed.is_none() => FillCause::NotReported,
                Some(_) => FillCause::TreatedMissing,
            };
            let why = if site.site.is_some() {
                Reason::SiteFilled { cause, method }
            } else {
                Reason::Imputed { cause, method }
            };
            log.push(entry(month, line, None, Some(filled[k]), why));
            out.filled[off + k] = true;
            filled[k]
        } else if out.replaced[off + k] {
            filled[k]
        } else {
            dense[k]
        };
        out.values[off + k] = Some(value);
        out.adjusted[off + k] = adjusted[k];
    }
    Some(out)
}

#[cfg(test)]
mod tests;
