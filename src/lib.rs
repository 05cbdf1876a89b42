//! provisio forecasts monthly consumption of public-health commodities from
//! the messy monthly reports supply chain analysts have: it inspects the
//! data, cleans it with every adjustment logged, backtests every candidate
//! model per product, selects one with its reason, projects consumption
//! with 80% and 95% ranges and scores past forecasts. [`config`] reads the
//! run configuration file.
//!
//! The library computes on plain values; only [`data`] reading,
//! [`output`] writing, and the [`chart`] and [`report`] files touch files,
//! through paths the caller gives.
//!
//! ```
//! use provisio::{clean, data};
//! let csv = "product,month,consumed,stockout_days\nORS,2024-01,300,0\nORS,2024-02,240,6\n";
//! let ds = data::read_csv_bytes("demo.csv", csv.as_bytes(), &data::ReadOptions::default()).unwrap();
//! let settings = clean::CleanSettings::default().check().unwrap();
//! let cleaned = clean::clean(&ds, &settings);
//! // February 2024 has 29 days: 240 × 29 ÷ 23.
//! assert!((cleaned.series[0].values[1] - 240.0 * 29.0 / 23.0).abs() < 1e-9);
//! assert!(cleaned.rows.balances());
//! ```
//!
//! Forecasting one monthly series from Rust code: every candidate model is
//! backtested on a rolling origin, the best is chosen with its reason, and
//! the projection carries 80% and 95% ranges, never negative
//! (`cargo run --example forecast_one_series` prints a whole example).
//!
//! ```
//! use provisio::calendar::YearMonth;
//! use provisio::clean::CleanSeries;
//! use provisio::pipeline::{forecast_product, ForecastSettings};
//!
//! // Three years of an invented product with a yearly peak in July.
//! let values: Vec<f64> = (0..36)
//!     .map(|t| 400.0 + if t % 12 == 6 { 150.0 } else { 0.0 } + (t % 5) as f64)
//!     .collect();
//! let series = CleanSeries::observed("ORS sachet", YearMonth::known(2022, 1), values);
//! let settings = ForecastSettings { horizon: 12, ..ForecastSettings::default() }.check()?;
//! let result = forecast_product(&series, &provisio::models::candidates(), &settings, None);
//! let projection = result.projection.expect("a projection");
//! assert_eq!(projection.start, YearMonth::known(2025, 1));
//! assert_eq!(projection.forecast.point.len(), 12);
//! let range95 = projection.forecast.interval(0.95).expect("95% range");
//! for (k, point) in projection.forecast.point.iter().enumerate() {
//!     assert!(0.0 <= range95.lower[k] && range95.lower[k] <= *point && *point <= range95.upper[k]);
//! }
//! println!("{}: {}", result.selection.chosen, result.selection.reason);
//! # Ok::<(), provisio::Error>(())
//! ```
#![warn(missing_docs)]

pub mod backtest;
pub mod calendar;
pub mod calibrate;
pub mod changes;
pub mod chart;
pub mod clean;
pub mod config;
pub mod crosscheck;
pub mod data;
pub mod default_rule;
pub mod error;
pub mod generate;
pub mod metrics;
pub mod models;
pub mod output;
pub mod pipeline;
pub mod plan;
pub mod project;
pub mod quality;
pub mod report;
pub mod review;
pub mod select;
pub mod weights;

pub use error::{Error, Result};
