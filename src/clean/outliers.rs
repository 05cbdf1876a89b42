//! Outlier flagging: the modified z-score (Iglewicz & Hoaglin, *How to
//! Detect and Handle Outliers*, ASQC, 1993) of each month's deviation from the
//! median of its six nearest trusted neighbours (three each side) in the
//! seasonally adjusted series; the deviation is relative to that median
//! when the series is positive.

use super::impute::{median_of, month_of, SeasonalProfile};
use crate::calendar::YearMonth;

/// Default threshold on the modified z-score (Iglewicz & Hoaglin 1993).
pub const DEFAULT_THRESHOLD: f64 = 3.5;

/// Half-width of the rolling-median window (7 months in all).
const HALF_WINDOW: usize = 3;

/// Fewest trusted months needed to judge outliers at all.
const MIN_MONTHS: usize = 8;

/// A month is flagged only when it also deviates from its expected value
/// by at least this share: entry errors worth a look are large, and a
/// nearly exact series would otherwise flag rounding noise.
pub const MIN_RELATIVE_DEVIATION: f64 = 0.1;

/// Share of zero months above which a series is treated as intermittent:
/// only its non-zero months are compared with each other.
pub const INTERMITTENT_ZERO_SHARE: f64 = 0.3;

/// One flagged month.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Outlier {
    /// Position in the series.
    pub t: usize,
    /// Modified z-score found.
    pub score: f64,
    /// Robust expected value, used when outliers are replaced.
    pub expected: f64,
}

/// Flags months whose modified z-score exceeds `threshold`. `trusted` marks
/// months that may be judged and used as a baseline (imputed months are
/// not). Returns flagged months in order.
pub fn find_outliers(
    values: &[f64],
    trusted: &[bool],
    start: YearMonth,
    profile: Option<&SeasonalProfile>,
    threshold: f64,
) -> Vec<Outlier> {
    let idx: Vec<usize> = (0..values.len()).filter(|&t| trusted[t]).collect();
    if idx.len() < MIN_MONTHS {
        return Vec::new();
    }
    let zeros = idx.iter().filter(|&&t| values[t] == 0.0).count();
    if zeros as f64 / idx.len() as f64 > INTERMITTENT_ZERO_SHARE {
        return intermittent(values, &idx, threshold);
    }
    let adj: Vec<f64> = values
        .iter()
        .enumerate()
        .map(|(t, &v)| profile.map_or(v, |p| p.adjust(v, month_of(start, t))))
        .collect();
    // Consumption noise grows with the level, so for a positive series
    // residuals are relative (a trending series would otherwise flag its
    // high months just for being high).
    let relative = idx.iter().all(|&t| adj[t] > 0.0);
    let mut baseline = vec![0.0; values.len()];
    let mut resid = Vec::with_capacity(idx.len());
    let mut window = Vec::with_capacity(2 * HALF_WINDOW + 1);
    for (k, &t) in idx.iter().enumerate() {
        window.clear();
        let lo = k.saturating_sub(HALF_WINDOW);
        let hi = (k + HALF_WINDOW).min(idx.len() - 1);
        // The month itself is left out of its own baseline: including it
        // shrinks every residual and makes ordinary noise look extreme.
        window.extend(idx[lo..=hi].iter().filter(|&&u| u != t).map(|&u| adj[u]));
        let b = median_of(&window).unwrap_or(adj[t]);
        baseline[t] = b;
        resid.push(if relative && b > 0.0 {
            adj[t] / b - 1.0
        } else {
            adj[t] - b
        });
    }
    let Some(scale) = robust_scale(&resid) else {
        return Vec::new();
    };
    idx.iter()
        .zip(&resid)
        .filter_map(|(&t, &r)| {
            let score = r / scale;
            let material = if relative {
                r.abs() >= MIN_RELATIVE_DEVIATION
            } else {
                r.abs() >= MIN_RELATIVE_DEVIATION * baseline[t].abs()
            };
            (score.abs() > threshold && material).then(|| Outlier {
                t,
                score,
                expected: profile
                    .map_or(baseline[t], |p| p.restore(baseline[t], month_of(start, t)))
                    .max(0.0),
            })
        })
        .collect()
}

/// 1.4826 × MAD (a consistent estimate of the standard deviation for normal
/// data); when the MAD is zero, 1.2533 × mean absolute deviation (the usual
/// fallback for the modified z-score). `None` when both are zero.
fn robust_scale(resid: &[f64]) -> Option<f64> {
    let med = median_of(resid)?;
    let dev: Vec<f64> = resid.iter().map(|r| (r - med).abs()).collect();
    let mad = median_of(&dev)?;
    if mad > 0.0 {
        return Some(1.4826 * mad);
    }
    let mean_ad = dev.iter().sum::<f64>() / dev.len() as f64;
    (mean_ad > 0.0).then_some(1.2533 * mean_ad)
}

fn intermittent(values: &[f64], idx: &[usize], threshold: f64) -> Vec<Outlier> {
    let nz: Vec<f64> = idx
        .iter()
        .map(|&t| values[t])
        .filter(|&v| v > 0.0)
        .collect();
    if nz.len() < 4 {
        return Vec::new();
    }
    let Some(med) = median_of(&nz) else {
        return Vec::new();
    };
    let resid: Vec<f64> = nz.iter().map(|v| v - med).collect();
    let Some(scale) = robust_scale(&resid) else {
        return Vec::new();
    };
    idx.iter()
        .filter(|&&t| values[t] > 0.0)
        .filter_map(|&t| {
            let score = (values[t] - med) / scale;
            let material = values[t] - med >= MIN_RELATIVE_DEVIATION * med;
            (score > threshold && material).then_some(Outlier {
                t,
                score,
                expected: med,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ym() -> YearMonth {
        YearMonth::parse("2020-01").unwrap()
    }

    #[test]
    fn flags_a_typing_error() {
        let mut v: Vec<f64> = (0..36)
            .map(|t| 500.0 + [10.0, -12.0, 5.0, -3.0, 8.0][t % 5])
            .collect();
        v[20] = 5000.0; // an extra zero typed
        let trusted = vec![true; v.len()];
        let out = find_outliers(&v, &trusted, ym(), None, DEFAULT_THRESHOLD);
        assert_eq!(out.len(), 1);
        assert_eq!(out[0].t, 20);
        assert!((out[0].expected - 500.0).abs() < 20.0);
    }

    #[test]
    fn smooth_series_has_no_outliers() {
        let v: Vec<f64> = (0..36).map(|t| 100.0 + t as f64).collect();
        let trusted = vec![true; v.len()];
        assert!(find_outliers(&v, &trusted, ym(), None, DEFAULT_THRESHOLD).is_empty());
    }

    #[test]
    fn intermittent_series_judges_nonzero_sizes() {
        let mut v = vec![0.0; 36];
        for t in (0..36).step_by(3) {
            v[t] = 4.0 + (t % 2) as f64;
        }
        v[33] = 60.0;
        let trusted = vec![true; v.len()];
        let out = find_outliers(&v, &trusted, ym(), None, DEFAULT_THRESHOLD);
        assert_eq!(out.iter().map(|o| o.t).collect::<Vec<_>>(), vec![33]);
    }
}
