//! Exponential smoothing without seasonality — simple, Holt's linear,
//! damped, and an automatic choice among them by AICc — fitted with the
//! `augurs` crate (0.10, `augurs-ets`).
//!
//! # Formula
//!
//! Innovations state-space form, Hyndman, Koehler, Ord & Snyder (2008),
//! *Forecasting with Exponential Smoothing: The State Space Approach*,
//! ch. 2, and Hyndman & Athanasopoulos, *Forecasting: Principles and
//! Practice* (3rd ed.), §8.5. With one-step prediction ŷ_t and error
//! u_t = y_t − ŷ_t (φ = 1 when not damped, no b when there is no trend):
//!
//! ```text
//! ŷ_t = l_{t-1} + φ b_{t-1}
//! l_t = l_{t-1} + φ b_{t-1} + α u_t
//! b_t = φ b_{t-1} + β u_t
//! ŷ_{n+h} = l_n + (φ + φ² + … + φ^h) b_n
//! ```
//!
//! β is the state-space slope parameter (= α β* of the component form,
//! the meaning of `smoothing_trend` in statsmodels' `ETSModel`).
//!
//! | spec | ETS form | trend |
//! |---|---|---|
//! | `ets-simple` | ETS(A,N,N), simple exponential smoothing | none |
//! | `ets-holt` | ETS(A,A,N), Holt's linear trend | additive |
//! | `ets-damped` | ETS(A,Ad,N), damped trend | damped |
//! | `ets-auto` | best AICc of ETS(A,N,N), (A,A,N), (A,Ad,N), (M,N,N), (M,A,N), (M,Ad,N) | chosen |
//!
//! Multiplicative-error forms are tried by `ets-auto` only when every month
//! is above zero; they have the same point forecasts as the additive forms
//! but a likelihood in relative errors, u_t / ŷ_t.
//!
//! # Estimation
//!
//! `augurs-ets` (a port of statsforecast's `AutoETS`) maximises the
//! Gaussian likelihood — for additive errors, minimises n·ln(SSE) — over
//! the smoothing parameters and the initial states l₀, b₀ with bounded
//! Nelder–Mead. `ets-auto` is augurs' `AutoETS` with the non-seasonal search
//! `ZZN`; the three fixed forms are fitted directly with augurs'
//! `model::Unfit` (augurs' search finds nothing for a no-trend spec such as
//! `ANN`, and its seasonal forms are not implemented, so neither is used).
//!
//! augurs does not expose the fitted parameters. They are recovered
//! exactly from its one-step predictions, which satisfy
//! Δ_t = ŷ_{t+1} − ŷ_t = α u_t (no trend) and
//! Δ_{t+1} − φ Δ_t = (α + φβ) u_{t+1} − φα u_t (trend), with φ from the
//! forecast path, (ŷ_{n+3} − ŷ_{n+2}) / (ŷ_{n+2} − ŷ_{n+1}). The recovered
//! values are replayed through the recursion above and kept only if they
//! reproduce augurs' predictions; otherwise (e.g. a constant series, where
//! any α fits equally well) [`Fitted::params`] leaves them out.
//!
//! # Prediction intervals
//!
//! Normal, point ± z σ_h, with the analytic variances of Hyndman et al.
//! (2008) ch. 6 as computed by augurs: class 1 for additive errors (FPP3
//! §8.7, Table 8.8):
//!
//! ```text
//! ETS(A,N,N):  σ_h² = σ² [1 + α²(h−1)]
//! ETS(A,A,N):  σ_h² = σ² [1 + (h−1){α² + αβh + β²h(2h−1)/6}]
//! ETS(A,Ad,N): σ_h² = σ² [1 + α²(h−1) + βφh/(1−φ)² {2α(1−φ) + βφ}
//!                         − βφ(1−φ^h)/((1−φ)²(1−φ²)) {2α(1−φ²) + βφ(1+2φ−φ^h)}]
//! ```
//!
//! and class 2 for the multiplicative-error forms `ets-auto` may choose.
//! σ² = SSE / (n − k − 2), k = number of estimated smoothing parameters and
//! initial states (augurs' and statsforecast's convention; statsmodels uses
//! SSE / n, so its intervals are narrower by √((n − k − 2)/n)). Should
//! augurs give no finite interval, the class-1 formula above is computed
//! here from the recovered parameters instead ([`FittedEts::analytic_sd`]);
//! for a multiplicative-error fit that fallback uses absolute errors, an
//! approximation.
//!
//! # Parameters
//!
//! | name | default | range |
//! |---|---|---|
//! | α (level smoothing) | estimated | 0.0001 ≤ α ≤ 0.9999 |
//! | β (slope smoothing, state-space) | estimated (trend forms) | 0.0001 ≤ β ≤ α |
//! | φ (damping) | estimated (damped form) | 0.8 ≤ φ ≤ 0.98 |
//! | l₀, b₀ (initial level, slope) | estimated | free |
//! | σ² (error variance) | SSE / (n − k − 2) | ≥ 0 |
//!
//! The bounds are augurs' defaults, the same as statsmodels 0.15.0
//! `ETSModel`'s and R forecast's `ets`.

use std::panic::{catch_unwind, AssertUnwindSafe};

use augurs::ets::model::{
    ErrorComponent, Model as AugursModel, ModelType, SeasonalComponent, TrendComponent, Unfit,
};
use augurs::ets::AutoETS;
use augurs::{Fit, Predict};

use super::{z_for_level, Fitted, Forecast, Model, Needs};
use crate::error::{Error, Result};

/// Level at which augurs is asked for an interval; the forecast standard
/// deviation is read back from it, so any requested level can be served.
const PROBE_LEVEL: f64 = 0.95;

/// Which non-seasonal exponential smoothing form a spec fits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EtsForm {
    /// Simple exponential smoothing, ETS(A,N,N).
    Simple,
    /// Holt's linear trend, ETS(A,A,N).
    Holt,
    /// Damped trend, ETS(A,Ad,N).
    Damped,
    /// Automatic choice by AICc among the non-seasonal forms.
    Auto,
}

/// Trend of a fitted model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Trend {
    /// No trend.
    None,
    /// Additive (linear) trend.
    Additive,
    /// Damped additive trend.
    Damped,
}

impl Trend {
    fn letter(self) -> &'static str {
        match self {
            Trend::None => "N",
            Trend::Additive => "A",
            Trend::Damped => "Ad",
        }
    }
}

/// Non-seasonal exponential smoothing spec (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Ets {
    form: EtsForm,
}

impl Ets {
    /// A spec for the given form.
    pub fn new(form: EtsForm) -> Self {
        Ets { form }
    }

    /// `ets-simple`: simple exponential smoothing.
    pub fn simple() -> Self {
        Ets::new(EtsForm::Simple)
    }

    /// `ets-holt`: Holt's linear trend.
    pub fn holt() -> Self {
        Ets::new(EtsForm::Holt)
    }

    /// `ets-damped`: damped trend.
    pub fn damped() -> Self {
        Ets::new(EtsForm::Damped)
    }

    /// `ets-auto`: automatic choice by AICc.
    pub fn auto() -> Self {
        Ets::new(EtsForm::Auto)
    }

    /// The four specs, in the order reports list them.
    pub fn all() -> [Ets; 4] {
        [Ets::simple(), Ets::holt(), Ets::damped(), Ets::auto()]
    }

    /// The form this spec fits.
    pub fn form(&self) -> EtsForm {
        self.form
    }

    fn model_name(&self) -> &'static str {
        match self.form {
            EtsForm::Simple => "ets-simple",
            EtsForm::Holt => "ets-holt",
            EtsForm::Damped => "ets-damped",
            EtsForm::Auto => "ets-auto",
        }
    }

    /// Fits like [`Model::fit`], reporting errors under `name` (used when
    /// this fit is one step of another model).
    pub(crate) fn fit_named(&self, name: &str, y: &[f64]) -> Result<FittedEts> {
        Model::needs(self).check(name, y)?;
        let model_error = |message: String| Error::Model {
            model: name.to_string(),
            message,
        };
        let unfit = |trend: TrendComponent, damped: bool| {
            Unfit::new(ModelType {
                error: ErrorComponent::Additive,
                trend,
                // Never a seasonal component: augurs 0.10 reaches
                // `unimplemented!()` for it.
                season: SeasonalComponent::None,
            })
            .damped(damped)
        };
        let fitted = guarded(|| match self.form {
            EtsForm::Simple => unfit(TrendComponent::None, false)
                .fit(y)
                .map_err(|e| e.to_string()),
            EtsForm::Holt => unfit(TrendComponent::Additive, false)
                .fit(y)
                .map_err(|e| e.to_string()),
            EtsForm::Damped => unfit(TrendComponent::Additive, true)
                .fit(y)
                .map_err(|e| e.to_string()),
            EtsForm::Auto => AutoETS::non_seasonal()
                .fit(y)
                .map(|f| f.model().clone())
                .map_err(|e| e.to_string()),
        })
        .map_err(|e| model_error(format!("augurs could not fit the model: {e}")))?;
        FittedEts::new(name, self.form, fitted, y)
    }
}

impl Model for Ets {
    type Fitted = FittedEts;

    fn name(&self) -> String {
        self.model_name().to_string()
    }

    fn description(&self) -> String {
        match self.form {
            EtsForm::Simple => "simple exponential smoothing, ETS(A,N,N): a level that adapts each month",
            EtsForm::Holt => "Holt's linear trend, ETS(A,A,N): level and a straight-line trend",
            EtsForm::Damped => "damped trend, ETS(A,Ad,N): a trend that flattens out over the horizon",
            EtsForm::Auto => "automatic non-seasonal ETS: the best of none, linear or damped trend with additive or multiplicative errors, by AICc",
        }
        .to_string()
    }

    fn needs(&self) -> Needs {
        // k estimated quantities (α, l₀; + β, b₀; + φ) and σ² = SSE/(n − k − 2)
        // with at least two degrees of freedom: n ≥ k + 4.
        let k = match self.form {
            EtsForm::Simple => 2,
            EtsForm::Holt => 4,
            EtsForm::Damped | EtsForm::Auto => 5,
        };
        Needs {
            min_months: k + 4,
            positive: false,
            seasonal: false,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<FittedEts> {
        self.fit_named(self.model_name(), y)
    }
}

/// Smoothing parameters and states of a fitted model, recovered from
/// augurs' one-step predictions (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SmoothingParams {
    /// Level smoothing α.
    pub alpha: f64,
    /// State-space slope smoothing β (0 without trend).
    pub beta: f64,
    /// Damping φ (1 when not damped).
    pub phi: f64,
    /// Initial level l₀.
    pub initial_level: f64,
    /// Initial slope b₀ (0 without trend).
    pub initial_trend: f64,
    /// Level after the last month, l_n.
    pub final_level: f64,
    /// Slope after the last month, b_n.
    pub final_trend: f64,
}

/// A fitted non-seasonal ETS model.
#[derive(Debug, Clone)]
pub struct FittedEts {
    name: String,
    model: AugursModel,
    multiplicative_error: bool,
    trend: Trend,
    n: usize,
    sse: f64,
    params: Option<SmoothingParams>,
}

impl FittedEts {
    fn new(name: &str, form: EtsForm, model: AugursModel, y: &[f64]) -> Result<Self> {
        let model_error = |message: String| Error::Model {
            model: name.to_string(),
            message,
        };
        let kind = model.model_type();
        // Confirm augurs returned the kind of model asked for: never seasonal,
        // and the fixed forms exactly as requested.
        if kind.season != SeasonalComponent::None {
            return Err(model_error(format!(
                "augurs returned a seasonal model ({kind}) for a non-seasonal spec"
            )));
        }
        let trend = match (kind.trend, model.damped()) {
            (TrendComponent::None, false) => Trend::None,
            (TrendComponent::Additive, false) => Trend::Additive,
            (TrendComponent::Additive, true) => Trend::Damped,
            _ => {
                return Err(model_error(format!(
                    "augurs returned an unsupported trend ({kind}, damped: {})",
                    model.damped()
                )))
            }
        };
        let multiplicative_error = kind.error == ErrorComponent::Multiplicative;
        let expected = match form {
            EtsForm::Simple => Some(Trend::None),
            EtsForm::Holt => Some(Trend::Additive),
            EtsForm::Damped => Some(Trend::Damped),
            EtsForm::Auto => None,
        };
        if expected.is_some_and(|t| t != trend) || (form != EtsForm::Auto && multiplicative_error) {
            return Err(model_error(format!(
                "augurs returned {kind} (damped: {}) instead of the requested form",
                model.damped()
            )));
        }

        let in_sample = guarded(|| model.predict_in_sample(None).map_err(|e| e.to_string()))
            .map_err(|e| model_error(format!("augurs gave no in-sample predictions: {e}")))?;
        let path = guarded(|| model.predict(3, None).map_err(|e| e.to_string()))
            .map_err(|e| model_error(format!("augurs gave no forecast: {e}")))?;
        let fitted = in_sample.point;
        if fitted.len() != y.len()
            || path.point.len() != 3
            || fitted.iter().chain(&path.point).any(|v| !v.is_finite())
        {
            return Err(model_error(
                "augurs returned non-finite or misshapen predictions".to_string(),
            ));
        }
        let sse = y
            .iter()
            .zip(&fitted)
            .map(|(a, f)| (a - f) * (a - f))
            .sum::<f64>();
        if !sse.is_finite() {
            return Err(model_error(
                "the in-sample errors overflow; values are too large".to_string(),
            ));
        }
        let params = recover_params(trend, y, &fitted, &path.point);
        Ok(FittedEts {
            name: name.to_string(),
            model,
            multiplicative_error,
            trend,
            n: y.len(),
            sse,
            params,
        })
    }

    /// The fitted form in the usual taxonomy, e.g. `ETS(A,Ad,N)`.
    pub fn method(&self) -> String {
        format!(
            "ETS({},{},N)",
            if self.multiplicative_error { "M" } else { "A" },
            self.trend.letter()
        )
    }

    /// The fitted trend.
    pub fn trend(&self) -> Trend {
        self.trend
    }

    /// Whether the errors are multiplicative (only `ets-auto` chooses that).
    pub fn multiplicative_error(&self) -> bool {
        self.multiplicative_error
    }

    /// Recovered smoothing parameters and states, when identifiable.
    pub fn smoothing(&self) -> Option<SmoothingParams> {
        self.params
    }

    /// Log-likelihood without constants, −(n/2)·ln(SSE) for additive errors
    /// (augurs' and statsforecast's `loglik`). The full Gaussian
    /// log-likelihood (statsmodels' `llf`) is this − (n/2)(ln(2π/n) + 1).
    pub fn log_likelihood(&self) -> f64 {
        self.model.log_likelihood()
    }

    /// AICc in statsforecast's and R forecast's convention, counting σ²
    /// among the parameters. augurs 0.10 leaves σ² out of its AIC term, so
    /// its `aicc()` is 2 lower; the choice among forms is the same.
    pub fn aicc(&self) -> f64 {
        self.model.aicc() + 2.0
    }

    /// Number of estimated smoothing parameters and initial states, k.
    pub fn n_estimated(&self) -> usize {
        match self.trend {
            Trend::None => 2,
            Trend::Additive => 4,
            Trend::Damped => 5,
        }
    }

    /// σ² = SSE / (n − k − 2) of the absolute one-step errors.
    pub fn sigma2(&self) -> f64 {
        self.sse / (self.n as f64 - self.n_estimated() as f64 - 2.0)
    }

    /// Forecast standard deviations for horizons 1..=h from the class-1
    /// analytic variances (module docs) with the recovered parameters and
    /// [`FittedEts::sigma2`]; `None` when the parameters were not
    /// identifiable.
    pub fn analytic_sd(&self, horizon: usize) -> Option<Vec<f64>> {
        let p = self.params?;
        let s2 = self.sigma2();
        Some(
            (1..=horizon)
                .map(|h| (s2 * variance_factor(self.trend, p.alpha, p.beta, p.phi, h)).sqrt())
                .collect(),
        )
    }

    /// Point forecasts and their standard deviations, not clipped (the
    /// decomposition model adds its seasonal pattern before clipping).
    pub(crate) fn point_and_sd(&self, horizon: usize) -> Result<(Vec<f64>, Vec<f64>)> {
        if horizon == 0 {
            return Ok((Vec::new(), Vec::new()));
        }
        let model_error = |message: String| Error::Model {
            model: self.name.clone(),
            message,
        };
        let f = guarded(|| {
            self.model
                .predict(horizon, PROBE_LEVEL)
                .map_err(|e| e.to_string())
        })
        .map_err(|e| model_error(format!("augurs could not forecast: {e}")))?;
        if f.point.len() != horizon || f.point.iter().any(|v| !v.is_finite()) {
            return Err(model_error(
                "augurs returned non-finite point forecasts".to_string(),
            ));
        }
        let z = z_for_level(PROBE_LEVEL)?;
        let from_augurs: Option<Vec<f64>> = f.intervals.as_ref().and_then(|i| {
            let sd: Vec<f64> = i
                .lower
                .iter()
                .zip(&i.upper)
                .map(|(lo, hi)| (hi - lo) / (2.0 * z))
                .collect();
            (sd.len() == horizon && sd.iter().all(|s| s.is_finite() && *s >= 0.0)).then_some(sd)
        });
        let sd = match from_augurs {
            Some(sd) => sd,
            None => self
                .analytic_sd(horizon)
                .filter(|sd| sd.iter().all(|s| s.is_finite()))
                .ok_or_else(|| {
                    model_error(
                        "augurs gave no prediction interval and the parameters needed for the analytic one could not be recovered".to_string(),
                    )
                })?,
        };
        Ok((f.point, sd))
    }
}

impl Fitted for FittedEts {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let (point, sd) = self.point_and_sd(horizon)?;
        Forecast::normal(point, &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        let mut out = Vec::with_capacity(6);
        if let Some(p) = self.params {
            out.push(("alpha".to_string(), p.alpha));
            if self.trend != Trend::None {
                out.push(("beta".to_string(), p.beta));
            }
            if self.trend == Trend::Damped {
                out.push(("phi".to_string(), p.phi));
            }
            out.push(("initial_level".to_string(), p.initial_level));
            if self.trend != Trend::None {
                out.push(("initial_trend".to_string(), p.initial_trend));
            }
        }
        out.push(("sigma2".to_string(), self.sigma2()));
        out
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

/// Variance factor v_h / σ² of the class-1 models (module docs), for
/// horizon h ≥ 1. `beta` and `phi` are ignored where the trend has none.
pub fn variance_factor(trend: Trend, alpha: f64, beta: f64, phi: f64, h: usize) -> f64 {
    let hf = h as f64;
    match trend {
        Trend::None => 1.0 + alpha * alpha * (hf - 1.0),
        Trend::Additive => {
            1.0 + (hf - 1.0)
                * (alpha * alpha + alpha * beta * hf + beta * beta * hf * (2.0 * hf - 1.0) / 6.0)
        }
        Trend::Damped => {
            let phi_h = phi.powi(h as i32);
            let one_m = 1.0 - phi;
            1.0 + alpha * alpha * (hf - 1.0)
                + beta * phi * hf / (one_m * one_m) * (2.0 * alpha * one_m + beta * phi)
                - beta * phi * (1.0 - phi_h) / (one_m * one_m * (1.0 - phi * phi))
                    * (2.0 * alpha * (1.0 - phi * phi) + beta * phi * (1.0 + 2.0 * phi - phi_h))
        }
    }
}

/// Replays the recursion of the module docs: writes the one-step
/// predictions ŷ_1..ŷ_n into `fitted` and returns the final (l_n, b_n).
/// Without a trend pass β = 0 and b₀ = 0; φ = 1 when not damped.
pub fn replay(
    y: &[f64],
    alpha: f64,
    beta: f64,
    phi: f64,
    initial_level: f64,
    initial_trend: f64,
    fitted: &mut Vec<f64>,
) -> (f64, f64) {
    fitted.clear();
    let (mut l, mut b) = (initial_level, initial_trend);
    for &v in y {
        let f = l + phi * b;
        fitted.push(f);
        let u = v - f;
        l = f + alpha * u;
        b = phi * b + beta * u;
    }
    (l, b)
}

/// Recovers (α, β, φ, l₀, b₀) from augurs' one-step predictions `fitted`
/// and its first three forecasts `next`, then checks them by replay.
fn recover_params(
    trend: Trend,
    y: &[f64],
    fitted: &[f64],
    next: &[f64],
) -> Option<SmoothingParams> {
    let n = y.len();
    if n < 4 || next.len() < 3 {
        return None;
    }
    let scale = y.iter().fold(0.0_f64, |m, v| m.max(v.abs())).max(1e-300);
    // ŷ_1..ŷ_{n+1}; Δ_t = ŷ_{t+1} − ŷ_t and u_t for t = 1..n (0-based here).
    let g = |t: usize| if t < n { fitted[t] } else { next[0] };
    let u: Vec<f64> = y.iter().zip(fitted).map(|(a, f)| a - f).collect();
    let delta: Vec<f64> = (0..n).map(|t| g(t + 1) - g(t)).collect();
    let uu: f64 = u.iter().map(|e| e * e).sum();
    // Without errors every α fits equally well: not identifiable.
    if uu <= (1e-9 * scale).powi(2) * n as f64 {
        return None;
    }
    let (alpha, beta, phi) = match trend {
        Trend::None => {
            let du: f64 = delta.iter().zip(&u).map(|(d, e)| d * e).sum();
            (du / uu, 0.0, 1.0)
        }
        Trend::Additive | Trend::Damped => {
            let phi = if trend == Trend::Additive {
                1.0
            } else {
                let (d1, d2) = (next[1] - next[0], next[2] - next[1]);
                if d1.abs() <= 1e-9 * scale {
                    // The slope has died out: φ no longer shows in the output.
                    return None;
                }
                d2 / d1
            };
            // Δ_{t+1} − φΔ_t = a₁ u_{t+1} + a₂ u_t, t = 1..n−1.
            let (mut s11, mut s12, mut s22, mut r1, mut r2) = (0.0, 0.0, 0.0, 0.0, 0.0);
            for t in 0..n - 1 {
                let d = delta[t + 1] - phi * delta[t];
                let (x1, x2) = (u[t + 1], u[t]);
                s11 += x1 * x1;
                s12 += x1 * x2;
                s22 += x2 * x2;
                r1 += x1 * d;
                r2 += x2 * d;
            }
            let det = s11 * s22 - s12 * s12;
            if det.abs() <= 1e-12 * s11 * s22 || phi == 0.0 {
                return None;
            }
            let a1 = (r1 * s22 - r2 * s12) / det;
            let a2 = (s11 * r2 - s12 * r1) / det;
            let alpha = -a2 / phi;
            let beta = (a1 - alpha) / phi;
            (alpha, beta, phi)
        }
    };
    let (l0, b0) = match trend {
        Trend::None => (fitted[0], 0.0),
        _ => {
            // Δ_1 = (α + φβ) u_1 + φ² b₀ and ŷ_1 = l₀ + φ b₀.
            let b0 = (delta[0] - (alpha + phi * beta) * u[0]) / (phi * phi);
            (fitted[0] - phi * b0, b0)
        }
    };
    let mut replayed = Vec::with_capacity(n);
    let (ln, bn) = replay(y, alpha, beta, phi, l0, b0, &mut replayed);
    let tol = 1e-7 * scale;
    let reproduces = replayed
        .iter()
        .zip(fitted)
        .all(|(a, b)| (a - b).abs() <= tol)
        && (ln + phi * bn - next[0]).abs() <= tol;
    let all_finite = [alpha, beta, phi, l0, b0, ln, bn]
        .iter()
        .all(|v| v.is_finite());
    (reproduces && all_finite).then_some(SmoothingParams {
        alpha,
        beta,
        phi,
        initial_level: l0,
        initial_trend: b0,
        final_level: ln,
        final_trend: bn,
    })
}

/// Runs an augurs call, turning a panic inside it into an error. A last
/// resort: inputs are checked before every call, but augurs 0.10 has
/// `unimplemented!()` and `unwrap()` on paths we do not fully control.
fn guarded<T>(
    f: impl FnOnce() -> std::result::Result<T, String>,
) -> std::result::Result<T, String> {
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(r) => r,
        Err(payload) => {
            let what = payload
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| payload.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown cause".to_string());
            Err(format!("augurs stopped with an internal error ({what})"))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::DEFAULT_LEVELS;

    /// AirPassengers 1956-01..1960-12 (tests/reference/datasets.json,
    /// `AirPassengers_last60`, from statsforecast 2.1.1).
    const AIR60: [f64; 60] = [
        284.0, 277.0, 317.0, 313.0, 318.0, 374.0, 413.0, 405.0, 355.0, 306.0, 271.0, 306.0, 315.0,
        301.0, 356.0, 348.0, 355.0, 422.0, 465.0, 467.0, 404.0, 347.0, 305.0, 336.0, 340.0, 318.0,
        362.0, 348.0, 363.0, 435.0, 491.0, 505.0, 404.0, 359.0, 310.0, 337.0, 360.0, 342.0, 406.0,
        396.0, 420.0, 472.0, 548.0, 559.0, 463.0, 407.0, 362.0, 405.0, 417.0, 391.0, 419.0, 461.0,
        472.0, 535.0, 622.0, 606.0, 508.0, 461.0, 390.0, 432.0,
    ];

    fn check_contract(f: &Forecast, h: usize) {
        assert_eq!(f.point.len(), h);
        for i in &f.intervals {
            assert_eq!(i.lower.len(), h);
            for k in 0..h {
                assert!(i.lower[k] <= f.point[k] && f.point[k] <= i.upper[k]);
                assert!(i.lower[k] >= 0.0 && i.upper[k].is_finite());
            }
        }
    }

    /// Reads augurs' internal fitted values from its Debug output (test
    /// only: augurs 0.10 has no accessor): (α, β, φ, l₀, b₀).
    fn augurs_internal(fit: &FittedEts) -> (f64, f64, f64, f64, f64) {
        let s = format!("{:?}", fit.model);
        let fs = &s[s.find("model_fit: FitState").unwrap()..];
        let num = |key: &str, from: &str| -> f64 {
            let i = from.find(key).unwrap() + key.len();
            let rest = &from[i..];
            let end = rest.find([',', ' ', ']', '}']).unwrap();
            rest[..end].parse().unwrap()
        };
        let x = &fs[fs.find("x: [").unwrap() + 4..];
        let mut states = x
            .split(", ")
            .map(|v| v.trim_end_matches(']').parse::<f64>().unwrap());
        let l0 = states.next().unwrap();
        let b0 = if fit.trend == Trend::None {
            0.0
        } else {
            states.next().unwrap()
        };
        let ps = &fs[fs.find("params: Params").unwrap()..];
        (
            num("alpha: ", ps),
            num("beta: ", ps),
            num("phi: ", ps),
            l0,
            b0,
        )
    }

    #[test]
    fn recovered_params_equal_augurs_internal_values() {
        let mut spike = vec![10.0; 36];
        spike[20] = 500.0;
        let noisy: Vec<f64> = (0..40)
            .map(|i| 50.0 + 2.0 * i as f64 + ((i * 7919) % 13) as f64)
            .collect();
        for y in [&AIR60[..], &spike, &noisy] {
            for spec in Ets::all() {
                let fit = spec.fit(y).unwrap();
                let p = fit.smoothing().expect("identifiable");
                let (a, b, phi, l0, b0) = augurs_internal(&fit);
                let close = |x: f64, t: f64| (x - t).abs() <= 1e-6 * (1.0 + t.abs());
                assert!(close(p.alpha, a), "{:?} {p:?} vs {a}", spec.form());
                assert!(close(p.beta, b), "{:?} {p:?} vs {b}", spec.form());
                assert!(close(p.phi, phi), "{:?} {p:?} vs {phi}", spec.form());
                assert!(
                    close(p.initial_level, l0),
                    "{:?} {p:?} vs {l0}",
                    spec.form()
                );
                assert!(
                    close(p.initial_trend, b0),
                    "{:?} {p:?} vs {b0}",
                    spec.form()
                );
            }
        }
    }

    #[test]
    fn analytic_sd_matches_augurs_intervals() {
        for spec in [Ets::simple(), Ets::holt(), Ets::damped()] {
            let fit = spec.fit(&AIR60).unwrap();
            let (_, sd) = fit.point_and_sd(12).unwrap();
            let ours = fit.analytic_sd(12).unwrap();
            for (a, b) in sd.iter().zip(&ours) {
                assert!((a / b - 1.0).abs() < 1e-6, "{:?}: {a} vs {b}", spec.form());
            }
        }
    }

    #[test]
    fn auto_picks_a_non_seasonal_form_and_reports_it() {
        let fit = Ets::auto().fit(&AIR60).unwrap();
        // statsforecast 2.1.1 AutoETS(season_length=1) picks ETS(M,N,N) here
        // (tests/reference/statsforecast.json); checked in reference_ets.rs.
        assert_eq!(fit.method(), "ETS(M,N,N)");
        assert!(fit.multiplicative_error());
    }

    #[test]
    fn awkward_series_never_panic_and_keep_the_contract() {
        let mut spike = vec![10.0; 36];
        spike[20] = 5000.0;
        let mut sparse = vec![0.0; 36];
        sparse[7] = 3.0;
        sparse[30] = 1.0;
        let trend: Vec<f64> = (0..36).map(|i| 100.0 + 3.0 * i as f64).collect();
        let series: Vec<(&str, Vec<f64>)> = vec![
            ("constant", vec![42.0; 36]),
            ("all zero", vec![0.0; 36]),
            ("spike", spike),
            ("sparse", sparse),
            ("straight line", trend),
            ("huge", vec![1e12; 36]),
            (
                "nearly constant",
                (0..36).map(|i| 100.0 + 1e-9 * (i % 3) as f64).collect(),
            ),
            ("tiny", (0..36).map(|i| 1e-9 * (1 + i % 4) as f64).collect()),
        ];
        for spec in Ets::all() {
            for (what, y) in &series {
                let fit = spec.fit(y).unwrap_or_else(|e| panic!("{what}: {e}"));
                let f = fit.forecast(12, &DEFAULT_LEVELS).unwrap();
                check_contract(&f, 12);
                assert!(
                    f.point.iter().all(|v| v.is_finite()),
                    "{what} {:?}",
                    spec.form()
                );
                // Same input, same output.
                assert_eq!(
                    spec.fit(y).unwrap().forecast(12, &DEFAULT_LEVELS).unwrap(),
                    f
                );
            }
        }
        // Negative input (not consumption, but reachable): an answer or an
        // error, never a panic.
        let negative: Vec<f64> = (0..36).map(|i| -50.0 + (i % 5) as f64).collect();
        for spec in Ets::all() {
            if let Ok(fit) = spec.fit(&negative) {
                check_contract(&fit.forecast(12, &DEFAULT_LEVELS).unwrap(), 12);
            }
        }
        // A constant series is forecast as that constant.
        let f = Ets::holt()
            .fit(&[42.0; 36])
            .unwrap()
            .forecast(3, &[0.8])
            .unwrap();
        assert!(f.point.iter().all(|v| (v - 42.0).abs() < 1e-6), "{f:?}");
    }

    #[test]
    fn too_short_and_non_finite_are_refused_with_a_reason() {
        let e = Ets::damped().fit(&[1.0; 5]).unwrap_err().to_string();
        assert!(e.contains("at least 9 months"), "{e}");
        let mut y = vec![1.0; 20];
        y[4] = f64::NAN;
        let e = Ets::auto().fit(&y).unwrap_err().to_string();
        assert!(e.contains("not a finite number"), "{e}");
        let fit = Ets::simple().fit(&AIR60).unwrap();
        assert!(fit.forecast(0, &[0.8]).unwrap().point.is_empty());
        assert!(fit.forecast(3, &[1.5]).is_err());
    }
}
