//! One contract, run on every model in `provisio::models::candidates()`:
//! forecast length equals the horizon, lower ≤ point ≤ upper, the 95%
//! interval contains the 80% one, no NaN or infinity, nothing negative,
//! same input → same output, a constant series gives a flat forecast
//! (equal to the constant unless the model deliberately scales it). A
//! model may decline a series only with `Error::NotApplicable` and a reason.
//!
//! The contract itself is common practice for forecasting libraries
//! (statsforecast runs one such check on every model class); the property
//! tests feed finite, non-negative series of every length.

use proptest::prelude::*;
use provisio::models::{candidates, AnyModel, Forecast, DEFAULT_LEVELS};
use provisio::Error;

const HORIZON: usize = 24;

/// Models whose forecast of a constant series is flat but deliberately not
/// the constant: SBA multiplies Croston by 1 − α/2 (Syntetos & Boylan 2005).
const SCALES_CONSTANT: &[&str] = &["croston-sba"];

/// Outcome of fitting one model to one series.
enum Outcome {
    Forecast(Forecast),
    Declined,
}

/// Fits, forecasts and checks every clause of the contract; `Err` says
/// which clause failed.
fn check(model: &dyn AnyModel, y: &[f64]) -> Result<Outcome, String> {
    let name = model.name();
    let fit = match model.fit_any(y) {
        Ok(f) => f,
        Err(Error::NotApplicable { model: m, reason }) => {
            if reason.trim().is_empty() || m.is_empty() {
                return Err(format!("{name}: declined without a reason"));
            }
            return Ok(Outcome::Declined);
        }
        Err(e) => return Err(format!("{name}: failed on n={}: {e}", y.len())),
    };
    if y.len() < model.needs().min_months {
        return Err(format!(
            "{name}: fitted {} months, below its declared minimum {}",
            y.len(),
            model.needs().min_months
        ));
    }
    let f = fit
        .forecast(HORIZON, &DEFAULT_LEVELS)
        .map_err(|e| format!("{name}: forecast failed: {e}"))?;
    if f.point.len() != HORIZON {
        return Err(format!(
            "{name}: {} points for horizon {HORIZON}",
            f.point.len()
        ));
    }
    if f.intervals.len() != DEFAULT_LEVELS.len() {
        return Err(format!(
            "{name}: {} intervals for 2 levels",
            f.intervals.len()
        ));
    }
    let all = f.point.iter().chain(
        f.intervals
            .iter()
            .flat_map(|i| i.lower.iter().chain(&i.upper)),
    );
    for v in all {
        if !v.is_finite() {
            return Err(format!("{name}: non-finite value {v}"));
        }
        if *v < 0.0 {
            return Err(format!("{name}: negative value {v}"));
        }
    }
    for i in &f.intervals {
        if i.lower.len() != HORIZON || i.upper.len() != HORIZON {
            return Err(format!("{name}: interval {} has the wrong length", i.level));
        }
        for h in 0..HORIZON {
            if !(i.lower[h] <= f.point[h] && f.point[h] <= i.upper[h]) {
                return Err(format!(
                    "{name}: h={} level {}: {} ≤ {} ≤ {} fails",
                    h + 1,
                    i.level,
                    i.lower[h],
                    f.point[h],
                    i.upper[h]
                ));
            }
        }
    }
    let (i80, i95) = match (f.interval(0.80), f.interval(0.95)) {
        (Some(a), Some(b)) => (a, b),
        _ => return Err(format!("{name}: 80% or 95% interval missing")),
    };
    for h in 0..HORIZON {
        if !(i95.lower[h] <= i80.lower[h] && i80.upper[h] <= i95.upper[h]) {
            return Err(format!("{name}: h={}: 95% does not contain 80%", h + 1));
        }
    }
    let again = model
        .fit_any(y)
        .and_then(|g| g.forecast(HORIZON, &DEFAULT_LEVELS))
        .map_err(|e| format!("{name}: second fit failed: {e}"))?;
    if again != f {
        return Err(format!("{name}: same input gave a different forecast"));
    }
    Ok(Outcome::Forecast(f))
}

fn check_all(y: &[f64]) -> Vec<(String, Forecast)> {
    let mut out = Vec::new();
    for m in candidates() {
        match check(m.as_ref(), y) {
            Ok(Outcome::Forecast(f)) => out.push((m.name(), f)),
            Ok(Outcome::Declined) => {}
            Err(e) => panic!("{e}\nseries: {y:?}"),
        }
    }
    out
}

/// A seasonal, trending, strictly positive series (monthly pattern plus
/// drift), long enough for every seasonal model.
fn seasonal_series(n: usize) -> Vec<f64> {
    (0..n)
        .map(|t| {
            let season = [
                0.9, 0.85, 1.0, 1.05, 1.1, 1.2, 1.25, 1.2, 1.05, 0.95, 0.85, 0.9,
            ][t % 12];
            let wobble = ((t * 37) % 11) as f64 - 5.0;
            (200.0 + 2.0 * t as f64) * season + wobble
        })
        .collect()
}

/// A series with many zero months.
fn intermittent_series(n: usize) -> Vec<f64> {
    (0..n)
        .map(|t| {
            if (t * 7) % 5 < 2 {
                ((t * 13) % 9 + 1) as f64
            } else {
                0.0
            }
        })
        .collect()
}

#[test]
fn there_are_candidates() {
    let names: Vec<String> = candidates().iter().map(|m| m.name()).collect();
    for expected in [
        "moving-average-3",
        "moving-average-6",
        "moving-average-12",
        "naive",
        "seasonal-naive",
        "theta",
        "croston",
        "croston-sba",
        "tsb",
    ] {
        assert!(
            names.iter().any(|n| n == expected),
            "{expected} missing from {names:?}"
        );
    }
    let mut sorted = names.clone();
    sorted.sort();
    sorted.dedup();
    assert_eq!(sorted.len(), names.len(), "duplicate names in {names:?}");
}

#[test]
fn contract_on_a_seasonal_series() {
    let y = seasonal_series(60);
    let fits = check_all(&y);
    // Every registered model can fit 60 positive months.
    assert_eq!(
        fits.len(),
        candidates().len(),
        "some model declined: {:?}",
        fits.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
}

#[test]
fn contract_on_an_intermittent_series() {
    let y = intermittent_series(48);
    let fits = check_all(&y);
    for m in ["croston", "croston-sba", "tsb"] {
        assert!(fits.iter().any(|(n, _)| n == m), "{m} did not fit");
    }
}

#[test]
fn too_short_series_are_declined_with_a_reason() {
    for m in candidates() {
        let min = m.needs().min_months;
        if min == 0 {
            continue;
        }
        let y = vec![5.0; min - 1];
        match m.fit_any(&y) {
            Err(Error::NotApplicable { reason, .. }) => assert!(!reason.is_empty()),
            Err(e) => panic!("{}: expected not-applicable, got {e}", m.name()),
            Ok(_) => panic!(
                "{}: fitted {} months below its minimum {min}",
                m.name(),
                min - 1
            ),
        }
    }
}

#[test]
fn constant_series_gives_a_flat_forecast() {
    for c in [37.5, 0.1, 1.0e9] {
        let y = vec![c; 48];
        for (name, f) in check_all(&y) {
            let first = f.point[0];
            let tol = 1e-9 * c.abs().max(1.0);
            for p in &f.point {
                assert!(
                    (p - first).abs() <= tol,
                    "{name}: not flat on constant {c}: {:?}",
                    f.point
                );
            }
            if !SCALES_CONSTANT.contains(&name.as_str()) {
                assert!(
                    (first - c).abs() <= 1e-6 * c.abs().max(1.0),
                    "{name}: constant {c} forecast as {first}"
                );
            }
        }
    }
}

/// Finite, non-negative series of every shape the brief lists.
fn any_series() -> impl Strategy<Value = Vec<f64>> {
    let len = 1usize..=72;
    prop_oneof![
        len.clone().prop_map(|n| vec![0.0; n]),
        (len.clone(), 0.0..1e6f64).prop_map(|(n, c)| vec![c; n]),
        (len.clone(), any::<prop::sample::Index>(), 0.0..1e6f64).prop_map(|(n, i, v)| {
            let mut y = vec![0.0; n];
            y[i.index(n)] = v;
            y
        }),
        prop::collection::vec(5e8..2e9f64, len.clone()),
        prop::collection::vec(0.0..2e-6f64, len.clone()),
        prop::collection::vec(0.0..1000.0f64, len.clone()),
        prop::collection::vec(prop_oneof![3 => Just(0.0), 1 => 0.0..50.0f64], len),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn no_model_panics_or_breaks_the_contract(y in any_series()) {
        for m in candidates() {
            if let Err(e) = check(m.as_ref(), &y) {
                prop_assert!(false, "{}", e);
            }
        }
    }
}
