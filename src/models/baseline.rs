//! Baseline models: moving average, naive and seasonal naive.
//!
//! They are the yardsticks every other candidate must beat in the backtest,
//! and often the honest choice for short or flat series.

use super::{Fitted, Forecast, Model, Needs, PERIOD};
use crate::error::{Error, Result};

/// Moving average: the mean of the last `n` months, flat over the horizon.
///
/// Formula: `ŷ(h) = (y[N−n+1] + … + y[N]) / n` for every horizon h.
///
/// Interval: normal approximation `ŷ ± z·σ_h` with
/// `σ_h = σ₁·√((h + c_n) / (1 + c_n))`, `c_n = (n−1)(2n−1)/(6n)`, where
/// `σ₁` is the root mean square of the one-step errors
/// `e_t = y_t − mean(y[t−n..t−1])` over the history (no degrees-of-freedom
/// correction, as statsforecast does for its naive models). Why this
/// scaling: if the underlying level moves as a random walk, an n-month
/// average forecast made h months ahead has error variance
/// `σ²(h + c_n)` (h steps of level change plus the lag of the window
/// behind the last month), so the ratio to the one-step variance is exact
/// under that assumption; for `n = 1` it is the naive `√h`. On a stable
/// series it over-states the spread at long horizons, which errs on the
/// side of wider ranges for stock planning.
///
/// Reference: the window average of statsforecast 2.1.1 (`WindowAverage`)
/// gives the same point forecast; it has no built-in interval.
///
/// | parameter | default | range |
/// |---|---|---|
/// | `window` (n) | 3, 6, 12 as candidates | 1 or more months |
/// | σ₁ (estimated) | — | ≥ 0 |
///
/// Needs `n + 3` months so the spread rests on at least three errors.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MovingAverage {
    window: usize,
}

impl MovingAverage {
    /// A moving average over the last `window` months.
    pub fn new(window: usize) -> Result<Self> {
        if window == 0 {
            return Err(Error::setting(
                "window",
                "window must be at least 1 month, got 0",
            ));
        }
        Ok(Self { window })
    }

    /// Months averaged.
    pub fn window(&self) -> usize {
        self.window
    }

    /// The candidate windows: 3, 6 and 12 months.
    pub fn candidates() -> [Self; 3] {
        [3, 6, 12].map(|window| Self { window })
    }
}

/// A fitted moving average.
#[derive(Debug, Clone, PartialEq)]
pub struct MovingAverageFit {
    window: usize,
    level: f64,
    sigma: f64,
    sse: f64,
}

impl Model for MovingAverage {
    type Fitted = MovingAverageFit;

    fn name(&self) -> String {
        format!("moving-average-{}", self.window)
    }

    fn description(&self) -> String {
        format!(
            "mean of the last {} months, flat; range from past {}-month-average errors",
            self.window, self.window
        )
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: self.window + 3,
            positive: false,
            seasonal: false,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<MovingAverageFit> {
        self.needs().check(&Model::name(self), y)?;
        let n = self.window;
        let inv = 1.0 / n as f64;
        // The windows are short, so each mean is summed afresh: a running
        // sum would carry rounding drift over long, large-valued series.
        let mut sse = 0.0;
        for t in n..y.len() {
            let mean = y[t - n..t].iter().sum::<f64>() * inv;
            let e = y[t] - mean;
            sse += e * e;
        }
        let count = (y.len() - n) as f64;
        Ok(MovingAverageFit {
            window: n,
            level: y[y.len() - n..].iter().sum::<f64>() * inv,
            sigma: (sse / count).sqrt(),
            sse,
        })
    }
}

impl MovingAverageFit {
    /// `c_n` of the horizon scaling (see [`MovingAverage`]).
    fn window_lag_variance(&self) -> f64 {
        let n = self.window as f64;
        (n - 1.0) * (2.0 * n - 1.0) / (6.0 * n)
    }
}

impl Fitted for MovingAverageFit {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let c = self.window_lag_variance();
        let sd: Vec<f64> = (1..=horizon)
            .map(|h| self.sigma * ((h as f64 + c) / (1.0 + c)).sqrt())
            .collect();
        Forecast::normal(vec![self.level; horizon], &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        vec![
            ("window".to_string(), self.window as f64),
            ("level".to_string(), self.level),
            ("sigma".to_string(), self.sigma),
        ]
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

/// Naive: the last month carried forward.
///
/// Formula: `ŷ(h) = y[N]`; interval `ŷ ± z·σ·√h` with
/// `σ = √(mean((y_t − y_{t−1})²))` over the history (no degrees-of-freedom
/// correction).
///
/// Reference: statsforecast 2.1.1 `Naive` (same point and interval
/// formula; checked in `tests/reference_baseline.rs`).
///
/// | parameter | default | range |
/// |---|---|---|
/// | σ (estimated) | — | ≥ 0 |
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Naive;

/// A fitted naive model.
#[derive(Debug, Clone, PartialEq)]
pub struct NaiveFit {
    last: f64,
    sigma: f64,
    sse: f64,
}

impl Model for Naive {
    type Fitted = NaiveFit;

    fn name(&self) -> String {
        "naive".to_string()
    }

    fn description(&self) -> String {
        "last month carried forward; range widens with the square root of the horizon".to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: 2,
            positive: false,
            seasonal: false,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<NaiveFit> {
        self.needs().check(&Model::name(self), y)?;
        let (sigma, sse) = lagged_rms(y, 1);
        Ok(NaiveFit {
            last: y[y.len() - 1],
            sigma,
            sse,
        })
    }
}

impl Fitted for NaiveFit {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let sd: Vec<f64> = (1..=horizon)
            .map(|h| self.sigma * (h as f64).sqrt())
            .collect();
        Forecast::normal(vec![self.last; horizon], &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        vec![
            ("last".to_string(), self.last),
            ("sigma".to_string(), self.sigma),
        ]
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

/// Seasonal naive (period 12): the same month of the last year.
///
/// Formula: `ŷ(h) = y[N − 12 + ((h−1) mod 12) + 1]`; interval
/// `ŷ ± z·σ·√k` with `k = ⌊(h−1)/12⌋ + 1` (whole years ahead) and
/// `σ = √(mean((y_t − y_{t−12})²))` over the history (no
/// degrees-of-freedom correction).
///
/// Reference: statsforecast 2.1.1 `SeasonalNaive(season_length=12)` (same
/// point and interval formula; checked in `tests/reference_baseline.rs`).
///
/// | parameter | default | range |
/// |---|---|---|
/// | period | 12 | fixed (monthly data) |
/// | σ (estimated) | — | ≥ 0 |
///
/// Needs two full years, so σ rests on twelve year-on-year differences.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct SeasonalNaive;

/// A fitted seasonal naive model.
#[derive(Debug, Clone, PartialEq)]
pub struct SeasonalNaiveFit {
    last_year: [f64; PERIOD],
    sigma: f64,
    sse: f64,
}

impl Model for SeasonalNaive {
    type Fitted = SeasonalNaiveFit;

    fn name(&self) -> String {
        "seasonal-naive".to_string()
    }

    fn description(&self) -> String {
        "same month of the last year; range from year-on-year changes".to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: 2 * PERIOD,
            positive: false,
            seasonal: true,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<SeasonalNaiveFit> {
        self.needs().check(&Model::name(self), y)?;
        let mut last_year = [0.0; PERIOD];
        last_year.copy_from_slice(&y[y.len() - PERIOD..]);
        let (sigma, sse) = lagged_rms(y, PERIOD);
        Ok(SeasonalNaiveFit {
            last_year,
            sigma,
            sse,
        })
    }
}

impl Fitted for SeasonalNaiveFit {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let point = (0..horizon).map(|i| self.last_year[i % PERIOD]).collect();
        let sd: Vec<f64> = (0..horizon)
            .map(|i| self.sigma * ((i / PERIOD + 1) as f64).sqrt())
            .collect();
        Forecast::normal(point, &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        vec![("sigma".to_string(), self.sigma)]
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

/// Root mean square and sum of squares of `y_t − y_{t−lag}`; the caller
/// guarantees `y.len() > lag`.
fn lagged_rms(y: &[f64], lag: usize) -> (f64, f64) {
    let sse: f64 = y
        .windows(lag + 1)
        .map(|w| {
            let d = w[lag] - w[0];
            d * d
        })
        .sum();
    ((sse / (y.len() - lag) as f64).sqrt(), sse)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn window_zero_is_refused_with_the_value() {
        let e = MovingAverage::new(0).unwrap_err().to_string();
        assert!(e.contains("at least 1") && e.contains("got 0"), "{e}");
    }

    // A one-month window is the naive model, so the horizon scaling must
    // reduce to statsforecast's naive √h (statsforecast 2.1.1 `Naive`
    // interval formula, see tests/reference/README.md).
    #[test]
    fn one_month_window_equals_naive() {
        let y = [3.0, 7.0, 4.0, 9.0, 12.0, 8.0, 10.0];
        let ma = MovingAverage::new(1).unwrap().fit(&y).unwrap();
        let nv = Naive.fit(&y).unwrap();
        let a = ma.forecast(6, &[0.8, 0.95]).unwrap();
        let b = nv.forecast(6, &[0.8, 0.95]).unwrap();
        for (x, z) in a.intervals.iter().zip(&b.intervals) {
            for h in 0..6 {
                assert!((x.upper[h] - z.upper[h]).abs() < 1e-12);
                assert!((x.lower[h] - z.lower[h]).abs() < 1e-12);
            }
        }
        assert_eq!(a.point, b.point);
    }

    // Hand-worked: y = 1..=8, window 3. Every one-step error is
    // y_t − (y_t − 2) = 2, so σ₁ = 2; c_3 = 2·5/18 = 5/9.
    #[test]
    fn moving_average_by_hand() {
        let y: Vec<f64> = (1..=8).map(f64::from).collect();
        let fit = MovingAverage::new(3).unwrap().fit(&y).unwrap();
        let f = fit.forecast(2, &[0.95]).unwrap();
        assert!((f.point[0] - 7.0).abs() < 1e-12);
        let z = crate::models::z_for_level(0.95).unwrap();
        let c: f64 = 5.0 / 9.0;
        let sd2 = 2.0 * ((2.0 + c) / (1.0 + c)).sqrt();
        assert!((f.intervals[0].upper[0] - (7.0 + z * 2.0)).abs() < 1e-9);
        assert!((f.intervals[0].upper[1] - (7.0 + z * sd2)).abs() < 1e-9);
        assert_eq!(fit.sse(), Some(4.0 * 5.0));
    }

    #[test]
    fn seasonal_naive_repeats_last_year_and_widens_each_year() {
        let y: Vec<f64> = (0..30).map(|t| (t % 12) as f64 * 10.0 + t as f64).collect();
        let f = SeasonalNaive.fit(&y).unwrap().forecast(25, &[0.8]).unwrap();
        assert_eq!(f.point[0], y[18]);
        assert_eq!(f.point[12], y[18]);
        assert_eq!(f.point[24], y[18]);
        // Every year-on-year change is 12, so σ = 12.
        let w = |h: usize| f.intervals[0].upper[h] - f.point[h];
        assert!((w(11) - w(0)).abs() < 1e-9);
        assert!((w(12) / w(0) - 2f64.sqrt()).abs() < 1e-9);
        assert!((w(24) / w(0) - 3f64.sqrt()).abs() < 1e-9);
    }

    #[test]
    fn too_short_series_say_why() {
        let e = SeasonalNaive.fit(&[1.0; 23]).unwrap_err().to_string();
        assert!(e.contains("at least 24"), "{e}");
        let e = MovingAverage::new(6)
            .unwrap()
            .fit(&[1.0; 8])
            .unwrap_err()
            .to_string();
        assert!(e.contains("at least 9"), "{e}");
    }
}
