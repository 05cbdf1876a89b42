//! End-to-end tests of `provisio plan`: the real binary turns a forecast
//! output folder and a stock file into a stock projection, proposed orders,
//! stock charts and a report section, and refuses bad stock files with the
//! file, line and column.

mod common;

use std::collections::BTreeMap;

use common::{repo, text, Workdir};

/// Copies the small forecast folder of the report fixture (four products
/// cut from the invented demo scenario) to `fc/`.
fn fixture_forecast(w: &Workdir) {
    let from = repo("tests/data/report/forecast-output");
    let to = w.path("fc");
    std::fs::create_dir_all(&to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
    }
}

/// A forecast folder made by hand: `forecast.csv` only, marked as
/// provisio's.
fn hand_forecast(w: &Workdir, csv: &str) {
    w.write("fc/forecast.csv", csv);
    w.write("fc/.provisio-output", "marker\n");
}

/// `plan fc --stock STOCK --on-order ON_ORDER --no-report` in `w`.
fn plan_with_on_order(w: &Workdir, stock: &str, on_order: &str) -> std::process::Output {
    w.run(&[
        "plan",
        "fc",
        "--stock",
        stock,
        "--on-order",
        on_order,
        "--no-report",
    ])
}

fn num(r: &BTreeMap<String, String>, c: &str) -> f64 {
    r[c].parse().unwrap_or_else(|_| panic!("{c}: {:?}", r[c]))
}

const HEADER: &str = "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost,shelf_life_months,emergency_months\n";

fn flat_forecast(product: &str, start_year: i32, months: usize, v: f64) -> String {
    let mut s = String::from("product,month,model,forecast,lower_80,upper_80,lower_95,upper_95\n");
    for k in 0..months {
        let m = k % 12 + 1;
        let y = start_year + (k / 12) as i32;
        s.push_str(&format!(
            "{product},{y}-{m:02},naive,{v},{},{},{},{}\n",
            v * 0.8,
            v * 1.2,
            v * 0.7,
            v * 1.4
        ));
    }
    s
}

#[test]
fn plans_the_fixture_forecast_and_keeps_every_row_accounted_for() {
    let w = Workdir::new();
    fixture_forecast(&w);
    w.write(
        "stock.csv",
        format!(
            "{HEADER}<script>alert(1)</script>,3000,2026-10,2,3,6,2,50,0.5,,1\n\
             Zinc 20 mg dispersible tablet x10,90000,2026-10,3,3,6,3,100,0.12,12,\n\
             \"Snake antivenom/vial \"\"cold chain\"\" & co\",10,2026-10,1,2,6,1,1,55,,\n\
             Ghost product,10,2026-10,1,2,6,1,1,1,,\n"
        ),
    );
    w.write(
        "on_order.csv",
        "product,quantity,arrival_month,reference\n\
         <script>alert(1)</script>,4000,2026-12,N-1\n\
         Zinc 20 mg dispersible tablet x10,500,2026-09,N-2\n\
         Nobody,5,2027-01,N-3\n",
    );
    let o = w.run(&[
        "plan",
        "fc",
        "--stock",
        "stock.csv",
        "--on-order",
        "on_order.csv",
    ]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("planned 3 series"), "{t}");
    assert!(t.contains("Decision support only"), "{t}");

    // Balances add up month to month in the written file (values rounded
    // to 4 decimals), closing stock is never negative, and each series runs
    // the 24 forecast months.
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(plan.len(), 3 * 24);
    let mut prev: BTreeMap<String, f64> = BTreeMap::new();
    for r in &plan {
        let (open, cons, oo, pl, close, short) = (
            num(r, "opening"),
            num(r, "consumption"),
            num(r, "arrivals_on_order"),
            num(r, "arrivals_planned"),
            num(r, "closing"),
            num(r, "short"),
        );
        assert!(
            (open + oo + pl - cons - (close - short)).abs() < 1e-3,
            "{r:?}"
        );
        assert!(close >= 0.0 && short >= 0.0);
        if let Some(p) = prev.get(&r["product"]) {
            assert!((p - open).abs() < 1e-3, "opening = previous closing: {r:?}");
        }
        prev.insert(r["product"].clone(), close);
        if short > 0.0 {
            assert!(r["flag"].contains("stockout"), "{r:?}");
        }
    }
    // The shipment of 4,000 arrives in 2026-12.
    let dec = plan
        .iter()
        .find(|r| r["product"] == "<script>alert(1)</script>" && r["month"] == "2026-12")
        .unwrap();
    assert_eq!(num(dec, "arrivals_on_order"), 4000.0);
    // 90,000 zinc with a 12-month shelf life is overstock at expiry risk.
    let zinc = plan
        .iter()
        .find(|r| r["product"].starts_with("Zinc"))
        .unwrap();
    assert!(zinc["flag"].contains("above-max"), "{zinc:?}");
    assert!(zinc["flag"].contains("expiry-risk"), "{zinc:?}");

    // Orders: whole packs, costed, arriving exactly the lead time later.
    let orders = w.read_csv_maps("fc/orders.csv");
    assert!(!orders.is_empty());
    for r in &orders {
        let q = num(r, "quantity");
        let pack = num(r, "pack_size");
        assert_eq!(q, num(r, "packs") * pack, "{r:?}");
        assert!(
            (num(r, "cost") - q * num(r, "unit_cost")).abs() < 0.01,
            "{r:?}"
        );
        let lead = match r["product"].chars().next() {
            Some('<') => 2,
            Some('Z') => 3,
            _ => 1,
        };
        let om: Vec<i32> = r["order_month"]
            .split('-')
            .map(|x| x.parse().unwrap())
            .collect();
        let am: Vec<i32> = r["arrival_month"]
            .split('-')
            .map(|x| x.parse().unwrap())
            .collect();
        let gap = (am[0] - om[0]) * 12 + am[1] - om[1];
        assert_eq!(gap, lead, "{r:?}");
    }
    let totals = w.read_csv_maps("fc/order_totals.csv");
    let all: f64 = totals
        .iter()
        .filter(|r| r["year"] == "all")
        .map(|r| num(r, "quantity"))
        .sum();
    let each: f64 = orders.iter().map(|r| num(r, "quantity")).sum();
    assert!((all - each).abs() < 1e-6);

    // Nothing silent: the product without stock, the stock row without a
    // forecast, the shipment dated before the count and the one for no
    // product are all in the log.
    let log = w.read_csv_maps("fc/plan_log.csv");
    let has = |product: &str, action: &str| {
        log.iter()
            .any(|r| r["product"] == product && r["action"] == action)
    };
    assert!(has("Snake antivenom vial", "not planned"), "{log:?}");
    assert!(has("Ghost product", "not planned"), "{log:?}");
    assert!(
        has("Zinc 20 mg dispersible tablet x10", "ignored"),
        "{log:?}"
    );
    assert!(has("Nobody", "ignored"), "{log:?}");
    assert!(
        t.contains(
            "warning: product 'Snake antivenom vial': in the forecast but not in the stock file"
        ),
        "{t}"
    );

    // Stock charts and the report section; names stay text.
    let charts: Vec<String> = std::fs::read_dir(w.path("fc/charts"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with("plan-"))
        .collect();
    assert_eq!(charts.len(), 6, "{charts:?}");
    let html = std::fs::read_to_string(w.path("fc/report.html")).unwrap();
    assert!(html.contains("<h2 id=\"plan\">Supply plan</h2>"));
    assert!(html.contains("Stock plan: &lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(!html.contains("<script>alert(1)"));
    assert!(html.contains("Proposed orders are decision support"));
    // `report` rebuilds the report from the folder and keeps the section.
    std::fs::remove_file(w.path("fc/report.html")).unwrap();
    let o = w.run(&["report", "fc"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(w.path("fc/report.html")).unwrap();
    assert!(html.contains("<h2 id=\"plan\">Supply plan</h2>"));
    assert!(html.contains("Stock plan: Zinc 20 mg"));
    // A new forecast in the folder makes the plan out of date: the report
    // says so instead of showing orders computed from the old forecast.
    let fc = std::fs::read_to_string(w.path("fc/forecast.csv")).unwrap();
    w.write("fc/forecast.csv", fc.replacen("9540.5261", "9999", 1));
    let o = w.run(&["report", "fc"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(w.path("fc/report.html")).unwrap();
    assert!(html.contains("were made from an earlier forecast.csv"));
    assert!(!html.contains("Stock plan: Zinc 20 mg"));
}

#[test]
fn safety_stock_from_the_upper_bound() {
    // Flat 1,000 a month with a 95% upper bound of 1,400 (margin 400); lead
    // time 1, review 2: an order decided at a review covers the two months
    // after its arrival, so the safety stock is 3 × 400 = 1,200 and the
    // order-up-to level 2 × 1,000 + 1,200 = 3,200. From 1,500 on hand,
    // 500 are left when the first order arrives: order 2,700.
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Test kit", 2027, 12, 1000.0));
    w.write(
        "stock.csv",
        format!("{HEADER}Test kit,1500,2026-12,1,3,6,2,1,1,,\n"),
    );
    let o = w.run(&[
        "plan",
        "fc",
        "--stock",
        "stock.csv",
        "--safety-stock",
        "upper-95",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let orders = w.read_csv_maps("fc/orders.csv");
    assert_eq!(orders[0]["rule"], "upper-95");
    assert_eq!(num(&orders[0], "minimum"), 1200.0);
    assert_eq!(num(&orders[0], "order_up_to"), 3200.0);
    assert_eq!(num(&orders[0], "quantity"), 2700.0);
    let run: serde_json::Value =
        serde_json::from_slice(&std::fs::read(w.path("fc/plan.json")).unwrap()).unwrap();
    assert!(run["rules"]["orders"]
        .as_str()
        .unwrap()
        .contains("95% upper bound − point forecast"));
}

#[test]
fn logistics_handbook_example_end_to_end() {
    // USAID | DELIVER PROJECT, The Logistics Handbook (2011), max–min
    // inventory control: AMC 1,000, maximum 6 months, stock on hand 2,500,
    // on order 1,000 → order 2,500; months of stock 2.5. A flat forecast of
    // 1,000 a month, no lead time, monthly review, the shipment arriving in
    // the first month.
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Test kit", 2027, 12, 1000.0));
    w.write(
        "stock.csv",
        format!("{HEADER}Test kit,2500,2026-12,0,3,6,1,1,2,,\n"),
    );
    w.write(
        "oo.csv",
        "product,quantity,arrival_month\nTest kit,1000,2027-01\n",
    );
    let o = plan_with_on_order(&w, "stock.csv", "oo.csv");
    assert!(o.status.success(), "{}", text(&o));
    let orders = w.read_csv_maps("fc/orders.csv");
    assert_eq!(orders[0]["order_month"], "2027-01");
    assert_eq!(num(&orders[0], "quantity"), 2500.0);
    assert_eq!(num(&orders[0], "cost"), 5000.0);
    // Months of stock 2.5 is the stock on hand over the AMC at the start.
    assert!(text(&o).contains("    2.5  "), "{}", text(&o));
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(num(&plan[0], "closing"), 5000.0);
    assert_eq!(num(&plan[0], "months_of_stock"), 5.0);
    assert_eq!(plan[0]["amc_from"], "2027-02");
    assert_eq!(plan[0]["amc_to"], "2027-04");
    assert!(w.path("fc/charts").read_dir().unwrap().count() == 2);
}

#[test]
fn per_site_forecast_plans_sites_and_totals() {
    let w = Workdir::new();
    let mut csv =
        String::from("product,site,month,model,forecast,lower_80,upper_80,lower_95,upper_95\n");
    for (site, v) in [("North", 100.0), ("South", 300.0)] {
        for m in 1..=6 {
            csv.push_str(&format!(
                "Pill,{site},2027-{m:02},naive,{v},0,{},0,{}\n",
                v + 10.0,
                v + 20.0
            ));
        }
    }
    hand_forecast(&w, &csv);
    w.write(
        "stock.csv",
        "product,site,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost\n\
         Pill,North,500,2026-12,1,2,4,1,10,1\n\
         Pill,,5000,2026-12,1,2,4,1,10,1\n",
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let plan = w.read_csv_maps("fc/plan.csv");
    let north = plan.iter().find(|r| r["site"] == "North").unwrap();
    let total = plan.iter().find(|r| r["site"].is_empty()).unwrap();
    assert_eq!(num(north, "consumption"), 100.0);
    assert_eq!(num(total, "consumption"), 400.0);

    // A per-site stock row against a per-product forecast is not planned,
    // with the reason.
    hand_forecast(&w, &flat_forecast("Pill", 2027, 6, 100.0));
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(
        text(&o).contains("the forecast is per product (sites summed), so stock held at site 'North' cannot be planned"),
        "{}",
        text(&o)
    );
}

#[test]
fn refusals_name_file_line_column_and_write_nothing() {
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Pill", 2027, 12, 100.0));
    let cases = [
        (
            format!("{HEADER}Pill,100,2026-12,1,7,6,1,10,1,,\n"),
            "stock.csv:2: column 'min_months': min_months 7 is above max_months 6",
        ),
        (
            format!("{HEADER}Pill,100,2026-12,-1,2,6,1,10,1,,\n"),
            "stock.csv:2: column 'lead_time_months': -1 is not valid; give whole months from 0 to 36",
        ),
        (
            format!("{HEADER}Pill,100,2026-12,1,2,6,1,0,1,,\n"),
            "stock.csv:2: column 'pack_size': 0 is not valid",
        ),
        (
            format!("{HEADER}Pill,\"1,000\",2026-12,1,2,6,1,10,1,,\n"),
            "stock.csv:2: column 'stock_on_hand': \"1,000\" is not a plain number",
        ),
        (
            format!("{HEADER}Pill,100,12/2026,1,2,6,1,10,1,,\n"),
            "write 2026-12",
        ),
        (
            format!("{HEADER}Pill,100,2026-12,1,2,6,1,10,1,,3\n"),
            "column 'emergency_months': 3 is not valid; give months of stock from 0 to min_months (2)",
        ),
        (
            format!("{HEADER}Pill,100,2026-12,1,2,6,1,10,1,,\nPill,5,2026-12,1,2,6,1,10,1,,\n"),
            "stock.csv:3: column 'product': 'Pill' already has a row (line 2)",
        ),
        (
            "product,stock_on_hand\nPill,100\n".to_string(),
            "stock.csv:1: column 'stock_date': missing column",
        ),
        (HEADER.to_string(), "has a header but no rows"),
        (
            format!("{HEADER}Pill,100,2026-09,1,2,6,1,10,1,,\n"),
            "the stock count (2026-09) is 3 month(s) older than the month before the forecast starts (2026-12)",
        ),
    ];
    for (stock, expected) in cases {
        w.write("stock.csv", &stock);
        let o = w.run(&["plan", "fc", "--stock", "stock.csv"]);
        assert_eq!(o.status.code(), Some(1), "{stock}: {}", text(&o));
        assert!(
            text(&o).contains(expected),
            "{stock}\nexpected: {expected}\ngot: {}",
            text(&o)
        );
        assert!(!w.path("fc/plan.csv").exists());
        assert!(!w.path("fc/orders.csv").exists());
    }
    // Not a forecast folder.
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,100,2026-12,1,2,6,1,10,1,,\n"),
    );
    std::fs::create_dir_all(w.path("empty")).unwrap();
    let o = w.run(&["plan", "empty", "--stock", "stock.csv"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o).contains("forecast.csv"), "{}", text(&o));
}

/// A product whose name starts like a spreadsheet formula is written to
/// `forecast.csv` with a leading apostrophe (OWASP "CSV Injection"
/// guidance); `plan` reads it back as the plain name, matches the stock row
/// written without it, and writes its own CSV outputs the same way.
#[test]
fn formula_like_names_match_the_stock_file_and_stay_quoted() {
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("'=SUM(A1)", 2027, 12, 1000.0));
    w.write(
        "stock.csv",
        format!("{HEADER}\"=SUM(A1)\",1500,2026-12,1,3,6,2,1,1,,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(!text(&o).contains("not in the forecast"), "{}", text(&o));
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(plan.len(), 12);
    assert!(plan.iter().all(|r| r["product"] == "'=SUM(A1)"));
    let orders = w.read_csv_maps("fc/orders.csv");
    assert!(!orders.is_empty());
    assert!(orders.iter().all(|r| r["product"] == "'=SUM(A1)"));
}

/// `forecast.csv` of a run whose configuration gave Pill a pack size of 30.
fn forecast_with_pack_size(size: f64) -> String {
    let mut s = String::from(
        "product,month,model,forecast,lower_80,upper_80,lower_95,upper_95,units,pack_size,packs\n",
    );
    for m in 1..=12 {
        s.push_str(&format!(
            "Pill,2027-{m:02},naive,300,240,360,210,420,course,{size},{}\n",
            300.0 / size
        ));
    }
    s
}

#[test]
fn pack_size_differing_from_the_run_configuration_is_warned() {
    let w = Workdir::new();
    hand_forecast(&w, &forecast_with_pack_size(30.0));
    // The stock file counts packs of 720 where the configuration said 30.
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,3000,2026-12,1,3,6,1,720,1,,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("stock.csv:2: product 'Pill': pack_size 720 differs from the run configuration's pack_size 30"),
        "{t}"
    );
    let log = w.read_csv_maps("fc/plan_log.csv");
    assert!(log
        .iter()
        .any(|r| r["action"] == "note" && r["reason"].contains("pack_size 720 differs")));
    // The same pack size: no such warning.
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,3000,2026-12,1,3,6,1,30,1,,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(
        !text(&o).contains("differs from the run configuration"),
        "{}",
        text(&o)
    );
}

#[test]
fn stock_chart_marks_stockouts_without_height_in_the_products_unit() {
    // What a tester saw on the demo's plan charts: a stockout month drawn
    // as a bar about 7,500 units high (read as stock on hand) with a
    // legend calling it a "red strip", an axis in "base units" for a
    // product counted in tests, and the axis running to about 230,000 for
    // data up to about 132,000.
    let w = Workdir::new();
    hand_forecast(&w, &forecast_with_pack_size(30.0));
    // 400 courses at 300 a month, lead time 3: February 2027 runs out, 200
    // short; the order placed in January arrives in April.
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,400,2026-12,3,2,4,3,30,1,,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(num(&plan[1], "short"), 200.0);
    let svg_file = std::fs::read_dir(w.path("fc/charts"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|x| x == "svg"))
        .unwrap();
    let svg = std::fs::read_to_string(svg_file).unwrap();
    assert!(svg.contains("stock (courses)"), "{svg}");
    assert!(!svg.contains("base units"), "{svg}");
    assert!(!svg.contains("red strip"), "{svg}");
    assert!(svg.contains("stockout · short 200"), "{svg}");
    let shorts: f64 = plan.iter().map(|r| num(r, "short")).sum();
    assert!(
        svg.contains(&format!(
            "projected stockout (shaded month): {} month(s), {shorts} courses short",
            plan.iter()
                .filter(|r| r["flag"].contains("stockout"))
                .count()
        )),
        "{svg}"
    );
    // The axis ends near the largest value drawn (an arrival, the maximum
    // or a closing stock), not at a closing stock plus the arrival in it.
    let top = plan
        .iter()
        .flat_map(|r| {
            let amc = num(r, "amc");
            [
                num(r, "closing"),
                num(r, "arrivals_planned"),
                num(r, "arrivals_on_order"),
                num(r, "max_months") * amc,
            ]
        })
        .fold(400.0, f64::max);
    let labels: Vec<f64> = svg
        .split('>')
        .filter_map(|t| t.split('<').next())
        .filter_map(|t| t.replace(',', "").parse::<f64>().ok())
        .collect();
    let highest = labels.iter().cloned().fold(0.0, f64::max);
    assert!(
        highest <= top * 1.06 + 1e-9,
        "{highest} above {top}: {labels:?}"
    );
}

#[test]
fn minimum_below_lead_time_and_expiring_quantity_are_said() {
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Pill", 2027, 24, 100.0));
    // Lead time 6, minimum 4 months (below 6 + 1, the rule of thumb, common
    // practice); 3,000 in stock with a shelf life of 12 months at 100 a
    // month: 3,000 − 100 × 12 = 1,800 cannot be used before it expires
    // (by hand, at the end of the first month: 2,900 − 1,200 = 1,700).
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,3000,2026-12,6,4,8,6,10,1,12,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains(
            "min_months 4 is below the lead time (6 months) plus a safety margin of 1 month"
        ),
        "{t}"
    );
    assert!(t.contains("common practice"), "{t}");
    assert!(t.contains("about 1,700 units expected to expire"), "{t}");
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(num(&plan[0], "closing"), 2900.0);
    assert_eq!(num(&plan[0], "expiring"), 1700.0);
    assert!(plan[0]["flag"].contains("expiry-risk"));
    // A minimum of lead time + 1 month: no such warning.
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,300,2026-12,6,7,13,6,10,1,,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(!text(&o).contains("safety margin"), "{}", text(&o));
}

#[test]
fn grouped_numbers_in_the_stock_file_follow_the_numbers_option() {
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Pill", 2027, 12, 100.0));
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,\"20,000\",2026-12,1,2,6,1,10,1,,\n"),
    );
    w.write(
        "on_order.csv",
        "product,quantity,arrival_month\nPill,\"1,500\",2027-02\n",
    );
    // Plain numbers (the default) refuse it and name the option.
    let o = w.run(&["plan", "fc", "--stock", "stock.csv", "--no-report"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o).contains("--numbers grouped"), "{}", text(&o));
    let o = w.run(&[
        "plan",
        "fc",
        "--stock",
        "stock.csv",
        "--on-order",
        "on_order.csv",
        "--numbers",
        "grouped",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(num(&plan[0], "opening"), 20000.0);
    assert_eq!(num(&plan[1], "arrivals_on_order"), 1500.0);
    // Decimal comma: "20.000" is twenty thousand, "2,5" two and a half.
    w.write(
        "stock.csv",
        "product;stock_on_hand;stock_date;lead_time_months;min_months;max_months;review_period_months;pack_size;unit_cost\n\
         Pill;20.000;2026-12;1;2;6;1;10;2,5\n",
    );
    let o = w.run(&[
        "plan",
        "fc",
        "--stock",
        "stock.csv",
        "--numbers",
        "decimal-comma",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(num(&plan[0], "opening"), 20000.0);
}

#[test]
fn a_folder_without_a_forecast_is_named_as_such() {
    let w = Workdir::new();
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,100,2026-12,1,2,6,1,10,1,,\n"),
    );
    std::fs::create_dir_all(w.path("empty")).unwrap();
    let o = w.run(&["plan", "empty", "--stock", "stock.csv"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        text(&o).contains("no forecast in this folder (no forecast.csv)"),
        "{}",
        text(&o)
    );
    let o = w.run(&["plan", "missing", "--stock", "stock.csv"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o).contains("missing: no such folder"), "{}", text(&o));
    assert!(!w.path("missing").exists());
    assert!(!w.path("empty/plan.csv").exists());
}

#[test]
fn a_new_forecast_retires_the_plan_made_from_the_old_one() {
    let w = Workdir::new();
    let mut data = String::from("product,month,consumed\n");
    for k in 0..36 {
        let (y, m) = (2023 + k / 12, k % 12 + 1);
        data.push_str(&format!("Pill,{y}-{m:02},{}\n", 100 + (k % 5) * 7));
    }
    w.write("data.csv", &data);
    let forecast = [
        "forecast",
        "data.csv",
        "--out",
        "out",
        "--no-report",
        "--no-workbook",
    ];
    let o = w.run(&forecast);
    assert!(o.status.success(), "{}", text(&o));
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,300,2025-12,1,2,6,1,10,1,,\n"),
    );
    let o = w.run(&["plan", "out", "--stock", "stock.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(w.path("out/orders.csv").exists());
    let o = w.run(&forecast);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("file(s) of an earlier plan or cross-check"),
        "{t}"
    );
    assert!(t.contains("plan.csv"), "{t}");
    for f in [
        "plan.csv",
        "orders.csv",
        "order_totals.csv",
        "plan_log.csv",
        "plan.json",
    ] {
        assert!(
            !w.path(&format!("out/{f}")).exists(),
            "{f} left beside the new forecast"
        );
        assert!(
            w.path(&format!("out/retired/{f}")).exists(),
            "{f} not retired"
        );
    }
    let left: Vec<String> = std::fs::read_dir(w.path("out/charts"))
        .map(|d| {
            d.flatten()
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .filter(|n| n.starts_with("plan-"))
                .collect()
        })
        .unwrap_or_default();
    assert!(left.is_empty(), "{left:?}");
    // A third run has nothing to retire and says nothing about it.
    let o = w.run(&forecast);
    assert!(o.status.success(), "{}", text(&o));
    assert!(!text(&o).contains("earlier plan"), "{}", text(&o));
}

#[test]
fn the_plan_reaches_the_planners_workbook_with_annual_totals() {
    use calamine::Reader;
    let w = Workdir::new();
    let mut data = String::from("product,month,consumed\n");
    for k in 0..36 {
        let (y, m) = (2023 + k / 12, k % 12 + 1);
        data.push_str(&format!("Pill,{y}-{m:02},{}\n", 100 + (k % 5) * 7));
    }
    w.write("data.csv", &data);
    w.write(
        "run.toml",
        "[input]\ndata = \"data.csv\"\n\n[output]\nout = \"out\"\n\n[products.\"Pill\"]\nunits = \"tablet\"\npack_size = 10\n",
    );
    let o = w.run(&["forecast", "--config", "run.toml", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,300,2025-12,1,2,6,1,10,1,,\n"),
    );
    let o = w.run(&["plan", "out", "--stock", "stock.csv", "--no-report"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("forecast.xlsx now has the sheets Supply plan, Orders and Order totals"),
        "{t}"
    );
    let mut book = calamine::open_workbook_auto(w.path("out/forecast.xlsx")).expect("workbook");
    let names = book.sheet_names();
    for s in [
        "Forecast",
        "Annual totals",
        "Supply plan",
        "Orders",
        "Order totals",
    ] {
        assert!(names.iter().any(|n| n == s), "no sheet {s}: {names:?}");
    }
    // Order totals: the same cost per year as order_totals.csv.
    let totals = w.read_csv_maps("out/order_totals.csv");
    let all = totals.iter().find(|r| r["year"] == "all").expect("all row");
    let sheet = book.worksheet_range("Order totals").expect("sheet");
    let cells: Vec<Vec<String>> = sheet
        .rows()
        .map(|r| r.iter().map(|c| c.to_string()).collect())
        .collect();
    let head = cells
        .iter()
        .position(|r| r.first().is_some_and(|c| c == "product"))
        .expect("header");
    let cost_col = cells[head].iter().position(|c| c == "cost").unwrap();
    let year_col = cells[head].iter().position(|c| c == "year").unwrap();
    let row = cells[head + 1..]
        .iter()
        .find(|r| r[year_col] == "all")
        .expect("all row in sheet");
    assert_eq!(row[cost_col].parse::<f64>().unwrap(), num(all, "cost"));
    // Annual totals: 2026's total is the sum of forecast.csv's 2026 months
    // (by hand from the CSV), and packs = total ÷ 10.
    let fc = w.read_csv_maps("out/forecast.csv");
    let sum2026: f64 = fc
        .iter()
        .filter(|r| r["month"].starts_with("2026"))
        .map(|r| num(r, "forecast"))
        .sum();
    let sheet = book.worksheet_range("Annual totals").expect("sheet");
    let cells: Vec<Vec<String>> = sheet
        .rows()
        .map(|r| r.iter().map(|c| c.to_string()).collect())
        .collect();
    let head = cells
        .iter()
        .position(|r| r.first().is_some_and(|c| c == "product"))
        .expect("header");
    let col = |n: &str| cells[head].iter().position(|c| c == n).unwrap();
    let y2026 = cells[head + 1..]
        .iter()
        .find(|r| r[col("year")] == "2026")
        .expect("2026");
    assert_eq!(y2026[col("months")], "12");
    let total: f64 = y2026[col("total")].parse().unwrap();
    assert!((total - sum2026.round()).abs() < 1e-9, "{total} {sum2026}");
    let packs: f64 = y2026[col("packs")].parse().unwrap();
    assert!((packs - (sum2026 / 10.0 * 10.0).round() / 10.0).abs() < 1e-9);
    // A forecast changed after the plan (one value edited): the rebuilt
    // workbook no longer carries orders computed from the old one, as the
    // report does not (common practice: a plan is valid only for the
    // forecast it was made from).
    let csv = std::fs::read_to_string(w.path("out/forecast.csv")).unwrap();
    let mut lines: Vec<String> = csv.lines().map(str::to_string).collect();
    let col_fc = lines[0].split(',').position(|c| c == "forecast").unwrap();
    let mut cells: Vec<String> = lines[1].split(',').map(str::to_string).collect();
    cells[col_fc] = format!("{}1", cells[col_fc]);
    lines[1] = cells.join(",");
    w.write("out/forecast.csv", format!("{}\n", lines.join("\n")));
    let o = w.run(&["report", "out", "--workbook-only"]);
    assert!(o.status.success(), "{}", text(&o));
    let mut book = calamine::open_workbook_auto(w.path("out/forecast.xlsx")).expect("workbook");
    let names = book.sheet_names();
    assert!(
        !names.iter().any(|n| n == "Orders" || n == "Order totals"),
        "{names:?}"
    );
    let note = book.worksheet_range("Supply plan").expect("sheet");
    let first = note.get((0, 0)).map(|c| c.to_string()).unwrap_or_default();
    assert!(
        first.starts_with("Out of date: forecast.csv has changed"),
        "{first}"
    );
}

#[test]
fn a_shipment_entered_twice_is_counted_and_warned_about() {
    // Two rows alike in every field may be two shipments or one typed
    // twice: both count (arithmetic: 2 × 1,500), and the warning names both
    // lines (common practice: the planner checks the order records).
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Pill", 2027, 12, 100.0));
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,20000,2026-12,1,2,6,1,10,1,,\n"),
    );
    w.write(
        "on_order.csv",
        "product,quantity,arrival_month\nPill,1500,2027-02\nPill,1500,2027-02\n",
    );
    let o = plan_with_on_order(&w, "stock.csv", "on_order.csv");
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("line 3 repeats line 2"), "{t}");
    let plan = w.read_csv_maps("fc/plan.csv");
    assert_eq!(num(&plan[1], "arrivals_on_order"), 3000.0);
}

#[test]
fn a_product_typed_in_another_case_is_named_with_the_forecast_spelling() {
    // Common practice: a stock sheet typed by hand often differs from the
    // system's product names only in letter case or spacing; the message
    // must offer the forecast's spelling rather than a bare "not found".
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Zinc 20 mg tablet", 2027, 24, 100.0));
    w.write(
        "stock.csv",
        format!("{HEADER}zinc 20  mg TABLET,500,2026-12,2,4,8,2,10,0.1,,\n"),
    );
    let o = w.run(&["plan", "fc", "--stock", "stock.csv"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("stock.csv:2:")
            && t.contains(
                "'zinc 20  mg TABLET' is not in the forecast; did you mean 'Zinc 20 mg tablet'?"
            ),
        "{t}"
    );
}

#[test]
fn nothing_on_order_and_a_misspelt_shipment_are_read_as_meant() {
    // Common practice: "nothing on order" is a normal state, kept as an
    // on-order file with its header only; a shipment whose product is
    // typed unlike the stock file's is not used, and the message offers
    // the stock file's spelling.
    let w = Workdir::new();
    hand_forecast(&w, &flat_forecast("Pill", 2027, 12, 100.0));
    w.write(
        "stock.csv",
        format!("{HEADER}Pill,20000,2026-12,1,2,6,1,10,1,,\n"),
    );
    w.write("none.csv", "product,quantity,arrival_month\n");
    let o = plan_with_on_order(&w, "stock.csv", "none.csv");
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    let plan = w.read_csv_maps("fc/plan.csv");
    assert!(plan.iter().all(|r| num(r, "arrivals_on_order") == 0.0));
    w.write(
        "typo.csv",
        "product,quantity,arrival_month\npill,1500,2027-02\n",
    );
    let o = plan_with_on_order(&w, "stock.csv", "typo.csv");
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("typo.csv:2: no row of the stock file for product 'pill'; did you mean 'Pill'?"),
        "{t}"
    );
}

#[test]
fn a_second_plan_keeps_no_chart_of_a_series_it_left_out() {
    // Common practice: every file of a plan describes the same plan; a
    // product dropped from the stock file must not keep a stock chart of
    // the earlier plan beside the new files.
    let w = Workdir::new();
    let b = flat_forecast("Syrup", 2027, 12, 50.0);
    let b_rows: String = b.lines().skip(1).map(|l| format!("{l}\n")).collect();
    hand_forecast(
        &w,
        &format!("{}{b_rows}", flat_forecast("Pill", 2027, 12, 100.0)),
    );
    w.write(
        "both.csv",
        format!("{HEADER}Pill,2000,2026-12,1,2,6,1,10,1,,\nSyrup,500,2026-12,1,2,6,1,10,1,,\n"),
    );
    w.write(
        "one.csv",
        format!("{HEADER}Pill,2000,2026-12,1,2,6,1,10,1,,\n"),
    );
    let charts = |w: &Workdir| -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(w.path("fc/charts"))
            .map(|d| {
                d.flatten()
                    .map(|e| e.file_name().to_string_lossy().into_owned())
                    .filter(|n| n.starts_with("plan-"))
                    .collect()
            })
            .unwrap_or_default();
        v.sort();
        v
    };
    let o = w.run(&["plan", "fc", "--stock", "both.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let first = charts(&w);
    assert_eq!(first.len(), 4, "{first:?}");
    assert!(
        first.iter().any(|n| n.starts_with("plan-syrup-")),
        "{first:?}"
    );
    let o = w.run(&["plan", "fc", "--stock", "one.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let second = charts(&w);
    assert_eq!(second.len(), 2, "{second:?}");
    assert!(
        second.iter().all(|n| n.starts_with("plan-pill-")),
        "{second:?}"
    );
}
