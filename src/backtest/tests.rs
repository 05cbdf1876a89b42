use super::*;
use crate::models::{Fitted, Model, Needs};
use proptest::prelude::*;
use std::sync::{Arc, Mutex};

/// A model that forecasts the last value and records every training window
/// it is given.
#[derive(Clone, Default)]
struct Spy {
    seen: Arc<Mutex<Vec<Vec<f64>>>>,
}

struct SpyFit(f64);

impl Fitted for SpyFit {
    fn forecast(&self, h: usize, levels: &[f64]) -> Result<Forecast> {
        Forecast::normal(vec![self.0; h], &vec![1.0; h], levels)
    }
    fn params(&self) -> Vec<(String, f64)> {
        Vec::new()
    }
}

impl Model for Spy {
    type Fitted = SpyFit;
    fn name(&self) -> String {
        "spy".into()
    }
    fn description(&self) -> String {
        "test model".into()
    }
    fn needs(&self) -> Needs {
        Needs {
            min_months: 1,
            positive: false,
            seasonal: false,
        }
    }
    fn fit(&self, y: &[f64]) -> Result<SpyFit> {
        self.seen.lock().unwrap().push(y.to_vec());
        Ok(SpyFit(*y.last().unwrap_or(&0.0)))
    }
}

fn checked(k: usize, h: usize) -> CheckedBacktestSettings {
    BacktestSettings {
        origins: k,
        horizon: h,
        exclude_imputed: true,
    }
    .check()
    .unwrap()
}

#[test]
fn origins_are_the_last_k_leaving_h_months() {
    // 36 months, H = 12, K = 12: training ends at positions 12..=23.
    assert_eq!(origins(36, 12, 12, 2), (12..=23).collect::<Vec<_>>());
    // Short series: fewer origins, never one without H months after it.
    assert_eq!(origins(15, 12, 12, 2), vec![1, 2]);
    assert!(origins(12, 12, 12, 2).is_empty());
}

#[test]
fn naive_backtest_scores_by_hand() {
    let y: Vec<f64> = (1..=6).map(|v| v as f64 * 10.0).collect(); // 10..60
    let spy = Spy::default();
    let models: Vec<Box<dyn AnyModel>> = vec![Box::new(spy.clone())];
    let bt = run(&y, &[true; 6], &models, &checked(2, 2));
    assert_eq!(bt.origins, vec![2, 3]);
    // Origin 2 (train 10,20,30): forecasts 30,30 for 40,50; origin 3: 40,40 for 50,60.
    let pts = bt.points(&bt.runs[0]);
    let pairs: Vec<(f64, f64)> = pts.iter().map(|p| (p.actual, p.forecast)).collect();
    assert_eq!(
        pairs,
        vec![(40.0, 30.0), (50.0, 30.0), (50.0, 40.0), (60.0, 40.0)]
    );
    let s = bt.scores(&bt.runs[0]);
    let mape = 100.0 * (10.0 / 40.0 + 20.0 / 50.0 + 10.0 / 50.0 + 20.0 / 60.0) / 4.0;
    assert!((s.mape.unwrap() - mape).abs() < 1e-9);
    assert!((s.bias.unwrap() - 100.0 * (-60.0) / 200.0).abs() < 1e-9);
    let by_h = bt.scores_by_horizon(&bt.runs[0]);
    assert_eq!(by_h[0].n, 2);
}

#[test]
fn unscorable_months_are_left_out() {
    let y = vec![10.0, 20.0, 30.0, 40.0, 50.0];
    let mut scorable = vec![true; 5];
    scorable[4] = false;
    let models: Vec<Box<dyn AnyModel>> = vec![Box::new(Spy::default())];
    let bt = run(&y, &scorable, &models, &checked(2, 1));
    assert_eq!(bt.scores(&bt.runs[0]).n, 1);
}

/// A named model forecasting the last value plus a constant, applicable
/// from `min` months of history.
struct Shifted(&'static str, f64, usize);

impl Model for Shifted {
    type Fitted = SpyFit;
    fn name(&self) -> String {
        self.0.into()
    }
    fn description(&self) -> String {
        "test model".into()
    }
    fn needs(&self) -> Needs {
        Needs {
            min_months: self.2,
            positive: false,
            seasonal: false,
        }
    }
    fn fit(&self, y: &[f64]) -> Result<SpyFit> {
        if y.len() < self.2 {
            return Err(Error::NotApplicable {
                model: self.0.into(),
                reason: "too short".into(),
            });
        }
        Ok(SpyFit(y.last().copied().unwrap_or(0.0) + self.1))
    }
}

#[test]
fn combination_is_the_mean_of_its_fixed_members() {
    let y: Vec<f64> = (0..30).map(|t| 100.0 + (t % 7) as f64).collect();
    let models: Vec<Box<dyn AnyModel>> = vec![
        Box::new(Shifted("ets-auto", 0.0, 1)),
        Box::new(Shifted("naive-ish", 50.0, 1)),
        Box::new(Shifted("theta", 10.0, 1)),
    ];
    let bt = run(&y, &[true; 30], &models, &checked(6, 3));
    let combo = bt.run(COMBINATION).unwrap();
    assert_eq!(combo.status, RunStatus::Complete);
    for (k, &o) in bt.origins.iter().enumerate() {
        // Members fixed in advance, whatever their backtest scores.
        assert_eq!(combo.members[k], vec!["ets-auto", "theta"]);
        let f = combo.forecasts[k].as_ref().unwrap();
        assert!(f.point.iter().all(|&v| (v - (y[o] + 5.0)).abs() < 1e-12));
    }
    // One member alone is not a combination.
    let one: Vec<Box<dyn AnyModel>> = vec![Box::new(Shifted("theta", 0.0, 1))];
    let bt = run(&y, &[true; 30], &one, &checked(6, 3));
    assert!(matches!(
        bt.run(COMBINATION).unwrap().status,
        RunStatus::NotApplicable(_)
    ));
}

#[test]
fn a_member_missing_early_origins_joins_the_combination_where_it_applies() {
    let y: Vec<f64> = (0..30).map(|t| 100.0 + (t % 7) as f64).collect();
    let models: Vec<Box<dyn AnyModel>> = vec![
        Box::new(Shifted("ets-auto", 0.0, 1)),
        Box::new(Shifted("arima-auto", 30.0, 25)),
        Box::new(Shifted("theta", 6.0, 1)),
    ];
    let bt = run(&y, &[true; 30], &models, &checked(6, 3));
    let arima = bt.run("arima-auto").unwrap();
    assert!(matches!(arima.status, RunStatus::Incomplete { .. }));
    let combo = bt.run(COMBINATION).unwrap();
    // Two members at every origin: the combination is complete.
    assert_eq!(combo.status, RunStatus::Complete);
    for (k, &o) in bt.origins.iter().enumerate() {
        let f = combo.forecasts[k].as_ref().unwrap();
        if o + 1 >= 25 {
            assert_eq!(combo.members[k], vec!["ets-auto", "arima-auto", "theta"]);
            assert!(f.point.iter().all(|&v| (v - (y[o] + 12.0)).abs() < 1e-12));
        } else {
            assert_eq!(combo.members[k], vec!["ets-auto", "theta"]);
            assert!(f.point.iter().all(|&v| (v - (y[o] + 3.0)).abs() < 1e-12));
        }
    }
}

#[test]
fn settings_errors_name_the_value() {
    let e = BacktestSettings {
        origins: 0,
        ..Default::default()
    }
    .check()
    .unwrap_err()
    .to_string();
    assert!(e.contains("origins") && e.contains("got 0"), "{e}");
}

proptest! {
    /// No origin's fit sees any month after the origin: the spy records
    /// every training window, which must be exactly y[..=origin].
    #[test]
    fn no_origin_sees_later_months(
        y in prop::collection::vec(0.0..1000.0f64, 3..60),
        k in 1..15usize,
        h in 1..13usize,
    ) {
        let spy = Spy::default();
        let models: Vec<Box<dyn AnyModel>> = vec![Box::new(spy.clone())];
        let bt = run(&y, &vec![true; y.len()], &models, &checked(k, h));
        let seen = spy.seen.lock().unwrap().clone();
        prop_assert_eq!(seen.len(), bt.origins.len());
        for (window, &o) in seen.iter().zip(&bt.origins) {
            prop_assert_eq!(&window[..], &y[..=o]);
            prop_assert!(o + h < y.len());
        }
        // Changing a month after an origin never changes that origin's forecast.
        if let Some(&o) = bt.origins.first() {
            let mut y2 = y.clone();
            for v in &mut y2[o + 1..] { *v += 500.0; }
            let bt2 = run(&y2, &vec![true; y.len()], &models, &checked(k, h));
            prop_assert_eq!(&bt.runs[0].forecasts[0], &bt2.runs[0].forecasts[0]);
        }
    }
}

#[test]
fn one_pass_scores_equal_the_metric_functions() {
    // Scores::of must give exactly what the slice functions of `metrics`
    // give on the scored points (same sums in the same order).
    let mut pts = Vec::new();
    for t in 0..40 {
        let a = if t % 7 == 0 {
            0.0
        } else {
            50.0 + (t * 13 % 17) as f64
        };
        let f = 48.0 + (t * 5 % 11) as f64;
        pts.push(Point {
            origin: 0,
            horizon: 1 + t % 12,
            target: t,
            actual: a,
            forecast: f,
            lower80: f - 5.0,
            upper80: f + 5.0,
            lower95: f - 9.0,
            upper95: f + 9.0,
            scale: Some(3.0 + (t % 3) as f64),
            scale_sq: Some(4.0),
            scored: t % 9 != 4,
        });
    }
    let sc = Scores::of(&pts);
    let used: Vec<&Point> = pts.iter().filter(|p| p.scored).collect();
    let a: Vec<f64> = used.iter().map(|p| p.actual).collect();
    let f: Vec<f64> = used.iter().map(|p| p.forecast).collect();
    let (mape, zeros) = metrics::mape(&a, &f);
    assert_eq!(sc.n, used.len());
    assert_eq!(sc.mape, mape);
    assert_eq!(sc.zero_actuals, zeros);
    assert_eq!(sc.bias, metrics::bias(&a, &f));
    assert_eq!(sc.wape, metrics::wape(&a, &f));
    assert_eq!(sc.rmse, metrics::rmse(&a, &f));
    let lo: Vec<f64> = used.iter().map(|p| p.lower80).collect();
    let hi: Vec<f64> = used.iter().map(|p| p.upper80).collect();
    assert_eq!(sc.coverage80, metrics::coverage(&a, &lo, &hi));
    let m: f64 = used
        .iter()
        .map(|p| (p.forecast - p.actual).abs() / p.scale.unwrap())
        .sum::<f64>()
        / used.len() as f64;
    assert!((sc.mase.unwrap() - m).abs() < 1e-12);
    // With one scale for every point, RMSSE is the metrics function's value.
    assert!((sc.rmsse.unwrap() - metrics::rmsse(&a, &f, 4.0).unwrap()).abs() < 1e-12);
}

#[test]
fn origins_beyond_the_default_count_need_two_years_of_history() {
    let s = |origins, horizon| BacktestSettings {
        origins,
        horizon,
        exclude_imputed: true,
    };
    // Up to the default 12, the count asked for (a short series gets what
    // fits, as before).
    assert_eq!(usable_origins(20, &s(12, 12)), 12);
    assert_eq!(usable_origins(20, &s(6, 12)), 6);
    // 60 months, 12 after each origin, 24 before: positions 23..=47, 25.
    assert_eq!(usable_origins(60, &s(60, 12)), 25);
    let os = origins(60, usable_origins(60, &s(60, 12)), 12, 2);
    assert_eq!((os[0], *os.last().unwrap(), os.len()), (23, 47, 25));
    // Never fewer than the default count, never more than asked for.
    assert_eq!(usable_origins(40, &s(30, 12)), 12);
    assert_eq!(usable_origins(120, &s(30, 12)), 30);
    assert_eq!(usable_origins(60, &s(60, 36)), 12);
}
