use super::*;
use crate::data::{read_csv_bytes, ReadOptions};
use proptest::prelude::*;

fn run(text: &str) -> (Dataset, Cleaned) {
    let ds = read_csv_bytes("t.csv", text.as_bytes(), &ReadOptions::default()).unwrap();
    let c = clean(&ds, &CleanSettings::default().check().unwrap());
    (ds, c)
}

fn reconciles(ds: &Dataset, c: &Cleaned) {
    // Cleaned totals = reported totals + logged changes (common practice for
    // an audit trail; the project's own invariant).
    let reported: f64 = ds.rows.iter().filter_map(|r| r.consumed).sum();
    let cleaned: f64 = c.series.iter().flat_map(|s| s.values.iter()).sum();
    let unusable_reported: f64 = ds
        .rows
        .iter()
        .filter(|r| c.unusable.iter().any(|(p, _)| p.as_str() == &*r.product))
        .filter_map(|r| r.consumed)
        .sum();
    let delta: f64 = c.log.iter().map(Adjustment::delta).sum();
    let lhs = cleaned;
    let rhs = reported + delta;
    assert!(
        (lhs - rhs).abs() <= 1e-6 * (1.0 + lhs.abs()) || unusable_reported > 0.0,
        "cleaned {lhs} != reported {reported} + adjustments {delta}"
    );
}

#[test]
fn stockout_scaling_and_missing() {
    let (_, c) = run(
        "product,month,consumed,stockout_days\nA,2024-04,480,6\nA,2024-05,100,20\nA,2024-06,300,0\n",
    );
    let s = &c.series[0];
    assert_eq!(s.values[0], 600.0); // 480 × 30 / 24
    assert_eq!(s.status[0], MonthStatus::Adjusted);
    assert_eq!(s.status[1], MonthStatus::Imputed); // 20 > 15 days: missing, then filled
    assert!((s.values[1] - 450.0).abs() < 1e-9); // linear between 600 and 300
    let rules: Vec<Rule> = c.log.iter().map(|a| a.rule()).collect();
    assert_eq!(
        rules,
        vec![Rule::StockoutScaled, Rule::StockoutMissing, Rule::Imputed]
    );
    assert_eq!(c.rows.adjusted, 2);
    assert_eq!(c.rows.used, 1);
}

#[test]
fn reporting_scaling_floor_and_weight() {
    let (_, c) = run("product,month,consumed,reporting_rate\nA,2024-01,8000,80%\nA,2024-02,1000,40%\nA,2024-03,9000,100%\n");
    let s = &c.series[0];
    assert!((s.values[0] - 10_000.0).abs() < 1e-9);
    assert_eq!(s.status[1], MonthStatus::Imputed);
    assert_eq!(s.values[2], 9000.0);
    let ds = read_csv_bytes(
        "t.csv",
        b"product,month,consumed,reporting_rate\nA,2024-01,8000,0.8\n",
        &ReadOptions::default(),
    )
    .unwrap();
    let settings = CleanSettings {
        nonreporting_weight: 0.25,
        ..CleanSettings::default()
    }
    .check()
    .unwrap();
    // Maina et al. 2017 weighted form; check value: 8,500.
    assert!((clean(&ds, &settings).series[0].values[0] - 8_500.0).abs() < 1e-9);
}

#[test]
fn site_filling_keeps_site_share() {
    // Site B (about a third of the volume) misses March; it is filled from
    // B's own history, not by scaling the total.
    let text = "product,site,month,consumed\n\
        A,a,2024-01,200\nA,b,2024-01,100\n\
        A,a,2024-02,200\nA,b,2024-02,100\n\
        A,a,2024-03,200\nA,b,2024-03,\n\
        A,a,2024-04,200\nA,b,2024-04,100\n";
    let (ds, c) = run(text);
    let s = &c.series[0];
    assert_eq!(s.values, vec![300.0, 300.0, 300.0, 300.0]);
    assert_eq!(s.reported[2], Some(200.0));
    assert_eq!(s.status[2], MonthStatus::PartlyFilled);
    assert!((s.imputed_share[2] - 1.0 / 3.0).abs() < 1e-9);
    let fill: Vec<_> = c
        .log
        .iter()
        .filter(|a| a.rule() == Rule::SiteFilled)
        .collect();
    assert_eq!(fill.len(), 1);
    assert_eq!(fill[0].site.as_deref(), Some("b"));
    assert_eq!(fill[0].line, Some(7));
    reconciles(&ds, &c);
}

#[test]
fn site_stopped_reporting_is_warned_and_not_filled_forever() {
    let mut text = String::from("product,site,month,consumed\n");
    for m in 1..=12 {
        text.push_str(&format!("A,a,2024-{m:02},100\n"));
        if m <= 4 {
            text.push_str(&format!("A,b,2024-{m:02},50\n"));
        }
    }
    let (_, c) = run(&text);
    let s = &c.series[0];
    // b filled for 3 months after April (May-July), then left out.
    assert_eq!(s.values[4], 150.0);
    assert_eq!(s.values[6], 150.0);
    assert_eq!(s.values[7], 100.0);
    assert!(c
        .warnings
        .iter()
        .any(|w| w.contains("site 'b'") && w.contains("no longer supplied")));
}

#[test]
fn product_with_nothing_reported_is_left_out_with_reason() {
    let (_, c) = run("product,month,consumed\nA,2024-01,\nA,2024-02,\nB,2024-01,5\n");
    assert_eq!(c.series.len(), 1);
    assert_eq!(c.unusable.len(), 1);
    assert_eq!(c.unusable[0].0, "A");
    assert!(c.rows.balances());
}

/// The default settings with outliers flagged, not replaced.
fn flag_only() -> CheckedCleanSettings {
    CleanSettings {
        replace_outliers: false,
        ..CleanSettings::default()
    }
    .check()
    .unwrap()
}

#[test]
fn outliers_replaced_by_default_and_flagged_only_on_request() {
    let mut text = String::from("product,month,consumed\n");
    for t in 0..36 {
        let v = if t == 20 {
            5000
        } else {
            500 + [10, -12, 5, -3, 8][t % 5]
        };
        text.push_str(&format!(
            "A,{},{v}\n",
            YearMonth::known(2022, 1).plus(t as i64)
        ));
    }
    let (ds, c2) = run(&text);
    assert!(c2.series[0].outlier[20]);
    assert!(
        c2.series[0].values[20] < 600.0,
        "{:?} {:?}",
        c2.series[0].values,
        c2.log
    );
    // The reported value stays beside the replacement, and the log has both.
    assert_eq!(c2.series[0].reported[20], Some(5000.0));
    let r = c2
        .log
        .iter()
        .find(|a| a.rule() == Rule::OutlierReplaced)
        .unwrap();
    assert_eq!(r.before, Some(5000.0));
    assert_eq!(r.after, Some(c2.series[0].values[20]));
    assert_eq!(c2.rows.adjusted, 1, "{:?}", c2.log);
    reconciles(&ds, &c2);
    let c = clean(&ds, &flag_only());
    assert!(c.series[0].outlier[20]);
    assert_eq!(c.series[0].values[20], 5000.0);
    assert_eq!(c.rows.adjusted, 0, "a flag is not an adjustment");
}

#[test]
fn settings_errors_name_the_value() {
    let e = CleanSettings {
        reporting_floor: 0.0,
        ..CleanSettings::default()
    }
    .check()
    .unwrap_err()
    .to_string();
    assert!(e.contains("reporting-floor") && e.contains("got 0"), "{e}");
    let e = CleanSettings {
        max_stockout_days: 40.0,
        ..CleanSettings::default()
    }
    .check()
    .unwrap_err()
    .to_string();
    assert!(e.contains("got 40"), "{e}");
}

/// Arbitrary small input in the contract, with sites, stockouts,
/// reporting rates, empty quantities and gaps.
fn arb_csv() -> impl Strategy<Value = String> {
    let row = (
        0..3usize,
        0..2usize,
        0..30i64,
        prop::option::weighted(0.9, 0.0..5000.0f64),
        prop::option::of(0..31u32),
        prop::option::of(30..=100u32),
    );
    prop::collection::vec(row, 1..80).prop_map(|rows| {
        let mut s = String::from("product,site,month,consumed,stockout_days,reporting_rate\n");
        for (p, site, t, c, sd, rr) in rows {
            let m = YearMonth::known(2021, 1).plus(t);
            let sd = sd
                .map(|d| d.min(m.days()))
                .map(|d| d.to_string())
                .unwrap_or_default();
            s.push_str(&format!(
                "P{p},S{site},{m},{},{sd},{}\n",
                c.map(|v| format!("{v:.1}")).unwrap_or_default(),
                rr.map(|r| format!("{r}%")).unwrap_or_default()
            ));
        }
        s
    })
}

proptest! {
    #[test]
    fn every_row_is_accounted_for(text in arb_csv()) {
        let ds = read_csv_bytes("t.csv", text.as_bytes(), &ReadOptions::default());
        if let Ok(ds) = ds {
            let c = clean(&ds, &CleanSettings::default().check().unwrap());
            prop_assert!(c.rows.balances(), "{:?}", c.rows);
            prop_assert_eq!(c.rows.read, text.lines().count() - 1);
            for s in &c.series {
                prop_assert!(s.values.iter().all(|v| v.is_finite() && *v >= 0.0));
            }
            reconciles(&ds, &c);
        }
    }

    #[test]
    fn trusted_observed_months_are_never_changed(
        values in prop::collection::vec(prop::option::weighted(0.8, 0.0..1e6f64), 1..60),
        sd in prop::collection::vec(0..31u32, 60),
    ) {
        // Months with full stock and full reporting keep their value,
        // whatever happens around them, when outliers are only flagged
        // (replacing them, the default, is a logged adjustment).
        let mut text = String::from("product,month,consumed,stockout_days,reporting_rate\n");
        for (t, v) in values.iter().enumerate() {
            let m = YearMonth::known(2020, 1).plus(t as i64);
            let d = if t % 3 == 0 { sd[t].min(m.days()) } else { 0 };
            text.push_str(&format!("A,{m},{},{d},100%\n", v.map(|x| x.to_string()).unwrap_or_default()));
        }
        let ds = read_csv_bytes("t.csv", text.as_bytes(), &ReadOptions::default()).unwrap();
        let c = clean(&ds, &flag_only());
        for row in &ds.rows {
            let full = row.stockout_days.unwrap_or(0.0) == 0.0;
            if let (Some(v), true) = (row.consumed, full) {
                let s = &c.series[0];
                let t = s.start.months_until(row.month) as usize;
                prop_assert_eq!(s.values[t], v);
            }
        }
    }

    #[test]
    fn cleaning_is_idempotent_on_clean_data(text in arb_csv()) {
        let Ok(ds) = read_csv_bytes("t.csv", text.as_bytes(), &ReadOptions::default()) else {
            return Ok(());
        };
        // With outliers only flagged: replaced values would be judged anew.
        let settings = flag_only();
        let once = clean(&ds, &settings);
        if once.series.is_empty() {
            return Ok(());
        }
        let mut again = String::from("product,month,consumed\n");
        for s in &once.series {
            for t in 0..s.len() {
                again.push_str(&format!("{},{},{}\n", s.product, s.month(t), s.values[t]));
            }
        }
        let ds2 = read_csv_bytes("t.csv", again.as_bytes(), &ReadOptions::default()).unwrap();
        let twice = clean(&ds2, &settings);
        prop_assert_eq!(once.series.len(), twice.series.len());
        for (a, b) in once.series.iter().zip(&twice.series) {
            prop_assert_eq!(&a.values, &b.values);
        }
        prop_assert!(twice.log.iter().all(|e| e.rule() == Rule::OutlierFlagged));
    }
}

#[test]
fn a_site_whose_every_month_is_flagged_is_kept() {
    // Found by the property tests (tests/hostile_props.rs): nine scattered
    // months, all flagged as outliers, used to drop the whole site and its
    // reported consumption. Flags are only flags: the values stay.
    let text = "product,site,month,consumed\n\
        P,S,2021-02,71420\nP,S,2021-03,192746\nP,S,2021-07,112072\n\
        P,S,2021-08,94624\nP,S,2022-01,224873\nP,S,2022-04,346626\n\
        P,S,2023-02,130414\nP,S,2023-03,248483\nP,S,2023-06,157659\n";
    let (ds, c) = run(text);
    assert_eq!(c.series.len(), 1, "{:?}", c.warnings);
    let s = &c.series[0];
    assert_eq!(s.values[0], 71420.0);
    assert_eq!(s.values[28], 157659.0);
    assert!(c.verify(&ds).is_ok(), "{:?}", c.verify(&ds));
}

#[test]
fn a_product_stockout_threshold_replaces_the_run_threshold() {
    // 10 stockout days of 31 in January 2024: scaled by the run's limit of
    // 15 days; treated as missing under a product limit of 8 days.
    let text = "product,month,consumed,stockout_days\nA,2024-01,210,10\nA,2024-02,200,0\nB,2024-01,210,10\nB,2024-02,200,0\n";
    let ds = read_csv_bytes("t.csv", text.as_bytes(), &ReadOptions::default()).unwrap();
    let mut s = CleanSettings::default();
    s.stockout_days_by_product.insert("A".into(), 8.0);
    let c = clean(&ds, &s.check().unwrap());
    let a = &c.series[0];
    let b = &c.series[1];
    assert_eq!((a.product.as_str(), b.product.as_str()), ("A", "B"));
    assert_eq!(a.status[0], MonthStatus::Imputed);
    assert!(c.log.iter().any(|e| &*e.product == "A"
        && e.rule() == Rule::StockoutMissing
        && e.reason().contains("limit 8")));
    // B keeps the run's limit: 210 × 31 ÷ 21 (the monthly stockout formula).
    assert!((b.values[0] - 210.0 * 31.0 / 21.0).abs() < 1e-9);
    reconciles(&ds, &c);
    let mut bad = CleanSettings::default();
    bad.stockout_days_by_product.insert("A".into(), 40.0);
    let e = bad.check().unwrap_err().to_string();
    assert!(e.contains("'A'") && e.contains("got 40"), "{e}");
}

#[test]
fn settings_of_older_manifests_still_read() {
    // Manifests written before per-product thresholds lack the key.
    let old = r#"{"max_stockout_days":15.0,"reporting_floor":0.5,"nonreporting_weight":1.0,"site_trailing_fill":3,"outlier_threshold":3.5,"replace_outliers":false}"#;
    let s: CleanSettings = serde_json::from_str(old).unwrap();
    // The threshold then was a modified z-score and replacement was off by
    // default; both are read as written.
    assert_eq!(
        s,
        CleanSettings {
            outlier_threshold: 3.5,
            replace_outliers: false,
            ..CleanSettings::default()
        }
    );
    // And settings without per-product thresholds are written as before.
    let v = serde_json::to_value(CleanSettings::default()).unwrap();
    assert!(v.get("stockout_days_by_product").is_none());
}
