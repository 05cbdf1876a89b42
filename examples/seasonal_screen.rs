//! How often `ets-auto` would choose a seasonal form for a series whose
//! seasonal strength is low: the evidence for its seasonal screen
//! ([`provisio::models::ets_seasonal::SEASONAL_SCREEN`]).
//!
//! For each series of a CSV (`product,month,consumed`, oldest month first)
//! with its last HOLDOUT months left out, as `provisio evaluate` would,
//! fits every seasonal form and every non-seasonal form with the
//! candidate's own procedure and counts, per band of STL seasonal strength,
//! the series on which a seasonal form has the lower AICc (the choice
//! without the screen), and how much lower.
//! Run: `cargo run --release --example seasonal_screen -- FILE.csv HOLDOUT`

#[path = "common/series.rs"]
mod series;
use series::read;

use provisio::models::arima::seasonal_strength;
use provisio::models::ets_seasonal::EtsAuto;
use provisio::models::{Model, Season};

/// Upper edges of the seasonal-strength bands reported.
const BANDS: [f64; 7] = [0.1, 0.2, 0.3, 0.4, 0.5, 0.64, f64::INFINITY];

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let (Some(path), Some(holdout)) = (
        args.get(1),
        args.get(2).and_then(|h| h.parse::<usize>().ok()),
    ) else {
        eprintln!("usage: seasonal_screen FILE.csv HOLDOUT");
        std::process::exit(2);
    };
    let data = match read(path) {
        Ok(d) => d,
        Err(e) => {
            eprintln!("{e}");
            std::process::exit(1);
        }
    };
    // Per band: series, seasonal form chosen, largest AICc gain of one.
    let mut rows = [(0usize, 0usize, 0.0f64); BANDS.len()];
    for y in data.values() {
        let Some(n) = y.len().checked_sub(holdout).filter(|&n| n > 24) else {
            continue;
        };
        let y = &y[..n];
        let Some(strength) = seasonal_strength(y) else {
            continue;
        };
        let with = EtsAuto::with_season(Season::Always).fit(y);
        let without = EtsAuto::with_season(Season::Never).fit(y);
        let (Ok(with), Ok(without)) = (with, without) else {
            continue;
        };
        let band = BANDS.iter().position(|&b| strength < b).unwrap_or(0);
        let row = &mut rows[band];
        row.0 += 1;
        let gain = without.aicc() - with.aicc();
        if gain > 0.0 && with.method() != without.method() {
            row.1 += 1;
            row.2 = row.2.max(gain);
        }
    }
    println!("seasonal strength   series  seasonal form chosen  largest AICc gain");
    let mut low = 0.0;
    for (b, (n, chosen, gain)) in BANDS.iter().zip(rows) {
        let band = if b.is_finite() {
            format!("{low:.2}-{b:.2}")
        } else {
            format!("{low:.2}-1.00")
        };
        println!("{band:17} {n:8} {chosen:21} {gain:18.1}");
        low = *b;
    }
}
