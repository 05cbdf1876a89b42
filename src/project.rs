//! The projection: refit the chosen model on the whole cleaned history and
//! forecast 1–60 months with 80% and 95% intervals, clipped at zero.

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
    /// First projected month.
    pub start: YearMonth,
    /// Point forecasts and intervals.
    pub forecast: Forecast,
    /// Average monthly consumption over the next 12 projected months (or
    /// fewer when the horizon is shorter).
    pub amc_next: f64,
    /// Average monthly consumption over the last 12 cleaned months.
    pub amc_last: f64,
    /// Projected total per 12-month block (months 1–12, 13–24, ...); a
    /// last partial block is included.
    pub totals: Vec<f64>,
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
/// and projects `horizon` months after `last`, the last month of history.
pub fn project(
    y: &[f64],
    last: YearMonth,
    name: &str,
    models: &[&dyn AnyModel],
    horizon: usize,
) -> Result<Projection> {
    let mut fcs = Vec::with_capacity(models.len());
    for m in models {
        fcs.push(m.fit_any(y)?.forecast(horizon, &LEVELS)?);
    }
    let refs: Vec<&Forecast> = fcs.iter().collect();
    let forecast = mean_forecast(&refs).ok_or_else(|| Error::Model {
        model: name.to_string(),
        message: "no model to project with".to_string(),
    })?;
    let next = &forecast.point[..forecast.point.len().min(12)];
    let amc_next = next.iter().sum::<f64>() / next.len().max(1) as f64;
    let tail = &y[y.len().saturating_sub(12)..];
    let amc_last = tail.iter().sum::<f64>() / tail.len().max(1) as f64;
    let totals = forecast.point.chunks(12).map(|c| c.iter().sum()).collect();
    Ok(Projection {
        model: name.to_string(),
        members: if models.len() > 1 {
            models.iter().map(|m| m.name()).collect()
        } else {
            Vec::new()
        },
        start: last.plus(1),
        forecast,
        amc_next,
        amc_last,
        totals,
    })
}
