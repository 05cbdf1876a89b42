//! Cross-checking the consumption forecast against what services data and
//! population data imply.
//!
//! Consumption is the best basis for a forecast, but practitioners compare
//! it with two other estimates of the same year's need:
//!
//! - **services**: the number of services (clients treated, tests
//!   performed) projected with the same backtest–select–project machinery as
//!   consumption, times the units used per service, plus a stated allowance
//!   for repeats and losses ([`services`]);
//! - **population**: morbidity-based (people × incidence or prevalence ×
//!   share seeking care × share treated × quantity per course, summed over
//!   target groups) or demographic, for contraceptives (women of
//!   reproductive age × contraceptive prevalence × method share × public
//!   sector share × units per user per year, from couple-years-of-protection
//!   factors) ([`population`], [`cyp`]).
//!
//! Every estimate is an annual quantity for one 12-month period (by default
//! the first 12 projected months) and is compared with the consumption
//! forecast's total for the same months ([`AnnualConsumption`]). A ratio
//! beyond the threshold (default ±25%) gets a flag and a plain-words
//! explanation ([`compare`]). This module computes on plain values; reading
//! is in [`read`].

pub mod cyp;
pub mod population;
pub mod read;
pub mod services;

use crate::calendar::YearMonth;

/// Default divergence threshold: an estimate more than 25% above or below
/// the consumption forecast is flagged (common practice).
pub const DEFAULT_THRESHOLD: f64 = 0.25;

/// Months in the comparison period.
pub const PERIOD_MONTHS: usize = 12;

/// The method behind an estimate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Method {
    /// The consumption forecast itself.
    Consumption,
    /// Projected services × units per service.
    Services,
    /// Population × incidence/prevalence × care seeking × treatment × course.
    Morbidity,
    /// Women of reproductive age × prevalence × method share × units per user.
    Demographic,
}

impl Method {
    /// Name as written in files.
    pub fn name(self) -> &'static str {
        match self {
            Method::Consumption => "consumption",
            Method::Services => "services",
            Method::Morbidity => "morbidity",
            Method::Demographic => "demographic",
        }
    }

    /// Parses a name as written in files.
    pub fn parse(s: &str) -> Option<Method> {
        match s.trim().to_ascii_lowercase().as_str() {
            "consumption" => Some(Method::Consumption),
            "services" => Some(Method::Services),
            "morbidity" => Some(Method::Morbidity),
            "demographic" => Some(Method::Demographic),
            _ => None,
        }
    }

    fn is_population(self) -> bool {
        matches!(self, Method::Morbidity | Method::Demographic)
    }
}

/// Which of the forecast run's forecasts the cross-check compares with.
///
/// A run with known changes (`forecast --changes`) keeps two forecasts:
/// the statistical one and the adjusted one. The cross-check uses the
/// adjusted one, and says so beside every figure of it, because the
/// report's product index shows the statistical total too.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ForecastUsed {
    /// The statistical forecast: the run applied no known changes.
    #[default]
    Statistical,
    /// The statistical forecast with the known changes applied.
    Adjusted,
}

impl ForecastUsed {
    /// Name as written in files (`crosscheck.csv`, `crosscheck.json`).
    pub fn name(self) -> &'static str {
        match self {
            ForecastUsed::Statistical => "statistical",
            ForecastUsed::Adjusted => "adjusted",
        }
    }

    /// Parses a name as written in files.
    pub fn parse(s: &str) -> Option<ForecastUsed> {
        match s.trim() {
            "statistical" => Some(ForecastUsed::Statistical),
            "adjusted" => Some(ForecastUsed::Adjusted),
            _ => None,
        }
    }

    /// A short label for a table header or a chart: "statistical
    /// forecast", "adjusted forecast".
    pub fn label(self) -> &'static str {
        match self {
            ForecastUsed::Statistical => "statistical forecast",
            ForecastUsed::Adjusted => "adjusted forecast",
        }
    }

    /// The forecast in words, for a sentence: "the statistical
    /// consumption forecast (no known changes applied)", "the consumption
    /// forecast adjusted for known changes".
    pub fn words(self) -> &'static str {
        match self {
            ForecastUsed::Statistical => {
                "the statistical consumption forecast (no known changes applied)"
            }
            ForecastUsed::Adjusted => "the consumption forecast adjusted for known changes",
        }
    }

    /// The forecast at the head of the consumption row's basis.
    fn basis_words(self) -> &'static str {
        match self {
            ForecastUsed::Statistical => "statistical forecast (no known changes applied)",
            ForecastUsed::Adjusted => {
                "adjusted forecast (the statistical forecast with the known changes applied)"
            }
        }
    }

    /// What a ratio is taken of, after "1.9×": "consumption" for the
    /// statistical forecast (the run has no other), "the adjusted
    /// consumption forecast (known changes applied)" otherwise.
    fn ratio_of(self) -> &'static str {
        match self {
            ForecastUsed::Statistical => "consumption",
            ForecastUsed::Adjusted => "the adjusted consumption forecast (known changes applied)",
        }
    }

    /// The forecast after "the wide 80% range of".
    fn range_of(self) -> &'static str {
        match self {
            ForecastUsed::Statistical => "the consumption forecast",
            ForecastUsed::Adjusted => "the adjusted consumption forecast",
        }
    }
}

/// One projected month of the consumption forecast: point and 80% bounds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ForecastMonth {
    /// Month.
    pub month: YearMonth,
    /// Point forecast.
    pub point: f64,
    /// Lower 80% bound.
    pub lower80: f64,
    /// Upper 80% bound.
    pub upper80: f64,
}

/// The consumption forecast's total over the comparison period, with two
/// 80% ranges that bracket the true one.
///
/// The forecast keeps monthly 80% bounds only. The range of a 12-month
/// total depends on how the months' errors are correlated, which the
/// monthly bounds do not say. With a normal approximation, each month's
/// half-widths (point − lower, upper − point) are 1.2816 standard
/// deviations on each side; then
///
/// - if the months' errors were **independent**, the total's half-width is
///   the root of the sum of squared monthly half-widths (`narrow`);
/// - if they were **perfectly correlated** (every month off in the same
///   direction, by the same number of standard deviations), it is the plain
///   sum of the half-widths, i.e. the sum of the monthly bounds (`wide`).
///
/// Forecast errors of the models used are positively correlated across
/// months (a level that is off stays off), so the true 80% range of the
/// total lies between the two: `narrow` is too optimistic, `wide` a
/// conservative envelope. Both are given; neither is claimed exact.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AnnualConsumption {
    /// Sum of the monthly point forecasts.
    pub total: f64,
    /// 80% range of the total if months were independent (narrowest).
    pub narrow: (f64, f64),
    /// Sum of the monthly 80% bounds (widest: months move together).
    pub wide: (f64, f64),
}

impl AnnualConsumption {
    /// Combines monthly forecasts (the months of the period, in order).
    pub fn from_months(months: &[ForecastMonth]) -> AnnualConsumption {
        let total: f64 = months.iter().map(|m| m.point).sum();
        let lo_sq: f64 = months
            .iter()
            .map(|m| (m.point - m.lower80).max(0.0).powi(2))
            .sum();
        let hi_sq: f64 = months
            .iter()
            .map(|m| (m.upper80 - m.point).max(0.0).powi(2))
            .sum();
        let wide_lo: f64 = months.iter().map(|m| m.lower80.min(m.point)).sum();
        let wide_hi: f64 = months.iter().map(|m| m.upper80.max(m.point)).sum();
        AnnualConsumption {
            total,
            narrow: ((total - lo_sq.sqrt()).max(0.0), total + hi_sq.sqrt()),
            wide: (wide_lo.max(0.0), wide_hi),
        }
    }
}

/// How an estimate compares with the consumption forecast.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flag {
    /// Within the threshold of consumption.
    Agrees,
    /// More than the threshold above consumption.
    Above,
    /// More than the threshold below consumption.
    Below,
    /// No consumption forecast to compare with (product not forecast, or a
    /// zero forecast).
    NoComparison,
}

impl Flag {
    /// Name as written in files.
    pub fn name(self) -> &'static str {
        match self {
            Flag::Agrees => "agrees",
            Flag::Above => "above",
            Flag::Below => "below",
            Flag::NoComparison => "no-comparison",
        }
    }
}

/// The ratio of an estimate to consumption, its flag, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// Estimate ÷ consumption forecast (`None` without a positive forecast).
    pub ratio: Option<f64>,
    /// The flag.
    pub flag: Flag,
    /// Plain-words explanation.
    pub explanation: String,
}

/// Formats a ratio for people: "2.1×", "0.60×".
pub fn fmt_ratio(r: f64) -> String {
    if r >= 1e6 {
        format!("{r:.1e}×")
    } else if r >= 10.0 {
        format!("{r:.0}×")
    } else if r >= 1.0 {
        format!("{r:.1}×")
    } else {
        format!("{r:.2}×")
    }
}

/// Compares an estimate by `method` with the (statistical) consumption
/// forecast; see [`compare_with`].
pub fn compare(
    method: Method,
    estimate: f64,
    consumption: Option<&AnnualConsumption>,
    threshold: f64,
) -> Comparison {
    compare_with(
        method,
        estimate,
        consumption,
        threshold,
        ForecastUsed::Statistical,
    )
}

/// Compares an estimate by `method` with the consumption forecast `used`
/// (the explanation names the adjusted forecast when it is that one).
///
/// Flagged when |ratio − 1| > `threshold` (a ratio exactly at the boundary
/// agrees). `consumption` is `None` for a product with no consumption
/// forecast. The explanation adds a note when the estimate lies outside
/// even the wide 80% range of the consumption total.
pub fn compare_with(
    method: Method,
    estimate: f64,
    consumption: Option<&AnnualConsumption>,
    threshold: f64,
    used: ForecastUsed,
) -> Comparison {
    let Some(c) = consumption else {
        return Comparison {
            ratio: None,
            flag: Flag::NoComparison,
            explanation: format!(
                "no consumption forecast for this product in the forecast directory; the {} estimate stands alone",
                method.name()
            ),
        };
    };
    if c.total <= 0.0 || !c.total.is_finite() {
        return Comparison {
            ratio: None,
            flag: Flag::NoComparison,
            explanation: format!(
                "the consumption forecast for the period is zero, so no ratio; the {} estimate stands alone",
                method.name()
            ),
        };
    }
    let ratio = estimate / c.total;
    // Rounded to 1e-9 so that 1.25 computed as 125/100 counts as on the boundary.
    let gap = ((ratio - 1.0) * 1e9).round() / 1e9;
    let pct = (threshold * 100.0).round();
    let range_of = used.range_of();
    let outside = if estimate > c.wide.1 || estimate < c.wide.0 {
        format!("; it lies outside even the wide 80% range of {range_of}")
    } else {
        format!("; it lies within the wide 80% range of {range_of}, so part of the gap may be forecast uncertainty")
    };
    let name = method.name();
    let r = format!("{} {}", fmt_ratio(ratio), used.ratio_of());
    let (flag, explanation) = if gap > threshold {
        let why = if method.is_population() {
            "possible unmet need or under-reporting of consumption; population-based figures are usually an upper bound, so treat it as one, and check the assumptions behind it (population, rates, shares, quantity per course)"
        } else {
            "more services are recorded than the quantities consumed would cover: possible under-reporting of consumption, stockouts limiting what was dispensed, or units per service set too high"
        };
        (
            Flag::Above,
            format!("{name} estimate is {r}: {why}{outside}"),
        )
    } else if gap < -threshold {
        let why = if method.is_population() {
            "consumption exceeds what the population assumptions imply: possible over-consumption, wastage or leakage, a data error, or assumptions set too low (population, rates, shares, quantity per course)"
        } else {
            "more product is reported consumed than the recorded services need: possible wastage or leakage, use outside the recorded services, services under-recorded, or units per service set too low"
        };
        (
            Flag::Below,
            format!("{name} estimate is {r}: {why}{outside}"),
        )
    } else {
        (
            Flag::Agrees,
            format!("{name} estimate is {r}, within ±{pct}%: the two sources agree"),
        )
    };
    Comparison {
        ratio: Some(ratio),
        flag,
        explanation,
    }
}

/// The comparison of an estimate that could not be made: flagged
/// `no-comparison`, so every estimate row has a flag (the basis says why
/// there is no estimate).
fn no_estimate(method: Method, has_consumption: bool) -> Comparison {
    Comparison {
        ratio: None,
        flag: Flag::NoComparison,
        explanation: format!(
            "no {} estimate could be made (the basis says why){}, so there is nothing to compare",
            method.name(),
            if has_consumption {
                ""
            } else {
                ", and there is no consumption forecast for this product over the period"
            }
        ),
    }
}

/// One row of the cross-check: a product's annual estimate by one method.
#[derive(Debug, Clone, PartialEq)]
pub struct CrossRow {
    /// Product.
    pub product: String,
    /// Method.
    pub method: Method,
    /// First month of the comparison period.
    pub period_start: YearMonth,
    /// Last month of the comparison period.
    pub period_end: YearMonth,
    /// The annual quantity (`None` when it could not be computed; see `basis`).
    pub quantity: Option<f64>,
    /// The consumption forecast over the period, when there is one.
    pub consumption: Option<AnnualConsumption>,
    /// The comparison (for the consumption row itself: `None`).
    pub comparison: Option<Comparison>,
    /// How the quantity was computed, in words, with the numbers used.
    pub basis: String,
}

/// Checks the threshold: a share above 0 and below 10.
pub fn check_threshold(t: f64) -> crate::Result<f64> {
    if t.is_finite() && t > 0.0 && t < 10.0 {
        Ok(t)
    } else {
        Err(crate::Error::setting(
            "threshold",
            format!("must be a share above 0 and below 10 (0.25 = ±25%), got {t}"),
        ))
    }
}

/// Everything the cross-check produced.
#[derive(Debug, Clone)]
pub struct CrossCheck {
    /// First month of the comparison period.
    pub period_start: YearMonth,
    /// The forecast compared with: statistical, or adjusted for known
    /// changes.
    pub forecast_used: ForecastUsed,
    /// Rows: per product, the consumption row then one per method.
    pub rows: Vec<CrossRow>,
    /// The services per product and month over the period (observed or projected).
    pub services_months: Vec<(String, YearMonth, f64, &'static str)>,
    /// Warnings (products in one source only, short forecasts, ...).
    pub warnings: Vec<String>,
}

/// Builds the cross-check from the consumption forecast (projected months
/// per product), the services estimates and the population rows, for the
/// 12 months from `period_start`. `used` says which of the run's forecasts
/// `forecast` is; the explanations and the consumption rows name it.
pub fn build(
    forecast: &std::collections::BTreeMap<String, Vec<ForecastMonth>>,
    used: ForecastUsed,
    period_start: YearMonth,
    services: &[services::ServicesEstimate],
    population: &[population::PopulationRow],
    threshold: f64,
) -> CrossCheck {
    use std::collections::BTreeSet;
    let period_end = period_start.plus(PERIOD_MONTHS as i64 - 1);
    let pops = population::estimates(population);
    let mut warnings = Vec::new();
    let products: BTreeSet<&str> = services
        .iter()
        .map(|s| s.product.as_str())
        .chain(pops.iter().map(|p| p.product.as_str()))
        .collect();
    let mut rows = Vec::new();
    let mut services_months = Vec::new();
    for product in products {
        let row = |method: Method,
                   quantity: Option<f64>,
                   consumption: Option<AnnualConsumption>,
                   basis: String| {
            let comparison = (method != Method::Consumption).then(|| match quantity {
                Some(q) => compare_with(method, q, consumption.as_ref(), threshold, used),
                None => no_estimate(method, consumption.is_some()),
            });
            CrossRow {
                product: product.to_string(),
                method,
                period_start,
                period_end,
                quantity,
                consumption,
                comparison,
                basis,
            }
        };
        let consumption = match forecast.get(product) {
            None => {
                let hint = crate::config::did_you_mean(
                    product,
                    forecast.keys().map(String::as_str),
                    " (check the spelling against forecast.csv)",
                );
                warnings.push(format!(
                    "product '{product}' has services or population figures but no consumption forecast{hint}; its estimates are listed without a comparison"
                ));
                None
            }
            Some(months) => {
                let inside: Vec<ForecastMonth> = months
                    .iter()
                    .copied()
                    .filter(|m| m.month >= period_start && m.month <= period_end)
                    .collect();
                if inside.len() < PERIOD_MONTHS {
                    let first = months.iter().map(|m| m.month).min();
                    let last = months.iter().map(|m| m.month).max();
                    let fix = match (first, last) {
                        (Some(f), _) if period_start < f => format!(
                            "the period starts before the forecast's first month {f}: choose --start {f} or later"
                        ),
                        (_, Some(l)) => format!(
                            "the forecast ends at {l}: forecast with a longer --horizon, or choose an earlier --start"
                        ),
                        _ => "the product has no forecast month".to_string(),
                    };
                    warnings.push(format!(
                        "product '{product}': the consumption forecast covers {} of the 12 months {period_start} to {period_end}; no comparison ({fix})",
                        inside.len()
                    ));
                    None
                } else {
                    Some(AnnualConsumption::from_months(&inside))
                }
            }
        };
        let cbasis = match &consumption {
            Some(c) => format!(
                "{}: sum of the 12 monthly forecasts {period_start} to {period_end}; 80% range of the total: {} to {} if the months' errors were independent, {} to {} as the sum of the monthly 80% bounds (months moving together); the true range lies between the two",
                used.basis_words(),
                crate::chart::fmt_quantity(c.narrow.0),
                crate::chart::fmt_quantity(c.narrow.1),
                crate::chart::fmt_quantity(c.wide.0),
                crate::chart::fmt_quantity(c.wide.1)
            ),
            None => "no consumption forecast for the whole period".to_string(),
        };
        rows.push(row(
            Method::Consumption,
            consumption.map(|c| c.total),
            consumption,
            cbasis,
        ));
        for s in services.iter().filter(|s| s.product == product) {
            rows.push(row(
                Method::Services,
                s.quantity,
                consumption,
                s.basis.clone(),
            ));
            for (m, v, how) in &s.months {
                services_months.push((product.to_string(), *m, *v, *how));
            }
        }
        for p in pops.iter().filter(|p| p.product == product) {
            rows.push(row(
                p.method,
                Some(p.quantity),
                consumption,
                p.groups.join("; "),
            ));
        }
    }
    let flagged = rows
        .iter()
        .filter(|r| {
            r.comparison
                .as_ref()
                .is_some_and(|c| matches!(c.flag, Flag::Above | Flag::Below))
        })
        .count();
    if flagged > 0 {
        warnings.push(format!(
            "{flagged} estimate(s) differ from {} by more than ±{}%: see the explanations in crosscheck.csv",
            used.range_of(),
            (threshold * 100.0).round()
        ));
    }
    CrossCheck {
        period_start,
        forecast_used: used,
        rows,
        services_months,
        warnings,
    }
}

#[cfg(test)]
mod tests;
