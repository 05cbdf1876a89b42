use super::cyp::usaid_2021;
use super::population::{estimates, PopulationRow};
use super::*;

fn morbidity(group: &str, share: f64, per_course: f64) -> PopulationRow {
    PopulationRow {
        line: 2,
        product: "AL".into(),
        group: group.into(),
        method: Method::Morbidity,
        population: 1_000_000.0,
        group_share: share,
        rate: 0.30,
        care_seeking: 0.60,
        treated: 0.90,
        quantity_per_course: per_course,
        method_share: 0.0,
        public_share: 1.0,
        units_per_user_year: 0.0,
        units_basis: String::new(),
        loss_allowance: 0.0,
    }
}

#[test]
fn artemether_lumefantrine_course_worked_check() {
    // Course from WHO Guidelines for the Treatment of Malaria, 2nd ed.
    // (2010): 6 doses of 1/2/3/4 tablets for 5-14, 15-24, 25-34 and over
    // 34 kg, i.e. 6, 12, 18, 24 tablets per course. The population figures
    // and the 20/15/10/55% weight-band split are constructed to exercise
    // the formula, not a published example.
    let rows = vec![
        morbidity("5-14 kg", 0.20, 6.0),
        morbidity("15-24 kg", 0.15, 12.0),
        morbidity("25-34 kg", 0.10, 18.0),
        morbidity("over 34 kg", 0.55, 24.0),
    ];
    // 1,000,000 × 0.30 × 0.60 × 0.90 = 162,000 courses.
    let courses: f64 = rows.iter().map(|r| r.people()).sum();
    assert!((courses - 162_000.0).abs() < 1e-6, "{courses}");
    let e = estimates(&rows);
    assert_eq!(e.len(), 1);
    assert!(
        (e[0].quantity - 2_916_000.0).abs() < 1e-6,
        "{}",
        e[0].quantity
    );
    // A loss allowance scales the total.
    let mut lossy = rows.clone();
    for r in &mut lossy {
        r.loss_allowance = 0.10;
    }
    assert!((estimates(&lossy)[0].quantity - 3_207_600.0).abs() < 1e-6);
}

#[test]
fn cyp_factors_as_published() {
    // USAID CYP conversion factors, updated August 2021: long-acting per
    // insertion; short-acting units per CYP as in the 2011 table.
    let t = usaid_2021();
    let per = |m: &str| t.get(m).unwrap().cyp_per_unit;
    assert_eq!(per("iud-copper"), 4.6);
    assert_eq!(per("implant-3-year"), 2.5);
    assert_eq!(per("implant-4-year"), 3.2);
    assert_eq!(per("implant-5-year"), 3.8);
    let units = |m: &str| t.get(m).unwrap().units_per_user_year();
    assert!((units("oral-pill") - 15.0).abs() < 1e-12);
    assert!((units("condom") - 120.0).abs() < 1e-12);
    assert!((units("injectable-3-month") - 4.0).abs() < 1e-12);
    assert!((units("emergency-contraception") - 20.0).abs() < 1e-12);
    // Insertions per user-year of a 3-year implant: 1 / 2.5.
    assert!((units("implant-3-year") - 0.4).abs() < 1e-12);
}

#[test]
fn cyp_worked_check() {
    // Worked check from the same table's factors: 6,000 pill cycles,
    // 2,000 injectable doses and 75,000 condoms are 400 + 500 + 625 =
    // 1,525 CYP.
    let t = usaid_2021();
    let pills = t.cyp("oral-pill", 6_000.0).unwrap();
    let inj = t.cyp("injectable-3-month", 2_000.0).unwrap();
    let condoms = t.cyp("condom", 75_000.0).unwrap();
    assert!((pills - 400.0).abs() < 1e-9);
    assert!((inj - 500.0).abs() < 1e-9);
    assert!((condoms - 625.0).abs() < 1e-9);
    assert!((pills + inj + condoms - 1_525.0).abs() < 1e-9);
    assert!(t.cyp("no-such-method", 1.0).is_none());
}

#[test]
fn demographic_users_and_quantity() {
    // 100,000 women × 0.30 prevalence × 0.25 method share × 0.8 public =
    // 6,000 users; × 4 injections a year (USAID table) = 24,000 doses.
    let t = usaid_2021();
    let r = PopulationRow {
        line: 2,
        product: "Injectable".into(),
        group: String::new(),
        method: Method::Demographic,
        population: 100_000.0,
        group_share: 1.0,
        rate: 0.30,
        care_seeking: 0.0,
        treated: 0.0,
        quantity_per_course: 0.0,
        method_share: 0.25,
        public_share: 0.8,
        units_per_user_year: t.get("injectable-3-month").unwrap().units_per_user_year(),
        units_basis: "t".into(),
        loss_allowance: 0.0,
    };
    assert!((r.people() - 6_000.0).abs() < 1e-9);
    assert!((r.quantity() - 24_000.0).abs() < 1e-6);
}

#[test]
fn overrides_replace_and_add() {
    let t = usaid_2021().with_overrides(vec![
        cyp::CypFactor {
            method: "condom".into(),
            cyp_per_unit: 1.0 / 100.0,
            unit: "piece".into(),
            source: "local".into(),
        },
        cyp::CypFactor {
            method: "ring".into(),
            cyp_per_unit: 0.1,
            unit: "ring".into(),
            source: "local".into(),
        },
    ]);
    assert!((t.get("condom").unwrap().units_per_user_year() - 100.0).abs() < 1e-9);
    assert_eq!(t.get("ring").unwrap().source, "local");
    assert_eq!(t.factors.len(), usaid_2021().factors.len() + 1);
}

fn flat(total: f64) -> AnnualConsumption {
    AnnualConsumption {
        total,
        narrow: (total * 0.9, total * 1.1),
        wide: (total * 0.7, total * 1.3),
    }
}

#[test]
fn flags_at_the_threshold_boundaries() {
    let c = flat(100.0);
    let f = |q: f64| compare(Method::Morbidity, q, Some(&c), 0.25).flag;
    // Exactly ±25% agrees; beyond it is flagged (common practice threshold).
    assert_eq!(f(125.0), Flag::Agrees);
    assert_eq!(f(75.0), Flag::Agrees);
    assert_eq!(f(125.001), Flag::Above);
    assert_eq!(f(74.999), Flag::Below);
    assert_eq!(f(100.0), Flag::Agrees);
    let up = compare(Method::Morbidity, 210.0, Some(&c), 0.25);
    assert_eq!(up.ratio, Some(2.1));
    assert!(
        up.explanation.starts_with(
            "morbidity estimate is 2.1× consumption: possible unmet need or under-reporting"
        ),
        "{}",
        up.explanation
    );
    assert!(up.explanation.contains("upper bound"));
    assert!(up.explanation.contains("outside even the wide 80% range"));
    let down = compare(Method::Demographic, 60.0, Some(&c), 0.25);
    assert_eq!(down.flag, Flag::Below);
    assert!(
        down.explanation.contains("0.60× consumption"),
        "{}",
        down.explanation
    );
    assert!(down.explanation.contains("wastage or leakage"));
    let sv = compare(Method::Services, 50.0, Some(&c), 0.25);
    assert!(sv.explanation.contains("services under-recorded"));
    let nc = compare(Method::Services, 50.0, None, 0.25);
    assert_eq!((nc.flag, nc.ratio), (Flag::NoComparison, None));
    let zero = compare(Method::Services, 50.0, Some(&flat(0.0)), 0.25);
    assert_eq!(zero.flag, Flag::NoComparison);
}

#[test]
fn an_adjusted_forecast_is_named_in_the_explanation() {
    let c = flat(100.0);
    let up = compare_with(
        Method::Morbidity,
        210.0,
        Some(&c),
        0.25,
        ForecastUsed::Adjusted,
    );
    assert!(
        up.explanation.starts_with(
            "morbidity estimate is 2.1× the adjusted consumption forecast (known changes applied): possible unmet need"
        ),
        "{}",
        up.explanation
    );
    assert!(up
        .explanation
        .ends_with("outside even the wide 80% range of the adjusted consumption forecast"));
    let same = compare_with(
        Method::Services,
        110.0,
        Some(&c),
        0.25,
        ForecastUsed::Adjusted,
    );
    assert!(same
        .explanation
        .contains("1.1× the adjusted consumption forecast (known changes applied), within ±25%"));
    // The flag does not depend on which forecast it is.
    assert_eq!(
        up.flag,
        compare(Method::Morbidity, 210.0, Some(&c), 0.25).flag
    );
}

proptest::proptest! {
    #[test]
    fn flag_follows_the_ratio(total in 1.0f64..1e7, ratio in 0.0f64..5.0, t in 0.01f64..2.0) {
        let c = flat(total);
        let r = compare(Method::Services, total * ratio, Some(&c), t);
        let expected = if (ratio - 1.0) > t + 1e-6 {
            Some(Flag::Above)
        } else if (ratio - 1.0) < -t - 1e-6 {
            Some(Flag::Below)
        } else if (ratio - 1.0).abs() < t - 1e-6 {
            Some(Flag::Agrees)
        } else {
            None // within rounding of the boundary
        };
        if let Some(e) = expected {
            proptest::prop_assert_eq!(r.flag, e);
        }
        proptest::prop_assert!((r.ratio.unwrap() - ratio).abs() < 1e-9 * ratio.max(1.0));
    }

    #[test]
    fn annual_ranges_nest(points in proptest::collection::vec((0.0f64..1e5, 0.0f64..1e4, 0.0f64..1e4), 12)) {
        let months: Vec<ForecastMonth> = points
            .iter()
            .enumerate()
            .map(|(i, &(p, lo, hi))| ForecastMonth {
                month: YearMonth::new(2025, 1).unwrap().plus(i as i64),
                point: p,
                lower80: (p - lo).max(0.0),
                upper80: p + hi,
            })
            .collect();
        let a = AnnualConsumption::from_months(&months);
        // The independent-months range lies inside the sum of the bounds.
        proptest::prop_assert!(a.wide.0 <= a.narrow.0 + 1e-6);
        proptest::prop_assert!(a.narrow.0 <= a.total + 1e-6);
        proptest::prop_assert!(a.total <= a.narrow.1 + 1e-6);
        proptest::prop_assert!(a.narrow.1 <= a.wide.1 + 1e-6);
    }
}

#[test]
fn annual_range_of_equal_months() {
    // 12 months of 100 ± 10: independent → ±10·√12; together → ±120.
    let months: Vec<ForecastMonth> = (0..12)
        .map(|i| ForecastMonth {
            month: YearMonth::new(2025, 1).unwrap().plus(i),
            point: 100.0,
            lower80: 90.0,
            upper80: 110.0,
        })
        .collect();
    let a = AnnualConsumption::from_months(&months);
    assert_eq!(a.total, 1200.0);
    assert!((a.narrow.1 - (1200.0 + 10.0 * 12f64.sqrt())).abs() < 1e-9);
    assert_eq!(a.wide, (1080.0, 1320.0));
}

#[test]
fn build_lists_unforecast_products_and_short_forecasts() {
    let start = YearMonth::new(2025, 1).unwrap();
    let mut fc = std::collections::BTreeMap::new();
    fc.insert(
        "AL".to_string(),
        (0..12)
            .map(|i| ForecastMonth {
                month: start.plus(i),
                point: 200_000.0,
                lower80: 180_000.0,
                upper80: 220_000.0,
            })
            .collect::<Vec<_>>(),
    );
    fc.insert(
        "Short".to_string(),
        (0..6)
            .map(|i| ForecastMonth {
                month: start.plus(i),
                point: 1.0,
                lower80: 1.0,
                upper80: 1.0,
            })
            .collect::<Vec<_>>(),
    );
    let mut rows = vec![
        morbidity("5-14 kg", 0.20, 6.0),
        morbidity("15-24 kg", 0.15, 12.0),
        morbidity("25-34 kg", 0.10, 18.0),
        morbidity("over 34 kg", 0.55, 24.0),
    ];
    let mut other = morbidity("", 1.0, 1.0);
    other.product = "Not forecast".into();
    rows.push(other);
    let mut short = morbidity("", 1.0, 1.0);
    short.product = "Short".into();
    rows.push(short);
    let cc = build(&fc, Default::default(), start, &[], &rows, 0.25);
    // AL: consumption 2.4M, morbidity 2,916,000 → 1.215×, agrees.
    let al: Vec<&CrossRow> = cc.rows.iter().filter(|r| r.product == "AL").collect();
    assert_eq!(al.len(), 2);
    assert_eq!(al[0].method, Method::Consumption);
    assert_eq!(al[0].quantity, Some(2_400_000.0));
    let cmp = al[1].comparison.as_ref().unwrap();
    assert!((cmp.ratio.unwrap() - 1.215).abs() < 1e-9);
    assert_eq!(cmp.flag, Flag::Agrees);
    let nf: Vec<&CrossRow> = cc
        .rows
        .iter()
        .filter(|r| r.product == "Not forecast")
        .collect();
    assert_eq!(nf.len(), 2);
    assert_eq!(nf[1].comparison.as_ref().unwrap().flag, Flag::NoComparison);
    assert!(cc
        .warnings
        .iter()
        .any(|w| w.contains("'Not forecast'") && w.contains("no consumption forecast")));
    assert!(cc
        .warnings
        .iter()
        .any(|w| w.contains("'Short'") && w.contains("covers 6 of the 12 months")));
}

#[test]
fn an_estimate_that_could_not_be_made_is_flagged_no_comparison() {
    // The README: products in the services or population file that are not
    // in the forecast get rows of their own, flagged no-comparison. Here
    // the product is misspelt against the forecast and its services gave
    // no estimate; one forecast product's services gave none either.
    let start = YearMonth::new(2025, 1).unwrap();
    let mut fc = std::collections::BTreeMap::new();
    fc.insert(
        "RDT".to_string(),
        (0..12)
            .map(|i| ForecastMonth {
                month: start.plus(i),
                point: 100.0,
                lower80: 90.0,
                upper80: 110.0,
            })
            .collect::<Vec<_>>(),
    );
    let none = |product: &str| services::ServicesEstimate {
        product: product.into(),
        services: None,
        quantity: None,
        model: String::new(),
        basis: "no services estimate: no month has a usable quantity".into(),
        months: Vec::new(),
    };
    let cc = build(
        &fc,
        Default::default(),
        start,
        &[none("RTD"), none("RDT")],
        &[],
        0.25,
    );
    for product in ["RTD", "RDT"] {
        let r = cc
            .rows
            .iter()
            .find(|r| r.product == product && r.method == Method::Services)
            .unwrap();
        let c = r.comparison.as_ref().unwrap();
        assert_eq!((c.flag, c.ratio), (Flag::NoComparison, None), "{product}");
        assert!(c.explanation.contains("no services estimate could be made"));
    }
    assert!(cc
        .warnings
        .iter()
        .any(|w| w.contains("'RTD'") && w.contains("did you mean 'RDT'?")));
}
