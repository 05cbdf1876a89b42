//! Holt-Winters against statsmodels 0.15.0.
//!
//! Source of every expected value: `tests/reference/ets_statsmodels.json`,
//! written by `tests/reference/generate.py` with statsmodels 0.15.0:
//! `statsmodels.tsa.holtwinters.ExponentialSmoothing(y, trend='add',
//! damped_trend=False|True, seasonal='add'|'mul', seasonal_periods=12,
//! initialization_method='estimated').fit(optimized=True)` (other `fit`
//! arguments at their defaults: L-BFGS-B, `use_brute=True`), on
//! AirPassengers (statsforecast 2.1.1, 1949-01..1960-12, n = 144) and
//! wineind (pmdarima 2.1.1, 1980-01..1994-08, n = 176), both read from
//! `tests/reference/datasets.json`.
//!
//! Tolerances:
//! - replaying statsmodels' own parameters: 1e-9 relative (only rounding
//!   differs);
//! - our optimised SSE: at most 1% above statsmodels' with statsmodels'
//!   bounds (φ ≤ 0.995); with our default φ ≤ 0.98 also 1%, except the two
//!   damped AirPassengers fits, where statsmodels' optimum φ = 0.995 is
//!   outside our range (5% there);
//! - 12-month point forecasts: 2% relative to statsmodels' textbook
//!   forecasts with the same bounds;
//! - α, β, γ, φ: 0.02 absolute, compared only where both optimisers reach
//!   the same optimum (SSEs within 0.1%); elsewhere ours is lower and the
//!   parameters differ by design of the search, not by error.

use provisio::models::holt_winters::{HoltWinters, HwParams, InitialStates};
use provisio::models::{Fitted, Model};
use serde_json::Value;

fn load(name: &str) -> Value {
    let path = format!("{}/tests/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

struct Case {
    dataset: &'static str,
    key: &'static str,
    spec: HoltWinters,
    y: Vec<f64>,
    r: Value,
}

fn cases() -> Vec<Case> {
    let data = load("datasets.json");
    let sm = load("ets_statsmodels.json");
    let mut out = Vec::new();
    for dataset in ["AirPassengers", "wineind"] {
        for (key, spec) in [
            ("hw_additive", HoltWinters::additive()),
            ("hw_additive_damped", HoltWinters::additive_damped()),
            ("hw_multiplicative", HoltWinters::multiplicative()),
            (
                "hw_multiplicative_damped",
                HoltWinters::multiplicative_damped(),
            ),
        ] {
            out.push(Case {
                dataset,
                key,
                // These fixtures estimate the initial states too.
                spec: spec.with_states(InitialStates::Estimated),
                y: floats(&data["datasets"][dataset]["values"]),
                r: sm["datasets"][dataset][key].clone(),
            });
        }
    }
    out
}

fn f(r: &Value, key: &str) -> f64 {
    r[key].as_f64().unwrap()
}

fn sm_params(r: &Value) -> HwParams {
    let mut seasons = [0.0; 12];
    seasons.copy_from_slice(&floats(&r["initial_seasons"]));
    HwParams {
        alpha: f(r, "smoothing_level"),
        beta: f(r, "smoothing_trend"),
        gamma: f(r, "smoothing_seasonal"),
        phi: r["damping_trend"].as_f64().unwrap_or(1.0),
        level: f(r, "initial_level"),
        trend: f(r, "initial_trend"),
        seasons,
    }
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

/// statsmodels' bounds: φ ≤ 0.995 (`_construct_bounds` in
/// statsmodels/tsa/holtwinters/model.py, as recorded in the fixture's
/// `conventions.optimiser_constraints`).
fn with_sm_bounds(spec: HoltWinters) -> HoltWinters {
    spec.with_phi_max(0.995).unwrap()
}

#[test]
fn replaying_statsmodels_parameters_reproduces_its_fit() {
    // (a) statsmodels 0.15.0 ExponentialSmoothing, fitted_values / sse /
    // final_level / final_trend / final_seasons_s_{n-11}_to_s_n, both
    // datasets, all four forms.
    for c in cases() {
        let p = sm_params(&c.r);
        let fit = c.spec.fit_with(&c.y, &p).unwrap();
        let replay = p.replay(c.spec.seasonality(), &c.y);
        let fitted = floats(&c.r["fitted_values"]);
        assert_eq!(replay.fitted.len(), fitted.len());
        for (t, (a, b)) in replay.fitted.iter().zip(&fitted).enumerate() {
            assert!(
                rel(*a, *b) < 1e-9,
                "{} {} fitted value {}: ours {a}, statsmodels {b}",
                c.dataset,
                c.key,
                t + 1
            );
        }
        let sse = f(&c.r, "sse");
        assert!(
            rel(fit.sse().unwrap(), sse) < 1e-9,
            "{} {}",
            c.dataset,
            c.key
        );
        let (level, trend, seasons) = fit.final_states();
        assert!(rel(level, f(&c.r, "final_level")) < 1e-9);
        assert!((trend - f(&c.r, "final_trend")).abs() < 1e-9 * level.abs());
        let final_s = floats(&c.r["final_seasons_s_{n-11}_to_s_n"]);
        for (a, b) in seasons.iter().zip(&final_s) {
            // Seasons are near zero in the additive form: scale by the level.
            assert!(
                (a - b).abs() < 1e-9 * level.abs(),
                "{} {}",
                c.dataset,
                c.key
            );
        }
    }
}

#[test]
fn forecast_formula_matches_statsmodels_from_its_own_states() {
    // (a) statsmodels 0.15.0: `forecast_textbook_from_final_states` (the
    // textbook formula applied to statsmodels' final states, generate.py)
    // for h = 1..12, and `res.forecast(12)` for h = 1..11; at h = 12
    // statsmodels uses s_{n-m} instead of s_n (README "Forecast quirk"), so
    // h = 12 is compared only with the textbook column, and must differ
    // from `forecast` exactly where the fixture says.
    for c in cases() {
        let fit = c.spec.fit_with(&c.y, &sm_params(&c.r)).unwrap();
        let ours = fit.point_forecast(12);
        let textbook = floats(&c.r["forecast_textbook_from_final_states"]);
        let sm = floats(&c.r["forecast"]);
        for h in 0..12 {
            assert!(
                rel(ours[h], textbook[h]) < 1e-9,
                "{} {} h={}",
                c.dataset,
                c.key,
                h + 1
            );
            if h < 11 {
                assert!(
                    rel(ours[h], sm[h]) < 1e-9,
                    "{} {} h={}",
                    c.dataset,
                    c.key,
                    h + 1
                );
            }
        }
        let mismatch: Vec<u64> = c.r["forecast_mismatch_horizons"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap())
            .collect();
        assert_eq!(mismatch.contains(&12), rel(ours[11], sm[11]) > 1e-9);
    }
}

#[test]
fn our_fit_is_as_good_as_statsmodels() {
    // (b) in-sample SSE against statsmodels 0.15.0 `res.sse`.
    let mut report = String::new();
    for c in cases() {
        let sm_sse = f(&c.r, "sse");
        let same_bounds = with_sm_bounds(c.spec).fit(&c.y).unwrap();
        let ratio_same = same_bounds.sse().unwrap() / sm_sse;
        assert!(
            ratio_same <= 1.01,
            "{} {} with statsmodels' bounds: SSE ratio {ratio_same}",
            c.dataset,
            c.key
        );
        let default = c.spec.fit(&c.y).unwrap();
        let ratio_default = default.sse().unwrap() / sm_sse;
        let sm_phi = c.r["damping_trend"].as_f64().unwrap_or(1.0);
        let outside_our_range = c.spec.damped() && sm_phi > 0.98;
        let margin = if outside_our_range { 1.05 } else { 1.01 };
        assert!(
            ratio_default <= margin,
            "{} {} default bounds: SSE ratio {ratio_default}",
            c.dataset,
            c.key
        );
        report.push_str(&format!(
            "{} {}: SSE ratio to statsmodels {ratio_same:.5} (phi <= 0.995), {ratio_default:.5} (phi <= 0.98)\n",
            c.dataset, c.key
        ));
    }
    eprintln!("{report}");
}

#[test]
fn forecasts_and_parameters_are_close_to_statsmodels() {
    // (c) 12-month point forecasts against statsmodels 0.15.0
    // `forecast_textbook_from_final_states`; parameters against
    // `smoothing_level`, `smoothing_trend`, `smoothing_seasonal`,
    // `damping_trend`. Same bounds as statsmodels (φ ≤ 0.995).
    let mut compared = 0;
    for c in cases() {
        let fit = with_sm_bounds(c.spec).fit(&c.y).unwrap();
        let ours = fit.forecast(12, &[]).unwrap().point;
        let textbook = floats(&c.r["forecast_textbook_from_final_states"]);
        let mut worst: f64 = 0.0;
        for h in 0..12 {
            let d = rel(ours[h], textbook[h]);
            worst = worst.max(d);
            assert!(
                d < 0.02,
                "{} {} h={}: {} vs {} ({d})",
                c.dataset,
                c.key,
                h + 1,
                ours[h],
                textbook[h]
            );
        }
        eprintln!(
            "{} {}: largest forecast difference {:.4}%",
            c.dataset,
            c.key,
            100.0 * worst
        );
        let same_optimum = rel(fit.sse().unwrap(), f(&c.r, "sse")) < 1e-3;
        if same_optimum {
            compared += 1;
            let p = fit.hw_params();
            let sm = sm_params(&c.r);
            for (name, a, b) in [
                ("alpha", p.alpha, sm.alpha),
                ("beta", p.beta, sm.beta),
                ("gamma", p.gamma, sm.gamma),
                ("phi", p.phi, sm.phi),
            ] {
                assert!(
                    (a - b).abs() < 0.02,
                    "{} {} {name}: ours {a}, statsmodels {b}",
                    c.dataset,
                    c.key
                );
            }
        }
    }
    // The parameter check must have applied somewhere to mean anything.
    assert!(
        compared >= 3,
        "only {compared} fits reached statsmodels' optimum"
    );
}

#[test]
fn registered_as_candidates() {
    let names: Vec<String> = provisio::models::candidates()
        .iter()
        .map(|m| m.name())
        .collect();
    for spec in HoltWinters::all() {
        assert!(names.contains(&Model::name(&spec)), "{names:?}");
    }
}

#[test]
fn heuristic_states_and_fit_match_statsmodels_heuristic() {
    // Source: tests/reference/hw_heuristic_statsmodels.json, written by
    // tests/reference/hw_heuristic.py with statsmodels 0.15.0
    // `ExponentialSmoothing(..., initialization_method='heuristic')
    // .fit(optimized=True)` on AirPassengers, wineind and the last 60
    // months of AirPassengers. The candidates' default: initial states by
    // the heuristic, only α, β, γ, φ optimised.
    let data = load("datasets.json");
    let sm = load("hw_heuristic_statsmodels.json");
    let mut checked = 0;
    for dataset in ["AirPassengers", "wineind", "AirPassengers_last60"] {
        let y = floats(&data["datasets"][dataset]["values"]);
        for (key, spec) in [
            ("hw_additive", HoltWinters::additive()),
            ("hw_additive_damped", HoltWinters::additive_damped()),
            ("hw_multiplicative", HoltWinters::multiplicative()),
            (
                "hw_multiplicative_damped",
                HoltWinters::multiplicative_damped(),
            ),
        ] {
            assert_eq!(spec.states(), InitialStates::Heuristic);
            let r = &sm["datasets"][dataset][key];
            let fit = with_sm_bounds(spec).fit(&y).unwrap();
            let p = fit.hw_params();
            let lvl = f(r, "initial_level").abs();
            // Seasons: the same 2×12 moving-average heuristic as statsmodels.
            for (a, b) in p.seasons.iter().zip(floats(&r["initial_seasons"])) {
                assert!(
                    (a - b).abs() < 1e-9 * lvl,
                    "{dataset} {key} seasons {a} vs {b}"
                );
            }
            // Level and trend: the line through the first ten seasonally
            // adjusted months (Hyndman et al. 2008, §2.6.1), here computed
            // by numpy's polyfit in the script; statsmodels fits its moving
            // average instead, so its l₀, b₀ differ by design.
            assert!(
                rel(p.level, f(r, "textbook_initial_level")) < 1e-9,
                "{dataset} {key} l0"
            );
            assert!(
                (p.trend - f(r, "textbook_initial_trend")).abs() < 1e-9 * lvl,
                "{dataset} {key} b0"
            );
            // With slightly different starting states the optima differ a
            // little; ours must be in the same range as statsmodels'.
            let ratio = fit.sse().unwrap() / f(r, "sse");
            assert!(ratio <= 1.10, "{dataset} {key}: SSE ratio {ratio}");
            eprintln!("{dataset} {key}: SSE ratio to statsmodels (heuristic states) {ratio:.4}");
            checked += 1;
        }
    }
    assert_eq!(checked, 12);
}
