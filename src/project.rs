//! The projection: refit the chosen model on the whole cleaned history and
//! forecast 1–60 months with 80% and 95% intervals, clipped at zero.
//!
//! Every product's projection starts at the same month, the month after
//! the last month of the data set (the *common start*). A product whose
//! last month is earlier is forecast through the months in between as
//! well; those months are *bridged*: written out and marked, but outside
//! the horizon, the AMC and the totals, so every product's figures cover
//! the same calendar months.

use crate::backtest::{mean_forecast, LEVELS};
use crate::calendar::YearMonth;
use crate::error::{Error, Result};
use crate::models::{AnyModel, Forecast};

/// Longest projection allowed, in months.
pub const MAX_HORIZON: usize = 60;

/// A product's projection.
#[derive(Debug, Clone, PartialEq)]
pub struct Projection {
    /// Model used (or `combination` with its members).
    pub model: String,
    /// Members when the model is the combination.
    pub members: Vec<String>,
    /// First forecast month (the month after the product's last month):
    /// the first bridged month when there are any, else the common start.
    pub start: YearMonth,
    /// Months forecast between the product's last month and the common
    /// start (0 when the product reported up to the data set's last month).
    pub bridged: usize,
    /// Point forecasts and intervals, bridged months first.
    pub forecast: Forecast,
    /// Average monthly consumption over the first 12 months from the
    /// common start (or fewer when the horizon is shorter).
    pub amc_next: f64,
    /// Average monthly consumption over the last 12 cleaned months.
    pub amc_last: f64,
    /// Projected total per 12-month block from the common start (months
    /// 1–12, 13–24, ...); a last partial block is included.
    pub totals: Vec<f64>,
}

impl Projection {
    /// The common start: the first month of the horizon.
    pub fn horizon_start(&self) -> YearMonth {
        self.start.plus(self.bridged as i64)
    }

    /// Whether forecast month `k` (0 = [`Projection::start`]) is bridged.
    pub fn is_bridged(&self, k: usize) -> bool {
        k < self.bridged
    }
}

/// Default for the longest silence (months between a product's last month
/// and the data set's last month) projected without a warning.
pub const DEFAULT_SILENCE_LIMIT: usize = 6;

/// Longest silence limit accepted, in months.
pub const MAX_SILENCE_LIMIT: usize = 120;

/// Checks a silence limit (months).
pub fn check_silence_limit(months: usize) -> Result<usize> {
    if months <= MAX_SILENCE_LIMIT {
        Ok(months)
    } else {
        Err(Error::setting(
            "silence-limit",
            format!("must be 0-{MAX_SILENCE_LIMIT} months, got {months}"),
        ))
    }
}

/// The warning for a product whose last month is more than `limit` months
/// before the data set's last month `end`; `None` otherwise.
pub fn silence_warning(
    product: &str,
    last: YearMonth,
    end: YearMonth,
    limit: usize,
) -> Option<String> {
    let gap = last.months_until(end);
    (gap > limit as i64).then(|| {
        format!(
            "product '{product}': possibly discontinued: last month {last} is {gap} months before the data set's last month {end} (limit {limit}); its projection bridges those months from old data; check whether it is still supplied"
        )
    })
}

/// Checks a projection horizon.
pub fn check_horizon(h: usize) -> Result<usize> {
    if (1..=MAX_HORIZON).contains(&h) {
        Ok(h)
    } else {
        Err(Error::setting(
            "horizon",
            format!("must be 1-{MAX_HORIZON} months, got {h}"),
        ))
    }
}

/// Fits `models` (one, or the members of a combination) on the whole series
/// whose last month is `last`, and projects `horizon` months after `end`,
/// the data set's last month; the months from `last` to `end` are bridged
/// (an `end` before `last` counts as `last`).
pub fn project(
    y: &[f64],
    last: YearMonth,
    end: YearMonth,
    name: &str,
    models: &[&dyn AnyModel],
    horizon: usize,
) -> Result<Projection> {
    project_with(y, last, end, name, models, horizon, None)
}

/// Forecasts of models fitted on one product's whole history, kept so that
/// projecting it under a second default (see [`crate::default_rule`])
/// does not fit a model twice. Only successful fits are kept (a failure is
/// met again, with its own message).
#[derive(Debug, Default)]
pub struct FitCache {
    fits: std::cell::RefCell<Vec<(String, usize, Forecast)>>,
}

impl FitCache {
    fn forecast(&self, m: &dyn AnyModel, y: &[f64], h: usize) -> Result<Forecast> {
        let name = m.name();
        if let Some((_, _, f)) = self
            .fits
            .borrow()
            .iter()
            .find(|(n, k, _)| *n == name && *k == h)
        {
            return Ok(f.clone());
        }
        let f = m.fit_any(y).and_then(|f| f.forecast(h, &LEVELS))?;
        self.fits.borrow_mut().push((name, h, f.clone()));
        Ok(f)
    }
}

/// [`project`], reusing the fits kept in `cache` when given.
pub fn project_with(
    y: &[f64],
    last: YearMonth,
    end: YearMonth,
    name: &str,
    models: &[&dyn AnyModel],
    horizon: usize,
    cache: Option<&FitCache>,
) -> Result<Projection> {
    let bridged = last.months_until(end).max(0) as usize;
    let mut fcs = Vec::with_capacity(models.len());
    let mut used = Vec::with_capacity(models.len());
    let mut first_err = None;
    for m in models {
        let fitted = match cache {
            Some(c) => c.forecast(*m, y, bridged + horizon),
            None => m
                .fit_any(y)
                .and_then(|f| f.forecast(bridged + horizon, &LEVELS)),
        };
        match fitted {
            Ok(f) => {
                fcs.push(f);
                used.push(m.name());
            }
            // A combination goes on without a member that fails, as long
            // as it keeps enough members; a single model cannot.
            Err(e) if models.len() == 1 => return Err(e),
            Err(e) => {
                first_err.get_or_insert(e);
            }
        }
    }
    if models.len() > 1 && fcs.len() < crate::backtest::COMBINATION_MIN_MEMBERS {
        return Err(first_err.unwrap_or_else(|| Error::Model {
            model: name.to_string(),
            message: "too few members to combine".to_string(),
        }));
    }
    let refs: Vec<&Forecast> = fcs.iter().collect();
    let forecast = mean_forecast(&refs).ok_or_else(|| Error::Model {
        model: name.to_string(),
        message: "no model to project with".to_string(),
    })?;
    let ahead = &forecast.point[bridged.min(forecast.point.len())..];
    let next = &ahead[..ahead.len().min(12)];
    let amc_next = next.iter().sum::<f64>() / next.len().max(1) as f64;
    let tail = &y[y.len().saturating_sub(12)..];
    let amc_last = tail.iter().sum::<f64>() / tail.len().max(1) as f64;
    // Whole years only: a partial sum under a 12-month label would read as
    // a year's need.
    let totals = ahead.chunks_exact(12).map(|c| c.iter().sum()).collect();
    Ok(Projection {
        model: name.to_string(),
        members: if models.len() > 1 { used } else { Vec::new() },
        start: last.plus(1),
        bridged,
        forecast,
        amc_next,
        amc_last,
        totals,
    })
}
