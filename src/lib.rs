//! provisio forecasts monthly consumption of public-health commodities from
//! the messy monthly reports supply chain analysts have: it inspects the
//! data, cleans it with every adjustment logged, and (in later steps)
//! backtests models, projects consumption with ranges and scores past
//! forecasts.
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
#![warn(missing_docs)]

pub mod backtest;
pub mod calendar;
pub mod chart;
pub mod clean;
pub mod config;
pub mod data;
pub mod error;
pub mod generate;
pub mod metrics;
pub mod models;
pub mod output;
pub mod pipeline;
pub mod project;
pub mod quality;
pub mod report;
pub mod review;
pub mod select;

pub use error::{Error, Result};
