//! End-to-end throughput of the main job: generate invented series, clean
//! them, and run backtest → select → project with the full default
//! protocol (every candidate refitted at 12 origins). Reported per run of
//! 40 series; divide to get series per second.

use std::collections::HashMap;

use criterion::{criterion_group, criterion_main, Criterion};
use provisio::backtest::{self, BacktestSettings};
use provisio::clean::{clean, CleanSettings};
use provisio::data::{read_csv_bytes, ReadOptions};
use provisio::generate::{generate, synthetic_scenario, write_rows};
use provisio::models::candidates;
use provisio::pipeline::{forecast_all, ForecastSettings};

fn bench(c: &mut Criterion) {
    let rows = generate(&synthetic_scenario(40, 1, 60, 11));
    let mut bytes = Vec::new();
    write_rows(&mut bytes, &rows).unwrap();
    let ds = read_csv_bytes("bench.csv", &bytes, &ReadOptions::default()).unwrap();
    let settings = CleanSettings::default().check().unwrap();
    let cleaned = clean(&ds, &settings);
    let fs = ForecastSettings::default().check().unwrap();
    let pins = HashMap::new();
    let mut g = c.benchmark_group("pipeline");
    g.sample_size(10);
    g.bench_function("clean_40_series_60m", |b| b.iter(|| clean(&ds, &settings)));
    g.bench_function("forecast_40_series_60m", |b| {
        b.iter(|| forecast_all(&cleaned.series, &fs, &pins, &|| {}))
    });
    g.finish();
}

/// The backtest of one 60-month series by one model: 12 origins, each
/// refitted (warm-started from the previous origin where the model can).
fn backtest_per_model(c: &mut Criterion) {
    let rows = generate(&synthetic_scenario(8, 1, 60, 5));
    let mut bytes = Vec::new();
    write_rows(&mut bytes, &rows).unwrap();
    let ds = read_csv_bytes("bench.csv", &bytes, &ReadOptions::default()).unwrap();
    let cleaned = clean(&ds, &CleanSettings::default().check().unwrap());
    // A smooth, positive series, so every candidate applies.
    let series = cleaned
        .series
        .iter()
        .find(|s| s.values.iter().all(|&v| v > 0.0))
        .expect("the generated set has a positive series");
    let mask = vec![true; series.values.len()];
    let settings = BacktestSettings::default().check().unwrap();
    let mut g = c.benchmark_group("backtest_12_origins");
    for model in candidates() {
        let one = vec![model];
        let name = one[0].name();
        g.bench_function(name, |b| {
            b.iter(|| backtest::run(&series.values, &mask, &one, &settings))
        });
    }
    g.finish();
}

criterion_group!(benches, bench, backtest_per_model);
criterion_main!(benches);
