//! The candidate forecasting models behind one contract.
//!
//! A model spec (unfitted) implements [`Model`]; fitting returns its own
//! fitted type, and only a fitted model can forecast. The backtest works
//! with [`AnyModel`], the object-safe form every [`Model`] gets for free.
//!
//! Every forecast carries point values and prediction intervals for the
//! requested levels (e.g. 0.80 and 0.95), clipped at zero: consumption is
//! never negative.

use crate::error::{Error, Result};

pub mod arima;
pub mod baseline;
pub mod decomposition;
pub mod ets;
pub mod ets_seasonal;
pub mod holt_winters;
pub mod intermittent;
pub mod stl;
pub mod theta;

/// Seasonal period of monthly data.
pub const PERIOD: usize = 12;

/// Default interval levels: 80% and 95%.
pub const DEFAULT_LEVELS: [f64; 2] = [0.80, 0.95];

/// What a model needs from a series before it can be fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Needs {
    /// Fewest months of history.
    pub min_months: usize,
    /// Whether every value must be strictly positive (multiplicative forms).
    pub positive: bool,
    /// Whether the model estimates seasonality (needs two full years).
    pub seasonal: bool,
}

impl Needs {
    /// Plain-words statement of the needs, for `provisio models`.
    pub fn describe(&self) -> String {
        let mut s = format!("at least {} months", self.min_months);
        if self.positive {
            s.push_str(", all values above zero");
        }
        s
    }

    /// Checks a series against the needs; the error says why the model
    /// cannot apply.
    pub fn check(&self, model: &str, y: &[f64]) -> Result<()> {
        if y.len() < self.min_months {
            return Err(Error::NotApplicable {
                model: model.to_string(),
                reason: format!(
                    "needs at least {} months, the series has {}",
                    self.min_months,
                    y.len()
                ),
            });
        }
        if let Some(bad) = y.iter().position(|v| !v.is_finite()) {
            return Err(Error::NotApplicable {
                model: model.to_string(),
                reason: format!(
                    "value {} at position {} is not a finite number",
                    y[bad],
                    bad + 1
                ),
            });
        }
        if self.positive {
            if let Some(bad) = y.iter().position(|&v| v <= 0.0) {
                return Err(Error::NotApplicable {
                    model: model.to_string(),
                    reason: format!(
                        "multiplicative seasonality needs every month above zero; month {} is {}",
                        bad + 1,
                        y[bad]
                    ),
                });
            }
        }
        Ok(())
    }
}

/// A prediction interval at one level.
#[derive(Debug, Clone, PartialEq)]
pub struct Interval {
    /// Nominal coverage, e.g. 0.80.
    pub level: f64,
    /// Lower bound per horizon.
    pub lower: Vec<f64>,
    /// Upper bound per horizon.
    pub upper: Vec<f64>,
}

/// Point forecasts and prediction intervals for horizons 1..=h.
#[derive(Debug, Clone, PartialEq)]
pub struct Forecast {
    /// Point forecast per horizon.
    pub point: Vec<f64>,
    /// One interval per requested level, in the order requested.
    pub intervals: Vec<Interval>,
}

impl Forecast {
    /// Builds a forecast with normal intervals: point ± z × sd for each
    /// level, where `sd[k]` is the forecast standard deviation at horizon k+1.
    pub fn normal(point: Vec<f64>, sd: &[f64], levels: &[f64]) -> Result<Self> {
        let mut intervals = Vec::with_capacity(levels.len());
        for &level in levels {
            let z = z_for_level(level)?;
            let (lower, upper) = point
                .iter()
                .zip(sd)
                .map(|(&p, &s)| (p - z * s, p + z * s))
                .unzip();
            intervals.push(Interval {
                level,
                lower,
                upper,
            });
        }
        Ok(Forecast { point, intervals }.clipped())
    }

    /// Clips every value at zero (consumption is never negative).
    pub fn clipped(mut self) -> Self {
        let clip = |v: &mut Vec<f64>| v.iter_mut().for_each(|x| *x = x.max(0.0));
        clip(&mut self.point);
        for i in &mut self.intervals {
            clip(&mut i.lower);
            clip(&mut i.upper);
        }
        self
    }

    /// The interval at `level`, if it was requested.
    pub fn interval(&self, level: f64) -> Option<&Interval> {
        self.intervals
            .iter()
            .find(|i| (i.level - level).abs() < 1e-9)
    }
}

/// Two-sided standard-normal quantile for a coverage level in (0, 1):
/// 0.80 → 1.2816, 0.95 → 1.9600.
pub fn z_for_level(level: f64) -> Result<f64> {
    use statrs::distribution::{ContinuousCDF, Normal};
    if !(level > 0.0 && level < 1.0) {
        return Err(Error::setting(
            "level",
            format!("an interval level must be between 0 and 1 (0.8 = 80%), got {level}"),
        ));
    }
    let n = Normal::new(0.0, 1.0).map_err(|e| Error::setting("level", e.to_string()))?;
    Ok(n.inverse_cdf(0.5 + level / 2.0))
}

/// A fitted model: it can forecast and describe what it estimated.
pub trait Fitted: Send {
    /// Forecasts horizons 1..=`horizon` with intervals at `levels`.
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast>;
    /// The estimated parameters, by name (for reports and reference checks).
    fn params(&self) -> Vec<(String, f64)>;
    /// In-sample sum of squared one-step errors, when the model has one.
    fn sse(&self) -> Option<f64> {
        None
    }
}

/// State a model may carry from one fit to the next on a longer prefix of
/// the same series (the backtest's next origin): typically the previous
/// optimum, used as a starting point. Opaque to everyone but the model.
pub type WarmStart = Option<Box<dyn std::any::Any + Send>>;

/// A model specification: unfitted, cheap to copy, fitted per series.
pub trait Model: Send + Sync {
    /// What fitting returns.
    type Fitted: Fitted + 'static;
    /// Stable short name, e.g. `holt-winters-additive`.
    fn name(&self) -> String;
    /// One-line description for `provisio models`.
    fn description(&self) -> String;
    /// What the model needs from a series.
    fn needs(&self) -> Needs;
    /// Fits to `y` (oldest month first). Fails with
    /// [`Error::NotApplicable`] when the series does not meet [`Model::needs`].
    fn fit(&self, y: &[f64]) -> Result<Self::Fitted>;
    /// Fits like [`Model::fit`], but may start its optimiser from `warm`
    /// (left by this model's fit on a shorter prefix of the same series)
    /// and leaves its own optimum there. The fit sees only `y`; models
    /// without an optimiser ignore `warm`.
    fn fit_warm(&self, y: &[f64], warm: &mut WarmStart) -> Result<Self::Fitted> {
        let _ = warm;
        self.fit(y)
    }
}

/// Object-safe form of [`Model`], used to hold a set of candidates.
pub trait AnyModel: Send + Sync {
    /// See [`Model::name`].
    fn name(&self) -> String;
    /// See [`Model::description`].
    fn description(&self) -> String;
    /// See [`Model::needs`].
    fn needs(&self) -> Needs;
    /// Fits and boxes the fitted model.
    fn fit_any(&self, y: &[f64]) -> Result<Box<dyn Fitted>>;
    /// See [`Model::fit_warm`].
    fn fit_any_warm(&self, y: &[f64], warm: &mut WarmStart) -> Result<Box<dyn Fitted>>;
}

impl<M: Model> AnyModel for M {
    fn name(&self) -> String {
        Model::name(self)
    }
    fn description(&self) -> String {
        Model::description(self)
    }
    fn needs(&self) -> Needs {
        Model::needs(self)
    }
    fn fit_any(&self, y: &[f64]) -> Result<Box<dyn Fitted>> {
        Ok(Box::new(self.fit(y)?))
    }
    fn fit_any_warm(&self, y: &[f64], warm: &mut WarmStart) -> Result<Box<dyn Fitted>> {
        Ok(Box::new(self.fit_warm(y, warm)?))
    }
}

/// Whether a model may, must or must not describe a seasonal pattern: a
/// product's `seasonal` setting (unset: the model's own tests decide).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Season {
    /// The model's own tests decide.
    #[default]
    Tested,
    /// No seasonal pattern (`seasonal = false`).
    Never,
    /// A seasonal pattern (`seasonal = true`).
    Always,
}

/// The automatic models that choose for themselves whether a series is
/// seasonal, restricted by `season`; `None` for any other name (their
/// seasonality is fixed by what they are).
pub fn with_season(name: &str, season: Season) -> Option<Box<dyn AnyModel>> {
    match name {
        "ets-auto" => Some(Box::new(ets_seasonal::EtsAuto::with_season(season))),
        "arima-auto" => Some(Box::new(arima::AutoArima::with_season(season))),
        "theta" => Some(Box::new(theta::Theta::with_season(season))),
        _ => None,
    }
}

/// The default candidate set, in the order reports list them.
pub fn candidates() -> Vec<Box<dyn AnyModel>> {
    // Each model family registers its specs here.
    let mut list: Vec<Box<dyn AnyModel>> = Vec::new();
    for spec in baseline::MovingAverage::candidates() {
        list.push(Box::new(spec));
    }
    list.push(Box::new(baseline::Naive));
    list.push(Box::new(baseline::SeasonalNaive));
    list.push(Box::new(theta::Theta::new()));
    list.push(Box::new(intermittent::Croston::classic()));
    list.push(Box::new(intermittent::Croston::sba()));
    list.push(Box::new(intermittent::Tsb::new()));
    for spec in holt_winters::HoltWinters::all() {
        list.push(Box::new(spec));
    }
    for spec in ets::Ets::all() {
        // The non-seasonal automatic choice is a step of `ets-auto` and
        // `mstl-ets`, not a candidate of its own.
        if spec.form() != ets::EtsForm::Auto {
            list.push(Box::new(spec));
        }
    }
    list.push(Box::new(ets_seasonal::EtsAuto::new()));
    list.push(Box::new(decomposition::MstlEts));
    list.push(Box::new(arima::AutoArima::new()));
    list
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_seasonal_setting_restricts_the_automatic_models() {
        // AirPassengers (statsforecast 2.1.1, tests/reference/datasets.json):
        // strongly seasonal, so the unrestricted ets-auto picks a seasonal
        // form, arima-auto a seasonal difference and theta a seasonal
        // adjustment (tests/reference_*.rs check those choices against
        // statsforecast). Never removes the seasonal part from each; Always
        // keeps it on a trend-only series, where the tests find none.
        let air = &ets_seasonal::tests::AIR[..72];
        let ets = |s| ets_seasonal::EtsAuto::with_season(s).fit(air).unwrap();
        assert!(
            ets(Season::Tested).method().ends_with(",M)")
                || ets(Season::Tested).method().ends_with(",A)")
        );
        assert!(
            ets(Season::Never).method().ends_with(",N)"),
            "{}",
            ets(Season::Never).method()
        );
        let arima = |s| arima::AutoArima::with_season(s).fit(air).unwrap().order();
        let o = arima(Season::Never);
        assert_eq!((o.sd, o.sp, o.sq), (0, 0, 0), "{}", o.label());
        let theta = |s, y: &[f64]| theta::Theta::with_season(s).fit(y).unwrap();
        assert!(theta(Season::Tested, air).decomposition().is_some());
        assert!(theta(Season::Never, air).decomposition().is_none());
        let trend: Vec<f64> = (0..48)
            .map(|t| 100.0 + 2.0 * t as f64 + ((t * 7) % 5) as f64)
            .collect();
        assert!(theta(Season::Tested, &trend).decomposition().is_none());
        assert!(theta(Season::Always, &trend).decomposition().is_some());
        assert_eq!(
            arima::AutoArima::with_season(Season::Always)
                .fit(&trend)
                .unwrap()
                .order()
                .sd,
            1
        );
        let e = ets_seasonal::EtsAuto::with_season(Season::Always)
            .fit(&trend)
            .unwrap();
        assert!(!e.method().ends_with(",N)"), "{}", e.method());
        // Only these three have a choice to restrict.
        assert!(with_season("holt-winters-additive", Season::Never).is_none());
        for name in ["ets-auto", "arima-auto", "theta"] {
            assert_eq!(with_season(name, Season::Never).unwrap().name(), name);
        }
    }

    #[test]
    fn z_values() {
        // Standard normal quantiles (common statistical tables): 1.2816, 1.9600.
        assert!((z_for_level(0.80).unwrap() - 1.281_551_565_5).abs() < 1e-6);
        assert!((z_for_level(0.95).unwrap() - 1.959_963_985).abs() < 1e-6);
        assert!(z_for_level(1.0).is_err());
    }

    #[test]
    fn needs_check_reasons() {
        let n = Needs {
            min_months: 24,
            positive: true,
            seasonal: true,
        };
        let e = n.check("m", &[1.0; 10]).unwrap_err().to_string();
        assert!(e.contains("at least 24"), "{e}");
        let mut y = vec![1.0; 30];
        y[3] = 0.0;
        let e = n.check("m", &y).unwrap_err().to_string();
        assert!(e.contains("above zero"), "{e}");
    }
}
