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
    // The same quantities as a wide table (a row per product and site, a
    // column per month) and as the long file of those columns alone: the
    // cost of the wide layout over the long one, value for value.
    let (long, wide) = consumed_only(&ds);
    g.bench_function("read_long_consumed", |b| {
        b.iter(|| read_csv_bytes("long.csv", &long, &opts))
    });
    g.bench_function("read_wide_consumed", |b| {
        b.iter(|| read_csv_bytes("wide.csv", &wide, &opts))
    });
    g.bench_function("read_and_clean", |b| {
        b.iter(|| provisio::clean::read_and_clean("bench.csv", &bytes, &opts, &settings))
    });
    g.finish();
}

/// The dataset's quantities as a long CSV (product, site, month,
/// consumed) and as a wide one (product, site, a column per month).
fn consumed_only(ds: &provisio::data::Dataset) -> (Vec<u8>, Vec<u8>) {
    use std::collections::{BTreeMap, BTreeSet};
    let num = |v: Option<f64>| v.map(|x| x.to_string()).unwrap_or_default();
    let mut long = String::from("product,site,month,consumed\n");
    let mut table: BTreeMap<(String, String), BTreeMap<String, String>> = BTreeMap::new();
    let mut months = BTreeSet::new();
    for r in &ds.rows {
        let site = r.site.as_deref().unwrap_or("").to_string();
        let month = r.month.to_string();
        long.push_str(&format!(
            "{},{site},{month},{}\n",
            r.product,
            num(r.consumed)
        ));
        months.insert(month.clone());
        table
            .entry((r.product.to_string(), site))
            .or_default()
            .insert(month, num(r.consumed));
    }
    let mut wide = String::from("product,site");
    for m in &months {
        wide.push(',');
        wide.push_str(m);
    }
    wide.push('\n');
    for ((p, s), by_month) in &table {
        wide.push_str(&format!("{p},{s}"));
        for m in &months {
            wide.push(',');
            wide.push_str(by_month.get(m).map_or("", String::as_str));
        }
        wide.push('\n');
    }
    (long.into_bytes(), wide.into_bytes())
}

criterion_group!(benches, bench);
criterion_main!(benches);
