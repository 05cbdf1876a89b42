//! Forecast accuracy scores: MAPE, bias, WAPE, MASE, RMSE and interval
//! coverage. All take paired actuals and forecasts; none panics on empty or
//! zero input (a score that cannot be computed is `None`).
//!
//! Sign convention: **bias > 0 means over-forecast** (forecasts above actuals).

/// Mean absolute percentage error, in percent, over months with a non-zero
/// actual; also returns how many zero-actual months were left out.
/// `None` when every actual is zero.
pub fn mape(actual: &[f64], forecast: &[f64]) -> (Option<f64>, usize) {
    let mut sum = 0.0;
    let mut n = 0usize;
    let mut zeros = 0usize;
    for (&a, &f) in actual.iter().zip(forecast) {
        if a == 0.0 {
            zeros += 1;
        } else {
            sum += ((f - a) / a).abs();
            n += 1;
        }
    }
    ((n > 0).then(|| 100.0 * sum / n as f64), zeros)
}

/// Bias as a percentage of actual volume: 100 × Σ(forecast − actual) ÷
/// Σ actual. Positive = over-forecast. `None` when the actuals sum to zero.
pub fn bias(actual: &[f64], forecast: &[f64]) -> Option<f64> {
    let total: f64 = actual.iter().sum();
    let err: f64 = actual.iter().zip(forecast).map(|(a, f)| f - a).sum();
    (total != 0.0).then(|| 100.0 * err / total)
}

/// Weighted absolute percentage error, in percent: 100 × Σ|forecast −
/// actual| ÷ Σ|actual| (Kolassa & Schütz, *Foresight* 6, 2007). `None` when
/// the actuals sum to zero.
pub fn wape(actual: &[f64], forecast: &[f64]) -> Option<f64> {
    let total: f64 = actual.iter().map(|a| a.abs()).sum();
    let err: f64 = actual
        .iter()
        .zip(forecast)
        .map(|(a, f)| (f - a).abs())
        .sum();
    (total != 0.0).then(|| 100.0 * err / total)
}

/// Root mean squared error. `None` when empty.
pub fn rmse(actual: &[f64], forecast: &[f64]) -> Option<f64> {
    let n = actual.len().min(forecast.len());
    (n > 0).then(|| {
        let s: f64 = actual
            .iter()
            .zip(forecast)
            .map(|(a, f)| (f - a).powi(2))
            .sum();
        (s / n as f64).sqrt()
    })
}

/// In-sample MAE of the seasonal naive forecast (lag `period`) on a
/// training window: the MASE scale of Hyndman & Koehler (IJF 22(4), 2006).
/// Falls back to lag 1 when the window is not longer than one period.
/// `None` when the window is too short or the scale is zero.
pub fn mase_scale(train: &[f64], period: usize) -> Option<f64> {
    let lag = if train.len() > period { period } else { 1 };
    if train.len() <= lag {
        return None;
    }
    let s: f64 = train.windows(lag + 1).map(|w| (w[lag] - w[0]).abs()).sum();
    let scale = s / (train.len() - lag) as f64;
    (scale > 0.0).then_some(scale)
}

/// Mean absolute scaled error: mean |forecast − actual| ÷ `scale`.
pub fn mase(actual: &[f64], forecast: &[f64], scale: f64) -> Option<f64> {
    let n = actual.len().min(forecast.len());
    (n > 0 && scale > 0.0).then(|| {
        let s: f64 = actual
            .iter()
            .zip(forecast)
            .map(|(a, f)| (f - a).abs())
            .sum();
        s / n as f64 / scale
    })
}

/// Share of actuals inside [lower, upper], in percent. `None` when empty.
pub fn coverage(actual: &[f64], lower: &[f64], upper: &[f64]) -> Option<f64> {
    let n = actual.len().min(lower.len()).min(upper.len());
    (n > 0).then(|| {
        let inside = (0..n)
            .filter(|&i| actual[i] >= lower[i] && actual[i] <= upper[i])
            .count();
        100.0 * inside as f64 / n as f64
    })
}

/// The scores a model can be selected by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Score {
    /// Mean absolute percentage error.
    Mape,
    /// Weighted absolute percentage error.
    Wape,
    /// Mean absolute scaled error.
    Mase,
    /// Root mean squared error.
    Rmse,
}

impl Score {
    /// Name as written in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Score::Mape => "MAPE",
            Score::Wape => "WAPE",
            Score::Mase => "MASE",
            Score::Rmse => "RMSE",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wape_worked_example() {
        // Kolassa & Schütz, Foresight 6 (2007): actuals (100, 0, 50),
        // forecasts (90, 10, 60) → WAPE 0.20.
        let w = wape(&[100.0, 0.0, 50.0], &[90.0, 10.0, 60.0]).unwrap();
        assert!((w - 20.0).abs() < 1e-12);
    }

    #[test]
    fn mape_leaves_out_zero_actuals_and_counts_them() {
        let (m, zeros) = mape(&[100.0, 0.0, 50.0], &[90.0, 10.0, 60.0]);
        assert!((m.unwrap() - 15.0).abs() < 1e-12); // (10% + 20%) / 2
        assert_eq!(zeros, 1);
        assert_eq!(mape(&[0.0], &[1.0]), (None, 1));
    }

    #[test]
    fn bias_sign_positive_is_over_forecast() {
        assert!((bias(&[100.0, 100.0], &[110.0, 120.0]).unwrap() - 15.0).abs() < 1e-12);
        assert!(bias(&[100.0], &[80.0]).unwrap() < 0.0);
        assert_eq!(bias(&[0.0], &[1.0]), None);
    }

    #[test]
    fn mase_hyndman_koehler() {
        // Hyndman & Koehler (2006): scale = in-sample MAE of the (seasonal)
        // naive method. Lag-1 on (1, 3, 2, 4): |2|+|1|+|2| over 3 = 5/3.
        let s = mase_scale(&[1.0, 3.0, 2.0, 4.0], 12).unwrap();
        assert!((s - 5.0 / 3.0).abs() < 1e-12);
        // Seasonal lag 12 on 24 months rising by 1 a month: every diff is 12.
        let y: Vec<f64> = (0..24).map(|t| t as f64).collect();
        assert_eq!(mase_scale(&y, 12), Some(12.0));
        assert!((mase(&[10.0], &[16.0], 12.0).unwrap() - 0.5).abs() < 1e-12);
        assert_eq!(mase_scale(&[5.0; 30], 12), None);
    }

    #[test]
    fn rmse_and_coverage() {
        assert!((rmse(&[1.0, 2.0], &[2.0, 4.0]).unwrap() - (2.5f64).sqrt()).abs() < 1e-12);
        let c = coverage(
            &[1.0, 5.0, 9.0, 3.0],
            &[0.0, 0.0, 0.0, 4.0],
            &[2.0, 6.0, 8.0, 6.0],
        )
        .unwrap();
        assert_eq!(c, 50.0);
    }
}
