//! Seasonal exponential smoothing through a seasonal decomposition
//! (`mstl-ets`): MSTL with period 12, then non-seasonal automatic ETS on the
//! seasonally adjusted series, with last year's seasonal pattern added back.
//!
//! # Formula
//!
//! ```text
//! y_t = T_t + S_t + R_t                    (MSTL, one period of 12 months)
//! a_t = y_t − S_t                          (seasonally adjusted)
//! â_{n+h}  from ets-auto fitted to a_1..a_n (see [`super::ets`])
//! ŷ_{n+h} = â_{n+h} + S_{n − 12 + ((h − 1) mod 12) + 1}
//! ```
//!
//! The seasonal pattern is carried forward unchanged, so the forecast
//! variance is that of the ETS forecast of a_t: point ± z σ_h, with σ_h from
//! the chosen ETS form. This is the method of statsforecast's
//! `MSTL(season_length=12)` with its default trend forecaster
//! `AutoETS(model='ZZN')`, and of augurs' `MSTLModel` with an `AutoETS`
//! trend model.
//!
//! # Reference
//!
//! Bandara, Hyndman & Bergmeir (2021), *MSTL: A Seasonal-Trend
//! Decomposition Algorithm for Time Series with Multiple Seasonal
//! Patterns*, arXiv:2107.13462; STL: Cleveland, Cleveland, McRae &
//! Terpenning (1990), *J. Official Statistics* 6(1). With one period MSTL
//! is one STL run: [`super::stl`], which gives the components of the MSTL
//! of `augurs-mstl` 0.10 (its `stlrs` 0.4) to the last bit, in f64 rather
//! than the f32 of augurs' `MSTLModel` so that large quantities keep their
//! digits, with each smoother's weights computed once instead of at every
//! pass; the ETS step is our own `ets-auto` estimator
//! ([`super::ets::Ets`], the likelihood and candidate set of statsforecast's
//! `AutoETS`). In the backtest ([`Model::fit_warm`]) the decomposition is
//! redone at every origin and, as `ets-auto` does, the ETS forms are ranked
//! at their optimum of the previous origin and only the best
//! [`super::ets_seasonal::WARM_REFIT`] re-estimated from it (re-estimating
//! all six changed no mean MASE of the selection on M1, tourism or the
//! generated set at the third decimal and cost 5% more CPU time for the
//! whole forecast of 1,000 generated series, one thread: 4.79 s against
//! 5.03–5.04 s).
//!
//! # Parameters
//!
//! The STL settings are those statsforecast 2.1.1's `mstl` passes to
//! statsmodels' `STL` (`seasonal_deg=0`, other statsmodels defaults), so the
//! decomposition can be checked against it.
//!
//! | name | default | range |
//! |---|---|---|
//! | period | 12 | fixed (monthly data) |
//! | seasonal window | 11 (7 + 4, R forecast's `mstl` rule) | fixed |
//! | seasonal degree | 0 | fixed |
//! | trend window | 21 (smallest odd > 1.5·12 / (1 − 1.5/11)) | fixed |
//! | low-pass window | 13 (smallest odd > 12) | fixed |
//! | smoother jumps | 1 (no interpolation) | fixed |
//! | inner / outer (robust) iterations | 5 / 0 | fixed |
//! | ETS α, β, φ, l₀, b₀, σ² | estimated | as in [`super::ets`] |
//!
//! # Limits
//!
//! MSTL needs two full years (24 months). A constant series (including an
//! all-zero one) has no seasonal pattern to separate and is refused as not
//! applicable. A series with no real seasonality still decomposes, into a
//! small, noisy seasonal pattern; the fitted model reports the seasonal
//! strength F_S = max(0, 1 − Var(R)/Var(S + R)) (Wang, Smith & Hyndman
//! 2006) so that a report can show it, and the backtest judges the
//! forecasts. The decomposition is not robust: an outlier month leaks into
//! that month's seasonal effect, so outliers should be cleaned first.

use super::ets::{Ets, FittedEts};
use super::{Fitted, Forecast, Model, Needs, WarmStart, PERIOD};
use crate::error::{Error, Result};

const NAME: &str = "mstl-ets";

/// `mstl-ets`: MSTL decomposition, then automatic non-seasonal ETS on the
/// seasonally adjusted series (module docs).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct MstlEts;

impl Model for MstlEts {
    type Fitted = FittedMstlEts;

    fn name(&self) -> String {
        NAME.to_string()
    }

    fn description(&self) -> String {
        "seasonal decomposition (MSTL) with automatic ETS on the seasonally adjusted series"
            .to_string()
    }

    fn needs(&self) -> Needs {
        Needs {
            min_months: 2 * PERIOD,
            positive: false,
            seasonal: true,
        }
    }

    fn fit(&self, y: &[f64]) -> Result<FittedMstlEts> {
        self.fit_warm(y, &mut None)
    }

    /// The decomposition is redone at every origin; the ETS step starts
    /// from its optimum at the previous origin (see [`super::ets`]).
    fn fit_warm(&self, y: &[f64], warm: &mut WarmStart) -> Result<FittedMstlEts> {
        self.needs().check(NAME, y)?;
        let (lo, hi) = y
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                (lo.min(v), hi.max(v))
            });
        if hi - lo <= 1e-12 * hi.abs().max(lo.abs()) {
            return Err(Error::NotApplicable {
                model: NAME.to_string(),
                reason: format!(
                    "every month is {lo}: a constant series has no seasonal pattern to separate"
                ),
            });
        }
        let model_error = |message: String| Error::Model {
            model: NAME.to_string(),
            message,
        };
        let decomposition = super::stl::decompose(y).ok_or_else(|| Error::NotApplicable {
            model: NAME.to_string(),
            reason: "the seasonal decomposition cannot use this series: series has less than two periods"
                .to_string(),
        })?;
        let seasonal = Some(&decomposition.seasonal)
            .filter(|s| s.len() == y.len() && s.iter().all(|v| v.is_finite()))
            .ok_or_else(|| {
                model_error("the seasonal decomposition gave non-finite values".to_string())
            })?;
        let adjusted: Vec<f64> = y.iter().zip(seasonal).map(|(v, s)| v - s).collect();
        let ets = Ets::auto().fit_named_refitting(
            NAME,
            &adjusted,
            warm,
            super::ets_seasonal::WARM_REFIT,
        )?;
        let mut last_year = [0.0; PERIOD];
        last_year.copy_from_slice(&seasonal[y.len() - PERIOD..]);
        let strength = Some(decomposition.seasonal_strength())
            .filter(|s| s.is_finite())
            .unwrap_or(0.0);
        Ok(FittedMstlEts {
            ets,
            last_year,
            strength,
        })
    }
}

/// A fitted `mstl-ets` model.
#[derive(Debug, Clone)]
pub struct FittedMstlEts {
    ets: FittedEts,
    last_year: [f64; PERIOD],
    strength: f64,
}

impl FittedMstlEts {
    /// The ETS model fitted to the seasonally adjusted series.
    pub fn ets(&self) -> &FittedEts {
        &self.ets
    }

    /// Seasonal effects added to horizons 1..=12 (the last 12 months of the
    /// MSTL seasonal component).
    pub fn seasonal_effects(&self) -> &[f64; PERIOD] {
        &self.last_year
    }

    /// Seasonal strength F_S in [0, 1] of the decomposition.
    pub fn seasonal_strength(&self) -> f64 {
        self.strength
    }
}

impl Fitted for FittedMstlEts {
    fn forecast(&self, horizon: usize, levels: &[f64]) -> Result<Forecast> {
        let (mut point, sd) = self.ets.point_and_sd(horizon)?;
        for (k, p) in point.iter_mut().enumerate() {
            *p += self.last_year[k % PERIOD];
        }
        Forecast::normal(point, &sd, levels)
    }

    fn params(&self) -> Vec<(String, f64)> {
        let mut out = self.ets.params();
        out.push(("seasonal_strength".to_string(), self.strength));
        for (k, s) in self.last_year.iter().enumerate() {
            out.push((format!("seasonal_{}", k + 1), *s));
        }
        out
    }

    /// In-sample SSE of the ETS step on the adjusted series, which equals
    /// that of ŷ_t + S_t against y_t (the decomposition itself used all the
    /// data).
    fn sse(&self) -> Option<f64> {
        self.ets.sse()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::DEFAULT_LEVELS;
    use augurs::ets::AutoETS;
    use augurs::mstl::{stlrs, MSTLModel};
    use augurs::{Fit, Predict};

    /// The STL settings of the module docs, for `stlrs` through augurs'
    /// MSTL (the outside reference).
    fn mstl_params() -> stlrs::MstlParams {
        let mut stl = stlrs::params();
        stl.seasonal_length(11)
            .seasonal_degree(0)
            .trend_degree(1)
            .low_pass_degree(1)
            .seasonal_jump(1)
            .trend_jump(1)
            .low_pass_jump(1)
            .inner_loops(5)
            .outer_loops(0);
        let mut mstl = stlrs::MstlParams::new();
        mstl.stl_params(stl);
        mstl
    }

    /// AirPassengers 1956-01..1960-12 (tests/reference/datasets.json,
    /// `AirPassengers_last60`, from statsforecast 2.1.1).
    const AIR60: [f64; 60] = [
        284.0, 277.0, 317.0, 313.0, 318.0, 374.0, 413.0, 405.0, 355.0, 306.0, 271.0, 306.0, 315.0,
        301.0, 356.0, 348.0, 355.0, 422.0, 465.0, 467.0, 404.0, 347.0, 305.0, 336.0, 340.0, 318.0,
        362.0, 348.0, 363.0, 435.0, 491.0, 505.0, 404.0, 359.0, 310.0, 337.0, 360.0, 342.0, 406.0,
        396.0, 420.0, 472.0, 548.0, 559.0, 463.0, 407.0, 362.0, 405.0, 417.0, 391.0, 419.0, 461.0,
        472.0, 535.0, 622.0, 606.0, 508.0, 461.0, 390.0, 432.0,
    ];

    #[test]
    fn close_to_augurs_mstl_model_with_autoets_trend() {
        // augurs 0.10's own composition (MSTLModel + AutoETS trend model, in
        // f32) with the same MSTL settings: the same decomposition, and an
        // ETS step fitted by a different optimiser (Nelder–Mead, ours
        // Levenberg–Marquardt) to the same likelihood, so forecasts and
        // interval bounds agree within 0.5% (seen ≤ 0.02%).
        let theirs = MSTLModel::new(vec![PERIOD], AutoETS::non_seasonal().into_trend_model())
            .mstl_params(mstl_params())
            .fit(&AIR60)
            .unwrap()
            .predict(24, 0.95)
            .unwrap();
        let ours = MstlEts.fit(&AIR60).unwrap().forecast(24, &[0.95]).unwrap();
        let i = theirs.intervals.unwrap();
        for h in 0..24 {
            for (a, b) in [
                (ours.point[h], theirs.point[h]),
                (ours.intervals[0].upper[h], i.upper[h]),
                (ours.intervals[0].lower[h], i.lower[h]),
            ] {
                assert!((a / b - 1.0).abs() < 5e-3, "h={}: {a} vs {b}", h + 1);
            }
        }
    }

    #[test]
    fn constant_and_zero_series_are_not_applicable() {
        for y in [vec![7.0; 36], vec![0.0; 36]] {
            match MstlEts.fit(&y) {
                Err(Error::NotApplicable { reason, .. }) => {
                    assert!(reason.contains("constant"), "{reason}")
                }
                other => panic!("expected not applicable, got {other:?}"),
            }
        }
        let e = MstlEts.fit(&[1.0; 23]).unwrap_err().to_string();
        assert!(e.contains("at least 24 months"), "{e}");
    }

    #[test]
    fn spike_and_flat_series_keep_the_contract() {
        let mut spike = vec![100.0; 36];
        spike[20] = 10_000.0;
        let noise: Vec<f64> = (0..48).map(|i| 50.0 + ((i * 7919) % 13) as f64).collect();
        let mut sparse = vec![0.0; 30];
        sparse[3] = 2.0;
        let nearly_constant: Vec<f64> = (0..36).map(|i| 100.0 + 1e-9 * (i % 3) as f64).collect();
        for y in [spike, noise, sparse, nearly_constant] {
            let fit = MstlEts.fit(&y).unwrap();
            let f = fit.forecast(18, &DEFAULT_LEVELS).unwrap();
            assert_eq!(f.point.len(), 18);
            for i in &f.intervals {
                for h in 0..18 {
                    assert!(i.lower[h] >= 0.0 && i.lower[h] <= f.point[h]);
                    assert!(f.point[h] <= i.upper[h] && i.upper[h].is_finite());
                }
            }
            assert_eq!(
                MstlEts
                    .fit(&y)
                    .unwrap()
                    .forecast(18, &DEFAULT_LEVELS)
                    .unwrap(),
                f
            );
            let s = fit.seasonal_strength();
            assert!((0.0..=1.0).contains(&s), "{s}");
        }
    }
}
