//! Fit + 12-month forecast for every candidate model on one 60-month
//! series, and the whole candidate set on that series.
//!
//! Series: `AirPassengers_last60` from `tests/reference/datasets.json`
//! (AirPassengers 1956-01..1960-12, as shipped by statsforecast 2.1.1).
//! The warm-started group refits on 12 expanding prefixes (60..=71 months)
//! of the last 71 months of `AirPassengers` (same file), each fit started
//! from the previous one's optimum, as the backtest does; it reports the
//! time per fit + forecast.
//! Run: `cargo bench --bench models -- --warm-up-time 1 --measurement-time 3`.

use std::time::{Duration, Instant};

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use provisio::models::{candidates, WarmStart, DEFAULT_LEVELS};

fn dataset(name: &str) -> Vec<f64> {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/datasets.json");
    let text = std::fs::read_to_string(path).expect("datasets.json is committed");
    let v: serde_json::Value = serde_json::from_str(&text).expect("valid json");
    v["datasets"][name]["values"]
        .as_array()
        .expect("values array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

fn series() -> Vec<f64> {
    dataset("AirPassengers_last60")
}

/// Origins of the warm-started sequence.
const ORIGINS: usize = 12;

fn per_model_warm(c: &mut Criterion) {
    let full = dataset("AirPassengers");
    let y = &full[full.len() - (60 + ORIGINS - 1)..];
    let mut group = c.benchmark_group("warm_fit_forecast12_per_origin");
    for model in candidates() {
        if model.fit_any(&y[..60]).is_err() {
            continue;
        }
        group.bench_function(model.name(), |b| {
            b.iter_custom(|iters| {
                let mut total = Duration::ZERO;
                for _ in 0..iters {
                    // The previous origin's fit, untimed, primes the start.
                    let mut warm: WarmStart = None;
                    black_box(model.fit_any_warm(&y[..59], &mut warm).ok());
                    let start = Instant::now();
                    for end in 60..60 + ORIGINS {
                        let fit = model
                            .fit_any_warm(black_box(&y[..end]), &mut warm)
                            .expect("fits");
                        black_box(fit.forecast(12, &DEFAULT_LEVELS).expect("forecasts"));
                    }
                    total += start.elapsed();
                }
                // Per fit, not per sequence.
                total / ORIGINS as u32
            })
        });
    }
    group.finish();
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

fn mstl_decomposition_alone(c: &mut Criterion) {
    // The STL step of mstl-ets by itself, to separate its cost from the
    // ETS fit's.
    let y = series();
    c.bench_function("mstl_decomposition_60m", |b| {
        b.iter(|| black_box(provisio::models::stl::decompose(black_box(&y)).expect("decomposes")))
    });
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

criterion_group!(
    benches,
    per_model,
    per_model_warm,
    mstl_decomposition_alone,
    per_model_point_only,
    whole_set
);
criterion_main!(benches);
