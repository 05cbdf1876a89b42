//! Holt-Winters exponential smoothing with a (optionally damped) additive
//! trend and additive or multiplicative seasonality of period 12.
//!
//! # Formula
//!
//! Component form, Hyndman & Athanasopoulos, *Forecasting: Principles and
//! Practice* (3rd ed.), §8.3, with the damped trend of §8.2 (φ = 1 when not
//! damped). Observations are y₁..yₙ; the initial states are l₀, b₀ and the
//! twelve seasons s₋₁₁..s₀, where s₋₁₁ applies to y₁.
//!
//! ```text
//! additive:        ŷ_t = l_{t-1} + φ b_{t-1} + s_{t-12}
//!   l_t = α (y_t − s_{t-12}) + (1 − α)(l_{t-1} + φ b_{t-1})
//!   b_t = β (l_t − l_{t-1}) + (1 − β) φ b_{t-1}
//!   s_t = γ (y_t − l_{t-1} − φ b_{t-1}) + (1 − γ) s_{t-12}
//! multiplicative:  ŷ_t = (l_{t-1} + φ b_{t-1}) s_{t-12}
//!   l_t = α y_t / s_{t-12} + (1 − α)(l_{t-1} + φ b_{t-1})
//!   b_t = β (l_t − l_{t-1}) + (1 − β) φ b_{t-1}
//!   s_t = γ y_t / (l_{t-1} + φ b_{t-1}) + (1 − γ) s_{t-12}
//! forecast:        ŷ_{n+h} = l_n + (φ + … + φ^h) b_n  (+ or ×)  s_{n+h−12(k+1)},  k = ⌊(h−1)/12⌋
//! ```
//!
//! β here is the component-form β* of FPP §8.1; the seasonal update uses the
//! previous level and trend, as in FPP §8.3 and statsmodels 0.15.0
//! (`statsmodels.tsa.holtwinters`), so the additive form is exactly the
//! innovations state-space model ETS(A,A,A) / ETS(A,Ad,A) with state-space
//! trend parameter αβ*.
//!
//! # Estimation
//!
//! The candidates set the initial states l₀, b₀, s₋₁₁..s₀ by the
//! decomposition heuristic of Hyndman, Koehler, Ord & Snyder (2008),
//! *Forecasting with Exponential Smoothing*, §2.6.1 (2×12 moving average of
//! the first ≤ 5 years, seasonal indices as mean detrended values — the same
//! seasons as statsmodels' `initialization_method='heuristic'` — level and
//! trend from a straight line through the first 10 seasonally adjusted
//! months) and estimate only α, β, γ, φ ([`InitialStates::Heuristic`]).
//! Four estimated quantities instead of seventeen: on a 36-month backtest
//! window, seventeen is close to one per two observations, and the fit is
//! several times faster, which matters at twelve refits per series. With
//! [`InitialStates::Estimated`] all parameters — α, β, γ, φ and the 14
//! initial states — are chosen together, as statsmodels'
//! `initialization_method='estimated'`. Either way the in-sample sum of
//! squared one-step errors (SSE) is minimised:
//!
//! 1. initial states from the heuristic above;
//! 2. a coarse grid over (α, β, γ, φ) with those states — or, when
//!    warm-started with [`HoltWinters::fit_from`] (the backtest's previous
//!    origin), that optimum instead of the grid;
//! 3. refinement of the free parameters with L-BFGS (`argmin` 0.11, More-
//!    Thuente line search) using an exact reverse-mode gradient. The bounds
//!    are enforced by the bound transformation of MINUIT (James & Roos
//!    1975), u ↦ (1 + sin u)/2 on [0, 1]: α = lo + (hi − lo)·f(u),
//!    β = α·f(v), γ = (1 − α)·f(w), φ = 0.8 + (φ_max − 0.8)·f(z). The search
//!    runs in coordinates whitened by the Gauss-Newton Hessian at its start
//!    (computed by forward-mode differentiation), which cuts the iterations
//!    several-fold; a fresh round starts if the first does not converge.
//!    When states are estimated, one initial season is held at its start
//!    value, since the twelve are identified only up to a shift (additive)
//!    or scale (multiplicative) that the level absorbs without changing any
//!    prediction. The series is rescaled to mean magnitude 1 while
//!    optimising.
//!
//! The result is a local optimum, as with statsmodels. With estimated
//! states, on the reference series its SSE is within 1% of statsmodels' or
//! below it when the bounds are the same; with heuristic states the seasons
//! equal statsmodels' and the SSE is within 0.5%–6% of statsmodels' (whose
//! level and trend come from its moving average rather than the seasonally
//! adjusted months; see `tests/reference_holt_winters.rs`).
//!
//! # Prediction intervals
//!
//! - Additive: analytic, Hyndman et al. (2008) ch. 6, class 1 (also FPP §8.7,
//!   Table 8.8): v_h = σ² (1 + Σ_{j=1}^{h−1} c_j²), with
//!   c_j = α + αβ*(φ + … + φ^j) + γ·[j ≡ 0 mod 12]; point ± z √v_h.
//! - Multiplicative: additive errors with multiplicative seasonality
//!   (ETS(A,Ad,M)). Within the first year (h ≤ 12) each month's seasonal
//!   factor is a known final state, so the forecast is linear in the future
//!   errors and its variance is computed exactly by propagating their
//!   coefficients through the recursions: v_h = σ² (1 + Σ_i k_{h,i}²). The
//!   backtest (H = 12) needs nothing more. Beyond a year the seasonal
//!   factors are themselves random and there is no simple closed form (from
//!   memory: Hyndman et al. 2008, ch. 6, give exact results for the linear
//!   and the multiplicative-error classes only), so months 13 on are simulated:
//!   1000 future paths with normal errors of variance σ² and a fixed seed
//!   (the same fit always gives the same intervals), and
//!   v_h = σ² + Var(μ_{n+h}) from the spread of the paths' one-step means
//!   μ; then point ± z √v_h. Normal intervals are used rather than path
//!   quantiles: the additive errors keep the paths close to normal, and the
//!   variance needs no sorting (about 0.1 ms per forecast). Widths follow
//!   the seasonal factor, so they need not grow month by month, only year
//!   on year.
//!
//! σ² = SSE / (n − k), with k = 16 free parameters (17 when damped): α, β, γ,
//! l₀, b₀ and 11 seasons (the twelve initial seasons are identified only up
//! to a common shift or scale that the level absorbs). The same k is used
//! with heuristic states, since the heuristic also reads them off the data.
//!
//! # Parameters
//!
//! | name | default | range |
//! |---|---|---|
//! | α (level smoothing) | estimated | √ε ≤ α ≤ 1 − √ε |
//! | β (trend smoothing, β*) | estimated | 0 ≤ β ≤ α |
//! | γ (seasonal smoothing) | estimated | 0 ≤ γ ≤ 1 − α |
//! | φ (damping, damped forms only) | estimated | 0.8 ≤ φ ≤ `phi_max` |
//! | `phi_max` | 0.98 (FPP §8.2) | 0.8 < `phi_max` < 1 (statsmodels uses 0.995) |
//! | l₀, b₀, s₋₁₁..s₀ (initial states) | heuristic (§2.6.1) | or estimated, free |
//! | period | 12 | fixed (monthly data) |
//!
//! The α, β, γ bounds are those of statsmodels 0.15.0 (`to_restricted` in
//! `statsmodels/tsa/holtwinters/_smoothers.py`).

use std::cell::RefCell;

use argmin::core::{CostFunction, Executor, Gradient, TerminationReason, TerminationStatus};
use argmin::solver::linesearch::MoreThuenteLineSearch;
use argmin::solver::quasinewton::LBFGS;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};

use super::{Fitted, Forecast, Model, Needs, PERIOD};
use crate::error::{Error, Result};

const M: usize = PERIOD;
/// Lower bound of α (statsmodels: √ε).
const ALPHA_MIN: f64 = 1.490_116_119_384_765_6e-8;
/// Upper bound of α (statsmodels: 1 − √ε).
const ALPHA_MAX: f64 = 1.0 - ALPHA_MIN;
/// Lower bound of the damping parameter φ (FPP §8.2, statsmodels).
pub const PHI_MIN: f64 = 0.8;
/// Default upper bound of φ (FPP §8.2).
pub const PHI_MAX_DEFAULT: f64 = 0.98;
/// Simulated paths for the multiplicative intervals.
const SIM_PATHS: usize = 1000;
/// Seed of the simulation, fixed so forecasts are reproducible.
const SIM_SEED: u64 = 0x4857_5f73_696d;
/// L-BFGS iteration cap; fits on monthly series converge well within it.
const MAX_ITERS: u64 = 100;
/// L-BFGS stops when the objective (normalised to 1 at the start) changes
/// by less than this between iterations; far below any difference that
/// shows in a forecast.
const TOL_COST: f64 = 1e-9;
/// L-BFGS stops when the gradient norm falls below this.
const TOL_GRAD: f64 = 1e-7;
/// Whitened L-BFGS rounds; each restarts from a fresh Gauss-Newton Hessian.
const ROUNDS: usize = 3;

/// How the seasonal pattern combines with level and trend.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Seasonality {
    /// Seasonal effects are added: a fixed number of units per month.
    Additive,
    /// Seasonal effects multiply: a fixed share of the level per month.
    Multiplicative,
}

/// Smoothing parameters and initial states of a Holt-Winters model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HwParams {
    /// Level smoothing α.
    pub alpha: f64,
    /// Trend smoothing β (component form β*).
    pub beta: f64,
    /// Seasonal smoothing γ.
    pub gamma: f64,
    /// Damping φ; 1 when the trend is not damped.
    pub phi: f64,
    /// Initial level l₀.
    pub level: f64,
    /// Initial trend b₀.
    pub trend: f64,
    /// Initial seasons s₋₁₁..s₀; `seasons[0]` applies to the first month.
    pub seasons: [f64; PERIOD],
}

/// Result of running the recursions over a series with given parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Replay {
    /// One-step predictions ŷ₁..ŷₙ.
    pub fitted: Vec<f64>,
    /// Sum of squared one-step errors.
    pub sse: f64,
    /// Final level lₙ.
    pub level: f64,
    /// Final trend bₙ.
    pub trend: f64,
    /// Final seasons sₙ₋₁₁..sₙ.
    pub seasons: [f64; PERIOD],
}

impl HwParams {
    /// Runs the recursions over `y` (oldest month first) and returns the
    /// one-step predictions, the SSE and the final states.
    pub fn replay(&self, seasonality: Seasonality, y: &[f64]) -> Replay {
        let mut fitted = Vec::with_capacity(y.len());
        let (mut l, mut b) = (self.level, self.trend);
        let mut s = self.seasons;
        let mut sse = 0.0;
        for (t, &yt) in y.iter().enumerate() {
            let j = t % M;
            let (yhat, nl, nb, ns) = step(seasonality, self, l, b, s[j], yt);
            fitted.push(yhat);
            sse += (yt - yhat) * (yt - yhat);
            l = nl;
            b = nb;
            s[j] = ns;
        }
        // Rotate so that index 0 holds s_{n-11}, the season of month n+1.
        let shift = y.len() % M;
        let mut seasons = [0.0; M];
        for (k, v) in seasons.iter_mut().enumerate() {
            *v = s[(shift + k) % M];
        }
        Replay {
            fitted,
            sse,
            level: l,
            trend: b,
            seasons,
        }
    }
}

/// One step of the recursions: (ŷ_t, l_t, b_t, s_t).
#[inline(always)]
fn step(kind: Seasonality, p: &HwParams, l: f64, b: f64, c: f64, y: f64) -> (f64, f64, f64, f64) {
    let base = l + p.phi * b;
    let (yhat, nl, ns) = match kind {
        Seasonality::Additive => (
            base + c,
            p.alpha * (y - c) + (1.0 - p.alpha) * base,
            p.gamma * (y - base) + (1.0 - p.gamma) * c,
        ),
        Seasonality::Multiplicative => (
            base * c,
            p.alpha * (y / c) + (1.0 - p.alpha) * base,
            p.gamma * (y / base) + (1.0 - p.gamma) * c,
        ),
    };
    let nb = p.beta * (nl - l) + (1.0 - p.beta) * p.phi * b;
    (yhat, nl, nb, ns)
}

/// Holt-Winters model specification (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HoltWinters {
    seasonality: Seasonality,
    damped: bool,
    phi_max: f64,
    states: InitialStates,
}

/// How the initial states l₀, b₀ and s₋₁₁..s₀ are set.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InitialStates {
    /// By the decomposition heuristic (Hyndman et al. 2008, §2.6.1); only
    /// α, β, γ, φ are estimated.
    Heuristic,
    /// Estimated jointly with α, β, γ, φ by least squares.
    Estimated,
}

impl HoltWinters {
    /// Additive seasonality, linear trend.
    pub const fn additive() -> Self {
        Self::new(Seasonality::Additive, false)
    }
    /// Additive seasonality, damped trend.
    pub const fn additive_damped() -> Self {
        Self::new(Seasonality::Additive, true)
    }
    /// Multiplicative seasonality, linear trend.
    pub const fn multiplicative() -> Self {
        Self::new(Seasonality::Multiplicative, false)
    }
    /// Multiplicative seasonality, damped trend.
    pub const fn multiplicative_damped() -> Self {
        Self::new(Seasonality::Multiplicative, true)
    }

    /// The four forms, in the order reports list them.
    pub const fn all() -> [HoltWinters; 4] {
        [
            Self::additive(),
            Self::additive_damped(),
            Self::multiplicative(),
            Self::multiplicative_damped(),
        ]
    }

    /// A spec with the given seasonality and damping, φ ≤ 0.98.
    pub const fn new(seasonality: Seasonality, damped: bool) -> Self {
        HoltWinters {
            seasonality,
            damped,
            phi_max: PHI_MAX_DEFAULT,
            states: InitialStates::Heuristic,
        }
    }

    /// Sets the upper bound of φ (damped forms), which must lie strictly
    /// between 0.8 and 1.
    pub fn with_phi_max(mut self, phi_max: f64) -> Result<Self> {
        if !(phi_max > PHI_MIN && phi_max < 1.0) {
            return Err(Error::setting(
                "phi_max",
                format!("the damping bound must be above 0.8 and below 1, got {phi_max}"),
            ));
        }
        self.phi_max = phi_max;
        Ok(self)
    }

    /// Sets how the initial states are found.
    pub const fn with_states(mut self, states: InitialStates) -> Self {
        self.states = states;
        self
    }

    /// How the initial states are found.
    pub fn states(&self) -> InitialStates {
        self.states
    }

    /// The seasonality of this spec.
    pub fn seasonality(&self) -> Seasonality {
        self.seasonality
    }

    /// Whether the trend is damped.
    pub fn damped(&self) -> bool {
        self.damped
    }

    /// Fits to `y`, starting the optimiser from `start` (typically the
    /// previous backtest origin's optimum) as well as from the usual
    /// heuristic, whichever has the lower SSE.
    pub fn fit_from(&self, y: &[f64], start: Option<&HwParams>) -> Result<HoltWintersFit> {
        let name = Model::name(self);
        Model::needs(self).check(&name, y)?;
        let n = y.len();
        // Rescale so states and SSE are of order one; SSE scales by scale².
        let scale = {
            let m = y.iter().map(|v| v.abs()).sum::<f64>() / n as f64;
            if m > 0.0 && m.is_finite() {
                m
            } else {
                1.0
            }
        };
        let ys: Vec<f64> = y.iter().map(|v| v / scale).collect();
        let mut problem = Problem::new(&ys, *self);

        let heuristic = heuristic_states(self.seasonality, &ys);
        let mut theta0 = vec![0.0; problem.dim()];
        let mut best = f64::INFINITY;
        let mut cand = vec![0.0; problem.dim()];
        if let Some(p) = start {
            let mut p = *p;
            if self.states == InitialStates::Heuristic {
                p = HwParams {
                    alpha: p.alpha,
                    beta: p.beta,
                    gamma: p.gamma,
                    phi: p.phi,
                    ..heuristic
                };
                p.level *= scale;
                p.trend *= scale;
                if self.seasonality == Seasonality::Additive {
                    p.seasons.iter_mut().for_each(|s| *s *= scale);
                }
            }
            p.level /= scale;
            p.trend /= scale;
            if self.seasonality == Seasonality::Additive {
                p.seasons.iter_mut().for_each(|s| *s /= scale);
            }
            problem.encode(&p, &mut cand);
            let f = problem.objective(&cand);
            if f < best {
                best = f;
                theta0.copy_from_slice(&cand);
            }
        }
        // The previous origin's optimum is a better start than any grid
        // point; the grid is searched only for a cold start.
        let grid: &[f64] = if best.is_finite() {
            &[]
        } else {
            &[0.05, 0.2, 0.4, 0.6, 0.85]
        };
        for &fa in grid {
            for &fb in &[0.02, 0.3] {
                for &fg in &[0.05, 0.3, 0.7] {
                    for &fp in if self.damped {
                        &[0.3, 0.85][..]
                    } else {
                        &[0.5][..]
                    } {
                        let p = HwParams {
                            alpha: ALPHA_MIN + (ALPHA_MAX - ALPHA_MIN) * fa,
                            beta: 0.0,
                            gamma: 0.0,
                            phi: PHI_MIN + (self.phi_max - PHI_MIN) * fp,
                            ..heuristic
                        };
                        let p = HwParams {
                            beta: p.alpha * fb,
                            gamma: (1.0 - p.alpha) * fg,
                            ..p
                        };
                        problem.encode(&p, &mut cand);
                        let f = problem.objective(&cand);
                        if f < best {
                            best = f;
                            theta0.copy_from_slice(&cand);
                        }
                    }
                }
            }
        }
        if !best.is_finite() {
            return Err(Error::Model {
                model: name,
                message: "no starting point gives a finite fit; the series may have values \
                          too extreme for this model"
                    .to_string(),
            });
        }
        // Normalise the objective to about 1 at the start so the cost
        // tolerance is relative.
        problem.norm = if best > 0.0 { 1.0 / best } else { 1.0 };
        problem.reset_best();
        let mut p = if self.states == InitialStates::Heuristic {
            smoothing_lm(&ys, *self, problem.decode(&theta0))
        } else {
            let theta = optimise(&problem, theta0);
            problem.decode(&theta)
        };
        p.level *= scale;
        p.trend *= scale;
        if self.seasonality == Seasonality::Additive {
            p.seasons.iter_mut().for_each(|s| *s *= scale);
        }
        self.finish(&name, y, p)
    }

    /// Applies given parameters and initial states to `y` without
    /// estimating anything (e.g. parameters published elsewhere). The
    /// smoothing parameters must lie in [0, 1] and φ in (0, 1]; 1 is
    /// required when the spec is not damped.
    pub fn fit_with(&self, y: &[f64], params: &HwParams) -> Result<HoltWintersFit> {
        let name = Model::name(self);
        Model::needs(self).check(&name, y)?;
        for (label, v) in [
            ("alpha", params.alpha),
            ("beta", params.beta),
            ("gamma", params.gamma),
        ] {
            if !(0.0..=1.0).contains(&v) {
                return Err(Error::setting(
                    "smoothing",
                    format!("{label} must be between 0 and 1, got {v}"),
                ));
            }
        }
        let phi_ok = if self.damped {
            params.phi > 0.0 && params.phi <= 1.0
        } else {
            params.phi == 1.0
        };
        if !phi_ok {
            return Err(Error::setting(
                "phi",
                format!(
                    "phi must be in (0, 1] for a damped trend and 1 otherwise, got {}",
                    params.phi
                ),
            ));
        }
        let states_finite = params.level.is_finite()
            && params.trend.is_finite()
            && params.seasons.iter().all(|v| v.is_finite());
        if !states_finite {
            return Err(Error::setting(
                "initial states",
                "initial level, trend and seasons must be finite numbers",
            ));
        }
        self.finish(&name, y, *params)
    }

    fn finish(&self, name: &str, y: &[f64], p: HwParams) -> Result<HoltWintersFit> {
        let n = y.len();
        let replay = p.replay(self.seasonality, y);
        if !replay.sse.is_finite() {
            return Err(Error::Model {
                model: name.to_string(),
                message: "the fitted recursions did not stay finite".to_string(),
            });
        }
        let k = if self.damped { 17 } else { 16 };
        let sigma2 = replay.sse / (n.saturating_sub(k).max(1)) as f64;
        Ok(HoltWintersFit {
            spec: *self,
            params: p,
            n,
            sse: replay.sse,
            sigma2,
            level: replay.level,
            trend: replay.trend,
            seasons: replay.seasons,
        })
    }
}

impl Model for HoltWinters {
    type Fitted = HoltWintersFit;

    fn name(&self) -> String {
        match (self.seasonality, self.damped) {
            (Seasonality::Additive, false) => "holt-winters-additive",
            (Seasonality::Additive, true) => "holt-winters-additive-damped",
            (Seasonality::Multiplicative, false) => "holt-winters-multiplicative",
            (Seasonality::Multiplicative, true) => "holt-winters-multiplicative-damped",
        }
        .to_string()
    }

    fn description(&self) -> String {
        let season = match self.seasonality {
            Seasonality::Additive => "additive seasonality (same units added each year)",
            Seasonality::Multiplicative => "multiplicative seasonality (same share each year)",
        };
        let trend = if self.damped {
            "damped trend"
        } else {
            "linear trend"
        };
        format!("Holt-Winters exponential smoothing, {trend}, {season}")
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: 2 * PERIOD,
            positive: self.seasonality == Seasonality::Multiplicative,
            seasonal: true,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<HoltWintersFit> {
        self.fit_from(y, None)
    }

    fn fit_warm(&self, y: &[f64], warm: &mut super::WarmStart) -> Result<HoltWintersFit> {
        let start = warm
            .as_ref()
            .and_then(|w| w.downcast_ref::<HwParams>())
            .copied();
        let fit = self.fit_from(y, start.as_ref())?;
        *warm = Some(Box::new(fit.params));
        Ok(fit)
    }
}

/// A fitted Holt-Winters model.
#[derive(Debug, Clone, PartialEq)]
pub struct HoltWintersFit {
    spec: HoltWinters,
    params: HwParams,
    n: usize,
    sse: f64,
    sigma2: f64,
    level: f64,
    trend: f64,
    seasons: [f64; PERIOD],
}

impl HoltWintersFit {
    /// The estimated parameters and initial states (for warm starts).
    pub fn hw_params(&self) -> &HwParams {
        &self.params
    }

    /// The spec that was fitted.
    pub fn spec(&self) -> &HoltWinters {
        &self.spec
    }

    /// Residual variance σ² = SSE / (n − k) used by the intervals.
    pub fn sigma2(&self) -> f64 {
        self.sigma2
    }

    /// Final states (lₙ, bₙ, [sₙ₋₁₁..sₙ]).
    pub fn final_states(&self) -> (f64, f64, [f64; PERIOD]) {
        (self.level, self.trend, self.seasons)
    }

    /// Point forecasts for horizons 1..=`horizon` (before clipping at zero).
    pub fn point_forecast(&self, horizon: usize) -> Vec<f64> {
        let p = &self.params;
        let mut phi_h = 0.0;
        let mut phi_pow = 1.0;
        (0..horizon)
            .map(|h| {
                phi_pow *= p.phi;
                phi_h += phi_pow;
                let base = self.level + phi_h * self.trend;
                let s = self.seasons[h % M];
                match self.spec.seasonality {
                    Seasonality::Additive => base + s,
                    Seasonality::Multiplicative => base * s,
                }
            })
            .collect()
    }

    /// Forecast standard deviations of the additive form (class 1 formula).
    fn additive_sd(&self, horizon: usize) -> Vec<f64> {
        let p = &self.params;
        let beta_ss = p.alpha * p.beta;
        let mut sum = 0.0;
        let mut phi_j = 0.0;
        let mut phi_pow = 1.0;
        let mut sd = Vec::with_capacity(horizon);
        for h in 1..=horizon {
            if h > 1 {
                let j = h - 1;
                phi_pow *= p.phi;
                phi_j += phi_pow;
                let season = if j % M == 0 { p.gamma } else { 0.0 };
                let c = p.alpha + beta_ss * phi_j + season;
                sum += c * c;
            }
            sd.push((self.sigma2 * (1.0 + sum)).sqrt());
        }
        sd
    }

    /// Forecast standard deviations of the multiplicative form, from
    /// simulated paths of ETS(A,Ad,M) with a fixed seed.
    /// Exact forecast standard deviations of the multiplicative form for
    /// horizons 1..=`horizon` ≤ 12. Within the first seasonal cycle every
    /// month's seasonal factor c is a known final state (each season is
    /// re-estimated only once a cycle), so the level and trend — and the
    /// one-step mean μ = (l + φb)·c — are linear in the future errors:
    /// l_t = (l + φb) + α ε_t / c_t. Var(y_{n+h}) = σ² (1 + Σ_i k_{h,i}²),
    /// with k_{h,i} the coefficient of ε_{n+i} in μ_{n+h}, propagated
    /// through the recursions.
    fn first_cycle_sd(&self, horizon: usize) -> Vec<f64> {
        let p = &self.params;
        let h_max = horizon.min(M);
        // Coefficients of ε_{n+1..n+h_max} in the current level and trend.
        let mut dl = [0.0; M];
        let mut db = [0.0; M];
        let mut sd = Vec::with_capacity(h_max);
        for h in 0..h_max {
            let c = self.seasons[h];
            let mut v = 0.0;
            for i in 0..h {
                let k = c * (dl[i] + p.phi * db[i]);
                v += k * k;
            }
            sd.push((self.sigma2 * (1.0 + v)).sqrt());
            let inv_c = if c != 0.0 && c.is_finite() {
                1.0 / c
            } else {
                0.0
            };
            for i in 0..=h {
                let base = dl[i] + p.phi * db[i];
                let nl = base + if i == h { p.alpha * inv_c } else { 0.0 };
                db[i] = p.beta * (nl - dl[i]) + (1.0 - p.beta) * p.phi * db[i];
                dl[i] = nl;
            }
        }
        sd
    }

    fn simulated_sd(&self, horizon: usize) -> Vec<f64> {
        let p = &self.params;
        let sigma = self.sigma2.sqrt();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(SIM_SEED);
        // All paths advance together, month by month: the paths are
        // independent, so this inner loop pipelines where one path's
        // recursion would wait on each step.
        let mut level = vec![self.level; SIM_PATHS];
        let mut trend = vec![self.trend; SIM_PATHS];
        let mut season = vec![0.0; M * SIM_PATHS];
        for (j, row) in season.chunks_mut(SIM_PATHS).enumerate() {
            row.fill(self.seasons[j]);
        }
        let mut eps = vec![0.0; SIM_PATHS];
        let mut sd = Vec::with_capacity(horizon);
        for h in 0..horizon {
            eps.iter_mut()
                .for_each(|e| *e = StandardNormal.sample(&mut rng));
            let s = &mut season[(h % M) * SIM_PATHS..(h % M + 1) * SIM_PATHS];
            let (mut sum, mut sum2, mut count) = (0.0, 0.0, 0usize);
            for k in 0..SIM_PATHS {
                let (l, b, c) = (level[k], trend[k], s[k]);
                let base = l + p.phi * b;
                let mu = base * c;
                let yv = mu + sigma * eps[k];
                let nl = p.alpha * (yv / c) + (1.0 - p.alpha) * base;
                trend[k] = p.beta * (nl - l) + (1.0 - p.beta) * p.phi * b;
                s[k] = p.gamma * (yv / base) + (1.0 - p.gamma) * c;
                level[k] = nl;
                if mu.is_finite() {
                    sum += mu;
                    sum2 += mu * mu;
                    count += 1;
                }
            }
            // var(y_{n+h}) = σ² + var(μ_{n+h}): only the spread of the
            // paths' one-step means is simulated, so h = 1 is exact.
            let v = if count > 1 {
                let mean = sum / count as f64;
                ((sum2 - mean * sum) / (count - 1) as f64).max(0.0)
            } else {
                0.0
            };
            sd.push((self.sigma2 + v).sqrt());
        }
        sd
    }
}

impl Fitted for HoltWintersFit {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let point = self.point_forecast(horizon);
        match self.spec.seasonality {
            Seasonality::Additive => {
                let sd = self.additive_sd(horizon);
                Forecast::normal(point, &sd, levels)
            }
            Seasonality::Multiplicative => {
                if levels.is_empty() {
                    return Forecast::normal(point, &[], levels);
                }
                let mut sd = self.first_cycle_sd(horizon.min(M));
                if horizon > M {
                    sd.extend_from_slice(&self.simulated_sd(horizon)[M..]);
                }
                Forecast::normal(point, &sd, levels)
            }
        }
    }

    fn params(&self) -> Vec<(String, f64)> {
        let p = &self.params;
        let mut out = vec![
            ("alpha".to_string(), p.alpha),
            ("beta".to_string(), p.beta),
            ("gamma".to_string(), p.gamma),
        ];
        if self.spec.damped {
            out.push(("phi".to_string(), p.phi));
        }
        out.push(("initial_level".to_string(), p.level));
        out.push(("initial_trend".to_string(), p.trend));
        for (i, s) in p.seasons.iter().enumerate() {
            out.push((format!("initial_season_{}", i + 1), *s));
        }
        out.push(("sigma2".to_string(), self.sigma2));
        out.push(("months".to_string(), self.n as f64));
        out
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

/// Initial states by the decomposition heuristic of Hyndman et al. (2008),
/// §2.6.1; α, β, γ, φ are left at zero / one for the caller to set.
fn heuristic_states(kind: Seasonality, y: &[f64]) -> HwParams {
    let cycles = (y.len() / M).clamp(2, 5);
    let len = (cycles * M).min(y.len());
    let half = M / 2;
    let mut sums = [0.0; M];
    let mut counts = [0usize; M];
    // Centred 2×12 moving average at i = 6..len-7.
    for i in half..len.saturating_sub(half) {
        let mut tr = 0.5 * (y[i - half] + y[i + half]);
        tr += y[i + 1 - half..i + half].iter().sum::<f64>();
        tr /= M as f64;
        let d = match kind {
            Seasonality::Additive => y[i] - tr,
            Seasonality::Multiplicative => y[i] / tr,
        };
        if d.is_finite() {
            sums[i % M] += d;
            counts[i % M] += 1;
        }
    }
    let neutral = match kind {
        Seasonality::Additive => 0.0,
        Seasonality::Multiplicative => 1.0,
    };
    let mut seasons = [neutral; M];
    for j in 0..M {
        if counts[j] > 0 {
            seasons[j] = sums[j] / counts[j] as f64;
        }
    }
    let mean = seasons.iter().sum::<f64>() / M as f64;
    match kind {
        Seasonality::Additive => seasons.iter_mut().for_each(|s| *s -= mean),
        Seasonality::Multiplicative => {
            if mean > 0.0 && mean.is_finite() {
                seasons.iter_mut().for_each(|s| *s /= mean)
            } else {
                seasons = [1.0; M];
            }
        }
    }
    // Least-squares line through the first 10 seasonally adjusted months,
    // against t = 1..10, so the intercept is the level at t = 0.
    let k = 10.min(y.len());
    let (mut st, mut sa, mut stt, mut sta) = (0.0, 0.0, 0.0, 0.0);
    for (i, &v) in y[..k].iter().enumerate() {
        let t = (i + 1) as f64;
        let a = match kind {
            Seasonality::Additive => v - seasons[i],
            Seasonality::Multiplicative => v / seasons[i],
        };
        st += t;
        sa += a;
        stt += t * t;
        sta += t * a;
    }
    let kf = k as f64;
    let denom = kf * stt - st * st;
    let slope = if denom != 0.0 {
        (kf * sta - st * sa) / denom
    } else {
        0.0
    };
    let level = (sa - slope * st) / kf;
    HwParams {
        alpha: 0.0,
        beta: 0.0,
        gamma: 0.0,
        phi: 1.0,
        level,
        trend: slope,
        seasons,
    }
}

/// Maps an unbounded coordinate onto [0, 1] as (1 + sin u)/2, the bound
/// transformation of MINUIT (James & Roos 1975). Unlike a logistic map it
/// reaches the bounds at finite u, where the objective stays quadratic, so
/// fits that sit on a bound converge quickly. Returns the value and its
/// derivative.
#[inline(always)]
fn unit(u: f64) -> (f64, f64) {
    let (s, c) = u.sin_cos();
    (0.5 * (1.0 + s), 0.5 * c)
}

/// Inverse of [`unit`], kept off the bounds (where the derivative is zero)
/// so that a warm start at a bound can still move off it.
fn unit_inv(f: f64) -> f64 {
    let f = if f.is_finite() { f } else { 0.5 };
    (2.0 * f.clamp(1e-3, 1.0 - 1e-3) - 1.0).asin()
}

/// Buffers of the objective, allocated once per fit.
struct Workspace {
    /// Levels l₀..lₙ.
    l: Vec<f64>,
    /// Trends b₀..bₙ.
    b: Vec<f64>,
    /// Seasons: s₋₁₁..s₀ then s₁..sₙ (index t+11 holds s_t).
    s: Vec<f64>,
    /// Adjoints of the above.
    lb: Vec<f64>,
    bb: Vec<f64>,
    sb: Vec<f64>,
    /// Parameter vector of the last forward pass (its states are in l, b, s).
    last: Vec<f64>,
    last_valid: bool,
    /// Best point seen, so a failed line search still returns it.
    best_cost: f64,
    best: Vec<f64>,
}

/// The SSE objective over the unconstrained parameter vector
/// θ = [u_α, u_β, u_γ, (u_φ), l₀, b₀, s₋₁₁..s₀].
struct Problem<'a> {
    y: &'a [f64],
    spec: HoltWinters,
    norm: f64,
    ws: RefCell<Workspace>,
}

/// Smoothing parameters decoded from θ, with the derivatives of the map.
struct Decoded {
    alpha: f64,
    beta: f64,
    gamma: f64,
    phi: f64,
    /// dα/du_α
    da: f64,
    /// σ(u_β), σ(u_γ): β = α·fb, γ = (1 − α)·fg.
    fb: f64,
    fg: f64,
    /// dβ/du_β, dγ/du_γ, dφ/du_φ
    dbb: f64,
    dgg: f64,
    dpp: f64,
}

impl<'a> Problem<'a> {
    fn new(y: &'a [f64], spec: HoltWinters) -> Self {
        let n = y.len();
        let dim = if spec.damped { 4 } else { 3 } + 2 + M;
        Problem {
            y,
            spec,
            norm: 1.0,
            ws: RefCell::new(Workspace {
                l: vec![0.0; n + 1],
                b: vec![0.0; n + 1],
                s: vec![0.0; n + M],
                lb: vec![0.0; n + 1],
                bb: vec![0.0; n + 1],
                sb: vec![0.0; n + M],
                last: vec![f64::NAN; dim],
                last_valid: false,
                best_cost: f64::INFINITY,
                best: vec![0.0; dim],
            }),
        }
    }

    fn dim(&self) -> usize {
        self.offset() + 2 + M
    }

    /// Coordinates of θ the optimiser moves: the smoothing parameters, and
    /// the initial states when they are estimated (less one season, which
    /// the level absorbs).
    fn free_indices(&self) -> Vec<usize> {
        let o = self.offset();
        if self.spec.states == InitialStates::Heuristic {
            (0..o).collect()
        } else {
            (0..self.dim()).filter(|&k| k != o + 2).collect()
        }
    }

    /// Index of l₀ in θ.
    fn offset(&self) -> usize {
        if self.spec.damped {
            4
        } else {
            3
        }
    }

    fn reset_best(&mut self) {
        let ws = self.ws.get_mut();
        ws.best_cost = f64::INFINITY;
        ws.last_valid = false;
    }

    fn encode(&self, p: &HwParams, theta: &mut [f64]) {
        let fa = (p.alpha - ALPHA_MIN) / (ALPHA_MAX - ALPHA_MIN);
        theta[0] = unit_inv(fa);
        let a = ALPHA_MIN + (ALPHA_MAX - ALPHA_MIN) * unit(theta[0]).0;
        theta[1] = unit_inv(p.beta / a);
        theta[2] = unit_inv(p.gamma / (1.0 - a));
        if self.spec.damped {
            theta[3] = unit_inv((p.phi - PHI_MIN) / (self.spec.phi_max - PHI_MIN));
        }
        let o = self.offset();
        theta[o] = p.level;
        theta[o + 1] = p.trend;
        theta[o + 2..o + 2 + M].copy_from_slice(&p.seasons);
    }

    fn decode_smoothing(&self, theta: &[f64]) -> Decoded {
        let (sa, dsa) = unit(theta[0]);
        let alpha = ALPHA_MIN + (ALPHA_MAX - ALPHA_MIN) * sa;
        let da = (ALPHA_MAX - ALPHA_MIN) * dsa;
        let (fb, dfb) = unit(theta[1]);
        let (fg, dfg) = unit(theta[2]);
        let (phi, dpp) = if self.spec.damped {
            let (sp, dsp) = unit(theta[3]);
            let w = self.spec.phi_max - PHI_MIN;
            (PHI_MIN + w * sp, w * dsp)
        } else {
            (1.0, 0.0)
        };
        Decoded {
            alpha,
            beta: alpha * fb,
            gamma: (1.0 - alpha) * fg,
            phi,
            da,
            fb,
            fg,
            dbb: alpha * dfb,
            dgg: (1.0 - alpha) * dfg,
            dpp,
        }
    }

    fn decode(&self, theta: &[f64]) -> HwParams {
        let d = self.decode_smoothing(theta);
        let o = self.offset();
        let mut seasons = [0.0; M];
        seasons.copy_from_slice(&theta[o + 2..o + 2 + M]);
        HwParams {
            alpha: d.alpha,
            beta: d.beta,
            gamma: d.gamma,
            phi: d.phi,
            level: theta[o],
            trend: theta[o + 1],
            seasons,
        }
    }

    /// Normalised SSE at θ; stores the states for a following gradient.
    fn objective(&self, theta: &[f64]) -> f64 {
        let mut guard = self.ws.borrow_mut();
        let ws = &mut *guard;
        let f = self.forward(theta, ws) * self.norm;
        let f = if f.is_finite() { f } else { f64::INFINITY };
        ws.last.copy_from_slice(theta);
        ws.last_valid = true;
        if f < ws.best_cost {
            ws.best_cost = f;
            ws.best.copy_from_slice(theta);
        }
        f
    }

    fn forward(&self, theta: &[f64], ws: &mut Workspace) -> f64 {
        let d = self.decode_smoothing(theta);
        let o = self.offset();
        let (alpha, beta, gamma, phi) = (d.alpha, d.beta, d.gamma, d.phi);
        ws.l[0] = theta[o];
        ws.b[0] = theta[o + 1];
        ws.s[..M].copy_from_slice(&theta[o + 2..o + 2 + M]);
        let mut sse = 0.0;
        let (l, b, s) = (&mut ws.l, &mut ws.b, &mut ws.s);
        match self.spec.seasonality {
            Seasonality::Additive => {
                for (i, &y) in self.y.iter().enumerate() {
                    let p = l[i] + phi * b[i];
                    let c = s[i];
                    let e = y - p - c;
                    sse += e * e;
                    let nl = alpha * (y - c) + (1.0 - alpha) * p;
                    b[i + 1] = beta * (nl - l[i]) + (1.0 - beta) * phi * b[i];
                    l[i + 1] = nl;
                    s[i + M] = gamma * (y - p) + (1.0 - gamma) * c;
                }
            }
            Seasonality::Multiplicative => {
                for (i, &y) in self.y.iter().enumerate() {
                    let p = l[i] + phi * b[i];
                    let c = s[i];
                    let e = y - p * c;
                    sse += e * e;
                    let nl = alpha * (y / c) + (1.0 - alpha) * p;
                    b[i + 1] = beta * (nl - l[i]) + (1.0 - beta) * phi * b[i];
                    l[i + 1] = nl;
                    s[i + M] = gamma * (y / p) + (1.0 - gamma) * c;
                }
            }
        }
        sse
    }

    /// Gradient of the normalised SSE by reverse-mode differentiation of
    /// the recursions, written into `grad`.
    fn gradient_into(&self, theta: &[f64], grad: &mut [f64]) {
        let mut guard = self.ws.borrow_mut();
        let ws = &mut *guard;
        if !(ws.last_valid && ws.last == theta) {
            self.forward(theta, ws);
            ws.last.copy_from_slice(theta);
            ws.last_valid = true;
        }
        let d = self.decode_smoothing(theta);
        let (alpha, beta, gamma, phi) = (d.alpha, d.beta, d.gamma, d.phi);
        let n = self.y.len();
        let Workspace {
            l,
            b,
            s,
            lb,
            bb,
            sb,
            ..
        } = ws;
        lb.iter_mut().for_each(|v| *v = 0.0);
        bb.iter_mut().for_each(|v| *v = 0.0);
        sb.iter_mut().for_each(|v| *v = 0.0);
        let (mut ga, mut gb, mut gg, mut gp) = (0.0, 0.0, 0.0, 0.0);
        let mult = self.spec.seasonality == Seasonality::Multiplicative;
        for i in (0..n).rev() {
            let y = self.y[i];
            let p = l[i] + phi * b[i];
            let c = s[i];
            // b_{i+1} = β (l_{i+1} − l_i) + (1 − β) φ b_i
            let bn = bb[i + 1];
            lb[i + 1] += bn * beta;
            lb[i] -= bn * beta;
            bb[i] += bn * (1.0 - beta) * phi;
            gb += bn * (l[i + 1] - l[i] - phi * b[i]);
            gp += bn * (1.0 - beta) * b[i];
            let ln = lb[i + 1];
            let sn = sb[i + M];
            let (mut pbar, mut cbar);
            if mult {
                let yc = y / c;
                let yp = y / p;
                // l_{i+1} = α y/c + (1 − α) p
                ga += ln * (yc - p);
                cbar = -alpha * yc / c * ln;
                pbar = (1.0 - alpha) * ln;
                // s_{i+M} = γ y/p + (1 − γ) c
                gg += sn * (yp - c);
                pbar -= gamma * yp / p * sn;
                cbar += (1.0 - gamma) * sn;
                // e = y − p c
                let e2 = 2.0 * (y - p * c);
                pbar -= e2 * c;
                cbar -= e2 * p;
            } else {
                ga += ln * (y - c - p);
                cbar = -alpha * ln;
                pbar = (1.0 - alpha) * ln;
                gg += sn * (y - p - c);
                pbar -= gamma * sn;
                cbar += (1.0 - gamma) * sn;
                let e2 = 2.0 * (y - p - c);
                pbar -= e2;
                cbar -= e2;
            }
            // p = l_i + φ b_i; c = s_i
            lb[i] += pbar;
            bb[i] += phi * pbar;
            gp += pbar * b[i];
            sb[i] += cbar;
        }
        // Chain rule through the bound map: β = α fb, γ = (1 − α) fg.
        let k = self.norm;
        grad[0] = k * (ga + gb * d.fb - gg * d.fg) * d.da;
        grad[1] = k * gb * d.dbb;
        grad[2] = k * gg * d.dgg;
        let o = self.offset();
        if self.spec.damped {
            grad[3] = k * gp * d.dpp;
        }
        grad[o] = k * lb[0];
        grad[o + 1] = k * bb[0];
        for j in 0..M {
            grad[o + 2 + j] = k * sb[j];
        }
        if grad.iter().any(|g| !g.is_finite()) {
            grad.iter_mut().for_each(|g| *g = 0.0);
        }
    }
}

/// Forward-mode sensitivity buffers for [`Problem::gn_hessian`].
struct Sensitivities {
    /// ∂l/∂q, ∂b/∂q for the current step.
    dl: Vec<f64>,
    db: Vec<f64>,
    /// ∂s/∂q for the twelve seasons in the ring, `M × dim`.
    ds: Vec<f64>,
    dp: Vec<f64>,
    dyh: Vec<f64>,
    row: Vec<f64>,
}

impl Sensitivities {
    fn new(dim: usize) -> Self {
        Sensitivities {
            dl: vec![0.0; dim],
            db: vec![0.0; dim],
            ds: vec![0.0; M * dim],
            dp: vec![0.0; dim],
            dyh: vec![0.0; dim],
            row: vec![0.0; dim],
        }
    }
}

impl Problem<'_> {
    /// Gauss-Newton Hessian 2·norm·JᵀJ of the normalised SSE in θ
    /// coordinates (J: Jacobian of the one-step predictions), by
    /// forward-mode differentiation of the recursions; row-major into `h`.
    fn gn_hessian(
        &self,
        theta: &[f64],
        h: &mut [f64],
        grad: &mut [f64],
        sens: &mut Sensitivities,
    ) -> f64 {
        let dim = self.dim();
        let d = self.decode_smoothing(theta);
        let (alpha, beta, gamma, phi) = (d.alpha, d.beta, d.gamma, d.phi);
        let o = self.offset();
        let damped = self.spec.damped;
        let mult = self.spec.seasonality == Seasonality::Multiplicative;
        let Sensitivities {
            dl,
            db,
            ds,
            dp,
            dyh,
            row,
        } = sens;
        dl.iter_mut().for_each(|v| *v = 0.0);
        db.iter_mut().for_each(|v| *v = 0.0);
        ds.iter_mut().for_each(|v| *v = 0.0);
        h.iter_mut().for_each(|v| *v = 0.0);
        grad.iter_mut().for_each(|v| *v = 0.0);
        let mut sse = 0.0;
        dl[o] = 1.0;
        db[o + 1] = 1.0;
        for j in 0..M {
            ds[j * dim + o + 2 + j] = 1.0;
        }
        let (mut l, mut b) = (theta[o], theta[o + 1]);
        let mut ring = [0.0; M];
        ring.copy_from_slice(&theta[o + 2..o + 2 + M]);
        // Natural coordinates q: 0 α, 1 β, 2 γ, (3 φ), then the states.
        for (i, &y) in self.y.iter().enumerate() {
            let j = i % M;
            let c = ring[j];
            let p = l + phi * b;
            let dc = &mut ds[j * dim..(j + 1) * dim];
            for k in 0..dim {
                dp[k] = dl[k] + phi * db[k];
            }
            if damped {
                dp[3] += b;
            }
            let e = if mult { y - p * c } else { y - p - c };
            sse += e * e;
            let (nl, ns, dalpha, dgamma);
            if mult {
                let (yc, yp) = (y / c, y / p);
                nl = alpha * yc + (1.0 - alpha) * p;
                ns = gamma * yp + (1.0 - gamma) * c;
                let (kl, kc) = (-alpha * yc / c, -gamma * yp / p);
                for k in 0..dim {
                    dyh[k] = c * dp[k] + p * dc[k];
                    let dnl = kl * dc[k] + (1.0 - alpha) * dp[k];
                    let dns = kc * dp[k] + (1.0 - gamma) * dc[k];
                    db[k] = beta * (dnl - dl[k]) + (1.0 - beta) * phi * db[k];
                    dl[k] = dnl;
                    dc[k] = dns;
                }
                dalpha = yc - p;
                dgamma = yp - c;
            } else {
                nl = alpha * (y - c) + (1.0 - alpha) * p;
                ns = gamma * (y - p) + (1.0 - gamma) * c;
                for k in 0..dim {
                    dyh[k] = dp[k] + dc[k];
                    let dnl = -alpha * dc[k] + (1.0 - alpha) * dp[k];
                    let dns = -gamma * dp[k] + (1.0 - gamma) * dc[k];
                    db[k] = beta * (dnl - dl[k]) + (1.0 - beta) * phi * db[k];
                    dl[k] = dnl;
                    dc[k] = dns;
                }
                dalpha = y - c - p;
                dgamma = y - p - c;
            }
            // Direct terms of α in l_t and γ in s_t (α's also reaches b_t),
            // then β's and φ's direct terms in b_t.
            dl[0] += dalpha;
            db[0] += beta * dalpha;
            dc[2] += dgamma;
            db[1] += nl - l - phi * b;
            if damped {
                db[3] += (1.0 - beta) * b;
            }
            let nb = beta * (nl - l) + (1.0 - beta) * phi * b;
            l = nl;
            b = nb;
            ring[j] = ns;
            // The prediction's gradient in θ: chain rule through the bound map.
            row.copy_from_slice(dyh);
            row[0] = (dyh[0] + dyh[1] * d.fb - dyh[2] * d.fg) * d.da;
            row[1] = dyh[1] * d.dbb;
            row[2] = dyh[2] * d.dgg;
            if damped {
                row[3] = dyh[3] * d.dpp;
            }
            for r in 0..dim {
                let v = row[r];
                grad[r] -= e * v;
                let hr = &mut h[r * dim..(r + 1) * dim];
                for (hc, &w) in hr[..=r].iter_mut().zip(row.iter()) {
                    *hc += v * w;
                }
            }
        }
        let k = 2.0 * self.norm;
        for r in 0..dim {
            for c in 0..=r {
                let v = k * h[r * dim + c];
                h[r * dim + c] = v;
                h[c * dim + r] = v;
            }
        }
        grad.iter_mut().for_each(|g| *g *= k);
        sse * self.norm
    }
}

/// Cholesky factor L (row-major, lower) of `a` + ridge·I; false when `a`
/// is not positive definite at this ridge.
fn cholesky(a: &[f64], n: usize, ridge: f64, l: &mut [f64]) -> bool {
    l.iter_mut().for_each(|v| *v = 0.0);
    for i in 0..n {
        for j in 0..=i {
            let mut s = a[i * n + j];
            if i == j {
                s += ridge;
            }
            for k in 0..j {
                s -= l[i * n + k] * l[j * n + k];
            }
            if i == j {
                if !(s > 0.0 && s.is_finite()) {
                    return false;
                }
                l[i * n + i] = s.sqrt();
            } else {
                l[i * n + j] = s / l[j * n + j];
            }
        }
    }
    true
}

/// The objective seen in whitened coordinates z: θ = θ₀ + L⁻ᵀ z on the
/// free coordinates, with L Lᵀ the Gauss-Newton Hessian at θ₀, so that
/// L-BFGS starts from a near-identity Hessian. One initial season is held
/// fixed: the twelve are identified only up to a shift (additive) or scale
/// (multiplicative) that the level absorbs, which leaves the SSE unchanged.
struct Whitened<'p, 'a> {
    problem: &'p Problem<'a>,
    theta0: Vec<f64>,
    free: Vec<usize>,
    chol: Vec<f64>,
    /// θ, w and the full gradient, reused across calls.
    scratch: RefCell<(Vec<f64>, Vec<f64>, Vec<f64>)>,
}

impl Whitened<'_, '_> {
    /// Writes θ(z) into the scratch θ.
    fn theta_of(&self, z: &[f64], theta: &mut [f64], w: &mut [f64]) {
        let n = self.free.len();
        let l = &self.chol;
        for i in (0..n).rev() {
            let mut s = z[i];
            for k in i + 1..n {
                s -= l[k * n + i] * w[k];
            }
            w[i] = s / l[i * n + i];
        }
        theta.copy_from_slice(&self.theta0);
        for (i, &f) in self.free.iter().enumerate() {
            theta[f] += w[i];
        }
    }
}

impl CostFunction for Whitened<'_, '_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, z: &Self::Param) -> std::result::Result<f64, argmin::core::Error> {
        let mut guard = self.scratch.borrow_mut();
        let (theta, w, _) = &mut *guard;
        self.theta_of(z, theta, w);
        Ok(self.problem.objective(theta))
    }
}

impl Gradient for Whitened<'_, '_> {
    type Param = Vec<f64>;
    type Gradient = Vec<f64>;
    fn gradient(&self, z: &Self::Param) -> std::result::Result<Vec<f64>, argmin::core::Error> {
        let mut guard = self.scratch.borrow_mut();
        let (theta, w, g) = &mut *guard;
        self.theta_of(z, theta, w);
        self.problem.gradient_into(theta, g);
        let n = self.free.len();
        let l = &self.chol;
        let mut out = vec![0.0; n];
        for i in 0..n {
            let mut s = g[self.free[i]];
            for k in 0..i {
                s -= l[i * n + k] * out[k];
            }
            out[i] = s / l[i * n + i];
        }
        Ok(out)
    }
}

/// Levenberg–Marquardt iteration cap for the smoothing parameters.
const LM_ITERS: usize = 100;

/// Box coordinates of the smoothing parameters: x = (α, β/α, γ/(1 − α), φ),
/// each in a fixed interval, so β ≤ α and γ ≤ 1 − α hold by construction.
fn to_box(p: &HwParams) -> [f64; 4] {
    let xb = if p.alpha > 0.0 { p.beta / p.alpha } else { 0.0 };
    let xg = if p.alpha < 1.0 {
        p.gamma / (1.0 - p.alpha)
    } else {
        0.0
    };
    [p.alpha, xb.clamp(0.0, 1.0), xg.clamp(0.0, 1.0), p.phi]
}

fn from_box(x: &[f64; 4], states: &HwParams) -> HwParams {
    HwParams {
        alpha: x[0],
        beta: x[0] * x[1],
        gamma: (1.0 - x[0]) * x[2],
        phi: x[3],
        ..*states
    }
}

/// SSE of `y` at `p`, with (when `jac`) the gradient `g` = Jᵀe and the
/// Gauss-Newton matrix `h` = JᵀJ in box coordinates, J = ∂ŷ/∂x, by
/// forward-mode differentiation of the recursions (the initial states are
/// fixed). Only the first `d` coordinates are used (3 when φ = 1).
#[allow(clippy::needless_range_loop)] // small fixed-size matrices read best by index
fn sse_and_jacobian(
    y: &[f64],
    kind: Seasonality,
    p: &HwParams,
    d: usize,
    jac: Option<(&mut [f64; 4], &mut [[f64; 4]; 4])>,
) -> f64 {
    let (alpha, beta, gamma, phi) = (p.alpha, p.beta, p.gamma, p.phi);
    let (mut l, mut b) = (p.level, p.trend);
    let mut s = p.seasons;
    let mut sse = 0.0;
    let Some((g, h)) = jac else {
        for (t, &yt) in y.iter().enumerate() {
            let j = t % M;
            let (yhat, nl, nb, ns) = step(kind, p, l, b, s[j], yt);
            sse += (yt - yhat) * (yt - yhat);
            l = nl;
            b = nb;
            s[j] = ns;
        }
        return sse;
    };
    *g = [0.0; 4];
    *h = [[0.0; 4]; 4];
    // Derivatives of l, b and the season ring with respect to (α, β, γ, φ).
    let mut dl = [0.0; 4];
    let mut db = [0.0; 4];
    let mut ds = [[0.0; 4]; M];
    for (t, &yt) in y.iter().enumerate() {
        let j = t % M;
        let c = s[j];
        let dc = ds[j];
        let base = l + phi * b;
        let mut dbase = [0.0; 4];
        for k in 0..4 {
            dbase[k] = dl[k] + phi * db[k];
        }
        dbase[3] += b;
        let (yhat, nl, ns, mut dyhat, mut dnl, mut dns);
        match kind {
            Seasonality::Additive => {
                yhat = base + c;
                nl = alpha * (yt - c) + (1.0 - alpha) * base;
                ns = gamma * (yt - base) + (1.0 - gamma) * c;
                dyhat = [0.0; 4];
                dnl = [0.0; 4];
                dns = [0.0; 4];
                for k in 0..4 {
                    dyhat[k] = dbase[k] + dc[k];
                    dnl[k] = -alpha * dc[k] + (1.0 - alpha) * dbase[k];
                    dns[k] = -gamma * dbase[k] + (1.0 - gamma) * dc[k];
                }
                dnl[0] += (yt - c) - base;
                dns[2] += (yt - base) - c;
            }
            Seasonality::Multiplicative => {
                yhat = base * c;
                nl = alpha * (yt / c) + (1.0 - alpha) * base;
                ns = gamma * (yt / base) + (1.0 - gamma) * c;
                dyhat = [0.0; 4];
                dnl = [0.0; 4];
                dns = [0.0; 4];
                let (yc2, yb2) = (yt / (c * c), yt / (base * base));
                for k in 0..4 {
                    dyhat[k] = dbase[k] * c + base * dc[k];
                    dnl[k] = -alpha * yc2 * dc[k] + (1.0 - alpha) * dbase[k];
                    dns[k] = -gamma * yb2 * dbase[k] + (1.0 - gamma) * dc[k];
                }
                dnl[0] += yt / c - base;
                dns[2] += yt / base - c;
            }
        }
        let nb = beta * (nl - l) + (1.0 - beta) * phi * b;
        let mut dnb = [0.0; 4];
        for k in 0..4 {
            dnb[k] = beta * (dnl[k] - dl[k]) + (1.0 - beta) * phi * db[k];
        }
        dnb[1] += nl - l - phi * b;
        dnb[3] += (1.0 - beta) * b;
        let e = yt - yhat;
        sse += e * e;
        // Chain to box coordinates: β = α·x_b, γ = (1 − α)·x_g.
        let (xb, xg) = (
            if alpha > 0.0 { beta / alpha } else { 0.0 },
            if alpha < 1.0 {
                gamma / (1.0 - alpha)
            } else {
                0.0
            },
        );
        let row = [
            dyhat[0] + xb * dyhat[1] - xg * dyhat[2],
            alpha * dyhat[1],
            (1.0 - alpha) * dyhat[2],
            dyhat[3],
        ];
        for a in 0..d {
            g[a] += e * row[a];
            for c2 in 0..=a {
                h[a][c2] += row[a] * row[c2];
            }
        }
        l = nl;
        b = nb;
        s[j] = ns;
        dl = dnl;
        db = dnb;
        ds[j] = dns;
    }
    for a in 0..d {
        for c2 in 0..a {
            h[c2][a] = h[a][c2];
        }
    }
    sse
}

/// Projected Levenberg–Marquardt over the smoothing parameters with the
/// initial states held (Marquardt 1963; Nocedal & Wright, *Numerical
/// Optimization*, 2nd ed., §10.3): Gauss-Newton steps on the SSE, damped
/// by λ·diag(JᵀJ) when a step does not lower it, each step clipped to the
/// parameter box. With four unknowns and exact derivatives it converges in
/// a few iterations from a grid point or the previous origin's optimum.
/// Returns the best parameters found (never worse than the start).
#[allow(clippy::needless_range_loop)] // small fixed-size matrices read best by index
fn smoothing_lm(y: &[f64], spec: HoltWinters, start: HwParams) -> HwParams {
    let kind = spec.seasonality;
    let d = if spec.damped { 4 } else { 3 };
    let lo = [ALPHA_MIN, 0.0, 0.0, if spec.damped { PHI_MIN } else { 1.0 }];
    let hi = [
        ALPHA_MAX,
        1.0,
        1.0,
        if spec.damped { spec.phi_max } else { 1.0 },
    ];
    let mut x = to_box(&start);
    for k in 0..4 {
        x[k] = x[k].clamp(lo[k], hi[k]);
    }
    let mut g = [0.0; 4];
    let mut h = [[0.0; 4]; 4];
    let mut f = sse_and_jacobian(y, kind, &from_box(&x, &start), d, Some((&mut g, &mut h)));
    if !f.is_finite() {
        return start;
    }
    let mut lambda = 1e-3;
    for _ in 0..LM_ITERS {
        let mut accepted = None;
        for _attempt in 0..20 {
            // (H + λ diag H) δ = g (g = Jᵀe is minus half the SSE gradient).
            // Coordinates on a bound whose descent direction leads out of
            // the box are held for this step (active set), so the others
            // move freely instead of the clipped step creeping along it.
            let mut free = [0usize; 4];
            let mut nf = 0;
            for k in 0..d {
                let out_low = x[k] <= lo[k] && g[k] <= 0.0;
                let out_high = x[k] >= hi[k] && g[k] >= 0.0;
                if !(out_low || out_high) {
                    free[nf] = k;
                    nf += 1;
                }
            }
            if nf == 0 {
                break;
            }
            let mut a = [[0.0; 4]; 4];
            let mut rhs = [0.0; 4];
            for (r, &kr) in free[..nf].iter().enumerate() {
                for (c, &kc) in free[..nf].iter().enumerate() {
                    a[r][c] = h[kr][kc];
                }
                a[r][r] += lambda * h[kr][kr] + 1e-12 * (1.0 + h[kr][kr]);
                rhs[r] = g[kr];
            }
            let Some(delta) = solve_small(&mut a, &mut rhs, nf) else {
                lambda *= 10.0;
                continue;
            };
            let mut xn = x;
            for (r, &k) in free[..nf].iter().enumerate() {
                xn[k] = (x[k] + delta[r]).clamp(lo[k], hi[k]);
            }
            let fx = sse_and_jacobian(y, kind, &from_box(&xn, &start), d, None);
            if fx.is_finite() && fx < f {
                accepted = Some((xn, fx));
                break;
            }
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
        let Some((xn, fx)) = accepted else { break };
        let decrease = f - fx;
        x = xn;
        lambda = (lambda * 0.2).max(1e-9);
        f = sse_and_jacobian(y, kind, &from_box(&x, &start), d, Some((&mut g, &mut h)));
        // A relative SSE change below 1e-8 moves no forecast visibly.
        if decrease <= 1e-8 * f.max(1e-300) {
            break;
        }
    }
    from_box(&x, &start)
}

/// Solves the d×d system `a`·δ = `b` by Gaussian elimination with partial
/// pivoting; `None` when singular.
#[allow(clippy::needless_range_loop)] // small fixed-size matrices read best by index
fn solve_small(a: &mut [[f64; 4]; 4], b: &mut [f64; 4], d: usize) -> Option<[f64; 4]> {
    for col in 0..d {
        let piv = (col..d).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        let pv = a[piv][col];
        if pv.abs() <= 1e-300 || !pv.is_finite() {
            return None;
        }
        a.swap(col, piv);
        b.swap(col, piv);
        for r in col + 1..d {
            let m = a[r][col] / a[col][col];
            for c in col..d {
                a[r][c] -= m * a[col][c];
            }
            b[r] -= m * b[col];
        }
    }
    let mut x = [0.0; 4];
    for r in (0..d).rev() {
        let mut v = b[r];
        for c in r + 1..d {
            v -= a[r][c] * x[c];
        }
        x[r] = v / a[r][r];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// L-BFGS rounds, each whitened by the Gauss-Newton Hessian at its start;
/// returns the best point seen (also when a line search gives up).
fn optimise(problem: &Problem<'_>, theta0: Vec<f64>) -> Vec<f64> {
    let dim = problem.dim();
    let free = problem.free_indices();
    let nf = free.len();
    let mut sens = Sensitivities::new(dim);
    let mut h = vec![0.0; dim * dim];
    let mut hf = vec![0.0; nf * nf];
    let mut chol = vec![0.0; nf * nf];
    let mut theta = theta0;
    let mut f = problem.objective(&theta);
    for _round in 0..ROUNDS {
        let mut gtmp = vec![0.0; dim];
        problem.gn_hessian(&theta, &mut h, &mut gtmp, &mut sens);
        for (i, &a) in free.iter().enumerate() {
            for (j, &b) in free.iter().enumerate() {
                hf[i * nf + j] = h[a * dim + b];
            }
        }
        let scale = (0..nf).map(|i| hf[i * nf + i]).fold(0.0, f64::max);
        let scale = if scale > 0.0 && scale.is_finite() {
            scale
        } else {
            1.0
        };
        let ok = [1e-9, 1e-6, 1e-3, 1.0]
            .iter()
            .any(|r| cholesky(&hf, nf, r * scale, &mut chol));
        if !ok {
            break;
        }
        let whitened = Whitened {
            problem,
            theta0: theta.clone(),
            free: free.clone(),
            chol: chol.clone(),
            scratch: RefCell::new((vec![0.0; dim], vec![0.0; nf], vec![0.0; dim])),
        };
        let solver = LBFGS::new(MoreThuenteLineSearch::new(), nf)
            .with_tolerance_grad(TOL_GRAD)
            .and_then(|s| s.with_tolerance_cost(TOL_COST));
        let Ok(solver) = solver else { break };
        // An error (e.g. a line search that cannot progress) still leaves
        // the best point seen in the workspace.
        let converged = Executor::new(whitened, solver)
            .configure(|state| state.param(vec![0.0; nf]).max_iters(MAX_ITERS))
            .run()
            .map(|r| {
                r.state.termination_status
                    == TerminationStatus::Terminated(TerminationReason::SolverConverged)
            })
            .unwrap_or(false);
        let ws = problem.ws.borrow();
        let improved = f - ws.best_cost;
        if ws.best_cost < f {
            f = ws.best_cost;
            theta.copy_from_slice(&ws.best);
        }
        // A converged round ends the search; otherwise the Hessian has
        // moved away from the whitening, so start a fresh round from here.
        if converged || improved.is_nan() || improved <= 1e-9 * f.max(1e-300) {
            break;
        }
    }
    theta
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A strictly positive seasonal series whose level wanders (synthetic,
    /// for invariants only; a fixed-seed generator keeps it reproducible).
    fn series(n: usize) -> Vec<f64> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let mut level = 200.0;
        (0..n)
            .map(|t| {
                let tf = t as f64;
                let season = (2.0 * std::f64::consts::PI * tf / 12.0).sin();
                let shock: f64 = StandardNormal.sample(&mut rng);
                let noise: f64 = StandardNormal.sample(&mut rng);
                level += 1.5 + 4.0 * shock;
                level + 40.0 * season + 5.0 * noise
            })
            .collect()
    }

    /// A fit with chosen, clearly non-zero parameters, so the variance
    /// formulas are exercised in every term.
    fn fixed_fit(spec: HoltWinters) -> HoltWintersFit {
        let params = HwParams {
            alpha: 0.3,
            beta: 0.2,
            gamma: 0.25,
            phi: if spec.damped() { 0.9 } else { 1.0 },
            level: 100.0,
            trend: 1.0,
            seasons: [0.0; 12],
        };
        HoltWintersFit {
            spec,
            params,
            n: 60,
            sse: 4.0 * 44.0,
            sigma2: 4.0,
            level: 100.0,
            trend: 1.0,
            seasons: [0.0; 12],
        }
    }

    fn all_specs() -> [HoltWinters; 4] {
        [
            HoltWinters::additive(),
            HoltWinters::additive_damped(),
            HoltWinters::multiplicative(),
            HoltWinters::multiplicative_damped(),
        ]
    }

    #[test]
    fn gradient_matches_finite_differences() {
        let y: Vec<f64> = series(48).iter().map(|v| v / 250.0).collect();
        for spec in all_specs() {
            let problem = Problem::new(&y, spec);
            let mut theta = vec![0.0; problem.dim()];
            let mut p = heuristic_states(spec.seasonality, &y);
            p.alpha = 0.4;
            p.beta = 0.1;
            p.gamma = 0.2;
            p.phi = 0.9;
            problem.encode(&p, &mut theta);
            let mut g = vec![0.0; theta.len()];
            problem.gradient_into(&theta, &mut g);
            for k in 0..theta.len() {
                let h = 1e-6;
                let mut tp = theta.clone();
                tp[k] += h;
                let mut tm = theta.clone();
                tm[k] -= h;
                let fd = (problem.objective(&tp) - problem.objective(&tm)) / (2.0 * h);
                let tol = 1e-5 * (1.0 + fd.abs());
                assert!(
                    (fd - g[k]).abs() < tol,
                    "{:?} coord {k}: analytic {} vs numeric {fd}",
                    spec,
                    g[k]
                );
            }
        }
    }

    #[test]
    fn intervals_are_ordered_and_nested() {
        let y = series(60);
        for spec in all_specs() {
            let fit = spec.fit(&y).unwrap();
            let f = fit.forecast(24, &[0.80, 0.95]).unwrap();
            assert_eq!(f.point.len(), 24);
            let i80 = f.interval(0.80).unwrap();
            let i95 = f.interval(0.95).unwrap();
            for h in 0..24 {
                assert!(f.point[h].is_finite());
                assert!(i80.lower[h] <= f.point[h] && f.point[h] <= i80.upper[h]);
                assert!(i95.lower[h] <= i80.lower[h] && i80.upper[h] <= i95.upper[h]);
                // Some spread: σ² > 0 on this noisy series.
                assert!(i95.upper[h] - i95.lower[h] > 0.0, "{spec:?} h={h}");
            }
        }
    }

    #[test]
    fn additive_widths_grow_with_horizon() {
        let y = series(60);
        for spec in [HoltWinters::additive(), HoltWinters::additive_damped()] {
            let fit = spec.fit(&y).unwrap();
            let f = fit.forecast(24, &[0.95]).unwrap();
            let iv = &f.intervals[0];
            for h in 1..24 {
                let w0 = iv.upper[h - 1] - iv.lower[h - 1];
                let w1 = iv.upper[h] - iv.lower[h];
                assert!(
                    w1 >= w0 - 1e-9,
                    "{spec:?}: width at {h} {w0} > at {} {w1}",
                    h + 1
                );
            }
            assert!(iv.upper[23] - iv.lower[23] > iv.upper[0] - iv.lower[0]);
        }
    }

    #[test]
    fn smoothing_jacobian_matches_finite_differences() {
        // ∂SSE/∂x = −2·Jᵀe; checked by central differences in box coordinates.
        let y = series(60);
        for spec in all_specs() {
            let states = heuristic_states(spec.seasonality, &y);
            let x0 = [0.3, 0.2, 0.4, if spec.damped { 0.9 } else { 1.0 }];
            let d = if spec.damped { 4 } else { 3 };
            let mut g = [0.0; 4];
            let mut h = [[0.0; 4]; 4];
            let f0 = sse_and_jacobian(
                &y,
                spec.seasonality,
                &from_box(&x0, &states),
                d,
                Some((&mut g, &mut h)),
            );
            assert!(f0.is_finite());
            for k in 0..d {
                let eps = 1e-6;
                let (mut xp, mut xm) = (x0, x0);
                xp[k] += eps;
                xm[k] -= eps;
                let fp = sse_and_jacobian(&y, spec.seasonality, &from_box(&xp, &states), d, None);
                let fm = sse_and_jacobian(&y, spec.seasonality, &from_box(&xm, &states), d, None);
                let fd = (fp - fm) / (2.0 * eps);
                let an = -2.0 * g[k];
                assert!(
                    (fd - an).abs() <= 1e-4 * an.abs().max(f0 * 1e-3),
                    "{spec:?} k={k}: fd {fd} vs {an}"
                );
            }
        }
    }

    #[test]
    fn first_year_multiplicative_variance_matches_simulation() {
        // The exact first-cycle variance against the simulation of the same
        // model (1000 paths): they agree within Monte Carlo error.
        for spec in [
            HoltWinters::multiplicative(),
            HoltWinters::multiplicative_damped(),
        ] {
            let fit = spec.fit(&series(72)).unwrap();
            let exact = fit.first_cycle_sd(12);
            let sim = fit.simulated_sd(12);
            assert!(
                (exact[0] - sim[0]).abs() < 1e-9 * exact[0],
                "h=1 is exact in both"
            );
            for h in 1..12 {
                let r = exact[h] / sim[h];
                assert!(
                    (0.93..1.07).contains(&r),
                    "h={}: exact {} sim {}",
                    h + 1,
                    exact[h],
                    sim[h]
                );
            }
        }
    }

    #[test]
    fn multiplicative_widths_grow_year_on_year() {
        // With multiplicative seasonality the spread follows the seasonal
        // factor month by month, so compare the same month a year apart.
        let y = series(60);
        for spec in [
            HoltWinters::multiplicative(),
            HoltWinters::multiplicative_damped(),
        ] {
            let fit = spec.fit(&y).unwrap();
            let f = fit.forecast(24, &[0.95]).unwrap();
            let iv = &f.intervals[0];
            for h in 0..12 {
                let w0 = iv.upper[h] - iv.lower[h];
                let w1 = iv.upper[h + 12] - iv.lower[h + 12];
                assert!(w1 > w0, "{spec:?}: month {h}: {w0} then {w1}");
            }
            // Deterministic: the same fit gives the same simulated bounds.
            assert_eq!(f, fit.forecast(24, &[0.95]).unwrap());
        }
    }

    #[test]
    fn additive_variance_matches_closed_form() {
        // FPP3 §8.7 Table 8.8 (from memory), ETS(A,A,A):
        // σ²[1 + (h−1){α² + αβh + β²h(2h−1)/6} + γk{2α + γ + βm(k+1)}],
        // with β the state-space trend parameter (αβ*), k = ⌊(h−1)/m⌋.
        let fit = fixed_fit(HoltWinters::additive());
        let p = *fit.hw_params();
        let (a, b, g, m) = (p.alpha, p.alpha * p.beta, p.gamma, 12.0);
        let sd = fit.additive_sd(30);
        for (i, s) in sd.iter().enumerate() {
            let h = (i + 1) as f64;
            let k = (i / 12) as f64;
            let v = fit.sigma2()
                * (1.0
                    + (h - 1.0) * (a * a + a * b * h + b * b * h * (2.0 * h - 1.0) / 6.0)
                    + g * k * (2.0 * a + g + b * m * (k + 1.0)));
            assert!((s * s - v).abs() < 1e-9 * v, "h={h}: {} vs {v}", s * s);
        }
    }

    #[test]
    fn damped_additive_variance_matches_closed_form() {
        // FPP3 §8.7 Table 8.8 (from memory), ETS(A,Ad,A).
        let fit = fixed_fit(HoltWinters::additive_damped());
        let p = *fit.hw_params();
        let (a, b, g, f) = (p.alpha, p.alpha * p.beta, p.gamma, p.phi);
        let m = 12i32;
        let sd = fit.additive_sd(30);
        for (i, s) in sd.iter().enumerate() {
            let h = (i + 1) as i32;
            let hf = h as f64;
            let k = (h - 1) / m;
            let kf = k as f64;
            let fm = f.powi(m);
            let v = fit.sigma2()
                * (1.0
                    + a * a * (hf - 1.0)
                    + g * kf * (2.0 * a + g)
                    + b * f * hf / (1.0 - f).powi(2) * (2.0 * a * (1.0 - f) + b * f)
                    - b * f * (1.0 - f.powi(h)) / ((1.0 - f).powi(2) * (1.0 - f * f))
                        * (2.0 * a * (1.0 - f * f) + b * f * (1.0 + 2.0 * f - f.powi(h)))
                    + 2.0 * b * g * f / ((1.0 - f) * (1.0 - fm))
                        * (kf * (1.0 - fm) - fm * (1.0 - f.powi(m * k))));
            assert!((s * s - v).abs() < 1e-7 * v, "h={h}: {} vs {v}", s * s);
        }
    }

    #[test]
    fn multiplicative_refuses_non_positive_data() {
        let mut y = series(36);
        y[5] = 0.0;
        for spec in [
            HoltWinters::multiplicative(),
            HoltWinters::multiplicative_damped(),
        ] {
            let e = spec.fit(&y).unwrap_err();
            assert!(matches!(e, Error::NotApplicable { .. }), "{e}");
            assert!(e.to_string().contains("above zero"), "{e}");
        }
        y[5] = -3.0;
        assert!(HoltWinters::multiplicative().fit(&y).is_err());
        // The additive form takes zeros and negatives.
        assert!(HoltWinters::additive().fit(&y).is_ok());
    }

    #[test]
    fn needs_two_full_years() {
        let y = series(23);
        for spec in all_specs() {
            let e = spec.fit(&y).unwrap_err().to_string();
            assert!(e.contains("at least 24"), "{e}");
            assert!(spec.fit(&series(24)).is_ok());
        }
    }

    #[test]
    fn bounds_hold_and_warm_start_is_no_worse() {
        let y = series(60);
        for spec in all_specs() {
            let fit = spec.fit(&y[..59]).unwrap();
            let p = fit.hw_params();
            assert!(p.alpha > 0.0 && p.alpha < 1.0);
            assert!(p.beta >= 0.0 && p.beta <= p.alpha);
            assert!(p.gamma >= 0.0 && p.gamma <= 1.0 - p.alpha);
            if spec.damped() {
                assert!(p.phi >= PHI_MIN && p.phi <= PHI_MAX_DEFAULT);
            } else {
                assert_eq!(p.phi, 1.0);
            }
            let cold = spec.fit(&y).unwrap();
            let warm = spec.fit_from(&y, Some(p)).unwrap();
            assert!(
                warm.sse <= cold.sse * 1.01,
                "{spec:?}: {} vs {}",
                warm.sse,
                cold.sse
            );
        }
    }

    #[test]
    fn odd_inputs_do_not_panic() {
        let flat = vec![5.0; 36];
        for spec in all_specs() {
            let fit = spec.fit(&flat).unwrap();
            let f = fit.forecast(12, &[0.8, 0.95]).unwrap();
            for v in &f.point {
                assert!((v - 5.0).abs() < 1e-6, "{spec:?}: {v}");
            }
        }
        let zeros = vec![0.0; 30];
        assert!(HoltWinters::additive().fit(&zeros).is_ok());
        let mut spiky = series(40);
        spiky[20] = 1e12;
        for spec in all_specs() {
            if let Ok(fit) = spec.fit(&spiky) {
                let _ = fit.forecast(12, &[0.8]);
            }
        }
        let mut nan = series(30);
        nan[3] = f64::NAN;
        assert!(HoltWinters::additive().fit(&nan).is_err());
        assert!(HoltWinters::additive().with_phi_max(1.0).is_err());
        assert!(HoltWinters::additive().with_phi_max(0.995).is_ok());
    }
}
