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

/// A p-value as text after "p": "= 0.019", or "< 0.001" where three
/// decimals would print 0.000 (common practice in reporting tests).
pub fn fmt_p(p: f64) -> String {
    if p < 0.001 {
        "< 0.001".to_string()
    } else {
        format!("= {p:.3}")
    }
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

/// Scale of the root mean squared scaled error (RMSSE) of the M5
/// competition (Makridakis, Spiliotis & Assimakopoulos, IJF 38(4), 2022):
/// the in-sample mean of squared one-step naive differences, counted from
/// the first month with demand (leading zeros are not part of the
/// product's history). `None` when too short or zero.
pub fn rmsse_scale(train: &[f64]) -> Option<f64> {
    let start = train.iter().position(|&v| v != 0.0)?;
    let t = &train[start..];
    if t.len() < 2 {
        return None;
    }
    let s: f64 = t.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum();
    let scale = s / (t.len() - 1) as f64;
    (scale > 0.0).then_some(scale)
}

/// Root mean squared scaled error: √(mean (forecast − actual)² ÷ `scale`),
/// with `scale` from [`rmsse_scale`]. A squared error is minimised by the
/// mean, not the median, so on sparse demand it does not favour a forecast
/// of zero the way absolute errors do (the reason the M5 competition used it).
pub fn rmsse(actual: &[f64], forecast: &[f64], scale: f64) -> Option<f64> {
    let n = actual.len().min(forecast.len());
    (n > 0 && scale > 0.0).then(|| {
        let s: f64 = actual
            .iter()
            .zip(forecast)
            .map(|(a, f)| (f - a).powi(2))
            .sum();
        (s / n as f64 / scale).sqrt()
    })
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

/// z of the two-sided 5% level used for the tracking-signal limit.
pub const TRACKING_SIGNAL_Z: f64 = 1.96;

/// Limit beyond which a running-sum tracking signal over `months` errors is
/// flagged: `1.96 × √(π/2) × √months` (≈ 2.46 √months; 8.5 over 12 months).
///
/// Derivation: for unbiased, independent, normal errors of spread σ the
/// cumulative error has standard deviation σ√n, and the mean absolute
/// deviation tends to σ√(2/π) (the mean absolute value of a normal
/// variable), so the signal has standard deviation about √(π/2)·√n; the
/// limit is its two-sided 5% bound. A fixed limit such as ±4 (common
/// practice, from memory) is crossed by chance more and more often as
/// months accumulate: over 12 months by about a third of unbiased
/// forecasts, so most flags would mean nothing. Since |TS| ≤ n, nothing is
/// flagged before the 7th month.
pub fn tracking_signal_limit(months: usize) -> f64 {
    TRACKING_SIGNAL_Z * (std::f64::consts::PI / 2.0).sqrt() * (months as f64).sqrt()
}

/// A tracking signal and its parts.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct TrackingSignal {
    /// Σ(forecast − actual): positive = over-forecast, as for [`bias`].
    pub cumulative_error: f64,
    /// Mean absolute deviation of the errors, mean |forecast − actual|.
    pub mad: f64,
    /// cumulative error ÷ MAD.
    pub value: f64,
    /// Number of errors summed.
    pub months: usize,
}

impl TrackingSignal {
    /// The limit for this many months ([`tracking_signal_limit`]).
    pub fn limit(&self) -> f64 {
        tracking_signal_limit(self.months)
    }

    /// Whether the signal is beyond ±[`tracking_signal_limit`] of its
    /// number of months.
    pub fn flagged(&self) -> bool {
        self.value.abs() > self.limit()
    }
}

/// Tracking signal: cumulative forecast error ÷ mean absolute deviation of
/// the errors (the monitoring ratio of Trigg, *Operational Research
/// Quarterly* 15(3), 1964, in its running-sum form). It grows when errors
/// keep the same sign, i.e. when a forecast is biased. Errors are
/// forecast − actual, so a positive signal means over-forecasting. `None`
/// when empty or when every error is zero.
pub fn tracking_signal(actual: &[f64], forecast: &[f64]) -> Option<TrackingSignal> {
    let n = actual.len().min(forecast.len());
    let errors = actual.iter().zip(forecast).map(|(a, f)| f - a);
    let cumulative_error: f64 = errors.clone().sum();
    let mad = errors.map(f64::abs).sum::<f64>() / n.max(1) as f64;
    (n > 0 && mad > 0.0).then(|| TrackingSignal {
        cumulative_error,
        mad,
        value: cumulative_error / mad,
        months: n,
    })
}

/// One-sided exact binomial test of interval coverage: the probability of
/// seeing at most `inside` of `n` actuals inside an interval whose nominal
/// coverage is `nominal` (0–1). A small value (below 0.05, say) means the
/// interval covers less than it claims beyond what chance explains (common
/// practice). `None` when `n` is 0 or `nominal` is not in (0, 1).
pub fn coverage_p_value(inside: usize, n: usize, nominal: f64) -> Option<f64> {
    use statrs::distribution::{Binomial, DiscreteCDF};
    if n == 0 || inside > n || !(nominal > 0.0 && nominal < 1.0) {
        return None;
    }
    Binomial::new(nominal, n as u64)
        .ok()
        .map(|b| b.cdf(inside as u64))
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
    /// Root mean squared scaled error (M5 competition): the score for
    /// intermittent demand.
    Rmsse,
}

impl Score {
    /// Name as written in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Score::Mape => "MAPE",
            Score::Wape => "WAPE",
            Score::Mase => "MASE",
            Score::Rmse => "RMSE",
            Score::Rmsse => "RMSSE",
        }
    }
}

#[cfg(test)]
mod tests {

    #[test]
    fn a_tiny_p_value_is_not_printed_as_zero() {
        // A sign test won at 12 of 12 origins: p = 0.5^12 = 0.000244
        // (binomial, exact); it printed as "p = 0.000" in the reasons.
        assert_eq!(fmt_p(0.5f64.powi(12)), "< 0.001");
        assert_eq!(fmt_p(0.019), "= 0.019");
        assert_eq!(fmt_p(0.001), "= 0.001");
    }

    use super::*;

    #[test]
    fn rmsse_by_its_definition() {
        // RMSSE as defined in the M5 competition's guidelines (Makridakis,
        // Spiliotis & Assimakopoulos, IJF 38(4), 2022, eq. 1), worked by
        // hand. Training (0, 0, 2, 4, 2, 0): leading zeros dropped, one-step
        // differences (2, −2, −2) → scale (4 + 4 + 4) / 3 = 4.
        let scale = rmsse_scale(&[0.0, 0.0, 2.0, 4.0, 2.0, 0.0]).unwrap();
        assert!((scale - 4.0).abs() < 1e-12);
        // Errors (1, −3): √((1 + 9) / 2 / 4) = √1.25.
        let r = rmsse(&[2.0, 3.0], &[3.0, 0.0], scale).unwrap();
        assert!((r - 1.25f64.sqrt()).abs() < 1e-12);
        // On sparse actuals (0, 0, 0, 4) the mean (1) beats a forecast of
        // zero by RMSSE, while by absolute error zero wins (the median
        // minimises absolute error, the mean squared error: common practice).
        let a = [0.0, 0.0, 0.0, 4.0];
        assert!(rmsse(&a, &[1.0; 4], 1.0).unwrap() < rmsse(&a, &[0.0; 4], 1.0).unwrap());
        let mae = |f: f64| a.iter().map(|x| (x - f).abs()).sum::<f64>();
        assert!(mae(0.0) < mae(1.0));
        assert!(rmsse_scale(&[0.0, 0.0]).is_none());
    }

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
    fn tracking_signal_worked_example() {
        // Errors (10, 5, -3, 8): cumulative 20, MAD 26/4 = 6.5, TS 20/6.5 =
        // 3.08 (definition per Trigg, Operational Research Quarterly 15(3),
        // 1964; the example is constructed from it).
        let actual = [100.0; 4];
        let forecast = [110.0, 105.0, 97.0, 108.0];
        let ts = tracking_signal(&actual, &forecast).unwrap();
        assert!((ts.cumulative_error - 20.0).abs() < 1e-12);
        assert!((ts.mad - 6.5).abs() < 1e-12);
        assert!((ts.value - 3.0769).abs() < 1e-4);
        assert!(!ts.flagged());
        // Every error of one sign gives |TS| = n: flagged from 7 months on
        // (2.46 √7 = 6.5 < 7), not at 6 (2.46 √6 = 6.02 > 6).
        let ts = tracking_signal(&[10.0; 7], &[8.0; 7]).unwrap();
        assert!((ts.value + 7.0).abs() < 1e-12);
        assert!(ts.flagged());
        assert!(!tracking_signal(&[10.0; 6], &[8.0; 6]).unwrap().flagged());
        assert_eq!(tracking_signal(&[1.0], &[1.0]), None);
        assert_eq!(tracking_signal(&[], &[]), None);
    }

    #[test]
    fn tracking_limit_has_its_nominal_false_alarm_rate() {
        // The limit is the two-sided 5% bound for unbiased independent
        // normal errors (derivation at tracking_signal_limit). Simulated:
        // over 12 months about 5% of unbiased forecasts are flagged, where
        // a fixed ±4 would flag about a third; a forecast biased by one
        // error spread is flagged almost always.
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let normal = Normal::new(0.0, 1.0).unwrap();
        let runs = 20_000;
        let (mut flagged, mut fixed4, mut biased) = (0, 0, 0);
        let actual = [0.0; 12];
        for _ in 0..runs {
            let e: Vec<f64> = (0..12).map(|_| normal.sample(&mut rng)).collect();
            let ts = tracking_signal(&actual, &e).unwrap();
            flagged += usize::from(ts.flagged());
            fixed4 += usize::from(ts.value.abs() > 4.0);
            let b: Vec<f64> = e.iter().map(|x| x + 1.0).collect();
            biased += usize::from(tracking_signal(&actual, &b).unwrap().flagged());
        }
        let rate = |k: usize| k as f64 / runs as f64;
        assert!((0.03..0.07).contains(&rate(flagged)), "{}", rate(flagged));
        assert!(rate(fixed4) > 0.25, "{}", rate(fixed4));
        assert!(rate(biased) > 0.8, "{}", rate(biased));
        assert!((tracking_signal_limit(12) - 8.51).abs() < 0.01);
    }

    #[test]
    fn coverage_binomial_tail() {
        // P(X <= 7 | n = 12, p = 0.8) = 1 - P(X >= 8); computed by hand from
        // the binomial formula: sum over k = 0..7 of C(12,k) 0.8^k 0.2^(12-k).
        let by_hand: f64 = (0..=7u32)
            .map(|k| {
                let c = (1..=k).fold(1.0, |acc, i| acc * (12 - k + i) as f64 / i as f64);
                c * 0.8f64.powi(k as i32) * 0.2f64.powi(12 - k as i32)
            })
            .sum();
        let p = coverage_p_value(7, 12, 0.8).unwrap();
        assert!((p - by_hand).abs() < 1e-12, "{p} vs {by_hand}");
        assert!((0.0725..0.0727).contains(&p), "{p}");
        assert_eq!(coverage_p_value(12, 12, 0.8), Some(1.0));
        assert_eq!(coverage_p_value(0, 0, 0.8), None);
        assert_eq!(coverage_p_value(1, 2, 1.0), None);
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
