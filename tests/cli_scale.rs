//! The commands that read a forecast's output folder work on a large one:
//! the committed report fixture with its four products repeated 250 times
//! (1,000 products, invented demo data) stands for a large run's folder.

mod common;

use common::{run_in, text};

/// `report`, `review`, `plan` and `crosscheck` on a folder of 1,000
/// products: each succeeds, and the report holds every product once.
#[test]
fn commands_work_on_a_large_run_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("out");
    let names = common::large_folder(&dir, 250);
    assert_eq!(names.len(), 1000);

    let o = run_in(tmp.path(), &["report", "out"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    // One index row and one detail record per product; no chart files
    // unless asked for; the first view lists the products that need
    // attention (the fixture has a warned product and weak data).
    assert_eq!(
        html.matches("<script type=\"application/json\" id=\"d-")
            .count(),
        1000
    );
    let start = html.find("id=\"index-data\">").unwrap() + "id=\"index-data\">".len();
    let end = start + html[start..].find("</script>").unwrap();
    let index: serde_json::Value = serde_json::from_str(&html[start..end]).unwrap();
    assert_eq!(index.as_array().unwrap().len(), 1000);
    assert!(!dir.join("charts").exists());
    assert!(html.contains("id=\"attention\""));
    assert!(
        !html.contains("data-all=\"yes\""),
        "details drawn on demand"
    );
    // A report of 1,000 products stays small: about 3 kB per product.
    let size = std::fs::metadata(dir.join("report.html")).unwrap().len();
    assert!(size < 8_000_000, "{size} bytes");
    // The workbook, rebuilt beside it, has the 1,000 products too.
    assert!(dir.join("forecast.xlsx").is_file());

    // review: actuals for a few of the products, months after the data.
    let mut actuals = String::from("product,month,consumed\n");
    for p in names.iter().step_by(125) {
        for m in 11..=12 {
            actuals.push_str(&format!("\"{}\",2026-{m:02},100\n", p.replace('"', "\"\"")));
        }
    }
    std::fs::write(tmp.path().join("actuals.csv"), actuals).unwrap();
    let o = run_in(
        tmp.path(),
        &["review", "out", "--actuals", "actuals.csv", "--out", "rev"],
    );
    assert!(o.status.success(), "{}", text(&o));
    assert!(tmp.path().join("rev/review.csv").is_file());

    // plan: a stock file for one product; the others are named in a
    // warning each, and the report is rebuilt with the plan.
    let zinc = names
        .iter()
        .find(|n| n.starts_with("Zinc"))
        .unwrap()
        .clone();
    std::fs::write(
        tmp.path().join("stock.csv"),
        format!("product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost,shelf_life_months,emergency_months\n{zinc},900,2026-10,3,3,6,3,100,0.12,,\n"),
    )
    .unwrap();
    let o = run_in(tmp.path(), &["plan", "out", "--stock", "stock.csv"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(text(&o).contains("planned 1 series"), "{}", text(&o));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert!(html.contains("id=\"plan\""));

    // crosscheck: a population estimate for the same product; the report
    // is rebuilt with its section.
    std::fs::write(
        tmp.path().join("pop.csv"),
        format!("product,group,method,population,group_share,rate,care_seeking,treated,quantity_per_course\n{zinc},under 5,morbidity,1000000,0.15,0.5,0.6,0.9,10\n"),
    )
    .unwrap();
    let o = run_in(
        tmp.path(),
        &["crosscheck", "out", "--population", "pop.csv"],
    );
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert!(html.contains("id=\"crosscheck\""));
}
