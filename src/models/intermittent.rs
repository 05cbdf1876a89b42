//! Intermittent-demand models: Croston, SBA and TSB, for series with many
//! zero months.
//!
//! All three smooth the non-zero demand sizes separately from how often
//! demand occurs, and give one flat forecast of demand per month.
//!
//! Conventions follow statsforecast 2.1.1 (`CrostonClassic`, `CrostonSBA`,
//! `TSB`), checked in `tests/reference_baseline.rs`:
//! - simple exponential smoothing (SES) starts at the first element:
//!   `l_1 = x_1`, `l_i = α·x_i + (1−α)·l_{i−1}`, estimate `l_last`;
//! - demand sizes `z` are the non-zero months in order; intervals `p` are
//!   the 1-based month of the first demand, then the gaps between demands.
//!
//! Smoothing constants. The candidates estimate them from the data: each
//! constant is the one on the grid 0.10, 0.11, …, 0.30 that minimises the
//! in-sample one-step squared error of its own SES (sizes, intervals or
//! occurrence), as statsforecast's `CrostonOptimized` does with the same
//! bounds (it uses a golden-section search; a 0.01 grid is as cheap and
//! cannot stop in a local minimum). Ties go to the smaller constant.
//! Constructors with fixed constants exist for the reference checks.
//!
//! Interval (my choice, the same for all three): empirical quantiles of the
//! in-sample ratios `r_t = y_t / ŷ_t` of each month to its one-step
//! forecast (`ŷ_t` from data before t; months after the second demand, so
//! the start-up forecast built on a single demand is left out; months with
//! `ŷ_t = 0` skipped), times the flat forecast: `[ŷ·q_{(1−L)/2}(r),
//! ŷ·q_{(1+L)/2}(r)]`, linearly interpolated quantiles (numpy's default),
//! widened if needed to contain `ŷ`. Why: intermittent demand is
//! zero-inflated and skewed, so a symmetric normal range misplaces both
//! ends; zero months give ratio 0, so the lower end reaches 0 as often as
//! demand does; ratios, unlike differences, stay valid when the demand
//! level has moved during the history. In a simulation check (Bernoulli
//! occurrence 0.3–0.9 × gamma sizes, 60 months, next 12 scored, α = 0.1)
//! the 95% range covered 95–96.5% of months, while quantiles of the
//! differences `y_t − ŷ_t` covered 76–92%. The model assumes stationary
//! demand with a flat forecast, so the same range is used at every horizon.
//!
//! Applicability: at least 6 months and at least 3 non-zero months (fewer
//! demands leave the size and interval smoothing with nothing to learn
//! from); no negative values.

use super::{z_for_level, Fitted, Forecast, Interval, Model, Needs};
use crate::error::{Error, Result};

/// Fewest months of history.
pub const MIN_MONTHS: usize = 6;
/// Fewest non-zero months.
pub const MIN_DEMANDS: usize = 3;
/// Search range of the estimated smoothing constants.
pub const ALPHA_RANGE: (f64, f64) = (0.10, 0.30);
/// The smoothing-constant grid in hundredths (0.10, 0.11, …, 0.30), so
/// each grid value is the nearest double to its decimal.
const ALPHA_GRID_HUNDREDTHS: std::ops::RangeInclusive<u32> = 10..=30;

/// Croston's method (Croston 1972, *Operational Research Quarterly*
/// 23(3)), optionally with the Syntetos–Boylan debiasing (SBA, Syntetos &
/// Boylan 2005, *International Journal of Forecasting* 21(2)).
///
/// Formula: `ŷ = c · ẑ / p̂`, `ẑ` = SES(α_z) of demand sizes, `p̂` =
/// SES(α_p) of inter-demand intervals, `c = 1` (Croston) or
/// `c = 1 − α_p/2` (SBA).
///
/// | parameter | default | range |
/// |---|---|---|
/// | α_z (sizes) | estimated | 0.10–0.30 (fixed form: 0 < α ≤ 1) |
/// | α_p (intervals) | estimated | 0.10–0.30 (fixed form: 0 < α ≤ 1) |
/// | debias (SBA) | off for `croston`, on for `croston-sba` | on/off |
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Croston {
    sba: bool,
    fixed: Option<(f64, f64)>,
}

impl Croston {
    /// Classic Croston with estimated smoothing constants.
    pub fn classic() -> Self {
        Self {
            sba: false,
            fixed: None,
        }
    }

    /// SBA with estimated smoothing constants.
    pub fn sba() -> Self {
        Self {
            sba: true,
            fixed: None,
        }
    }

    /// Classic Croston with fixed constants (statsforecast's
    /// `CrostonClassic` is `alpha_size = alpha_interval = 0.1`).
    pub fn classic_fixed(alpha_size: f64, alpha_interval: f64) -> Result<Self> {
        Ok(Self {
            sba: false,
            fixed: Some((
                check_alpha("alpha_size", alpha_size)?,
                check_alpha("alpha_interval", alpha_interval)?,
            )),
        })
    }

    /// SBA with fixed constants (statsforecast's `CrostonSBA` is 0.1, 0.1).
    pub fn sba_fixed(alpha_size: f64, alpha_interval: f64) -> Result<Self> {
        Ok(Self {
            sba: true,
            ..Self::classic_fixed(alpha_size, alpha_interval)?
        })
    }
}

/// Teunter–Syntetos–Babai method (TSB; Teunter, Syntetos & Babai 2011,
/// *European Journal of Operational Research* 214(3)): the probability of
/// demand is smoothed every month, so a run of zeros lowers the forecast
/// (obsolescence), unlike Croston.
///
/// Formula: `ŷ = p̂ · ẑ`, `p̂` = SES(α_p) of the 0/1 demand indicator of
/// every month, `ẑ` = SES(α_d) of the demand sizes.
///
/// | parameter | default | range |
/// |---|---|---|
/// | α_d (sizes) | estimated | 0.10–0.30 (fixed form: 0 < α ≤ 1) |
/// | α_p (occurrence) | estimated | 0.10–0.30 (fixed form: 0 < α ≤ 1) |
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tsb {
    fixed: Option<(f64, f64)>,
}

impl Tsb {
    /// TSB with estimated smoothing constants.
    pub fn new() -> Self {
        Self { fixed: None }
    }

    /// TSB with fixed constants (as statsforecast's `TSB(alpha_d, alpha_p)`).
    pub fn fixed(alpha_d: f64, alpha_p: f64) -> Result<Self> {
        Ok(Self {
            fixed: Some((
                check_alpha("alpha_d", alpha_d)?,
                check_alpha("alpha_p", alpha_p)?,
            )),
        })
    }
}

impl Default for Tsb {
    fn default() -> Self {
        Self::new()
    }
}

/// A fitted Croston, SBA or TSB model: a flat forecast and the sorted
/// in-sample ratios behind its interval.
#[derive(Debug, Clone, PartialEq)]
pub struct IntermittentFit {
    point: f64,
    /// Ratios of actual to one-step forecast, sorted ascending; empty only
    /// when every one-step forecast was zero (TSB with α_p = 1).
    ratios: Vec<f64>,
    sse: f64,
    params: [(&'static str, f64); 3],
}

fn check_alpha(name: &'static str, alpha: f64) -> Result<f64> {
    if alpha > 0.0 && alpha <= 1.0 {
        Ok(alpha)
    } else {
        Err(Error::setting(
            name,
            format!("a smoothing constant must be above 0 and at most 1, got {alpha}"),
        ))
    }
}

/// Checks length, finiteness, sign and number of demands; returns the
/// index of the first demand.
fn check_series(model: &str, y: &[f64]) -> Result<usize> {
    Needs {
        min_months: MIN_MONTHS,
        positive: false,
        seasonal: false,
    }
    .check(model, y)?;
    if let Some(bad) = y.iter().position(|&v| v < 0.0) {
        return Err(Error::NotApplicable {
            model: model.to_string(),
            reason: format!("demand cannot be negative; month {} is {}", bad + 1, y[bad]),
        });
    }
    let demands = y.iter().filter(|&&v| v > 0.0).count();
    if demands < MIN_DEMANDS {
        return Err(Error::NotApplicable {
            model: model.to_string(),
            reason: format!(
                "needs at least {MIN_DEMANDS} months with demand above zero, the series has {demands}"
            ),
        });
    }
    Ok(y.iter().position(|&v| v > 0.0).unwrap_or(0))
}

/// One-step squared error of SES started at the first element.
fn ses_sse(x: &[f64], alpha: f64) -> f64 {
    let Some((&first, rest)) = x.split_first() else {
        return 0.0;
    };
    let mut level = first;
    let mut sse = 0.0;
    for &v in rest {
        let e = v - level;
        sse += e * e;
        level += alpha * e;
    }
    sse
}

/// The grid constant with the smallest SES one-step error on `x`.
fn best_alpha(x: &[f64]) -> f64 {
    let mut best = (ALPHA_RANGE.0, f64::INFINITY);
    for i in ALPHA_GRID_HUNDREDTHS {
        let a = f64::from(i) / 100.0;
        let s = ses_sse(x, a);
        if s < best.1 {
            best = (a, s);
        }
    }
    best.0
}

impl Model for Croston {
    type Fitted = IntermittentFit;

    fn name(&self) -> String {
        let name = if self.sba { "croston-sba" } else { "croston" };
        name.to_string()
    }

    fn description(&self) -> String {
        let text = if self.sba {
            "croston with the syntetos-boylan bias correction, for months with many zeros"
        } else {
            "croston's method: demand size over interval between demands, for months with many zeros"
        };
        text.to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: MIN_MONTHS,
            positive: false,
            seasonal: false,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<IntermittentFit> {
        let first = check_series(&Model::name(self), y)?;
        let (alpha_z, alpha_p) = match self.fixed {
            Some(a) => a,
            None => {
                let mut sizes = Vec::with_capacity(y.len());
                let mut gaps = Vec::with_capacity(y.len());
                let mut prev = 0usize;
                for (t, &v) in y.iter().enumerate() {
                    if v > 0.0 {
                        sizes.push(v);
                        gaps.push((t + 1 - prev) as f64);
                        prev = t + 1;
                    }
                }
                (best_alpha(&sizes), best_alpha(&gaps))
            }
        };
        let factor = if self.sba { 1.0 - alpha_p / 2.0 } else { 1.0 };

        let mut fit = InSample::new(y.len() - first);
        let (mut z, mut p) = (y[first], (first + 1) as f64);
        let mut last = first;
        for (t, &v) in y.iter().enumerate().skip(first + 1) {
            fit.record(v, factor * z / p);
            if v > 0.0 {
                z += alpha_z * (v - z);
                p += alpha_p * ((t - last) as f64 - p);
                last = t;
            }
        }
        Ok(IntermittentFit::new(
            factor * z / p,
            fit,
            [
                ("alpha_size", alpha_z),
                ("alpha_interval", alpha_p),
                ("debias_factor", factor),
            ],
        ))
    }
}

impl Model for Tsb {
    type Fitted = IntermittentFit;

    fn name(&self) -> String {
        "tsb".to_string()
    }

    fn description(&self) -> String {
        "teunter-syntetos-babai: demand probability times size, falls during runs of zeros"
            .to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: MIN_MONTHS,
            positive: false,
            seasonal: false,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<IntermittentFit> {
        let first = check_series(&Model::name(self), y)?;
        let (alpha_d, alpha_p) = match self.fixed {
            Some(a) => a,
            None => {
                let sizes: Vec<f64> = y.iter().copied().filter(|&v| v > 0.0).collect();
                let occurs: Vec<f64> = y.iter().map(|&v| f64::from(v > 0.0)).collect();
                (best_alpha(&sizes), best_alpha(&occurs))
            }
        };

        let mut fit = InSample::new(y.len() - first);
        // p̂ runs over every month from the first; ẑ starts at the first demand.
        let mut prob = f64::from(y[0] > 0.0);
        for &v in &y[1..=first] {
            prob += alpha_p * (f64::from(v > 0.0) - prob);
        }
        let mut z = y[first];
        for &v in &y[first + 1..] {
            fit.record(v, prob * z);
            let occurs = v > 0.0;
            prob += alpha_p * (f64::from(occurs) - prob);
            if occurs {
                z += alpha_d * (v - z);
            }
        }
        Ok(IntermittentFit::new(
            prob * z,
            fit,
            [
                ("alpha_size", alpha_d),
                ("alpha_probability", alpha_p),
                ("probability", prob),
            ],
        ))
    }
}

/// In-sample one-step record, month by month after the first demand.
struct InSample {
    sse: f64,
    ratios: Vec<f64>,
    demands: usize,
}

impl InSample {
    fn new(capacity: usize) -> Self {
        Self {
            sse: 0.0,
            ratios: Vec::with_capacity(capacity),
            demands: 1,
        }
    }

    /// Month with actual `y` and one-step forecast `f`.
    fn record(&mut self, y: f64, f: f64) {
        self.sse += (y - f) * (y - f);
        if self.demands >= 2 && f > 0.0 {
            self.ratios.push(y / f);
        }
        if y > 0.0 {
            self.demands += 1;
        }
    }
}

impl IntermittentFit {
    fn new(point: f64, fit: InSample, params: [(&'static str, f64); 3]) -> Self {
        let mut ratios = fit.ratios;
        ratios.sort_by(f64::total_cmp);
        Self {
            point,
            ratios,
            sse: fit.sse,
            params,
        }
    }

    /// The flat point forecast (demand per month).
    pub fn value(&self) -> f64 {
        self.point
    }

    /// Linearly interpolated quantile of the in-sample ratios (1 when
    /// there are none, which collapses the range onto the forecast).
    fn ratio_quantile(&self, q: f64) -> f64 {
        let e = &self.ratios;
        if e.is_empty() {
            return 1.0;
        }
        let pos = q * (e.len() - 1) as f64;
        let i = pos.floor() as usize;
        let frac = pos - i as f64;
        match e.get(i + 1) {
            Some(&next) => e[i] + frac * (next - e[i]),
            None => e[e.len() - 1],
        }
    }
}

impl Fitted for IntermittentFit {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let mut intervals = Vec::with_capacity(levels.len());
        for &level in levels {
            z_for_level(level)?;
            let lo = (self.point * self.ratio_quantile((1.0 - level) / 2.0)).min(self.point);
            let hi = (self.point * self.ratio_quantile((1.0 + level) / 2.0)).max(self.point);
            intervals.push(Interval {
                level,
                lower: vec![lo; horizon],
                upper: vec![hi; horizon],
            });
        }
        Ok(Forecast {
            point: vec![self.point; horizon],
            intervals,
        }
        .clipped())
    }

    fn params(&self) -> Vec<(String, f64)> {
        self.params
            .iter()
            .map(|&(k, v)| (k.to_string(), v))
            .collect()
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hand-worked Croston with α = 0.5 on 0,4,0,0,2,6 (first demand in
    // month 2): sizes 4,2,6 → ẑ = 4, 3, 4.5; intervals 2,3,1 → p̂ = 2,
    // 2.5, 1.75; forecast 4.5 / 1.75.
    #[test]
    fn croston_by_hand() {
        let y = [0.0, 4.0, 0.0, 0.0, 2.0, 6.0];
        let f = Croston::classic_fixed(0.5, 0.5).unwrap().fit(&y).unwrap();
        assert!((f.value() - 4.5 / 1.75).abs() < 1e-12);
        let s = Croston::sba_fixed(0.5, 0.5).unwrap().fit(&y).unwrap();
        assert!((s.value() - 0.75 * 4.5 / 1.75).abs() < 1e-12);
        // In-sample forecasts after month 2: 2, 2, 2, then 3/2.5.
        let expect = [0.0 - 2.0, 0.0 - 2.0, 2.0 - 2.0, 6.0 - 1.2];
        let sse: f64 = expect.iter().map(|e| e * e).sum();
        assert!((f.sse().unwrap() - sse).abs() < 1e-12);
    }

    // Hand-worked TSB with α_d = α_p = 0.5 on 0,4,0,0,2,6: p̂ over
    // 0,1,0,0,1,1 = 0, .5, .25, .125, .5625, .78125; ẑ = 4, 3, 4.5.
    #[test]
    fn tsb_by_hand() {
        let y = [0.0, 4.0, 0.0, 0.0, 2.0, 6.0];
        let f = Tsb::fixed(0.5, 0.5).unwrap().fit(&y).unwrap();
        assert!((f.value() - 0.78125 * 4.5).abs() < 1e-12);
    }

    #[test]
    fn too_few_demands_is_not_applicable_with_reason() {
        let y = [0.0, 0.0, 5.0, 0.0, 0.0, 0.0, 3.0, 0.0];
        for e in [
            Croston::classic().fit(&y).unwrap_err(),
            Tsb::new().fit(&y).unwrap_err(),
        ] {
            let msg = e.to_string();
            assert!(matches!(e, Error::NotApplicable { .. }), "{msg}");
            assert!(msg.contains("at least 3 months with demand"), "{msg}");
        }
        let e = Croston::classic().fit(&[1.0, -1.0, 2.0, 3.0, 4.0, 5.0]);
        assert!(e.unwrap_err().to_string().contains("negative"));
    }

    #[test]
    fn bad_constants_are_refused() {
        assert!(Croston::classic_fixed(0.0, 0.1).is_err());
        assert!(Tsb::fixed(0.2, 1.5).is_err());
        assert!(Tsb::fixed(0.2, f64::NAN).is_err());
    }

    #[test]
    fn estimated_constants_stay_on_the_grid() {
        let y = [0.0, 3.0, 0.0, 8.0, 0.0, 0.0, 2.0, 9.0, 0.0, 1.0, 0.0, 7.0];
        for p in Croston::sba().fit(&y).unwrap().params() {
            if p.0.starts_with("alpha") {
                assert!((0.1 - 1e-12..=0.3 + 1e-12).contains(&p.1), "{p:?}");
            }
        }
    }

    // Ratio quantiles match numpy's default (linear) method: for ratios
    // 1..=5 the 10% quantile is 1.4 and the 90% one 4.6.
    #[test]
    fn interval_from_ratio_quantiles() {
        let record = InSample {
            sse: 0.0,
            ratios: vec![5.0, 1.0, 3.0, 2.0, 4.0],
            demands: 2,
        };
        let fit = IntermittentFit::new(10.0, record, [("a", 0.0), ("b", 0.0), ("c", 0.0)]);
        let f = fit.forecast(2, &[0.8]).unwrap();
        // Both quantiles are above 1, so the lower end is widened to 10.
        assert_eq!(f.intervals[0].lower, vec![10.0, 10.0]);
        assert!((f.intervals[0].upper[1] - 46.0).abs() < 1e-12);
        assert!((fit.ratio_quantile(0.1) - 1.4).abs() < 1e-12);
    }

    // Ratios start after the second demand: on 0,4,0,0,2,6 (α = 0.5) the
    // one-step forecasts after month 5 use two demands: 6 / (3/2.5).
    #[test]
    fn ratios_skip_the_single_demand_start() {
        let y = [0.0, 4.0, 0.0, 0.0, 2.0, 6.0];
        let f = Croston::classic_fixed(0.5, 0.5).unwrap().fit(&y).unwrap();
        assert_eq!(f.ratios, vec![6.0 / 1.2]);
    }

    // A series with zeros in a third of its months: the 80% range reaches
    // zero, as the months themselves do.
    #[test]
    fn lower_end_reaches_zero_when_zeros_are_common() {
        let y: Vec<f64> = (0..48)
            .map(|t| {
                if t % 3 == 0 {
                    0.0
                } else {
                    5.0 + (t % 4) as f64
                }
            })
            .collect();
        for m in [Croston::classic(), Croston::sba()] {
            let f = m.fit(&y).unwrap().forecast(1, &[0.8]).unwrap();
            assert_eq!(f.intervals[0].lower[0], 0.0);
            assert!(f.intervals[0].upper[0] > f.point[0]);
        }
    }
}
