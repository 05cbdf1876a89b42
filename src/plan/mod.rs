//! From forecast to supply plan: month-by-month stock projection, months of
//! stock, risk flags, and order proposals under a max–min rule.
//!
//! One plan per series: a row of the stock file names a product (and
//! optionally a site) and is planned against that series of the forecast.
//! The computation here is pure ([`plan_series`]); [`read`] reads the stock
//! file, the shipments on order and the forecast directory.
//!
//! **Stock balance.** The stock on hand is counted at the end of its month
//! (`stock_date`); the projection starts the month after. Each month:
//! `closing = max(0, opening + arrivals − consumption)`, and what the stock
//! could not cover is the quantity short. Arrivals are available for the
//! whole month they arrive in. The closing stock of a month is the opening
//! stock of the next.
//!
//! **AMC.** Average monthly consumption looking forward: the AMC at the end
//! of month *t* is the mean projected consumption of the next
//! `amc_months` months (*t*+1 …); near the end of the horizon, the last
//! `amc_months` months of the forecast. Months of stock = closing stock ÷
//! that AMC (USAID | DELIVER PROJECT, *The Logistics Handbook*, 2011).
//!
//! **Orders (max–min, periodic review).** Reviews fall every
//! `review_period_months` from the first projected month. An order decided
//! at a review arrives `lead_time_months` later and must last until the next
//! order can arrive (one review period). When the projected stock at the end
//! of that period, without the order, is at or below the minimum, the order
//! brings the stock at its arrival up to the maximum, rounded up to whole
//! packs: `quantity = maximum − projected stock at arrival`. The projected
//! stock at arrival is stock on hand + stock on order − forecast consumption
//! until then, so with a flat forecast this is the max–min quantity
//! `maximum − (stock on hand + stock on order)` of the Handbook, less the
//! lead-time consumption; with the maximum set to review period + safety
//! months it equals the WHO formula
//! `AMC × (lead time + procurement period) + safety stock − (on hand + on
//! order)` (WHO, *Operational Guide for National TB Control Programmes on
//! the Introduction and Use of FDC Drugs*, 2002, Annex 5).
//!
//! **Safety stock from the forecast range** ([`Safety::Upper`]): instead of
//! fixed months, the minimum is the safety stock
//! `SS = Σ (upper bound − point forecast)` over the months from the review to
//! the end of the period the order covers (lead time + review period), and
//! the order brings the stock at arrival up to the forecast consumption of
//! the period plus `SS`. Summing the monthly margins assumes the forecast
//! errors of those months move together (perfect correlation): it
//! over-states the buffer when they are independent, never under-states it.

pub mod read;
#[cfg(test)]
mod tests;

use crate::calendar::YearMonth;
use crate::error::{Error, Result};

/// One series' stock policy and position (a row of the stock file).
#[derive(Debug, Clone, PartialEq)]
pub struct Policy {
    /// Stock on hand, base units, counted at the end of `stock_date`.
    pub stock_on_hand: f64,
    /// Month of the stock count.
    pub stock_date: YearMonth,
    /// Months from placing an order to its arrival.
    pub lead_time_months: u32,
    /// Minimum stock, in months of AMC.
    pub min_months: f64,
    /// Maximum stock, in months of AMC.
    pub max_months: f64,
    /// Months between reviews (and between orders).
    pub review_period_months: u32,
    /// Base units per pack; orders are whole packs.
    pub pack_size: f64,
    /// Cost of one base unit.
    pub unit_cost: f64,
    /// Shelf life in months, when known: stock above it is at risk of expiry.
    pub shelf_life_months: Option<f64>,
    /// Emergency point in months of AMC, when set.
    pub emergency_months: Option<f64>,
}

/// A shipment on order: quantity and the month it is expected.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Arrival {
    /// Expected month of arrival.
    pub month: YearMonth,
    /// Quantity, base units.
    pub quantity: f64,
}

/// One month of a series' forecast as the plan uses it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ForecastMonth {
    /// Point forecast.
    pub point: f64,
    /// Upper bound of the 80% range.
    pub upper80: Option<f64>,
    /// Upper bound of the 95% range.
    pub upper95: Option<f64>,
}

/// A series' forecast: consecutive months from `start`.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesForecast {
    /// First forecast month.
    pub start: YearMonth,
    /// One entry per month.
    pub months: Vec<ForecastMonth>,
}

impl SeriesForecast {
    /// Last forecast month (the start when empty).
    pub fn end(&self) -> YearMonth {
        self.start.plus(self.months.len() as i64 - 1)
    }
}

/// Which upper bound sizes the safety stock.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Level {
    /// The 80% range.
    P80,
    /// The 95% range.
    P95,
}

/// How the minimum and maximum for ordering are set.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Safety {
    /// Fixed months of AMC, from the stock file (`min_months`, `max_months`).
    Months,
    /// Safety stock from the forecast's upper bound (see the module docs).
    Upper(Level),
}

impl Safety {
    /// The name used on the command line and in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Safety::Months => "months",
            Safety::Upper(Level::P80) => "upper-80",
            Safety::Upper(Level::P95) => "upper-95",
        }
    }

    /// The rule in plain words.
    pub fn rule(self) -> String {
        match self {
            Safety::Months => "order when the projected stock at the end of the period an order covers is at or below min_months × AMC there; order up to max_months × AMC at arrival, and at least to the period's forecast consumption + that minimum, so the order clears the minimum it was placed for when consumption rises within the period".to_string(),
            Safety::Upper(l) => format!(
                "safety stock = sum over lead time + review period of ({} upper bound − point forecast), assuming the monthly errors move together; order when the projected stock at the end of the period an order covers is at or below it; order up to the period's forecast consumption + safety stock; the month flags (below-min, above-max) still compare months of stock with the stock file's min_months and max_months, so a wide range can order a product above its maximum",
                if l == Level::P80 { "80%" } else { "95%" }
            ),
        }
    }
}

/// Settings of the plan.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PlanSettings {
    /// Months of forecast averaged into the AMC.
    pub amc_months: usize,
    /// How the ordering minimum and maximum are set.
    pub safety: Safety,
}

impl Default for PlanSettings {
    fn default() -> Self {
        PlanSettings {
            amc_months: DEFAULT_AMC_MONTHS,
            safety: Safety::Months,
        }
    }
}

/// Default months in the AMC: three, as LMIS reports usually average
/// (common practice).
pub const DEFAULT_AMC_MONTHS: usize = 3;

/// Checked [`PlanSettings`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CheckedPlanSettings(PlanSettings);

impl PlanSettings {
    /// Checks the settings; the error names the bad value.
    pub fn check(self) -> Result<CheckedPlanSettings> {
        if !(1..=24).contains(&self.amc_months) {
            return Err(Error::setting(
                "amc-months",
                format!("must be 1-24 months, got {}", self.amc_months),
            ));
        }
        Ok(CheckedPlanSettings(self))
    }
}

impl CheckedPlanSettings {
    /// The settings.
    pub fn get(&self) -> &PlanSettings {
        &self.0
    }
}

/// A risk flag on a projected month.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Flag {
    /// Stock runs out: the closing stock is zero (quantity short given).
    Stockout,
    /// Months of stock below the emergency point.
    BelowEmergency,
    /// Months of stock below the minimum.
    BelowMin,
    /// Months of stock above the maximum.
    AboveMax,
    /// Months of stock above the shelf life: some stock may expire unused.
    ExpiryRisk,
}

impl Flag {
    /// The name written in `plan.csv`.
    pub fn name(self) -> &'static str {
        match self {
            Flag::Stockout => "stockout",
            Flag::BelowEmergency => "below-emergency",
            Flag::BelowMin => "below-min",
            Flag::AboveMax => "above-max",
            Flag::ExpiryRisk => "expiry-risk",
        }
    }
}

/// One projected month.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanMonth {
    /// The month.
    pub month: YearMonth,
    /// Stock at the start of the month.
    pub opening: f64,
    /// Forecast consumption.
    pub consumption: f64,
    /// Arrivals of shipments already on order.
    pub arrivals_on_order: f64,
    /// Arrivals of orders proposed by the plan.
    pub arrivals_planned: f64,
    /// Stock at the end of the month, never negative.
    pub closing: f64,
    /// Consumption the stock could not cover.
    pub short: f64,
    /// AMC at the end of the month.
    pub amc: f64,
    /// First and last forecast month averaged into `amc`.
    pub amc_months: (YearMonth, YearMonth),
    /// Closing stock ÷ AMC; `None` when the AMC is zero.
    pub months_of_stock: Option<f64>,
    /// Within the lead time of the first review: no new order can arrive.
    pub within_lead_time: bool,
    /// Risk flags, in [`Flag`] order.
    pub flags: Vec<Flag>,
    /// Quantity expected to expire: closing stock − AMC × shelf life, when
    /// positive and the shelf life is known (the stock the AMC cannot use
    /// before it expires, counting all of it as fresh; older stock expires
    /// sooner, so the real quantity is at least this). 0 otherwise.
    pub expiring: f64,
}

impl PlanMonth {
    /// Total arrivals.
    pub fn arrivals(&self) -> f64 {
        self.arrivals_on_order + self.arrivals_planned
    }
}

/// A proposed order.
#[derive(Debug, Clone, PartialEq)]
pub struct Order {
    /// Month the order is placed (a review month).
    pub order_month: YearMonth,
    /// Month it arrives: `order_month + lead time`.
    pub arrival_month: YearMonth,
    /// Last month it must cover (before the next order can arrive, or the
    /// end of the forecast).
    pub covers_to: YearMonth,
    /// Projected stock at the start of the arrival month without it
    /// (closing stock of the month before plus other arrivals that month).
    pub stock_at_arrival: f64,
    /// Projected stock at the end of `covers_to` without it.
    pub projected_without: f64,
    /// The minimum it was checked against, base units.
    pub minimum: f64,
    /// The level it orders up to, base units.
    pub order_up_to: f64,
    /// `order_up_to − stock_at_arrival`, before rounding to packs.
    pub needed: f64,
    /// Whole packs.
    pub packs: u64,
    /// `packs × pack size`.
    pub quantity: f64,
    /// `quantity × unit cost`.
    pub cost: f64,
}

/// The plan of one series.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesPlan {
    /// Projected months, from the month after the stock count to the end of
    /// the forecast.
    pub months: Vec<PlanMonth>,
    /// Proposed orders, in month order.
    pub orders: Vec<Order>,
    /// Shipments on order not used, each with the reason.
    pub ignored_arrivals: Vec<(Arrival, String)>,
    /// Forecast months before the first projected month (already past at
    /// the stock count), not used.
    pub skipped_forecast_months: usize,
}

impl SeriesPlan {
    /// Months with a projected stockout.
    pub fn stockout_months(&self) -> impl Iterator<Item = &PlanMonth> {
        self.months
            .iter()
            .filter(|m| m.flags.contains(&Flag::Stockout))
    }
}

/// Months of stock: stock ÷ AMC; `None` when the AMC is not positive
/// (USAID | DELIVER PROJECT, *The Logistics Handbook*, 2011, max–min
/// inventory control).
pub fn months_of_stock(stock: f64, amc: f64) -> Option<f64> {
    (amc > 0.0).then(|| stock / amc)
}

/// The max–min order quantity of the Handbook: `maximum stock quantity −
/// (stock on hand + stock on order)`, with maximum = `max_months × AMC`;
/// never below zero.
pub fn max_min_order_quantity(amc: f64, max_months: f64, on_hand: f64, on_order: f64) -> f64 {
    (max_months * amc - (on_hand + on_order)).max(0.0)
}

/// The WHO order quantity: `AMC × (lead time + procurement period) + safety
/// stock − (stock on hand + stock on order)`, never below zero.
pub fn who_order_quantity(
    amc: f64,
    lead_time: f64,
    procurement_period: f64,
    safety_stock: f64,
    on_hand: f64,
    on_order: f64,
) -> f64 {
    (amc * (lead_time + procurement_period) + safety_stock - (on_hand + on_order)).max(0.0)
}

/// Why a series cannot be planned.
#[derive(Debug, Clone, PartialEq)]
pub struct NotPlanned(pub String);

/// Projects stock and proposes orders for one series.
///
/// `arrivals` are the shipments on order for this series; those before the
/// first projected month (they should be in the stock on hand) or after the
/// forecast are returned in [`SeriesPlan::ignored_arrivals`].
pub fn plan_series(
    policy: &Policy,
    forecast: &SeriesForecast,
    arrivals: &[Arrival],
    settings: &CheckedPlanSettings,
) -> std::result::Result<SeriesPlan, NotPlanned> {
    let s = settings.get();
    let first = policy.stock_date.plus(1);
    if forecast.months.is_empty() {
        return Err(NotPlanned("the forecast has no month for it".into()));
    }
    if first < forecast.start {
        let gap = first.months_until(forecast.start);
        return Err(NotPlanned(format!(
            "the stock count ({}) is {gap} month(s) older than the month before the forecast starts ({}): consumption of {} to {} is not projected, so the stock at the start is unknown; give a stock count dated {} or later",
            policy.stock_date,
            forecast.start.plus(-1),
            first,
            forecast.start.plus(-1),
            forecast.start.plus(-1)
        )));
    }
    if first > forecast.end() {
        return Err(NotPlanned(format!(
            "the stock count ({}) is dated at or after the last forecast month ({}); nothing is left to project",
            policy.stock_date,
            forecast.end()
        )));
    }
    let skip = forecast.start.months_until(first) as usize;
    let fc = &forecast.months[skip..];
    let n = fc.len();
    let cons: Vec<f64> = fc.iter().map(|m| m.point.max(0.0)).collect();

    let mut on_order = vec![0.0; n];
    let mut ignored = Vec::new();
    for a in arrivals {
        let k = first.months_until(a.month);
        if k < 0 {
            ignored.push((
                *a,
                format!(
                    "expected {}, not after the stock count ({}): a shipment that has arrived should be in the stock on hand",
                    a.month, policy.stock_date
                ),
            ));
        } else if k as usize >= n {
            ignored.push((
                *a,
                format!(
                    "expected {}, after the last forecast month ({}): outside the projection",
                    a.month,
                    forecast.end()
                ),
            ));
        } else {
            on_order[k as usize] += a.quantity;
        }
    }

    let window = s.amc_months.min(n);
    // AMC from month index `t` on: mean of `window` months, shifted back
    // to end at the horizon when fewer remain.
    let amc_from = |t: usize| -> (f64, usize, usize) {
        let a = t.min(n - window);
        let sum: f64 = cons[a..a + window].iter().sum();
        (sum / window as f64, a, a + window - 1)
    };
    let simulate = |planned: &[f64]| -> (Vec<f64>, Vec<f64>) {
        let mut closing = Vec::with_capacity(n);
        let mut short = Vec::with_capacity(n);
        let mut stock = policy.stock_on_hand;
        for t in 0..n {
            let available = stock + on_order[t] + planned[t];
            let c = (available - cons[t]).max(0.0);
            short.push((cons[t] - available).max(0.0));
            closing.push(c);
            stock = c;
        }
        (closing, short)
    };

    let lead = policy.lead_time_months as usize;
    let review = policy.review_period_months.max(1) as usize;
    let mut planned = vec![0.0; n];
    let mut orders = Vec::new();
    let mut review_at = 0usize;
    while review_at + lead < n {
        let arrive = review_at + lead;
        let end = (arrive + review - 1).min(n - 1);
        let (closing, _) = simulate(&planned);
        let (minimum, order_up_to) = match s.safety {
            Safety::Months => {
                // The minimum is in months of the AMC at the period's end,
                // the maximum of the AMC at arrival: with consumption
                // rising in between (a seasonal peak) the maximum alone
                // could fall short of what keeps the stock at the minimum.
                let minimum = policy.min_months * amc_from(end + 1).0;
                let period: f64 = cons[arrive..=end].iter().sum();
                let maximum = policy.max_months * amc_from(arrive).0;
                (minimum, maximum.max(minimum + period))
            }
            Safety::Upper(level) => {
                let ss: f64 = fc[review_at..=end]
                    .iter()
                    .map(|m| {
                        let u = match level {
                            Level::P80 => m.upper80,
                            Level::P95 => m.upper95,
                        };
                        (u.unwrap_or(m.point) - m.point).max(0.0)
                    })
                    .sum();
                let period: f64 = cons[arrive..=end].iter().sum();
                (ss, period + ss)
            }
        };
        let projected = closing[end];
        if projected <= minimum {
            let before = if arrive == 0 {
                policy.stock_on_hand
            } else {
                closing[arrive - 1]
            };
            let at_arrival = before + on_order[arrive] + planned[arrive];
            let needed = order_up_to - at_arrival;
            if needed > 0.0 {
                // A small tolerance keeps 2,500 / 500 at 5 packs despite
                // rounding in the sums.
                let packs = (needed / policy.pack_size - 1e-9).ceil().max(1.0) as u64;
                let quantity = packs as f64 * policy.pack_size;
                planned[arrive] += quantity;
                orders.push(Order {
                    order_month: first.plus(review_at as i64),
                    arrival_month: first.plus(arrive as i64),
                    covers_to: first.plus(end as i64),
                    stock_at_arrival: at_arrival,
                    projected_without: projected,
                    minimum,
                    order_up_to,
                    needed,
                    packs,
                    quantity,
                    cost: quantity * policy.unit_cost,
                });
            }
        }
        review_at += review;
    }

    let (closing, short) = simulate(&planned);
    let mut months = Vec::with_capacity(n);
    let mut opening = policy.stock_on_hand;
    for t in 0..n {
        let (amc, a, z) = amc_from(t + 1);
        let mos = months_of_stock(closing[t], amc);
        let mut flags = Vec::new();
        if short[t] > 0.0 || (closing[t] <= 0.0 && cons[t] > 0.0) {
            flags.push(Flag::Stockout);
        }
        if let Some(m) = mos {
            if policy.emergency_months.is_some_and(|e| m < e) {
                flags.push(Flag::BelowEmergency);
            }
            if m < policy.min_months {
                flags.push(Flag::BelowMin);
            }
            if m > policy.max_months {
                flags.push(Flag::AboveMax);
            }
            if policy.shelf_life_months.is_some_and(|l| m > l) {
                flags.push(Flag::ExpiryRisk);
            }
        } else if closing[t] > 0.0 {
            // Stock with no consumption ahead (a phase-out): every unit is
            // beyond the maximum, and with a shelf life it will expire.
            flags.push(Flag::AboveMax);
            if policy.shelf_life_months.is_some() {
                flags.push(Flag::ExpiryRisk);
            }
        }
        let expiring = policy
            .shelf_life_months
            .map_or(0.0, |l| expiring_quantity(closing[t], amc, l));
        months.push(PlanMonth {
            expiring,
            month: first.plus(t as i64),
            opening,
            consumption: cons[t],
            arrivals_on_order: on_order[t],
            arrivals_planned: planned[t],
            closing: closing[t],
            short: short[t],
            amc,
            amc_months: (first.plus(a as i64), first.plus(z as i64)),
            months_of_stock: mos,
            within_lead_time: t < lead,
            flags,
        });
        opening = closing[t];
    }
    Ok(SeriesPlan {
        months,
        orders,
        ignored_arrivals: ignored,
        skipped_forecast_months: skip,
    })
}

/// Quantity expected to expire from `closing` stock with a shelf life of
/// `shelf_life_months` at a use of `amc` a month: `max(0, closing − amc ×
/// shelf life)`, the stock the AMC cannot use before it expires (all of
/// it counted as fresh, so a lower bound). Common practice: the same
/// comparison of months of stock with the shelf life as the
/// [`Flag::ExpiryRisk`] flag, in units.
pub fn expiring_quantity(closing: f64, amc: f64, shelf_life_months: f64) -> f64 {
    (closing - amc * shelf_life_months).max(0.0)
}

/// The safety margin [`minimum_below_lead_time`] asks of the minimum on
/// top of the lead time, in months (common practice: a minimum stock of
/// lead-time stock plus safety stock; one month of safety is a rule of
/// thumb, not a standard).
pub const MIN_SAFETY_MARGIN_MONTHS: f64 = 1.0;

/// When the policy's minimum is below the lead time plus
/// [`MIN_SAFETY_MARGIN_MONTHS`], says why that is risky. An order is
/// placed when the stock falls to the minimum and arrives a lead time
/// later; with a minimum below the lead time (plus a margin for demand
/// above the forecast and late deliveries) the stock runs down to nearly
/// nothing, or out, before each arrival. Common practice: minimum stock =
/// lead-time stock + safety stock (max–min inventory control).
pub fn minimum_below_lead_time(policy: &Policy) -> Option<String> {
    let wanted = f64::from(policy.lead_time_months) + MIN_SAFETY_MARGIN_MONTHS;
    (policy.min_months < wanted).then(|| {
        format!(
            "min_months {} is below the lead time ({} months) plus a safety margin of {} month: an order placed when the stock reaches the minimum arrives {} months later, leaving {} months of stock or less for demand above the forecast and late deliveries; rule of thumb (common practice, not a standard): min_months at least lead_time_months + {}",
            policy.min_months,
            policy.lead_time_months,
            MIN_SAFETY_MARGIN_MONTHS,
            policy.lead_time_months,
            crate::output::fmt_num((policy.min_months - f64::from(policy.lead_time_months)).max(0.0)),
            MIN_SAFETY_MARGIN_MONTHS,
        )
    })
}

/// Why a policy's maximum cannot last a review period above its minimum:
/// `max_months` below `min_months + review_period_months`. Common practice
/// (max–min inventory control, as The Logistics Handbook, USAID | DELIVER
/// PROJECT 2011, sets it; from memory): maximum = minimum + review period.
pub fn maximum_below_minimum_plus_review(policy: &Policy) -> Option<String> {
    let wanted = policy.min_months + f64::from(policy.review_period_months);
    (policy.max_months < wanted).then(|| {
        format!(
            "max_months {} is below min_months {} + review_period_months {}: stock brought up to the maximum falls below the minimum before the next order can arrive, so orders bring it up to the minimum plus the period's consumption instead, above the maximum (flagged above-max); common practice: max_months = min_months + review_period_months",
            crate::output::fmt_num(policy.max_months),
            crate::output::fmt_num(policy.min_months),
            policy.review_period_months,
        )
    })
}

/// A planned series with what it was planned from.
#[derive(Debug, Clone, PartialEq)]
pub struct PlannedSeries {
    /// Product.
    pub product: String,
    /// Site, when planned per site.
    pub site: Option<String>,
    /// Its policy (the stock file row).
    pub policy: Policy,
    /// The plan.
    pub plan: SeriesPlan,
}

/// An entry of the plan's log: a row or series not used as given.
#[derive(Debug, Clone, PartialEq)]
pub struct LogEntry {
    /// File the row came from (empty for the forecast's own series).
    pub file: String,
    /// Line in that file, when a row is involved.
    pub line: Option<u64>,
    /// Product.
    pub product: String,
    /// Site, when given.
    pub site: Option<String>,
    /// What was done: `not planned`, `ignored`, `note`.
    pub action: &'static str,
    /// Why, in plain words.
    pub reason: String,
}

/// Order totals of one series and calendar year of ordering.
#[derive(Debug, Clone, PartialEq)]
pub struct YearTotal {
    /// Calendar year of the order month; `None` for all years.
    pub year: Option<i32>,
    /// Orders.
    pub orders: usize,
    /// Quantity, base units.
    pub quantity: f64,
    /// Packs.
    pub packs: u64,
    /// Cost.
    pub cost: f64,
}

/// Totals of a series' orders per calendar year of ordering, then for all years.
pub fn year_totals(orders: &[Order]) -> Vec<YearTotal> {
    let mut by_year: std::collections::BTreeMap<i32, YearTotal> = Default::default();
    let mut all = YearTotal {
        year: None,
        orders: 0,
        quantity: 0.0,
        packs: 0,
        cost: 0.0,
    };
    for o in orders {
        let y = o.order_month.year();
        let t = by_year.entry(y).or_insert(YearTotal {
            year: Some(y),
            orders: 0,
            quantity: 0.0,
            packs: 0,
            cost: 0.0,
        });
        for t in [t, &mut all] {
            t.orders += 1;
            t.quantity += o.quantity;
            t.packs += o.packs;
            t.cost += o.cost;
        }
    }
    let mut out: Vec<YearTotal> = by_year.into_values().collect();
    out.push(all);
    out
}
