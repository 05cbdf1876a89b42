//! Ranges that hold what they claim: the projection's 80% and 95% ranges
//! calibrated on the product's own backtest errors.
//!
//! A model's own interval assumes the model is right. Out of sample it
//! rarely is, and on the development benchmarks the models' 80% intervals
//! held anywhere from under half to all of the actuals, product by
//! product. So each range is rescaled by a factor learnt from the
//! product's rolling-origin backtest — the errors of forecasts made from
//! past origins, on months those forecasts had not seen.
//!
//! # Method
//!
//! Split conformal prediction with a normalised nonconformity score
//! (Vovk, Gammerman & Shafer, *Algorithmic Learning in a Random World*,
//! 2005; the normalised form of Papadopoulos, Vovk & Gammerman, 2008;
//! for forecasting, Stankeviciute, Alaa & van der Schaar, NeurIPS 2021).
//! For every scored backtest point of the chosen model, with forecast f,
//! actual a and the model's own bounds l ≤ f ≤ u at a level:
//!
//! ```text
//! r = (a − f) / (u − f)   when a ≥ f        r = (f − a) / (f − l)   when a < f
//! ```
//!
//! the share of its own half-width the error used. The factor c is the
//! ⌈(n + 1) × level⌉-th smallest of the n scores (the finite-sample
//! conformal quantile), and the projection's range becomes
//! f ± c × (the model's half-width on that side), lower bound clipped at
//! zero. One factor per level serves every month ahead: the model's
//! interval already widens with the months ahead, and 12 backtest errors
//! per month ahead are too few to estimate a 95% quantile. Months 13–24
//! use the same factor as months 1–12.
//!
//! With fewer than [`MIN_POINTS`] scored backtest points, or when the
//! quantile is not finite (a model whose interval has no width on the side
//! the errors fell), the model's own interval is kept, and
//! [`RangeMethod::Model`] says so.

use crate::backtest::Point;
use crate::models::{Forecast, Interval};

/// Fewest scored backtest points for a calibrated range.
pub const MIN_POINTS: usize = 24;

/// How a projection's ranges were made.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RangeMethod {
    /// Calibrated on the product's backtest errors.
    Calibrated {
        /// Factor applied to the 80% half-widths.
        factor80: f64,
        /// Factor applied to the 95% half-widths.
        factor95: f64,
        /// Backtest points the factors were learnt from.
        points: usize,
    },
    /// The model's own interval (too few backtest errors).
    Model,
}

impl RangeMethod {
    /// Plain words for outputs, e.g. `calibrated ×1.42 / ×1.31 on 144 backtest errors`.
    pub fn describe(&self) -> String {
        match self {
            RangeMethod::Calibrated {
                factor80,
                factor95,
                points,
            } => format!(
                "calibrated on {points} backtest errors: 80% range ×{factor80:.2}, 95% range ×{factor95:.2} the model's own"
            ),
            RangeMethod::Model => format!(
                "the model's own interval (fewer than {MIN_POINTS} backtest errors to calibrate on)"
            ),
        }
    }
}

/// Nonconformity score of one point at one level (see the module docs).
fn score(p: &Point, lower: f64, upper: f64) -> f64 {
    let (a, f) = (p.actual, p.forecast);
    let (err, half) = if a >= f {
        (a - f, upper - f)
    } else {
        (f - a, f - lower)
    };
    if err <= 0.0 {
        0.0
    } else if half > 0.0 {
        err / half
    } else {
        f64::INFINITY
    }
}

/// The conformal factor at `level` from the scored points, or `None`.
pub fn factor(points: &[Point], level: f64) -> Option<f64> {
    let mut r: Vec<f64> = points
        .iter()
        .filter(|p| p.scored)
        .map(|p| {
            if level < 0.9 {
                score(p, p.lower80, p.upper80)
            } else {
                score(p, p.lower95, p.upper95)
            }
        })
        .collect();
    let n = r.len();
    if n < MIN_POINTS {
        return None;
    }
    r.sort_by(f64::total_cmp);
    let k = (((n + 1) as f64) * level).ceil() as usize;
    let q = r[k.clamp(1, n) - 1];
    q.is_finite().then_some(q)
}

/// Rescales one interval around the point forecast by `c`.
fn rescale(point: &[f64], i: &Interval, c: f64) -> Interval {
    let lower = point
        .iter()
        .zip(&i.lower)
        .map(|(&f, &l)| (f - c * (f - l)).max(0.0))
        .collect();
    let upper = point
        .iter()
        .zip(&i.upper)
        .map(|(&f, &u)| f + c * (u - f))
        .collect();
    Interval {
        level: i.level,
        lower,
        upper,
    }
}

/// Calibrates a forecast's 80% and 95% ranges on backtest points of the
/// same model; returns the method used. The point forecast is unchanged.
pub fn calibrate(forecast: &mut Forecast, points: &[Point]) -> RangeMethod {
    let (Some(f80), Some(f95)) = (factor(points, 0.80), factor(points, 0.95)) else {
        return RangeMethod::Model;
    };
    // The 95% range must stay at least as wide as the 80% one.
    let point = forecast.point.clone();
    for i in forecast.intervals.iter_mut() {
        let c = if i.level < 0.9 { f80 } else { f95 };
        *i = rescale(&point, i, c);
    }
    if let (Some(i80), Some(i95)) = (forecast.interval(0.80).cloned(), forecast.interval(0.95)) {
        let lower: Vec<f64> = i95
            .lower
            .iter()
            .zip(&i80.lower)
            .map(|(a, b)| a.min(*b))
            .collect();
        let upper: Vec<f64> = i95
            .upper
            .iter()
            .zip(&i80.upper)
            .map(|(a, b)| a.max(*b))
            .collect();
        if let Some(i) = forecast
            .intervals
            .iter_mut()
            .find(|i| (i.level - 0.95).abs() < 1e-9)
        {
            i.lower = lower;
            i.upper = upper;
        }
    }
    RangeMethod::Calibrated {
        factor80: f80,
        factor95: f95,
        points: points.iter().filter(|p| p.scored).count(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pt(actual: f64, forecast: f64, half80: f64, half95: f64) -> Point {
        Point {
            origin: 0,
            horizon: 1,
            target: 1,
            actual,
            forecast,
            lower80: forecast - half80,
            upper80: forecast + half80,
            lower95: forecast - half95,
            upper95: forecast + half95,
            scale: Some(1.0),
            scale_sq: Some(1.0),
            scored: true,
        }
    }

    #[test]
    fn conformal_quantile_by_hand() {
        // 39 points with scores 1/10, 2/10, ..., 39/10 (errors k against a
        // half-width of 10). Split conformal (Vovk et al. 2005): the
        // ⌈(n + 1) × 0.8⌉ = 32nd smallest score, 3.2; at 95%, the 38th, 3.8.
        let pts: Vec<Point> = (1..=39)
            .map(|k| {
                pt(
                    100.0 + if k % 2 == 0 { k as f64 } else { -(k as f64) },
                    100.0,
                    10.0,
                    20.0,
                )
            })
            .collect();
        assert!((factor(&pts, 0.80).unwrap() - 3.2).abs() < 1e-12);
        assert!((factor(&pts, 0.95).unwrap() - 3.8 / 2.0).abs() < 1e-12);
        // Too few points: no factor.
        assert!(factor(&pts[..MIN_POINTS - 1], 0.80).is_none());
    }

    #[test]
    fn calibrated_ranges_cover_the_backtest_share() {
        // Errors spread evenly up to ±40 around forecasts with an 80%
        // half-width of 10 (far too narrow): after calibration the share
        // of backtest errors inside the range is at least the level.
        let pts: Vec<Point> = (0..100)
            .map(|k| pt(100.0 + (k as f64 - 50.0) * 0.8, 100.0, 10.0, 15.0))
            .collect();
        let band = |level: f64, half: f64| Interval {
            level,
            lower: vec![100.0 - half; 3],
            upper: vec![100.0 + half; 3],
        };
        let mut fc = Forecast {
            point: vec![100.0; 3],
            intervals: vec![band(0.80, 10.0), band(0.95, 15.0)],
        };
        let m = calibrate(&mut fc, &pts);
        let RangeMethod::Calibrated { factor80, .. } = m else {
            panic!("{m:?}");
        };
        let i80 = fc.interval(0.80).unwrap();
        let half = i80.upper[0] - 100.0;
        assert!((half - 10.0 * factor80).abs() < 1e-9, "{half}");
        let inside = pts
            .iter()
            .filter(|p| (p.actual - 100.0).abs() <= half)
            .count();
        assert!(inside >= 80, "{inside}");
        let i95 = fc.interval(0.95).unwrap();
        assert!(i95.upper[0] >= i80.upper[0] && i95.lower[0] <= i80.lower[0]);
        assert!(i80.lower.iter().all(|&v| v >= 0.0));
    }
}
