//! `provisio review` against an outside reference: a backtest slice of
//! AirPassengers (shipped in statsforecast.utils; values in
//! tests/reference/datasets.json). Forecasts made as if at 1959-12 and
//! 1960-06 by seasonal naive and naive (pinned; both reproduce statsforecast
//! 2.1.1 `SeasonalNaive(12)` / `Naive()` with their 80%/95% intervals) are
//! reviewed against the months of 1960. The expected scores — MAPE, bias,
//! WAPE, coverage and its binomial p-value, tracking signal, value added over
//! naive and seasonal naive, the closer vintage — were computed with pandas,
//! numpy and scipy 1.17.1 by tests/reference/review_reference.py from
//! statsforecast's own forecasts (tests/reference/review_statsforecast.json).

use std::path::Path;
use std::process::Command;

use serde_json::Value;

fn load(name: &str) -> Value {
    let p = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(name);
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn run(dir: &Path, args: &[&str]) {
    let o = Command::new(env!("CARGO_BIN_EXE_provisio"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn close(ours: f64, theirs: f64, what: &str) {
    // forecast.csv keeps 4 decimals of values near 400: scores agree to
    // well within 1e-6 relative.
    assert!(
        (ours - theirs).abs() <= 1e-6 * theirs.abs().max(1.0),
        "{what}: ours {ours}, reference {theirs}"
    );
}

#[test]
fn review_scores_match_pandas_on_air_passengers() {
    let data = load("datasets.json");
    let y: Vec<f64> = data["datasets"]["AirPassengers"]["values"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .collect();
    let reference = load("review_statsforecast.json");
    let dir = tempfile::tempdir().unwrap();
    // The same series under two names, one pinned to each model.
    let mut csv = String::from("product,month,consumed\n");
    for name in ["air-seasonal-naive", "air-naive"] {
        for (t, v) in y.iter().enumerate() {
            csv.push_str(&format!("{name},{}-{:02},{v}\n", 1949 + t / 12, t % 12 + 1));
        }
    }
    std::fs::write(dir.path().join("air.csv"), csv).unwrap();
    std::fs::write(
        dir.path().join("pins.csv"),
        "product,model\nair-seasonal-naive,seasonal-naive\nair-naive,naive\n",
    )
    .unwrap();
    for (until, h) in [("1959-12", "12"), ("1960-06", "6")] {
        let out = format!("past-{until}");
        run(
            dir.path(),
            &[
                "forecast",
                "air.csv",
                "--until",
                until,
                "--horizon",
                h,
                "--pin",
                "pins.csv",
                "--origins",
                "2",
                "--backtest-horizon",
                "3",
                "--out",
                &out,
            ],
        );
    }
    run(
        dir.path(),
        &[
            "review",
            "past-1959-12",
            "past-1960-06",
            "--actuals",
            "air.csv",
            "--out",
            "rev",
        ],
    );
    let review: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("rev/review.json")).unwrap())
            .unwrap();
    let products = review["products"].as_array().unwrap();
    assert_eq!(products.len(), 4);
    let mut checked = 0;
    for p in products {
        let (theirs, model) = match p["product"].as_str().unwrap() {
            "air-seasonal-naive" => ("SeasonalNaive", "seasonal-naive"),
            _ => ("Naive", "naive"),
        };
        assert_eq!(p["model"], model);
        let origin = p["origin"].as_str().unwrap();
        let v = &reference["vintages"][origin];
        let r = &v[theirs]["scores"];
        let fc = &v[theirs]["forecast"];
        let what = |s: &str| format!("{theirs} at {origin}: {s}");
        // The forecast reviewed is statsforecast's, month by month.
        let months = p["months"].as_array().unwrap();
        assert_eq!(months.len() as u64, r["n"].as_u64().unwrap());
        for (k, m) in months.iter().enumerate() {
            assert_eq!(m["month"], v["months"][k]);
            assert_eq!(f(&m["actual"]), f(&v["actual"][k]));
            close(f(&m["forecast"]), f(&fc["mean"][k]), &what("forecast"));
            close(f(&m["interval_80"][0]), f(&fc["lo-80"][k]), &what("lo-80"));
            close(f(&m["interval_95"][1]), f(&fc["hi-95"][k]), &what("hi-95"));
        }
        let s = &p["scores"];
        close(f(&s["mape_pct"]), 100.0 * f(&r["mape"]), &what("MAPE"));
        close(f(&s["bias_pct"]), 100.0 * f(&r["bias"]), &what("bias"));
        close(f(&s["wape_pct"]), 100.0 * f(&r["wape"]), &what("WAPE"));
        close(
            f(&s["coverage_80_pct"]),
            100.0 * f(&r["coverage_80"]),
            &what("coverage 80"),
        );
        close(
            f(&s["coverage_95_pct"]),
            100.0 * f(&r["coverage_95"]),
            &what("coverage 95"),
        );
        close(
            f(&s["coverage_80_p_value"]),
            f(&r["coverage_80_p_value"]),
            &what("binomial p 80"),
        );
        close(
            f(&s["coverage_95_p_value"]),
            f(&r["coverage_95_p_value"]),
            &what("binomial p 95"),
        );
        let ts = &s["tracking_signal"];
        close(
            f(&ts["cumulative_error"]),
            f(&r["cumulative_error"]),
            &what("cumulative error"),
        );
        close(f(&ts["mad"]), f(&r["mad"]), &what("MAD"));
        close(
            f(&ts["value"]),
            f(&r["tracking_signal"]),
            &what("tracking signal"),
        );
        close(
            f(&s["naive_wape_pct"]),
            100.0 * f(&r["naive_wape"]),
            &what("naive WAPE"),
        );
        close(
            f(&s["seasonal_naive_wape_pct"]),
            100.0 * f(&r["seasonal_naive_wape"]),
            &what("seasonal naive WAPE"),
        );
        close(
            f(&s["value_added_vs_naive_pts"]),
            100.0 * f(&r["value_added_vs_naive"]),
            &what("value added vs naive"),
        );
        close(
            f(&s["value_added_vs_seasonal_naive_pts"]),
            100.0 * f(&r["value_added_vs_seasonal_naive"]),
            &what("value added vs seasonal naive"),
        );
        checked += 1;
    }
    assert_eq!(checked, 4);
    // Which vintage was closer on 1960-07..12.
    for c in review["vintage_comparisons"].as_array().unwrap() {
        let theirs = if c["product"] == "air-seasonal-naive" {
            "SeasonalNaive"
        } else {
            "Naive"
        };
        let r = &reference["vintage_comparison"][theirs];
        assert_eq!(c["common_months"], r["common_months"]);
        close(
            f(&c["wape_pct"][0]),
            100.0 * f(&r["wape"]["1959-12"]),
            "vintage WAPE",
        );
        close(
            f(&c["wape_pct"][1]),
            100.0 * f(&r["wape"]["1960-06"]),
            "vintage WAPE",
        );
        let closest = c["closest"].as_str().unwrap();
        assert_eq!(
            closest,
            format!("past-{}", r["closest"].as_str().unwrap()),
            "{theirs}"
        );
    }
}
