//! End-to-end: every product's projection starts the month after the data
//! set's last month. Products that stopped reporting earlier are forecast
//! through the months in between (marked `bridged`), their horizon, totals
//! and AMC cover the same calendar months as everyone else's, a long
//! silence is warned about, and `report`, `plan` and `review` read the
//! new column. The data are invented for the test (smooth seasonal series).

mod common;

use common::{text, Workdir};

/// Monthly rows of `product` from 2023-01 for `months` months, leaving out
/// the months in `skip` (offsets from 2023-01).
fn rows(product: &str, months: usize, skip: &[usize]) -> String {
    let mut s = String::new();
    for t in (0..months).filter(|t| !skip.contains(t)) {
        let (y, m) = (2023 + t / 12, t % 12 + 1);
        let v = 200.0 + 40.0 * ((t % 12) as f64 * std::f64::consts::PI / 6.0).sin() + t as f64;
        s.push_str(&format!("{product},{y}-{m:02},{v:.0}\n"));
    }
    s
}

fn data(w: &Workdir) {
    let mut s = String::from("product,month,consumed\n");
    s.push_str(&rows("Alpha", 36, &[])); // up to 2025-12
    s.push_str(&rows("Bravo", 34, &[])); // up to 2025-10
    s.push_str(&rows("Charlie", 27, &[])); // up to 2025-03: 9 months silent
    w.write("d.csv", s);
}

fn num(s: &str) -> f64 {
    s.parse().unwrap_or_else(|_| panic!("not a number: {s}"))
}

#[test]
fn every_product_starts_at_the_common_month() {
    let w = Workdir::new();
    data(&w);
    let o = w.run(&["forecast", "d.csv", "--out", "o", "--horizon", "12"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    // The long silence is warned about, the short one is not.
    assert!(
        t.contains("product 'Charlie': possibly discontinued: last month 2025-03 is 9 months"),
        "{t}"
    );
    assert!(!t.contains("'Bravo': possibly discontinued"), "{t}");
    assert!(!t.contains("'Alpha': possibly discontinued"), "{t}");

    let fc = w.read_csv_maps("o/forecast.csv");
    for (product, bridged) in [("Alpha", 0), ("Bravo", 2), ("Charlie", 9)] {
        let mine: Vec<_> = fc.iter().filter(|r| r["product"] == product).collect();
        assert_eq!(mine.len(), bridged + 12, "{product}");
        let b: Vec<_> = mine.iter().filter(|r| r["bridged"] == "yes").collect();
        assert_eq!(b.len(), bridged, "{product}");
        // The bridged months come first, then exactly the common horizon.
        let first = mine.iter().position(|r| r["bridged"] == "no").unwrap();
        assert_eq!(first, bridged, "{product}");
        assert_eq!(mine[first]["month"], "2026-01", "{product}");
        assert_eq!(mine.last().unwrap()["month"], "2026-12", "{product}");
        // Totals and AMC-next cover the common months only.
        let total: f64 = mine[first..].iter().map(|r| num(&r["forecast"])).sum();
        let sel = w.read_csv_maps("o/selection.csv");
        let s = sel.iter().find(|r| r["product"] == product).unwrap();
        let written = num(&s["total_months_1_12"]);
        assert!(
            (written - total).abs() <= 1e-6 * total.max(1.0) + 0.01,
            "{product}: {written} vs {total}"
        );
        assert!((num(&s["amc_next_12"]) - total / 12.0).abs() <= 0.01 + 1e-6 * total);
    }
    let wide = w.read_csv_maps("o/forecast_wide.csv");
    let bravo = wide.iter().find(|r| r["product"] == "Bravo").unwrap();
    assert_eq!(bravo["bridged"], "2");
    assert_ne!(bravo["2025-11"], "");
    let alpha = wide.iter().find(|r| r["product"] == "Alpha").unwrap();
    assert_eq!(alpha["bridged"], "0");
    assert_eq!(alpha["2025-11"], "");

    // The report says one projection period and counts the bridged products.
    let page = std::fs::read_to_string(w.path("o/report.html")).unwrap();
    assert!(
        page.contains("Jan 2026 to Dec 2026 (12 months)"),
        "projection period"
    );
    assert!(page.contains("2 product(s) not reported up to the data"));

    // The workbook says which months are bridged.
    use calamine::{Data, Reader};
    let mut book: calamine::Xlsx<_> = calamine::open_workbook(w.path("o/forecast.xlsx")).unwrap();
    let sheet = book.worksheet_range("Forecast").unwrap();
    assert!(
        matches!(sheet.get((1, 0)), Some(Data::String(s)) if s.contains("bridged")),
        "{:?}",
        sheet.get((1, 0))
    );

    // A longer limit silences the warning; it is also a configuration key.
    let o = w.run(&[
        "forecast",
        "d.csv",
        "--out",
        "o2",
        "--horizon",
        "12",
        "--silence-limit",
        "9",
        "--no-report",
        "--no-workbook",
    ]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(!t.contains("possibly discontinued"), "{t}");
    // The JSON summary gives each product's start and bridged months.
    let o = w.run(&[
        "forecast",
        "d.csv",
        "--out",
        "o4",
        "--horizon",
        "12",
        "--no-report",
        "--no-workbook",
        "--json",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    for p in j["products"].as_array().unwrap() {
        assert_eq!(p["projection_start"], "2026-01", "{p}");
        let want = match p["product"].as_str().unwrap() {
            "Alpha" => 0,
            "Bravo" => 2,
            _ => 9,
        };
        assert_eq!(p["bridged_months"], want, "{p}");
    }
    w.write("r.toml", "[projection]\nsilence_limit = 121\n");
    let o = w.run(&["forecast", "d.csv", "--out", "o3", "--config", "r.toml"]);
    assert!(!o.status.success());
    assert!(
        text(&o).contains("silence_limit: must be 0-120 months, got 121"),
        "{}",
        text(&o)
    );
}

#[test]
fn plan_starts_at_the_common_month() {
    let w = Workdir::new();
    data(&w);
    let o = w.run(&[
        "forecast",
        "d.csv",
        "--out",
        "o",
        "--horizon",
        "12",
        "--no-report",
        "--no-workbook",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    w.write(
        "stock.csv",
        "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost\n\
         Alpha,500,2025-12,2,3,6,2,1,1\n\
         Bravo,500,2025-12,2,3,6,2,1,1\n",
    );
    let o = w.run(&["plan", "o", "--stock", "stock.csv"]);
    assert!(o.status.success(), "{}", text(&o));
    let plan = w.read_csv_maps("o/plan.csv");
    for p in ["Alpha", "Bravo"] {
        let months: Vec<&str> = plan
            .iter()
            .filter(|r| r["product"] == p)
            .map(|r| r["month"].as_str())
            .collect();
        assert_eq!(months.len(), 12, "{p}: {months:?}");
        assert_eq!(months[0], "2026-01", "{p}");
    }
}

#[test]
fn review_scores_bridged_months_only_when_reported() {
    let w = Workdir::new();
    // Bravo misses 2025-05 and 2025-06, then reports again.
    let mut s = String::from("product,month,consumed\n");
    s.push_str(&rows("Alpha", 36, &[]));
    s.push_str(&rows("Bravo", 36, &[28, 29]));
    w.write("d.csv", s);
    let o = w.run(&[
        "forecast",
        "d.csv",
        "--out",
        "past",
        "--until",
        "2025-06",
        "--horizon",
        "6",
        "--no-report",
        "--no-workbook",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let fc = w.read_csv_maps("past/forecast.csv");
    let bridged: Vec<&str> = fc
        .iter()
        .filter(|r| r["product"] == "Bravo" && r["bridged"] == "yes")
        .map(|r| r["month"].as_str())
        .collect();
    assert_eq!(bridged, ["2025-05", "2025-06"]);
    // Even when imputed months are scored, the unreported bridged months
    // are not: the imputed actual there is the cleaning's guess.
    let o = w.run(&[
        "review",
        "past",
        "--actuals",
        "d.csv",
        "--out",
        "rev",
        "--score-imputed",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let months = w.read_csv_maps("rev/review_months.csv");
    let scored = |p: &str, m: &str| {
        months
            .iter()
            .find(|r| r["product"] == p && r["month"] == m)
            .map(|r| r["scored"].clone())
            .unwrap_or_else(|| panic!("{p} {m} not in review_months.csv"))
    };
    assert_eq!(scored("Bravo", "2025-05"), "no");
    assert_eq!(scored("Bravo", "2025-06"), "no");
    assert_eq!(scored("Bravo", "2025-07"), "yes");
    assert_eq!(scored("Alpha", "2025-07"), "yes");
}
