//! Property tests of the side tables a planner fills by hand — the stock
//! file, shipments on order, known changes, services and population data —
//! edited the way hand-kept files go wrong (stray quotes and delimiters,
//! numbers out of range, `NaN`, impossible months, cut lines, duplicated
//! lines, damaged bytes). The rule of the project, common practice for
//! input handling: bad input never panics; it is refused with an error
//! that names the file, or read into values that keep the reader's stated
//! promises. Seeds: the invented demo scenario's files (datasets/demo).

mod common;

use proptest::prelude::*;
use provisio::calendar::YearMonth;
use provisio::data::NumberFormat;

const FILES: [&str; 5] = [
    "stock.csv",
    "on_order.csv",
    "changes.csv",
    "services.csv",
    "population.csv",
];

/// Text a hand-kept file picks up.
const TOKENS: [&str; 20] = [
    "\"",
    ",",
    ";",
    "\t",
    "\n",
    "\r\n",
    "1e309",
    "-1",
    "NaN",
    "inf",
    "2027-13",
    "0000-00",
    "99999999999999999999",
    "0",
    "%",
    "1,5",
    "\u{200b}",
    "#",
    "  ",
    "Total",
];

#[derive(Debug, Clone)]
enum Edit {
    Insert(usize),
    Delete(usize),
    Byte(u8),
    DuplicateLine,
    Cut,
}

fn edit() -> impl Strategy<Value = (prop::sample::Index, Edit)> {
    (
        any::<prop::sample::Index>(),
        prop_oneof![
            (0..TOKENS.len()).prop_map(Edit::Insert),
            (1usize..20).prop_map(Edit::Delete),
            any::<u8>().prop_map(Edit::Byte),
            Just(Edit::DuplicateLine),
            Just(Edit::Cut),
        ],
    )
}

fn apply(mut b: Vec<u8>, edits: &[(prop::sample::Index, Edit)]) -> Vec<u8> {
    for (at, e) in edits {
        let at = at.index(b.len() + 1);
        match e {
            Edit::Insert(t) => {
                b.splice(at..at, TOKENS[*t].bytes());
            }
            Edit::Delete(n) => {
                let end = (at + n).min(b.len());
                b.drain(at.min(end)..end);
            }
            Edit::Byte(v) => {
                if at < b.len() {
                    b[at] = *v;
                }
            }
            Edit::DuplicateLine => common::duplicate_line_at(&mut b, at),
            Edit::Cut => b.truncate(at),
        }
    }
    b
}

fn demo(file: &str) -> Vec<u8> {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    std::fs::read(root.join("datasets/demo").join(file)).unwrap()
}

/// A flat forecast of 24 months from the demo's first projected month.
fn flat(start: YearMonth) -> provisio::plan::SeriesForecast {
    provisio::plan::SeriesForecast {
        start,
        months: vec![
            provisio::plan::ForecastMonth {
                point: 100.0,
                upper80: Some(130.0),
                upper95: Some(150.0),
            };
            24
        ],
    }
}

/// Checks one edited file; `Ok(true)` when it was read (and, for stock and
/// changes, planned or applied), `Ok(false)` when refused with its name.
fn check(which: usize, bytes: &[u8]) -> Result<bool, TestCaseError> {
    let file = FILES[which];
    let start = YearMonth::new(2026, 11).unwrap();
    let named = |e: &provisio::Error| -> Result<bool, TestCaseError> {
        let m = e.to_string();
        prop_assert!(m.contains(file), "the error does not name {}: {}", file, m);
        Ok(false)
    };
    match which {
        0 => match provisio::plan::read::read_stock(file, bytes, NumberFormat::Plain) {
            Err(e) => named(&e),
            Ok((rows, _)) => {
                let settings = provisio::plan::PlanSettings::default().check().unwrap();
                for r in rows {
                    let p = &r.policy;
                    // The stock file's stated ranges (plan::read::STOCK_COLUMNS).
                    prop_assert!(p.stock_on_hand.is_finite() && p.stock_on_hand >= 0.0);
                    prop_assert!(p.lead_time_months <= 36);
                    prop_assert!(p.min_months >= 0.0 && p.min_months <= p.max_months);
                    prop_assert!(p.max_months > 0.0 && p.max_months.is_finite());
                    prop_assert!(p.pack_size > 0.0 && p.pack_size.is_finite());
                    prop_assert!(p.unit_cost.is_finite() && p.unit_cost >= 0.0);
                    if let Ok(plan) = provisio::plan::plan_series(p, &flat(start), &[], &settings) {
                        for m in &plan.months {
                            prop_assert!(m.closing.is_finite() && m.closing >= 0.0, "{:?}", m);
                            prop_assert!(m.short.is_finite() && m.short >= 0.0, "{:?}", m);
                        }
                        for o in &plan.orders {
                            prop_assert!(o.quantity.is_finite() && o.quantity > 0.0, "{:?}", o);
                        }
                    }
                }
                Ok(true)
            }
        },
        1 => match provisio::plan::read::read_on_order(file, bytes, NumberFormat::Plain) {
            Err(e) => named(&e),
            Ok((rows, _)) => {
                for r in rows {
                    prop_assert!(r.arrival.quantity.is_finite() && r.arrival.quantity >= 0.0);
                }
                Ok(true)
            }
        },
        2 => match provisio::changes::read::read_changes_bytes(file, bytes, NumberFormat::Plain) {
            Err(e) => named(&e),
            Ok(cf) => {
                let products: std::collections::BTreeSet<String> =
                    cf.changes.iter().map(|c| c.product.clone()).collect();
                let base: Vec<(String, provisio::changes::Bands)> = products
                    .into_iter()
                    .map(|p| {
                        let mut b = provisio::changes::Bands::zero(start, 24);
                        b.point = vec![100.0; 24];
                        b.lower95 = vec![50.0; 24];
                        b.lower80 = vec![70.0; 24];
                        b.upper80 = vec![130.0; 24];
                        b.upper95 = vec![150.0; 24];
                        (p, b)
                    })
                    .collect();
                match provisio::changes::apply(file, &base, &cf.changes) {
                    Err(e) => named(&e),
                    Ok(_) => Ok(true),
                }
            }
        },
        _ => {
            let dir = tempfile::tempdir().unwrap();
            let path = dir.path().join(file);
            std::fs::write(&path, bytes).unwrap();
            let result = if which == 3 {
                provisio::crosscheck::read::read_services(&path, Some(start)).map(|_| ())
            } else {
                let cyp = provisio::crosscheck::cyp::usaid_2021();
                provisio::crosscheck::read::read_population(&path, &cyp).map(|_| ())
            };
            match result {
                Err(e) => named(&e),
                Ok(()) => Ok(true),
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig {
        cases: std::env::var("PROPTEST_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(200),
        ..ProptestConfig::default()
    })]

    #[test]
    fn hand_kept_side_tables_never_panic(
        which in 0..FILES.len(),
        edits in prop::collection::vec(edit(), 1..7),
    ) {
        let bytes = apply(demo(FILES[which]), &edits);
        check(which, &bytes)?;
    }
}

#[test]
fn the_unedited_demo_side_tables_are_read() {
    // The invented demo scenario's files are accepted whole: the property
    // above starts from files that read.
    for (which, file) in FILES.iter().enumerate() {
        assert!(check(which, &demo(file)).unwrap(), "{file}");
    }
}
