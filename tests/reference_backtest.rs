//! The rolling-origin protocol and its scores against statsforecast 2.1.1
//! `StatsForecast(models=[SeasonalNaive(season_length=12),
//! WindowAverage(window_size=6), Naive()], freq='MS').cross_validation(df,
//! h=12, step_size=1, n_windows=12)` on AirPassengers (shipped in
//! statsforecast.utils). These models have no optimiser, so every forecast
//! must match to rounding. Metrics in the fixture were computed by numpy in
//! tests/reference/generate.py from statsforecast's rows.

use provisio::backtest::{self, BacktestSettings};
use serde_json::Value;

fn load(name: &str) -> Value {
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(name);
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

#[test]
fn cross_validation_matches_statsforecast() {
    let data = load("datasets.json");
    let y: Vec<f64> = data["datasets"]["AirPassengers"]["values"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(y.len(), 144);
    let cv = &load("statsforecast.json")["cross_validation"];
    let pairs = [
        ("SeasonalNaive", "seasonal-naive"),
        ("WindowAverage", "moving-average-6"),
        ("Naive", "naive"),
    ];
    let models: Vec<Box<dyn provisio::models::AnyModel>> = pairs
        .iter()
        .map(|(_, ours)| {
            provisio::models::candidates()
                .into_iter()
                .find(|m| m.name() == *ours)
                .unwrap_or_else(|| panic!("candidate {ours} missing"))
        })
        .collect();
    let settings = BacktestSettings {
        origins: 12,
        horizon: 12,
        exclude_imputed: true,
    }
    .check()
    .unwrap();
    let bt = backtest::run(&y, &vec![true; y.len()], &models, &settings);
    // Cutoffs 1959-01..1959-12 are positions 120..=131 (1949-01 = 0).
    assert_eq!(bt.origins, (120..=131).collect::<Vec<_>>());
    let rows = cv["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 144);
    for (k, (theirs, _)) in pairs.iter().enumerate() {
        let pts = bt.points(&bt.runs[k]);
        assert_eq!(pts.len(), rows.len());
        for row in rows {
            let h = row["horizon"].as_u64().unwrap() as usize;
            let cutoff = row["cutoff"].as_str().unwrap();
            let month: usize = cutoff[5..7].parse().unwrap();
            let origin = 120 + month - 1;
            let p = pts
                .iter()
                .find(|p| p.origin == origin && p.horizon == h)
                .unwrap();
            let f = row[*theirs].as_f64().unwrap();
            assert!(
                (p.forecast - f).abs() <= 1e-9 * f.abs(),
                "{theirs} {cutoff} h{h}: {} vs {f}",
                p.forecast
            );
            assert_eq!(p.actual, row["y"].as_f64().unwrap());
        }
        let s = bt.scores(&bt.runs[k]);
        let m = &cv["metrics_overall"][*theirs];
        // Fixture MAPE/bias/WAPE are fractions; ours are percentages.
        assert!((s.mape.unwrap() - 100.0 * m["mape"].as_f64().unwrap()).abs() < 1e-9);
        assert!((s.bias.unwrap() - 100.0 * m["bias"].as_f64().unwrap()).abs() < 1e-9);
        assert!((s.wape.unwrap() - 100.0 * m["wape"].as_f64().unwrap()).abs() < 1e-9);
        assert!((s.rmse.unwrap() - m["rmse"].as_f64().unwrap()).abs() < 1e-9);
        for (h, sh) in bt.scores_by_horizon(&bt.runs[k]).iter().enumerate() {
            let mh = &cv["metrics_per_horizon"][*theirs][(h + 1).to_string()];
            assert_eq!(sh.n as u64, mh["n"].as_u64().unwrap());
            assert!((sh.mape.unwrap() - 100.0 * mh["mape"].as_f64().unwrap()).abs() < 1e-9);
            assert!((sh.rmse.unwrap() - mh["rmse"].as_f64().unwrap()).abs() < 1e-9);
        }
    }
}
