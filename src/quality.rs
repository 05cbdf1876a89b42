//! The per-product data-quality profile and a plain-words verdict on
//! whether the history is fit to forecast from.

use crate::calendar::YearMonth;
use crate::clean::{Cleaned, MonthStatus, Rule};

/// Months of history below which a product is not fit to forecast.
pub const MIN_MONTHS_FIT: usize = 12;
/// Months needed to estimate seasonality (two full years).
pub const MIN_MONTHS_SEASONAL: usize = 24;

/// Overall judgement of a product's history.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
pub enum Verdict {
    /// Fit to forecast from.
    Fit,
    /// Usable, but read the reasons before trusting a forecast.
    FitWithCare,
    /// Not fit: too short or too much of it adjusted or missing.
    NotFit,
}

impl Verdict {
    /// Stable plain-words name.
    pub fn name(self) -> &'static str {
        match self {
            Verdict::Fit => "fit",
            Verdict::FitWithCare => "fit with care",
            Verdict::NotFit => "not fit",
        }
    }
}

/// Data-quality profile of one product.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QualityProfile {
    /// Product.
    pub product: String,
    /// Sites (1 when the file has no site column).
    pub sites: usize,
    /// First month with a row.
    pub first: String,
    /// Last month with a row.
    pub last: String,
    /// Calendar months from first to last.
    pub months: usize,
    /// Months with a reported quantity (at any site).
    pub months_reported: usize,
    /// Months with no reported quantity at all.
    pub months_missing: usize,
    /// Longest run of months with nothing reported.
    pub longest_gap: usize,
    /// Months with stockout days at any site.
    pub months_with_stockouts: usize,
    /// Months treated as missing because of long stockouts.
    pub months_stocked_out_too_long: usize,
    /// Mean reporting rate (from the column, or the share of sites
    /// reporting when the file has sites); `None` when unknown.
    pub mean_reporting_rate: Option<f64>,
    /// Lowest monthly reporting rate; `None` when unknown.
    pub min_reporting_rate: Option<f64>,
    /// Share of reported months that are zero.
    pub zero_share: f64,
    /// Months flagged as outliers.
    pub outliers: Vec<String>,
    /// Months whose cleaned value is wholly imputed.
    pub months_imputed: usize,
    /// Months affected by any problem (missing, stockout, low reporting, imputed).
    pub months_affected: usize,
    /// The verdict.
    pub verdict: Verdict,
    /// Reasons for the verdict, most serious first.
    pub reasons: Vec<String>,
}

impl QualityProfile {
    /// The verdict and its reasons as one sentence.
    pub fn verdict_text(&self) -> String {
        if self.reasons.is_empty() {
            format!(
                "{}: complete history with no problems found",
                self.verdict.name()
            )
        } else {
            format!("{}: {}", self.verdict.name(), self.reasons.join("; "))
        }
    }
}

/// Profiles every product of a cleaning result, unusable ones included.
/// `data_end` is the last month in the whole file (for staleness).
pub fn profile_all(cleaned: &Cleaned) -> Vec<QualityProfile> {
    let data_end = cleaned.inputs.iter().map(|p| p.end).max();
    // Indexed once: looking each product up by scanning would cost
    // products × log entries, minutes on a million-row file.
    let series: std::collections::HashMap<&str, &crate::clean::CleanSeries> = cleaned
        .series
        .iter()
        .map(|s| (s.product.as_str(), s))
        .collect();
    // The log is kept by product: one slice each, nothing copied.
    let log: std::collections::HashMap<&str, &[crate::clean::Adjustment]> = cleaned
        .log
        .by_product()
        .filter_map(|part| Some((&*part.first()?.product, part)))
        .collect();
    cleaned
        .inputs
        .iter()
        .map(|p| {
            let key = p.product.as_str();
            let entries = log.get(key).copied().unwrap_or_default();
            profile_one(p, series.get(key).copied(), entries, data_end)
        })
        .collect()
}

fn profile_one(
    p: &crate::data::ProductData,
    series: Option<&crate::clean::CleanSeries>,
    entries: &[crate::clean::Adjustment],
    data_end: Option<YearMonth>,
) -> QualityProfile {
    let n = p.len();
    let mut reported = vec![false; n];
    let mut stockout = vec![false; n];
    let mut zero = vec![false; n];
    let mut rate_sum = vec![0.0; n];
    let mut rate_n = vec![0usize; n];
    let mut sites_expected = vec![0usize; n];
    let mut sites_reporting = vec![0usize; n];
    let mut has_rate_column = false;
    for site in &p.sites {
        let off = p.start.months_until(site.start) as usize;
        for (k, m) in site.months.iter().enumerate() {
            let t = off + k;
            sites_expected[t] += 1;
            if let Some(c) = m.consumed {
                reported[t] = true;
                sites_reporting[t] += 1;
                if c == 0.0 {
                    zero[t] = true;
                }
            }
            if m.stockout_days.is_some_and(|d| d > 0.0) {
                stockout[t] = true;
            }
            if let Some(r) = m.reporting_rate {
                has_rate_column = true;
                rate_sum[t] += r;
                rate_n[t] += 1;
            }
        }
    }
    // A month is zero only when every reporting site reported zero.
    for site in &p.sites {
        let off = p.start.months_until(site.start) as usize;
        for (k, m) in site.months.iter().enumerate() {
            if m.consumed.is_some_and(|c| c > 0.0) {
                zero[off + k] = false;
            }
        }
    }
    let has_sites = p.sites.iter().any(|s| s.site.is_some());
    let monthly_rate: Vec<f64> = (0..n)
        .filter_map(|t| {
            if has_rate_column {
                (rate_n[t] > 0).then(|| rate_sum[t] / rate_n[t] as f64)
            } else if has_sites && sites_expected[t] > 0 {
                Some(sites_reporting[t] as f64 / sites_expected[t] as f64)
            } else {
                None
            }
        })
        .collect();
    let (mean_rate, min_rate) = if monthly_rate.is_empty() {
        (None, None)
    } else {
        (
            Some(monthly_rate.iter().sum::<f64>() / monthly_rate.len() as f64),
            monthly_rate.iter().copied().reduce(f64::min),
        )
    };
    let months_reported = reported.iter().filter(|&&r| r).count();
    let mut longest_gap = 0;
    let mut run = 0;
    for &r in &reported {
        run = if r { 0 } else { run + 1 };
        longest_gap = longest_gap.max(run);
    }
    let month_pos = |m: YearMonth| p.start.months_until(m) as usize;
    let mut too_long = vec![false; n];
    let mut low_rate = vec![false; n];
    for a in entries {
        let t = month_pos(a.month);
        if t < n {
            match a.rule() {
                Rule::StockoutMissing => too_long[t] = true,
                Rule::ReportingMissing => low_rate[t] = true,
                _ => {}
            }
        }
    }
    let imputed: Vec<bool> = match series {
        Some(s) => s
            .status
            .iter()
            .map(|st| *st == MonthStatus::Imputed)
            .collect(),
        None => vec![true; n],
    };
    let affected = (0..n)
        .filter(|&t| !reported[t] || stockout[t] || low_rate[t] || too_long[t] || imputed[t])
        .count();
    let zero_share = if months_reported > 0 {
        (0..n).filter(|&t| reported[t] && zero[t]).count() as f64 / months_reported as f64
    } else {
        0.0
    };
    let outliers: Vec<String> = series
        .map(|s| {
            (0..s.len())
                .filter(|&t| s.outlier[t])
                .map(|t| s.month(t).to_string())
                .collect()
        })
        .unwrap_or_default();

    let stockout_months = stockout.iter().filter(|&&b| b).count();
    let too_long_n = too_long.iter().filter(|&&b| b).count();
    let missing = n - months_reported;
    let mut verdict = Verdict::Fit;
    let mut reasons = Vec::new();
    let worsen = |v: Verdict, verdict: &mut Verdict| {
        if v > *verdict {
            *verdict = v;
        }
    };
    if series.is_none() {
        worsen(Verdict::NotFit, &mut verdict);
        reasons.push("no usable quantity in any month".to_string());
    }
    if months_reported < MIN_MONTHS_FIT {
        worsen(Verdict::NotFit, &mut verdict);
        reasons.push(format!(
            "only {months_reported} month(s) reported; at least {MIN_MONTHS_FIT} are needed to forecast, {MIN_MONTHS_SEASONAL} to estimate seasonality"
        ));
    } else if months_reported < MIN_MONTHS_SEASONAL {
        worsen(Verdict::FitWithCare, &mut verdict);
        reasons.push(format!(
            "{months_reported} months reported: fewer than {MIN_MONTHS_SEASONAL}, so seasonality cannot be estimated"
        ));
    }
    let affected_share = affected as f64 / n as f64;
    if affected_share > 0.5 {
        worsen(Verdict::NotFit, &mut verdict);
    } else if affected_share > 0.25 {
        worsen(Verdict::FitWithCare, &mut verdict);
    }
    if stockout_months > 0 {
        let mut r = format!("{stockout_months} of {n} months affected by stockouts");
        if too_long_n > 0 {
            r.push_str(&format!(
                " ({too_long_n} too long to trust, treated as missing)"
            ));
        }
        reasons.push(r);
    }
    if missing > 0 {
        reasons.push(format!(
            "{missing} of {n} months not reported (longest gap {longest_gap})"
        ));
    }
    if let Some(m) = min_rate {
        if m < 0.8 {
            reasons.push(format!(
                "reporting rate{} as low as {:.0}% (mean {:.0}%)",
                if has_rate_column {
                    ""
                } else {
                    " (sites that reported, of those expected; the data give no reporting rate)"
                },
                m * 100.0,
                mean_rate.unwrap_or(m) * 100.0
            ));
        }
    }
    if affected_share > 0.25 {
        reasons.insert(
            0,
            format!(
                "{affected} of {n} months ({:.0}%) missing or adjusted",
                affected_share * 100.0
            ),
        );
    }
    if zero_share > 0.3 {
        worsen(Verdict::FitWithCare, &mut verdict);
        reasons.push(format!(
            "intermittent: {:.0}% of reported months are zero, so intermittent-demand methods apply",
            zero_share * 100.0
        ));
    }
    if !outliers.is_empty() {
        worsen(Verdict::FitWithCare, &mut verdict);
        reasons.push(format!(
            "{} outlier(s) flagged ({}): check them against source records",
            outliers.len(),
            outliers.join(", ")
        ));
    }
    if let Some(end) = data_end {
        let behind = p.end.months_until(end);
        if behind >= 3 {
            worsen(Verdict::FitWithCare, &mut verdict);
            reasons.push(format!(
                "last report {} is {behind} months before the latest month in the file ({end}): discontinued or not yet reported?",
                p.end
            ));
        }
    }
    let months_imputed = imputed.iter().filter(|&&b| b).count();
    QualityProfile {
        product: p.product.clone(),
        sites: p.sites.len(),
        first: p.start.to_string(),
        last: p.end.to_string(),
        months: n,
        months_reported,
        months_missing: missing,
        longest_gap,
        months_with_stockouts: stockout_months,
        months_stocked_out_too_long: too_long_n,
        mean_reporting_rate: mean_rate,
        min_reporting_rate: min_rate,
        zero_share,
        outliers,
        months_imputed,
        months_affected: affected,
        verdict,
        reasons,
    }
}
