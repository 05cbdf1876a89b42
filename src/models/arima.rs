//! Automatic seasonal ARIMA (`arima-auto`): the stepwise order search of
//! Hyndman & Khandakar, with our own exact-likelihood estimator.
//!
//! # Formula
//!
//! Seasonal ARIMA(p,d,q)(P,D,Q)₁₂ (Box, Jenkins, Reinsel & Ljung,
//! *Time Series Analysis*, 5th ed., ch. 9; Hyndman & Athanasopoulos,
//! *Forecasting: Principles and Practice*, 3rd ed., §9.9), with B the
//! backshift operator and w_t the differenced series:
//!
//! ```text
//! w_t = (1 − B)^d (1 − B¹²)^D y_t
//! φ(B) Φ(B¹²) (w_t − c) = θ(B) Θ(B¹²) ε_t,   ε_t ~ N(0, σ²)
//! φ(B) = 1 − φ₁B − … − φ_pB^p          Φ(B¹²) = 1 − Φ₁B¹² − … − Φ_PB^{12P}
//! θ(B) = 1 + θ₁B + … + θ_qB^q          Θ(B¹²) = 1 + Θ₁B¹² + … + Θ_QB^{12Q}
//! ```
//!
//! c is the mean of w: a non-zero mean when d + D = 0, a drift when
//! d + D = 1 (c = slope per month when d = 1, 12 × slope when D = 1), and
//! absent when d + D ≥ 2 — the rule of Hyndman & Khandakar (2008) and of
//! statsforecast 2.1.1 `AutoARIMA`.
//!
//! # Order choice
//!
//! Hyndman, R. J. & Khandakar, Y. (2008), "Automatic time series
//! forecasting: the forecast package for R", *J. Statistical Software*
//! 27(3), §3.2, with the defaults of statsforecast 2.1.1
//! `AutoARIMA(season_length=12)`:
//!
//! 1. D: the seasonal-strength test ("seas", statsforecast's default
//!    `seasonal_test`): an STL decomposition (period 12, seasonal window 11,
//!    seasonal degree 0, the settings statsforecast's `mstl` gives
//!    statsmodels' `STL`) and F_S = max(0, 1 − Var(R)/Var(S + R)) (Wang,
//!    Smith & Hyndman 2006); D = 1 when F_S > 0.64. Not tested (D = 0) for
//!    24 months or fewer or a constant series.
//! 2. d: KPSS level-stationarity test (Kwiatkowski, Phillips, Schmidt &
//!    Shin 1992) on the seasonally differenced series, Bartlett long-run
//!    variance with ⌊3√n/13⌋ lags; difference again while the statistic
//!    exceeds 0.463 (the 5% critical value), at most twice.
//! 3. Stepwise search over (p, q, P, Q, constant) from the best of
//!    (2,d,2)(1,D,1), (0,d,0)(0,D,0), (1,d,0)(1,D,0), (0,d,1)(0,D,1) and,
//!    with a constant allowed, (0,d,0)(0,D,0) without it; then, in
//!    statsforecast's order, one step at a time: P ± 1, Q ± 1, both, p ± 1,
//!    q ± 1, both, the constant toggled; moving to the first neighbour that
//!    lowers AICc, until none does (at most 94 models).
//! 4. AICc = −2 log L + 2k + 2k(k+1)/(n* − k − 1), k = p+q+P+Q+c+1 (c = 1 with a constant or drift),
//!    n* = n − d − 12D. A model whose AR or MA polynomial has a root of
//!    modulus below 1.01 is rejected, as in statsforecast and R forecast.
//!
//! **What we trade for speed.** statsforecast fits every model of the
//! search by exact maximum likelihood for series of at most 150 months, by
//! conditional sum of squares (CSS) for longer ones (its `approximation`).
//! We always search with CSS (log L replaced by −n*/2 ln σ²_CSS, as
//! statsforecast's approximation does) and then fit the best (by CSS AICc)
//! by exact maximum likelihood — statsforecast's approximation procedure
//! used at every length. Two further departures, both for speed: the ML
//! fit is constrained to roots of modulus ≥ 1.01 (statsforecast fits
//! freely and then rejects a model whose roots fall inside, moving to the
//! next best; we try at most 4 orders that way, then fall back to
//! (0,d,0)(0,D,0)), and at most 15 Levenberg–Marquardt iterations (stopping at a relative gain below 10⁻⁵, [`ML_TOL`]); the CSS fits of the search at most 30 (10⁻⁷).
//! `tests/reference_arima.rs` counts how often the chosen orders agree with
//! statsforecast's.
//!
//! # Estimation
//!
//! Exact Gaussian likelihood of w through the Kalman filter on Harvey's
//! state-space form (Harvey 1989, §3.3; Durbin & Koopman 2012, §3.4): state
//! dimension r = max(p + 12P, q + 12Q + 1), transition with the expanded
//! AR coefficients in its first column, initial covariance the stationary
//! covariance of the state, computed from the ARMA autocovariances
//! (Brockwell & Davis 1991, §3.3) and ψ weights. σ² is concentrated out:
//!
//! ```text
//! v_t, F_t   one-step prediction error and its variance (in units of σ²)
//! S = Σ v_t²/F_t,   σ̂² = S/n*
//! log L = −n*/2 (ln 2π + ln σ̂² + 1) − ½ Σ ln F_t
//! ```
//!
//! Once F_t is within 10⁻¹¹ of 1 the filter has reached its steady state
//! and continues as the plain innovations recursion (as R's `arima` does).
//! The likelihood equals statsmodels' `SARIMAX` (differenced data,
//! stationary initialisation) at the same parameters; see
//! `tests/reference_arima.rs`.
//!
//! Both CSS and ML are minimised by projected Levenberg–Marquardt (Moré
//! 1978) on residuals whose squares sum to the objective: the CSS
//! residuals, and for ML v_t/√F_t × (Π F_t)^{1/(2n*)}, whose sum of squares
//! is S·(Π F_t)^{1/n*}, the ML objective up to a monotone map. The
//! Jacobian is by forward differences (≤ 15 parameters; each pass over the
//! series is cheap). Parameters outside the stationary / invertible region
//! (checked by the Schur–Cohn step-down recursion on each factor) are
//! refused as trial points. The series is divided by the standard deviation
//! of w; buffers are allocated once per fit, not per iteration.
//!
//! # Forecasts and intervals
//!
//! Point forecasts of w from the filtered state, integrated back through
//! the differences. Normal intervals from the ψ weights of
//! φ(B)Φ(B¹²)(1−B)^d(1−B¹²)^D and θ(B)Θ(B¹²): σ_h² = σ² Σ_{j<h} ψ_j²,
//! with σ² = S/(n* − number of coefficients), statsforecast's estimate.
//!
//! # Warm start across backtest origins
//!
//! [`Model::fit_warm`] keeps the previous origin's orders (d, D, p, q, P,
//! Q, constant) and its CSS and ML coefficients.
//!
//! * [`AutoArima::new`] (the candidate): d and D are tested at the first
//!   origin of the backtest, on the data up to it, and kept at the later
//!   ones (the seasonal-strength test runs an STL decomposition, as costly
//!   as a refit). At the first origin the stepwise search runs and the
//!   best order by CSS AICc is used with its CSS coefficients (no ML fit).
//!   At a later origin the previous order is kept and only its
//!   coefficients are re-estimated, by CSS started from the previous CSS
//!   optimum and kept to roots of modulus ≥ 1.01. At every origin one
//!   exact Kalman pass at those coefficients gives the likelihood and the
//!   state the forecasts start from. The stepwise search runs again only
//!   when the kept order cannot be refitted. So backtest forecasts use CSS
//!   coefficients, while the fit on the whole history ([`Model::fit`], the
//!   projection) tests d and D, searches, and fits by ML; the cost in
//!   accuracy is measured by `examples/arima_origins.rs` (README,
//!   "Automatic ARIMA") and on M1 and tourism monthly (README, "Speed").
//! * [`AutoArima::searching_every_origin`]: d and D are tested and the
//!   stepwise search runs at every origin, starting from the previous order (fitted from its
//!   previous CSS coefficients) instead of the four starting models, and
//!   the ML fit of the chosen order starts from the previous ML optimum
//!   when the order is the same.
//!
//! In both, every neighbour's CSS fit starts from the current best's
//! coefficients (zero for a new coefficient). Nothing from after the
//! origin is ever used: the warm state holds only estimates from shorter
//! prefixes.
//!
//! # Parameters
//!
//! | name | default | range |
//! |---|---|---|
//! | season length | 12 | fixed (monthly data) |
//! | max p, max q | 5 | also ≤ ⌊n/3⌋ and ≤ 11 |
//! | max P, max Q | 2 | also ≤ ⌊n/36⌋ (so 1 for 36–71 months) |
//! | max d, max D | 2, 1 | tests of steps 1–2 |
//! | start p, q, P, Q | 2, 2, 1, 1 | capped by the maxima |
//! | models tried | at most 94 | stepwise |
//! | information criterion | AICc | — |
//! | KPSS level, seasonal-strength threshold | 5% (0.463), 0.64 | fixed |
//! | root modulus limit | 1.01 | fixed |
//! | φ, θ, Φ, Θ, c, σ² | estimated | stationary, invertible |
//!
//! Like statsforecast's stepwise search, the total order p+q+P+Q is not
//! capped (`max_order` applies only to its exhaustive search).

use super::{Fitted, Forecast, Model, Needs, Season, WarmStart, PERIOD};
use crate::error::{Error, Result};

const NAME: &str = "arima-auto";
const M: usize = PERIOD;
/// Root modulus below which a fitted model is rejected.
const ROOT_LIMIT: f64 = 1.01;
/// KPSS 5% critical value, level stationarity (Kwiatkowski et al. 1992, Table 1).
const KPSS_CRIT_5: f64 = 0.463;
/// Seasonal-strength threshold for D = 1 (statsforecast / R forecast `nsdiffs`).
pub const SEAS_THRESHOLD: f64 = 0.64;
/// At most this many orders (best CSS AICc first) are fitted by ML
/// before falling back to (0,d,0)(0,D,0).
const MAX_ML_TRIES: usize = 4;
/// Iteration cap of an ML fit.
const ML_ITERS: usize = 15;
/// An ML fit stops when a step lowers the scaled sum of squares by less
/// than this share (the log-likelihood then moves by under n·10⁻⁵/2).
/// From 10⁻⁸: the ML step a third faster; `arima-auto`'s mean MASE
/// 1.127 → 1.126 on M1 monthly (h = 18), 1.466 on tourism monthly
/// (h = 24) both ways, the selection unchanged on both and on the
/// benchmark's generated set.
pub const ML_TOL: f64 = 1e-5;
/// Model cap of the stepwise search.
const MAX_MODELS: usize = 94;

/// Orders of a seasonal ARIMA model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Order {
    /// Non-seasonal AR order.
    pub p: usize,
    /// Non-seasonal differences.
    pub d: usize,
    /// Non-seasonal MA order.
    pub q: usize,
    /// Seasonal AR order.
    pub sp: usize,
    /// Seasonal differences.
    pub sd: usize,
    /// Seasonal MA order.
    pub sq: usize,
    /// Whether c (mean or drift) is estimated.
    pub constant: bool,
}

impl Order {
    /// Number of estimated coefficients (σ² not counted).
    pub fn ncoef(&self) -> usize {
        self.p + self.q + self.sp + self.sq + usize::from(self.constant)
    }
    fn pf(&self) -> usize {
        self.p + M * self.sp
    }
    fn qf(&self) -> usize {
        self.q + M * self.sq
    }
    /// Text such as `ARIMA(0,1,1)(0,1,1)[12]`.
    pub fn label(&self) -> String {
        let c = match (self.constant, self.d + self.sd) {
            (true, 0) => " with mean",
            (true, _) => " with drift",
            _ => "",
        };
        format!(
            "ARIMA({},{},{})({},{},{})[12]{c}",
            self.p, self.d, self.q, self.sp, self.sd, self.sq
        )
    }
}

/// `arima-auto`: seasonal ARIMA with automatic orders (module docs).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct AutoArima {
    search_warm: bool,
    season: Season,
}

impl AutoArima {
    /// The candidate: at a warm-started origin the previous differences and
    /// order are kept (module docs, "Warm start").
    pub const fn new() -> Self {
        AutoArima {
            search_warm: false,
            season: Season::Tested,
        }
    }

    /// The same model, but repeating the stepwise search at every origin
    /// (from the previous order); slower, for comparing accuracy.
    pub const fn searching_every_origin() -> Self {
        AutoArima {
            search_warm: true,
            season: Season::Tested,
        }
    }

    /// The candidate with its seasonal part set rather than tested:
    /// [`Season::Never`] has no seasonal difference and no seasonal AR or MA
    /// terms; [`Season::Always`] takes one seasonal difference (D = 1), the
    /// usual way to impose a seasonal pattern on an ARIMA model.
    pub const fn with_season(season: Season) -> Self {
        AutoArima {
            search_warm: false,
            season,
        }
    }
}

/// What a fit leaves for the next origin.
#[derive(Debug, Clone)]
struct ArimaWarm {
    order: Order,
    /// Whether d and D of `order` came from the tests (not a constant series).
    tested: bool,
    css: Vec<f64>,
    ml: Vec<f64>,
}

impl Model for AutoArima {
    type Fitted = FittedArima;

    fn name(&self) -> String {
        NAME.to_string()
    }

    fn description(&self) -> String {
        "automatic seasonal ARIMA: differences by KPSS and seasonal-strength tests, orders by \
         stepwise AICc search, exact maximum likelihood"
            .to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: 2 * PERIOD,
            positive: false,
            seasonal: true,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<FittedArima> {
        self.needs().check(NAME, y)?;
        auto_arima(y, None, self.search_warm, true, self.season)
    }

    fn fit_warm(&self, y: &[f64], warm: &mut WarmStart) -> Result<FittedArima> {
        self.needs().check(NAME, y)?;
        let previous = warm
            .as_ref()
            .and_then(|w| w.downcast_ref::<ArimaWarm>())
            .cloned();
        let fit = auto_arima(y, previous.as_ref(), self.search_warm, false, self.season)?;
        *warm = Some(Box::new(ArimaWarm {
            order: fit.order,
            tested: fit.loglik.is_finite(),
            css: fit.css.clone(),
            ml: fit.coef.clone(),
        }));
        Ok(fit)
    }
}

/// A fitted seasonal ARIMA model.
#[derive(Debug, Clone)]
pub struct FittedArima {
    order: Order,
    /// Coefficients in the original units: φ, θ, Φ, Θ, then c.
    coef: Vec<f64>,
    /// CSS coefficients of the chosen order (scaled units; warm start only).
    css: Vec<f64>,
    sigma2: f64,
    loglik: f64,
    aicc: f64,
    /// The series as given (for undifferencing).
    y: Vec<f64>,
    /// Forecasts of w − c for horizons 1.. from the filtered state are
    /// computed from this predicted state and the expanded AR polynomial.
    state: Vec<f64>,
    sse: f64,
}

impl FittedArima {
    /// The chosen orders.
    pub fn order(&self) -> Order {
        self.order
    }
    /// Exact Gaussian log-likelihood of the differenced series at the optimum.
    pub fn loglik(&self) -> f64 {
        self.loglik
    }
    /// AICc of the fit (by exact likelihood).
    pub fn aicc(&self) -> f64 {
        self.aicc
    }
    /// Innovation variance used by the intervals.
    pub fn sigma2(&self) -> f64 {
        self.sigma2
    }
    /// Coefficients φ₁…φ_p, θ₁…θ_q, Φ₁…Φ_P, Θ₁…Θ_Q, then c (mean of w).
    pub fn coefficients(&self) -> &[f64] {
        &self.coef
    }
}

impl Fitted for FittedArima {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let o = self.order;
        let (phi, theta) = expand(&o, &self.coef);
        let c = if o.constant {
            self.coef[o.ncoef() - 1]
        } else {
            0.0
        };
        // Forecasts of w from the predicted state a_{n+1|n}.
        let r = self.state.len();
        let mut a = self.state.clone();
        let mut w = Vec::with_capacity(horizon);
        for _ in 0..horizon {
            w.push(c + a.first().copied().unwrap_or(0.0));
            if r > 0 {
                let a0 = a[0];
                for i in 0..r {
                    let next = if i + 1 < r { a[i + 1] } else { 0.0 };
                    a[i] = phi.get(i).copied().unwrap_or(0.0) * a0 + next;
                }
            }
        }
        // Undifference: y_t = w_t + Σ δ_j y_{t−j}.
        let delta = diff_poly(o.d, o.sd);
        let n = self.y.len();
        let mut ext = self.y.clone();
        ext.reserve(horizon);
        for (h, &wh) in w.iter().enumerate() {
            let t = n + h;
            let mut v = wh;
            for (j, &dj) in delta.iter().enumerate() {
                v += dj * ext[t - (j + 1)];
            }
            ext.push(v);
        }
        let point = ext[n..].to_vec();
        // ψ weights of φ(B)δ(B) and θ(B).
        let mut ar = phi.clone();
        if !delta.is_empty() {
            ar = poly_mul_ar(&phi, &delta);
        }
        let psi = psi_weights(&ar, &theta, horizon);
        let mut sd = Vec::with_capacity(horizon);
        let mut acc = 0.0;
        for p in psi.iter().take(horizon) {
            acc += p * p;
            sd.push((self.sigma2 * acc).sqrt());
        }
        if point.iter().chain(&sd).any(|v| !v.is_finite()) {
            return Err(Error::Model {
                model: NAME.to_string(),
                message: format!("{} gave a non-finite forecast", o.label()),
            });
        }
        Forecast::normal(point, &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        let o = self.order;
        let mut out = vec![
            ("p".to_string(), o.p as f64),
            ("d".to_string(), o.d as f64),
            ("q".to_string(), o.q as f64),
            ("P".to_string(), o.sp as f64),
            ("D".to_string(), o.sd as f64),
            ("Q".to_string(), o.sq as f64),
        ];
        let mut k = 0;
        for (prefix, count) in [("ar", o.p), ("ma", o.q), ("sar", o.sp), ("sma", o.sq)] {
            for i in 0..count {
                out.push((format!("{prefix}{}", i + 1), self.coef[k]));
                k += 1;
            }
        }
        if o.constant {
            let c = self.coef[k];
            if o.d + o.sd == 0 {
                out.push(("intercept".to_string(), c));
            } else {
                // statsforecast's drift: slope per month.
                out.push((
                    "drift".to_string(),
                    c / if o.sd == 1 { M as f64 } else { 1.0 },
                ));
            }
        }
        out.push(("sigma2".to_string(), self.sigma2));
        out.push(("loglik".to_string(), self.loglik));
        out.push(("aicc".to_string(), self.aicc));
        out
    }

    fn sse(&self) -> Option<f64> {
        Some(self.sse)
    }
}

// ---------------------------------------------------------------------------
// Polynomials and checks

/// Expanded AR (φ(B)Φ(B¹²), as coefficients of B¹..) and MA polynomials
/// from the parameter vector [φ, θ, Φ, Θ, c].
pub fn expand(o: &Order, par: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let mut phi = vec![0.0; o.pf()];
    let mut theta = vec![0.0; o.qf()];
    expand_into(o, par, &mut phi, &mut theta);
    (phi, theta)
}

fn expand_into(o: &Order, par: &[f64], phi: &mut [f64], theta: &mut [f64]) {
    let (ar, rest) = par.split_at(o.p);
    let (ma, rest) = rest.split_at(o.q);
    let (sar, rest) = rest.split_at(o.sp);
    let sma = &rest[..o.sq];
    phi.iter_mut().for_each(|v| *v = 0.0);
    theta.iter_mut().for_each(|v| *v = 0.0);
    // (1 − Σ a_i B^i)(1 − Σ s_j B^{12j}) = 1 − Σ a_i B^i − Σ s_j B^{12j} + Σ a_i s_j B^{i+12j}
    for (i, &a) in ar.iter().enumerate() {
        phi[i] += a;
    }
    for (j, &s) in sar.iter().enumerate() {
        phi[M * (j + 1) - 1] += s;
        for (i, &a) in ar.iter().enumerate() {
            phi[M * (j + 1) + i] -= a * s;
        }
    }
    for (i, &b) in ma.iter().enumerate() {
        theta[i] += b;
    }
    for (j, &s) in sma.iter().enumerate() {
        theta[M * (j + 1) - 1] += s;
        for (i, &b) in ma.iter().enumerate() {
            theta[M * (j + 1) + i] += b * s;
        }
    }
}

/// Coefficients δ_j of (1−B)^d (1−B¹²)^D = 1 − Σ δ_j B^j.
fn diff_poly(d: usize, sd: usize) -> Vec<f64> {
    // Multiply out as a full polynomial with constant term.
    let mut p = vec![1.0];
    for _ in 0..d {
        p = mul_full(&p, &[1.0, -1.0]);
    }
    for _ in 0..sd {
        let mut s = vec![0.0; M + 1];
        s[0] = 1.0;
        s[M] = -1.0;
        p = mul_full(&p, &s);
    }
    p[1..].iter().map(|v| -v).collect()
}

fn mul_full(a: &[f64], b: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; a.len() + b.len() - 1];
    for (i, &x) in a.iter().enumerate() {
        for (j, &y) in b.iter().enumerate() {
            out[i + j] += x * y;
        }
    }
    out
}

/// AR coefficients of the product of two AR polynomials (1 − Σ a B^i)(1 − Σ b B^j).
fn poly_mul_ar(a: &[f64], b: &[f64]) -> Vec<f64> {
    let mut fa = vec![1.0];
    fa.extend(a.iter().map(|v| -v));
    let mut fb = vec![1.0];
    fb.extend(b.iter().map(|v| -v));
    mul_full(&fa, &fb)[1..].iter().map(|v| -v).collect()
}

/// ψ weights ψ_0..ψ_{n−1} of θ(B)/φ(B) (AR as coefficients of 1 − Σ φ B^i).
fn psi_weights(phi: &[f64], theta: &[f64], n: usize) -> Vec<f64> {
    let mut psi = vec![0.0; n.max(1)];
    psi[0] = 1.0;
    for j in 1..n {
        let mut v = theta.get(j - 1).copied().unwrap_or(0.0);
        for (i, &f) in phi.iter().enumerate().take(j) {
            v += f * psi[j - 1 - i];
        }
        psi[j] = v;
    }
    psi
}

/// Whether every root of 1 − Σ a_i (z·scale)^i lies outside the unit
/// circle (Schur–Cohn step-down recursion); `scale` > 1 demands roots of
/// modulus above `scale`.
fn stable(a: &[f64], scale: f64) -> bool {
    let k = a.len();
    if k == 0 {
        return true;
    }
    let mut buf = [0.0f64; 8];
    let mut tmp = [0.0f64; 8];
    if k > buf.len() {
        return false;
    }
    let mut s = 1.0;
    for i in 0..k {
        s *= scale;
        buf[i] = a[i] * s;
        if !buf[i].is_finite() {
            return false;
        }
    }
    for j in (0..k).rev() {
        let kappa = buf[j];
        if kappa.abs() >= 1.0 {
            return false;
        }
        let den = 1.0 - kappa * kappa;
        for i in 0..j {
            tmp[i] = (buf[i] + kappa * buf[j - 1 - i]) / den;
        }
        buf[..j].copy_from_slice(&tmp[..j]);
    }
    true
}

/// Stationary and invertible, with roots of modulus above `limit`, factor
/// by factor (the roots of a product are those of its factors).
fn admissible(o: &Order, par: &[f64], limit: f64) -> bool {
    let (ar, rest) = par.split_at(o.p);
    let (ma, rest) = rest.split_at(o.q);
    let (sar, rest) = rest.split_at(o.sp);
    let sma = &rest[..o.sq];
    let mut neg = [0.0f64; 8];
    let ma_ok = |m: &[f64], s: f64, neg: &mut [f64; 8]| {
        for (d, v) in neg.iter_mut().zip(m) {
            *d = -v;
        }
        stable(&neg[..m.len()], s)
    };
    stable(ar, limit)
        && stable(sar, limit.powi(M as i32))
        && ma_ok(ma, limit, &mut neg)
        && ma_ok(sma, limit.powi(M as i32), &mut neg)
}

// ---------------------------------------------------------------------------
// Tests for d and D

fn is_constant(x: &[f64]) -> bool {
    x.iter().all(|&v| v == x[0])
}

fn difference(x: &[f64], lag: usize) -> Vec<f64> {
    if x.len() <= lag {
        return Vec::new();
    }
    (lag..x.len()).map(|t| x[t] - x[t - lag]).collect()
}

/// KPSS level-stationarity statistic with `lags` Bartlett lags
/// (Kwiatkowski et al. 1992, eq. 11–14; statsmodels `kpss(x, "c", nlags)`).
pub fn kpss_level(x: &[f64], lags: usize) -> f64 {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let mut s = 0.0;
    let mut eta = 0.0;
    let mut gamma0 = 0.0;
    for &v in x {
        let e = v - mean;
        s += e;
        eta += s * s;
        gamma0 += e * e;
    }
    let mut lrv = gamma0;
    for k in 1..=lags.min(x.len().saturating_sub(1)) {
        let mut g = 0.0;
        for t in k..x.len() {
            g += (x[t] - mean) * (x[t - k] - mean);
        }
        lrv += 2.0 * (1.0 - k as f64 / (lags as f64 + 1.0)) * g;
    }
    (eta / (n * n)) / (lrv / n)
}

/// Number of first differences by repeated KPSS tests (statsforecast `ndiffs`).
fn ndiffs(x: &[f64]) -> usize {
    let mut d = 0;
    let mut x = x.to_vec();
    if x.is_empty() || is_constant(&x) {
        return 0;
    }
    let test = |x: &[f64]| {
        let lags = (3.0 * (x.len() as f64).sqrt() / 13.0).floor() as usize;
        let stat = kpss_level(x, lags);
        stat.is_finite() && stat > KPSS_CRIT_5
    };
    let mut dodiff = test(&x);
    while dodiff && d < 2 {
        d += 1;
        x = difference(&x, 1);
        if x.len() < 2 || is_constant(&x) {
            return d;
        }
        dodiff = test(&x);
    }
    d
}

/// Seasonal strength F_S of an STL decomposition with the settings of the
/// module docs; `None` when STL cannot run on the series.
///
/// `ets-auto`, `arima-auto` and `theta` each test the same history (at the
/// backtest's first origin and for the projection), so the answers for the
/// last few series this thread decomposed are kept and reused for an
/// identical series.
pub fn seasonal_strength(x: &[f64]) -> Option<f64> {
    use std::cell::RefCell;
    /// Series remembered per thread (a backtest's origins plus the whole
    /// history fit).
    const KEPT: usize = 16;
    thread_local! {
        static SEEN: RefCell<Vec<(Vec<f64>, Option<f64>)>> = const { RefCell::new(Vec::new()) };
    }
    let same = |a: &[f64], b: &[f64]| {
        a.len() == b.len() && a.iter().zip(b).all(|(p, q)| p.to_bits() == q.to_bits())
    };
    if let Some(hit) = SEEN.with(|s| s.borrow().iter().find(|(k, _)| same(k, x)).map(|e| e.1)) {
        return hit;
    }
    let strength = super::stl::decompose(x)
        .map(|d| d.seasonal_strength())
        .filter(|s| s.is_finite());
    SEEN.with(|s| {
        let mut s = s.borrow_mut();
        if s.len() == KEPT {
            s.remove(0);
        }
        s.push((x.to_vec(), strength));
    });
    strength
}

/// Number of seasonal differences (statsforecast `nsdiffs`, test "seas", max 1).
fn nsdiffs(x: &[f64]) -> usize {
    if x.len() <= 2 * M || is_constant(x) {
        return 0;
    }
    usize::from(seasonal_strength(x).is_some_and(|s| s > SEAS_THRESHOLD))
}

// ---------------------------------------------------------------------------
// Estimation

/// Buffers for one series' fits, allocated once.
struct Work {
    /// Scaled differenced series.
    w: Vec<f64>,
    phi: Vec<f64>,
    theta: Vec<f64>,
    resid: Vec<f64>,
    // Kalman
    a: Vec<f64>,
    pm: Vec<f64>,
    tmp: Vec<f64>,
    gamma: Vec<f64>,
    psi: Vec<f64>,
    sys: Vec<f64>,
    // LM
    jac: Vec<f64>,
    r0: Vec<f64>,
    r1: Vec<f64>,
    x1: Vec<f64>,
}

const MAX_PF: usize = 5 + 2 * M + 5;

/// The (lag, coefficient) pairs of the nonzero coefficients of an expanded
/// polynomial (`coef[k]` at lag k + 1), in increasing lag, written into
/// `out` (at least `coef.len()` long); returns them.
fn nonzero_lags<'a>(coef: &[f64], out: &'a mut [(usize, f64); MAX_PF]) -> &'a [(usize, f64)] {
    let mut n = 0;
    for (k, &c) in coef.iter().enumerate() {
        if c != 0.0 {
            out[n] = (k + 1, c);
            n += 1;
        }
    }
    &out[..n]
}
const MAX_R: usize = MAX_PF + 1;
const MAX_K: usize = 15;

impl Work {
    fn new(w: Vec<f64>) -> Self {
        let n = w.len();
        Work {
            w,
            phi: vec![0.0; MAX_PF],
            theta: vec![0.0; MAX_PF],
            resid: vec![0.0; n],
            a: vec![0.0; MAX_R],
            pm: vec![0.0; MAX_R * MAX_R],
            tmp: vec![0.0; MAX_R * MAX_R],
            gamma: vec![0.0; MAX_R + 1],
            psi: vec![0.0; MAX_R + 1],
            sys: vec![0.0; (MAX_R + 1) * (MAX_R + 2)],
            jac: vec![0.0; n * MAX_K],
            r0: vec![0.0; n],
            r1: vec![0.0; n],
            x1: vec![0.0; MAX_K],
        }
    }
}

/// CSS residuals into `out` (length n − p − 12P); `None` when non-finite.
fn css_resid(
    o: &Order,
    par: &[f64],
    w: &[f64],
    phi: &mut [f64],
    theta: &mut [f64],
    out: &mut [f64],
) -> Option<()> {
    let pf = o.pf();
    let qf = o.qf();
    let phi = &mut phi[..pf];
    let theta = &mut theta[..qf];
    expand_into(o, par, phi, theta);
    let c = if o.constant { par[o.ncoef() - 1] } else { 0.0 };
    let n = w.len();
    // The expanded seasonal polynomials are mostly zeros: keep the nonzero
    // lags (in increasing order, so each sum adds the same terms in the
    // same order as a loop over every lag skipping zeros).
    if pf > MAX_PF || qf > MAX_PF {
        return None;
    }
    let (mut ar, mut ma) = ([(0usize, 0.0f64); MAX_PF], [(0usize, 0.0f64); MAX_PF]);
    let (ar, ma) = (nonzero_lags(phi, &mut ar), nonzero_lags(theta, &mut ma));
    for t in pf..n {
        let mut e = w[t] - c;
        for &(lag, f) in ar {
            e -= f * (w[t - lag] - c);
        }
        let k = t - pf;
        for &(lag, th) in ma {
            if k >= lag {
                e -= th * out[k - lag];
            }
        }
        out[k] = e;
    }
    out[..n - pf].iter().all(|v| v.is_finite()).then_some(())
}

/// Stationary covariance of Harvey's state (σ² = 1) into `pm` (r × r).
#[allow(clippy::too_many_arguments, clippy::needless_range_loop)]
fn initial_cov(
    phi: &[f64],
    theta: &[f64],
    r: usize,
    gamma: &mut [f64],
    psi: &mut [f64],
    sys: &mut [f64],
    pm: &mut [f64],
) -> Option<()> {
    let pf = phi.len();
    // ψ_0..ψ_r
    psi[0] = 1.0;
    for j in 1..=r {
        let mut v = theta.get(j - 1).copied().unwrap_or(0.0);
        for i in 0..pf.min(j) {
            v += phi[i] * psi[j - 1 - i];
        }
        psi[j] = v;
    }
    // γ(k) − Σ φ_j γ(|k−j|) = Σ_{j≥k} θ_j ψ_{j−k}, θ_0 = 1, for k = 0..pf.
    let rhs = |k: usize, psi: &[f64]| {
        let mut v = if k == 0 { psi[0] } else { 0.0 };
        for j in k.max(1)..=theta.len() {
            v += theta[j - 1] * psi[j - k];
        }
        v
    };
    let m = pf + 1;
    let cols = m + 1;
    for v in sys[..m * cols].iter_mut() {
        *v = 0.0;
    }
    for k in 0..m {
        sys[k * cols + k] += 1.0;
        for j in 1..=pf {
            let idx = k.abs_diff(j);
            sys[k * cols + idx] -= phi[j - 1];
        }
        sys[k * cols + m] = rhs(k, psi);
    }
    // Gaussian elimination with partial pivoting.
    for col in 0..m {
        let mut piv = col;
        for row in col + 1..m {
            if sys[row * cols + col].abs() > sys[piv * cols + col].abs() {
                piv = row;
            }
        }
        if sys[piv * cols + col].abs() < 1e-300 {
            return None;
        }
        if piv != col {
            for c in 0..cols {
                sys.swap(piv * cols + c, col * cols + c);
            }
        }
        let d = sys[col * cols + col];
        for row in col + 1..m {
            let f = sys[row * cols + col] / d;
            if f != 0.0 {
                for c in col..cols {
                    sys[row * cols + c] -= f * sys[col * cols + c];
                }
            }
        }
    }
    for col in (0..m).rev() {
        let mut v = sys[col * cols + m];
        for c in col + 1..m {
            v -= sys[col * cols + c] * gamma[c];
        }
        gamma[col] = v / sys[col * cols + col];
    }
    for k in m..=r {
        let mut v = rhs(k, psi);
        for j in 1..=pf {
            v += phi[j - 1] * gamma[k - j];
        }
        gamma[k] = v;
    }
    // State element i (0-based) = Σ_{m≥1} φ_{i+m−1} y_{t−m} + Σ_{m≥0} θ_{i+m} ε_{t−m}
    // for i ≥ 1, and y_t for i = 0; sums over the non-zero coefficients only.
    let (mut nzf, mut nzt) = ([(0usize, 0.0f64); MAX_PF], [(0usize, 0.0f64); MAX_PF]);
    let (nzf, nzt) = (nonzero_lags(phi, &mut nzf), nonzero_lags(theta, &mut nzt));
    let th = |k: usize| {
        if k >= 1 && k <= theta.len() {
            theta[k - 1]
        } else {
            0.0
        }
    };
    // Cov(y_{t−a}, ε_{t−b}) = ψ_{b−a} if b ≥ a.
    let cye = |a: usize, b: usize| if b >= a { psi[b - a] } else { 0.0 };
    for i in 0..r {
        for j in i..r {
            let mut v = 0.0;
            if i == 0 && j == 0 {
                v = gamma[0];
            } else if i == 0 {
                for &(k, f) in nzf.iter().filter(|e| e.0 > j) {
                    v += f * gamma[k - j];
                }
                for &(k, t) in nzt.iter().filter(|e| e.0 >= j) {
                    v += t * psi[k - j];
                }
            } else {
                for &(ka, fa) in nzf.iter().filter(|e| e.0 > i) {
                    let ma = ka - i;
                    for &(kb, fb) in nzf.iter().filter(|e| e.0 > j) {
                        v += fa * fb * gamma[ma.abs_diff(kb - j)];
                    }
                    for &(kb, tb) in nzt.iter().filter(|e| e.0 >= j) {
                        v += fa * tb * cye(ma, kb - j);
                    }
                }
                for &(ka, ta) in nzt.iter().filter(|e| e.0 >= i) {
                    let ma = ka - i;
                    for &(kb, fb) in nzf.iter().filter(|e| e.0 > j) {
                        v += ta * fb * cye(kb - j, ma);
                    }
                    // The same shock ε_{t−ma} in α_j has coefficient θ_{j+ma}.
                    v += ta * th(j + ma);
                }
            }
            pm[i * r + j] = v;
            pm[j * r + i] = v;
        }
    }
    pm[..r * r].iter().all(|v| v.is_finite()).then_some(())
}

/// Result of one exact-likelihood pass.
struct KalmanOut {
    /// S = Σ v²/F.
    ssq: f64,
    /// Σ ln F.
    sum_log_f: f64,
}

/// Kalman filter over `z` (= w − c), leaving standardized innovations in
/// `resid` and the predicted state a_{n+1|n} in `a`.
#[allow(clippy::too_many_arguments)]
fn kalman(
    phi: &[f64],
    theta: &[f64],
    z: &[f64],
    c: f64,
    a: &mut [f64],
    pm: &mut [f64],
    tmp: &mut [f64],
    resid: &mut [f64],
) -> Option<KalmanOut> {
    let pf = phi.len();
    let r = pf.max(theta.len() + 1);
    // The transition's first column (φ, zero-padded) and R = (1, θ, 0…).
    let mut ph = [0.0; MAX_R];
    ph[..pf].copy_from_slice(phi);
    let mut rr = [0.0; MAX_R];
    rr[0] = 1.0;
    rr[1..=theta.len()].copy_from_slice(theta);
    a[..r].iter_mut().for_each(|v| *v = 0.0);
    let mut ssq = 0.0;
    let mut sum_log_f = 0.0;
    let mut steady = false;
    for (t, &zt) in z.iter().enumerate() {
        let v = zt - c - a[0];
        if steady {
            resid[t] = v;
            ssq += v * v;
            // a' = T(a + R v)
            let a0 = a[0] + v;
            for i in 0..r {
                let next = if i + 1 < r {
                    a[i + 1] + rr[i + 1] * v
                } else {
                    0.0
                };
                a[i] = ph[i] * a0 + next;
            }
            continue;
        }
        let f = pm[0];
        if f.is_nan() || f <= 0.0 || !f.is_finite() {
            return None;
        }
        resid[t] = v / f.sqrt();
        ssq += v * v / f;
        sum_log_f += f.ln();
        // Filtered: a_f = a + P e1 v/F; P_f = P − P e1 e1' P / F. P is
        // symmetric to the bit (every update writes both halves), so P_f's
        // upper triangle is all the prediction reads: its column 0 below
        // the diagonal equals row 0 (x − x·p/f against x − p·x/f).
        for i in 0..r {
            a[i] += pm[i * r] * v / f;
        }
        for i in 0..r {
            let pi0 = pm[i * r];
            for j in i..r {
                tmp[i * r + j] = pm[i * r + j] - pi0 * pm[j * r] / f;
            }
        }
        // Predict: a' = T a_f; P' = T P_f T' + R R'.
        let a0 = a[0];
        for i in 0..r {
            let next = if i + 1 < r { a[i + 1] } else { 0.0 };
            a[i] = ph[i] * a0 + next;
        }
        let p00 = tmp[0];
        for i in 0..r {
            let fi = ph[i];
            for j in i..r {
                let fj = ph[j];
                let mut val = fi * fj * p00;
                if j + 1 < r {
                    val += fi * tmp[j + 1];
                }
                if i + 1 < r {
                    val += fj * tmp[i + 1];
                }
                if i + 1 < r && j + 1 < r {
                    val += tmp[(i + 1) * r + j + 1];
                }
                val += rr[i] * rr[j];
                pm[i * r + j] = val;
                pm[j * r + i] = val;
            }
        }
        if (pm[0] - 1.0).abs() < 1e-11 {
            steady = true;
        }
    }
    (ssq.is_finite() && sum_log_f.is_finite()).then_some(KalmanOut { ssq, sum_log_f })
}

/// Exact log-likelihood pass at `par` on the scaled series; fills
/// `work.resid` with standardized innovations and `work.a` with a_{n+1|n}.
fn exact_pass(o: &Order, par: &[f64], work: &mut Work) -> Option<KalmanOut> {
    if !admissible(o, par, 1.0) {
        return None;
    }
    let pf = o.pf();
    let qf = o.qf();
    expand_into(o, par, &mut work.phi[..pf], &mut work.theta[..qf]);
    let r = pf.max(qf + 1);
    initial_cov(
        &work.phi[..pf],
        &work.theta[..qf],
        r,
        &mut work.gamma,
        &mut work.psi,
        &mut work.sys,
        &mut work.pm,
    )?;
    let c = if o.constant { par[o.ncoef() - 1] } else { 0.0 };
    kalman(
        &work.phi[..pf],
        &work.theta[..qf],
        &work.w,
        c,
        &mut work.a,
        &mut work.pm,
        &mut work.tmp,
        &mut work.resid,
    )
}

/// Levenberg–Marquardt on residuals `f(x, out)` of fixed length `m`;
/// returns the final sum of squares. `x` is updated in place.
#[allow(clippy::too_many_arguments, clippy::type_complexity)]
fn levenberg_marquardt(
    x: &mut [f64],
    m: usize,
    jac: &mut [f64],
    r0: &mut [f64],
    r1: &mut [f64],
    x1: &mut [f64],
    max_iter: usize,
    tol: f64,
    f: &mut dyn FnMut(&[f64], &mut [f64]) -> Option<()>,
) -> Option<f64> {
    let k = x.len();
    f(x, &mut r0[..m])?;
    let mut cost: f64 = r0[..m].iter().map(|v| v * v).sum();
    if k == 0 {
        return Some(cost);
    }
    let mut lambda = 1e-3;
    let mut a = [0.0f64; MAX_K * MAX_K];
    let mut g = [0.0f64; MAX_K];
    let mut l = [0.0f64; MAX_K * MAX_K];
    let mut step = [0.0f64; MAX_K];
    for _ in 0..max_iter {
        // Forward-difference Jacobian.
        for j in 0..k {
            let h = 1e-6 * (1.0 + x[j].abs());
            x1[..k].copy_from_slice(x);
            x1[j] += h;
            let mut hh = h;
            if f(&x1[..k], &mut r1[..m]).is_none() {
                x1[j] = x[j] - h;
                hh = -h;
                f(&x1[..k], &mut r1[..m])?;
            }
            // Column-major: each coefficient's column is contiguous, so
            // the sums below run over adjacent values (same order as a
            // row-major walk, so the same results).
            for (d, (a1, a0)) in jac[j * m..(j + 1) * m]
                .iter_mut()
                .zip(r1.iter().zip(&r0[..m]))
            {
                *d = (a1 - a0) / hh;
            }
        }
        for i in 0..k {
            let ci = &jac[i * m..(i + 1) * m];
            let mut gi = 0.0;
            for (x, r) in ci.iter().zip(&r0[..m]) {
                gi += x * r;
            }
            g[i] = gi;
            for j in i..k {
                let cj = &jac[j * m..(j + 1) * m];
                let mut s = 0.0;
                for (x, y) in ci.iter().zip(cj) {
                    s += x * y;
                }
                a[i * k + j] = s;
                a[j * k + i] = s;
            }
        }
        let mut improved = false;
        while lambda < 1e12 {
            // Cholesky of A + λ diag(A).
            let mut ok = true;
            for i in 0..k {
                for j in 0..=i {
                    let mut s = a[i * k + j];
                    if i == j {
                        s += lambda * a[i * k + i].max(1e-12) + 1e-14;
                    }
                    for p in 0..j {
                        s -= l[i * k + p] * l[j * k + p];
                    }
                    if i == j {
                        if s <= 0.0 {
                            ok = false;
                            break;
                        }
                        l[i * k + i] = s.sqrt();
                    } else {
                        l[i * k + j] = s / l[j * k + j];
                    }
                }
                if !ok {
                    break;
                }
            }
            if !ok {
                lambda *= 10.0;
                continue;
            }
            for i in 0..k {
                let mut s = -g[i];
                for p in 0..i {
                    s -= l[i * k + p] * step[p];
                }
                step[i] = s / l[i * k + i];
            }
            for i in (0..k).rev() {
                let mut s = step[i];
                for p in i + 1..k {
                    s -= l[p * k + i] * step[p];
                }
                step[i] = s / l[i * k + i];
            }
            for i in 0..k {
                x1[i] = x[i] + step[i];
            }
            let trial =
                f(&x1[..k], &mut r1[..m]).map(|_| r1[..m].iter().map(|v| v * v).sum::<f64>());
            match trial {
                Some(c1) if c1.is_finite() && c1 < cost => {
                    let gain = (cost - c1) / cost.max(1e-300);
                    x.copy_from_slice(&x1[..k]);
                    r0[..m].copy_from_slice(&r1[..m]);
                    cost = c1;
                    lambda = (lambda / 10.0).max(1e-12);
                    improved = gain > tol;
                    break;
                }
                _ => lambda *= 10.0,
            }
        }
        if !improved {
            break;
        }
    }
    Some(cost)
}

/// One order fitted by CSS: coefficients (scaled units) and AICc of the
/// CSS approximation.
#[derive(Debug, Clone)]
struct CssFit {
    order: Order,
    par: Vec<f64>,
    ic: f64,
}

/// `limit`: when given, trial points must have roots of modulus above it.
fn fit_css(o: &Order, start: &[f64], work: &mut Work, limit: Option<f64>) -> CssFit {
    let k = o.ncoef();
    let n = work.w.len();
    let pf = o.pf();
    let fail = CssFit {
        order: *o,
        par: start.to_vec(),
        ic: f64::INFINITY,
    };
    if pf + 2 >= n || k > MAX_K {
        return fail;
    }
    let m = n - pf;
    let mut par = start.to_vec();
    let Work {
        w,
        phi,
        theta,
        resid: _,
        jac,
        r0,
        r1,
        x1,
        ..
    } = work;
    let mut f = |x: &[f64], out: &mut [f64]| {
        if limit.is_some_and(|l| !admissible(o, x, l)) {
            return None;
        }
        css_resid(o, x, w, phi, theta, out)
    };
    let Some(ssq) = levenberg_marquardt(&mut par, m, jac, r0, r1, x1, 30, 1e-7, &mut f) else {
        return fail;
    };
    let sigma2 = ssq / m as f64;
    let nstar = n as f64;
    let npar = (k + 1) as f64;
    let mut ic = if sigma2 > 0.0 {
        nstar * sigma2.ln() + 2.0 * npar
    } else {
        f64::NEG_INFINITY
    };
    let den = nstar - npar - 1.0;
    ic = if den > 0.0 {
        ic + 2.0 * npar * (npar + 1.0) / den
    } else {
        f64::INFINITY
    };
    if !admissible(o, &par, ROOT_LIMIT) || ic.is_nan() {
        ic = f64::INFINITY;
    }
    CssFit { order: *o, par, ic }
}

/// ML fit of one order from `start`; returns coefficients (scaled units),
/// S, Σ ln F.
fn fit_ml(
    o: &Order,
    start: &[f64],
    work: &mut Work,
    max_iter: usize,
    limit: f64,
) -> Option<(Vec<f64>, f64, f64)> {
    let n = work.w.len();
    let mut par = start.to_vec();
    if !admissible(o, &par, limit) {
        // Shrink towards zero until admissible.
        let mut ok = false;
        for _ in 0..20 {
            for (i, v) in par.iter_mut().enumerate() {
                if i < o.ncoef() - usize::from(o.constant) {
                    *v *= 0.5;
                }
            }
            if admissible(o, &par, limit) {
                ok = true;
                break;
            }
        }
        if !ok {
            return None;
        }
    }
    let mut jac = std::mem::take(&mut work.jac);
    let mut r0 = std::mem::take(&mut work.r0);
    let mut r1 = std::mem::take(&mut work.r1);
    let mut x1 = std::mem::take(&mut work.x1);
    let mut f = |x: &[f64], out: &mut [f64]| {
        if !admissible(o, x, limit) {
            return None;
        }
        let k = exact_pass(o, x, work)?;
        let g = (0.5 * k.sum_log_f / n as f64).exp();
        for (d, s) in out.iter_mut().zip(&work.resid) {
            *d = s * g;
        }
        Some(())
    };
    let res = levenberg_marquardt(
        &mut par,
        n,
        &mut jac,
        &mut r0,
        &mut r1,
        &mut x1,
        max_iter,
        if max_iter > ML_ITERS { 1e-10 } else { ML_TOL },
        &mut f,
    );
    work.jac = jac;
    work.r0 = r0;
    work.r1 = r1;
    work.x1 = x1;
    res?;
    let k = exact_pass(o, &par, work)?;
    Some((par, k.ssq, k.sum_log_f))
}

/// Exact log-likelihood of `w` (differenced series) under `order` at
/// coefficients `par` ([φ, θ, Φ, Θ, c]), with σ² given or, when `None`,
/// concentrated out (its ML estimate S/n). `None` outside the stationary
/// and invertible region.
pub fn exact_loglik(order: &Order, par: &[f64], w: &[f64], sigma2: Option<f64>) -> Option<f64> {
    if par.len() != order.ncoef() || order.pf() > MAX_PF || order.qf() + 1 > MAX_R {
        return None;
    }
    let mut work = Work::new(w.to_vec());
    let k = exact_pass(order, par, &mut work)?;
    let n = w.len() as f64;
    let two_pi = 2.0 * std::f64::consts::PI;
    Some(match sigma2 {
        Some(s2) => -0.5 * (n * (two_pi * s2).ln() + k.sum_log_f + k.ssq / s2),
        None => -0.5 * (n * (two_pi * k.ssq / n).ln() + k.sum_log_f + n),
    })
}

/// Maximum-likelihood fit of a fixed order to `y` (undifferenced), started
/// from CSS; coefficients in original units and the log-likelihood.
pub fn fit_order(y: &[f64], order: &Order) -> Option<(Vec<f64>, f64)> {
    let w = differenced(y, order.d, order.sd);
    let (scale, ws) = scaled(&w)?;
    let mut work = Work::new(ws);
    let start = cold_start(order, &work.w);
    let css = fit_css(order, &start, &mut work, None);
    let (par, ssq, slf) = fit_ml(order, &css.par, &mut work, 200, 1.0)?;
    let n = work.w.len() as f64;
    let loglik =
        -0.5 * (n * (2.0 * std::f64::consts::PI * ssq / n).ln() + slf + n) - n * scale.ln();
    let mut coef = par;
    if order.constant {
        let i = order.ncoef() - 1;
        coef[i] *= scale;
    }
    Some((coef, loglik))
}

fn differenced(y: &[f64], d: usize, sd: usize) -> Vec<f64> {
    let mut w = y.to_vec();
    for _ in 0..sd {
        w = difference(&w, M);
    }
    for _ in 0..d {
        w = difference(&w, 1);
    }
    w
}

/// Scale (standard deviation, or mean magnitude) and the scaled series.
fn scaled(w: &[f64]) -> Option<(f64, Vec<f64>)> {
    if w.is_empty() {
        return None;
    }
    let n = w.len() as f64;
    let mean = w.iter().sum::<f64>() / n;
    let sd = (w.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n).sqrt();
    let scale = if sd > 0.0 && sd.is_finite() {
        sd
    } else {
        let m = w.iter().map(|v| v.abs()).sum::<f64>() / n;
        if m > 0.0 && m.is_finite() {
            m
        } else {
            1.0
        }
    };
    Some((scale, w.iter().map(|v| v / scale).collect()))
}

fn cold_start(o: &Order, w: &[f64]) -> Vec<f64> {
    let mut s = vec![0.0; o.ncoef()];
    if o.constant {
        s[o.ncoef() - 1] = w.iter().sum::<f64>() / w.len() as f64;
    }
    s
}

/// Start for `to` from the coefficients of `from`: matching lags kept,
/// new coefficients zero, c kept.
fn adapt(from: &CssFit, to: &Order, w: &[f64]) -> Vec<f64> {
    let f = &from.order;
    let mut s = cold_start(to, w);
    let mut src = 0;
    let mut dst = 0;
    for (nf, nt) in [(f.p, to.p), (f.q, to.q), (f.sp, to.sp), (f.sq, to.sq)] {
        let k = nt.min(nf);
        s[dst..dst + k].copy_from_slice(&from.par[src..src + k]);
        src += nf;
        dst += nt;
    }
    if f.constant && to.constant {
        s[dst] = from.par[src];
    }
    s
}

/// The full procedure of the module docs: `whole` for the fit on the
/// whole history, otherwise an origin of the backtest.
fn auto_arima(
    y: &[f64],
    previous: Option<&ArimaWarm>,
    search_warm: bool,
    whole: bool,
    season: Season,
) -> Result<FittedArima> {
    let n = y.len();
    if is_constant(y) {
        return constant_fit(y, 0, 0, true);
    }
    // In the backtest (the candidate) d and D are tested at the first
    // origin and kept at the later ones.
    let (d, sd) = match previous.filter(|p| !search_warm && p.tested) {
        Some(p) => (p.order.d, p.order.sd),
        None => {
            let sd = match season {
                Season::Tested => nsdiffs(y),
                Season::Never => 0,
                // Enough months to difference and still fit (needs: 24).
                Season::Always => usize::from(y.len() > 2 * M),
            };
            let dx = differenced(y, 0, sd);
            (ndiffs(&dx), sd)
        }
    };
    let dx = differenced(y, 0, sd);
    let w = differenced(&dx, d, 0);
    if w.len() < 3 {
        return constant_fit(y, d, sd, d + sd <= 1);
    }
    if is_constant(&w) {
        return constant_fit(y, d, sd, d + sd <= 1 && !(d == 0 && sd == 0));
    }
    let max_p = 5usize.min(n / 3).min(M - 1);
    let max_q = max_p;
    let max_sp = if season == Season::Never {
        0
    } else {
        2usize.min(n / 3 / M)
    };
    let max_sq = max_sp;
    let allow_c = d + sd <= 1;
    let Some((scale, ws)) = scaled(&w) else {
        return constant_fit(y, d, sd, allow_c);
    };
    let mut work = Work::new(ws);
    let maxima = [max_p, max_q, max_sp, max_sq];
    let kept = previous.filter(|p| !search_warm && fits_limits(&p.order, d, sd, maxima, allow_c));
    if let Some(p) = kept {
        // Same d and D as at the previous origin: keep its order and
        // re-estimate by CSS from the previous CSS optimum; one exact pass
        // gives the likelihood and the state the forecasts start from.
        let start = if p.css.len() == p.order.ncoef() {
            p.css.clone()
        } else {
            cold_start(&p.order, &work.w)
        };
        let css = fit_css(&p.order, &start, &mut work, Some(ROOT_LIMIT));
        if css.ic.is_finite() {
            if let Some(k) = exact_pass(&css.order, &css.par, &mut work) {
                let par = css.par.clone();
                return Ok(finish(
                    y,
                    css.order,
                    par,
                    css.par,
                    k.ssq,
                    k.sum_log_f,
                    scale,
                    &mut work,
                ));
            }
        }
    }
    let search = stepwise(&mut work, d, sd, maxima, allow_c, previous);
    // ML in order of CSS AICc until one passes the root check.
    let mut ranked: Vec<&CssFit> = search.iter().filter(|f| f.ic.is_finite()).collect();
    ranked.sort_by(|a, b| a.ic.total_cmp(&b.ic));
    if !whole && !search_warm {
        // First origin of the backtest: the CSS coefficients of the best
        // order, as at the later origins.
        if let Some(best) = ranked.first() {
            if let Some(k) = exact_pass(&best.order, &best.par, &mut work) {
                let (o, par) = (best.order, best.par.clone());
                return Ok(finish(
                    y,
                    o,
                    par.clone(),
                    par,
                    k.ssq,
                    k.sum_log_f,
                    scale,
                    &mut work,
                ));
            }
        }
    }
    if let Some(fit) = fit_ranked(y, &ranked, previous, scale, &mut work) {
        return Ok(fit);
    }
    fallback(y, d, sd, allow_c, scale, &mut work)
}

/// Whether `o` has differences `d`, `sd` and orders within the limits.
fn fits_limits(o: &Order, d: usize, sd: usize, max: [usize; 4], allow_c: bool) -> bool {
    o.d == d
        && o.sd == sd
        && o.p <= max[0]
        && o.q <= max[1]
        && o.sp <= max[2]
        && o.sq <= max[3]
        && (!o.constant || allow_c)
        && o.ncoef() > 0
}

/// ML fits of `ranked` in turn; the first that passes the root check.
fn fit_ranked(
    y: &[f64],
    ranked: &[&CssFit],
    previous: Option<&ArimaWarm>,
    scale: f64,
    work: &mut Work,
) -> Option<FittedArima> {
    for &cand in ranked.iter().take(MAX_ML_TRIES) {
        let o = cand.order;
        let start = match previous {
            Some(p) if p.order == o => {
                let mut s = p.ml.clone();
                if o.constant {
                    s[o.ncoef() - 1] /= scale;
                }
                s
            }
            _ => cand.par.clone(),
        };
        let warm = previous.is_some_and(|p| p.order == o);
        let Some((par, ssq, slf)) = fit_ml(
            &o,
            &start,
            work,
            if warm { 10 } else { ML_ITERS },
            ROOT_LIMIT,
        ) else {
            continue;
        };
        if !admissible(&o, &par, ROOT_LIMIT) {
            continue;
        }
        return Some(finish(y, o, par, cand.par.clone(), ssq, slf, scale, work));
    }
    None
}

/// (0,d,0)(0,D,0), with c when allowed: no ARMA terms, always admissible.
fn fallback(
    y: &[f64],
    d: usize,
    sd: usize,
    allow_c: bool,
    scale: f64,
    work: &mut Work,
) -> Result<FittedArima> {
    // Fallback: no ARMA terms, which is always admissible.
    let o = Order {
        p: 0,
        d,
        q: 0,
        sp: 0,
        sd,
        sq: 0,
        constant: allow_c,
    };
    let start = cold_start(&o, &work.w);
    let (par, ssq, slf) = fit_ml(&o, &start, work, 50, ROOT_LIMIT).ok_or_else(|| Error::Model {
        model: NAME.to_string(),
        message: "no ARIMA model gives a finite fit; the series may have values too extreme for this model"
            .to_string(),
    })?;
    Ok(finish(y, o, par, start, ssq, slf, scale, work))
}

/// The fitted model at `par`. `work` must hold the exact pass at `par`
/// (residuals and state): every caller has just run it, so it is not
/// repeated here.
#[allow(clippy::too_many_arguments)]
fn finish(
    y: &[f64],
    o: Order,
    par: Vec<f64>,
    css: Vec<f64>,
    ssq: f64,
    slf: f64,
    scale: f64,
    work: &mut Work,
) -> FittedArima {
    let nw = work.w.len();
    let r = o.pf().max(o.qf() + 1);
    let state: Vec<f64> = work.a[..r].iter().map(|v| v * scale).collect();
    let n = nw as f64;
    let loglik =
        -0.5 * (n * (2.0 * std::f64::consts::PI * ssq / n).ln() + slf + n) - n * scale.ln();
    let k = (o.ncoef() + 1) as f64;
    let aicc = -2.0 * loglik
        + 2.0 * k
        + if n - k - 1.0 > 0.0 {
            2.0 * k * (k + 1.0) / (n - k - 1.0)
        } else {
            f64::INFINITY
        };
    let dof = (nw.saturating_sub(o.ncoef())).max(1) as f64;
    let sigma2 = ssq / dof * scale * scale;
    let mut coef = par;
    if o.constant {
        let i = o.ncoef() - 1;
        coef[i] *= scale;
    }
    let sse = work.resid[..nw].iter().map(|v| v * v).sum::<f64>() * scale * scale;
    FittedArima {
        order: o,
        coef,
        css,
        sigma2,
        loglik,
        aicc,
        y: y.to_vec(),
        state,
        sse,
    }
}

/// A series whose differenced form is constant: no ARMA terms, c the
/// constant of the differences (statsforecast's special case), σ² = 0.
fn constant_fit(y: &[f64], d: usize, sd: usize, constant: bool) -> Result<FittedArima> {
    let w = differenced(y, d, sd);
    let c = if w.is_empty() {
        0.0
    } else {
        w.iter().sum::<f64>() / w.len() as f64
    };
    let o = Order {
        p: 0,
        d,
        q: 0,
        sp: 0,
        sd,
        sq: 0,
        constant,
    };
    let sse: f64 = w
        .iter()
        .map(|v| (v - if constant { c } else { 0.0 }).powi(2))
        .sum();
    let dof = w.len().saturating_sub(o.ncoef()).max(1) as f64;
    Ok(FittedArima {
        order: o,
        coef: if constant { vec![c] } else { Vec::new() },
        css: if constant { vec![c] } else { Vec::new() },
        sigma2: sse / dof,
        loglik: f64::NAN,
        aicc: f64::NAN,
        y: y.to_vec(),
        state: vec![0.0],
        sse,
    })
}

/// The stepwise search (module docs, step 3); returns every model tried.
fn stepwise(
    work: &mut Work,
    d: usize,
    sd: usize,
    max: [usize; 4],
    allow_c: bool,
    previous: Option<&ArimaWarm>,
) -> Vec<CssFit> {
    let [max_p, max_q, max_sp, max_sq] = max;
    let mut results: Vec<CssFit> = Vec::with_capacity(MAX_MODELS);
    let mk = |p, q, sp, sq, constant| Order {
        p,
        d,
        q,
        sp,
        sd,
        sq,
        constant,
    };
    let seen = |results: &[CssFit], o: &Order| results.iter().any(|r| r.order == *o);
    let mut best: Option<usize> = None;
    let try_order = |o: Order,
                     start: Option<Vec<f64>>,
                     results: &mut Vec<CssFit>,
                     best: &mut Option<usize>,
                     work: &mut Work|
     -> bool {
        if results.len() >= MAX_MODELS || seen(results, &o) {
            return false;
        }
        let start = start.unwrap_or_else(|| match best {
            Some(b) => adapt(&results[*b], &o, &work.w),
            None => cold_start(&o, &work.w),
        });
        let fit = fit_css(&o, &start, work, None);
        results.push(fit);
        let i = results.len() - 1;
        let better = best.map_or(true, |b| results[i].ic < results[b].ic);
        if better && results[i].ic < f64::INFINITY {
            *best = Some(i);
            return true;
        }
        if best.is_none() {
            *best = Some(i);
        }
        false
    };
    let warm_order = previous.filter(|p| {
        let o = p.order;
        o.d == d
            && o.sd == sd
            && o.p <= max_p
            && o.q <= max_q
            && o.sp <= max_sp
            && o.sq <= max_sq
            && (!o.constant || allow_c)
    });
    if let Some(p) = warm_order {
        let start = (p.css.len() == p.order.ncoef()).then(|| p.css.clone());
        try_order(p.order, start, &mut results, &mut best, work);
    } else {
        let sp0 = 1.min(max_sp);
        let sq0 = 1.min(max_sq);
        try_order(
            mk(2.min(max_p), 2.min(max_q), sp0, sq0, allow_c),
            None,
            &mut results,
            &mut best,
            work,
        );
        try_order(
            mk(0, 0, 0, 0, allow_c),
            Some(cold_start(&mk(0, 0, 0, 0, allow_c), &work.w)),
            &mut results,
            &mut best,
            work,
        );
        if max_p > 0 || max_sp > 0 {
            let o = mk(
                usize::from(max_p > 0),
                0,
                usize::from(max_sp > 0),
                0,
                allow_c,
            );
            try_order(
                o,
                Some(cold_start(&o, &work.w)),
                &mut results,
                &mut best,
                work,
            );
        }
        if max_q > 0 || max_sq > 0 {
            let o = mk(
                0,
                usize::from(max_q > 0),
                0,
                usize::from(max_sq > 0),
                allow_c,
            );
            try_order(
                o,
                Some(cold_start(&o, &work.w)),
                &mut results,
                &mut best,
                work,
            );
        }
        if allow_c {
            let o = mk(0, 0, 0, 0, false);
            try_order(
                o,
                Some(cold_start(&o, &work.w)),
                &mut results,
                &mut best,
                work,
            );
        }
    }
    while let Some(b) = best {
        let cur = results[b].order;
        let (p, q, sp, sq, c) = (cur.p, cur.q, cur.sp, cur.sq, cur.constant);
        let mut moves: Vec<Order> = Vec::with_capacity(17);
        let push = |moves: &mut Vec<Order>, ok: bool, o: Order| {
            if ok {
                moves.push(o);
            }
        };
        push(&mut moves, sp > 0, mk(p, q, sp.wrapping_sub(1), sq, c));
        push(&mut moves, sq > 0, mk(p, q, sp, sq.wrapping_sub(1), c));
        push(&mut moves, sp < max_sp, mk(p, q, sp + 1, sq, c));
        push(&mut moves, sq < max_sq, mk(p, q, sp, sq + 1, c));
        push(
            &mut moves,
            sq > 0 && sp > 0,
            mk(p, q, sp.wrapping_sub(1), sq.wrapping_sub(1), c),
        );
        push(
            &mut moves,
            sq < max_sq && sp > 0,
            mk(p, q, sp.wrapping_sub(1), sq + 1, c),
        );
        push(
            &mut moves,
            sq > 0 && sp < max_sp,
            mk(p, q, sp + 1, sq.wrapping_sub(1), c),
        );
        push(
            &mut moves,
            sq < max_sq && sp < max_sp,
            mk(p, q, sp + 1, sq + 1, c),
        );
        push(&mut moves, p > 0, mk(p.wrapping_sub(1), q, sp, sq, c));
        push(&mut moves, q > 0, mk(p, q.wrapping_sub(1), sp, sq, c));
        push(&mut moves, p < max_p, mk(p + 1, q, sp, sq, c));
        push(&mut moves, q < max_q, mk(p, q + 1, sp, sq, c));
        push(
            &mut moves,
            q > 0 && p > 0,
            mk(p.wrapping_sub(1), q.wrapping_sub(1), sp, sq, c),
        );
        push(
            &mut moves,
            q < max_q && p > 0,
            mk(p.wrapping_sub(1), q + 1, sp, sq, c),
        );
        push(
            &mut moves,
            q > 0 && p < max_p,
            mk(p + 1, q.wrapping_sub(1), sp, sq, c),
        );
        push(
            &mut moves,
            q < max_q && p < max_p,
            mk(p + 1, q + 1, sp, sq, c),
        );
        push(&mut moves, allow_c, mk(p, q, sp, sq, !c));
        let mut moved = false;
        for o in moves {
            if try_order(o, None, &mut results, &mut best, work) {
                moved = true;
                break;
            }
        }
        if !moved || results.len() >= MAX_MODELS {
            break;
        }
    }
    results
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn schur_cohn_matches_known_roots() {
        // 1 − 0.5z: root 2 (stationary); 1 − 1.2z: root 0.83 (not).
        assert!(stable(&[0.5], 1.0));
        assert!(!stable(&[1.2], 1.0));
        // 1 − 1.5z + 0.56z² = (1 − 0.7z)(1 − 0.8z): roots 1.43, 1.25.
        assert!(stable(&[1.5, -0.56], 1.0));
        assert!(stable(&[1.5, -0.56], 1.2));
        assert!(!stable(&[1.5, -0.56], 1.3));
    }

    #[test]
    fn expansion_of_seasonal_polynomials() {
        let o = Order {
            p: 1,
            d: 0,
            q: 1,
            sp: 1,
            sd: 0,
            sq: 1,
            constant: false,
        };
        let (phi, theta) = expand(&o, &[0.5, 0.3, 0.4, -0.6]);
        // (1 − 0.5B)(1 − 0.4B¹²) = 1 − 0.5B − 0.4B¹² + 0.2B¹³
        assert_eq!(phi.len(), 13);
        assert!((phi[0] - 0.5).abs() < 1e-15 && (phi[11] - 0.4).abs() < 1e-15);
        assert!((phi[12] + 0.2).abs() < 1e-15);
        // (1 + 0.3B)(1 − 0.6B¹²) = 1 + 0.3B − 0.6B¹² − 0.18B¹³
        assert!((theta[0] - 0.3).abs() < 1e-15 && (theta[11] + 0.6).abs() < 1e-15);
        assert!((theta[12] + 0.18).abs() < 1e-15);
    }

    #[test]
    fn ar1_likelihood_matches_the_closed_form() {
        // AR(1) exact likelihood (Hamilton 1994, eq. 5.2.9), σ² = 1.
        let w = [0.3, -0.2, 0.9, 1.1, 0.4, -0.5, 0.2];
        let phi: f64 = 0.6;
        let o = Order {
            p: 1,
            d: 0,
            q: 0,
            sp: 0,
            sd: 0,
            sq: 0,
            constant: false,
        };
        let mut ll = -0.5 * (2.0 * std::f64::consts::PI / (1.0 - phi * phi)).ln()
            - w[0] * w[0] * (1.0 - phi * phi) / 2.0;
        for t in 1..w.len() {
            let e: f64 = w[t] - phi * w[t - 1];
            ll += -0.5 * (2.0 * std::f64::consts::PI).ln() - e * e / 2.0;
        }
        let ours = exact_loglik(&o, &[phi], &w, Some(1.0)).unwrap();
        assert!((ours - ll).abs() < 1e-12, "{ours} vs {ll}");
    }

    #[test]
    fn ma1_likelihood_matches_the_innovations_form() {
        // MA(1): v_1 = w_1, F_1 = 1 + θ²; r_t by the innovations algorithm
        // (Brockwell & Davis 1991, §5.2): F_t = 1 + θ² − θ²/F_{t−1}.
        let w = [0.3, -0.2, 0.9, 1.1, 0.4];
        let th: f64 = 0.5;
        let o = Order {
            p: 0,
            d: 0,
            q: 1,
            sp: 0,
            sd: 0,
            sq: 0,
            constant: false,
        };
        let mut f = 1.0 + th * th;
        let mut v = w[0];
        let mut ll = -0.5 * ((2.0 * std::f64::consts::PI * f).ln() + v * v / f);
        for &wt in &w[1..] {
            let pred = th * v / f;
            let fnew = 1.0 + th * th - th * th / f;
            v = wt - pred;
            f = fnew;
            ll += -0.5 * ((2.0 * std::f64::consts::PI * f).ln() + v * v / f);
        }
        let ours = exact_loglik(&o, &[th], &w, Some(1.0)).unwrap();
        assert!((ours - ll).abs() < 1e-12, "{ours} vs {ll}");
    }
}
