use super::*;
use crate::clean::{MonthStatus, Reason};

fn ym(s: &str) -> YearMonth {
    YearMonth::parse(s).unwrap()
}

/// A past product: `history` from `history_start`, forecast `point` after
/// it, with intervals ± `half80` / ± `half95` around the point.
fn past(history_start: &str, history: Vec<f64>, point: Vec<f64>, half80: f64) -> PastProduct {
    let start = ym(history_start).plus(history.len() as i64);
    let b = |d: f64| point.iter().map(|p| Some(p + d)).collect::<Vec<_>>();
    PastProduct {
        bridged: 0,
        product: "P".into(),
        model: "m".into(),
        start,
        lower80: b(-half80),
        upper80: b(half80),
        lower95: b(-2.0 * half80),
        upper95: b(2.0 * half80),
        statistical: point.clone(),
        adjusted_scored: false,
        point,
        history_start: ym(history_start),
        history_reported: history.iter().map(|&v| Some(v)).collect(),
        history_status: vec![MonthStatus::Reported; history.len()],
        history_outlier: vec![false; history.len()],
        history,
        history_changes: BTreeMap::new(),
        promised: Promised::default(),
    }
}

fn series(start: &str, values: Vec<f64>) -> CleanSeries {
    CleanSeries::observed("P", ym(start), values)
}

fn settings() -> CheckedReviewSettings {
    ReviewSettings::default().check().unwrap()
}

#[test]
fn scores_worked_example() {
    // Forecast errors (10, 5, -3, 8) against actuals of 100: cumulative 20,
    // MAD 6.5, tracking signal 3.08 (Trigg 1964 definition; constructed
    // example). Bias 20/400 = +5%, WAPE 26/400 = 6.5%, MAPE 6.5%.
    let p = past(
        "2024-01",
        vec![90.0; 12],
        vec![110.0, 105.0, 97.0, 108.0, 120.0],
        6.0,
    );
    let s = series("2025-01", vec![100.0; 4]);
    let r = review_product(&p, 0, &s, &[true; 4], &[], &settings()).unwrap();
    assert_eq!(r.months.len(), 4, "only months with actuals");
    let sc = &r.scores;
    assert_eq!(sc.months, 4);
    assert!((sc.bias.unwrap() - 5.0).abs() < 1e-12);
    assert!((sc.wape.unwrap() - 6.5).abs() < 1e-12);
    assert!((sc.mape.unwrap() - 6.5).abs() < 1e-12);
    let ts = sc.tracking.unwrap();
    assert!((ts.value - 20.0 / 6.5).abs() < 1e-12);
    assert!(!sc.tracking_flagged());
    // Running signal: 10/10, 15/7.5, 12/6, 20/6.5.
    let running: Vec<f64> = r
        .months
        .iter()
        .map(|m| m.tracking_signal.unwrap())
        .collect();
    assert_eq!(running, vec![1.0, 2.0, 2.0, 20.0 / 6.5]);
    // 80% band ±6: errors 10 and 8 fall outside, 5 and -3 inside → 50%.
    assert_eq!(sc.coverage80, Some(50.0));
    // 95% band ±12: all inside.
    assert_eq!(sc.coverage95, Some(100.0));
    // Naive: last history value 90 every month: WAPE 40/400 = 10%; the
    // model's 6.5% adds 3.5 points.
    assert!((sc.naive_wape.unwrap() - 10.0).abs() < 1e-12);
    assert!((sc.fva_naive().unwrap() - 3.5).abs() < 1e-12);
    assert_eq!(r.origin, ym("2024-12"));
    assert_eq!(r.forecast_end, ym("2025-05"));
}

#[test]
fn baselines_are_made_at_the_origin() {
    // History 2023-01..2024-12 with value = month index 0..23.
    let h: Vec<f64> = (0..24).map(f64::from).collect();
    let p = past("2023-01", h, vec![50.0; 15], 1.0);
    // 2025-01 (1 ahead) → same month a year before the origin: 2024-01 = 12.
    assert_eq!(baselines(&p, ym("2025-01")), (Some(23.0), Some(12.0)));
    assert_eq!(baselines(&p, ym("2025-12")), (Some(23.0), Some(23.0)));
    // 2026-02 (14 ahead) → 2024-02 = 13: never a month after the origin.
    assert_eq!(baselines(&p, ym("2026-02")), (Some(23.0), Some(13.0)));
    // Under 12 months of history: no seasonal naive.
    let short = past("2024-06", vec![5.0; 7], vec![5.0; 3], 1.0);
    assert_eq!(baselines(&short, ym("2025-01")), (Some(5.0), None));
}

#[test]
fn mostly_imputed_months_are_left_out_and_counted() {
    let p = past("2024-01", vec![100.0; 12], vec![100.0, 100.0, 100.0], 5.0);
    let s = series(
        "2024-01",
        [vec![100.0; 12], vec![110.0, 500.0, 90.0]].concat(),
    );
    let mut scorable = vec![true; 15];
    scorable[13] = false;
    let r = review_product(&p, 0, &s, &scorable, &[], &settings()).unwrap();
    assert_eq!(r.scores.months, 2);
    assert_eq!(r.scores.left_out, 1);
    assert!((r.scores.wape.unwrap() - 10.0).abs() < 1e-12);
    assert!(r.months[1].tracking_signal.is_none());
    assert_eq!(r.scores.tracking.unwrap().value, 0.0);
}

#[test]
fn no_overlap_is_a_reason_not_a_panic() {
    let p = past("2024-01", vec![100.0; 12], vec![100.0; 6], 5.0);
    let s = series("2023-01", vec![100.0; 24]);
    let why = review_product(&p, 0, &s, &[true; 24], &[], &settings()).unwrap_err();
    assert!(why.contains("2025-01 to 2025-06"), "{why}");
    assert!(why.contains("2023-01 to 2024-12"), "{why}");
}

#[test]
fn audit_shares_and_rules() {
    // Month 1: 100 reported, scaled to 110 for reporting; month 2: nothing
    // reported, 100 imputed. Not as reported: 10 + 100 of 210.
    let changes: BTreeMap<String, f64> = [
        ("reporting-scaled".to_string(), 10.0),
        ("imputed".to_string(), 100.0),
        ("outlier-flagged".to_string(), 0.0),
    ]
    .into();
    let a = Audit::new(&[110.0, 100.0], &[Some(100.0), None], &changes, 0.2);
    assert!((a.share.unwrap() - 110.0 / 210.0).abs() < 1e-12);
    assert!(a.flagged);
    assert_eq!(a.by_rule.len(), 2, "rules with no change are left out");
    assert_eq!(a.responsible(), "imputed +47.6%, reporting-scaled +4.8%");
    let b = Audit::new(&[110.0, 100.0], &[Some(100.0), None], &changes, 0.6);
    assert!(!b.flagged);
    let empty = Audit::new(&[0.0], &[Some(0.0)], &BTreeMap::new(), 0.2);
    assert_eq!(empty.share, None);
    assert!(!empty.flagged);
}

#[test]
fn period_audit_uses_the_actuals_log() {
    let p = past("2024-01", vec![100.0; 12], vec![100.0; 3], 5.0);
    let mut s = series("2025-01", vec![125.0, 100.0, 100.0]);
    s.reported[0] = Some(100.0);
    let entry = Adjustment {
        product: "P".into(),
        site: None,
        month: ym("2025-01"),
        line: Some(2),
        before: Some(100.0),
        after: Some(125.0),
        why: Reason::StockoutScaled { days_out: 6.2 },
    };
    let r = review_product(&p, 0, &s, &[true; 3], &[&entry], &settings()).unwrap();
    assert!((r.period_audit.share.unwrap() - 25.0 / 325.0).abs() < 1e-12);
    assert_eq!(r.period_audit.by_rule[0].rule, "stockout-scaled");
    assert!(!r.period_audit.flagged);
}

#[test]
fn vintages_compared_on_common_months() {
    let s = series("2025-01", vec![100.0; 6]);
    // Vintage 0 forecast 2025-01..06 at 80; vintage 1 (origin 2025-02)
    // forecast 2025-03..08 at 95: closer on the four common months.
    let old = past("2024-01", vec![100.0; 12], vec![80.0; 6], 5.0);
    let new = past("2024-01", vec![100.0; 14], vec![95.0; 6], 5.0);
    let mut reviews = vec![
        review_product(&old, 0, &s, &[true; 6], &[], &settings()).unwrap(),
        review_product(&new, 1, &s, &[true; 6], &[], &settings()).unwrap(),
    ];
    let c = compare_vintages(&mut reviews);
    assert_eq!(c.len(), 1);
    let c = &c[0];
    assert_eq!(
        c.common_months,
        vec![ym("2025-03"), ym("2025-04"), ym("2025-05"), ym("2025-06")]
    );
    assert_eq!(c.closest, Some(1));
    assert!((c.wape[0].unwrap() - 20.0).abs() < 1e-12);
    assert!((c.wape[1].unwrap() - 5.0).abs() < 1e-12);
    assert!((c.bias[0].unwrap() + 20.0).abs() < 1e-12);
    // Each common month moved from 80 to 95: 15/80.
    assert!((c.revision_pct.unwrap() - 100.0 * 15.0 / 80.0).abs() < 1e-9);
    let m = reviews[1]
        .months
        .iter()
        .find(|m| m.month == ym("2025-03"))
        .unwrap();
    assert_eq!(m.revision, Some(15.0));
    assert_eq!(m.closest_vintage, Some(1));
    // A month only the old vintage forecast has no revision and no winner.
    assert_eq!(reviews[0].months[0].revision, None);
    assert_eq!(reviews[0].months[0].closest_vintage, None);
}

#[test]
fn settings_are_checked() {
    for bad in [0.0, -0.1, 1.5, f64::NAN] {
        let e = ReviewSettings {
            adjustment_limit: bad,
            score_imputed: None,
        }
        .check()
        .unwrap_err();
        assert!(e.to_string().contains("adjustment-limit"), "{e}");
    }
}

#[test]
fn findings_name_what_stands_out() {
    // Eight months all under-forecast by 20: TS = -k in month k, beyond
    // 2.46 √k from the seventh month; the ±1 band misses every actual.
    let mut p = past("2024-01", vec![100.0; 12], vec![80.0; 8], 1.0);
    p.promised.mape = Some(5.0);
    p.history_reported = vec![Some(70.0); 12];
    p.history_changes = [("reporting-scaled".to_string(), 360.0)].into();
    let s = series("2025-01", vec![100.0; 8]);
    let r = review_product(&p, 0, &s, &[true; 8], &[], &settings()).unwrap();
    let f = r.findings(0.2).join("\n");
    assert!(
        f.contains("tracking signal -8.0 is beyond ±6.9 (the 5% chance bound for 8 months) since 2025-07: the errors add up to an under-forecast (8 of 8 months under)"),
        "{f}"
    );
    assert!(!f.contains("one month carries"), "{f}");
    assert!(f.contains("the 80% range held 0%"), "{f}");
    assert!(f.contains("did worse than naive"), "{f}");
    assert!(f.contains("MAPE 20.0% is over twice the 5.0%"), "{f}");
    assert!(f.contains("history the forecast was made from: 30.0% of the volume is not as reported (limit 20%): reporting-scaled +30.0%"), "{f}");
    // A forecast on target has nothing to report.
    let good = past("2024-01", vec![90.0; 12], vec![100.0, 101.0, 99.0], 5.0);
    let s = series("2025-01", vec![100.0; 3]);
    let r = review_product(&good, 0, &s, &[true; 3], &[], &settings()).unwrap();
    assert!(r.findings(0.2).is_empty(), "{:?}", r.findings(0.2));
}

#[test]
fn tracking_finding_names_a_single_large_error() {
    // Under by 10 for 11 months (running signal -1, -2, ... beyond its
    // limit from the seventh month), then over by 1000: the final signal is
    // positive and one month carries it. The breach month is where the
    // final side began.
    let mut point = vec![90.0; 11];
    point.push(1100.0);
    let p = past("2024-01", vec![100.0; 12], point, 1.0);
    let s = series("2025-01", vec![100.0; 12]);
    let r = review_product(&p, 0, &s, &[true; 12], &[], &settings()).unwrap();
    let ts = r.scores.tracking.unwrap();
    // Cumulative 1000 - 110 = 890; MAD (110 + 1000) / 12 = 92.5.
    assert!((ts.value - 890.0 / 92.5).abs() < 1e-9);
    assert_eq!(r.scores.tracking_breach, Some(ym("2025-12")));
    assert_eq!(r.months[4].tracking_signal, Some(-5.0));
    let f = r.findings(0.2).join("\n");
    assert!(
        f.contains("since 2025-12: the errors add up to an over-forecast (1 of 12 months over); one month carries most of it (2025-12: error +1000)"),
        "{f}"
    );
}
