//! Filling missing months, and the seasonal profile it shares with outlier
//! detection.
//!
//! Method (documented in the README):
//! - With at least 24 observed months and a clear seasonal pattern
//!   (seasonal strength ≥ [`SEASONAL_STRENGTH_MIN`] and a Kruskal–Wallis test
//!   across calendar months significant at 1%), seasonal indices are
//!   estimated by a robust classical decomposition (trend: centred 13-month
//!   running median; index: median ratio, or difference when there are
//!   zeros, per calendar month), observed months are
//!   seasonally adjusted, missing months are linearly interpolated in the
//!   adjusted series, and the seasonal index is put back.
//! - Otherwise, linear interpolation between the nearest observed months.
//! - Before the first or after the last observed month the nearest observed
//!   (seasonally adjusted) level is carried.

use crate::calendar::YearMonth;

/// Seasonal strength (1 − Var(remainder) ÷ Var(detrended), with MAD² for
/// the variances; after Hyndman &
/// Athanasopoulos, *Forecasting: Principles and Practice*, 3rd ed., §4.3)
/// at or above which seasonal indices are used.
pub const SEASONAL_STRENGTH_MIN: f64 = 0.3;

/// Observed months needed before seasonal indices are estimated.
pub const SEASONAL_MIN_MONTHS: usize = 24;

/// How a missing month was filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImputeMethod {
    /// Linear interpolation between neighbours (or nearest value at an edge).
    Linear,
    /// Linear interpolation of the seasonally adjusted series, times the
    /// seasonal index.
    Seasonal,
}

impl ImputeMethod {
    /// Plain-words name used in the adjustment log.
    pub fn describe(self) -> &'static str {
        match self {
            ImputeMethod::Linear => "linear interpolation between neighbouring months",
            ImputeMethod::Seasonal => {
                "seasonally adjusted interpolation (classical decomposition indices)"
            }
        }
    }
}

/// Seasonal indices per calendar month (index 0 = January).
#[derive(Debug, Clone, PartialEq)]
pub struct SeasonalProfile {
    /// Index per calendar month: a ratio (mean 1) when multiplicative, a
    /// difference (mean 0) when additive.
    pub index: [f64; 12],
    /// Whether the indices are ratios.
    pub multiplicative: bool,
    /// Seasonal strength, 0–1.
    pub strength: f64,
    /// Whether the detrended values differ by calendar month beyond chance:
    /// Kruskal–Wallis test at the 1% level (Kruskal & Wallis, JASA 47, 1952).
    pub significant: bool,
}

impl SeasonalProfile {
    /// Removes the seasonal effect of calendar month `m0` (0-based).
    pub fn adjust(&self, value: f64, m0: usize) -> f64 {
        if self.multiplicative {
            value / self.index[m0]
        } else {
            value - self.index[m0]
        }
    }

    /// Puts the seasonal effect of calendar month `m0` back.
    pub fn restore(&self, value: f64, m0: usize) -> f64 {
        if self.multiplicative {
            value * self.index[m0]
        } else {
            value + self.index[m0]
        }
    }
}

/// Calendar month (0-based) of position `t` in a series starting at `start`.
pub fn month_of(start: YearMonth, t: usize) -> usize {
    (start.month() as usize - 1 + t) % 12
}

/// Fills `None` by linear interpolation; before the first and after the last
/// observed value the nearest one is carried. Returns `None` when nothing is
/// observed.
pub fn linear_fill(values: &[Option<f64>]) -> Option<Vec<f64>> {
    let first = values.iter().position(Option::is_some)?;
    let mut out = vec![0.0; values.len()];
    let mut prev: Option<(usize, f64)> = None;
    for (t, v) in values.iter().enumerate() {
        if let Some(x) = *v {
            match prev {
                None => out[..t].fill(x),
                Some((pt, px)) => {
                    let gap = (t - pt) as f64;
                    for (k, slot) in out.iter_mut().enumerate().take(t).skip(pt + 1) {
                        *slot = px + (x - px) * (k - pt) as f64 / gap;
                    }
                }
            }
            out[t] = x;
            prev = Some((t, x));
        }
    }
    if let Some((pt, px)) = prev {
        out[pt + 1..].fill(px);
    }
    let _ = first;
    Some(out)
}

fn median(xs: &mut [f64]) -> Option<f64> {
    if xs.is_empty() {
        return None;
    }
    xs.sort_by(|a, b| a.total_cmp(b));
    let n = xs.len();
    Some(if n % 2 == 1 {
        xs[n / 2]
    } else {
        (xs[n / 2 - 1] + xs[n / 2]) / 2.0
    })
}

/// Median of a slice (copied); `None` when empty.
pub fn median_of(xs: &[f64]) -> Option<f64> {
    let mut v = xs.to_vec();
    median(&mut v)
}

/// Kruskal–Wallis H statistic (with the usual tie correction) for groups
/// of observations; groups with no observation are ignored. Returns H and
/// the degrees of freedom (groups − 1).
pub fn kruskal_wallis(groups: &[Vec<f64>]) -> (f64, usize) {
    let mut all: Vec<(f64, usize)> = groups
        .iter()
        .enumerate()
        .flat_map(|(g, xs)| xs.iter().map(move |&x| (x, g)))
        .collect();
    let n = all.len();
    let k = groups.iter().filter(|g| !g.is_empty()).count();
    if n < 2 || k < 2 {
        return (0.0, k.saturating_sub(1));
    }
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut rank_sum = vec![0.0; groups.len()];
    let mut ties = 0.0;
    let mut i = 0;
    while i < n {
        let mut j = i;
        while j + 1 < n && all[j + 1].0 == all[i].0 {
            j += 1;
        }
        let avg = (i + j) as f64 / 2.0 + 1.0;
        for item in &all[i..=j] {
            rank_sum[item.1] += avg;
        }
        let t = (j - i + 1) as f64;
        ties += t * t * t - t;
        i = j + 1;
    }
    let nf = n as f64;
    let mut h = 0.0;
    for (g, xs) in groups.iter().enumerate() {
        if !xs.is_empty() {
            h += rank_sum[g] * rank_sum[g] / xs.len() as f64;
        }
    }
    h = 12.0 / (nf * (nf + 1.0)) * h - 3.0 * (nf + 1.0);
    let correction = 1.0 - ties / (nf * nf * nf - nf);
    if correction > 0.0 {
        h /= correction;
    }
    (h, k - 1)
}

/// 99% quantiles of the chi-square distribution for 1–11 degrees of
/// freedom (scipy 1.17.1 `scipy.stats.chi2.ppf(0.99, df)`).
const CHI2_99: [f64; 11] = [
    6.6349, 9.2103, 11.3449, 13.2767, 15.0863, 16.8119, 18.4753, 20.0902, 21.666, 23.2093, 24.725,
];

/// Median absolute deviation from the median.
fn mad(xs: &[f64]) -> f64 {
    let Some(m) = median_of(xs) else { return 0.0 };
    let dev: Vec<f64> = xs.iter().map(|x| (x - m).abs()).collect();
    median_of(&dev).unwrap_or(0.0)
}

/// Estimates seasonal indices by classical decomposition; `None` with fewer
/// than [`SEASONAL_MIN_MONTHS`] observed months. The caller decides from
/// `strength` whether to use them.
pub fn seasonal_profile(values: &[Option<f64>], start: YearMonth) -> Option<SeasonalProfile> {
    let observed = values.iter().filter(|v| v.is_some()).count();
    let n = values.len();
    if observed < SEASONAL_MIN_MONTHS || n < SEASONAL_MIN_MONTHS {
        return None;
    }
    let x = linear_fill(values)?;
    // Trend: centred 13-month running median (a full year around each
    // month), robust to a single entry error where a 2×12 moving average
    // would spread it over a year. Only months with a full window give
    // ratios: carrying the trend into the edges would turn a steady trend
    // into a false seasonal pattern.
    let mut trend = vec![0.0; n];
    let mut window = Vec::with_capacity(13);
    for t in 6..n - 6 {
        window.clear();
        window.extend_from_slice(&x[t - 6..=t + 6]);
        trend[t] = median(&mut window).unwrap_or(x[t]);
    }
    let multiplicative =
        values.iter().flatten().all(|&v| v > 0.0) && trend[6..n - 6].iter().all(|&v| v > 0.0);
    let mut per_month: Vec<Vec<f64>> = vec![Vec::new(); 12];
    let mut detrended = Vec::with_capacity(n);
    for t in 6..n - 6 {
        if let Some(y) = values[t] {
            let d = if multiplicative {
                y / trend[t]
            } else {
                y - trend[t]
            };
            per_month[month_of(start, t)].push(d);
            detrended.push((t, d));
        }
    }
    let neutral = if multiplicative { 1.0 } else { 0.0 };
    let mut index = [neutral; 12];
    let mut covered = 0;
    for (m, ds) in per_month.iter_mut().enumerate() {
        if let Some(med) = median(ds) {
            index[m] = med;
            covered += 1;
        }
    }
    if covered < 10 {
        return None;
    }
    let mean = index.iter().sum::<f64>() / 12.0;
    if multiplicative {
        if mean <= 0.0 {
            return None;
        }
        index.iter_mut().for_each(|v| *v /= mean);
    } else {
        index.iter_mut().for_each(|v| *v -= mean);
    }
    // Strength with robust spreads (MAD in place of the standard
    // deviation), so one entry error does not hide a real season; the
    // rank test below guards against patterns that chance alone makes.
    let d: Vec<f64> = detrended.iter().map(|&(_, d)| d).collect();
    let r: Vec<f64> = detrended
        .iter()
        .map(|&(t, d)| d - index[month_of(start, t)])
        .collect();
    let sd = mad(&d);
    let strength = if sd > 0.0 {
        (1.0 - (mad(&r) / sd).powi(2)).max(0.0)
    } else {
        0.0
    };
    let (h, df) = kruskal_wallis(&per_month);
    let significant = df >= 1 && h > CHI2_99[df.min(11) - 1];
    Some(SeasonalProfile {
        index,
        multiplicative,
        strength,
        significant,
    })
}

/// The profile to use for imputation and outlier detection: estimated and
/// strong enough.
pub fn usable_profile(values: &[Option<f64>], start: YearMonth) -> Option<SeasonalProfile> {
    seasonal_profile(values, start).filter(|p| p.significant && p.strength >= SEASONAL_STRENGTH_MIN)
}

/// Fills every missing month. Returns the completed series and the method
/// used, or `None` when no month is observed. Filled values are never
/// negative; observed values are returned unchanged.
pub fn impute(values: &[Option<f64>], start: YearMonth) -> Option<(Vec<f64>, ImputeMethod)> {
    match usable_profile(values, start) {
        Some(p) => {
            let adjusted: Vec<Option<f64>> = values
                .iter()
                .enumerate()
                .map(|(t, v)| v.map(|y| p.adjust(y, month_of(start, t))))
                .collect();
            let filled = linear_fill(&adjusted)?;
            let out = values
                .iter()
                .enumerate()
                .map(|(t, v)| match v {
                    Some(y) => *y,
                    None => p.restore(filled[t], month_of(start, t)).max(0.0),
                })
                .collect();
            Some((out, ImputeMethod::Seasonal))
        }
        None => {
            let filled = linear_fill(values)?;
            let out = values
                .iter()
                .zip(filled)
                .map(|(v, f)| v.unwrap_or(f.max(0.0)))
                .collect();
            Some((out, ImputeMethod::Linear))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ym(s: &str) -> YearMonth {
        YearMonth::parse(s).unwrap()
    }

    #[test]
    fn linear_fill_interior_and_edges() {
        let v = [None, Some(2.0), None, None, Some(8.0), None];
        assert_eq!(linear_fill(&v).unwrap(), vec![2.0, 2.0, 4.0, 6.0, 8.0, 8.0]);
        assert_eq!(linear_fill(&[None, None]), None);
    }

    #[test]
    fn seasonal_imputation_recovers_a_seasonal_month() {
        // A strongly seasonal series with a peak every July: a missing July
        // must be filled near the peak, not between its neighbours.
        let shape = [0.6, 0.6, 0.7, 0.8, 1.0, 1.6, 2.2, 1.6, 1.0, 0.8, 0.6, 0.5];
        let full: Vec<f64> = (0..48)
            .map(|t| 100.0 * shape[t % 12] * (1.0 + 0.005 * t as f64))
            .collect();
        let mut v: Vec<Option<f64>> = full.iter().copied().map(Some).collect();
        v[30] = None; // July of year 3
        let (out, method) = impute(&v, ym("2020-01")).unwrap();
        assert_eq!(method, ImputeMethod::Seasonal);
        let rel = (out[30] - full[30]).abs() / full[30];
        assert!(rel < 0.03, "filled {} vs true {}", out[30], full[30]);
        // Linear interpolation would give the neighbours' mean, far lower.
        assert!(((full[29] + full[31]) / 2.0) < full[30] * 0.8);
        for t in 0..48 {
            if t != 30 {
                assert_eq!(out[t], full[t]);
            }
        }
    }

    #[test]
    fn short_series_uses_linear() {
        let v = [Some(10.0), None, Some(20.0)];
        let (out, method) = impute(&v, ym("2020-01")).unwrap();
        assert_eq!(method, ImputeMethod::Linear);
        assert_eq!(out, vec![10.0, 15.0, 20.0]);
    }

    #[test]
    fn kruskal_wallis_matches_scipy() {
        // Reference: scipy 1.17.1, scipy.stats.kruskal([1.0,2.5],[3.1,4.0],
        // [0.5,0.7,0.2],[5,6]) → statistic 7.533333333333331.
        let g = vec![
            vec![1.0, 2.5],
            vec![3.1, 4.0],
            vec![0.5, 0.7, 0.2],
            vec![5.0, 6.0],
        ];
        let (h, df) = kruskal_wallis(&g);
        assert!((h - 7.533333333333331).abs() < 1e-12, "{h}");
        assert_eq!(df, 3);
    }

    #[test]
    fn flat_noise_is_not_seasonal() {
        // Deterministic alternating noise, no calendar pattern.
        let v: Vec<Option<f64>> = (0..48)
            .map(|t| Some(100.0 + [3.0, -2.0, 1.0, -4.0, 2.0][t % 5]))
            .collect();
        assert!(usable_profile(&v, ym("2020-01")).is_none());
    }
}
