//! The demo (datasets/demo/, an invented scenario) is one consistent
//! scenario: every file counts a product in the same unit and the same
//! pack size, so the quantities of one file make sense beside another's.
//!
//! These checks are about the invented demo data itself (no outside
//! reference applies); the ranges are plausibility bounds of the trade
//! (common practice: stock and shipments of a few weeks to two years of
//! consumption), wide enough to pass any sane invented scenario and narrow
//! enough to catch one file counting tablets where another counts courses
//! (×24) or cartons where another counts pieces.

mod common;

use std::collections::{BTreeMap, HashMap};

use common::{repo, text, Workdir};

type Rows = Vec<BTreeMap<String, String>>;

/// A demo CSV as maps; lines starting with `#` are comments.
fn demo_csv(name: &str) -> Rows {
    let path = repo(&format!("datasets/demo/{name}"));
    let mut r = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_path(&path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let h: Vec<String> = r
        .headers()
        .expect("header")
        .iter()
        .map(String::from)
        .collect();
    r.records()
        .map(|x| {
            let x = x.unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            h.iter().cloned().zip(x.iter().map(String::from)).collect()
        })
        .collect()
}

fn num(r: &BTreeMap<String, String>, c: &str) -> f64 {
    r[c].trim_end_matches('%')
        .parse()
        .unwrap_or_else(|_| panic!("{c}: {:?}", r[c]))
}

fn run_config() -> provisio::config::RunConfig {
    let path = repo("datasets/demo/run.toml");
    let text = std::fs::read_to_string(&path).expect("run.toml");
    provisio::config::RunConfig::parse("run.toml", &text).expect("run.toml parses")
}

/// Mean monthly consumption reported over the demo's last 12 months, all
/// sites together, per product (base units, as consumption.csv counts).
fn recent_monthly_consumption() -> HashMap<String, f64> {
    let rows = demo_csv("consumption.csv");
    let last = rows
        .iter()
        .map(|r| r["month"].clone())
        .max()
        .expect("months");
    let (y, m): (i32, i32) = (last[..4].parse().unwrap(), last[5..7].parse().unwrap());
    let first = {
        let k = y * 12 + m - 1 - 11;
        format!("{}-{:02}", k / 12, k % 12 + 1)
    };
    let mut sum: HashMap<String, f64> = HashMap::new();
    for r in rows
        .iter()
        .filter(|r| r["month"] >= first && !r["consumed"].is_empty())
    {
        *sum.entry(r["product"].clone()).or_default() += num(r, "consumed");
    }
    sum.into_iter().map(|(p, s)| (p, s / 12.0)).collect()
}

#[test]
fn pack_sizes_agree_between_the_run_configuration_and_the_stock_file() {
    let cfg = run_config();
    let stock = demo_csv("stock.csv");
    let mut compared = 0;
    for (product, settings) in &cfg.products {
        let Some(size) = settings.pack_size else {
            continue;
        };
        let row = stock
            .iter()
            .find(|r| &r["product"] == product)
            .unwrap_or_else(|| panic!("{product}: in run.toml but not in stock.csv"));
        assert_eq!(
            num(row, "pack_size"),
            size,
            "{product}: pack size {} in stock.csv, {size} in run.toml",
            row["pack_size"]
        );
        compared += 1;
    }
    assert!(compared >= 4, "only {compared} products compared");
}

#[test]
fn units_agree_between_the_configuration_population_and_consumption() {
    let cfg = run_config();
    // A morbidity row with one unit per course counts courses: the run
    // configuration must count the same (not the tablets of a course).
    for r in demo_csv("population.csv")
        .iter()
        .filter(|r| r["method"] == "morbidity")
    {
        let per_course = num(r, "quantity_per_course");
        if let Some(units) = cfg
            .products
            .get(&r["product"])
            .and_then(|p| p.units.clone())
        {
            if per_course == 1.0 {
                assert_eq!(
                    units, "course",
                    "{}: one unit per course in population.csv",
                    r["product"]
                );
            } else {
                assert_ne!(
                    units, "course",
                    "{}: {per_course} units per course",
                    r["product"]
                );
            }
        }
    }
    // Every stock count is between two weeks and two years of the recent
    // consumption: a stock file in other units (packs, tablets) is far off.
    let use_ = recent_monthly_consumption();
    for r in demo_csv("stock.csv") {
        let m = use_[&r["product"]];
        let months = num(&r, "stock_on_hand") / m;
        assert!(
            (0.5..=24.0).contains(&months),
            "{}: stock {} is {months:.1} months of consumption ({m:.0} a month)",
            r["product"],
            r["stock_on_hand"]
        );
    }
    for r in demo_csv("on_order.csv") {
        let m = use_[&r["product"]];
        let months = num(&r, "quantity") / m;
        assert!(
            (0.5..=24.0).contains(&months),
            "{}: shipment of {months:.1} months",
            r["product"]
        );
    }
    // Known changes in units a month are in the same units: a fraction to
    // a few times the recent consumption.
    for r in demo_csv("changes.csv") {
        if !["target-level", "quantity-per-month"].contains(&r["kind"].as_str()) {
            continue;
        }
        let m = use_[&r["product"]];
        let share = num(&r, "value") / m;
        assert!(
            (0.05..=3.0).contains(&share),
            "{}: {} is {share:.2} × a month's use",
            r["product"],
            r["kind"]
        );
    }
    // Services × units per service is the consumption's order of magnitude.
    let mut services: HashMap<String, f64> = HashMap::new();
    let mut months: HashMap<String, std::collections::BTreeSet<String>> = HashMap::new();
    for r in demo_csv("services.csv")
        .iter()
        .filter(|r| !r["services"].is_empty())
    {
        *services.entry(r["product"].clone()).or_default() +=
            num(r, "services") * num(r, "units_per_service");
        months
            .entry(r["product"].clone())
            .or_default()
            .insert(r["month"].clone());
    }
    for (p, total) in services {
        let per_month = total / months[&p].len() as f64;
        let ratio = per_month / use_[&p];
        assert!(
            (0.3..=3.0).contains(&ratio),
            "{p}: services imply {ratio:.2} × the consumption"
        );
    }
}

#[test]
fn the_demo_reads_without_a_note_on_every_run() {
    // Reporting rates carry their % sign, so reading the demo needs no
    // note that plain numbers were taken as percentages.
    let w = Workdir::new();
    let data = repo("datasets/demo/consumption.csv");
    let o = w.run(&["inspect", data.to_str().unwrap()]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(!t.contains("percentages"), "{t}");
    assert!(!t.contains("warning: reporting_rate"), "{t}");
}
