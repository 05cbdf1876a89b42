//! End-to-end tests of `provisio crosscheck`: the real binary compares a
//! forecast directory with services and population inputs, writes
//! `crosscheck.csv` and the report section, and refuses bad inputs with the
//! file, line and column.

mod common;

use std::collections::BTreeMap;

use common::{repo, text, Workdir};

fn demo(name: &str) -> String {
    repo("datasets/demo").join(name).display().to_string()
}

fn num(row: &BTreeMap<String, String>, col: &str) -> f64 {
    row[col]
        .parse()
        .unwrap_or_else(|_| panic!("{col}: {:?}", row[col]))
}

fn find<'a>(
    rows: &'a [BTreeMap<String, String>],
    product: &str,
    method: &str,
) -> &'a BTreeMap<String, String> {
    rows.iter()
        .find(|r| r["product"].starts_with(product) && r["method"] == method)
        .unwrap_or_else(|| panic!("no row {product} {method}"))
}

/// A hand-made forecast directory: 12 months of `monthly` ± 10% per product.
fn fake_forecast(w: &Workdir, products: &[(&str, f64)]) {
    let mut f = String::from("product,month,model,forecast,lower_80,upper_80,lower_95,upper_95\n");
    for (p, v) in products {
        for m in 1..=12 {
            f.push_str(&format!(
                "\"{p}\",2027-{m:02},naive,{v},{},{},0,{}\n",
                v * 0.9,
                v * 1.1,
                v * 2.0
            ));
        }
    }
    w.write("fc/forecast.csv", &f);
    w.write(
        "fc/manifest.json",
        r#"{"tool":"provisio test","forecast_settings":{"backtest":{"origins":3,"horizon":6,"exclude_imputed":true},"select":{"score":"mape","tie_margin":0.1},"horizon":12}}"#,
    );
}

const AL_BANDS: &str =
    "product,group,method,population,group_share,rate,care_seeking,treated,quantity_per_course\n\
AL,5-14 kg,morbidity,1000000,0.20,0.30,0.60,0.90,6\n\
AL,15-24 kg,morbidity,1000000,0.15,0.30,0.60,0.90,12\n\
AL,25-34 kg,morbidity,1000000,10%,30%,60%,90%,18\n\
AL,over 34 kg,morbidity,1000000,0.55,0.30,0.60,0.90,24\n";

#[test]
fn artemether_lumefantrine_worked_check_end_to_end() {
    // Course from WHO Guidelines for the Treatment of Malaria, 2nd ed.
    // (2010): 6 doses of 1/2/3/4 tablets by weight band. Population and
    // band split constructed (not a published example): 162,000 courses,
    // 2,916,000 tablets. Consumption made to be 2,000,000 tablets a year.
    let w = Workdir::new();
    fake_forecast(&w, &[("AL", 2_000_000.0 / 12.0)]);
    w.write("pop.csv", AL_BANDS);
    let o = w.run(&["crosscheck", "fc", "--population", "pop.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("fc/crosscheck.csv");
    let c = find(&rows, "AL", "consumption");
    assert!((num(c, "quantity") - 2_000_000.0).abs() < 1e-3);
    // Months independent: 2,000,000 ± √12 × 16,667; sum of bounds: ± 200,000.
    assert!((num(c, "consumption_high80_sum_of_bounds") - 2_200_000.0).abs() < 1e-3);
    let narrow = 2_000_000.0 + 12f64.sqrt() * 2_000_000.0 / 12.0 * 0.1;
    assert!((num(c, "consumption_high80_independent") - narrow).abs() < 1e-2);
    let m = find(&rows, "AL", "morbidity");
    assert!((num(m, "quantity") - 2_916_000.0).abs() < 1e-6, "{m:?}");
    assert_eq!(m["ratio_to_consumption"], "1.458");
    assert_eq!(m["flag"], "above");
    assert!(m["explanation"].contains("1.5× consumption: possible unmet need"));
    // The first band: 1,000,000 × 0.2 × 0.3 × 0.6 × 0.9 = 32,400 courses
    // of 6 tablets.
    assert!(
        m["basis"].contains("= 32,400 courses × 6 per course = 194,400"),
        "{}",
        m["basis"]
    );
    assert_eq!(m["period_start"], "2027-01");
    assert_eq!(m["period_end"], "2027-12");
    let out = text(&o);
    assert!(
        out.contains("morbidity") && out.contains("2,916,000"),
        "{out}"
    );
    // A period the forecast covers only in part: no comparison, a warning.
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--population",
        "pop.csv",
        "--no-report",
        "--start",
        "2027-06",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(
        text(&o).contains("covers 7 of the 12 months 2027-06 to 2028-05"),
        "{}",
        text(&o)
    );
    let m = find(&w.read_csv_maps("fc/crosscheck.csv"), "AL", "morbidity").clone();
    assert_eq!(
        (m["flag"].as_str(), m["period_end"].as_str()),
        ("no-comparison", "2028-05")
    );
    let e = text(&w.run(&[
        "crosscheck",
        "fc",
        "--population",
        "pop.csv",
        "--start",
        "June",
    ]));
    assert!(e.contains("invalid setting start: 'June'"), "{e}");
    // A threshold of 0.5 makes the same ratio agree.
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--population",
        "pop.csv",
        "--no-report",
        "--threshold",
        "0.5",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(
        find(&w.read_csv_maps("fc/crosscheck.csv"), "AL", "morbidity")["flag"],
        "agrees"
    );
}

#[test]
fn demographic_rows_use_the_cyp_table_or_an_override() {
    // USAID CYP conversion factors (updated August 2021): 120 condoms and
    // 4 injections per CYP, so one user a year needs 120 and 4.
    // 100,000 women × 0.30 × 0.25 × 0.8 = 6,000 users.
    let w = Workdir::new();
    fake_forecast(&w, &[("Condom", 60_000.0), ("Injectable", 2_000.0)]);
    w.write(
        "pop.csv",
        "product;method;population;rate;method_share;public_share;cyp_method\n\
         Condom;demographic;100000;0.30;0.25;0.8;condom\n\
         Injectable;demographic;100000;0.30;0.25;0.8;injectable-3-month\n",
    );
    let o = w.run(&["crosscheck", "fc", "--population", "pop.csv", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("fc/crosscheck.csv");
    let c = find(&rows, "Condom", "demographic");
    assert!((num(c, "quantity") - 720_000.0).abs() < 1e-6);
    assert_eq!(c["flag"], "agrees");
    let i = find(&rows, "Injectable", "demographic");
    assert!((num(i, "quantity") - 24_000.0).abs() < 1e-6);
    assert!(i["basis"].contains("USAID CYP conversion factors, updated August 2021"));
    // A local table: 100 condoms per CYP.
    w.write(
        "cyp.csv",
        "method,units_per_cyp,source\ncondom,100,national guideline (test)\n",
    );
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--population",
        "pop.csv",
        "--cyp",
        "cyp.csv",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let c2 = find(
        &w.read_csv_maps("fc/crosscheck.csv"),
        "Condom",
        "demographic",
    )
    .clone();
    assert!((num(&c2, "quantity") - 600_000.0).abs() < 1e-6);
    assert!(c2["basis"].contains("national guideline (test)"));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("fc/crosscheck.json")).unwrap())
            .unwrap();
    assert_eq!(json["cyp_override"], "cyp.csv");
    assert_eq!(json["threshold"], 0.25);
}

/// The numbers in the bases are written as the table beside them writes
/// its quantities: thousands grouped, no trailing zeros, "1 unit" in the
/// singular. A tester saw "1500000 people … = 116944", "× 4.0000 units per
/// user-year" and "1 units per service" beside a table showing 116,944.
/// Checked against our own output; the figures are the ones the bases
/// compute (USAID CYP factors, updated August 2021: 4 injections per CYP).
#[test]
fn the_bases_write_their_figures_as_the_table_does() {
    let w = Workdir::new();
    fake_forecast(
        &w,
        &[
            ("AL", 250_000.0),
            ("Injectable", 2_000.0),
            ("Test kit", 1_000.0),
        ],
    );
    w.write(
        "pop.csv",
        "product,group,method,population,group_share,rate,care_seeking,treated,quantity_per_course,method_share,public_share,cyp_method,loss_allowance\n\
         AL,over 34 kg,morbidity,1500000,0.55,0.25,0.6,0.9,1,,,,0.05\n\
         Injectable,,demographic,100000,,0.30,,,,0.25,0.8,injectable-3-month,\n",
    );
    let mut s = String::from("product,month,services,units_per_service,allowance\n");
    for k in 0..36 {
        let m = format!("{}-{:02}", 2024 + k / 12, k % 12 + 1);
        s.push_str(&format!("Test kit,{m},900,1,10%\n"));
    }
    w.write("services.csv", &s);
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--population",
        "pop.csv",
        "--services",
        "services.csv",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("fc/crosscheck.csv");
    // 1,500,000 × 0.55 × 0.25 × 0.6 × 0.9 = 111,375 courses; × 1.05 =
    // 116,943.75, shown 116,944.
    let al = &find(&rows, "AL", "morbidity")["basis"];
    assert_eq!(
        al,
        "over 34 kg: 1,500,000 people × 0.55 group share × 0.25 rate × 0.6 seeking care × 0.9 treated = 111,375 courses × 1 per course × (1 + 0.05 loss) = 116,944"
    );
    // 100,000 × 0.3 × 0.25 × 0.8 = 6,000 users × 4 doses = 24,000.
    let inj = &find(&rows, "Injectable", "demographic")["basis"];
    assert!(
        inj.starts_with("100,000 women × 0.3 prevalence × 0.25 method share × 0.8 public share = 6,000 users × 4 units per user-year (1 / 0.25 CYP per dose"),
        "{inj}"
    );
    assert!(inj.ends_with("= 24,000"), "{inj}");
    let kit = &find(&rows, "Test kit", "services")["basis"];
    assert!(
        kit.contains("× 1 unit per service × (1 + 0.1 allowance"),
        "{kit}"
    );
}

#[test]
fn bad_inputs_are_refused_or_logged() {
    let w = Workdir::new();
    fake_forecast(&w, &[("AL", 100.0)]);
    // A bad share refuses the population file, naming line and column.
    w.write(
        "pop.csv",
        AL_BANDS.replace("1000000,0.15,0.30", "1000000,0.15,abc"),
    );
    let o = w.run(&["crosscheck", "fc", "--population", "pop.csv", "--no-report"]);
    assert_eq!(o.status.code(), Some(1));
    let e = text(&o);
    assert!(
        e.contains("pop.csv:3: column 'rate'")
            && e.contains("not a number; expected a rate from 0 to 10"),
        "{e}"
    );
    assert!(!w.path("fc/crosscheck.csv").exists());
    // A plain 60 for a share is refused with the hint to write 60%.
    w.write(
        "pop.csv",
        AL_BANDS.replace("0.20,0.30,0.60", "0.20,0.30,60"),
    );
    let e = text(&w.run(&["crosscheck", "fc", "--population", "pop.csv"]));
    assert!(
        e.contains("column 'care_seeking'") && e.contains("% sign"),
        "{e}"
    );
    // An unknown CYP method lists the known ones.
    w.write("pop.csv", "product,method,population,rate,method_share,cyp_method\nX,demographic,1000,0.3,0.5,patch\n");
    let e = text(&w.run(&["crosscheck", "fc", "--population", "pop.csv"]));
    assert!(
        e.contains("'patch' is not in the CYP table") && e.contains("implant-3-year"),
        "{e}"
    );
    // Missing columns are named with the ones that are required.
    w.write("pop.csv", "product,method,rate\nAL,morbidity,0.3\n");
    let e = text(&w.run(&["crosscheck", "fc", "--population", "pop.csv"]));
    assert!(e.contains("missing required column 'population'"), "{e}");
    // Neither input: a usage error.
    assert_eq!(w.run(&["crosscheck", "fc"]).status.code(), Some(2));
    // Not a forecast directory.
    let e = text(&w.run(&["crosscheck", "nowhere", "--population", "pop.csv"]));
    assert!(e.contains("nowhere: not a directory"), "{e}");
}

#[test]
fn services_rows_rejected_and_unforecast_products_listed() {
    let w = Workdir::new();
    fake_forecast(&w, &[("Test kit", 1_000.0)]);
    let mut s = String::from("product,month,services,units_per_service,allowance\n");
    for k in 0..36 {
        let m = format!("{}-{:02}", 2024 + k / 12, k % 12 + 1);
        s.push_str(&format!("Test kit,{m},{},1,10%\n", 900 + (k % 3) * 10));
        s.push_str(&format!("Other kit,{m},50,2,0\n"));
    }
    s.push_str("Test kit,2026/13,5,1,0\n");
    s.push_str("Test kit,2025-01,5,1,0\n");
    w.write("services.csv", &s);
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--services",
        "services.csv",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let out = text(&o);
    assert!(
        out.contains("services rows read: 74 = 72 accepted + 2 rejected"),
        "{out}"
    );
    assert!(
        out.contains("'Other kit' has services or population figures but no consumption forecast"),
        "{out}"
    );
    let rej = w.read_csv_maps("fc/crosscheck_rejected.csv");
    assert_eq!(rej.len(), 2);
    assert_eq!(rej[0]["column"], "month");
    assert!(rej[1]["reason"].contains("a second row"), "{:?}", rej[1]);
    let rows = w.read_csv_maps("fc/crosscheck.csv");
    let t = find(&rows, "Test kit", "services");
    // About 910 tests a month × 1.1 kits over 2027: near 12,000 kits.
    let q = num(t, "quantity");
    assert!((10_000.0..14_000.0).contains(&q), "{q}");
    assert!(t["basis"].contains("projected with"), "{}", t["basis"]);
    let o2 = find(&rows, "Other kit", "services");
    assert_eq!(o2["flag"], "no-comparison");
    assert!((num(o2, "quantity") - 1_200.0).abs() < 1.0, "{o2:?}");
    let sm = w.read_csv_maps("fc/crosscheck_services.csv");
    assert_eq!(sm.iter().filter(|r| r["product"] == "Test kit").count(), 12);
}

#[test]
fn demo_crosscheck_writes_csv_charts_and_report_section() {
    let w = Workdir::new();
    let o = w.run(&[
        "forecast",
        &demo("consumption.csv"),
        "--out",
        "out",
        "--origins",
        "4",
        "--backtest-horizon",
        "6",
        "--horizon",
        "12",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[
        "crosscheck",
        "out",
        "--services",
        &demo("services.csv"),
        "--population",
        &demo("population.csv"),
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("out/crosscheck.csv");
    // Invented demo figures: 1,500,000 × 0.55 × 0.25 × 0.6 × 0.9 × 1.05 packs.
    let al = find(&rows, "Artemether", "morbidity");
    assert!((num(al, "quantity") - 116_943.75).abs() < 1e-6);
    assert_eq!(al["flag"], "above");
    // 360,000 × 0.28 × 0.04 × 0.64 × 120 condoms.
    let condom = find(&rows, "Male condom", "demographic");
    assert!((num(condom, "quantity") - 309_657.6).abs() < 1e-6);
    assert_eq!(condom["flag"], "below");
    assert!(num(condom, "ratio_to_consumption") < 0.75);
    let rdt = find(&rows, "Malaria rapid", "services");
    assert!(num(rdt, "quantity") > 0.0);
    let html = std::fs::read_to_string(w.path("out/report.html")).unwrap();
    assert!(html.contains("id=\"crosscheck\""));
    assert!(html.contains("href=\"#crosscheck\""));
    assert!(html.contains("morbidity estimate is") && html.contains("possible unmet need"));
    let charts: Vec<String> = std::fs::read_dir(w.path("out/charts"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with("crosscheck-"))
        .collect();
    assert_eq!(charts.len(), 10, "{charts:?}");
    // `provisio report` keeps the section.
    let o = w.run(&["report", "out"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(w.path("out/report.html")).unwrap();
    assert!(html.contains("id=\"crosscheck\""));
    assert!(!html.contains("forecast.csv has changed"));
    // A changed forecast.csv (here one blank line more) is pointed out.
    let mut f = std::fs::read(w.path("out/forecast.csv")).unwrap();
    f.push(b'\n');
    std::fs::write(w.path("out/forecast.csv"), f).unwrap();
    let o = w.run(&["report", "out"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(w.path("out/report.html")).unwrap();
    assert!(html.contains("forecast.csv has changed since this cross-check was made"));
}

#[test]
fn a_decimal_comma_in_services_is_refused_without_advising_an_option_crosscheck_lacks() {
    // Common practice: an error message advises only what the command
    // accepts; crosscheck reads plain numbers and has no --numbers.
    let w = Workdir::new();
    fake_forecast(&w, &[("Test kit", 1_000.0)]);
    let mut s = String::from("product,month,services,units_per_service\n");
    for k in 0..12 {
        s.push_str(&format!("Test kit,2026-{:02},900,1\n", k + 1));
    }
    s.push_str("Test kit,2025-12,\"900,5\",1\n");
    w.write("services.csv", &s);
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--services",
        "services.csv",
        "--no-report",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains("services rows read: 13 = 12 accepted + 1 rejected"),
        "{out}"
    );
    assert!(out.contains("'900,5' is not a plain number"), "{out}");
    assert!(!out.contains("--numbers"), "{out}");
}

#[test]
fn a_start_before_the_forecast_names_the_first_month_that_works() {
    // Common practice: a message says what would work. The forecast runs
    // 2027-01 to 2027-12; a period from 2026-06 lies partly before it.
    let w = Workdir::new();
    fake_forecast(&w, &[("Test kit", 1_000.0)]);
    let mut s = String::from("product,month,services,units_per_service\n");
    for k in 0..12 {
        s.push_str(&format!("Test kit,2026-{:02},900,1\n", k + 1));
    }
    w.write("services.csv", &s);
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--services",
        "services.csv",
        "--start",
        "2026-06",
        "--no-report",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains("the period starts before the forecast's first month 2027-01: choose --start 2027-01 or later"),
        "{out}"
    );
}

#[test]
fn a_product_typed_in_another_case_is_named_with_the_forecast_spelling() {
    // Common practice: population sheets are typed by hand; a name that
    // differs from forecast.csv only in case gets the forecast's spelling.
    let w = Workdir::new();
    fake_forecast(&w, &[("Artemether-lumefantrine", 100_000.0)]);
    w.write(
        "pop.csv",
        AL_BANDS.replace("AL,", "artemether-LUMEFANTRINE,"),
    );
    let o = w.run(&["crosscheck", "fc", "--population", "pop.csv", "--no-report"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("product 'artemether-LUMEFANTRINE' has services or population figures but no consumption forecast; did you mean 'Artemether-lumefantrine'?"),
        "{t}"
    );
}

#[test]
fn misspelt_columns_and_values_a_method_does_not_use_are_not_ignored() {
    // Common practice: hand-typed headers and rows. A misspelt optional
    // column (here the demo's loss allowance, which moves the
    // artemether-lumefantrine estimate from 116,944 to 111,375) is refused
    // with the right name; a column of the user's own is warned and kept in
    // crosscheck.json; a value in another method's column is refused.
    let w = Workdir::new();
    fake_forecast(&w, &[("AL", 100_000.0), ("RDT", 1_000.0)]);
    let pop = AL_BANDS.replace(
        "quantity_per_course\n",
        "quantity_per_course,loss_alowance\n",
    );
    w.write("pop.csv", &pop);
    let o = w.run(&["crosscheck", "fc", "--population", "pop.csv", "--no-report"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    let e = text(&o);
    assert!(
        e.contains("pop.csv:1: column 'loss_alowance'")
            && e.contains("did you mean 'loss_allowance'?"),
        "{e}"
    );
    assert!(!w.path("fc/crosscheck.csv").exists());
    let mut s = String::from("product,month,services,units_per_service,reportingrate\n");
    for k in 0..24 {
        s.push_str(&format!(
            "RDT,{}-{:02},900,1,90%\n",
            2025 + k / 12,
            k % 12 + 1
        ));
    }
    w.write("services.csv", &s);
    let e = text(&w.run(&["crosscheck", "fc", "--services", "services.csv"]));
    assert!(
        e.contains("services.csv:1: column 'reportingrate'")
            && e.contains("did you mean 'reporting_rate'?"),
        "{e}"
    );
    w.write(
        "pop.csv",
        AL_BANDS
            .replace("quantity_per_course\n", "quantity_per_course,source\n")
            .replace(",6\n", ",6,survey 2024\n"),
    );
    let o = w.run(&["crosscheck", "fc", "--population", "pop.csv", "--no-report"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    let warned = "pop.csv: column(s) 'source' not used by crosscheck and ignored";
    assert!(t.contains(warned), "{t}");
    let json = std::fs::read_to_string(w.path("fc/crosscheck.json")).unwrap();
    assert!(json.contains(warned), "{json}");
    w.write(
        "pop.csv",
        "product,method,population,rate,care_seeking,treated,quantity_per_course,method_share\n\
         AL,morbidity,1000000,0.3,0.6,0.9,24,0.5\n",
    );
    let e = text(&w.run(&["crosscheck", "fc", "--population", "pop.csv"]));
    assert!(
        e.contains("pop.csv:2: column 'method_share'")
            && e.contains("on a morbidity row")
            && e.contains("the morbidity method uses population, rate, group_share"),
        "{e}"
    );
}

#[test]
fn a_misspelt_services_product_without_an_estimate_is_flagged_no_comparison() {
    // The README: a product in the services file but not in the forecast
    // gets rows of its own, flagged no-comparison, never dropped silently;
    // here its services are all empty, so no estimate can be made.
    let w = Workdir::new();
    fake_forecast(&w, &[("Test kit", 1_000.0)]);
    let mut s = String::from("product,month,services,units_per_service\n");
    for k in 0..12 {
        s.push_str(&format!("Test kit,2026-{:02},900,1\n", k + 1));
        s.push_str(&format!("Tset kit,2026-{:02},,1\n", k + 1));
    }
    w.write("services.csv", &s);
    let o = w.run(&[
        "crosscheck",
        "fc",
        "--services",
        "services.csv",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("fc/crosscheck.csv");
    let r = find(&rows, "Tset kit", "services");
    assert_eq!(r["quantity"], "");
    assert_eq!(r["flag"], "no-comparison", "{r:?}");
    assert!(r["basis"].contains("no services estimate"), "{r:?}");
}
