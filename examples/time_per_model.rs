//! Where the forecasting time goes: for every cleaned series of a
//! consumption file, the 12-origin backtest of each candidate (run alone,
//! warm-started across origins as in the pipeline) and its fit on the
//! whole history (the projection's refit), timed on one thread.
//!
//! Run: `cargo run --release --example time_per_model -- FILE.csv [MODEL,...]`
//! (a `provisio generate` file or any consumption file the CLI reads; the
//! optional list keeps only the models named).

use std::time::Instant;

use provisio::backtest::{self, BacktestSettings};
use provisio::clean::{clean, CleanSettings};
use provisio::data::{read_csv_path, ReadOptions};
use provisio::models::candidates;

fn main() {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: time_per_model FILE.csv");
        std::process::exit(2);
    };
    let ds = match read_csv_path(std::path::Path::new(&path), &ReadOptions::default()) {
        Ok(ds) => ds,
        Err(e) => {
            eprintln!("{e}");
            std::process::exit(1);
        }
    };
    let t0 = Instant::now();
    let settings = match CleanSettings::default().check() {
        Ok(s) => s,
        Err(e) => {
            eprintln!("{e}");
            std::process::exit(1);
        }
    };
    let cleaned = clean(&ds, &settings);
    let t_clean = t0.elapsed().as_secs_f64();
    let bs = match BacktestSettings::default().check() {
        Ok(s) => s,
        Err(e) => {
            eprintln!("{e}");
            std::process::exit(1);
        }
    };
    let only: Option<Vec<String>> = std::env::args()
        .nth(2)
        .map(|l| l.split(',').map(str::to_string).collect());
    let keep = |name: &str| only.as_ref().map_or(true, |o| o.iter().any(|m| m == name));
    let models: Vec<_> = candidates()
        .into_iter()
        .filter(|m| keep(&m.name()))
        .collect();
    let mut backtest_s = vec![0.0; models.len()];
    let mut refit_s = vec![0.0; models.len()];
    for s in &cleaned.series {
        let y = &s.values;
        let mask = vec![true; y.len()];
        for (i, m) in models.iter().enumerate() {
            let Some(spec) = candidates().into_iter().find(|c| c.name() == m.name()) else {
                continue;
            };
            let one = vec![spec];
            let t = Instant::now();
            let bt = backtest::run(y, &mask, &one, &bs);
            backtest_s[i] += t.elapsed().as_secs_f64();
            std::hint::black_box(bt);
            let t = Instant::now();
            let f = m.fit_any(y).and_then(|f| f.forecast(24, &backtest::LEVELS));
            refit_s[i] += t.elapsed().as_secs_f64();
            std::hint::black_box(f.ok());
        }
    }
    let n = cleaned.series.len();
    println!("{n} series; cleaning {t_clean:.2} s");
    println!(
        "{:<36} {:>12} {:>12} {:>14}",
        "model", "backtest s", "refit s", "ms per series"
    );
    let mut order: Vec<usize> = (0..models.len()).collect();
    order.sort_by(|&a, &b| (backtest_s[b] + refit_s[b]).total_cmp(&(backtest_s[a] + refit_s[a])));
    for i in order {
        println!(
            "{:<36} {:>12.2} {:>12.2} {:>14.2}",
            models[i].name(),
            backtest_s[i],
            refit_s[i],
            1000.0 * (backtest_s[i] + refit_s[i]) / n as f64
        );
    }
    let (b, r): (f64, f64) = (backtest_s.iter().sum(), refit_s.iter().sum());
    println!(
        "{:<36} {:>12.2} {:>12.2} {:>14.2}",
        "all",
        b,
        r,
        1000.0 * (b + r) / n as f64
    );
}
