//! End-to-end throughput of the main job on generated (invented) data:
//! clean, then backtest → select → project every series with the full
//! default protocol (every candidate refitted at 12 origins, combination,
//! 24-month projection with 80% and 95% ranges), in parallel on all cores.
//!
//! Run: `cargo bench --bench throughput -- 1000 10000` (series counts; each
//! series has 60 months). Prints wall time, series per second, time per
//! series (flat when time grows linearly with the number of series) and the
//! peak resident memory of the process (VmHWM, Linux).

use std::collections::HashMap;
use std::time::Instant;

use provisio::clean::{clean, CleanSettings};
use provisio::data::{read_csv_bytes, ReadOptions};
use provisio::generate::{generate, synthetic_scenario, write_rows};
use provisio::pipeline::{forecast_all, ForecastSettings};

fn peak_memory_mb() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

fn main() {
    // cargo passes `--bench`; the other arguments are series counts.
    let counts: Vec<usize> = std::env::args()
        .skip(1)
        .filter_map(|a| a.parse().ok())
        .collect();
    let counts = if counts.is_empty() { vec![200] } else { counts };
    println!(
        "threads: {}; months per series: 60; full default protocol",
        rayon::current_num_threads()
    );
    println!(
        "{:>8} {:>10} {:>10} {:>14} {:>12} {:>14}",
        "series", "clean s", "forecast s", "series per s", "ms/series", "peak MB so far"
    );
    for n in counts {
        let rows = generate(&synthetic_scenario(n, 1, 60, 3));
        let mut bytes = Vec::new();
        write_rows(&mut bytes, &rows).expect("in-memory write");
        drop(rows);
        let ds = read_csv_bytes("bench.csv", &bytes, &ReadOptions::default()).expect("valid");
        drop(bytes);
        let t0 = Instant::now();
        let cleaned = clean(&ds, &CleanSettings::default().check().expect("defaults"));
        let t_clean = t0.elapsed().as_secs_f64();
        let fs = ForecastSettings::default().check().expect("defaults");
        let t1 = Instant::now();
        let results = forecast_all(&cleaned.series, &fs, &HashMap::new(), &|| {});
        let t_fc = t1.elapsed().as_secs_f64();
        assert_eq!(results.len(), cleaned.series.len());
        println!(
            "{:>8} {:>10.2} {:>10.2} {:>14.1} {:>12.2} {:>14.0}",
            n,
            t_clean,
            t_fc,
            n as f64 / (t_clean + t_fc),
            1000.0 * (t_clean + t_fc) / n as f64,
            peak_memory_mb().unwrap_or(f64::NAN)
        );
    }
}
