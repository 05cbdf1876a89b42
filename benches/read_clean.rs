//! Reading and cleaning at scale: a generated file of about 60,000 rows
//! (50 products × 100 sites × 12 months, invented data), read from memory
//! and cleaned. The 1,000,000-row measurement of the binary (time and peak
//! memory) is in the README; this bench tracks the same path at a size
//! that runs in seconds.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use provisio::clean::{clean, CleanSettings};
use provisio::data::{read_csv_bytes, ReadOptions};
use provisio::generate::{generate, synthetic_scenario, write_rows};

fn bench(c: &mut Criterion) {
    let rows = generate(&synthetic_scenario(50, 100, 12, 21));
    let mut bytes = Vec::new();
    write_rows(&mut bytes, &rows).expect("write to memory");
    let opts = ReadOptions::default();
    let settings = CleanSettings::default().check().expect("default settings");
    let ds = read_csv_bytes("bench.csv", &bytes, &opts).expect("generated file reads");
    let mut g = c.benchmark_group("read_clean");
    g.sample_size(10);
    g.throughput(Throughput::Elements(ds.rows_read as u64));
    g.bench_function("read", |b| {
        b.iter(|| read_csv_bytes("bench.csv", &bytes, &opts))
    });
    g.bench_function("clean", |b| b.iter(|| clean(&ds, &settings)));
    g.bench_function("read_and_clean", |b| {
        b.iter(|| provisio::clean::read_and_clean("bench.csv", &bytes, &opts, &settings))
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
