//! Forecast one monthly series from Rust code with provisio's public API.
//!
//! Run with `cargo run --example forecast_one_series`. The series is
//! invented: four years of a product dispensed more in the rainy months.
//! Results are decision support, to be reviewed by the responsible
//! programme staff; national guidelines and local regulations take
//! precedence.

use provisio::calendar::YearMonth;
use provisio::clean::CleanSeries;
use provisio::models::candidates;
use provisio::pipeline::{forecast_product, ForecastSettings};

fn main() -> Result<(), provisio::Error> {
    // 48 months from January 2022: a slow rise, a peak from May to
    // August, and a little noise (deterministic, so every run is alike).
    let values: Vec<f64> = (0..48)
        .map(|t| {
            let month = t % 12;
            let rainy = if (4..8).contains(&month) { 180.0 } else { 0.0 };
            let noise = 5.0 * (((t * 37) % 23) as f64 - 11.0);
            900.0 + 4.0 * t as f64 + rainy + noise
        })
        .collect();
    let series = CleanSeries::observed(
        "Oral rehydration salts sachet",
        YearMonth::known(2022, 1),
        values,
    );

    // Defaults: 12 backtest origins, 12 months ahead each, chosen by MASE;
    // project 12 months.
    let settings = ForecastSettings {
        horizon: 12,
        ..ForecastSettings::default()
    }
    .check()?;
    let result = forecast_product(&series, &candidates(), &settings, None);

    let s = &result.selection;
    println!("product:      {}", result.product);
    println!("chosen model: {}", s.chosen);
    if let Some(scores) = &s.chosen_scores {
        println!(
            "backtest:     MAPE {:.1}%, bias {:+.1}%",
            scores.mape.unwrap_or(f64::NAN),
            scores.bias.unwrap_or(f64::NAN)
        );
    }
    if let Some((name, score)) = &s.runner_up {
        println!("runner-up:    {name} ({} {score:.1})", s.score.name());
    }
    println!("reason:       {}", s.reason);
    for w in &result.warnings {
        println!("warning:      {w}");
    }

    let Some(p) = &result.projection else {
        println!("no projection (see the warnings)");
        return Ok(());
    };
    let r80 = p.forecast.interval(0.80);
    let r95 = p.forecast.interval(0.95);
    println!();
    println!(
        "{:<8} {:>9} {:>21} {:>21}",
        "month", "forecast", "80% range", "95% range"
    );
    for (k, point) in p.forecast.point.iter().enumerate() {
        let range = |r: Option<&provisio::models::Interval>| {
            r.map(|r| format!("{:.0} – {:.0}", r.lower[k], r.upper[k]))
                .unwrap_or_else(|| "-".into())
        };
        println!(
            "{:<8} {:>9.0} {:>21} {:>21}",
            p.start.plus(k as i64).to_string(),
            point,
            range(r80),
            range(r95)
        );
    }
    println!(
        "\naverage monthly consumption: last 12 months {:.0}, next 12 months {:.0}",
        p.amc_last, p.amc_next
    );
    Ok(())
}
