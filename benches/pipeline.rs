//! End-to-end throughput of the main job: generate invented series, clean
//! them, and run backtest → select → project with the full default
//! protocol (every candidate refitted at 12 origins). Reported per run of
//! 40 series; divide to get series per second.

use std::collections::HashMap;

use criterion::{criterion_group, criterion_main, Criterion};
use provisio::clean::{clean, CleanSettings};
use provisio::data::{read_csv_bytes, ReadOptions};
use provisio::generate::{generate, synthetic_scenario, write_rows};
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

criterion_group!(benches, bench);
criterion_main!(benches);
