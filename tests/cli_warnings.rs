//! End-to-end: each warning on a suspect forecast reaches the terminal and
//! `selection.csv`'s `warnings` column. The series are AirPassengers (Box &
//! Jenkins; `datasets/open/monthly.csv`, as statsforecast 2.1.1 ships it)
//! bent by the test so that each condition holds: a fall to a tenth for the
//! last 18 months (the backtest's origins before the fall miss by more than
//! the volume; a fall two years back is behind every origin), the first
//! 14 months alone (a short history whose naive ranges cannot be
//! calibrated), consumption that stops for the last 4 months with `naive`
//! pinned (a product in use projected at zero, and a jump no trend backs),
//! and demand in one month of three that fades out (an intermittent-demand
//! rate lagging the change), and growth of 40% a year over the last 30
//! months projected flat (a scale-up the projection does not follow; the
//! same 72 months unbent, growing 10–20% a year, are not warned).
//! The thresholds are the project's own
//! (src/pipeline.rs, `WARN_*`); "a WAPE above 100%" and "fewer than 24
//! months" are common practice.

mod common;

use common::{repo, text, Workdir};

fn air() -> Vec<f64> {
    let (_, rows) = common::read_csv_file(&repo("datasets/open/monthly.csv"));
    let air: Vec<f64> = rows
        .iter()
        .filter(|r| &r[0] == "AirPassengers")
        .map(|r| r[2].parse().unwrap())
        .collect();
    assert_eq!(air.len(), 144);
    air
}

/// Rows of `product` ending 1956-12.
fn rows(product: &str, values: &[f64]) -> String {
    let n = values.len();
    let mut s = String::new();
    for (k, v) in values.iter().enumerate() {
        let t = 1956 * 12 + 11 + k as i64 - (n as i64 - 1);
        s.push_str(&format!("{product},{}-{:02},{v}\n", t / 12, t % 12 + 1));
    }
    s
}

fn data(w: &Workdir) {
    let a = air();
    let mut s = String::from("product,month,consumed\n");
    let drop: Vec<f64> = (0..96)
        .map(|t| if t < 78 { a[t] } else { a[t] * 0.1 })
        .collect();
    s.push_str(&rows("Air drop", &drop));
    s.push_str(&rows("Air short", &a[..14]));
    let stop: Vec<f64> = (0..60).map(|t| if t < 56 { a[t] } else { 0.0 }).collect();
    s.push_str(&rows("Air stop", &stop));
    let sparse: Vec<f64> = (0..60)
        .map(|t| {
            if (t % 3 == 0 && t < 48) || t == 50 {
                a[t]
            } else {
                0.0
            }
        })
        .collect();
    s.push_str(&rows("Air sparse", &sparse));
    // A scale-up: +40% a year, compounding, over the last 30 months,
    // projected flat by a pinned 12-month moving average.
    let grow: Vec<f64> = (0..72)
        .map(|t| a[t] * 1.4f64.powf((t as f64 - 41.0).max(0.0) / 12.0))
        .collect();
    s.push_str(&rows("Air scale-up", &grow));
    // AirPassengers itself grows by 10–20% a year: no scale-up warning.
    s.push_str(&rows("Air plain", &a[..72]));
    // Nothing for 29 months, then one month's demand: there is no year-on-year
    // change to quote (a tester saw "+0% year on year").
    let late: Vec<f64> = (0..30).map(|t| if t == 29 { a[t] } else { 0.0 }).collect();
    s.push_str(&rows("Air late start", &late));
    w.write("d.csv", s);
    w.write(
        "run.toml",
        "[products.\"Air short\"]\nmodel = \"naive\"\n[products.\"Air stop\"]\nmodel = \"naive\"\n[products.\"Air scale-up\"]\nmodel = \"moving-average-12\"\n[products.\"Air plain\"]\nmodel = \"moving-average-12\"\n",
    );
}

#[test]
fn each_suspect_forecast_is_warned_where_the_planner_looks() {
    let w = Workdir::new();
    data(&w);
    let o = w.run(&[
        "forecast",
        "d.csv",
        "--config",
        "run.toml",
        "--out",
        "o",
        "--no-report",
        "--no-workbook",
    ]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    let expected: [(&str, &[&str]); 5] = [
        (
            "Air drop",
            &["missed by", "WAPE above 100%", "check the history for breaks"],
        ),
        (
            "Air short",
            &[
                "range held only",
                "could not be widened (too few backtest errors to calibrate on: 12, fewer than 24)",
                "only 14 months of history (fewer than 24)",
            ],
        ),
        (
            "Air stop",
            &[
                "projected at zero for every month although it consumed in its last 12 months (the pinned model)",
                "the next 12 months (0) differ from the last 12",
                "more than the history's own trend",
            ],
        ),
        (
            "Air sparse",
            &["the intermittent-demand rate may lag a real change"],
        ),
        (
            "Air scale-up",
            &[
                "year on year, but the next 12 months are projected at",
                "the models follow a sustained scale-up slowly",
                "enter it as a known change (--changes)",
            ],
        ),
    ];
    let sel = w.read_csv_maps("o/selection.csv");
    for (product, phrases) in expected {
        let column = &sel.iter().find(|r| r["product"] == product).unwrap()["warnings"];
        for p in phrases {
            assert!(
                t.contains(&format!("warning: product '{product}'")) && t.contains(p),
                "terminal lacks {product}: {p}\n{t}"
            );
            assert!(column.contains(p), "{product}: {p} not in {column}");
        }
    }
    // The intermittent product is not told about a trend, and no warning
    // falls on a product whose condition does not hold.
    let sparse = &sel.iter().find(|r| r["product"] == "Air sparse").unwrap()["warnings"];
    assert!(!sparse.contains("own trend"), "{sparse}");
    for product in ["Air plain", "Air drop", "Air sparse", "Air stop"] {
        let column = &sel.iter().find(|r| r["product"] == product).unwrap()["warnings"];
        assert!(!column.contains("scale-up"), "{product}: {column}");
    }
    let late = &sel
        .iter()
        .find(|r| r["product"] == "Air late start")
        .unwrap()["warnings"];
    assert!(
        late.contains("after a year with no consumption") && !late.contains("year on year"),
        "{late}"
    );
    let drop = &sel.iter().find(|r| r["product"] == "Air drop").unwrap()["warnings"];
    assert!(
        !drop.contains("fewer than 24") && !drop.contains("projected at zero"),
        "{drop}"
    );
}

/// Rows of `product` from 2024-06, one a month.
fn rows_from_2024_06(product: &str, values: &[f64]) -> String {
    let mut s = String::new();
    for (k, v) in values.iter().enumerate() {
        let t = 2024 * 12 + 5 + k as i64;
        s.push_str(&format!("{product},{}-{:02},{v},0,1\n", t / 12, t % 12 + 1));
    }
    s
}

/// A tester's three series, 30 months each, forecast together (too few
/// products for a pool, so each product's ranges rest on its own backtest):
/// "HIV test", a step from about 500 to about 1,500 a month (a scale-up) 15
/// months before the end; "Old syrup", about 790 a month, then nothing for
/// the last 8 months; "Rare drug", 29 months of nothing and then 50.
/// Returns the terminal text, `selection.csv` and `forecast.csv`.
///
/// The limits (a factor of at most ×5; 6 months without consumption) are
/// the project's own (src/calibrate.rs `MAX_FACTOR`, src/pipeline.rs
/// `WARN_STOPPED_MONTHS`); that a 95% range contains the 80% one is common
/// practice.
fn tester_series() -> (String, Vec<Row>, Vec<Row>) {
    let step = [
        484., 504., 507., 494., 502., 478., 478., 485., 509., 496., 491., 504., 498., 490., 515.,
        1530., 1462., 1511., 1504., 1556., 1534., 1468., 1572., 1443., 1488., 1539., 1448., 1498.,
        1431., 1525.,
    ];
    let mut phase = vec![
        729., 801., 726., 789., 731., 735., 788., 852., 740., 756., 820., 872., 812., 783., 876.,
        727., 857., 766., 743., 739., 769., 851.,
    ];
    phase.extend([0.0; 8]);
    let mut single = vec![0.0; 29];
    single.push(50.0);
    let w = Workdir::new();
    let mut s = String::from("product,month,consumed,stockout_days,reporting_rate\n");
    s.push_str(&rows_from_2024_06("HIV test", &step));
    s.push_str(&rows_from_2024_06("Old syrup", &phase));
    s.push_str(&rows_from_2024_06("Rare drug", &single));
    w.write("d.csv", s);
    let o = forecast_d(&w, &["--out", "o"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    (
        t,
        w.read_csv_maps("o/selection.csv"),
        w.read_csv_maps("o/forecast.csv"),
    )
}

type Row = std::collections::BTreeMap<String, String>;

fn product<'a>(rows: &'a [Row], p: &str) -> &'a Row {
    rows.iter().find(|r| r["product"] == p).unwrap()
}

/// Month 1's forecast, 80% and 95% bounds.
fn month1(fc: &[Row], p: &str) -> [f64; 5] {
    let r = product(fc, p);
    ["forecast", "lower_80", "upper_80", "lower_95", "upper_95"].map(|k| r[k].parse().unwrap())
}

/// The step: the tester saw a projection of 1,530 with an 80% range of
/// 0–17,752, "calibrated on 120 backtest errors: 80% range ×63.45, 95% ×44.68
/// the model's own", and no warning.
#[test]
fn a_break_in_the_history_widens_the_range_at_most_five_fold_and_is_warned() {
    let (t, sel, fc) = tester_series();
    let hiv = product(&sel, "HIV test");
    assert!(hiv["ranges"].contains("capped at ×5"), "{}", hiv["ranges"]);
    let [f, _, u80, _, _] = month1(&fc, "HIV test");
    assert!(u80 < 3.0 * f, "80% upper {u80} against a projection of {f}");
    for phrase in [
        "the backtest missed by far more than the model expects",
        "a break in the history",
        "check it",
    ] {
        assert!(hiv["warnings"].contains(phrase), "{}", hiv["warnings"]);
        assert!(t.contains(phrase), "{t}");
    }
    // Every month's 95% range contains its 80% range, strictly on a side
    // where the 80% bound is neither the projection nor zero.
    for r in &fc {
        let [f, l80, u80, l95, u95] = ["forecast", "lower_80", "upper_80", "lower_95", "upper_95"]
            .map(|k| r[k].parse::<f64>().unwrap());
        assert!(l95 <= l80 && u95 >= u80, "{r:?}");
        if u80 > f {
            assert!(u95 > u80, "{r:?}");
        }
        if l80 > 0.0 && l80 < f {
            assert!(l95 < l80, "{r:?}");
        }
    }
}

/// The stop: croston-sba projects 751.8 a month; the tester saw `ranges` say
/// "fewer than 24 backtest errors to calibrate on" and a warning "too few
/// backtest errors to widen it" beside a reason counting 144 forecasts, and
/// no word that consumption had stopped.
#[test]
fn a_stop_in_consumption_is_warned_and_the_ranges_give_the_true_count() {
    let (t, sel, _) = tester_series();
    let syrup = product(&sel, "Old syrup");
    assert!(
        syrup["reason"].contains("144 forecasts"),
        "{}",
        syrup["reason"]
    );
    assert!(
        !syrup["ranges"].contains("fewer than 24")
            && syrup["ranges"].contains("of its 144 backtest forecasts"),
        "{}",
        syrup["ranges"]
    );
    let w = &syrup["warnings"];
    assert!(!w.contains("too few backtest errors"), "{w}");
    assert!(
        w.contains("consumed nothing for its last 8 months, yet the projection is 752 a month")
            && w.contains("phased out or stocked out"),
        "{w}"
    );
    assert!(t.contains("consumed nothing for its last 8 months"), "{t}");
    // Not said twice: no projected-at-zero or silence warning.
    assert!(
        !w.contains("projected at zero") && !w.contains("discontinued"),
        "{w}"
    );
    // Neither the step nor the single demand is told consumption stopped.
    for p in ["HIV test", "Rare drug"] {
        assert!(!product(&sel, p)["warnings"].contains("consumed nothing"));
    }
}

/// The single demand: the tester saw a month-1 80% range of 16.67–16.67
/// ("the backtest forecasts were exact at the 80% level"), and `backtested`
/// = no with "(not backtested)" on the terminal beside a reason saying "the
/// backtest ran at 12 origins" and ranges "calibrated on 144 backtest
/// errors".
#[test]
fn a_single_demand_keeps_a_range_with_width_and_says_it_was_backtested() {
    let (t, sel, fc) = tester_series();
    let rare = product(&sel, "Rare drug");
    let [_, l80, u80, _, _] = month1(&fc, "Rare drug");
    assert!(u80 > l80, "80% range {l80}–{u80}");
    assert!(
        rare["ranges"]
            .starts_with("the model's own interval (only 1 of its 144 backtest forecasts")
            && !rare["ranges"].contains("exact"),
        "{}",
        rare["ranges"]
    );
    assert!(
        rare["reason"].contains("the backtest ran at 12 origins"),
        "{}",
        rare["reason"]
    );
    assert_eq!(rare["backtested"], "yes");
    assert!(
        t.contains("(no backtest score)") && !t.contains("(not backtested)"),
        "{t}"
    );
}

/// The closing line counts only the products projected (a tester's
/// one-month product: "forecast 3 product(s)" with 2 projected). Two
/// products from AirPassengers: its first month alone, and 30 months.
#[test]
fn the_summary_counts_the_products_projected() {
    let w = Workdir::new();
    let a = air();
    let mut s = String::from("product,month,consumed\n");
    s.push_str(&rows("Air one month", &a[..1]));
    s.push_str(&rows("Air thirty", &a[..30]));
    w.write("d.csv", s);
    let o = forecast_d(&w, &["--out", "o"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains(
            "forecast 1 of 2 product(s) (no projection for 1: see the warnings) for 24 months"
        ),
        "{t}"
    );
    // In the JSON summary the product with no projection has no model (a
    // tester read "naive" there), and the run's own warnings have a key.
    let o = forecast_d(&w, &["--out", "o2", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let one = json_product(&v, "Air one month");
    assert!(one["model"].is_null(), "{one}");
    assert!(
        one["warnings"].to_string().contains("no projection"),
        "{one}"
    );
    let thirty = json_product(&v, "Air thirty");
    assert!(thirty["model"].is_string(), "{thirty}");
    assert!(v["warnings"].is_array(), "{v}");
}

/// `provisio forecast d.csv` in `w` with `args`, without the report and the
/// workbook.
fn forecast_d(w: &Workdir, args: &[&str]) -> std::process::Output {
    let mut all = vec!["forecast", "d.csv"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--no-report", "--no-workbook"]);
    w.run(&all)
}

/// One product's entry in a `--json` forecast summary.
fn json_product<'a>(v: &'a serde_json::Value, product: &str) -> &'a serde_json::Value {
    v["products"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["product"] == product)
        .unwrap()
}
