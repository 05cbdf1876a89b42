use proptest::prelude::*;

use super::*;

fn ym(y: i32, m: u32) -> YearMonth {
    YearMonth::new(y, m).unwrap()
}

fn flat(start: YearMonth, n: usize, v: f64) -> SeriesForecast {
    SeriesForecast {
        start,
        months: (0..n)
            .map(|_| ForecastMonth {
                point: v,
                upper80: Some(v * 1.2),
                upper95: Some(v * 1.4),
            })
            .collect(),
    }
}

fn policy(soh: f64, date: YearMonth) -> Policy {
    Policy {
        stock_on_hand: soh,
        stock_date: date,
        lead_time_months: 0,
        min_months: 3.0,
        max_months: 6.0,
        review_period_months: 1,
        pack_size: 1.0,
        unit_cost: 1.0,
        shelf_life_months: None,
        emergency_months: None,
    }
}

fn settings() -> CheckedPlanSettings {
    PlanSettings::default().check().unwrap()
}

#[test]
fn logistics_handbook_max_min_example() {
    // USAID | DELIVER PROJECT, The Logistics Handbook (2011), max–min
    // inventory control: AMC 1,000, maximum 6 months, stock on hand 2,500,
    // on order 1,000 → order 2,500; months of stock 2.5.
    assert_eq!(max_min_order_quantity(1000.0, 6.0, 2500.0, 1000.0), 2500.0);
    assert_eq!(months_of_stock(2500.0, 1000.0), Some(2.5));
    // The same through the plan: the shipment on order arrives in the first
    // projected month, no lead time, a flat forecast of 1,000.
    let start = ym(2026, 1);
    let p = policy(2500.0, start.plus(-1));
    let fc = flat(start, 12, 1000.0);
    let on_order = [Arrival {
        month: start,
        quantity: 1000.0,
    }];
    let plan = plan_series(&p, &fc, &on_order, &settings()).unwrap();
    let first = &plan.orders[0];
    assert_eq!(first.order_month, start);
    assert_eq!(first.stock_at_arrival, 3500.0);
    assert_eq!(first.quantity, 2500.0);
    // Opening stock 2,500 against AMC 1,000: 2.5 months of stock.
    assert_eq!(
        months_of_stock(plan.months[0].opening, plan.months[0].amc),
        Some(2.5)
    );
}

#[test]
fn who_order_quantity_constructed_example() {
    // Constructed from the published formula (WHO, Operational Guide for
    // National TB Control Programmes on the Introduction and Use of FDC
    // Drugs, 2002, Annex 5): Q = AMC × (lead time + procurement period) +
    // safety stock − (stock on hand + stock on order).
    // AMC 500, lead time 3, procurement period 6, safety stock 3 months =
    // 1,500, stock on hand 4,000, on order 1,000: 500 × 9 + 1,500 − 5,000 = 1,000.
    assert_eq!(
        who_order_quantity(500.0, 3.0, 6.0, 1500.0, 4000.0, 1000.0),
        1000.0
    );
    // The plan gives the same with max = procurement period + safety months
    // (6 + 3 = 9), min = the safety months (3), review period = procurement
    // period: the 1,000 on order arrives in month 2, the order placed at
    // the first review arrives after the lead time.
    let start = ym(2026, 1);
    let mut p = policy(4000.0, start.plus(-1));
    p.lead_time_months = 3;
    p.review_period_months = 6;
    p.min_months = 3.0;
    p.max_months = 9.0;
    let fc = flat(start, 24, 500.0);
    let on_order = [Arrival {
        month: start.plus(1),
        quantity: 1000.0,
    }];
    let plan = plan_series(&p, &fc, &on_order, &settings()).unwrap();
    let o = &plan.orders[0];
    assert_eq!(o.order_month, start);
    assert_eq!(o.arrival_month, start.plus(3));
    assert_eq!(o.quantity, 1000.0);
}

#[test]
fn packs_round_up_and_cost() {
    let start = ym(2026, 1);
    let mut p = policy(0.0, start.plus(-1));
    p.pack_size = 300.0;
    p.unit_cost = 0.5;
    let fc = flat(start, 6, 1000.0);
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    // Up to 6 × 1,000 from nothing: 6,000 = 20 packs exactly.
    assert_eq!(plan.orders[0].packs, 20);
    assert_eq!(plan.orders[0].cost, 3000.0);
    p.pack_size = 700.0;
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    // 6,000 / 700 = 8.57 → 9 packs = 6,300.
    assert_eq!(plan.orders[0].packs, 9);
    assert_eq!(plan.orders[0].quantity, 6300.0);
}

#[test]
fn stockout_within_lead_time_is_reported_with_quantity_short() {
    let start = ym(2026, 1);
    let mut p = policy(1500.0, start.plus(-1));
    p.lead_time_months = 3;
    let fc = flat(start, 12, 1000.0);
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    let m = &plan.months;
    assert_eq!(m[0].closing, 500.0);
    assert_eq!(m[1].closing, 0.0);
    assert_eq!(m[1].short, 500.0);
    assert!(m[1].flags.contains(&Flag::Stockout));
    assert_eq!(m[2].short, 1000.0);
    assert!(m[2].within_lead_time);
    // The first order arrives in month 4 and ends the stockout.
    assert_eq!(plan.orders[0].arrival_month, start.plus(3));
    assert!(!m[3].flags.contains(&Flag::Stockout));
}

#[test]
fn overstock_and_expiry_flags() {
    let start = ym(2026, 1);
    let mut p = policy(20_000.0, start.plus(-1));
    p.shelf_life_months = Some(12.0);
    p.emergency_months = Some(1.0);
    let fc = flat(start, 24, 1000.0);
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    let m0 = &plan.months[0];
    assert_eq!(m0.months_of_stock, Some(19.0));
    assert_eq!(m0.flags, vec![Flag::AboveMax, Flag::ExpiryRisk]);
    assert!(plan.orders.iter().all(|o| o.arrival_month > start.plus(13)));
    // Quantity expected to expire, by hand: 19,000 at the end of the first
    // month, 12 months' shelf life at 1,000 a month → 7,000 cannot be used
    // in time; the flag and the quantity go together.
    assert_eq!(m0.expiring, 7000.0);
    for m in &plan.months {
        assert_eq!(
            m.flags.contains(&Flag::ExpiryRisk),
            m.expiring > 0.0,
            "{}",
            m.month
        );
    }
    assert_eq!(plan.months[7].closing, 12_000.0);
    assert_eq!(plan.months[7].expiring, 0.0);
}

#[test]
fn stock_with_no_demand_ahead_is_above_max_and_at_risk_of_expiry() {
    // A product phased out: 20,000 on hand and nothing forecast. No months
    // of stock can be computed (AMC 0), but the stock is all surplus
    // (common practice: stock of a discontinued product is flagged for
    // redistribution or disposal).
    let start = ym(2026, 1);
    let mut p = policy(20_000.0, start.plus(-1));
    let fc = flat(start, 12, 0.0);
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    assert!(plan.months.iter().all(|m| m.months_of_stock.is_none()));
    assert!(plan.months.iter().all(|m| m.flags == vec![Flag::AboveMax]));
    p.shelf_life_months = Some(24.0);
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    for m in &plan.months {
        assert_eq!(
            m.flags,
            vec![Flag::AboveMax, Flag::ExpiryRisk],
            "{}",
            m.month
        );
        assert_eq!(m.expiring, 20_000.0, "{}", m.month);
    }
}

#[test]
fn expiring_quantity_by_hand() {
    // Common practice: stock beyond AMC × shelf life cannot be used before
    // it expires.
    assert_eq!(expiring_quantity(9000.0, 500.0, 12.0), 3000.0);
    assert_eq!(expiring_quantity(5000.0, 500.0, 12.0), 0.0);
    assert_eq!(expiring_quantity(0.0, 0.0, 12.0), 0.0);
}

#[test]
fn minimum_below_lead_time_plus_margin_is_named() {
    // Rule of thumb (common practice): min_months ≥ lead time + 1 month.
    let mut p = policy(1000.0, ym(2026, 1));
    p.lead_time_months = 6;
    p.min_months = 4.0;
    let why = minimum_below_lead_time(&p).expect("4 < 6 + 1");
    assert!(
        why.contains("min_months 4 is below the lead time (6 months)"),
        "{why}"
    );
    assert!(why.contains("common practice"), "{why}");
    p.min_months = 7.0;
    assert_eq!(minimum_below_lead_time(&p), None);
    p.min_months = 6.5;
    assert!(minimum_below_lead_time(&p).is_some());
    p.lead_time_months = 0;
    p.min_months = 1.0;
    assert_eq!(minimum_below_lead_time(&p), None);
}

#[test]
fn amc_is_forward_and_named() {
    let start = ym(2026, 1);
    let fc = SeriesForecast {
        start,
        months: [100.0, 200.0, 300.0, 400.0, 500.0]
            .iter()
            .map(|&v| ForecastMonth {
                point: v,
                upper80: None,
                upper95: None,
            })
            .collect(),
    };
    let plan = plan_series(&policy(10_000.0, start.plus(-1)), &fc, &[], &settings()).unwrap();
    // End of January: the next three months, Feb–Apr.
    assert_eq!(plan.months[0].amc, 300.0);
    assert_eq!(plan.months[0].amc_months, (start.plus(1), start.plus(3)));
    // At the end of the horizon: the last three months.
    assert_eq!(plan.months[4].amc, 400.0);
    assert_eq!(plan.months[4].amc_months, (start.plus(2), start.plus(4)));
}

#[test]
fn stock_date_against_forecast_start() {
    let start = ym(2026, 1);
    let fc = flat(start, 12, 100.0);
    // Counted two months into the forecast: those months are skipped.
    let plan = plan_series(&policy(500.0, start.plus(1)), &fc, &[], &settings()).unwrap();
    assert_eq!(plan.skipped_forecast_months, 2);
    assert_eq!(plan.months[0].month, start.plus(2));
    assert_eq!(plan.months.len(), 10);
    // Counted before the forecast's base month: refused with the reason.
    let e = plan_series(&policy(500.0, start.plus(-3)), &fc, &[], &settings()).unwrap_err();
    assert!(e.0.contains("2 month(s) older"), "{}", e.0);
    assert!(e.0.contains("2025-12 or later"), "{}", e.0);
    // Counted after the horizon.
    assert!(plan_series(&policy(500.0, start.plus(11)), &fc, &[], &settings()).is_err());
}

#[test]
fn arrivals_outside_the_projection_are_returned_not_lost() {
    let start = ym(2026, 1);
    let fc = flat(start, 6, 100.0);
    let a = [
        Arrival {
            month: start.plus(-1),
            quantity: 5.0,
        },
        Arrival {
            month: start.plus(9),
            quantity: 7.0,
        },
        Arrival {
            month: start.plus(2),
            quantity: 11.0,
        },
    ];
    let plan = plan_series(&policy(5000.0, start.plus(-1)), &fc, &a, &settings()).unwrap();
    assert_eq!(plan.ignored_arrivals.len(), 2);
    assert_eq!(plan.months[2].arrivals_on_order, 11.0);
}

#[test]
fn upper_bound_safety_stock_rule() {
    // Flat 1,000 a month, 95% upper bound 1,400: margin 400 a month. Lead
    // time 1, review 2: the order at the first review covers months 2–3, so
    // the safety stock is 3 × 400 = 1,200, the order-up-to level 2 × 1,000
    // + 1,200 = 3,200.
    let start = ym(2026, 1);
    let mut p = policy(1500.0, start.plus(-1));
    p.lead_time_months = 1;
    p.review_period_months = 2;
    let fc = flat(start, 12, 1000.0);
    let s = PlanSettings {
        amc_months: 3,
        safety: Safety::Upper(Level::P95),
    }
    .check()
    .unwrap();
    let plan = plan_series(&p, &fc, &[], &s).unwrap();
    let o = &plan.orders[0];
    assert_eq!(o.minimum, 1200.0);
    assert_eq!(o.order_up_to, 3200.0);
    assert_eq!(o.stock_at_arrival, 500.0);
    assert_eq!(o.quantity, 2700.0);
}

#[test]
fn settings_are_checked() {
    let e = PlanSettings {
        amc_months: 0,
        safety: Safety::Months,
    }
    .check()
    .unwrap_err();
    assert!(e.to_string().contains("amc-months"), "{e}");
}

fn arb_case() -> impl Strategy<Value = (Policy, SeriesForecast, Vec<Arrival>, PlanSettings)> {
    let start = ym(2026, 1);
    (
        (
            0.0..50_000.0f64,
            -2i64..3,
            0u32..7,
            0.0..6.0f64,
            0.5..8.0f64,
            1u32..7,
            prop_oneof![Just(1.0), Just(10.0), Just(250.0), 0.5..400.0f64],
        ),
        prop::collection::vec((0.0..5000.0f64, 0.0..2000.0f64), 4..30),
        prop::collection::vec((-3i64..32, 1.0..10_000.0f64), 0..4),
        (1usize..7, 0u8..3),
    )
        .prop_map(
            move |((soh, d, lt, min, extra, rp, pack), fc, arr, (amc, safety))| {
                let policy = Policy {
                    stock_on_hand: soh,
                    stock_date: start.plus(d - 1),
                    lead_time_months: lt,
                    min_months: min,
                    max_months: min + extra,
                    review_period_months: rp,
                    pack_size: pack,
                    unit_cost: 2.0,
                    shelf_life_months: Some(12.0),
                    emergency_months: Some(min / 2.0),
                };
                let forecast = SeriesForecast {
                    start,
                    months: fc
                        .iter()
                        .map(|&(p, m)| ForecastMonth {
                            point: p,
                            upper80: Some(p + m * 0.6),
                            upper95: Some(p + m),
                        })
                        .collect(),
                };
                let arrivals = arr
                    .iter()
                    .map(|&(k, q)| Arrival {
                        month: start.plus(k),
                        quantity: q,
                    })
                    .collect();
                let settings = PlanSettings {
                    amc_months: amc,
                    safety: match safety {
                        0 => Safety::Months,
                        1 => Safety::Upper(Level::P80),
                        _ => Safety::Upper(Level::P95),
                    },
                };
                (policy, forecast, arrivals, settings)
            },
        )
}

/// Re-projects the closing stock with the on-order arrivals of `plan` and
/// the planned arrivals less `without` at month index `at`.
fn closing_without(p: &Policy, plan: &SeriesPlan, at: usize, without: f64) -> Vec<f64> {
    let mut stock = p.stock_on_hand;
    plan.months
        .iter()
        .enumerate()
        .map(|(t, m)| {
            let planned = m.arrivals_planned - if t == at { without } else { 0.0 };
            stock = (stock + m.arrivals_on_order + planned - m.consumption).max(0.0);
            stock
        })
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn plan_invariants((p, fc, arrivals, s) in arb_case()) {
        let s = s.check().unwrap();
        let Ok(plan) = plan_series(&p, &fc, &arrivals, &s) else {
            // Only a stock count outside the forecast is refused.
            let first = p.stock_date.plus(1);
            prop_assert!(first < fc.start || first > fc.end());
            return Ok(());
        };
        let first = plan.months[0].month;
        // Every shipment on order is used or returned with a reason.
        let used: f64 = plan.months.iter().map(|m| m.arrivals_on_order).sum();
        let ignored: f64 = plan.ignored_arrivals.iter().map(|a| a.0.quantity).sum();
        let given: f64 = arrivals.iter().map(|a| a.quantity).sum();
        prop_assert!((used + ignored - given).abs() < 1e-6 * given.max(1.0));
        let mut opening = p.stock_on_hand;
        for m in &plan.months {
            // Balances add up: opening + arrivals − consumption = closing − short.
            prop_assert_eq!(m.opening, opening);
            let lhs = m.opening + m.arrivals() - m.consumption;
            prop_assert!((lhs - (m.closing - m.short)).abs() < 1e-6 * (1.0 + m.opening + m.arrivals() + m.consumption));
            // Never negative; a shortfall only with no stock left.
            prop_assert!(m.closing >= 0.0 && m.short >= 0.0);
            prop_assert!(m.short == 0.0 || m.closing == 0.0);
            if m.short > 0.0 {
                prop_assert!(m.flags.contains(&Flag::Stockout));
            }
            opening = m.closing;
        }
        let lead = i64::from(p.lead_time_months);
        let mut arrivals_seen = std::collections::HashSet::new();
        for o in &plan.orders {
            // Arrives exactly its lead time after it is placed, never before
            // the first projected month.
            prop_assert_eq!(o.order_month.months_until(o.arrival_month), lead);
            prop_assert!(o.order_month >= first);
            // Whole packs, costed.
            prop_assert!(o.packs >= 1);
            prop_assert!((o.quantity - o.packs as f64 * p.pack_size).abs() < 1e-9 * o.quantity.max(1.0));
            prop_assert!(o.quantity + 1e-9 >= o.needed && o.quantity - o.needed < p.pack_size + 1e-6);
            prop_assert!((o.cost - o.quantity * p.unit_cost).abs() < 1e-6 * o.cost.max(1.0));
            // One order per arrival month.
            prop_assert!(arrivals_seen.insert(o.arrival_month));
            // No order for a month already covered: without it, the stock
            // at the end of the period it covers is at or below the minimum.
            let at = first.months_until(o.arrival_month) as usize;
            let end = first.months_until(o.covers_to) as usize;
            let without = closing_without(&p, &plan, at, o.quantity);
            prop_assert!(without[end] <= o.minimum + 1e-6 * (1.0 + o.minimum),
                "order at {} not needed: {} > {}", o.arrival_month, without[end], o.minimum);
            prop_assert!((without[end] - o.projected_without).abs() < 1e-6 * (1.0 + without[end]));
        }
    }
}

#[test]
fn an_order_before_a_seasonal_peak_clears_the_minimum_it_was_placed_for() {
    // 100 a month, then 1,000 from the sixth month (a rainy season). Lead
    // time 2, review 3, min 3 and max 6 months of AMC (3-month AMC). The
    // first order arrives in month 3 and covers months 3-5; the minimum at
    // the period's end is 3 × AMC of months 6-8 = 3,000, while the maximum
    // at arrival is 6 × AMC of months 3-5 = 600. Up to the maximum alone,
    // the stock would end the period at 600 − 300 = 300, far below the
    // minimum the order was placed for. The order-up-to level takes the
    // period's consumption on top of the minimum (common practice: an
    // order placed because stock would reach the minimum restores at least
    // the minimum by the end of the period it covers).
    let start = ym(2026, 1);
    let mut p = policy(300.0, start.plus(-1));
    p.lead_time_months = 2;
    p.review_period_months = 3;
    let mut fc = flat(start, 12, 100.0);
    for m in &mut fc.months[5..] {
        m.point = 1000.0;
    }
    let plan = plan_series(&p, &fc, &[], &settings()).unwrap();
    assert!(!plan.orders.is_empty());
    for o in &plan.orders {
        assert!(
            o.order_up_to >= o.minimum,
            "{}: up to {} below the minimum {}",
            o.order_month,
            o.order_up_to,
            o.minimum
        );
        let end = plan.months.iter().find(|m| m.month == o.covers_to).unwrap();
        assert!(
            end.closing >= o.minimum - 1e-9,
            "{}: closing {} at {} below the minimum {}",
            o.order_month,
            end.closing,
            o.covers_to,
            o.minimum
        );
    }
    let first = &plan.orders[0];
    assert_eq!(first.minimum, 3000.0);
    // Stock at arrival 300 − 2 × 100 = 100; the period's consumption 300:
    // up to max(600, 3,000 + 300) = 3,300, so 3,200 ordered.
    assert_eq!(first.stock_at_arrival, 100.0);
    assert_eq!(first.order_up_to, 3300.0);
    assert_eq!(first.quantity, 3200.0);
}

#[test]
fn a_maximum_below_the_minimum_plus_the_review_period_is_named() {
    // Common practice (max–min: maximum = minimum + review period): min 4
    // and max 8 with a 6-month review cannot hold, 4 + 6 = 10 > 8; with
    // max 10 it can.
    let mut p = policy(100.0, ym(2026, 1));
    p.min_months = 4.0;
    p.max_months = 8.0;
    p.review_period_months = 6;
    let why = maximum_below_minimum_plus_review(&p).expect("named");
    assert!(
        why.starts_with("max_months 8 is below min_months 4 + review_period_months 6"),
        "{why}"
    );
    p.max_months = 10.0;
    assert_eq!(maximum_below_minimum_plus_review(&p), None);
}
