//! Rolling-origin evaluation with an expanding window.
//!
//! Origins are the last K months that leave at least H months of actuals
//! after them, one month apart. At each origin every candidate is refitted
//! on the months up to and including the origin — never later — and
//! forecasts 1..H months ahead; forecasts are compared with the **cleaned**
//! series. Months whose cleaned value is mostly imputed can be left out of
//! scoring, so no model is rewarded for matching our own imputation.
//!
//! A combination candidate averages a fixed set of strong automatic models
//! (see [`COMBINATION_MEMBERS`]). Its members are fixed in advance, not
//! picked from the backtest, so its backtest needs no look-ahead care and
//! it cannot overfit the backtest windows.

use crate::error::{Error, Result};
use crate::metrics;
use crate::models::{AnyModel, Forecast, WarmStart, PERIOD};

/// Name of the combination candidate.
pub const COMBINATION: &str = "combination";

/// Members of the combination: automatic ETS, automatic ARIMA and Theta,
/// each applied whole. The mean of these three is a known strong benchmark
/// on monthly competition data (the "ETS, ARIMA, Theta" combination of
/// Makridakis, Spiliotis & Assimakopoulos, IJF 34(4), 2018 and of the M4
/// competition, IJF 36(1), 2020). Members fixed in advance generalise
/// better than members ranked on a few backtest windows.
pub const COMBINATION_MEMBERS: [&str; 3] = ["ets-auto", "arima-auto", "theta"];

/// Fewest complete members for the combination to apply (a member may not
/// apply to a short series).
pub const COMBINATION_MIN_MEMBERS: usize = 2;

/// Backtest settings as given.
///
/// | setting | default | range |
/// |---|---|---|
/// | `origins` (K) | 12 | 1–60 |
/// | `horizon` (H) | 12 | 1–36 |
/// | `exclude_imputed` | true | leave mostly-imputed months out of scoring |
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BacktestSettings {
    /// Number of origins K.
    pub origins: usize,
    /// Months forecast at each origin, H.
    pub horizon: usize,
    /// Leave months whose cleaned value is at least half imputed out of scoring.
    pub exclude_imputed: bool,
}

impl Default for BacktestSettings {
    fn default() -> Self {
        BacktestSettings {
            origins: 12,
            horizon: 12,
            exclude_imputed: true,
        }
    }
}

/// Settings that passed [`BacktestSettings::check`].
#[derive(Debug, Clone, PartialEq)]
pub struct CheckedBacktestSettings(BacktestSettings);

impl CheckedBacktestSettings {
    /// The checked values.
    pub fn get(&self) -> &BacktestSettings {
        &self.0
    }
}

impl BacktestSettings {
    /// Validates the settings; the error names the bad value.
    pub fn check(self) -> Result<CheckedBacktestSettings> {
        if !(1..=60).contains(&self.origins) {
            return Err(Error::setting(
                "origins",
                format!("must be 1-60, got {}", self.origins),
            ));
        }
        if !(1..=36).contains(&self.horizon) {
            return Err(Error::setting(
                "backtest-horizon",
                format!("must be 1-36 months, got {}", self.horizon),
            ));
        }
        Ok(CheckedBacktestSettings(self))
    }
}

/// Interval levels every backtest forecast carries.
pub const LEVELS: [f64; 2] = [0.80, 0.95];

/// Positions (index of the last training month) of the origins of a series
/// of `n` months: the last `k` that leave `h` months after them, oldest
/// first. Each needs at least `min_train` training months.
pub fn origins(n: usize, k: usize, h: usize, min_train: usize) -> Vec<usize> {
    if n < h + 1 {
        return Vec::new();
    }
    let last = n - 1 - h;
    let first = (last + 1).saturating_sub(k);
    (first..=last)
        .filter(|&o| o + 1 >= min_train.max(1))
        .collect()
}

/// One backtest forecast compared with its actual.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Origin position (last training month).
    pub origin: usize,
    /// Months ahead, 1..=H.
    pub horizon: usize,
    /// Position of the target month.
    pub target: usize,
    /// Cleaned actual.
    pub actual: f64,
    /// Point forecast.
    pub forecast: f64,
    /// 80% interval.
    pub lower80: f64,
    /// 80% interval.
    pub upper80: f64,
    /// 95% interval.
    pub lower95: f64,
    /// 95% interval.
    pub upper95: f64,
    /// MASE scale of the origin's training window (`None` if zero).
    pub scale: Option<f64>,
    /// RMSSE scale of the origin's training window (`None` if zero).
    pub scale_sq: Option<f64>,
    /// Whether the point counts in scores (false: target mostly imputed).
    pub scored: bool,
}

/// How a candidate fared in the backtest.
#[derive(Debug, Clone, PartialEq)]
pub enum RunStatus {
    /// Forecast at every origin.
    Complete,
    /// Could not apply to this series (reason given); not scored.
    NotApplicable(String),
    /// Failed at some origins (first message given); scored on the rest
    /// but not eligible for selection.
    Incomplete {
        /// Origins that failed.
        failed: usize,
        /// First failure message.
        first: String,
    },
}

/// One candidate's backtest.
#[derive(Debug, Clone)]
pub struct ModelRun {
    /// Model name.
    pub model: String,
    /// Status.
    pub status: RunStatus,
    /// Forecast per origin (same order as [`Backtest::origins`]).
    pub forecasts: Vec<Option<Forecast>>,
    /// For the combination: its members at each origin.
    pub members: Vec<Vec<String>>,
}

/// Scores over a set of points.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct Scores {
    /// Points scored.
    pub n: usize,
    /// MAPE, percent (zero actuals left out).
    pub mape: Option<f64>,
    /// Points left out of MAPE for a zero actual.
    pub zero_actuals: usize,
    /// Bias, percent of actual volume; positive = over-forecast.
    pub bias: Option<f64>,
    /// WAPE, percent.
    pub wape: Option<f64>,
    /// MASE (seasonal-naive scale of each training window).
    pub mase: Option<f64>,
    /// RMSE.
    pub rmse: Option<f64>,
    /// RMSSE (M5 scale of each training window).
    pub rmsse: Option<f64>,
    /// Share of actuals inside the 80% interval, percent.
    pub coverage80: Option<f64>,
    /// Share of actuals inside the 95% interval, percent.
    pub coverage95: Option<f64>,
}

impl Scores {
    /// Scores a set of points (only those marked `scored`). One pass, no
    /// allocation; the same sums, in the same order, as the functions of
    /// [`metrics`] (a unit test holds them equal).
    pub fn of(points: &[Point]) -> Scores {
        let (mut n, mut zeros, mut mape_n) = (0usize, 0usize, 0usize);
        let (mut ape, mut total, mut signed, mut abs_total, mut abs_err, mut sq) =
            (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
        let (mut scaled, mut scaled_n) = (0.0, 0usize);
        let (mut scaled_sq, mut scaled_sq_n) = (0.0, 0usize);
        let (mut in80, mut in95) = (0usize, 0usize);
        for p in points.iter().filter(|p| p.scored) {
            let (a, f) = (p.actual, p.forecast);
            n += 1;
            if a == 0.0 {
                zeros += 1;
            } else {
                ape += ((f - a) / a).abs();
                mape_n += 1;
            }
            total += a;
            signed += f - a;
            abs_total += a.abs();
            abs_err += (f - a).abs();
            sq += (f - a).powi(2);
            if let Some(s) = p.scale {
                scaled += (f - a).abs() / s;
                scaled_n += 1;
            }
            if let Some(s) = p.scale_sq {
                scaled_sq += (f - a).powi(2) / s;
                scaled_sq_n += 1;
            }
            in80 += usize::from(a >= p.lower80 && a <= p.upper80);
            in95 += usize::from(a >= p.lower95 && a <= p.upper95);
        }
        let share = |k: usize| (n > 0).then(|| 100.0 * k as f64 / n as f64);
        Scores {
            n,
            mape: (mape_n > 0).then(|| 100.0 * ape / mape_n as f64),
            zero_actuals: zeros,
            bias: (total != 0.0).then(|| 100.0 * signed / total),
            wape: (abs_total != 0.0).then(|| 100.0 * abs_err / abs_total),
            mase: (scaled_n > 0 && scaled_n == n).then(|| scaled / scaled_n as f64),
            rmse: (n > 0).then(|| (sq / n as f64).sqrt()),
            rmsse: (scaled_sq_n > 0 && scaled_sq_n == n)
                .then(|| (scaled_sq / scaled_sq_n as f64).sqrt()),
            coverage80: share(in80),
            coverage95: share(in95),
        }
    }

    /// The value of one score.
    pub fn get(&self, score: metrics::Score) -> Option<f64> {
        match score {
            metrics::Score::Mape => self.mape,
            metrics::Score::Wape => self.wape,
            metrics::Score::Mase => self.mase,
            metrics::Score::Rmse => self.rmse,
            metrics::Score::Rmsse => self.rmsse,
        }
    }
}

/// The backtest of one series.
#[derive(Debug, Clone)]
pub struct Backtest {
    /// Origin positions, oldest first.
    pub origins: Vec<usize>,
    /// Months ahead at each origin.
    pub horizon: usize,
    /// The series the backtest ran on (cleaned).
    pub actual: Vec<f64>,
    /// Which months count in scores.
    pub scorable: Vec<bool>,
    /// One run per candidate, in candidate order, then the combination.
    pub runs: Vec<ModelRun>,
    /// MASE and RMSSE scales of each origin's training months, computed
    /// on first use (leave it empty: `Default::default()`).
    pub scales: std::sync::OnceLock<Vec<(Option<f64>, Option<f64>)>>,
}

impl Backtest {
    /// Points of one run (every origin with a forecast, every horizon).
    pub fn points(&self, run: &ModelRun) -> Vec<Point> {
        let mut out = Vec::with_capacity(self.origins.len() * self.horizon);
        let scales = self.scales.get_or_init(|| {
            self.origins
                .iter()
                .map(|&o| {
                    (
                        metrics::mase_scale(&self.actual[..=o], PERIOD),
                        metrics::rmsse_scale(&self.actual[..=o]),
                    )
                })
                .collect()
        });
        for (k, &o) in self.origins.iter().enumerate() {
            let Some(Some(fc)) = run.forecasts.get(k) else {
                continue;
            };
            let (scale, scale_sq) = scales[k];
            let i80 = fc.interval(0.80);
            let i95 = fc.interval(0.95);
            for h in 1..=self.horizon {
                let t = o + h;
                if t >= self.actual.len() || h > fc.point.len() {
                    break;
                }
                let f = fc.point[h - 1];
                out.push(Point {
                    origin: o,
                    horizon: h,
                    target: t,
                    actual: self.actual[t],
                    forecast: f,
                    lower80: i80.map_or(f, |i| i.lower[h - 1]),
                    upper80: i80.map_or(f, |i| i.upper[h - 1]),
                    lower95: i95.map_or(f, |i| i.lower[h - 1]),
                    upper95: i95.map_or(f, |i| i.upper[h - 1]),
                    scale,
                    scale_sq,
                    scored: self.scorable[t],
                });
            }
        }
        out
    }

    /// Overall scores of a run.
    pub fn scores(&self, run: &ModelRun) -> Scores {
        Scores::of(&self.points(run))
    }

    /// Scores of a run per horizon (index 0 = one month ahead).
    pub fn scores_by_horizon(&self, run: &ModelRun) -> Vec<Scores> {
        let mut by_h: Vec<Vec<Point>> = (0..self.horizon)
            .map(|_| Vec::with_capacity(self.origins.len()))
            .collect();
        for p in self.points(run) {
            by_h[p.horizon - 1].push(p);
        }
        by_h.iter().map(|ph| Scores::of(ph)).collect()
    }

    /// The run of a model by name.
    pub fn run(&self, model: &str) -> Option<&ModelRun> {
        self.runs.iter().find(|r| r.model == model)
    }
}

/// Runs the backtest of one series. `scorable[t]` says whether month t may
/// be scored (the caller marks mostly-imputed months false when
/// `exclude_imputed` is on).
pub fn run(
    y: &[f64],
    scorable: &[bool],
    models: &[Box<dyn AnyModel>],
    settings: &CheckedBacktestSettings,
) -> Backtest {
    let s = settings.get();
    let os = origins(y.len(), usable_origins(y.len(), s), s.horizon, 2);
    run_at(y, scorable, models, os, s.horizon)
}

/// Origins up to the default count ([`BacktestSettings::default`]) may
/// train on as little as the series allows; origins beyond it are used
/// only where they leave at least this many training months. Without the
/// floor, `--origins 60` on 60 months of history would start the backtest
/// on two months, where the seasonal and ARIMA candidates and the
/// intermittent-demand default cannot fit, and the product would be chosen
/// among the few crude methods that can.
pub const EXTRA_ORIGIN_MIN_TRAIN: usize = 24;

/// The number of origins a series of `n` months gets under `s`: the
/// requested count, cut (beyond the default count) to those that leave
/// [`EXTRA_ORIGIN_MIN_TRAIN`] training months and `s.horizon` months after.
pub fn usable_origins(n: usize, s: &BacktestSettings) -> usize {
    let default = BacktestSettings::default().origins;
    if s.origins <= default {
        return s.origins;
    }
    let roomy = (n + 1).saturating_sub(s.horizon + EXTRA_ORIGIN_MIN_TRAIN);
    s.origins.min(roomy.max(default))
}

/// [`run`] at the given origins (positions of the last training month,
/// oldest first), each forecasting `horizon` months.
pub fn run_at(
    y: &[f64],
    scorable: &[bool],
    models: &[Box<dyn AnyModel>],
    os: Vec<usize>,
    horizon: usize,
) -> Backtest {
    let mut runs: Vec<ModelRun> = Vec::with_capacity(models.len() + 1);
    for m in models {
        let name = m.name();
        let mut forecasts = Vec::with_capacity(os.len());
        let mut failed = 0;
        let mut first_err: Option<String> = None;
        let mut not_applicable: Option<String> = None;
        // Origins run oldest first, so each fit may start from the previous
        // origin's optimum; it still sees only the months up to its origin.
        let mut warm: WarmStart = None;
        for &o in &os {
            let train = &y[..=o];
            let result = m
                .fit_any_warm(train, &mut warm)
                .and_then(|f| f.forecast(horizon, &LEVELS));
            match result {
                Ok(fc) => forecasts.push(Some(fc)),
                Err(Error::NotApplicable { reason, .. })
                    if forecasts.iter().all(Option::is_none) =>
                {
                    // Not applicable at the earliest origin may still apply
                    // later (more history); record and go on.
                    not_applicable.get_or_insert(reason);
                    forecasts.push(None);
                }
                Err(e) => {
                    failed += 1;
                    first_err.get_or_insert(e.to_string());
                    forecasts.push(None);
                }
            }
        }
        let any = forecasts.iter().any(Option::is_some);
        let status =
            if !any {
                RunStatus::NotApplicable(not_applicable.or(first_err).unwrap_or_else(|| {
                    "the series is too short for any backtest origin".to_string()
                }))
            } else if forecasts.iter().all(Option::is_some) {
                RunStatus::Complete
            } else {
                let missing = forecasts.iter().filter(|f| f.is_none()).count();
                RunStatus::Incomplete {
                    failed: missing.max(failed),
                    first: not_applicable
                        .map(|r| format!("not applicable at the earliest origins: {r}"))
                        .or(first_err)
                        .unwrap_or_default(),
                }
            };
        runs.push(ModelRun {
            model: name,
            status,
            forecasts,
            members: Vec::new(),
        });
    }
    let mut bt = Backtest {
        origins: os,
        horizon,
        actual: y.to_vec(),
        scorable: scorable.to_vec(),
        runs,
        scales: Default::default(),
    };
    let combo = combination_run(&bt);
    bt.runs.push(combo);
    bt
}

fn combination_run(bt: &Backtest) -> ModelRun {
    // Members that forecast at any origin: a member may not apply at the
    // earliest origins (too little history) and still apply later, as it
    // does on the whole history the projection is fitted to.
    let members: Vec<usize> = COMBINATION_MEMBERS
        .iter()
        .filter_map(|name| {
            (0..bt.runs.len()).find(|&i| {
                bt.runs[i].model == *name && bt.runs[i].forecasts.iter().any(Option::is_some)
            })
        })
        .collect();
    let mut forecasts = Vec::with_capacity(bt.origins.len());
    let mut names = Vec::with_capacity(bt.origins.len());
    for k in 0..bt.origins.len() {
        let present: Vec<usize> = members
            .iter()
            .copied()
            .filter(|&i| bt.runs[i].forecasts.get(k).is_some_and(Option::is_some))
            .collect();
        if present.len() >= COMBINATION_MIN_MEMBERS {
            let fcs: Vec<&Forecast> = present
                .iter()
                .filter_map(|&i| bt.runs[i].forecasts[k].as_ref())
                .collect();
            forecasts.push(mean_forecast(&fcs));
            names.push(present.iter().map(|&i| bt.runs[i].model.clone()).collect());
        } else {
            forecasts.push(None);
            names.push(Vec::new());
        }
    }
    let done = forecasts.iter().filter(|f| f.is_some()).count();
    let status = if bt.origins.is_empty() {
        RunStatus::NotApplicable("the series is too short for any backtest origin".to_string())
    } else if done == 0 {
        RunStatus::NotApplicable(format!(
            "needs at least {COMBINATION_MIN_MEMBERS} of its members ({}) at an origin",
            COMBINATION_MEMBERS.join(", ")
        ))
    } else if done < bt.origins.len() {
        RunStatus::Incomplete {
            failed: bt.origins.len() - done,
            first: format!(
                "fewer than {COMBINATION_MIN_MEMBERS} of its members ({}) at the earliest origins",
                COMBINATION_MEMBERS.join(", ")
            ),
        }
    } else {
        RunStatus::Complete
    };
    ModelRun {
        model: COMBINATION.to_string(),
        status,
        forecasts,
        members: names,
    }
}

/// Mean of several forecasts: points and interval bounds averaged, each
/// member clipped at zero first, as each is a forecast of a quantity that
/// cannot be negative (a simple, common way to combine intervals; it tends
/// to be slightly conservative). `None` when given none.
pub fn mean_forecast(fcs: &[&Forecast]) -> Option<Forecast> {
    let first = fcs.first()?;
    let h = fcs.iter().map(|f| f.point.len()).min()?;
    let n = fcs.len() as f64;
    let avg = |get: &dyn Fn(&Forecast) -> Option<&[f64]>| -> Option<Vec<f64>> {
        let mut out = vec![0.0; h];
        for f in fcs {
            let v = get(f)?;
            for (o, x) in out.iter_mut().zip(v) {
                *o += x.max(0.0) / n;
            }
        }
        Some(out)
    };
    let point = avg(&|f| Some(&f.point[..]))?;
    let mut intervals = Vec::with_capacity(first.intervals.len());
    for i in &first.intervals {
        let lower = avg(&|f| f.interval(i.level).map(|x| &x.lower[..]))?;
        let upper = avg(&|f| f.interval(i.level).map(|x| &x.upper[..]))?;
        intervals.push(crate::models::Interval {
            level: i.level,
            lower,
            upper,
        });
    }
    Some(Forecast { point, intervals }.clipped())
}

#[cfg(test)]
mod tests;
