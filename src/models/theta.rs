//! The Theta method (Assimakopoulos & Nikolopoulos, *International Journal
//! of Forecasting* 16(4), 2000), in the equivalent form of simple
//! exponential smoothing (SES) with drift shown by Hyndman & Billah
//! (*International Journal of Forecasting* 19(2), 2003).
//!
//! Steps, on a series y of N months:
//! 1. Seasonality test: with lag-k autocorrelations r_k of y, the series is
//!    seasonal when `|r_12| > 1.645·√((1 + 2·Σ_{k=1}^{11} r_k²)/N)` (90%
//!    two-sided, Bartlett-type limit), tested only when N ≥ 24 — as
//!    statsforecast 2.1.1 `Theta` and R forecast `thetaf` do; **or**, when
//!    N > 24, the seasonal strength of an STL decomposition exceeds 0.64
//!    (Wang, Smith & Hyndman, *Data Mining and Knowledge Discovery* 13(3),
//!    2006; the threshold of R forecast's `nsdiffs`, used by `arima-auto`).
//!    The second test is ours: the first has little power on 25–36 months
//!    of plainly seasonal demand, and a flat theta forecast of such a
//!    product pulled the combination off (M1 monthly, h = 18: theta mean
//!    MASE 1.095 → 1.065, the combination 1.040 → 1.038; tourism
//!    unchanged).
//! 2. If seasonal: classical decomposition (2×12 centred moving-average
//!    trend, mean ratio (or difference) to trend per position, normalised
//!    to mean 1 (or 0)), as `statsmodels.tsa.seasonal.seasonal_decompose`;
//!    the series is divided by the indices. Multiplicative unless a value
//!    is ≤ 0 or an index is below 0.01, then additive (statsforecast's rule).
//! 3. On the adjusted series x: SES with α and initial level ℓ₀ estimated
//!    by least in-sample one-step squared error (SSE), and b₀ the OLS slope
//!    of x on time.
//! 4. Forecast: `x̂(h) = ℓ_N + (b₀/2)·(h − 1 + 1/α − (1−α)^N/α)`,
//!    reseasonalised.
//! 5. Interval: `x̂(h) ± z·σ·√(1 + α²(h−1))` (the SES variance, Hyndman &
//!    Billah 2003 §3), `σ² = SSE/(N−2)` (two estimated SES parameters),
//!    reseasonalised with the same index, clipped at zero.
//!
//! Estimation: the SES one-step errors are linear in ℓ₀, so for each α the
//! best ℓ₀ has a closed form, and SSE is minimised over α alone on
//! [0.10, 0.99] (statsforecast's bounds for its Theta models) by a coarse
//! grid followed by golden-section search.
//!
//! This fits SES to x as R forecast's `thetaf` does; statsforecast instead
//! fits α and ℓ₀ to the theta model's own one-step errors, so its point
//! forecasts differ slightly (0.2–0.3% on AirPassengers and wineind). Given
//! statsforecast's α and ℓ₀, the forecast formula reproduces its forecasts
//! (see `tests/reference_baseline.rs`).

use super::{z_for_level, Fitted, Forecast, Model, Needs, Season, PERIOD};
use crate::error::{Error, Result};

/// Search range of the smoothing constant α.
pub const ALPHA_RANGE: (f64, f64) = (0.10, 0.99);
/// Fewest months of history.
pub const MIN_MONTHS: usize = 6;

/// The Theta method as SES with drift, with seasonal adjustment when the
/// series tests seasonal.
///
/// | parameter | default | range |
/// |---|---|---|
/// | α (SES smoothing) | estimated | 0.10–0.99 (fixed form: 0 < α ≤ 1) |
/// | ℓ₀ (initial level, adjusted scale) | estimated | any finite value |
/// | b₀ (drift × 2) | OLS slope | any |
/// | θ | 2 | fixed (the classic method) |
/// | decomposition | tested | none, multiplicative, additive |
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Theta {
    fixed: Option<(f64, f64)>,
    season: Season,
}

impl Theta {
    /// Theta with α and ℓ₀ estimated from the data.
    pub fn new() -> Self {
        Self {
            fixed: None,
            season: Season::Tested,
        }
    }

    /// Theta whose seasonal adjustment follows `season` rather than the
    /// tests: never, or always (the indices still estimated from the data).
    pub fn with_season(season: Season) -> Self {
        Self {
            fixed: None,
            season,
        }
    }

    /// Theta with fixed α and initial level ℓ₀ (of the seasonally adjusted
    /// series); the seasonality test, decomposition and slope are still
    /// computed from the data.
    pub fn with_parameters(alpha: f64, initial_level: f64) -> Result<Self> {
        if !(alpha > 0.0 && alpha <= 1.0) {
            return Err(Error::setting(
                "alpha",
                format!("the smoothing constant must be above 0 and at most 1, got {alpha}"),
            ));
        }
        if !initial_level.is_finite() {
            return Err(Error::setting(
                "initial_level",
                format!("the initial level must be a finite number, got {initial_level}"),
            ));
        }
        Ok(Self {
            fixed: Some((alpha, initial_level)),
            season: Season::Tested,
        })
    }
}

impl Default for Theta {
    fn default() -> Self {
        Self::new()
    }
}

/// How a seasonal series was adjusted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Decomposition {
    /// Divided by seasonal indices averaging 1.
    Multiplicative,
    /// Seasonal effects averaging 0 subtracted.
    Additive,
}

/// A fitted Theta model.
#[derive(Debug, Clone, PartialEq)]
pub struct ThetaFit {
    alpha: f64,
    initial_level: f64,
    level: f64,
    slope: f64,
    n: usize,
    sigma: f64,
    sse: f64,
    /// Indices for horizons 1..=12, repeating after.
    season: Option<(Decomposition, [f64; PERIOD])>,
}

impl ThetaFit {
    /// How the series was seasonally adjusted, if it was.
    pub fn decomposition(&self) -> Option<Decomposition> {
        self.season.map(|s| s.0)
    }

    /// Seasonal indices (multiplicative) or effects (additive) applied to
    /// horizons 1..=12, if the series was adjusted.
    pub fn seasonal_indices(&self) -> Option<[f64; PERIOD]> {
        self.season.map(|s| s.1)
    }
}

/// The seasonality test statistic `|r_12| / √((1 + 2·Σ_{k<12} r_k²)/N)`;
/// `None` when the series is shorter than 24 months or has no variation.
pub fn seasonality_ratio(y: &[f64]) -> Option<f64> {
    let n = y.len();
    if n < 2 * PERIOD {
        return None;
    }
    let mean = y.iter().sum::<f64>() / n as f64;
    let c0: f64 = y.iter().map(|v| (v - mean) * (v - mean)).sum();
    if c0 <= 0.0 || !c0.is_finite() {
        return None;
    }
    let r = |k: usize| -> f64 {
        y[k..]
            .iter()
            .zip(y)
            .map(|(a, b)| (a - mean) * (b - mean))
            .sum::<f64>()
            / c0
    };
    let s: f64 = (1..PERIOD).map(|k| r(k) * r(k)).sum();
    let ratio = r(PERIOD).abs() / ((1.0 + 2.0 * s) / n as f64).sqrt();
    ratio.is_finite().then_some(ratio)
}

/// Classical decomposition: the mean ratio (or difference) of y to its
/// 2×12 centred moving average at each position `t mod 12`, normalised.
/// The caller guarantees `y.len() >= 24`.
fn seasonal_indices(y: &[f64], kind: Decomposition) -> [f64; PERIOD] {
    let half = PERIOD / 2;
    let mut sum = [0.0; PERIOD];
    let mut count = [0usize; PERIOD];
    for t in half..y.len() - half {
        let inner: f64 = y[t - half + 1..t + half].iter().sum();
        let trend = (inner + 0.5 * (y[t - half] + y[t + half])) / PERIOD as f64;
        sum[t % PERIOD] += match kind {
            Decomposition::Multiplicative => y[t] / trend,
            Decomposition::Additive => y[t] - trend,
        };
        count[t % PERIOD] += 1;
    }
    let mut idx = [0.0; PERIOD];
    for j in 0..PERIOD {
        idx[j] = sum[j] / count[j].max(1) as f64;
    }
    let mean = idx.iter().sum::<f64>() / PERIOD as f64;
    for v in &mut idx {
        match kind {
            Decomposition::Multiplicative => *v /= mean,
            Decomposition::Additive => *v -= mean,
        }
    }
    idx
}

/// Chooses and computes the seasonal adjustment (see the module docs).
fn choose_season(y: &[f64], rule: Season) -> Result<Option<(Decomposition, [f64; PERIOD])>> {
    let limit = z_for_level(0.90)?;
    let forced = match rule {
        Season::Never => return Ok(None),
        // Indices need two full years.
        Season::Always => y.len() >= 2 * PERIOD,
        Season::Tested => false,
    };
    let by_acf = seasonality_ratio(y).is_some_and(|r| r > limit);
    // The autocorrelation test has little power on short series (with 25–36
    // months a plainly seasonal series often fails it); a strong seasonal
    // component in the STL decomposition, the criterion `arima-auto` uses
    // for seasonal differencing, also counts.
    let by_strength = || {
        y.len() > 2 * PERIOD
            && super::arima::seasonal_strength(y).is_some_and(|s| s > super::arima::SEAS_THRESHOLD)
    };
    if !forced && !by_acf && !by_strength() {
        return Ok(None);
    }
    if y.iter().all(|&v| v > 0.0) {
        let idx = seasonal_indices(y, Decomposition::Multiplicative);
        if idx.iter().all(|&s| s >= 0.01 && s.is_finite()) {
            return Ok(Some((Decomposition::Multiplicative, idx)));
        }
    }
    let idx = seasonal_indices(y, Decomposition::Additive);
    Ok(idx
        .iter()
        .all(|s| s.is_finite())
        .then_some((Decomposition::Additive, idx)))
}

/// SES one-step SSE at `alpha` with the best initial level, and that level.
/// The one-step forecasts are `c_t + (1−α)^{t−1}·ℓ₀`, so ℓ₀ is a
/// least-squares coefficient.
fn ses_profile(x: &[f64], alpha: f64) -> (f64, f64) {
    let (mut c, mut d) = (0.0, 1.0);
    let (mut suu, mut sdu, mut sdd) = (0.0, 0.0, 0.0);
    for &v in x {
        let u = v - c;
        suu += u * u;
        sdu += d * u;
        sdd += d * d;
        c += alpha * (v - c);
        d *= 1.0 - alpha;
    }
    // sdd ≥ 1 (the first term), so the division is safe.
    let l0 = sdu / sdd;
    ((suu - sdu * l0).max(0.0), l0)
}

/// Minimises `f` on `[lo, hi]`: the best of `grid + 1` evenly spaced
/// points brackets the minimum, then golden-section search narrows the
/// bracket to `tol`. NaN counts as +∞. Returns `(x, f(x))`.
pub(crate) fn minimise_bounded(
    mut f: impl FnMut(f64) -> f64,
    lo: f64,
    hi: f64,
    grid: usize,
    tol: f64,
) -> (f64, f64) {
    let mut g = |x: f64| {
        let v = f(x);
        if v.is_nan() {
            f64::INFINITY
        } else {
            v
        }
    };
    let grid = grid.max(2);
    let step = (hi - lo) / grid as f64;
    let at = |i: usize| if i >= grid { hi } else { lo + i as f64 * step };
    let mut best = (lo, f64::INFINITY);
    let mut best_i = 0;
    for i in 0..=grid {
        let x = at(i);
        let v = g(x);
        if v < best.1 {
            best = (x, v);
            best_i = i;
        }
    }
    let (mut a, mut b) = (at(best_i.saturating_sub(1)), at(best_i + 1));
    let inv_phi = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - inv_phi * (b - a);
    let mut d = a + inv_phi * (b - a);
    let (mut fc, mut fd) = (g(c), g(d));
    // The bracket shrinks by 0.618 a step; the cap guards a tolerance
    // below floating-point resolution.
    for _ in 0..200 {
        if b - a <= tol {
            break;
        }
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - inv_phi * (b - a);
            fc = g(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + inv_phi * (b - a);
            fd = g(d);
        }
    }
    for cand in [(c, fc), (d, fd)] {
        if cand.1 < best.1 {
            best = cand;
        }
    }
    best
}

/// OLS slope of x on time.
fn ols_slope(x: &[f64]) -> f64 {
    let n = x.len() as f64;
    let t_mean = (n - 1.0) / 2.0;
    let x_mean = x.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (t, &v) in x.iter().enumerate() {
        let dt = t as f64 - t_mean;
        sxy += dt * (v - x_mean);
        sxx += dt * dt;
    }
    if sxx > 0.0 {
        sxy / sxx
    } else {
        0.0
    }
}

impl Model for Theta {
    type Fitted = ThetaFit;

    fn name(&self) -> String {
        "theta".to_string()
    }

    fn description(&self) -> String {
        "theta method: exponential smoothing plus half the long-run trend, seasonally adjusted when needed"
            .to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: MIN_MONTHS,
            positive: false,
            seasonal: false,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<ThetaFit> {
        self.needs().check(&Model::name(self), y)?;
        let n = y.len();
        if y.iter().all(|&v| v == y[0]) {
            // A flat series: every estimate is degenerate, the answer is not.
            let (alpha, _) = self.fixed.unwrap_or((ALPHA_RANGE.0, y[0]));
            return Ok(ThetaFit {
                alpha,
                initial_level: y[0],
                level: y[0],
                slope: 0.0,
                n,
                sigma: 0.0,
                sse: 0.0,
                season: None,
            });
        }

        let season = choose_season(y, self.season)?;
        let x: Vec<f64> = match &season {
            None => y.to_vec(),
            Some((kind, idx)) => y
                .iter()
                .enumerate()
                .map(|(t, &v)| match kind {
                    Decomposition::Multiplicative => v / idx[t % PERIOD],
                    Decomposition::Additive => v - idx[t % PERIOD],
                })
                .collect(),
        };
        let slope = ols_slope(&x);

        let (alpha, initial_level) = match self.fixed {
            Some(p) => p,
            None => {
                // Centred for conditioning; SES shifts with its data.
                let mean = x.iter().sum::<f64>() / n as f64;
                let xc: Vec<f64> = x.iter().map(|v| v - mean).collect();
                let (lo, hi) = ALPHA_RANGE;
                let (alpha, _) = minimise_bounded(|a| ses_profile(&xc, a).0, lo, hi, 10, 1e-8);
                (alpha, ses_profile(&xc, alpha).1 + mean)
            }
        };

        let mut level = initial_level;
        let mut sse = 0.0;
        for &v in &x {
            let e = v - level;
            sse += e * e;
            level += alpha * e;
        }
        let sigma = (sse / (n - 2) as f64).sqrt();
        if !(level.is_finite() && sigma.is_finite() && slope.is_finite()) {
            return Err(Error::Model {
                model: Model::name(self),
                message: "the fit produced a non-finite level or spread".to_string(),
            });
        }

        let season = season.map(|(kind, idx)| {
            let mut ahead = [0.0; PERIOD];
            for (j, s) in ahead.iter_mut().enumerate() {
                *s = idx[(n + j) % PERIOD];
            }
            (kind, ahead)
        });
        Ok(ThetaFit {
            alpha,
            initial_level,
            level,
            slope,
            n,
            sigma,
            sse,
            season,
        })
    }
}

impl Fitted for ThetaFit {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let a = self.alpha;
        // (1 − (1−α)^N)/α, accurate for small α.
        let memory = -((self.n as f64) * (-a).ln_1p()).exp_m1() / a;
        let mut point = Vec::with_capacity(horizon);
        let mut sd = Vec::with_capacity(horizon);
        for h in 1..=horizon {
            let steps = (h - 1) as f64;
            let p = self.level + 0.5 * self.slope * (steps + memory);
            let s = self.sigma * (1.0 + a * a * steps).sqrt();
            match self.season {
                None => {
                    point.push(p);
                    sd.push(s);
                }
                Some((Decomposition::Multiplicative, idx)) => {
                    let k = idx[(h - 1) % PERIOD];
                    point.push(p * k);
                    sd.push(s * k);
                }
                Some((Decomposition::Additive, idx)) => {
                    point.push(p + idx[(h - 1) % PERIOD]);
                    sd.push(s);
                }
            }
        }
        Forecast::normal(point, &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        vec![
            ("alpha".to_string(), self.alpha),
            ("initial_level".to_string(), self.initial_level),
            ("level".to_string(), self.level),
            ("slope".to_string(), self.slope),
            ("sigma".to_string(), self.sigma),
        ]
    }

    /// SSE of the SES fit on the seasonally adjusted series (what the
    /// estimation minimises).
    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn golden_search_finds_interior_and_bound_minima() {
        let (x, _) = minimise_bounded(|a| (a - 0.3137).powi(2), 0.0, 1.0, 10, 1e-10);
        assert!((x - 0.3137).abs() < 1e-7, "{x}");
        let (x, _) = minimise_bounded(|a| (a - 0.05).powi(2), 0.1, 0.99, 10, 1e-10);
        assert!((x - 0.1).abs() < 1e-9, "{x}");
        let (x, _) = minimise_bounded(|a| -a, 0.1, 0.99, 10, 1e-10);
        assert!((x - 0.99).abs() < 1e-9, "{x}");
        // Two valleys: the grid picks the deeper one before refining.
        let f = |a: f64| ((a - 0.2).powi(2) + 0.01).min((a - 0.8).powi(2));
        let (x, _) = minimise_bounded(f, 0.0, 1.0, 10, 1e-10);
        assert!((x - 0.8).abs() < 1e-6, "{x}");
        let (x, v) = minimise_bounded(|_| f64::NAN, 0.0, 1.0, 10, 1e-10);
        assert!(x.is_finite() && v.is_infinite());
    }

    // The closed-form initial level equals a brute-force search over ℓ₀.
    #[test]
    fn profile_level_is_the_least_squares_level() {
        let x = [3.0, 5.0, 4.0, 8.0, 6.0, 9.0, 7.0];
        let sse_at = |a: f64, l0: f64| {
            let mut l = l0;
            x.iter()
                .map(|&v| {
                    let e = v - l;
                    l += a * e;
                    e * e
                })
                .sum::<f64>()
        };
        let (sse, l0) = ses_profile(&x, 0.4);
        assert!((sse - sse_at(0.4, l0)).abs() < 1e-9);
        for d in [-0.01, 0.01] {
            assert!(sse_at(0.4, l0 + d) > sse);
        }
    }

    // With α = 1 SES is the last value, and (1 − 0^N)/1 = 1, so the
    // forecast is y_N + (b₀/2)·h: on a straight line b₀ is its slope.
    #[test]
    fn straight_line_with_alpha_one() {
        let y: Vec<f64> = (0..10).map(|t| 5.0 + 2.0 * t as f64).collect();
        let fit = Theta::with_parameters(1.0, 0.0).unwrap().fit(&y).unwrap();
        let f = fit.forecast(3, &[0.8]).unwrap();
        for (h, p) in f.point.iter().enumerate() {
            assert!((p - (23.0 + (h + 1) as f64)).abs() < 1e-9, "{p}");
        }
        assert_eq!(fit.decomposition(), None);
    }

    #[test]
    fn seasonal_series_is_adjusted_and_short_one_is_not() {
        let y: Vec<f64> = (0..48)
            .map(|t| {
                100.0 + t as f64 + 30.0 * ((t % 12) as f64 / 12.0 * std::f64::consts::TAU).sin()
            })
            .collect();
        assert!(seasonality_ratio(&y).unwrap() > 1.645);
        let fit = Theta::new().fit(&y).unwrap();
        assert_eq!(fit.decomposition(), Some(Decomposition::Multiplicative));
        assert!(seasonality_ratio(&y[..23]).is_none());
        // A month with no distribution every year: zeros rule out the
        // multiplicative form, the pattern is still seasonal.
        let z: Vec<f64> = y
            .iter()
            .enumerate()
            .map(|(t, &v)| if t % 12 == 5 { 0.0 } else { v })
            .collect();
        let fit = Theta::new().fit(&z).unwrap();
        assert_eq!(fit.decomposition(), Some(Decomposition::Additive));
    }

    // Multiplicative indices average exactly 1 (statsmodels normalisation).
    #[test]
    fn indices_average_one() {
        let y: Vec<f64> = (0..40).map(|t| 50.0 + ((t * 7) % 12) as f64).collect();
        let idx = seasonal_indices(&y, Decomposition::Multiplicative);
        assert!((idx.iter().sum::<f64>() / 12.0 - 1.0).abs() < 1e-12);
    }
}
