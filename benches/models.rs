//! Fit + 12-month forecast for every candidate model on one 60-month
//! series, and the whole candidate set on that series.
//!
//! Series: `AirPassengers_last60` from `tests/reference/datasets.json`
//! (AirPassengers 1956-01..1960-12, as shipped by statsforecast 2.1.1).
//! Run: `cargo bench --bench models -- --warm-up-time 1 --measurement-time 3`.

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use provisio::models::{candidates, DEFAULT_LEVELS};

fn series() -> Vec<f64> {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/datasets.json");
    let text = std::fs::read_to_string(path).expect("datasets.json is committed");
    let v: serde_json::Value = serde_json::from_str(&text).expect("valid json");
    v["datasets"]["AirPassengers_last60"]["values"]
        .as_array()
        .expect("values array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

fn per_model(c: &mut Criterion) {
    let y = series();
    let mut group = c.benchmark_group("fit_forecast12_60m");
    for model in candidates() {
        if model.fit_any(&y).is_err() {
            // A model that does not apply to this series has nothing to time.
            continue;
        }
        group.bench_function(model.name(), |b| {
            b.iter(|| {
                let fit = model.fit_any(black_box(&y)).expect("fits");
                black_box(fit.forecast(12, &DEFAULT_LEVELS).expect("forecasts"))
            })
        });
    }
    group.finish();
}

fn per_model_point_only(c: &mut Criterion) {
    // The backtest needs only point forecasts at each origin.
    let y = series();
    let mut group = c.benchmark_group("fit_point12_60m");
    for model in candidates() {
        if model.fit_any(&y).is_err() {
            continue;
        }
        group.bench_function(model.name(), |b| {
            b.iter(|| {
                let fit = model.fit_any(black_box(&y)).expect("fits");
                black_box(fit.forecast(12, &[]).expect("forecasts"))
            })
        });
    }
    group.finish();
}

fn whole_set(c: &mut Criterion) {
    let y = series();
    let models = candidates();
    c.bench_function("candidate_set_fit_forecast12_60m", |b| {
        b.iter(|| {
            for model in &models {
                if let Ok(fit) = model.fit_any(black_box(&y)) {
                    black_box(fit.forecast(12, &DEFAULT_LEVELS).ok());
                }
            }
        })
    });
}

criterion_group!(benches, per_model, per_model_point_only, whole_set);
criterion_main!(benches);
