//! Outlier flags on open series with entry errors injected at known months.
//!
//! Cases: tests/reference/outliers_reference.json, made by
//! tests/reference/outliers_reference.py from AirPassengers and wineind
//! (tests/reference/datasets.json; open datasets that R's `datasets` and
//! `forecast` packages ship), whole and shortened to four or five years,
//! with invented ×10 and ÷10 errors. The truth checked against is the
//! injection itself: the months it changed, and the values before it. The
//! script also records the flags of the same rule on statsmodels' robust
//! STL; they agree with the injected months on every case.

use provisio::calendar::YearMonth;
use provisio::clean::outliers::find_outliers;
use serde_json::Value;

fn cases() -> Vec<Value> {
    let path = format!(
        "{}/tests/reference/outliers_reference.json",
        env!("CARGO_MANIFEST_DIR")
    );
    let data: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    data["cases"].as_array().unwrap().clone()
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn every_injected_entry_error_is_flagged_and_nothing_else() {
    let cases = cases();
    assert_eq!(cases.len(), 12);
    for c in &cases {
        let y = numbers(&c["values"]);
        let k = c["k"].as_f64().unwrap();
        let mut trusted = vec![true; y.len()];
        for t in c["untrusted"].as_array().unwrap() {
            trusted[t.as_u64().unwrap() as usize] = false;
        }
        let got = find_outliers(&y, &trusted, YearMonth::known(2000, 1), k);
        let injected: Vec<(usize, f64)> = c["injected"]
            .as_array()
            .unwrap()
            .iter()
            .map(|e| {
                (
                    e["t"].as_u64().unwrap() as usize,
                    e["before"].as_f64().unwrap(),
                )
            })
            .collect();
        let label = format!("{} k={k}", c["series"]);
        assert_eq!(
            got.iter().map(|o| o.t).collect::<Vec<_>>(),
            injected.iter().map(|e| e.0).collect::<Vec<_>>(),
            "{label}"
        );
        // The expected value stands in for the error when it is replaced:
        // within 15% of the value before the injection.
        for (o, (t, before)) in got.iter().zip(&injected) {
            assert!(
                (o.expected - before).abs() <= 0.15 * before,
                "{label}: month {t} expected {} vs {before} before the error",
                o.expected
            );
        }
    }
}
