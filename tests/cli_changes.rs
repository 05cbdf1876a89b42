//! `forecast --changes FILE` end to end: every kind of change with its
//! expected values computed by hand from the definitions in
//! `provisio::changes` (the arithmetic is written beside each check), the
//! ranges, a switch that conserves the converted quantity, new products,
//! the refusals, and `review`'s forecast value added on a constructed past
//! run.
//!
//! The statistical forecast is made exact by construction: every product
//! is pinned to the naive model (forecast = last month), and each series
//! ends at 100, so the statistical forecast is 100 in every month
//! (common practice: the naive forecast repeats the last observation).

mod common;

use std::collections::BTreeMap;

use common::{repo, text, Workdir};

const PRODUCTS: [&str; 5] = [
    "Product A",
    "Product B",
    "Product C",
    "Product D",
    "Product E",
];

/// 36 months 2023-11 to 2026-10 alternating 90 / 110 and ending at 100,
/// then `extra` months of actuals per product (from 2026-11 on).
fn data(extra: &[(&str, &[f64])]) -> String {
    let mut s = String::from("product,month,consumed\n");
    for p in PRODUCTS {
        for k in 0..36 {
            let (y, m) = (2023 + (10 + k) / 12, (10 + k) % 12 + 1);
            let v = if k == 35 {
                100
            } else if k % 2 == 0 {
                90
            } else {
                110
            };
            s.push_str(&format!("{p},{y}-{m:02},{v}\n"));
        }
        if let Some((_, vals)) = extra.iter().find(|(q, _)| *q == p) {
            for (k, v) in vals.iter().enumerate() {
                let (y, m) = (2026 + (10 + k) / 12, (10 + k) % 12 + 1);
                s.push_str(&format!("{p},{y}-{m:02},{v}\n"));
            }
        }
    }
    s
}

fn pins() -> String {
    let mut s = String::from("product,model\n");
    for p in PRODUCTS {
        s.push_str(&format!("{p},naive\n"));
    }
    s
}

const HEADER: &str =
    "product,kind,first_month,last_month,value,start_value,other_product,factor,note\n";

/// (product, month) → row of forecast.csv.
fn forecast_rows(w: &Workdir, dir: &str) -> BTreeMap<(String, String), BTreeMap<String, String>> {
    w.read_csv_maps(&format!("{dir}/forecast.csv"))
        .into_iter()
        .map(|r| ((r["product"].clone(), r["month"].clone()), r))
        .collect()
}

fn num(r: &BTreeMap<String, String>, c: &str) -> f64 {
    r[c].parse()
        .unwrap_or_else(|_| panic!("{c}: '{}' is not a number", r[c]))
}

fn close(a: f64, b: f64, what: &str) {
    assert!((a - b).abs() < 1e-3, "{what}: {a} != {b}");
}

fn adjusted(rows: &BTreeMap<(String, String), BTreeMap<String, String>>, p: &str) -> Vec<f64> {
    rows.iter()
        .filter(|((q, _), _)| q == p)
        .map(|(_, r)| num(r, "adjusted"))
        .collect()
}

fn run_changes(w: &Workdir, changes_name: &str) -> std::process::Output {
    w.write("data.csv", data(&[]));
    w.write("pins.csv", pins());
    w.run(&[
        "forecast",
        "data.csv",
        "--out",
        "out",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
        "--changes",
        changes_name,
        "--no-report",
    ])
}

#[test]
fn every_kind_gives_the_hand_computed_forecast() {
    let w = Workdir::new();
    let rows = [
        "Product A,percent-change,2027-01,2027-04,20,,,,scale-up",
        "Product B,quantity-per-month,2027-03,2027-05,-30,,,,campaign ends",
        "Product C,target-level,2027-01,2027-02,160,,,,target",
        "Product D,phase-out,2027-01,2027-04,,,,,phase-out",
        "Product E,switch,2027-01,2027-02,50,,Product F,2,new guideline",
        "Product G,new-from-analogue,2027-03,,,,Product A,0.5,like A",
        "Product H,new-from-level,2027-01,2027-05,100,20,,,ramp-up",
        "Product B,quantity-per-month,2027-04,2027-04,-90,,,,recall",
    ];
    w.write("changes.csv", format!("{HEADER}{}\n", rows.join("\n")));
    let o = run_changes(&w, "changes.csv");
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let f = forecast_rows(&w, "out");
    // The statistical forecast is 100 throughout (naive on a series ending at 100).
    for p in PRODUCTS {
        for ((q, _), r) in f.iter().filter(|((q, _), _)| q == p) {
            close(num(r, "forecast"), 100.0, q);
        }
    }
    // Projection 2026-11 .. 2027-10 (12 months); index 0 = 2026-11, 2 = 2027-01.
    // A, percent-change +20% reached by 2027-04: share f = 1/4, 2/4, 3/4, 1 in
    // Jan-Apr → 100 × (1 + f × 0.2) = 105, 110, 115, 120; held at 120 after.
    let a = adjusted(&f, "Product A");
    let want_a = [
        100.0, 100.0, 105.0, 110.0, 115.0, 120.0, 120.0, 120.0, 120.0, 120.0, 120.0, 120.0,
    ];
    for (k, (x, y)) in a.iter().zip(want_a).enumerate() {
        close(*x, y, &format!("A month {k}"));
    }
    // B: −30 a month in Mar-May → 70; then row 9 removes 90 in Apr: 70 − 90 =
    // −20, clipped at 0 (and warned).
    let b = adjusted(&f, "Product B");
    let want_b = [
        100.0, 100.0, 100.0, 100.0, 70.0, 0.0, 70.0, 100.0, 100.0, 100.0, 100.0, 100.0,
    ];
    for (k, (x, y)) in b.iter().zip(want_b).enumerate() {
        close(*x, y, &format!("B month {k}"));
    }
    assert!(
        out.contains("below zero") && out.contains("clipped at zero"),
        "{out}"
    );
    assert!(
        out.contains("rows 3 and 9 overlap in 2027-04 to 2027-04"),
        "{out}"
    );
    // C: target 160 reached by Feb: Jan 100 + 1/2 × (160 − 100) = 130, then 160.
    let c = adjusted(&f, "Product C");
    close(c[2], 130.0, "C Jan");
    for x in &c[3..] {
        close(*x, 160.0, "C Feb on");
    }
    // D: phase-out by Apr: 100 × (1 − f) = 75, 50, 25, 0, then 0.
    let d = adjusted(&f, "Product D");
    let want_d = [
        100.0, 100.0, 75.0, 50.0, 25.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
    ];
    for (k, (x, y)) in d.iter().zip(want_d).enumerate() {
        close(*x, y, &format!("D month {k}"));
    }
    // E → F switch of 50% reached by Feb, 2 units of F per unit of E:
    // moved m = f × 0.5 × 100 = 25 in Jan, 50 from Feb; E = 75, then 50;
    // F (not in the data: a new product) = 2 m = 50, then 100.
    let e = adjusted(&f, "Product E");
    let fp = adjusted(&f, "Product F");
    close(e[2], 75.0, "E Jan");
    close(fp[2], 50.0, "F Jan");
    for k in 3..12 {
        close(e[k], 50.0, "E Feb on");
        close(fp[k], 100.0, "F Feb on");
    }
    // Conservation: F gains 2 × what E loses: E total 1200 − (200 + 75 + 9 × 50)
    // = 1200 − 725 = 475; F total 50 + 9 × 100 = 950 = 2 × 475.
    let e_lost: f64 = 1200.0 - e.iter().sum::<f64>();
    close(e_lost, 475.0, "E lost");
    close(fp.iter().sum::<f64>(), 2.0 * e_lost, "F gained");
    assert!(
        out.contains("'Product F', which is not in the data: it becomes a new product"),
        "{out}"
    );
    let frow = &f[&("Product F".to_string(), "2027-05".to_string())];
    assert_eq!(frow["model"], "none (new product)");
    close(num(frow, "forecast"), 0.0, "F statistical");
    // G = 0.5 × A's adjusted forecast from Mar: 0.5 × 115 = 57.5, 0.5 × 120 = 60.
    let g = adjusted(&f, "Product G");
    close(g[1], 0.0, "G before its first month");
    close(g[4], 57.5, "G Mar");
    close(g[5], 60.0, "G Apr");
    // H: new from 20 in Jan rising linearly to 100 in May: 20, 40, 60, 80, 100.
    let h = adjusted(&f, "Product H");
    let want_h = [
        0.0, 0.0, 20.0, 40.0, 60.0, 80.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0,
    ];
    for (k, (x, y)) in h.iter().zip(want_h).enumerate() {
        close(*x, y, &format!("H month {k}"));
    }

    // Ranges: scaled with a multiplicative change, shifted with an additive one.
    let r = |p: &str, m: &str| &f[&(p.to_string(), m.to_string())];
    let a5 = r("Product A", "2027-05");
    close(
        num(a5, "adjusted_upper_80"),
        1.2 * num(a5, "upper_80"),
        "A upper 80 × 1.2",
    );
    close(
        num(a5, "adjusted_upper_95"),
        1.2 * num(a5, "upper_95"),
        "A upper 95 × 1.2",
    );
    let b3 = r("Product B", "2027-03");
    close(
        num(b3, "adjusted_upper_80"),
        num(b3, "upper_80") - 30.0,
        "B upper 80 − 30",
    );
    close(
        num(b3, "adjusted_lower_80"),
        (num(b3, "lower_80") - 30.0).max(0.0),
        "B lower 80 − 30, never negative",
    );
    let e5 = r("Product E", "2027-05");
    close(
        num(e5, "adjusted_upper_80"),
        0.5 * num(e5, "upper_80"),
        "E upper 80 × 0.5",
    );
    let f5 = r("Product F", "2027-05");
    close(
        num(f5, "adjusted_upper_80"),
        100.0,
        "F: a zero range shifted by 100",
    );
    let g5 = r("Product G", "2027-05");
    close(
        num(g5, "adjusted_upper_80"),
        0.5 * num(a5, "adjusted_upper_80"),
        "G = 0.5 × A's range",
    );
    for row in f.values() {
        for c in [
            "adjusted",
            "adjusted_lower_80",
            "adjusted_upper_80",
            "adjusted_lower_95",
            "adjusted_upper_95",
        ] {
            assert!(num(row, c) >= 0.0, "{c} negative in {row:?}");
        }
        assert!(num(row, "adjusted_lower_80") <= num(row, "adjusted") + 1e-9);
        assert!(num(row, "adjusted") <= num(row, "adjusted_upper_80") + 1e-9);
    }

    // The trace and the summary.
    let trace = w.read_csv_maps("out/changes_applied.csv");
    let t = trace
        .iter()
        .find(|t| t["product"] == "Product B" && t["month"] == "2027-04" && t["change_row"] == "9")
        .expect("row 9 traced");
    assert_eq!(t["before_change"], "70");
    assert_eq!(t["after_change"], "0");
    assert_eq!(t["clipped_at_zero"], "yes");
    assert_eq!(t["note"], "recall");
    let summary = w.read_csv_maps("out/changes_summary.csv");
    let s = |row: &str, p: &str| {
        summary
            .iter()
            .find(|s| s["change_row"] == row && s["product"] == p)
            .unwrap_or_else(|| panic!("row {row} {p}"))
            .clone()
    };
    // A's 12-month total: 200 + 105 + 110 + 115 + 120 + 6 × 120 = 1370, +170.
    close(
        num(&s("2", "Product A"), "change_months_1_12"),
        170.0,
        "A effect",
    );
    close(
        num(&s("2", "Product A"), "adjusted_months_1_12"),
        1370.0,
        "A total",
    );
    // D: 200 + 75 + 50 + 25 = 350, −850.
    close(
        num(&s("5", "Product D"), "change_months_1_12"),
        -850.0,
        "D effect",
    );
    // H: 20 + 40 + 60 + 80 + 100 + 5 × 100 = 800.
    close(
        num(&s("8", "Product H"), "adjusted_months_1_12"),
        800.0,
        "H total",
    );
    assert_eq!(s("8", "Product H")["new_product"], "yes");
    // The manifest keeps the changes file's SHA-256.
    use sha2::Digest;
    let bytes = std::fs::read(w.path("changes.csv")).expect("read");
    let sha: String = sha2::Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(w.manifest("out")["changes_sha256"], sha.as_str());

    // forecast_wide.csv: the adjusted rows follow each product's own.
    let wide = w.read_csv_maps("out/forecast_wide.csv");
    let aw = wide
        .iter()
        .find(|r| r["product"] == "Product A" && r["row"] == "adjusted")
        .expect("adjusted row");
    assert_eq!(aw["2027-02"], "110");

    // The statistical forecast is the one a run without changes makes:
    // forecast.csv's own columns are the same, cell for cell.
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--out",
        "plain",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
        "--no-report",
        "--no-workbook",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let plain = forecast_rows(&w, "plain");
    for (key, r) in &plain {
        let c = &f[key];
        for (col, v) in r {
            assert_eq!(&c[col], v, "{key:?} {col}");
        }
    }

    // The workbook: the adjusted forecast follows A's statistical one, and
    // the summary has a sheet of its own.
    use calamine::Reader;
    let mut book = calamine::open_workbook_auto(w.path("out/forecast.xlsx")).expect("workbook");
    assert!(book.sheet_names().iter().any(|n| n == "Known changes"));
    let sheet = book.worksheet_range("Forecast").expect("Forecast sheet");
    let cells: Vec<String> = sheet
        .rows()
        .flat_map(|r| r.iter().map(|c| c.to_string()))
        .collect();
    assert!(
        cells.iter().any(|c| c == "adjusted (known changes)"),
        "no adjusted rows"
    );

    // `plan` uses the adjusted forecast and says so: D's consumption in the
    // plan is the phase-out's 75, 50, 25, 0 in Jan-Apr 2027, not 100.
    w.write(
        "stock.csv",
        "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost,shelf_life_months,emergency_months\n\
         Product D,1000,2026-10,1,2,4,1,1,1,,\n",
    );
    let o = w.run(&["plan", "out", "--stock", "stock.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("the plan uses the adjusted forecast"), "{t}");
    let plan = w.read_csv_maps("out/plan.csv");
    let cons = |m: &str| {
        num(
            plan.iter()
                .find(|r| r["month"] == m)
                .unwrap_or_else(|| panic!("{m}")),
            "consumption",
        )
    };
    close(cons("2026-12"), 100.0, "plan Dec");
    close(cons("2027-01"), 75.0, "plan Jan");
    close(cons("2027-03"), 25.0, "plan Mar");
    close(cons("2027-05"), 0.0, "plan May");
}

#[test]
fn a_workbook_sheet_gives_the_same_result_as_the_csv() {
    let w = Workdir::new();
    let mut book = rust_xlsxwriter::Workbook::new();
    let sheet = book.add_worksheet();
    sheet.set_name("changes").expect("name");
    for (j, h) in [
        "product",
        "kind",
        "first_month",
        "last_month",
        "value",
        "note",
    ]
    .iter()
    .enumerate()
    {
        sheet.write_string(0, j as u16, *h).expect("write");
    }
    for (j, v) in ["Product A", "percent-change", "2027-01", "2027-04"]
        .iter()
        .enumerate()
    {
        sheet.write_string(1, j as u16, *v).expect("write");
    }
    sheet.write_number(1, 4, 20.0).expect("write");
    sheet.write_string(1, 5, "scale-up").expect("write");
    book.save(w.path("changes.xlsx")).expect("save");
    let o = run_changes(&w, "changes.xlsx");
    assert!(o.status.success(), "{}", text(&o));
    let f = forecast_rows(&w, "out");
    // As in the CSV test: 105, 110, 115, 120 in Jan-Apr.
    let a = adjusted(&f, "Product A");
    close(a[2], 105.0, "A Jan");
    close(a[5], 120.0, "A Apr");
    assert_eq!(w.manifest("out")["changes_sheet"], "changes");
}

#[test]
fn bad_changes_are_refused_with_file_line_and_column() {
    let cases: [(&str, &[&str]); 6] = [
        (
            "Prodct A,percent-change,2027-01,,10,,,,x",
            &[
                "changes.csv:2",
                "column 'product'",
                "did you mean 'Product A'?",
            ],
        ),
        (
            "Product A,percent-change,2029-01,,10,,,,x",
            &[
                "changes.csv:2",
                "column 'first_month'",
                "outside the projection",
                "2026-11 to 2027-10",
            ],
        ),
        (
            "Product A,percent-chnage,2027-01,,10,,,,x",
            &[
                "changes.csv:2",
                "column 'kind'",
                "did you mean 'percent-change'?",
            ],
        ),
        (
            "Product A,percent-change,2027-01,,-150,,,,x",
            &["changes.csv:2", "column 'value'", "-100 or more"],
        ),
        (
            "Product A,new-from-level,2027-01,,,50,,,x",
            &["changes.csv:2", "has a history in the data"],
        ),
        (
            "Product A,percent-change,2027-05,2027-02,10,,,,x",
            &[
                "changes.csv:2",
                "column 'last_month'",
                "before the first month",
            ],
        ),
    ];
    for (row, want) in cases {
        let w = Workdir::new();
        w.write("changes.csv", format!("{HEADER}{row}\n"));
        let o = run_changes(&w, "changes.csv");
        let out = text(&o);
        assert!(!o.status.success(), "{row}: accepted\n{out}");
        for s in want {
            assert!(out.contains(s), "{row}: missing '{s}' in\n{out}");
        }
        assert!(!out.contains("panicked"), "{out}");
    }
}

#[test]
fn review_scores_the_statistical_and_the_adjusted_forecast() {
    let w = Workdir::new();
    // Past run up to 2026-10; actuals then: A rose to 120 from 2027-01 (as
    // its change said), B stayed at 100 (its change was wrong).
    let a_act: &[f64] = &[100.0, 100.0, 120.0, 120.0, 120.0, 120.0];
    let b_act: &[f64] = &[100.0; 6];
    w.write(
        "data.csv",
        data(&[
            ("Product A", a_act),
            ("Product B", b_act),
            ("Product C", b_act),
        ]),
    );
    w.write("pins.csv", pins());
    w.write(
        "changes.csv",
        format!(
            "{HEADER}Product A,percent-change,2027-01,,20,,,,programme scale-up\nProduct B,percent-change,2027-01,,-30,,,,expected drop\nProduct A,percent-change,2027-09,,10,,,,later\nProduct C,percent-change,2027-06,,50,,,,later still\n"
        ),
    );
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--out",
        "past",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
        "--until",
        "2026-10",
        "--changes",
        "changes.csv",
        "--no-report",
        "--no-workbook",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&["review", "past", "--actuals", "data.csv", "--out", "rev"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // The same figures in the JSON summary.
    let o = w.run(&[
        "--json",
        "review",
        "past",
        "--actuals",
        "data.csv",
        "--out",
        "rev2",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).expect("JSON summary");
    let va = j["changes_value_added"]
        .as_array()
        .expect("changes_value_added")
        .iter()
        .find(|x| x["product"] == "Product A" && x["scored"] == "all changes")
        .expect("A in JSON")
        .clone();
    close(
        va["value_added_points"].as_f64().unwrap_or(f64::NAN),
        100.0 * 80.0 / 680.0,
        "A value added (JSON)",
    );
    let rows = w.read_csv_maps("rev/review_changes.csv");
    let get = |p: &str, what: &str| {
        rows.iter()
            .find(|r| r["product"] == p && r["scored"].starts_with(what))
            .unwrap_or_else(|| panic!("{p} {what} in {rows:?}"))
            .clone()
    };
    // A, all changes, 6 months scored: actual total 100 + 100 + 4 × 120 = 680.
    // Statistical 100 throughout: WAPE = 4 × 20 / 680 = 11.7647%; adjusted
    // 100, 100, 120 × 4 = the actuals: WAPE 0; value added 11.7647 points.
    let a = get("Product A", "all");
    assert_eq!(a["months"], "6");
    close(
        num(&a, "wape_without_pct"),
        100.0 * 80.0 / 680.0,
        "A WAPE statistical",
    );
    close(num(&a, "wape_with_pct"), 0.0, "A WAPE adjusted");
    close(
        num(&a, "value_added_points"),
        100.0 * 80.0 / 680.0,
        "A value added",
    );
    // A's row 2 alone, on the 4 months it touched: before 100, after 120,
    // actual 120: WAPE 4 × 20 / 480 = 16.6667% → 0; value added 16.6667.
    let a2 = get("Product A", "row 2");
    assert_eq!(a2["months"], "4");
    close(
        num(&a2, "value_added_points"),
        100.0 * 80.0 / 480.0,
        "A row 2",
    );
    // B: the −30% made it worse: adjusted 70 in Jan-Apr against 100:
    // WAPE 4 × 30 / 600 = 20%; statistical 0; value added −20 points.
    let b = get("Product B", "all");
    close(num(&b, "value_added_points"), -20.0, "B value added");
    close(num(&b, "bias_with_pct"), -20.0, "B bias adjusted");
    let b3 = get("Product B", "row 3");
    // Row 3 alone, Jan-Apr: 4 × 30 / 400 = 30% → value added −30.
    close(num(&b3, "value_added_points"), -30.0, "B row 3");
    // Changes from 2027-09 (A's row 4) and 2027-06 (C's only row) touch
    // no month with an actual yet (they end 2027-04): not scored, and
    // said so, rather than a value added of 0 that reads as "no effect".
    for (p, what) in [
        ("Product A", "row 4"),
        ("Product C", "all"),
        ("Product C", "row 5"),
    ] {
        let r = get(p, what);
        assert_eq!(r["months"], "0", "{p} {what}");
        assert_eq!(r["value_added_points"], "", "{p} {what}");
        assert!(
            r["not_scored"].starts_with("not scored yet")
                && r["not_scored"].contains("the months scored are 2026-11 to 2027-04"),
            "{p} {what}: {r:?}"
        );
    }
    assert_eq!(a["not_scored"], "", "A's changes are scored");
    assert!(
        out.contains("Product C · all changes: not scored yet"),
        "{out}"
    );
    assert!(out.contains("forecast value added"), "{out}");
}

/// A new product has no statistical forecast (zero): review scores the
/// adjusted forecast in its main table and says so, instead of flagging a
/// zero nobody forecast. Scores by their definitions (MAPE, bias, WAPE as
/// in `src/metrics.rs`; common practice), computed by hand below.
#[test]
fn review_scores_a_new_product_on_its_adjusted_forecast() {
    let w = Workdir::new();
    w.write("data.csv", data(&[]));
    w.write("pins.csv", pins());
    // 60 in 2026-11 rising linearly to 120 in 2027-02, then held:
    // 60, 80, 100, 120, 120, 120.
    w.write(
        "changes.csv",
        format!("{HEADER}Product H,new-from-level,2026-11,2027-02,120,60,,,launch\n"),
    );
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--out",
        "past",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
        "--changes",
        "changes.csv",
        "--no-report",
        "--no-workbook",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let actual = [50.0, 100.0, 100.0, 100.0, 130.0, 110.0];
    let mut actuals = data(&[("Product A", &[100.0; 6])]);
    for (k, v) in actual.iter().enumerate() {
        let (y, m) = (2026 + (10 + k) / 12, (10 + k) % 12 + 1);
        actuals.push_str(&format!("Product H,{y}-{m:02},{v}\n"));
    }
    w.write("actuals.csv", actuals);
    let o = w.run(&[
        "--json",
        "review",
        "past",
        "--actuals",
        "actuals.csv",
        "--out",
        "rev",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    // Errors (adjusted − actual): +10, −20, 0, +20, −10, +10; Σ|e| = 70,
    // Σe = 10, Σ actual = 590.
    let wape = 100.0 * 70.0 / 590.0;
    let bias = 100.0 * 10.0 / 590.0;
    let mape = 100.0 / 6.0 * (10.0 / 50.0 + 0.2 + 0.0 + 0.2 + 10.0 / 130.0 + 10.0 / 110.0);
    let rows = w.read_csv_maps("rev/review.csv");
    let h = rows
        .iter()
        .find(|r| r["product"] == "Product H")
        .expect("H in review.csv");
    assert_eq!(h["model"], "adjusted (new product)", "{h:?}");
    close(num(h, "wape_pct"), wape, "H WAPE");
    close(num(h, "bias_pct"), bias, "H bias");
    close(num(h, "mape_pct"), mape, "H MAPE");
    // A new-from-level range has zero width: no coverage to score, no flag.
    assert_eq!(h["coverage_80_pct"], "", "{h:?}");
    assert_eq!(h["coverage_short"], "", "{h:?}");
    assert_eq!(h["tracking_flag"], "no", "{h:?}");
    assert!(
        h["findings"].starts_with("new product: adjusted forecast scored"),
        "{h:?}"
    );
    // review_changes.csv still sets the statistical zero beside it.
    let ch = w.read_csv_maps("rev/review_changes.csv");
    let all = ch
        .iter()
        .find(|r| r["product"] == "Product H" && r["scored"] == "all changes")
        .expect("H in review_changes.csv");
    close(num(all, "wape_without_pct"), 100.0, "H statistical WAPE");
    close(num(all, "wape_with_pct"), wape, "H adjusted WAPE");
    // The JSON summary, review.json and the page say the same.
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).expect("JSON summary");
    let jh = j["products"]
        .as_array()
        .expect("products")
        .iter()
        .find(|p| p["product"] == "Product H")
        .expect("H in JSON")
        .clone();
    assert_eq!(jh["forecast_scored"], "adjusted");
    assert_eq!(jh["model"], "adjusted (new product)");
    close(
        jh["wape_pct"].as_f64().unwrap_or(f64::NAN),
        wape,
        "H WAPE (JSON)",
    );
    let full: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("rev/review.json")).unwrap()).unwrap();
    let fh = full["products"]
        .as_array()
        .expect("products")
        .iter()
        .find(|p| p["product"] == "Product H")
        .expect("H in review.json")
        .clone();
    assert_eq!(fh["forecast_scored"], "adjusted");
    let page = std::fs::read_to_string(w.path("rev/review.html")).expect("page");
    assert!(page.contains("new product: adjusted forecast scored"));
    // A product with history keeps its statistical forecast.
    let a = rows.iter().find(|r| r["product"] == "Product A").unwrap();
    assert_eq!(a["model"], "naive", "{a:?}");
}

#[test]
fn crosscheck_and_the_report_use_the_adjusted_forecast() {
    let w = Workdir::new();
    w.write(
        "changes.csv",
        format!(
            "{HEADER}Product D,phase-out,2027-01,2027-04,,,,,phase-out\nProduct H,new-from-level,2027-01,,,40,,,new\n"
        ),
    );
    let o = run_changes(&w, "changes.csv");
    assert!(o.status.success(), "{}", text(&o));
    // One morbidity estimate: 1000 people × rate 1 × care seeking 1 ×
    // treated 1 × 1 unit per course = 1000 units.
    w.write(
        "pop.csv",
        "product,group,method,population,rate,care_seeking,treated,quantity_per_course\nProduct D,all,morbidity,1000,1,1,1,1\n",
    );
    let o = w.run(&["crosscheck", "out", "--population", "pop.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("the adjusted forecast is cross-checked"), "{t}");
    // D's adjusted 12 months 2026-11 to 2027-10: 100 + 100 + 75 + 50 + 25 +
    // 7 × 0 = 350 (the statistical total would be 1200); ratio 1000 / 350.
    let cc = w.read_csv_maps("out/crosscheck.csv");
    let row = cc
        .iter()
        .find(|r| r["method"] == "morbidity")
        .expect("morbidity row");
    close(
        num(row, "consumption_forecast"),
        350.0,
        "cross-checked total",
    );
    close(num(row, "ratio_to_consumption"), 1000.0 / 350.0, "ratio");

    // The report: the section, the adjusted line on D's chart (not on A's,
    // which no change touched), and a chart of the new product H.
    let o = w.run(&["report", "out", "--chart-files", "all"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(w.path("out/report.html")).expect("report");
    assert!(html.contains("Known changes ahead"), "no section");
    assert!(html.contains("phase-out"), "no change row");
    let svg_of = |stem: &str| {
        let dir = std::fs::read_dir(w.path("out/charts")).expect("charts");
        let f = dir
            .filter_map(|e| e.ok())
            .map(|e| e.path())
            .find(|p| {
                let n = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
                n.starts_with(stem) && n.ends_with(".svg")
            })
            .unwrap_or_else(|| panic!("no chart {stem}"));
        std::fs::read_to_string(f).expect("svg")
    };
    assert!(svg_of("product-d").contains("adjusted forecast (known changes)"));
    assert!(!svg_of("product-a").contains("adjusted forecast (known changes)"));
    assert!(svg_of("new-product-h").contains("adjusted forecast (known changes)"));

    // The page's own product records: D's carries its adjusted forecast,
    // month by month as forecast.csv has it (offsets from the first
    // history month 2023-11: 2026-11 is offset 36), and its adjusted
    // 12-month total, 350 (above), beside the statistical 1,200; A's, which
    // no change touched, carries neither.
    let d = record(&html, "d-product-d-");
    let a: Vec<(i64, f64)> = d["chart"]["a"]
        .as_array()
        .expect("adjusted series of D")
        .iter()
        .map(|x| (x[0].as_i64().unwrap(), x[1].as_f64().unwrap()))
        .collect();
    let expected = [
        100.0, 100.0, 75.0, 50.0, 25.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
    ];
    assert_eq!(a.len(), expected.len(), "{a:?}");
    for (k, ((off, v), e)) in a.iter().zip(expected).enumerate() {
        assert_eq!(*off, 36 + k as i64);
        close(*v, e, "adjusted month in the chart record");
    }
    let key = |rec: &serde_json::Value, label: &str| -> Option<String> {
        rec["keys"]
            .as_array()?
            .iter()
            .find(|k| k[1] == label)
            .map(|k| k[0].as_str().unwrap_or("").to_string())
    };
    assert_eq!(
        key(&d, "adjusted for known changes, next 12 months").as_deref(),
        Some("350")
    );
    assert_eq!(
        key(&d, "statistical, next 12 months").as_deref(),
        Some("1,200")
    );
    assert!(d["subtitle"]
        .as_str()
        .unwrap()
        .contains("next 12 months: 1,200 statistical, 350 adjusted"));
    let a_rec = record(&html, "d-product-a-");
    assert!(a_rec["chart"].get("a").is_none(), "A has no adjusted line");
    assert!(key(&a_rec, "adjusted for known changes, next 12 months").is_none());
    let index = record(&html, "index-data");
    let row = |p: &str| {
        index
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r[0] == p)
            .unwrap_or_else(|| panic!("no index row {p}"))
            .clone()
    };
    // Field 7 the statistical total, field 11 the adjusted one.
    assert_eq!(row("Product D")[7], 1200.0);
    assert_eq!(row("Product D")[11], 350.0);
    assert!(row("Product A")[11].is_null());
    assert!(html.contains("next 12 months total, adjusted for known changes"));
}

/// The cross-check of a run with known changes compares with the adjusted
/// forecast and says so wherever it shows that forecast: the terminal
/// table's header, the explanations, `crosscheck.csv` (`forecast_used`,
/// the consumption row's basis), `crosscheck.json`, and the report's
/// section intro, table header and chart. A tester saw only "consumption"
/// there, beside the product index's different statistical total. Checked
/// against our own files: D's adjusted 12-month total is 350, its
/// statistical one 1,200.
#[test]
fn the_crosscheck_names_the_adjusted_forecast_it_compares_with() {
    let w = Workdir::new();
    w.write(
        "changes.csv",
        format!("{HEADER}Product D,phase-out,2027-01,2027-04,,,,,phase-out\n"),
    );
    let o = run_changes(&w, "changes.csv");
    assert!(o.status.success(), "{}", text(&o));
    w.write(
        "pop.csv",
        "product,group,method,population,rate,care_seeking,treated,quantity_per_course\nProduct D,all,morbidity,1000,1,1,1,1\n",
    );
    let o = w.run(&["crosscheck", "out", "--population", "pop.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    let head = t
        .lines()
        .find(|l| l.starts_with("product "))
        .unwrap_or_else(|| panic!("no table header in:\n{t}"));
    assert!(head.contains("adjusted forecast"), "{head}");
    let cc = w.read_csv_maps("out/crosscheck.csv");
    assert!(
        cc.iter().all(|r| r["forecast_used"] == "adjusted"),
        "{cc:?}"
    );
    let cons = cc.iter().find(|r| r["method"] == "consumption").unwrap();
    close(num(cons, "quantity"), 350.0, "adjusted total");
    assert!(
        cons["basis"].starts_with("adjusted forecast"),
        "{}",
        cons["basis"]
    );
    let m = cc.iter().find(|r| r["method"] == "morbidity").unwrap();
    // 1000 / 350 = 2.9×.
    assert!(
        m["explanation"].starts_with(
            "morbidity estimate is 2.9× the adjusted consumption forecast (known changes applied)"
        ),
        "{}",
        m["explanation"]
    );
    assert!(t.contains("2.9× the adjusted consumption forecast"), "{t}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/crosscheck.json")).unwrap())
            .unwrap();
    assert_eq!(json["forecast_used"], "adjusted");
    assert_eq!(json["changes_file"], "changes.csv");

    let html = std::fs::read_to_string(w.path("out/report.html")).expect("report");
    let at = html.find("id=\"crosscheck\"").expect("cross-check section");
    let section = &html[at..];
    assert!(
        section.contains("The forecast compared here is <strong>the adjusted forecast</strong>"),
        "no intro"
    );
    assert!(
        section.contains("class=\"num\">adjusted forecast (known changes)"),
        "no table header"
    );
    let svg = std::fs::read_dir(w.path("out/charts"))
        .expect("charts")
        .filter_map(|e| e.ok())
        .find(|e| {
            let n = e.file_name().to_string_lossy().into_owned();
            n.starts_with("crosscheck-product-d") && n.ends_with(".svg")
        })
        .map(|e| std::fs::read_to_string(e.path()).expect("svg"))
        .expect("D's cross-check chart");
    assert!(svg.contains("consumption forecast, adjusted for known changes"));
    assert!(svg.contains("2.9× adjusted forecast"));

    // The same folder forecast again without the changes: the statistical
    // forecast, and the files say that instead.
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--out",
        "out",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&["crosscheck", "out", "--population", "pop.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(!t.contains("adjusted"), "{t}");
    let cc = w.read_csv_maps("out/crosscheck.csv");
    assert!(
        cc.iter().all(|r| r["forecast_used"] == "statistical"),
        "{cc:?}"
    );
    let html = std::fs::read_to_string(w.path("out/report.html")).expect("report");
    assert!(
        html.contains("The forecast compared here is <strong>the statistical forecast</strong>")
    );
}

/// A JSON record of the report page by (the start of) its element id.
fn record(html: &str, id_start: &str) -> serde_json::Value {
    let open = format!("<script type=\"application/json\" id=\"{id_start}");
    let at = html
        .find(&open)
        .unwrap_or_else(|| panic!("no record {id_start}"));
    let start = at + html[at..].find('>').unwrap() + 1;
    let end = start + html[start..].find("</script>").unwrap();
    serde_json::from_str(&html[start..end]).expect("record JSON")
}

/// The demo with its changes and its supply plan: the report's figures
/// agree with the output files beside it (changes_summary.csv,
/// selection.csv, quality.csv, the folder's files).
#[test]
fn the_demo_report_agrees_with_its_files() {
    let w = Workdir::new();
    let demo = |f: &str| repo(&format!("datasets/demo/{f}")).display().to_string();
    let o = w.run(&[
        "forecast",
        &demo("consumption.csv"),
        "--config",
        &demo("run.toml"),
        "--changes",
        &demo("changes.csv"),
        "--out",
        "out",
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[
        "plan",
        "out",
        "--stock",
        &demo("stock.csv"),
        "--on-order",
        &demo("on_order.csv"),
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(w.path("out/report.html")).expect("report");
    let index = record(&html, "index-data");
    let rows = index.as_array().unwrap();

    // 1. Each changed product's adjusted 12-month total in the index is
    // changes_summary.csv's; an unchanged product has none.
    let summary = w.read_csv_maps("out/changes_summary.csv");
    for r in rows {
        let p = r[0].as_str().unwrap();
        match summary.iter().find(|s| s["product"] == p) {
            Some(s) => {
                // Whole units from 1,000 up, four significant digits below.
                let want = num(s, "adjusted_months_1_12");
                let got = r[11].as_f64().unwrap_or(f64::NAN);
                assert!((got - want).abs() <= 0.5, "{p}: {got} vs {want}");
            }
            None => assert!(r[11].is_null(), "{p}"),
        }
    }

    // 2. The pinned product: its runner-up is "clearly" better when the
    // selection reason says the backtest's own choice was clearly better,
    // and its score is the pinned model's, not the one it was chosen by.
    let sel = w.read_csv_maps("out/selection.csv");
    let pinned = sel.iter().find(|s| s["pinned"] == "yes").expect("a pin");
    let d = record(
        &html,
        &format!("d-{}", provisio::chart::file_stem(&pinned["product"])),
    );
    let labels: Vec<String> = d["keys"]
        .as_array()
        .unwrap()
        .iter()
        .map(|k| k[1].as_str().unwrap().to_string())
        .collect();
    let runner = labels
        .iter()
        .find(|l| l.starts_with("runner-up"))
        .expect("runner-up key");
    assert!(pinned["reason"].contains("clearly better"), "{pinned:?}");
    assert!(pinned["runner_up"] == pinned["best_model"]);
    assert!(num(pinned, "margin_pct") < 0.0);
    assert!(runner.contains("clearly better"), "{runner}");
    assert!(!runner.contains("without clear evidence"), "{runner}");
    assert!(runner.contains("pinned"), "{runner}");
    assert!(
        !labels.iter().any(|l| l.contains("(chosen by)")),
        "{labels:?}"
    );

    // 3. "Weakest data": not fit, then fit with care, each by months
    // missing (quality.csv months_missing + months_stocked_out_too_long),
    // most first.
    let quality = w.read_csv_maps("out/quality.csv");
    let missing = |p: &str| {
        let q = quality.iter().find(|q| q["product"] == p).unwrap();
        (num(q, "months_missing") + num(q, "months_stocked_out_too_long")) as i64
    };
    let start = html.find("<h3>Weakest data").expect("weakest data list");
    let list = &html[start..start + html[start..].find("</ol>").unwrap()];
    let listed: Vec<String> = list
        .split("<li><a href=\"")
        .skip(1)
        .map(|li| {
            let s = li.find('>').unwrap() + 1;
            li[s..s + li[s..].find("</a>").unwrap()]
                .replace("&amp;", "&")
                .to_string()
        })
        .collect();
    assert!(listed.len() >= 3, "{listed:?}");
    let verdict = |p: &str| {
        let v = &quality.iter().find(|q| q["product"] == p).unwrap()["verdict"];
        (v != "not fit") as u8
    };
    for pair in listed.windows(2) {
        let (a, b) = (&pair[0], &pair[1]);
        assert!(
            (verdict(a), -missing(a)) <= (verdict(b), -missing(b)),
            "{a} ({}) listed before {b} ({})",
            missing(a),
            missing(b)
        );
    }
    assert!(list.contains("months_missing + months_stocked_out_too_long"));

    // 4. Every data file in the folder is linked from the summary.
    for e in std::fs::read_dir(w.path("out")).unwrap() {
        let f = e.unwrap().file_name().to_string_lossy().into_owned();
        let data = [".csv", ".json", ".xlsx"].iter().any(|x| f.ends_with(x));
        if data {
            assert!(html.contains(&format!("href=\"{f}\"")), "{f} not linked");
        }
    }
}

/// With known changes the Annual totals sheet totals the adjusted forecast
/// and says so in its header and note; its packs are of that total, while
/// forecast.csv's `packs` column stays that of the statistical forecast
/// beside it (README, "Working in spreadsheets").
#[test]
fn the_annual_totals_sheet_is_of_the_adjusted_forecast() {
    use calamine::{Data, DataType, Reader};
    let w = Workdir::new();
    w.write(
        "changes.csv",
        format!("{HEADER}Product D,phase-out,2027-01,2027-04,,,,,phase-out\n"),
    );
    w.write(
        "run.toml",
        "[products.\"Product D\"]\nunits = \"bottle\"\npack_size = 10\n",
    );
    w.write("data.csv", data(&[]));
    w.write("pins.csv", pins());
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--config",
        "run.toml",
        "--out",
        "out",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
        "--changes",
        "changes.csv",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    // forecast.csv: packs = statistical forecast ÷ pack size = 100 ÷ 10;
    // adjusted_packs = adjusted forecast ÷ pack size = 50 ÷ 10.
    let f = forecast_rows(&w, "out");
    let d = &f[&("Product D".to_string(), "2027-02".to_string())];
    close(num(d, "adjusted"), 50.0, "D Feb adjusted");
    close(num(d, "packs"), 10.0, "D Feb packs");
    close(num(d, "adjusted_packs"), 5.0, "D Feb adjusted packs");

    let mut book = calamine::open_workbook_auto(w.path("out/forecast.xlsx")).expect("workbook");
    let sheet = book.worksheet_range("Annual totals").expect("sheet");
    let note = sheet.get((0, 0)).map(|c| c.to_string()).unwrap_or_default();
    assert!(
        note.starts_with("adjusted forecast (known changes applied"),
        "{note}"
    );
    let head = (0..sheet.height())
        .find(|&r| sheet.get((r, 0)) == Some(&Data::String("product".into())))
        .expect("header");
    let header: Vec<String> = (0..sheet.width())
        .map(|c| {
            sheet
                .get((head, c))
                .map(|d| d.to_string())
                .unwrap_or_default()
        })
        .collect();
    let col = |n: &str| {
        header
            .iter()
            .position(|h| h == n)
            .unwrap_or_else(|| panic!("{n}: {header:?}"))
    };
    let row = (head + 1..sheet.height())
        .find(|&r| {
            sheet.get((r, 0)) == Some(&Data::String("Product D".into()))
                && sheet
                    .get((r, col("year")))
                    .map(|d| d.to_string())
                    .as_deref()
                    == Some("2027")
        })
        .expect("D 2027");
    let cell = |c: usize| {
        sheet
            .get((row, c))
            .and_then(|d| d.as_f64())
            .unwrap_or(f64::NAN)
    };
    // 2027-01 to 2027-10 adjusted: 75 + 50 + 25 + 0 × 7 = 150 (the
    // statistical total would be 10 × 100 = 1,000); packs 150 ÷ 10 = 15.
    close(cell(col("adjusted_total")), 150.0, "D 2027 adjusted total");
    close(cell(col("months")), 10.0, "D 2027 months");
    close(cell(col("packs")), 15.0, "D 2027 packs");
}

/// A forecast run again into the same folder without `--changes` retires
/// the earlier run's `changes_applied.csv` and `changes_summary.csv`, as it
/// retires an earlier plan, and says so; the report and the workbook then
/// show no known changes. A tester saw the old files stay in the folder:
/// the report kept a "Known changes ahead" section with an empty file name
/// and hash and the old adjusted totals, and the workbook its "Known
/// changes" sheet. Checked here against our own output files.
#[test]
fn a_run_without_changes_retires_the_earlier_runs_changes_files() {
    use calamine::Reader;
    let w = Workdir::new();
    w.write(
        "changes.csv",
        format!("{HEADER}Product D,phase-out,2027-01,2027-04,,,,,phase-out\n"),
    );
    w.write("data.csv", data(&[]));
    w.write("pins.csv", pins());
    let base = [
        "forecast",
        "data.csv",
        "--out",
        "out",
        "--horizon",
        "12",
        "--pin",
        "pins.csv",
    ];
    let with: Vec<&str> = base
        .iter()
        .copied()
        .chain(["--changes", "changes.csv"])
        .collect();
    let o = w.run(&with);
    assert!(o.status.success(), "{}", text(&o));
    assert!(w.path("out/changes_summary.csv").exists());

    let o = w.run(&base);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("moved 2 file(s) of the known changes an earlier run applied (changes_applied.csv, changes_summary.csv)"),
        "{t}"
    );
    for f in ["changes_applied.csv", "changes_summary.csv"] {
        assert!(
            !w.path(&format!("out/{f}")).exists(),
            "{f} left beside the new forecast"
        );
        assert!(
            w.path(&format!("out/retired/{f}")).exists(),
            "{f} not retired"
        );
    }
    let no_changes_shown = |when: &str| {
        let html = std::fs::read_to_string(w.path("out/report.html")).expect("report");
        assert!(
            !html.contains("id=\"changes\""),
            "{when}: a known-changes section"
        );
        assert!(
            !html.contains("href=\"#changes\""),
            "{when}: a known-changes link"
        );
        assert!(
            !html.contains("href=\"changes_summary.csv\""),
            "{when}: linked"
        );
        // Product D's adjusted total (350) is not beside its statistical one.
        let index = record(&html, "index-data");
        let d = index
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r[0] == "Product D")
            .expect("D in the index")
            .clone();
        assert!(d[11].is_null(), "{when}: adjusted total {}", d[11]);
        let book = calamine::open_workbook_auto(w.path("out/forecast.xlsx")).expect("workbook");
        let names = book.sheet_names();
        assert!(
            !names.iter().any(|n| n == "Known changes"),
            "{when}: {names:?}"
        );
    };
    no_changes_shown("after the run without changes");
    // A third run has nothing to retire and says nothing about it.
    let o = w.run(&base);
    assert!(o.status.success(), "{}", text(&o));
    assert!(
        !text(&o).contains("known changes an earlier run"),
        "{}",
        text(&o)
    );

    // Belt and braces: changes files in the folder that manifest.json does
    // not name (put back by hand, or left by an older provisio) are not
    // read by `report`.
    for f in ["changes_applied.csv", "changes_summary.csv"] {
        std::fs::copy(
            w.path(&format!("out/retired/{f}")),
            w.path(&format!("out/{f}")),
        )
        .expect("copy back");
    }
    let o = w.run(&["report", "out"]);
    assert!(o.status.success(), "{}", text(&o));
    no_changes_shown("`report` on a folder with stray changes files");
}
