//! What keeping the order across backtest origins costs `arima-auto` in
//! accuracy and saves in time: the 12-origin backtest (horizon 12) of each
//! series in a CSV (`product,month,consumed`, oldest month first, as
//! `datasets/open/monthly.csv`), run three ways —
//!
//! * `kept`: the candidate, [`AutoArima::new`] (order kept while d, D hold);
//! * `searched`: [`AutoArima::searching_every_origin`];
//! * `cold`: a full cold fit (tests, stepwise search, ML) at every origin.
//!
//! Prints mean MASE, median MAPE and the time of each.
//! Run: `cargo run --release --example arima_origins -- FILE.csv`

use std::time::Instant;

#[path = "common/series.rs"]
mod series;
use series::read;

use provisio::backtest::{self, BacktestSettings};
use provisio::models::arima::{AutoArima, FittedArima};
use provisio::models::{AnyModel, Model, Needs};

/// Cold fit at every origin.
struct Cold;

impl Model for Cold {
    type Fitted = FittedArima;
    fn name(&self) -> String {
        "arima-auto-cold".to_string()
    }
    fn description(&self) -> String {
        "arima-auto with a cold fit at every origin".to_string()
    }
    fn needs(&self) -> Needs {
        Model::needs(&AutoArima::new())
    }
    fn fit(&self, y: &[f64]) -> provisio::Result<FittedArima> {
        AutoArima::new().fit(y)
    }
}

fn main() {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: arima_origins FILE.csv");
        std::process::exit(2);
    };
    let data = match read(&path) {
        Ok(d) => d,
        Err(e) => {
            eprintln!("{e}");
            std::process::exit(1);
        }
    };
    let settings = BacktestSettings::default()
        .check()
        .expect("default settings are valid");
    let variants: Vec<(&str, Box<dyn AnyModel>)> = vec![
        ("kept", Box::new(AutoArima::new())),
        ("searched", Box::new(AutoArima::searching_every_origin())),
        ("cold", Box::new(Cold)),
    ];
    for (label, model) in variants {
        let one = vec![model];
        let (mut mase, mut mapes, mut used) = (0.0, Vec::new(), 0usize);
        let start = Instant::now();
        for y in data.values() {
            if y.len() < 24 + 24 {
                continue;
            }
            let mask = vec![true; y.len()];
            let bt = backtest::run(y, &mask, &one, &settings);
            let s = bt.scores(&bt.runs[0]);
            if let (Some(m), Some(p)) = (s.mase, s.mape) {
                mase += m;
                mapes.push(p);
                used += 1;
            }
        }
        let took = start.elapsed();
        mapes.sort_by(|a, b| a.total_cmp(b));
        println!(
            "{label:9} series {used:4}  mean MASE {:.4}  median MAPE {:.2}%  time {:.2} s ({:.2} ms a series)",
            mase / used.max(1) as f64,
            mapes.get(mapes.len() / 2).copied().unwrap_or(f64::NAN),
            took.as_secs_f64(),
            1e3 * took.as_secs_f64() / used.max(1) as f64
        );
    }
}
