//! Outlier flags against a robust STL from statsmodels.
//!
//! Reference values: tests/reference/outliers_statsmodels.json, made by
//! tests/reference/outliers_statsmodels.py (statsmodels 0.15.0 STL with the
//! robust settings of R's `stl(robust = TRUE)`; the interquartile rule on
//! its remainder recomputed in numpy). The series are AirPassengers and
//! wineind (tests/reference/datasets.json) with invented ×10 and ÷10 entry
//! errors. The rule itself is our construction after Hyndman's published
//! method (see src/clean/outliers.rs); no published worked example of
//! flags on these series is used.

use provisio::calendar::YearMonth;
use provisio::clean::outliers::find_outliers;
use serde_json::Value;

#[test]
fn flags_and_expected_values_match_statsmodels_stl() {
    let path = format!(
        "{}/tests/reference/outliers_statsmodels.json",
        env!("CARGO_MANIFEST_DIR")
    );
    let data: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let cases = data["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 6);
    for c in cases {
        let y: Vec<f64> = c["values"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let k = c["k"].as_f64().unwrap();
        let trusted = vec![true; y.len()];
        let got = find_outliers(&y, &trusted, YearMonth::known(2000, 1), k);
        let want: Vec<(usize, f64)> = c["flags"]
            .as_array()
            .unwrap()
            .iter()
            .map(|f| {
                (
                    f["t"].as_u64().unwrap() as usize,
                    f["expected"].as_f64().unwrap(),
                )
            })
            .collect();
        let label = format!("{} {} k={k}", c["series"], c["errors"]);
        assert_eq!(
            got.iter().map(|o| o.t).collect::<Vec<_>>(),
            want.iter().map(|w| w.0).collect::<Vec<_>>(),
            "{label}"
        );
        // Two implementations of robust LOESS: expected values within 3%.
        for (o, (_, e)) in got.iter().zip(&want) {
            assert!(
                (o.expected - e).abs() <= 0.03 * e,
                "{label}: month {} expected {} vs statsmodels {e}",
                o.t,
                o.expected
            );
        }
    }
}
