//! Forecast value added of the changes: the error of the statistical and
//! of the adjusted forecast against later actuals, per product and per
//! change row (the forecast just before the row against just after it).
//!
//! Scores are WAPE (100 × Σ|forecast − actual| / Σ actual) and bias
//! (100 × Σ(forecast − actual) / Σ actual): both stay defined when some
//! actuals are zero. Value added = WAPE without the adjustment − WAPE with
//! it, in percentage points: above zero, the adjustment brought the
//! forecast closer to what was consumed.

/// Scores of a forecast with and without an adjustment on the same months.
#[derive(Debug, Clone, PartialEq)]
pub struct ValueAdded {
    /// Months scored.
    pub months: usize,
    /// Total actual consumption over them.
    pub actual: f64,
    /// WAPE (%) without the adjustment; `None` when the actuals sum to 0.
    pub wape_without: Option<f64>,
    /// WAPE (%) with it.
    pub wape_with: Option<f64>,
    /// Bias (%) without.
    pub bias_without: Option<f64>,
    /// Bias (%) with.
    pub bias_with: Option<f64>,
    /// `wape_without − wape_with`, percentage points.
    pub value_added: Option<f64>,
}

/// Scores `(actual, without, with)` triples.
pub fn value_added(points: &[(f64, f64, f64)]) -> ValueAdded {
    let actual: f64 = points.iter().map(|p| p.0).sum();
    let pct = |v: f64| (actual > 0.0).then(|| 100.0 * v / actual);
    let abs =
        |f: fn(&(f64, f64, f64)) -> f64| points.iter().map(|p| (f(p) - p.0).abs()).sum::<f64>();
    let signed = |f: fn(&(f64, f64, f64)) -> f64| points.iter().map(|p| f(p) - p.0).sum::<f64>();
    let wape_without = pct(abs(|p| p.1));
    let wape_with = pct(abs(|p| p.2));
    ValueAdded {
        months: points.len(),
        actual,
        wape_without,
        wape_with,
        bias_without: pct(signed(|p| p.1)),
        bias_with: pct(signed(|p| p.2)),
        value_added: wape_without.zip(wape_with).map(|(a, b)| a - b),
    }
}
