//! Reviewing past forecasts against the consumption reported since.
//!
//! A past `forecast` directory (see [`past`]) is lined up with actuals in
//! the input contract, cleaned with the past run's own settings so like is
//! compared with like. Per product, over the forecast months that now have
//! actuals:
//!
//! - MAPE, bias (positive = over-forecast) and WAPE, as in the backtest
//!   ([`crate::metrics`]);
//! - coverage of the 80% and 95% intervals against their nominal rates,
//!   with a one-sided exact binomial test of a shortfall;
//! - the tracking signal, cumulative error ÷ MAD, flagged beyond its 5%
//!   chance bound for the number of months, ±2.46 √months
//!   ([`metrics::tracking_signal`]);
//! - forecast value added: the WAPE of a naive forecast ("same as the last
//!   cleaned month") and of a seasonal naive forecast ("same as the same
//!   month a year before"), both made at the past forecast's origin from
//!   its own cleaned history, minus the model's WAPE (positive = the model
//!   did better);
//! - an audit of adjustments: the share of the cleaned volume that is not
//!   as reported, for the history the forecast was made from and for the
//!   review months, with the rules responsible, flagged above a limit.
//!
//! With several vintages (past directories), forecasts of the same month
//! are compared: the revision from one vintage to the next, and which
//! vintage came closest.
//!
//! Months whose cleaned actual is at least half imputed are left out of
//! scoring when the past run left them out of its backtest (its manifest
//! says so), so no forecast is judged against our own imputation.

pub mod past;

pub use past::{read_past, PastForecast, PastManifest, PastProduct, Promised};

use std::collections::BTreeMap;
use std::fmt::Write as _;

use crate::calendar::YearMonth;
use crate::clean::{Adjustment, CleanSeries, Cleaned, MonthStatus};
use crate::data::{Dataset, ReadOptions};
use crate::error::{Error, Result};
use crate::metrics::{self, TrackingSignal};

/// Default limit on the share of volume cleaning may change before a
/// product is flagged in the audit (20%).
pub const DEFAULT_ADJUSTMENT_LIMIT: f64 = 0.20;

/// p-value below which an interval's coverage counts as short of nominal.
pub const COVERAGE_TEST_LEVEL: f64 = 0.05;

/// p-value of the sign test at or below which a naive forecast counts as
/// better than the model: a lower WAPE alone can be one month's luck.
pub const NAIVE_TEST_LEVEL: f64 = 0.05;

/// Review settings as given.
///
/// | setting | default | range |
/// |---|---|---|
/// | `adjustment_limit` | 0.20 | above 0, at most 1: share of volume changed by cleaning that is flagged |
/// | `score_imputed` | none | `Some(b)` overrides the past run's choice of scoring mostly-imputed months |
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ReviewSettings {
    /// Share of volume changed by cleaning above which the audit flags a product.
    pub adjustment_limit: f64,
    /// Score mostly-imputed months (`None`: as the past run did).
    pub score_imputed: Option<bool>,
}

impl Default for ReviewSettings {
    fn default() -> Self {
        ReviewSettings {
            adjustment_limit: DEFAULT_ADJUSTMENT_LIMIT,
            score_imputed: None,
        }
    }
}

/// Settings that passed [`ReviewSettings::check`].
#[derive(Debug, Clone, PartialEq)]
pub struct CheckedReviewSettings(ReviewSettings);

impl CheckedReviewSettings {
    /// The checked values.
    pub fn get(&self) -> &ReviewSettings {
        &self.0
    }
}

impl ReviewSettings {
    /// Validates the settings; the error names the bad value.
    pub fn check(self) -> Result<CheckedReviewSettings> {
        if !(self.adjustment_limit > 0.0 && self.adjustment_limit <= 1.0) {
            return Err(Error::setting(
                "adjustment-limit",
                format!(
                    "must be above 0 and at most 1 (a share of volume, 0.2 = 20%), got {}",
                    self.adjustment_limit
                ),
            ));
        }
        Ok(CheckedReviewSettings(self))
    }
}

/// Reads and cleans the actuals with a past run's read rules (duplicates,
/// number format, encoding) and cleaning settings. `source` names the file
/// (its extension picks CSV or workbook); a workbook is read at `sheet`,
/// or else at the sheet the past run read when that run's input was a
/// workbook, or else at its first sheet.
pub fn clean_actuals(
    source: &str,
    bytes: &[u8],
    manifest: &PastManifest,
    sheet: Option<&str>,
) -> Result<(Dataset, Cleaned)> {
    let read = ActualsReading {
        sheet,
        ..ActualsReading::default()
    };
    clean_actuals_with(source, bytes, manifest, &read, [None, None])
}

/// How to read the actuals where they differ from the past run's data:
/// each `None` keeps what the past run used.
#[derive(Debug, Clone, Copy, Default)]
pub struct ActualsReading<'a> {
    /// Sheet of a workbook.
    pub sheet: Option<&'a str>,
    /// Number format.
    pub numbers: Option<crate::data::NumberFormat>,
    /// Text encoding of a CSV.
    pub encoding: Option<crate::data::Encoding>,
}

/// [`clean_actuals`] for actuals in the wide layout with their tables of
/// stockout days and reporting rates (`[stockout, rate]`, see
/// [`crate::data::Companion`]).
pub fn clean_actuals_with(
    source: &str,
    bytes: &[u8],
    manifest: &PastManifest,
    read: &ActualsReading<'_>,
    [stockout, rate]: [Option<crate::data::Companion>; 2],
) -> Result<(Dataset, Cleaned)> {
    let workbook = crate::data::is_workbook(std::path::Path::new(source));
    let options = ReadOptions {
        duplicates: manifest.duplicate_policy(),
        numbers: read.numbers.unwrap_or_else(|| manifest.number_format()),
        encoding: read.encoding.unwrap_or_else(|| manifest.text_encoding()),
        sheet: read
            .sheet
            .map(str::to_string)
            .or_else(|| manifest.sheet.clone().filter(|_| workbook)),
        stockout,
        rate,
        ..ReadOptions::default()
    };
    let ds = crate::data::read_bytes(source, bytes, &options)?;
    let settings = manifest.clean_settings.clone().check()?;
    let cleaned = crate::clean::clean(&ds, &settings);
    Ok((ds, cleaned))
}

/// One forecast month that has an actual.
#[derive(Debug, Clone, PartialEq)]
pub struct MonthReview {
    /// The month.
    pub month: YearMonth,
    /// Months ahead of the forecast origin (1 = first forecast month).
    pub horizon: usize,
    /// Cleaned actual.
    pub actual: f64,
    /// Reported actual (sum over sites), `None` when nothing was reported.
    pub reported: Option<f64>,
    /// Provenance of the cleaned actual.
    pub status: MonthStatus,
    /// Whether cleaning flagged the actual as an outlier.
    pub outlier: bool,
    /// Share of the cleaned actual that was filled or imputed.
    pub imputed_share: f64,
    /// Whether the month counts in the scores.
    pub scored: bool,
    /// Past point forecast scored (the adjusted one for a new product,
    /// see [`ProductReview::adjusted_scored`]).
    pub forecast: f64,
    /// Past statistical point forecast (equal to `forecast` unless the
    /// adjusted forecast is scored).
    pub statistical: f64,
    /// Past 80% interval.
    pub interval80: Option<(f64, f64)>,
    /// Past 95% interval.
    pub interval95: Option<(f64, f64)>,
    /// Naive forecast made at the origin (last cleaned month).
    pub naive: Option<f64>,
    /// Seasonal naive forecast made at the origin.
    pub seasonal_naive: Option<f64>,
    /// Tracking signal over the scored months up to this one.
    pub tracking_signal: Option<f64>,
    /// Change from the previous vintage's forecast of this month.
    pub revision: Option<f64>,
    /// Vintage (index) whose forecast of this month was closest.
    pub closest_vintage: Option<usize>,
}

/// Scores of a past forecast over its scored months.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReviewScores {
    /// Months scored.
    pub months: usize,
    /// Months with an actual but left out of scoring (mostly imputed).
    pub left_out: usize,
    /// MAPE, % (months with a zero actual left out).
    pub mape: Option<f64>,
    /// Scored months with a zero actual.
    pub zero_actuals: usize,
    /// Bias, % of actual volume; positive = over-forecast.
    pub bias: Option<f64>,
    /// WAPE, %.
    pub wape: Option<f64>,
    /// Share of actuals inside the 80% interval, %.
    pub coverage80: Option<f64>,
    /// One-sided binomial p-value of the 80% coverage against 80%.
    pub coverage80_p: Option<f64>,
    /// Share of actuals inside the 95% interval, %.
    pub coverage95: Option<f64>,
    /// One-sided binomial p-value of the 95% coverage against 95%.
    pub coverage95_p: Option<f64>,
    /// Tracking signal over the scored months.
    pub tracking: Option<TrackingSignal>,
    /// Month from which the running tracking signal has stayed beyond its
    /// limit on the side of the final signal (`None` when the final one is within).
    pub tracking_breach: Option<YearMonth>,
    /// MAPE of the naive forecast, %.
    pub naive_mape: Option<f64>,
    /// WAPE of the naive forecast, %.
    pub naive_wape: Option<f64>,
    /// MAPE of the seasonal naive forecast, % (needs 12 months of history).
    pub seasonal_naive_mape: Option<f64>,
    /// WAPE of the seasonal naive forecast, %.
    pub seasonal_naive_wape: Option<f64>,
    /// Months the naive forecast came closer than the model, of the months
    /// where the two differ.
    pub naive_closer: Option<(usize, usize)>,
    /// The same for the seasonal naive forecast.
    pub seasonal_naive_closer: Option<(usize, usize)>,
}

/// A naive forecast that did better than the model on evidence.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NaiveBetter {
    /// Which naive, in words.
    pub which: &'static str,
    /// Short name for tables: `naive` or `seasonal-naive`.
    pub short: &'static str,
    /// WAPE points the model lost.
    pub points: f64,
    /// Months the naive came closer, and months compared.
    pub closer: (usize, usize),
    /// Sign-test p-value.
    pub p: f64,
}

impl ReviewScores {
    /// The naive forecasts that did better than the model on evidence:
    /// a lower WAPE *and* closer in more months than chance explains (a
    /// one-sided sign test, p ≤ [`NAIVE_TEST_LEVEL`]; the sign test for
    /// comparing two forecasts month by month is in Diebold and Mariano,
    /// *Journal of Business & Economic Statistics* 13(3), 1995, from
    /// memory). A 1-point WAPE loss with the naive closer in 7 of 12
    /// months (p = 0.39) is not flagged.
    pub fn naive_better(&self) -> Vec<NaiveBetter> {
        let mut out = Vec::new();
        for (which, short, fva, closer) in [
            (
                "naive (same as the last month)",
                "naive",
                self.fva_naive(),
                self.naive_closer,
            ),
            (
                "seasonal naive (same month a year before)",
                "seasonal-naive",
                self.fva_seasonal_naive(),
                self.seasonal_naive_closer,
            ),
        ] {
            if let (Some(v), Some((k, n))) = (fva, closer) {
                let p = crate::select::sign_test_p(k, n);
                if v < 0.0 && p <= NAIVE_TEST_LEVEL {
                    out.push(NaiveBetter {
                        which,
                        short,
                        points: -v,
                        closer: (k, n),
                        p,
                    });
                }
            }
        }
        out
    }

    /// Forecast value added over naive, in WAPE points (positive = better).
    pub fn fva_naive(&self) -> Option<f64> {
        Some(self.naive_wape? - self.wape?)
    }

    /// Forecast value added over seasonal naive, in WAPE points.
    pub fn fva_seasonal_naive(&self) -> Option<f64> {
        Some(self.seasonal_naive_wape? - self.wape?)
    }

    /// Whether the 80% interval covered less than nominal beyond chance.
    pub fn coverage80_short(&self) -> bool {
        self.coverage80_p.is_some_and(|p| p < COVERAGE_TEST_LEVEL)
    }

    /// Whether the 95% interval covered less than nominal beyond chance.
    pub fn coverage95_short(&self) -> bool {
        self.coverage95_p.is_some_and(|p| p < COVERAGE_TEST_LEVEL)
    }

    /// Whether the tracking signal is beyond its limit for the number of
    /// months ([`metrics::tracking_signal_limit`]).
    pub fn tracking_flagged(&self) -> bool {
        self.tracking.is_some_and(|t| t.flagged())
    }
}

/// Change one cleaning rule made, signed, and as a share of the volume.
#[derive(Debug, Clone, PartialEq)]
pub struct RuleChange {
    /// Rule name (as in adjustments.csv).
    pub rule: String,
    /// Σ(after − before) of the rule's log entries.
    pub change: f64,
    /// `change` ÷ cleaned volume.
    pub share: f64,
}

/// How much of a window's cleaned volume is not as reported.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Audit {
    /// Months in the window.
    pub months: usize,
    /// Cleaned volume.
    pub volume: f64,
    /// Σ |cleaned − reported| per month (nothing reported counts as 0).
    pub changed: f64,
    /// `changed` ÷ `volume`; `None` when the volume is zero.
    pub share: Option<f64>,
    /// Signed change per rule, largest first.
    pub by_rule: Vec<RuleChange>,
    /// Whether `share` exceeds the limit.
    pub flagged: bool,
}

impl Audit {
    fn new(
        cleaned: &[f64],
        reported: &[Option<f64>],
        changes: &BTreeMap<String, f64>,
        limit: f64,
    ) -> Audit {
        let volume: f64 = cleaned.iter().sum();
        let changed: f64 = cleaned
            .iter()
            .zip(reported)
            .map(|(c, r)| (c - r.unwrap_or(0.0)).abs())
            .sum();
        let share = (volume > 0.0).then(|| changed / volume);
        let mut by_rule: Vec<RuleChange> = changes
            .iter()
            .filter(|(_, c)| c.abs() > 1e-9)
            .map(|(rule, &change)| RuleChange {
                rule: rule.clone(),
                change,
                share: if volume > 0.0 { change / volume } else { 0.0 },
            })
            .collect();
        by_rule.sort_by(|a, b| b.change.abs().total_cmp(&a.change.abs()));
        Audit {
            months: cleaned.len(),
            volume,
            changed,
            share,
            by_rule,
            flagged: share.is_some_and(|s| s > limit),
        }
    }

    /// The rules responsible, in plain words: every rule that changed at
    /// least 1% of the volume (at least the largest), e.g.
    /// "reporting-scaled +11.8%, site-filled +6.1%".
    pub fn responsible(&self) -> String {
        self.by_rule
            .iter()
            .enumerate()
            .filter(|(i, r)| *i == 0 || r.share.abs() >= 0.01)
            .map(|(_, r)| format!("{} {:+.1}%", r.rule, 100.0 * r.share))
            .collect::<Vec<_>>()
            .join(", ")
    }
}

/// The review of one product of one vintage.
#[derive(Debug, Clone, PartialEq)]
pub struct ProductReview {
    /// Product.
    pub product: String,
    /// Index of the vintage in [`Review::vintages`].
    pub vintage: usize,
    /// Model that made the forecast.
    pub model: String,
    /// Whether the adjusted forecast is scored: a new product added by a
    /// changes file has no statistical forecast (zero, model `none (new
    /// product)`), and judging that zero would flag a forecast nobody made.
    pub adjusted_scored: bool,
    /// First forecast month.
    pub forecast_start: YearMonth,
    /// Last forecast month.
    pub forecast_end: YearMonth,
    /// Last month of history the forecast was made from.
    pub origin: YearMonth,
    /// Forecast months that have an actual.
    pub months: Vec<MonthReview>,
    /// Scores over the scored months.
    pub scores: ReviewScores,
    /// What the past backtest promised.
    pub promised: Promised,
    /// Audit of the history the forecast was made from (past run's cleaning).
    pub history_audit: Audit,
    /// Audit of the review months (cleaning of the actuals).
    pub period_audit: Audit,
}

/// What the model column shows for a new product scored on its adjusted
/// forecast.
pub const ADJUSTED_NEW_PRODUCT: &str = "adjusted (new product)";

impl ProductReview {
    /// The forecast scored, for model columns: the model, or
    /// [`ADJUSTED_NEW_PRODUCT`] when the adjusted forecast is scored.
    pub fn scored_model(&self) -> &str {
        if self.adjusted_scored {
            ADJUSTED_NEW_PRODUCT
        } else {
            &self.model
        }
    }

    /// `adjusted` or `statistical`: which of the past forecasts is scored.
    pub fn forecast_scored(&self) -> &'static str {
        if self.adjusted_scored {
            "adjusted"
        } else {
            "statistical"
        }
    }

    /// What a reviewer should look at, in plain words (empty when nothing
    /// stands out): a new product scored on its adjusted forecast, a
    /// tracking signal beyond its limit, an interval covering less
    /// than nominal beyond chance, no value added over a naive forecast,
    /// accuracy far from the backtest's promise, heavy adjustment of the
    /// data, and months left out.
    pub fn findings(&self, adjustment_limit: f64) -> Vec<String> {
        let s = &self.scores;
        let mut out = Vec::new();
        if self.adjusted_scored {
            let mut text = "new product: adjusted forecast scored (it had no history when the forecast was made, so its statistical forecast was zero; review_changes.csv sets the two side by side)".to_string();
            if self
                .months
                .iter()
                .all(|m| m.interval80.is_none() && m.interval95.is_none())
            {
                text.push_str("; its ranges have zero width (no history to measure them on), so coverage is not scored");
            }
            out.push(text);
        }
        if s.months == 0 {
            out.push(format!(
                "no month could be scored: all {} month(s) with actuals are mostly imputed",
                self.months.len()
            ));
        }
        if let Some(t) = s.tracking.filter(|t| t.flagged()) {
            let over = t.value > 0.0;
            let errors: Vec<(YearMonth, f64)> = self
                .months
                .iter()
                .filter(|m| m.scored)
                .map(|m| (m.month, m.forecast - m.actual))
                .collect();
            let same_side = errors.iter().filter(|e| (e.1 > 0.0) == over).count();
            let word = if over { "over" } else { "under" };
            let mut text = format!(
                "tracking signal {:+.1} is beyond ±{:.1} (the 5% chance bound for {} months){}: the errors add up to an {word}-forecast ({same_side} of {} months {word})",
                t.value,
                t.limit(),
                t.months,
                s.tracking_breach
                    .map(|m| format!(" since {m}"))
                    .unwrap_or_default(),
                errors.len()
            );
            // The running-sum signal can be carried by one large error:
            // say so, so it is not read as a persistent bias.
            if let Some(big) = errors
                .iter()
                .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
                .filter(|b| b.1.abs() > 0.5 * t.cumulative_error.abs())
            {
                let _ = write!(
                    text,
                    "; one month carries most of it ({}: error {:+.0})",
                    big.0, big.1
                );
            }
            out.push(text);
        }
        for (label, c, p) in [
            ("80%", s.coverage80, s.coverage80_p),
            ("95%", s.coverage95, s.coverage95_p),
        ] {
            if let (Some(c), Some(p)) = (c, p) {
                if p < COVERAGE_TEST_LEVEL {
                    out.push(format!(
                        "the {label} range held {c:.0}% of the actuals, short of {label} beyond chance (binomial p {})",
                        crate::metrics::fmt_p(p)
                    ));
                }
            }
        }
        for nb in s.naive_better() {
            out.push(format!(
                "did worse than {} made at the same time, by {:.1} WAPE points; the naive was closer in {} of {} months (sign test p {})",
                nb.which, nb.points, nb.closer.0, nb.closer.1, crate::metrics::fmt_p(nb.p)
            ));
        }
        if let (Some(m), Some(p)) = (s.mape, self.promised.mape) {
            if m > 2.0 * p && m - p > 5.0 {
                out.push(format!(
                    "MAPE {m:.1}% is over twice the {p:.1}% the backtest promised"
                ));
            }
        }
        for (window, a) in [
            ("history the forecast was made from", &self.history_audit),
            ("review months", &self.period_audit),
        ] {
            if a.flagged {
                out.push(format!(
                    "{window}: {:.1}% of the volume is not as reported (limit {:.0}%): {}",
                    100.0 * a.share.unwrap_or(0.0),
                    100.0 * adjustment_limit,
                    a.responsible()
                ));
            }
        }
        if s.left_out > 0 && s.months > 0 {
            out.push(format!(
                "{} month(s) with mostly imputed actuals left out of scoring",
                s.left_out
            ));
        }
        out
    }
}

/// A product of a past forecast that could not be reviewed, with the reason.
#[derive(Debug, Clone, PartialEq)]
pub struct NotReviewed {
    /// Product.
    pub product: String,
    /// Vintage index.
    pub vintage: usize,
    /// Why not.
    pub reason: String,
}

/// How the vintages that forecast one product compare on the months they
/// all forecast and that have scored actuals.
#[derive(Debug, Clone, PartialEq)]
pub struct VintageComparison {
    /// Product.
    pub product: String,
    /// Vintages (indices) that forecast the product, oldest first.
    pub vintages: Vec<usize>,
    /// Scored months every one of them forecast.
    pub common_months: Vec<YearMonth>,
    /// WAPE of each vintage on the common months, %.
    pub wape: Vec<Option<f64>>,
    /// Bias of each vintage on the common months, %.
    pub bias: Vec<Option<f64>>,
    /// The vintage with the lowest WAPE on the common months.
    pub closest: Option<usize>,
    /// Σ |latest − oldest vintage's forecast| over the common months, as %
    /// of the oldest vintage's forecast total there: how much the forecast
    /// of those months moved.
    pub revision_pct: Option<f64>,
}

/// A vintage as shown in outputs.
#[derive(Debug, Clone, PartialEq)]
pub struct Vintage {
    /// Directory as given.
    pub name: String,
    /// What its manifest recorded.
    pub manifest: PastManifest,
    /// Earliest first forecast month over its products.
    pub start: YearMonth,
    /// Latest forecast month.
    pub end: YearMonth,
    /// Whether mostly-imputed actuals were left out of scoring.
    pub exclude_imputed: bool,
    /// Reviewed products whose actuals start after the history the past
    /// run cleaned (`None` when the actuals hold all of it).
    pub short_history: Option<ShortHistory>,
}

/// Actuals that lack part of the history a past run cleaned its data with.
///
/// Cleaning looks back on a site's whole series: a missing month is filled
/// from the site's own months on either side, with seasonal indices
/// estimated on all of them (from 24 observed months), and outliers are
/// judged against a trend and the same calendar month of up to five years.
/// A site with no row before the actuals' first month is not expected
/// there at all, so is not filled. Actuals cut short are therefore cleaned
/// on less than the past run saw, and their filled months may differ.
#[derive(Debug, Clone, PartialEq)]
pub struct ShortHistory {
    /// Earliest first month of the actuals over the products concerned:
    /// the history before it was not in the actuals.
    pub actuals_start: YearMonth,
    /// Earliest first month of those products' history in the past run.
    pub history_start: YearMonth,
    /// The products concerned.
    pub products: Vec<String>,
}

impl ShortHistory {
    /// The warning for vintage `name`, in plain words.
    pub fn message(&self, name: &str) -> String {
        let few: Vec<&str> = self.products.iter().take(3).map(String::as_str).collect();
        let more = self.products.len().saturating_sub(few.len());
        format!(
            "the actuals were cleaned without the history before {} ({} product(s) of {name}: {}{}; the past run cleaned them from {}), so filled months may differ from a cleaning of the whole file; give the whole history, from {} on, for like-for-like cleaning",
            self.actuals_start,
            self.products.len(),
            few.join(", "),
            if more > 0 {
                format!(" and {more} more")
            } else {
                String::new()
            },
            self.history_start,
            self.history_start
        )
    }
}

/// Everything a review produced.
#[derive(Debug, Clone, PartialEq)]
pub struct Review {
    /// Vintages, oldest forecast start first.
    pub vintages: Vec<Vintage>,
    /// Reviews, ordered by product then vintage.
    pub products: Vec<ProductReview>,
    /// Products that could not be reviewed.
    pub not_reviewed: Vec<NotReviewed>,
    /// Comparisons of vintages, for products forecast by two or more.
    pub comparisons: Vec<VintageComparison>,
    /// First and last month of the actuals (over all products).
    pub actuals_span: Option<(YearMonth, YearMonth)>,
}

/// Actuals cleaned for one vintage.
pub struct Actuals<'a> {
    /// Actuals file as given, for messages.
    pub source: &'a str,
    /// The cleaning of the actuals with the vintage's settings.
    pub cleaned: &'a Cleaned,
}

fn span(series: &[CleanSeries]) -> Option<(YearMonth, YearMonth)> {
    let first = series.iter().map(|s| s.start).min()?;
    let last = series.iter().map(|s| s.month(s.len() - 1)).max()?;
    Some((first, last))
}

/// Reviews every vintage against its cleaned actuals (`actuals[i]` for
/// `pasts[i]`). Vintages are ordered by their first forecast month. Refuses
/// a vintage of which no product has an actual month in its forecast
/// period.
pub fn review_all(
    pasts: &[PastForecast],
    actuals: &[Actuals<'_>],
    settings: &CheckedReviewSettings,
) -> Result<Review> {
    let mut order: Vec<usize> = (0..pasts.len().min(actuals.len())).collect();
    order.sort_by_key(|&i| (pasts[i].period().map(|p| p.0), pasts[i].name.clone()));
    let mut vintages = Vec::new();
    let mut products = Vec::new();
    let mut not_reviewed = Vec::new();
    let mut actuals_span: Option<(YearMonth, YearMonth)> = None;
    for (v, &i) in order.iter().enumerate() {
        let past = &pasts[i];
        let act = &actuals[i];
        let exclude_imputed = match settings.get().score_imputed {
            Some(score) => !score,
            None => past.manifest.exclude_imputed,
        };
        let aspan = span(&act.cleaned.series);
        if let Some((a, b)) = aspan {
            actuals_span = Some(match actuals_span {
                Some((x, y)) => (x.min(a), y.max(b)),
                None => (a, b),
            });
        }
        let (start, end) = past.period().ok_or_else(|| Error::Input {
            file: past.dir.join("forecast.csv").display().to_string(),
            line: 0,
            column: None,
            message: "no forecast row".into(),
        })?;
        let mut reviewed_here = 0;
        let mut short: Vec<(&str, YearMonth, YearMonth)> = Vec::new();
        for p in &past.products {
            let Some(series) = act.cleaned.series.iter().find(|s| s.product == p.product) else {
                let why = act
                    .cleaned
                    .unusable
                    .iter()
                    .find(|u| u.0 == p.product)
                    .map(|u| format!("no usable month in the actuals: {}", u.1))
                    .unwrap_or_else(|| "not in the actuals".to_string());
                not_reviewed.push(NotReviewed {
                    product: p.product.clone(),
                    vintage: v,
                    reason: why,
                });
                continue;
            };
            if !p.history.is_empty() && series.start > p.history_start {
                short.push((&p.product, series.start, p.history_start));
            }
            let scorable = crate::pipeline::scorable(series, exclude_imputed);
            let log: Vec<&Adjustment> = act
                .cleaned
                .log
                .iter()
                .filter(|a| *a.product == *p.product)
                .collect();
            match review_product(p, v, series, &scorable, &log, settings) {
                Ok(r) => {
                    reviewed_here += 1;
                    products.push(r);
                }
                Err(reason) => not_reviewed.push(NotReviewed {
                    product: p.product.clone(),
                    vintage: v,
                    reason,
                }),
            }
        }
        if reviewed_here == 0 {
            let actual_span = aspan
                .map(|(a, b)| format!("the actuals run from {a} to {b}"))
                .unwrap_or_else(|| "the actuals have no usable month".into());
            let products_note = if past
                .products
                .iter()
                .any(|p| act.cleaned.series.iter().any(|s| s.product == p.product))
            {
                String::new()
            } else {
                let few = |names: &mut dyn Iterator<Item = &str>| {
                    let v: Vec<String> = names.take(3).map(|n| format!("'{n}'")).collect();
                    if v.is_empty() {
                        "none".to_string()
                    } else {
                        v.join(", ")
                    }
                };
                format!(
                    " and none of its products is in the actuals (the forecast's: {}; the actuals': {}; names must match exactly)",
                    few(&mut past.products.iter().map(|p| p.product.as_str())),
                    few(&mut act.cleaned.series.iter().map(|s| s.product.as_str()))
                )
            };
            return Err(Error::Input {
                file: act.source.to_string(),
                line: 0,
                column: None,
                message: format!(
                    "no actual month overlaps the forecast period of {} ({start} to {end}){products_note}: {actual_span}; give actuals of the same products reported for months from {start} on",
                    past.name
                ),
            });
        }
        vintages.push(Vintage {
            name: past.name.clone(),
            manifest: past.manifest.clone(),
            start,
            end,
            exclude_imputed,
            short_history: short_history(&short),
        });
    }
    products.sort_by(|a, b| a.product.cmp(&b.product).then(a.vintage.cmp(&b.vintage)));
    let comparisons = compare_vintages(&mut products);
    Ok(Review {
        vintages,
        products,
        not_reviewed,
        comparisons,
        actuals_span,
    })
}

/// The products whose actuals start after their past history, gathered.
fn short_history(short: &[(&str, YearMonth, YearMonth)]) -> Option<ShortHistory> {
    Some(ShortHistory {
        actuals_start: short.iter().map(|x| x.1).min()?,
        history_start: short.iter().map(|x| x.2).min()?,
        products: short.iter().map(|x| x.0.to_string()).collect(),
    })
}

/// Naive and seasonal naive forecasts made at the origin of `past` for
/// month `m`, from its cleaned history.
fn baselines(past: &PastProduct, m: YearMonth) -> (Option<f64>, Option<f64>) {
    let Some(&last_value) = past.history.last() else {
        return (None, None);
    };
    let last = past.history_start.plus(past.history.len() as i64 - 1);
    let ahead = last.months_until(m);
    if ahead < 1 {
        return (None, None);
    }
    let back = 12 * ((ahead + 11) / 12);
    let idx = past.history_start.months_until(m.plus(-back));
    let seasonal = (idx >= 0)
        .then(|| past.history.get(idx as usize).copied())
        .flatten();
    (Some(last_value), seasonal)
}

/// Reviews one product of one vintage against its cleaned actual series.
/// `scorable[t]` says whether month `t` of the series counts; `log` holds
/// the product's entries of the actuals' adjustment log. `Err` gives the
/// reason the product cannot be reviewed.
pub fn review_product(
    past: &PastProduct,
    vintage: usize,
    series: &CleanSeries,
    scorable: &[bool],
    log: &[&Adjustment],
    settings: &CheckedReviewSettings,
) -> std::result::Result<ProductReview, String> {
    let limit = settings.get().adjustment_limit;
    let a_end = series.month(series.len().saturating_sub(1));
    let mut months = Vec::new();
    for (k, &f) in past.point.iter().enumerate() {
        let m = past.month(k);
        let t = series.start.months_until(m);
        if t < 0 || t as usize >= series.len() {
            continue;
        }
        let t = t as usize;
        let pair = |l: &[Option<f64>], u: &[Option<f64>]| match (l[k], u[k]) {
            (Some(l), Some(u)) => Some((l, u)),
            _ => None,
        };
        let (naive, seasonal_naive) = baselines(past, m);
        months.push(MonthReview {
            month: m,
            horizon: k + 1,
            actual: series.values[t],
            reported: series.reported[t],
            status: series.status[t],
            outlier: series.outlier.get(t).copied().unwrap_or(false),
            imputed_share: series.imputed_share[t],
            // A bridged month (forecast between the product's last month
            // and the common start) counts only when it was reported: an
            // imputed actual there is the cleaning's guess, not demand.
            scored: scorable.get(t).copied().unwrap_or(false)
                && (k >= past.bridged || series.reported[t].is_some()),
            forecast: f,
            statistical: past.statistical.get(k).copied().unwrap_or(f),
            interval80: pair(&past.lower80, &past.upper80),
            interval95: pair(&past.lower95, &past.upper95),
            naive,
            seasonal_naive,
            tracking_signal: None,
            revision: None,
            closest_vintage: None,
        });
    }
    if months.is_empty() {
        return Err(format!(
            "no actual month in the forecast period {} to {} (its actuals run from {} to {a_end})",
            past.start,
            past.end(),
            series.start
        ));
    }
    // Running tracking signal over the scored months.
    let mut a_run = Vec::new();
    let mut f_run = Vec::new();
    let mut tracking_breach = None;
    for m in months.iter_mut().filter(|m| m.scored) {
        a_run.push(m.actual);
        f_run.push(m.forecast);
        let ts = metrics::tracking_signal(&a_run, &f_run);
        m.tracking_signal = ts.map(|t| t.value);
        // Start of the current run beyond the limit on one side.
        tracking_breach = match (ts.filter(|t| t.flagged()), tracking_breach) {
            (None, _) => None,
            (Some(t), Some((side, since))) if side == (t.value > 0.0) => Some((side, since)),
            (Some(t), _) => Some((t.value > 0.0, m.month)),
        };
    }
    let scores = score(&months, tracking_breach.map(|b| b.1));
    let history_audit = Audit::new(
        &past.history,
        &past.history_reported,
        &past.history_changes,
        limit,
    );
    let period_months: Vec<YearMonth> = months.iter().map(|m| m.month).collect();
    let mut period_changes: BTreeMap<String, f64> = BTreeMap::new();
    for a in log.iter().filter(|a| period_months.contains(&a.month)) {
        *period_changes
            .entry(a.rule().name().to_string())
            .or_default() += a.delta();
    }
    let period_audit = Audit::new(
        &months.iter().map(|m| m.actual).collect::<Vec<_>>(),
        &months.iter().map(|m| m.reported).collect::<Vec<_>>(),
        &period_changes,
        limit,
    );
    Ok(ProductReview {
        product: past.product.clone(),
        vintage,
        model: past.model.clone(),
        adjusted_scored: past.adjusted_scored,
        forecast_start: past.start,
        forecast_end: past.end(),
        origin: past.start.plus(-1),
        months,
        scores,
        promised: past.promised.clone(),
        history_audit,
        period_audit,
    })
}

fn score(months: &[MonthReview], tracking_breach: Option<YearMonth>) -> ReviewScores {
    let scored: Vec<&MonthReview> = months.iter().filter(|m| m.scored).collect();
    let a: Vec<f64> = scored.iter().map(|m| m.actual).collect();
    let f: Vec<f64> = scored.iter().map(|m| m.forecast).collect();
    let (mape, zero_actuals) = metrics::mape(&a, &f);
    let cover = |pick: fn(&MonthReview) -> Option<(f64, f64)>, nominal: f64| {
        let with: Vec<(f64, (f64, f64))> = scored
            .iter()
            .filter_map(|m| pick(m).map(|b| (m.actual, b)))
            .collect();
        let act: Vec<f64> = with.iter().map(|x| x.0).collect();
        let lo: Vec<f64> = with.iter().map(|x| x.1 .0).collect();
        let hi: Vec<f64> = with.iter().map(|x| x.1 .1).collect();
        let c = metrics::coverage(&act, &lo, &hi);
        let p = c.and_then(|c| {
            let inside = (c / 100.0 * with.len() as f64).round() as usize;
            metrics::coverage_p_value(inside, with.len(), nominal)
        });
        (c, p)
    };
    let (coverage80, coverage80_p) = cover(|m| m.interval80, 0.80);
    let (coverage95, coverage95_p) = cover(|m| m.interval95, 0.95);
    let baseline = |pick: fn(&MonthReview) -> Option<f64>| -> (Option<f64>, Option<f64>) {
        let b: Option<Vec<f64>> = scored.iter().map(|m| pick(m)).collect();
        match b {
            Some(b) if !b.is_empty() => (metrics::mape(&a, &b).0, metrics::wape(&a, &b)),
            _ => (None, None),
        }
    };
    let (naive_mape, naive_wape) = baseline(|m| m.naive);
    let (seasonal_naive_mape, seasonal_naive_wape) = baseline(|m| m.seasonal_naive);
    // Months a baseline came closer than the model, ties left out.
    let closer = |pick: fn(&MonthReview) -> Option<f64>| -> Option<(usize, usize)> {
        let (mut k, mut n) = (0, 0);
        for m in &scored {
            let b = pick(m)?;
            let (eb, em) = ((b - m.actual).abs(), (m.forecast - m.actual).abs());
            if eb != em {
                n += 1;
                k += usize::from(eb < em);
            }
        }
        Some((k, n))
    };
    let naive_closer = closer(|m| m.naive);
    let seasonal_naive_closer = closer(|m| m.seasonal_naive);
    ReviewScores {
        months: scored.len(),
        left_out: months.len() - scored.len(),
        mape,
        zero_actuals,
        bias: metrics::bias(&a, &f),
        wape: metrics::wape(&a, &f),
        coverage80,
        coverage80_p,
        coverage95,
        coverage95_p,
        tracking: metrics::tracking_signal(&a, &f),
        tracking_breach,
        naive_mape,
        naive_wape,
        seasonal_naive_mape,
        seasonal_naive_wape,
        naive_closer,
        seasonal_naive_closer,
    }
}

/// Compares vintages per product (reviews ordered by product then
/// vintage): fills each month's revision from the previous vintage and the
/// closest vintage, and returns one comparison per product forecast by two
/// or more vintages.
pub fn compare_vintages(reviews: &mut [ProductReview]) -> Vec<VintageComparison> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < reviews.len() {
        let mut j = i + 1;
        while j < reviews.len() && reviews[j].product == reviews[i].product {
            j += 1;
        }
        if j - i >= 2 {
            out.push(compare_group(&mut reviews[i..j]));
        }
        i = j;
    }
    out
}

fn compare_group(group: &mut [ProductReview]) -> VintageComparison {
    // Per month: forecasts of every vintage that has it.
    let mut by_month: BTreeMap<YearMonth, Vec<(usize, f64, f64, bool)>> = BTreeMap::new();
    for (g, r) in group.iter().enumerate() {
        for m in &r.months {
            by_month
                .entry(m.month)
                .or_default()
                .push((g, m.forecast, m.actual, m.scored));
        }
    }
    for (month, fs) in &by_month {
        let closest = fs
            .iter()
            .filter(|x| x.3)
            .min_by(|x, y| (x.1 - x.2).abs().total_cmp(&(y.1 - y.2).abs()))
            .map(|x| group[x.0].vintage);
        for (k, &(g, f, _, _)) in fs.iter().enumerate() {
            let revision = k.checked_sub(1).map(|p| f - fs[p].1);
            if let Some(m) = group[g].months.iter_mut().find(|m| m.month == *month) {
                m.revision = revision;
                if fs.len() >= 2 {
                    m.closest_vintage = closest;
                }
            }
        }
    }
    let common_months: Vec<YearMonth> = by_month
        .iter()
        .filter(|(_, fs)| fs.len() == group.len() && fs.iter().all(|x| x.3))
        .map(|(m, _)| *m)
        .collect();
    let pick = |r: &ProductReview| -> (Vec<f64>, Vec<f64>) {
        r.months
            .iter()
            .filter(|m| common_months.contains(&m.month))
            .map(|m| (m.actual, m.forecast))
            .unzip()
    };
    let mut wape = Vec::new();
    let mut bias = Vec::new();
    for r in group.iter() {
        let (a, f) = pick(r);
        wape.push(metrics::wape(&a, &f));
        bias.push(metrics::bias(&a, &f));
    }
    let closest = wape
        .iter()
        .enumerate()
        .filter_map(|(g, w)| w.map(|w| (g, w)))
        .min_by(|x, y| x.1.total_cmp(&y.1))
        .map(|(g, _)| group[g].vintage);
    let revision_pct = if common_months.is_empty() {
        None
    } else {
        let (_, first) = pick(&group[0]);
        let (_, last) = pick(&group[group.len() - 1]);
        let base: f64 = first.iter().sum();
        let moved: f64 = first.iter().zip(&last).map(|(x, y)| (y - x).abs()).sum();
        (base > 0.0).then(|| 100.0 * moved / base)
    };
    VintageComparison {
        product: group[0].product.clone(),
        vintages: group.iter().map(|r| r.vintage).collect(),
        common_months,
        wape,
        bias,
        closest,
        revision_pct,
    }
}

#[cfg(test)]
mod tests;
